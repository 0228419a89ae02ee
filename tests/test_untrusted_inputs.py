"""Unusual and adversarial inputs: NaN and infinity, impossible profiles, layouts with no balanced
winding, CSV cells spanning lines, line separators and NUL bytes, and strict JSON output.

Outside references: TOML 1.0 (nan and inf are valid float literals, so the loader must refuse them
itself); RFC 8259 (JSON has no NaN or Infinity: Python's json parser with parse_constant refusing
them is the oracle); RFC 4180 (a quoted field may hold line breaks); Unicode's U+2028 LINE SEPARATOR
is not a CSV record break (Python's csv module and spreadsheets keep it inside the cell); the
balance condition of a three-phase fractional-slot winding (Bianchi and Dai Pre 2006, star of slots,
from memory) cross-checked against this project's own star-of-slots construction.
"""

import json
import math

import pytest

from optimiser.catalogs import load_catalogs
from optimiser.cli import app
from optimiser.design import load_design
from optimiser.errors import InputError
from optimiser.physics.winding import WindingError, star_of_slots
from optimiser.scenario import FIELDS, load_scenario

FLOAT_KEYS = [f.key for f in FIELDS if f.kind is float]
FLOAT_LISTS = [f.key for f in FIELDS if f.kind is tuple and f.item is float]


def _problems(call, *args):
    with pytest.raises(InputError) as info:
        call(*args)
    return info.value.problems


@pytest.mark.parametrize("literal", ["nan", "inf", "-inf"])
def test_every_float_key_refuses_nan_and_infinity(tmp_path, literal):
    # One file with every float key set to the literal: each key named, with its line, at once.
    path = tmp_path / "boat.toml"
    path.write_text("".join(f"{key} = {literal}\n" for key in FLOAT_KEYS), encoding="utf-8")
    found = {p.column: p for p in _problems(load_scenario, path)}
    assert set(FLOAT_KEYS) <= set(found)
    for line, key in enumerate(FLOAT_KEYS, start=1):
        assert found[key].row == line and "finite number" in found[key].message


@pytest.mark.parametrize("key", FLOAT_LISTS)
def test_every_float_list_refuses_nan_in_an_element(tmp_path, key):
    path = tmp_path / "boat.toml"
    path.write_text(f"{key} = [4.0, nan, 6.0, 7.0]\n", encoding="utf-8")
    (p,) = _problems(load_scenario, path)
    assert p.column == key and p.row == 1 and "finite number" in p.message


@pytest.mark.parametrize("hours, words", [("[0, 0, 0, 0]", "no hours at all"),
                                          ("[24, 24, 24, 24]", "adds up to 96 h")])
def test_profile_hours_must_fit_in_a_day(tmp_path, hours, words):
    path = tmp_path / "boat.toml"
    path.write_text(f"profile_hours_per_day = {hours}\n", encoding="utf-8")
    (p,) = _problems(load_scenario, path)
    assert p.column == "profile_hours_per_day" and words in p.message


@pytest.mark.parametrize("literal", ["nan", "inf"])
def test_design_file_refuses_a_non_finite_ring(tmp_path, demo_catalogs_dir, literal):
    cat = load_catalogs(demo_catalogs_dir)
    path = tmp_path / "d.toml"
    path.write_text(_design(cat, ring=literal), encoding="utf-8")
    (p,) = _problems(load_design, path, cat)
    assert p.column == "ring_radius_mm" and p.row == 4


DESIGN_KEYS_IN_ORDER = ("magnet", "layout", "multiple", "ring_radius_mm", "disc", "wire", "strands", "turns",
                       "parallel_paths", "connection")


@pytest.mark.parametrize("form", ["{}", "[1.0, {}]", "[[2.0], [{}]]", "{{ a = 1.0, b = {} }}"],
                         ids=["value", "list element", "nested list", "inline table"])
