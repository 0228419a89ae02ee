"""The design space: what a builder chooses, as arrays the evaluator runs in one batch.

A design is a catalog magnet, a layout and its multiple k (Q = coils_per_unit x k coils,
2p = poles_per_unit x k poles), the ring's mean radius, a rotor disc, a wire, strands in hand, turns
per coil, parallel paths and star or delta. Catalog choices are stored as row indices into the loaded
catalogs; files and tables show the ids.
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass, fields
from pathlib import Path

import numpy as np

from .errors import InputError, Problem, did_you_mean

DESIGN_KEYS = ("magnet", "layout", "multiple", "ring_radius_mm", "disc", "wire", "strands", "turns",
               "parallel_paths", "connection", "coil_shape")
"""Keys of a design file, exactly (a contract with users' files and scripts)."""

OPTIONAL_KEYS = {"coil_shape": "rectangular"}
"""Design-file keys that may be left out, with the value an absent key means (files written before
the key existed keep their meaning)."""

CONNECTIONS = ("star", "delta")
COIL_SHAPES = ("rectangular", "keystone")
"""Coil shapes by code (0, 1), as `physics.geometry.COIL_SHAPES` (checked equal in the tests)."""


@dataclass(frozen=True)
class DesignBatch:
    """n designs as parallel arrays; catalog choices are row indices (0-based, file order)."""

    magnet: np.ndarray
    layout: np.ndarray
    multiple: np.ndarray
    ring_radius_m: np.ndarray
    disc: np.ndarray
    wire: np.ndarray
    strands: np.ndarray
    turns: np.ndarray
    parallel_paths: np.ndarray
    connection: np.ndarray  # 0 star, 1 delta
    coil_shape: np.ndarray = 0  # 0 rectangular, 1 keystone (COIL_SHAPES); absent: rectangular

    def __post_init__(self):
        for f in fields(self):
            dtype = float if f.name == "ring_radius_m" else np.int64
            object.__setattr__(self, f.name, np.atleast_1d(np.asarray(getattr(self, f.name), dtype=dtype)))
        if self.coil_shape.shape != self.magnet.shape:  # the default (or a scalar): one per design
            object.__setattr__(self, "coil_shape", np.broadcast_to(self.coil_shape, self.magnet.shape).copy())

    def __len__(self):
        return len(self.magnet)

    def take(self, index) -> "DesignBatch":
        """The designs at `index` (an integer array or a boolean mask)."""
        return DesignBatch(**{f.name: getattr(self, f.name)[index] for f in fields(self)})

    def as_matrix(self) -> np.ndarray:
        """(n, 11) float matrix, one column per field in declaration order: a hashable row key."""
        return np.column_stack([getattr(self, f.name).astype(float) for f in fields(self)])

    @classmethod
    def from_matrix(cls, matrix) -> "DesignBatch":
        """Designs from `as_matrix` rows; a matrix of a run made before the coil shape existed has
        10 columns, and its designs are rectangular."""
        matrix = np.asarray(matrix, dtype=float)
        return cls(**{f.name: matrix[:, i] if f.name == "ring_radius_m" else np.rint(matrix[:, i])
                      for i, f in enumerate(fields(cls)) if i < matrix.shape[1]})

    def records(self, catalogs) -> list[dict]:
        """Designs as design-file dictionaries (ids and mm), for tables, CSV and design files."""
        m, lay, d, w = (catalogs.magnets["id"].to_numpy(), catalogs.layouts["id"].to_numpy(),
                        catalogs.discs["id"].to_numpy(), catalogs.wires["id"].to_numpy())
        return [
            {"magnet": str(m[self.magnet[i]]), "layout": str(lay[self.layout[i]]),
             "multiple": int(self.multiple[i]), "ring_radius_mm": round(float(self.ring_radius_m[i]) * 1e3, 6),
             "disc": str(d[self.disc[i]]), "wire": str(w[self.wire[i]]), "strands": int(self.strands[i]),
             "turns": int(self.turns[i]), "parallel_paths": int(self.parallel_paths[i]),
             "connection": CONNECTIONS[int(self.connection[i])],
             "coil_shape": COIL_SHAPES[int(self.coil_shape[i])]}
            for i in range(len(self))
        ]


def design_toml(record: dict) -> str:
    """A design file's text for one design record (the keys of DESIGN_KEYS)."""
    lines = []
    for key in DESIGN_KEYS:
        value = record[key]
        lines.append(f'{key} = "{_toml_escape(value)}"' if isinstance(value, str) else f"{key} = {value}")
    return "\n".join(lines) + "\n"


def _toml_escape(text: str) -> str:
    return text.replace("\\", "\\\\").replace('"', '\\"')


def _key_lines(text: str) -> dict[str, int]:
    """Line number (1-based) where each top-level key is set, so problems can point at it."""
    found = {}
    for number, line in enumerate(text.splitlines(), start=1):
        match = re.match(r"\s*([A-Za-z0-9_\-]+)\s*=", line)
        if match and match.group(1) not in found:
            found[match.group(1)] = number
    return found


def _non_finite(value, where=""):
    """"" (or "element i of ... ") when `value`, or a number inside its lists and tables, is NaN or
    infinite; None when every number in it is finite."""
    if isinstance(value, float) and not math.isfinite(value):
        return where
    if isinstance(value, list):
        for i, item in enumerate(value, start=1):
            found = _non_finite(item, f"{where}element {i}: ")
            if found is not None:
                return found
    if isinstance(value, dict):
        for name, item in value.items():
            found = _non_finite(item, f"{where}{name}: ")
            if found is not None:
                return found
    return None


def _non_finite_value(value):
    """The first NaN or infinite number inside `value` (see `_non_finite`)."""
    if isinstance(value, float):
        return value
    items = value.values() if isinstance(value, dict) else value
    return next(_non_finite_value(v) for v in items if _non_finite(v) is not None)


def load_design(path, catalogs, winding_problem=None) -> DesignBatch:
    """Read a design file (TOML with exactly DESIGN_KEYS) into a batch of one, checking everything.

    `winding_problem(layout_row, multiple, parallel_paths)` may return (key, message) when the
    winding cannot be built (the evaluator's `WindingTable.problem`). Raises InputError listing
    every problem at once (file, line, key, what is wrong, what is allowed).
    """
    path = Path(path)
    name = str(path)
    if not path.is_file():
        raise InputError([Problem(name, None, None, "design file not found")])
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError([Problem(name, None, None, f"cannot read the design file: {exc}")]) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError([Problem(name, None, None, f"not valid TOML: {exc}")]) from None
    lines = _key_lines(text)
    problems = []

    def bad(key, message):
        problems.append(Problem(name, lines.get(key), key, message, "line", "key"))

    for key in data:
        if key not in DESIGN_KEYS:
            bad(key, "unknown key; " + did_you_mean(key, DESIGN_KEYS))
    required = [key for key in DESIGN_KEYS if key not in OPTIONAL_KEYS]
    for key in required:
        if key not in data:
            problems.append(Problem(name, None, key, f"missing key (a design file sets all of "
                                                     f"{', '.join(required)})", "line", "key"))

    for key in [k for k in data if k in DESIGN_KEYS]:  # TOML allows nan and inf; no design key means either
        where = _non_finite(data[key])
        if where is not None:
            bad(key, f"{where}must be a finite number (got {_non_finite_value(data[key])!r})")
            del data[key]  # (reported once: no range or type check on it)

    index = {}
    for key, table in (("magnet", catalogs.magnets), ("layout", catalogs.layouts),
                       ("disc", catalogs.discs), ("wire", catalogs.wires)):
        if key in data:
            ids = [str(v) for v in table["id"]]
            value = str(data[key])
            if value in ids:
                index[key] = ids.index(value)
            else:
                bad(key, f"'{value}' is not in {catalogs.files[key + 's'].name}; " + did_you_mean(value, ids))

    def integer(key, low, high=None):
        value = data.get(key)
        if value is None:
            return None
        if not isinstance(value, int) or isinstance(value, bool):
            bad(key, f"must be a whole number (got {value!r})")
            return None
        if value < low or (high is not None and value > high):
            bad(key, f"must be between {low} and {high} (got {value})" if high is not None
                else f"must be at least {low} (got {value})")
            return None
        return value

    multiple = integer("multiple", 1)
    if multiple is not None and "layout" in index:
        row = catalogs.layouts.iloc[index["layout"]]
        if not row["min_multiple"] <= multiple <= row["max_multiple"]:
            bad("multiple", f"layout '{row['id']}' allows multiples {int(row['min_multiple'])} to "
                            f"{int(row['max_multiple'])} (got {multiple})")
    strands = integer("strands", 1, 64)
    turns = integer("turns", 1, 5000)
    paths = integer("parallel_paths", 1, 64)
    radius = data.get("ring_radius_mm")
    if radius is not None and (isinstance(radius, bool) or not isinstance(radius, (int, float))
                               or not 10.0 <= radius <= 2000.0):
        bad("ring_radius_mm", f"must be a number of millimetres between 10 and 2000 (got {radius!r})")
    connection = data.get("connection")
    if connection is not None and connection not in CONNECTIONS:
        bad("connection", f"must be \"star\" or \"delta\" (got {connection!r})")
    shape = data.get("coil_shape", OPTIONAL_KEYS["coil_shape"])
    if shape not in COIL_SHAPES:
        bad("coil_shape", f"must be \"rectangular\" or \"keystone\" (got {shape!r})")
    if winding_problem is not None and None not in (multiple, paths) and "layout" in index:
        found = winding_problem(index["layout"], multiple, paths)
        if found:
            bad(*found)
    if problems:
        raise InputError(problems)
    return DesignBatch(magnet=index["magnet"], layout=index["layout"], multiple=multiple,
                       ring_radius_m=float(radius) / 1e3, disc=index["disc"], wire=index["wire"],
                       strands=strands, turns=turns, parallel_paths=paths,
                       connection=CONNECTIONS.index(connection), coil_shape=COIL_SHAPES.index(shape))
