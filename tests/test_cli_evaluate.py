"""`afpm evaluate`: the table, the JSON contract of the issue, and bad design files.

The numbers themselves are checked in test_evaluate.py; here the command must show them, with every
key users' scripts rely on, and must turn every mistake in a design file into one plain line per
problem (file, line or key, what is wrong) with exit code 2 and no traceback.
"""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest

from optimiser.catalogs import load_catalogs
from optimiser.cli import EXIT_INPUT, app
from optimiser.design import design_toml
from optimiser.evaluate import Evaluator
from optimiser.scenario import load_scenario
from optimiser.search.space import SearchSpace

ISSUE_KEYS = {
    "geometry": {"ring_radius_m", "magnet_length_m", "magnet_width_m", "magnet_thickness_m", "face_gap_m",
                 "stator_thickness_m", "coil_thickness_m", "coil_hole_radial_m", "coil_hole_tangential_m",
                 "coil_leg_width_m", "mean_turn_length_m"},
    "magnet": {"remanence_T", "recoil_permeability", "temperature_C"},
    "winding": {"coils", "poles", "coil_phase", "coil_polarity", "series_coils_per_path", "parallel_paths",
                "connection", "winding_factor"},
    "electrical": {"phase_resistance_20C_ohm", "phase_inductance_H", "emf_line_rms_per_rpm_V",
                   "phase_resistance_hot_ohm"},
    "inputs": {"battery_charging_voltage_V", "battery_resistance_ohm", "diode_forward_drop_V", "bilge_air_C"},
}
OPERATING = {"rpm", "open_circuit_line_rms_V", "charge_current_A", "battery_power_W", "copper_loss_W",
             "eddy_loss_W", "diode_loss_W", "windage_loss_W", "bearing_loss_W", "shaft_power_W",
             "drag_torque_Nm", "coil_temperature_C", "efficiency"}


@pytest.fixture(scope="module")
def demo():
    catalogs = load_catalogs(__import__("pathlib").Path(__file__).resolve().parents[1] / "catalogs")
    return catalogs, Evaluator(catalogs, load_scenario(None))


@pytest.fixture(scope="module")
def feasible_record(demo):
    """A feasible demo design (found by sampling the search space; not hard-coded), as a record."""
    catalogs, evaluator = demo
    space = SearchSpace(evaluator)
    rng = np.random.default_rng(5)
    n = 20000
    cols = space.random_columns(n, rng)
    batch = space.decode_columns(cols)
    ev = evaluator.evaluate(batch)
    good = np.flatnonzero(ev.feasible & (ev["charge_current_A"] > 0))
    assert len(good), "no feasible demo design found to test with"
    return batch.take(good[:1]).records(catalogs)[0]


@pytest.fixture
def design_file(tmp_path, feasible_record):
    path = tmp_path / "design.toml"
    path.write_text(design_toml(feasible_record), encoding="utf-8")
    return path


def run(runner, demo_catalogs_dir, *args):
    return runner.invoke(app, ["evaluate", "--catalogs", str(demo_catalogs_dir), *map(str, args)])


def test_table_output_shows_the_design_and_the_rpm_table(runner, demo_catalogs_dir, design_file,
                                                          feasible_record):
    res = run(runner, demo_catalogs_dir, "--design", design_file)
    assert res.exit_code == 0, res.output
    out = res.output
    assert feasible_record["magnet"] in out and feasible_record["wire"] in out
    for label in ("coils / poles", "winding factor", "phase resistance", "line EMF per rpm", "cut-in",
                  "Against shaft speed", "charge A", "torque N m", "fits and meets every limit"):
        assert label in out, label
    # the same numbers as --json: cut-in rpm and the sailing rpm row of the table
    js = json.loads(run(runner, demo_catalogs_dir, "--design", design_file, "--json").output)
    assert f"{js['cut_in_rpm']:.0f} rpm" in out
    sail = js["at_sailing"]
    assert re.search(rf"{sail['rpm']:.0f}\s.*{sail['charge_current_A']:.2f}", out)
    assert "warning:" in out  # rotor attraction at least: a safety caution is always printed


