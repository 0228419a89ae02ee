"""Load the four part catalogs (magnets, wires, layouts, discs) from plain CSV files.

One row per stock item; units in the column names (``length_mm``). Any ``_mm`` column may be given
in inches instead (``length_in``); if both are present they must agree. Lines starting with ``#``
are comments. Exports from spreadsheets are accepted as they come: UTF-8 with or without a byte-order
mark, comma-separated, or semicolon-separated with decimal commas. Everything is converted to SI once
here, so the rest of the program never sees millimetres or inches.

All problems of all four files are collected and raised together as one ``InputError``.
"""
from __future__ import annotations

import csv
import hashlib
import io
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import pandas as pd

from . import tables
from .errors import InputError, Problem, did_you_mean

__all__ = ["Catalogs", "load_catalogs", "catalog_summary", "CATALOG_NAMES"]

MM_PER_IN = 25.4
LENGTH_AGREEMENT = 0.005  # mm and inch columns on the same row must agree to 0.5 %


@dataclass(frozen=True)
class Col:
    """One output column: how it is read, its default and the range a real part falls in."""

    name: str                   # output name (SI)
    kind: str                   # "text", "number", "integer", "length" (mm or in -> m), "choice"
    required: bool = True
    default: object = None      # used when the cell or the column is blank/absent
    lo: float | None = None     # sanity range in the file's unit (mm for lengths)
    hi: float | None = None
    unit: str = ""
    positive: bool = False      # report "must be > 0" before the range
    parse: Callable[[str], object] | None = None  # for kind "choice": text -> value or ValueError

    @property
    def base(self) -> str:
        return self.name[:-2] if self.kind == "length" else self.name

    def headers(self) -> list[str]:
        return [f"{self.base}_mm", f"{self.base}_in"] if self.kind == "length" else [self.name]


def _standard(text: str) -> str:
    t = text.strip()
    for s in ("AWG", "metric"):
        if t.lower() == s.lower():
            return s
    raise ValueError(f"unknown standard '{text}'; allowed: AWG, metric")


def _grade(text: str) -> str:
    tables.parse_grade(text)
    return text.strip().upper()


_PRICE = dict(kind="number", lo=0.0, hi=1e5, unit="")
SCHEMAS: dict[str, list[Col]] = {
    "magnets": [
        Col("id", "text"),
        Col("length_m", "length", lo=1, hi=200, unit="mm", positive=True),
        Col("width_m", "length", lo=1, hi=200, unit="mm", positive=True),
        Col("thickness_m", "length", lo=1, hi=200, unit="mm", positive=True),
        Col("grade", "choice", parse=_grade),
        Col("remanence_T", "number", required=False, lo=0.2, hi=1.6, unit="T", positive=True),
        Col("max_temp_C", "number", required=False, lo=20, hi=350, unit="C"),
        Col("recoil_permeability", "number", required=False, default=1.05, lo=1.0, hi=1.3),
        Col("br_temp_coeff_per_K", "number", required=False, default=-0.0012, lo=-0.003,
            hi=-0.0003, unit="/K"),
        Col("price_each", **_PRICE),
        Col("note", "text", required=False, default=""),
    ],
    "wires": [
        Col("id", "text"),
        Col("standard", "choice", parse=_standard),
        Col("bare_diameter_m", "length", lo=0.05, hi=6, unit="mm", positive=True),
        Col("overall_diameter_m", "length", required=False, lo=0.05, hi=6, unit="mm",
            positive=True),
        Col("enamel_grade", "integer", required=False, lo=1, hi=3),
        Col("thermal_class_C", "choice", parse=tables.parse_thermal_class),
        Col("price_per_kg", **_PRICE),
        Col("note", "text", required=False, default=""),
    ],
    "layouts": [
        Col("id", "text"),
        Col("coils_per_unit", "integer", lo=3, hi=60, positive=True),
        Col("poles_per_unit", "integer", lo=2, hi=100, positive=True),
        Col("min_multiple", "integer", lo=1, hi=50, positive=True),
        Col("max_multiple", "integer", lo=1, hi=50, positive=True),
        Col("note", "text", required=False, default=""),
    ],
    "discs": [
        Col("id", "text"),
        Col("diameter_m", "length", lo=50, hi=1500, unit="mm", positive=True),
        Col("thickness_m", "length", lo=1, hi=50, unit="mm", positive=True),
        Col("price_each", **_PRICE),
        Col("note", "text", required=False, default=""),
    ],
}
# the file column for thermal class is `thermal_class` (letter or degrees), stored as degrees C
_HEADER_ALIAS = {"thermal_class": "thermal_class_C"}
CATALOG_NAMES = tuple(SCHEMAS)
# columns kept only while loading (turned into others), not part of the Catalogs interface
_INTERNAL = {"wires": {"enamel_grade"}}


