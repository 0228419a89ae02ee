"""Catalog loading: SI conversion, accepted spreadsheet dialects, and every kind of bad input.

Bad input is checked through the real command (`afpm catalogs check DIR`): exit code 2, no
traceback, and one line naming the file, the spreadsheet row and the column.
"""
from __future__ import annotations

import csv
import hashlib
import io

import numpy as np
import pytest

from optimiser.catalogs import catalog_summary, load_catalogs
from optimiser.cli import app
from optimiser.errors import InputError

SPEC_COLUMNS = {
    "magnets": ["id", "length_m", "width_m", "thickness_m", "grade", "remanence_T", "max_temp_C",
                "recoil_permeability", "br_temp_coeff_per_K", "price_each", "note"],
    "wires": ["id", "standard", "bare_diameter_m", "overall_diameter_m", "thermal_class_C",
              "price_per_kg", "note"],
    "layouts": ["id", "coils_per_unit", "poles_per_unit", "min_multiple", "max_multiple", "note"],
    "discs": ["id", "diameter_m", "thickness_m", "price_each", "note"],
}


def check(runner, directory, *extra):
    result = runner.invoke(app, ["catalogs", "check", str(directory), *extra])
    assert "Traceback" not in result.output
    return result


def assert_problem(result, path, row, column, *words):
    """Exit 2 and one stderr line that names file, row and column and contains the words."""
    assert result.exit_code == 2, result.output
    prefix = f"{path}: row {row}, column {column}: " if row else f"{path}: "
    lines = [ln for ln in result.stderr.splitlines() if ln.startswith(prefix)]
    assert lines, f"no line starting {prefix!r} in:\n{result.stderr}"
    assert any(all(w in ln for w in words) for ln in lines), lines


# --- the demo catalogs -------------------------------------------------------------------------
def test_demo_catalogs_load_with_spec_columns_in_si(demo_catalogs_dir):
    cat = load_catalogs(demo_catalogs_dir)
    for name, columns in SPEC_COLUMNS.items():
        frame = getattr(cat, name)
        assert list(frame.columns) == columns
        assert list(frame.index) == list(range(len(frame)))
        assert cat.files[name] == demo_catalogs_dir / f"{name}.csv"
        assert cat.hashes[name] == hashlib.sha256(cat.files[name].read_bytes()).hexdigest()
    assert cat.directory == demo_catalogs_dir
    assert 10 <= len(cat.magnets) <= 14 and len(cat.wires) >= 20
    assert 6 <= len(cat.layouts) <= 8 and 5 <= len(cat.discs) <= 8
    # 40 x 20 x 10 mm block: mm -> m once, on load
    block = cat.magnets.set_index("id").loc["SM-40x20x10-N42"]
    assert (block.length_m, block.width_m, block.thickness_m) == pytest.approx((0.04, 0.02, 0.01))
    assert cat.layouts["coils_per_unit"].dtype == np.int64


def test_blank_magnet_cells_take_grade_table_and_defaults(demo_catalogs_dir):
    m = load_catalogs(demo_catalogs_dir).magnets.set_index("id")
    row = m.loc["SM-30x10x5-N35"]  # remanence, max temperature, mu_r and coefficient all blank
    assert row.remanence_T == pytest.approx((1.17 + 1.22) / 2)
    assert row.max_temp_C == 80 and row.recoil_permeability == 1.05
    assert row.br_temp_coeff_per_K == -0.0012
    assert m.loc["SM-46x30x10-N42H"].max_temp_C == 120


def test_check_command_prints_summary(runner, demo_catalogs_dir):
    result = check(runner, demo_catalogs_dir)
    assert result.exit_code == 0, result.output
    for name in SPEC_COLUMNS:
        assert name in result.stdout


def test_check_json_summary_matches_catalog_summary(runner, demo_catalogs_dir, strict_json):
    result = check(runner, demo_catalogs_dir, "--json")
    assert result.exit_code == 0
    data = strict_json(result.stdout)
    assert data["ok"] is True
    assert data["catalogs"] == catalog_summary(load_catalogs(demo_catalogs_dir))
    magnets = data["catalogs"][0]
    assert magnets["rows"] == 13 and magnets["ranges"]["length_m"] == [0.03, 0.06]