def test_json_has_every_key_of_the_issue(runner, demo_catalogs_dir, design_file, demo, strict_json):
    res = run(runner, demo_catalogs_dir, "--design", design_file, "--json")
    assert res.exit_code == 0, res.output
    js = strict_json(res.output)
    for group, keys in ISSUE_KEYS.items():
        missing = keys - set(js[group])
        assert not missing, f"{group} lacks {sorted(missing)}"
    for point in ("at_sailing", "at_max_rpm"):
        missing = OPERATING - set(js[point])
        assert not missing, f"{point} lacks {sorted(missing)}"
        assert all(isinstance(js[point][k], float) and math.isfinite(js[point][k]) for k in OPERATING)
    for key in ("feasible", "problems", "cut_in_rpm", "warnings", "rpm_table"):
        assert key in js, key
    assert js["feasible"] is True and js["problems"] == []
    assert isinstance(js["warnings"], list) and all(isinstance(w, str) for w in js["warnings"])
    w = js["winding"]
    assert len(w["coil_phase"]) == w["coils"] and set(w["coil_phase"]) == {0, 1, 2}
    assert len(w["coil_polarity"]) == w["coils"] and set(w["coil_polarity"]) <= {1, -1}
    assert w["connection"] in ("star", "delta")
    assert w["series_coils_per_path"] * w["parallel_paths"] * 3 == w["coils"]
    sc = load_scenario(None)
    assert js["at_sailing"]["rpm"] == sc.sailing_rpm and js["at_max_rpm"]["rpm"] == sc.max_rpm
    assert js["inputs"]["battery_charging_voltage_V"] == sc.battery_charging_V
    rows = js["rpm_table"]
    assert len(rows) >= 10 and all(OPERATING <= set(r) for r in rows)
    rpms = [r["rpm"] for r in rows]
    assert rpms == sorted(rpms) and rpms[0] == 0.0 and rpms[-1] == sc.max_rpm
    # the JSON carries the evaluator's numbers, not a re-derivation (SI units)
    catalogs, evaluator = demo
    from optimiser.design import load_design
    ev = evaluator.evaluate(load_design(design_file, catalogs))
    assert js["at_sailing"]["charge_current_A"] == pytest.approx(float(ev["charge_current_A"][0]), rel=1e-12)
    assert js["geometry"]["face_gap_m"] == pytest.approx(float(ev["face_gap_m"][0]), rel=1e-12)
    # energy balance survives the JSON round trip (first law; see test_evaluate.py)
    p = js["at_max_rpm"]
    parts = sum(p[k] for k in ("battery_power_W", "copper_loss_W", "eddy_loss_W", "diode_loss_W",
                               "dc_resistance_loss_W", "windage_loss_W", "bearing_loss_W"))
    assert parts == pytest.approx(p["shaft_power_W"], rel=1e-9)


def _bad(tmp_path, record, **changes):
    text = design_toml(record)
    for key, value in changes.items():
        text = re.sub(rf"(?m)^{key} = .*$", value, text) if key in record else text + value + "\n"
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _problem_lines(res):
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert "Traceback" not in res.output
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    assert lines[-1].endswith("found.")
    return lines[:-1]


CASES = {
    # name: (changes to the good design's text, key that must be named, text the message must hold)
    "unknown_id": ({"magnet": 'magnet = "SM-40x20x10-N24"'}, "magnet", "did you mean SM-40x20x10-N42"),
    "out_of_range": ({"turns": "turns = 0"}, "turns", "between 1 and 5000"),
    "missing_key": ({"wire": ""}, "wire", "missing key"),
    "unknown_key": ({"colour": 'colour = "red"'}, "colour", "unknown key"),
    "wrong_type": ({"strands": 'strands = "two"'}, "strands", "whole number"),
    "multiple_out_of_layout_range": ({"layout": 'layout = "9:8"', "multiple": "multiple = 9"}, "multiple",
                                     "allows multiples 1 to 4"),
}