@dataclass(frozen=True)
class Catalogs:
    """The four catalogs as DataFrames in SI (index 0..n-1 in file order), plus provenance."""

    magnets: pd.DataFrame
    wires: pd.DataFrame
    layouts: pd.DataFrame
    discs: pd.DataFrame
    directory: Path
    files: dict[str, Path] = field(default_factory=dict)   # catalog name -> file
    hashes: dict[str, str] = field(default_factory=dict)   # catalog name -> sha256 of the bytes


def load_catalogs(directory) -> Catalogs:
    """Read ``magnets.csv``, ``wires.csv``, ``layouts.csv`` and ``discs.csv`` from ``directory``.

    Raises InputError listing every problem found in any of the files.
    """
    directory = Path(directory)
    if not directory.is_dir():
        raise InputError([Problem(str(directory), None, None, "folder not found; expected a "
                                  "folder with " + ", ".join(f"{n}.csv" for n in CATALOG_NAMES))])
    frames, files, hashes, problems = {}, {}, {}, []
    for name in CATALOG_NAMES:
        path = directory / f"{name}.csv"
        files[name] = path
        if not path.is_file():
            problems.append(Problem(str(path), None, None, "file not found; expected a CSV with "
                                    "columns " + ", ".join(_file_headers(name))))
            continue
        data = path.read_bytes()
        hashes[name] = hashlib.sha256(data).hexdigest()
        frame, found = _read_catalog(name, str(path), data)
        frames[name] = frame
        problems += found
    if problems:
        raise InputError(problems)
    return Catalogs(directory=directory, files=files, hashes=hashes, **frames)


def _file_headers(name: str) -> list[str]:
    inverse = {v: k for k, v in _HEADER_ALIAS.items()}
    return [inverse.get(c.name, c.headers()[0]) for c in SCHEMAS[name]]


def _read_catalog(name: str, file: str, data: bytes) -> tuple[pd.DataFrame | None, list[Problem]]:
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        return None, [Problem(file, None, None, f"not UTF-8 text ({exc.reason} at byte "
                              f"{exc.start}); save it from the spreadsheet as 'CSV UTF-8'")]
    nul = text.find("\x00")
    if nul >= 0:
        return None, [Problem(file, text.count("\n", 0, nul) + 1, None, "holds a NUL byte: not a text "
                              "CSV; save it from the spreadsheet as 'CSV UTF-8'")]
    lines = _Lines(text)
    first = lines.first_line()
    if first is None:
        return None, [Problem(file, None, None, "file is empty; expected a header line with "
                              "columns " + ", ".join(_file_headers(name)))]
    semicolon = first.count(";") > first.count(",")
    delim = ";" if semicolon else ","
    schema = SCHEMAS[name]
    problems: list[Problem] = []
    records, rows, header_row = [], [], None
    try:
        found = lines.records(delim)
        header_row, header = next(found)
        header = [h.strip() for h in header]
        while header and header[-1] == "":  # spreadsheets pad rows with empty trailing columns
            header.pop()
        columns = _match_header(file, header_row, header, schema, problems)
        if problems:  # a bad header: its problems alone
            next(found, None)  # (only to learn whether any row follows it)
            found = ()
        for row, cells in found:
            cells = [c.strip() for c in cells]
            while len(cells) > len(header) and cells[-1] == "":
                cells.pop()
            if not any(cells):  # a row of bare delimiters left by a spreadsheet
                continue
            if len(cells) > len(header):
                problems.append(Problem(file, row, None, f"has {len(cells)} values but the header has "
                                        f"{len(header)} columns; is there a stray '{delim}'?"))
                continue
            cells += [""] * (len(header) - len(cells))
            raw = dict(zip(header, cells))
            rec = {c.name: _read_cell(file, row, c, raw, columns, semicolon, problems) for c in schema}
            records.append(rec)
            rows.append(row)
    except csv.Error as exc:
        problems.append(Problem(file, lines.start, None, f"not readable as CSV ({exc})"))
    if lines.start == header_row:  # nothing but the header
        problems.append(Problem(file, None, None, f"no data rows below the header (row "
                                f"{header_row}); add one row per stock item"))
    _check_rows(name, file, records, rows, problems)
    if problems:
        return None, problems
    keep = [c.name for c in schema if c.name not in _INTERNAL.get(name, ())]
    frame = pd.DataFrame.from_records(records, columns=[c.name for c in schema])[keep]
    for c in schema:
        if c.kind == "integer" and c.name in keep:
            frame[c.name] = frame[c.name].astype("int64")
    return frame.reset_index(drop=True), []