def test_check_json_lists_problems(runner, catalog_copy, set_cell, strict_json):
    row = set_cell(catalog_copy / "discs.csv", "S235-300x8", "thickness_mm", "-3")
    result = check(runner, catalog_copy, "--json")
    assert result.exit_code == 2
    data = strict_json(result.stdout)
    assert data["ok"] is False
    assert data["problems"] == [{"file": str(catalog_copy / "discs.csv"), "row": row,
                                 "column": "thickness_mm", "message": "must be > 0 mm (got -3)"}]


# --- accepted dialects ---------------------------------------------------------------------------
def frames_equal(a, b):
    for name in SPEC_COLUMNS:
        fa, fb = getattr(a, name), getattr(b, name)
        assert fa.equals(fb), name


def test_byte_order_mark_is_accepted(catalog_copy, demo_catalogs_dir):
    path = catalog_copy / "magnets.csv"
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    frames_equal(load_catalogs(catalog_copy), load_catalogs(demo_catalogs_dir))


def test_semicolons_with_decimal_commas_are_accepted(catalog_copy, demo_catalogs_dir):
    # what a spreadsheet set to a comma-decimal locale saves: ';' between fields, '1,05' numbers
    def localise(cell):
        try:
            float(cell)
        except ValueError:
            return cell
        return cell.replace(".", ",")

    for name in SPEC_COLUMNS:
        path = catalog_copy / f"{name}.csv"
        out = io.StringIO()
        writer = csv.writer(out, delimiter=";", lineterminator="\n")
        for line in path.read_text(encoding="utf-8").splitlines():
            if line.startswith("#"):
                out.write(line + "\n")
            else:
                writer.writerow([localise(c) for c in next(csv.reader([line]))])
        path.write_text(out.getvalue(), encoding="utf-8")
    assert "SW-AWG10;AWG;2,588;" in (catalog_copy / "wires.csv").read_text()
    frames_equal(load_catalogs(catalog_copy), load_catalogs(demo_catalogs_dir))


def test_spreadsheet_padding_is_ignored(catalog_copy, demo_catalogs_dir):
    # empty trailing columns and rows of bare delimiters, as spreadsheets save them
    path = catalog_copy / "discs.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    out = [ln if ln.startswith("#") else ln + ",," for ln in lines] + [",,,,,,"]
    path.write_text("\n".join(out) + "\n", encoding="utf-8")
    frames_equal(load_catalogs(catalog_copy), load_catalogs(demo_catalogs_dir))


def test_inch_columns_are_converted_once(catalog_copy):
    # a 2 x 1 x 0.5 in block, a common imperial stock size: 50.8 x 25.4 x 12.7 mm
    (catalog_copy / "magnets.csv").write_text(
        "# imperial stock\nid,length_in,width_in,thickness_in,grade,price_each\n"
        "imp-2x1x0.5,2,1,0.5,N42,9.00\n", encoding="utf-8")
    m = load_catalogs(catalog_copy).magnets
    assert m.loc[0, ["length_m", "width_m", "thickness_m"]].tolist() == pytest.approx(
        [0.0508, 0.0254, 0.0127])


def test_inch_and_mm_columns_that_agree_are_accepted(catalog_copy):
    (catalog_copy / "discs.csv").write_text(
        "id,diameter_mm,diameter_in,thickness_mm,price_each\n"
        "d12,304.8,12,8,30\nd-mm-only,300,,8,30\n", encoding="utf-8")
    d = load_catalogs(catalog_copy).discs
    assert d.diameter_m.tolist() == pytest.approx([0.3048, 0.300])


# --- bad input: one case each ---------------------------------------------------------------------
def test_missing_file(runner, catalog_copy):
    (catalog_copy / "wires.csv").unlink()
    result = check(runner, catalog_copy)
    assert_problem(result, catalog_copy / "wires.csv", None, None, "file not found",
                   "bare_diameter_mm")


def test_empty_file(runner, catalog_copy):
    (catalog_copy / "discs.csv").write_text("", encoding="utf-8")
    assert_problem(check(runner, catalog_copy), catalog_copy / "discs.csv", None, None,
                   "file is empty", "diameter_mm")


def test_header_without_rows(runner, catalog_copy):
    (catalog_copy / "discs.csv").write_text("# nothing yet\nid,diameter_mm,thickness_mm,"
                                            "price_each\n", encoding="utf-8")
    assert_problem(check(runner, catalog_copy), catalog_copy / "discs.csv", None, None,
                   "no data rows", "row 2")