@pytest.mark.parametrize("literal", ["nan", "inf", "-inf", "+nan"])
@pytest.mark.parametrize("key", DESIGN_KEYS_IN_ORDER)
def test_design_file_refuses_nan_and_infinity_for_every_key(tmp_path, demo_catalogs_dir, key, literal, form):
    # TOML 1.0 allows nan and inf, alone or inside arrays and tables: the key and its line are named.
    cat = demo_catalogs(demo_catalogs_dir)
    lines = _design(cat).splitlines()
    number = DESIGN_KEYS_IN_ORDER.index(key) + 1
    assert lines[number - 1].startswith(f"{key} =")
    lines[number - 1] = f"{key} = {form.format(literal)}"
    path = tmp_path / "d.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    (p,) = _problems(load_design, path, cat)
    assert (p.file, p.row, p.column) == (str(path), number, key)
    assert "must be a finite number" in p.message and literal.lstrip("+-") in p.message
    if form != "{}":
        assert "element" in p.message or "b:" in p.message


@pytest.mark.parametrize("key", ["turns", "ring_radius_mm", "layout"])
def test_evaluate_refuses_a_non_finite_design_value_with_exit_2(tmp_path, demo_catalogs_dir, runner, key):
    cat = demo_catalogs(demo_catalogs_dir)
    number = DESIGN_KEYS_IN_ORDER.index(key) + 1
    lines = _design(cat).splitlines()
    lines[number - 1] = f"{key} = [60, inf]"
    path = tmp_path / "d.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = runner.invoke(app, ["evaluate", "--design", str(path)])
    assert result.exit_code == 2
    assert result.stderr.strip().splitlines() == [
        f"{path}: line {number}, key {key}: element 2: must be a finite number (got inf)", "1 problem found."]


_CATALOGS = {}


def demo_catalogs(directory):
    """The demo catalogs, read once for the many parametrised cases."""
    if directory not in _CATALOGS:
        _CATALOGS[directory] = load_catalogs(directory)
    return _CATALOGS[directory]


def _design(cat, ring="100"):
    return (f'magnet = "{cat.magnets["id"][0]}"\nlayout = "{cat.layouts["id"][0]}"\n'
            f'multiple = {int(cat.layouts["min_multiple"][0])}\nring_radius_mm = {ring}\n'
            f'disc = "{cat.discs["id"][0]}"\nwire = "{cat.wires["id"][0]}"\nstrands = 1\nturns = 60\n'
            'parallel_paths = 1\nconnection = "star"\n')


def test_strict_json_turns_every_non_finite_number_into_null(strict_json):
    import numpy as np

    from optimiser.strict_json import dumps

    obj = {"a": float("nan"), "b": [np.inf, -np.inf, np.float32("nan"), 1.5], "c": np.array([np.nan, 2.0]),
           "d": (np.int64(3), np.bool_(True)), "e": {"f": np.float64("-inf")}}
    assert strict_json(dumps(obj)) == {"a": None, "b": [None, None, None, 1.5], "c": [None, 2.0],
                                       "d": [3, True], "e": {"f": None}}
    with pytest.raises(TypeError):  # not JSON at all: refused, never written as something else
        dumps({"x": object()})


def test_every_json_the_package_writes_goes_through_the_strict_helper():
    # RFC 8259 output is promised everywhere: a bare json.dumps anywhere else would write NaN.
    from pathlib import Path

    root = Path(__file__).resolve().parents[1] / "optimiser"
    offenders = [str(p.relative_to(root)) for p in root.rglob("*.py")
                 if p.name != "strict_json.py" and ("json.dumps(" in p.read_text(encoding="utf-8")
                                                    or "json.dump(" in p.read_text(encoding="utf-8"))]
    assert offenders == []


@pytest.mark.parametrize("broken", [False, True])
def test_catalogs_check_json_is_strict(catalog_copy, runner, strict_json, broken):
    if broken:
        _note_cell(catalog_copy, "fine").write_text("id,diameter_mm,thickness_mm,price_each\nd1,nan,8,30\n")
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy), "--json"])
    report = strict_json(result.stdout)
    assert result.exit_code == (2 if broken else 0) and report["ok"] is (not broken)
    if broken:
        assert [p["column"] for p in report["problems"]] == ["diameter_mm"]