class _Lines:
    """The physical lines of a CSV text for csv.reader, and the line each record starts on.

    Lines end only at \\n, \\r\\n or \\r (a U+2028 in a cell is text, as in every spreadsheet); a
    quoted cell may span lines (RFC 4180); blank and '#' comment lines are skipped only where a
    record would start, never inside a quoted cell.
    """

    def __init__(self, text):
        self._text = text
        self._lines = enumerate(io.StringIO(text, newline=""), start=1)
        self.start = None
        self._between = True

    def first_line(self):
        """The first line that is neither blank nor a comment (the header), or None."""
        for line in io.StringIO(self._text, newline=""):
            if line.strip() and not line.lstrip().startswith("#"):
                return line
        return None

    def __iter__(self):
        return self

    def __next__(self):
        for number, line in self._lines:
            if self._between:
                if not line.strip() or line.lstrip().startswith("#"):
                    continue
                self.start, self._between = number, False
            return line
        raise StopIteration

    def records(self, delimiter):
        """(starting line, cells) of each record (csv.reader reads no line ahead of a record)."""
        for cells in csv.reader(self, delimiter=delimiter):
            self._between = True
            yield self.start, cells


def _match_header(file, row, header, schema, problems) -> dict[str, list[str]]:
    """Map each output column to the file headers that supply it; report unknown/missing ones."""
    known = {_HEADER_ALIAS.get(h, h): h for h in header}
    allowed = [h for c in schema for h in c.headers()]
    allowed = [{v: k for k, v in _HEADER_ALIAS.items()}.get(h, h) for h in allowed]
    seen = set()
    for h in header:
        if h in seen:
            problems.append(Problem(file, row, h, "column appears twice; keep one"))
        seen.add(h)
        if h not in allowed:
            problems.append(Problem(file, row, h or "(blank)", "unknown column; "
                                    + did_you_mean(h, allowed)))
    columns = {}
    for c in schema:
        present = [known[h] for h in c.headers() if h in known]
        if c.required and not present:
            want = " or ".join(c.headers()) if c.kind == "length" else \
                {v: k for k, v in _HEADER_ALIAS.items()}.get(c.name, c.name)
            problems.append(Problem(file, row, want, "missing required column"))
        columns[c.name] = present
    return columns


def _read_cell(file, row, c: Col, raw, columns, semicolon, problems):
    """Parse one output value from its cell(s); append problems; return the SI value or None."""
    values = []
    for header in columns[c.name]:
        text = raw.get(header, "")
        if text == "":
            continue
        if c.kind in ("text", "choice"):
            if c.kind == "text":
                if c.name == "id" and not text.isprintable():
                    problems.append(Problem(file, row, header, f"must be one line of printable text "
                                            f"(got {text!r}): ids go into design files and commands"))
                    return None
                return text
            try:
                return c.parse(text)
            except ValueError as exc:
                problems.append(Problem(file, row, header, str(exc)))
                return None
        value = _number(text, semicolon)
        unit = "in" if header.endswith("_in") else c.unit
        if value is None:
            problems.append(Problem(file, row, header, f"not a number: '{text}' (expected a "
                                    f"number{' in ' + unit if unit else ''}, e.g. 40 or 12.5)"))
            return None
        if c.kind == "integer" and value != int(value):
            problems.append(Problem(file, row, header, f"must be a whole number (got {text})"))
            return None
        shown = f"{text} in = {value * MM_PER_IN:g} mm" if unit == "in" else f"{text}"
        if unit == "in":
            value *= MM_PER_IN
        if c.positive and value <= 0:
            problems.append(Problem(file, row, header,
                                    f"must be > 0 {c.unit}".rstrip() + f" (got {shown})"))
            return None
        if (c.lo is not None and value < c.lo) or (c.hi is not None and value > c.hi):
            hint = "; check the unit (mm or in)" if c.kind == "length" else ""
            problems.append(Problem(file, row, header, f"must be between {c.lo:g} and {c.hi:g}"
                                    f" {c.unit}".rstrip() + f" (got {shown}){hint}"))
            return None
        values.append((header, value))
    if not values:
        if c.required:
            problems.append(Problem(file, row, columns[c.name][0] if columns[c.name] else c.name,
                                    "is blank; a value is required"))
        return c.default
    if len(values) == 2 and abs(values[0][1] - values[1][1]) > LENGTH_AGREEMENT * values[0][1]:
        (h_mm, mm), (h_in, inch) = values
        problems.append(Problem(file, row, h_in, f"disagrees with {h_mm}: {inch:g} mm from inches "
                                f"vs {mm:g} mm (must agree within 0.5 %; keep one of the two)"))
        return None
    value = values[0][1]
    if c.kind == "length":
        return value * 1e-3
    return int(value) if c.kind == "integer" else value