def drop_column(path, column):
    lines = path.read_text(encoding="utf-8").splitlines()
    out, index = [], None
    for ln in lines:
        if ln.startswith("#"):
            out.append(ln)
            continue
        cells = ln.split(",")
        if index is None:
            index = cells.index(column)
        out.append(",".join(cells[:index] + cells[index + 1:]))
    path.write_text("\n".join(out) + "\n", encoding="utf-8")


def test_missing_column(runner, catalog_copy, header_row):
    path = catalog_copy / "magnets.csv"
    drop_column(path, "width_mm")
    assert_problem(check(runner, catalog_copy), path, header_row(path), "width_mm or width_in",
                   "missing required column")


def test_unknown_column_suggests_the_close_name(runner, catalog_copy, header_row):
    path = catalog_copy / "magnets.csv"
    path.write_text(path.read_text(encoding="utf-8").replace("width_mm", "widht_mm"), "utf-8")
    result = check(runner, catalog_copy)
    assert_problem(result, path, header_row(path), "widht_mm", "unknown column",
                   "did you mean width_mm?")


def test_unparseable_number(runner, catalog_copy, set_cell):
    path = catalog_copy / "magnets.csv"
    row = set_cell(path, "SM-50x25x10-N42", "width_mm", "2O")
    assert_problem(check(runner, catalog_copy), path, row, "width_mm", "not a number: '2O'",
                   "in mm")


@pytest.mark.parametrize("value", ["0", "-3"])
def test_zero_or_negative_size(runner, catalog_copy, set_cell, value):
    path = catalog_copy / "magnets.csv"
    row = set_cell(path, "SM-40x20x5-N42", "width_mm", value)
    result = check(runner, catalog_copy)
    # the one message style, in full
    assert f"{path}: row {row}, column width_mm: must be > 0 mm (got {value})" in result.stderr
    assert result.exit_code == 2


def test_remanence_out_of_physical_range(runner, catalog_copy, set_cell):
    path = catalog_copy / "magnets.csv"
    row = set_cell(path, "SM-60x30x10-N42", "remanence_T", "1.9")
    assert_problem(check(runner, catalog_copy), path, row, "remanence_T",
                   "must be between 0.2 and 1.6 T (got 1.9)")


def test_unknown_grade(runner, catalog_copy, set_cell):
    path = catalog_copy / "magnets.csv"
    row = set_cell(path, "SM-60x30x10-N42", "grade", "N43")
    assert_problem(check(runner, catalog_copy), path, row, "grade", "unknown grade 'N43'",
                   "N42SH")


def test_unknown_thermal_class(runner, catalog_copy, set_cell):
    path = catalog_copy / "wires.csv"
    row = set_cell(path, "SW-AWG16", "thermal_class", "Q")
    assert_problem(check(runner, catalog_copy), path, row, "thermal_class",
                   "unknown thermal class 'Q'", "F 155")


def test_unknown_wire_standard(runner, catalog_copy, set_cell):
    path = catalog_copy / "wires.csv"
    row = set_cell(path, "SW-AWG16", "standard", "SWG")
    assert_problem(check(runner, catalog_copy), path, row, "standard", "AWG, metric")


def test_duplicate_id(runner, catalog_copy, set_cell):
    path = catalog_copy / "discs.csv"
    first = set_cell(path, "S235-250x6", "note", "")
    row = set_cell(path, "S235-250x8", "id", "S235-250x6")
    assert_problem(check(runner, catalog_copy), path, row, "id", "duplicate id 'S235-250x6'",
                   f"first used on row {first}")


def test_inch_and_mm_columns_that_disagree(runner, catalog_copy):
    path = catalog_copy / "discs.csv"
    path.write_text("id,diameter_mm,diameter_in,thickness_mm,price_each\n"
                    "d12,300,12,8,30\n", encoding="utf-8")
    assert_problem(check(runner, catalog_copy), path, 2, "diameter_in", "disagrees with "
                   "diameter_mm", "304.8 mm", "0.5 %")


def test_implausible_scale(runner, catalog_copy, set_cell):
    # 500 typed into an inch column, or 12700 into a mm column: a 12.7 m magnet
    path = catalog_copy / "magnets.csv"
    row = set_cell(path, "SM-50x30x10-N38", "length_mm", "12700")
    assert_problem(check(runner, catalog_copy), path, row, "length_mm",
                   "must be between 1 and 200 mm (got 12700)", "check the unit")