@pytest.mark.parametrize("boat", ["", "propeller_diameter_mm = 406\n"], ids=["demo", "propeller"])
def test_evaluate_json_is_strict_for_a_design_that_cannot_be_built(tmp_path, demo_catalogs_dir, runner,
                                                                   strict_json, boat):
    # A 10 mm ring: the validator accepts it (it is a number in range); the magnets overlap, so
    # there is no field, EMF or current: null in JSON, "-" in the table, and the reasons listed.
    # A design that does not work still exits 0 (its "feasible" and problems say so).
    cat = load_catalogs(demo_catalogs_dir)
    path = tmp_path / "d.toml"
    path.write_text(_design(cat, ring="10"), encoding="utf-8")
    scenario = tmp_path / "boat.toml"
    scenario.write_text(boat, encoding="utf-8")
    args = ["evaluate", "--design", str(path), "--scenario", str(scenario)]
    result = runner.invoke(app, [*args, "--json"])
    assert result.exit_code == 0, result.output
    report = strict_json(result.stdout)
    assert report["cut_in_rpm"] is None and report["feasible"] is False and report["problems"]
    if boat:
        assert report["sailing_profile"] and report["amp_hours_per_day"] is None or \
            math.isfinite(report["amp_hours_per_day"])
    text = runner.invoke(app, args)
    assert text.exit_code == 0 and "nan" not in text.stdout.lower() and "does not work" in text.stdout
    assert "inf" not in text.stdout.lower().replace("info", "")



# --- catalogs -------------------------------------------------------------------------------------
def _layouts(catalog_copy, rows):
    (catalog_copy / "layouts.csv").write_text(
        "id,coils_per_unit,poles_per_unit,min_multiple,max_multiple,note\n"
        + "".join(f"{c}:{p},{c},{p},1,4,\n" for c, p in rows), encoding="utf-8")


@pytest.mark.parametrize("coils, poles", [(3, 6), (6, 6), (12, 12), (3, 12), (9, 18)])
def test_a_layout_with_no_balanced_winding_is_refused_by_catalogs_check(catalog_copy, runner, coils, poles):
    _layouts(catalog_copy, [(3, 4), (coils, poles)])
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy)])
    assert result.exit_code == 2
    (line,) = [ln for ln in result.stderr.splitlines() if "layouts.csv" in ln]
    assert "row 3, column poles_per_unit" in line and "no balanced three-phase winding" in line


def test_layout_rule_agrees_with_the_star_of_slots_at_every_multiple(catalog_copy):
    combos = [(c, p) for c in range(3, 31, 3) for p in range(2, 41, 2)]
    for c, p in combos:
        _layouts(catalog_copy, [(c, p)])
        try:
            load_catalogs(catalog_copy)
            accepted = True
        except InputError:
            accepted = False
        for k in (1, 2, 3, 4):
            try:
                star_of_slots(c * k, p * k)
                balanced = True
            except WindingError:
                balanced = False
            assert accepted == balanced, (c, p, k)


def _note_cell(catalog_copy, note):
    path = catalog_copy / "discs.csv"
    path.write_text('id,diameter_mm,thickness_mm,price_each,note\n'
                    f'd1,300,8,30,"{note}"\n# a comment\nd2,250,6,20,\n', encoding="utf-8", newline="")
    return path


@pytest.mark.parametrize("note", ["first line\nsecond line", "cut\r\nto size", "one\u2028cell"])
def test_a_cell_with_line_breaks_stays_one_cell(catalog_copy, note):
    _note_cell(catalog_copy, note)
    discs = load_catalogs(catalog_copy).discs
    assert list(discs["id"]) == ["d1", "d2"] and discs["note"][0] == note
    assert math.isclose(discs["diameter_m"][1], 0.25)


def test_a_line_break_inside_an_id_is_refused(catalog_copy, runner):
    path = catalog_copy / "discs.csv"
    path.write_text('id,diameter_mm,thickness_mm,price_each\n"d\u20281",300,8,30\nd2,250,6,20\n',
                    encoding="utf-8")
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy)])
    assert result.exit_code == 2 and f"{path}: row 2, column id: must be one line" in result.stderr