@pytest.mark.parametrize("case", list(CASES))
def test_bad_design_file_gives_one_line_per_problem_and_exit_2(runner, demo_catalogs_dir, tmp_path,
                                                               feasible_record, case):
    changes, key, text = CASES[case]
    path = _bad(tmp_path, feasible_record, **changes)
    res = run(runner, demo_catalogs_dir, "--design", path)
    assert res.exit_code == EXIT_INPUT, res.output
    lines = _problem_lines(res)
    assert len(lines) == 1, lines
    assert lines[0].startswith(f"{path}: ") and f"key {key}" in lines[0] and text in lines[0], lines[0]
    if case != "missing_key":  # a missing key has no line to point at
        assert re.search(r": line \d+, key ", lines[0]), lines[0]


def test_not_toml_and_missing_file(runner, demo_catalogs_dir, tmp_path):
    broken = tmp_path / "broken.toml"
    broken.write_text('magnet = "SM-40x20x10-N42\nturns = = 3\n', encoding="utf-8")
    for path, text in ((broken, "not valid TOML"), (tmp_path / "nowhere.toml", "not found")):
        res = run(runner, demo_catalogs_dir, "--design", path)
        assert res.exit_code == EXIT_INPUT, res.output
        lines = _problem_lines(res)
        assert len(lines) == 1 and lines[0].startswith(f"{path}: ") and text in lines[0], lines


def test_all_problems_of_a_file_at_once(runner, demo_catalogs_dir, tmp_path, feasible_record):
    path = _bad(tmp_path, feasible_record, magnet='magnet = "nope"', turns="turns = -3",
                strands='strands = 1.5', colour='colour = "red"', connection='connection = "wye"')
    res = run(runner, demo_catalogs_dir, "--design", path)
    assert res.exit_code == EXIT_INPUT
    lines = _problem_lines(res)
    named = {re.search(r"key (\w+)", ln).group(1) for ln in lines}
    assert named == {"magnet", "turns", "strands", "colour", "connection"}, lines
    assert res.output.splitlines()[-1] == "5 problems found."


def _disallowed_paths(feasible_record):
    """A layout/multiple and a parallel-path count its winding does not allow (from the winding)."""
    catalogs = load_catalogs(__import__("pathlib").Path(__file__).resolve().parents[1] / "catalogs")
    evaluator = Evaluator(catalogs, load_scenario(None))
    lay = catalogs.layouts["id"].tolist().index(feasible_record["layout"])
    combo = evaluator.windings.index(np.array([lay]), np.array([feasible_record["multiple"]]))[0]
    allowed = evaluator.windings.windings[combo].allowed_parallel_paths
    return next(p for p in range(2, 65) if p not in allowed), allowed


def test_parallel_paths_the_winding_does_not_allow(runner, demo_catalogs_dir, tmp_path, feasible_record):
    paths, allowed = _disallowed_paths(feasible_record)
    path = _bad(tmp_path, feasible_record, parallel_paths=f"parallel_paths = {paths}")
    res = run(runner, demo_catalogs_dir, "--design", path)
    assert res.exit_code == EXIT_INPUT, res.output
    lines = _problem_lines(res)
    assert len(lines) == 1 and lines[0].startswith(f"{path}: ") and "key parallel_paths" in lines[0]
    assert f"allows {', '.join(map(str, allowed))} parallel paths (got {paths})" in lines[0]


def test_parallel_paths_problem_comes_with_its_line_and_with_the_other_problems(
        runner, demo_catalogs_dir, tmp_path, feasible_record):
    paths, _ = _disallowed_paths(feasible_record)
    path = _bad(tmp_path, feasible_record, parallel_paths=f"parallel_paths = {paths}", colour='colour = 1')
    res = run(runner, demo_catalogs_dir, "--design", path)
    assert res.exit_code == EXIT_INPUT
    lines = _problem_lines(res)
    assert len(lines) == 2, lines
    assert any(re.search(r": line \d+, key parallel_paths: ", ln) for ln in lines), lines