def test_implausible_wire_and_disc_sizes(runner, catalog_copy, set_cell):
    wires, discs = catalog_copy / "wires.csv", catalog_copy / "discs.csv"
    w_row = set_cell(wires, "SW-1.00mm-G1", "bare_diameter_mm", "10")
    d_row = set_cell(discs, "S235-400x10", "diameter_mm", "4000")
    result = check(runner, catalog_copy)
    assert_problem(result, wires, w_row, "bare_diameter_mm", "between 0.05 and 6 mm")
    assert_problem(result, discs, d_row, "diameter_mm", "between 50 and 1500 mm")


def test_awg_row_with_a_non_awg_diameter(runner, catalog_copy, set_cell):
    path = catalog_copy / "wires.csv"
    row = set_cell(path, "SW-AWG18", "bare_diameter_mm", "1.1")
    assert_problem(check(runner, catalog_copy), path, row, "bare_diameter_mm",
                   "not an AWG size", "AWG 17")


def test_wire_without_overall_diameter_or_grade(runner, catalog_copy, set_cell):
    path = catalog_copy / "wires.csv"
    row = set_cell(path, "SW-1.25mm-G2", "enamel_grade", "")
    assert_problem(check(runner, catalog_copy), path, row, "overall_diameter_mm",
                   "enamel_grade of 1, 2 or 3")


def test_overall_diameter_smaller_than_bare(runner, catalog_copy, set_cell):
    path = catalog_copy / "wires.csv"
    row = set_cell(path, "SW-AWG14", "overall_diameter_mm", "1.5")
    assert_problem(check(runner, catalog_copy), path, row, "overall_diameter_mm",
                   "larger than the bare diameter")


def test_layout_rules(runner, catalog_copy, set_cell):
    path = catalog_copy / "layouts.csv"
    r1 = set_cell(path, "9:8", "poles_per_unit", "7")
    r2 = set_cell(path, "12:10", "coils_per_unit", "10")
    r3 = set_cell(path, "12:14", "max_multiple", "0")
    r4 = set_cell(path, "9:10", "max_multiple", "1.5")
    result = check(runner, catalog_copy)
    assert_problem(result, path, r1, "poles_per_unit", "must be even")
    assert_problem(result, path, r2, "coils_per_unit", "multiple of 3")
    assert_problem(result, path, r3, "max_multiple", "must be > 0")
    assert_problem(result, path, r4, "max_multiple", "whole number")


def test_row_with_too_many_values(runner, catalog_copy):
    path = catalog_copy / "discs.csv"
    path.write_text("id,diameter_mm,thickness_mm,price_each\nd1,300,8,30,extra,\n", "utf-8")
    assert_problem(check(runner, catalog_copy), path, None, None, "row 2:", "5 values", "4 columns")


def test_not_utf8(runner, catalog_copy):
    path = catalog_copy / "discs.csv"
    path.write_bytes("id,diameter_mm,thickness_mm,price_each,note\nd1,300,8,30,acier d\xe9coup\xe9\n"
                     .encode("latin-1"))
    assert_problem(check(runner, catalog_copy), path, None, None, "not UTF-8", "CSV UTF-8")


def test_all_problems_are_listed_at_once(runner, catalog_copy, set_cell):
    magnets, discs = catalog_copy / "magnets.csv", catalog_copy / "discs.csv"
    rows = [set_cell(magnets, "SM-40x10x5-N42", "width_mm", "-1"),
            set_cell(magnets, "SM-40x20x10-N42", "grade", "X42"),
            set_cell(discs, "S235-200x6", "price_each", "cheap")]
    (catalog_copy / "layouts.csv").unlink()
    result = check(runner, catalog_copy)
    assert result.exit_code == 2
    assert f"{magnets}: row {rows[0]}, column width_mm" in result.stderr
    assert f"{magnets}: row {rows[1]}, column grade" in result.stderr
    assert f"{discs}: row {rows[2]}, column price_each" in result.stderr
    assert f"{catalog_copy / 'layouts.csv'}: file not found" in result.stderr
    assert "4 problems found" in result.stderr


def test_load_catalogs_raises_input_error_with_problem_fields(catalog_copy, set_cell):
    row = set_cell(catalog_copy / "magnets.csv", "SM-40x20x5-N42", "thickness_mm", "abc")
    with pytest.raises(InputError) as info:
        load_catalogs(catalog_copy)
    (p,) = info.value.problems
    assert (p.file, p.row, p.column) == (str(catalog_copy / "magnets.csv"), row, "thickness_mm")


def test_missing_folder(runner, tmp_path):
    result = check(runner, tmp_path / "nowhere")
    assert_problem(result, tmp_path / "nowhere", None, None, "folder not found")