def test_a_row_after_a_multi_line_cell_keeps_its_own_row_number(catalog_copy, runner):
    path = _note_cell(catalog_copy, "a\nb\nc")
    path.write_text(path.read_text().replace("d2,250,6,20", "d2,250,-6,20"))
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy)])
    assert f"{path}: row 6, column thickness_mm: must be > 0" in result.stderr


def test_a_nul_byte_is_refused_with_its_line(catalog_copy, runner):
    path = catalog_copy / "discs.csv"
    path.write_bytes(b"id,diameter_mm,thickness_mm,price_each\nd1,300,8,30\nd2,2\x0050,6,20\n")
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy)])
    assert result.exit_code == 2 and f"{path}: row 3: holds a NUL byte" in result.stderr


# Every catalog, every line separator: Python's str.splitlines splits on all of these, a CSV record
# ends only at CR, LF or CRLF (RFC 4180), and a quoted cell may hold CR and LF themselves.
LINE_SEPARATORS = {"LF": "\n", "CRLF": "\r\n", "CR": "\r", "U+2028": "\u2028", "U+2029": "\u2029",
                   "NEL": "\u0085", "VT": "\x0b", "FF": "\x0c", "FS": "\x1c", "GS": "\x1d", "RS": "\x1e"}
CATALOG_FILES = ("magnets", "wires", "layouts", "discs")


def _rows_of(path):
    import csv

    with open(path, newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.reader(fh) if r and not r[0].startswith("#")]
    return rows[0], rows[1:]


def _rewrite(path, header, rows, quoting):
    import csv
    import io

    buf = io.StringIO()
    csv.writer(buf, quoting=quoting).writerows([header, *rows])  # CRLF, as spreadsheets write
    path.write_text(buf.getvalue(), encoding="utf-8", newline="")


@pytest.mark.parametrize("quoting", ["minimal", "all"])
@pytest.mark.parametrize("sep", LINE_SEPARATORS, ids=list(LINE_SEPARATORS))
@pytest.mark.parametrize("name", CATALOG_FILES)
def test_every_catalog_keeps_a_line_separator_inside_its_cell(catalog_copy, name, sep, quoting):
    import csv

    path = catalog_copy / f"{name}.csv"
    header, rows = _rows_of(path)
    note = f"first part{LINE_SEPARATORS[sep]}second part"
    rows[0][header.index("note")] = note
    _rewrite(path, header, rows, csv.QUOTE_MINIMAL if quoting == "minimal" else csv.QUOTE_ALL)
    frame = getattr(load_catalogs(catalog_copy), name)
    assert list(frame["id"]) == [r[0] for r in rows]
    assert frame["note"][0] == note


@pytest.mark.parametrize("name", CATALOG_FILES)
def test_every_catalog_refuses_a_nul_byte_naming_file_and_row(catalog_copy, runner, name):
    path = catalog_copy / f"{name}.csv"
    lines = path.read_bytes().split(b"\n")
    last = max(i for i, ln in enumerate(lines) if ln.strip() and not ln.startswith(b"#"))
    lines[last] = lines[last].replace(b",", b",\x00", 1)
    path.write_bytes(b"\n".join(lines))
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy)])
    assert result.exit_code == 2
    assert f"{path}: row {last + 1}: holds a NUL byte" in result.stderr


@pytest.mark.parametrize("name", CATALOG_FILES)
def test_every_catalog_refuses_a_line_separator_inside_an_id(catalog_copy, runner, name):
    import csv

    path = catalog_copy / f"{name}.csv"
    header, rows = _rows_of(path)
    rows[1][0] = rows[1][0][:2] + "\u2028" + rows[1][0][2:]
    _rewrite(path, header, rows, csv.QUOTE_MINIMAL)
    result = runner.invoke(app, ["catalogs", "check", str(catalog_copy)])
    assert result.exit_code == 2 and f"{path}: row 3, column id: must be one line" in result.stderr
