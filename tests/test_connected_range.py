"""The connected speed range: the generator stays connected from the sailing rpm up to the fastest
sailing speed (without a propeller `fastest_sailing_rpm`; with one, the loaded operating point at
`fastest_boat_speed_kn`), so the temperature limits must hold there, and reports warn for any rpm
row inside that range over a limit. Checks: the fastest point equals an independent evaluation at
that rpm bit for bit, the constraint is the hotter end, and the hotter end is the hottest point of
the range (a fine rpm sweep, an independent evaluation of the same designs, never finds more)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from optimiser.catalogs import load_catalogs
from optimiser.cli import app
from optimiser.design import design_toml
from optimiser.errors import InputError
from optimiser.evaluate import CONSTRAINTS, Evaluator
from optimiser.scenario import load_scenario
from optimiser.search.space import SearchSpace

HOT, MAG = CONSTRAINTS.index("coil_too_hot"), CONSTRAINTS.index("magnet_too_hot")


@pytest.fixture(scope="module")
def catalogs():
    return load_catalogs(Path(__file__).resolve().parents[1] / "catalogs")


@pytest.fixture(scope="module")
def demo(catalogs):
    evaluator = Evaluator(catalogs, load_scenario(None))
    # rectangular coils only (the sample these checks were written on; shapes are tested elsewhere)
    space = SearchSpace(Evaluator(catalogs, dataclasses.replace(load_scenario(None), coil_shapes=("rectangular",))))
    batch = space.decode_columns(space.random_columns(6000, np.random.default_rng(14)))
    fits = evaluator.evaluate(batch, rpm=180.0).constraints[:, :6].max(axis=1) <= 0
    batch = batch.take(np.flatnonzero(fits)[:300])
    return evaluator, batch, evaluator.evaluate(batch)


def test_scenario_defaults_and_order(tmp_path):
    s = load_scenario(None)
    assert s.sailing_rpm <= s.fastest_sailing_rpm == 240.0 < s.max_rpm
    assert s.fastest_boat_speed_kn == max(s.profile_boat_speed_kn) + 1.0  # 0 in the file: top + 1 kn
    for text, key, words in [("fastest_sailing_rpm = 150\n", "fastest_sailing_rpm", ">= sailing_rpm (180)"),
                             ("fastest_sailing_rpm = 1600\n", "fastest_sailing_rpm", "< max_rpm (1500)"),
                             ("fastest_boat_speed_kn = 6.5\n", "fastest_boat_speed_kn",
                              ">= the top of profile_boat_speed_kn (7)")]:
        path = tmp_path / "boat.toml"
        path.write_text(text)
        with pytest.raises(InputError) as info:
            load_scenario(path)
        (p,) = info.value.problems
        assert p.column == key and words in p.message, p.message


def test_fastest_point_is_the_same_pipeline_at_that_rpm(demo):
    evaluator, batch, ev = demo
    fresh = evaluator.evaluate(batch, rpm=evaluator.scenario.fastest_sailing_rpm)
    for k, value in fresh.values.items():
        np.testing.assert_array_equal(ev.at_fastest[k], value, err_msg=k)
    np.testing.assert_array_equal(ev["fastest_sailing_rpm"], 240.0)


def test_limits_hold_at_the_hotter_end(demo):
    evaluator, batch, ev = demo
    sail = evaluator.evaluate(batch, rpm=180.0)
    hottest = np.maximum(sail["coil_temperature_C"], ev.at_fastest["coil_temperature_C"])
    np.testing.assert_array_equal(ev["coil_temperature_connected_C"], hottest)
    np.testing.assert_allclose(ev.constraints[:, HOT], (hottest - sail["coil_limit_C"]) / 100.0, rtol=0, atol=0)
    magnets = np.maximum(sail["magnet_temperature_C"], ev.at_fastest["magnet_temperature_C"])
    np.testing.assert_array_equal(ev.constraints[:, MAG], (magnets - sail["magnet_limit_C"]) / 100.0)
    # the objective stays the sailing-point temperature; other constraints are untouched
    np.testing.assert_array_equal(ev["coil_temperature_C"], sail["coil_temperature_C"])
    others = [j for j in range(len(CONSTRAINTS)) if j not in (HOT, MAG)]
    np.testing.assert_array_equal(ev.constraints[:, others], sail.constraints[:, others])
    # some designs that pass at the sailing rpm fail at the fastest: the range matters
    ok_sailing = np.all(sail.constraints <= 0, axis=1)
    assert np.any(ok_sailing & ~ev.feasible)


def test_hotter_end_is_the_hottest_point_of_the_range(demo):
    # The constraint evaluates the two ends only; a sweep of 7 speeds across the range never finds a
    # design hotter inside it (within the 0.02 K of the thermal fixed point) than at its hotter end.
    evaluator, batch, ev = demo
    moving = ev["coil_temperature_connected_C"] < 399  # no runaway
    b = batch.take(np.flatnonzero(moving))
    rpms = np.linspace(180.0, 240.0, 7)
    n = len(b)
    sweep = evaluator.evaluate(b.take(np.repeat(np.arange(n), len(rpms))), rpm=np.tile(rpms, n))
    inside = sweep["coil_temperature_C"].reshape(n, len(rpms)).max(axis=1)
    assert np.all(inside <= ev["coil_temperature_connected_C"][moving] + 0.05)


def test_propeller_fastest_point_is_the_loaded_rpm_at_the_fastest_boat_speed(catalogs, demo):
    _, batch, _ = demo
    boat = dataclasses.replace(load_scenario(None), propeller_diameter_m=0.406)
    evaluator = Evaluator(catalogs, boat)
    ev = evaluator.evaluate(batch.take(np.arange(40)))
    fast = ev.at_fastest
    assert np.all(ev["fastest_sailing_rpm"] == fast["rpm"])
    moving = ~fast["stalled"]
    assert moving.sum() > 10
    # faster boat, faster shaft; and the constraint holds the hotter of profile and fastest point
    assert np.all(fast["rpm"][moving] >= ev.profile["rpm"][moving, -1])
    hottest = np.maximum(ev["coil_temperature_C"], fast["coil_temperature_C"])
    np.testing.assert_array_equal(ev.constraints[:, HOT], (hottest - ev["coil_limit_C"]) / 100.0)


def test_json_and_warnings_for_a_design_hot_only_at_the_fastest_speed(demo, catalogs, tmp_path, runner,
                                                                     strict_json):
    evaluator, batch, ev = demo
    sail = evaluator.evaluate(batch, rpm=180.0)
    hot_fast = np.flatnonzero(np.all(sail.constraints <= 0, axis=1) & (ev.constraints[:, HOT] > 0))
    assert len(hot_fast)
    path = tmp_path / "d.toml"
    path.write_text(design_toml(batch.take(hot_fast[:1]).records(catalogs)[0]))
    result = runner.invoke(app, ["evaluate", "--design", str(path), "--json"])
    assert result.exit_code == 0, result.output
    rep = strict_json(result.stdout)
    assert set(rep["at_fastest_sailing"]) == set(rep["at_sailing"])
    assert rep["at_fastest_sailing"]["rpm"] == 240.0 and rep["inputs"]["fastest_sailing_rpm"] == 240.0
    assert rep["at_fastest_sailing"]["coil_temperature_C"] > rep["limits"]["coil_C"] > rep["at_sailing"]["coil_temperature_C"]
    assert not rep["feasible"]
    text = " | ".join(rep["warnings"])
    assert "connected while sailing at the fastest speed, 240 rpm" in text
    assert "inside the connected range (up to 240 rpm) the rpm table exceeds a limit at 240 rpm" in text
    # rows above the connected range are not listed (motoring has its own warning)
    listed = text.split("exceeds a limit at ")[1]
    assert all(float(r.split(" rpm")[0]) <= 240 for r in listed.split("; ") if " rpm:" in r)
    plain = runner.invoke(app, ["evaluate", "--design", str(path)])
    assert "inside the connected range" in plain.stdout