def _number(text: str, decimal_comma: bool) -> float | None:
    if decimal_comma:
        text = text.replace(",", ".")
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


def _check_rows(name, file, records, rows, problems):
    """Checks that involve more than one cell: duplicate ids, defaults from tables, consistency."""
    first = {}
    for rec, row in zip(records, rows):
        if rec["id"] is not None:
            if rec["id"] in first:
                problems.append(Problem(file, row, "id", f"duplicate id '{rec['id']}' (first used "
                                        f"on row {first[rec['id']]}); ids must be unique"))
            first.setdefault(rec["id"], row)
        {"magnets": _magnet, "wires": _wire, "layouts": _layout}.get(name, lambda *a: None)(
            file, row, rec, problems)


def _magnet(file, row, rec, problems):
    if rec["grade"] is None:
        return
    if rec["remanence_T"] is None:
        rec["remanence_T"] = tables.grade_remanence_T(rec["grade"])
    if rec["max_temp_C"] is None:
        rec["max_temp_C"] = tables.grade_max_temp_C(rec["grade"])


def _wire(file, row, rec, problems):
    bare, overall, grade = rec["bare_diameter_m"], rec["overall_diameter_m"], rec["enamel_grade"]
    if bare is None:
        return
    if rec["standard"] == "AWG":
        n, err = tables.nearest_awg(bare)
        if abs(err) > 0.01:
            problems.append(Problem(file, row, "bare_diameter_mm", f"{bare * 1e3:g} mm is not an "
                                    f"AWG size (nearest: AWG {n} = "
                                    f"{float(tables.awg_diameter_m(n)) * 1e3:.3f} mm, ASTM B258)"))
    if overall is None:
        if grade is None:
            problems.append(Problem(file, row, "overall_diameter_mm", "is blank; give the overall "
                                    "(enamelled) diameter or an enamel_grade of 1, 2 or 3"))
            return
        rec["overall_diameter_m"] = float(tables.enamel_max_overall_diameter_m(bare, grade))
    elif not 0 < overall - bare <= 0.3e-3:
        problems.append(Problem(file, row, "overall_diameter_mm", f"must be larger than the bare "
                                f"diameter by up to 0.3 mm of enamel (got {overall * 1e3:g} mm "
                                f"over {bare * 1e3:g} mm bare)"))


def _layout(file, row, rec, problems):
    coils, poles = rec["coils_per_unit"], rec["poles_per_unit"]
    if coils is not None and coils % 3:
        problems.append(Problem(file, row, "coils_per_unit", f"must be a multiple of 3 for three "
                                f"phases (got {coils})"))
    if poles is not None and poles % 2:
        problems.append(Problem(file, row, "poles_per_unit", f"must be even: poles come in N/S "
                                f"pairs (got {poles})"))
    if coils is not None and poles is not None and not coils % 3 and not poles % 2:
        # Q = coils x k coils under p = poles/2 x k pole pairs balance in three phases iff 3 divides
        # Q / gcd(Q, p) (physics/winding.star_of_slots); that ratio does not depend on k, so a
        # layout balances at every multiple or at none.
        spokes = coils // math.gcd(coils, poles // 2)
        if spokes % 3:
            why = ("coils = poles, so every coil is in or against phase with every other"
                   if coils == poles else f"coils / gcd(coils, poles/2) = {spokes}, not a multiple of 3: "
                   "no three phases 120 electrical degrees apart")
            problems.append(Problem(file, row, "poles_per_unit", f"{coils} coils / {poles} poles gives no "
                                    f"balanced three-phase winding at any multiple ({why}); e.g. 3 coils "
                                    "per 2 or 4 poles do"))
    lo, hi = rec["min_multiple"], rec["max_multiple"]
    if lo is not None and hi is not None and hi < lo:
        problems.append(Problem(file, row, "max_multiple", f"must be >= min_multiple ({lo}) "
                                f"(got {hi})"))


def catalog_summary(cat: Catalogs) -> list[dict]:
    """Per catalog: file, row count, sha256 and (min, max) of each numeric column in SI."""
    out = []
    for name in CATALOG_NAMES:
        frame = getattr(cat, name)
        ranges = {col: [float(frame[col].min()), float(frame[col].max())]
                  for col in frame.columns if pd.api.types.is_numeric_dtype(frame[col])}
        kinds = {col: sorted(map(str, frame[col].unique()))
                 for col in ("grade", "standard") if col in frame.columns}
        out.append({"catalog": name, "file": str(cat.files[name]), "rows": len(frame),
                    "sha256": cat.hashes[name], "ranges": ranges, "kinds": kinds})
    return out
