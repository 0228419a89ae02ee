"""The propeller in the evaluator: loaded operating point per boat speed, amp-hours per day, drag."""

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from optimiser.catalogs import load_catalogs
from optimiser.cli import app
from optimiser.design import design_toml
from optimiser.evaluate import OBJECTIVES, Evaluator
from optimiser.physics.propeller import betz_power
from optimiser.scenario import load_scenario
from optimiser.search.space import SearchSpace

PROFILE_OBJECTIVES = ("amp_hours_per_day", "mean_added_drag_N", "magnet_cost", "coil_temperature_C")


CATALOGS = Path(__file__).resolve().parent.parent / "catalogs"


@pytest.fixture(scope="module")
def catalogs():
    return load_catalogs(CATALOGS)


@pytest.fixture(scope="module")
def boat():
    # The demo boat with a 16 in three-blade propeller (the template's pitch and blade area).
    return dataclasses.replace(load_scenario(None), propeller_diameter_m=0.406, objectives=PROFILE_OBJECTIVES)


@pytest.fixture(scope="module")
def sample(catalogs, boat):
    evaluator = Evaluator(catalogs, boat)
    space = SearchSpace(evaluator)
    rng = np.random.default_rng(4)
    n = 4000
    cols = space.random_columns(n, rng)
    batch = space.decode_columns(cols)
    fits = evaluator.evaluate(batch, rpm=boat.sailing_rpm).constraints[:, :6].max(axis=1) <= 0
    batch = batch.take(np.flatnonzero(fits)[:150])
    return evaluator, batch, evaluator.evaluate(batch)


def test_loaded_rpm_balances_generator_and_propeller_torque(sample, boat):
    # At a stable operating point the generator's drag torque equals the torque the propeller
    # takes from the water (both evaluated independently at the reported rpm).
    evaluator, batch, ev = sample
    # ... at the profile speeds and at the fastest connected boat speed (the table's last column)
    p, f = ev.profile, ev.at_fastest
    rpm = np.column_stack([p["rpm"], f["rpm"]])
    moving = ~np.column_stack([p["stalled"], f["stalled"]]) & (rpm < 0.999 * boat.max_rpm)
    assert moving.sum() > 100 and moving[:, -1].sum() > 20
    prop = evaluator.propeller.torque(rpm)
    n, s = rpm.shape
    gen = evaluator.evaluate(batch.take(np.repeat(np.arange(n), s)), rpm=rpm.ravel())
    gen = gen["drag_torque_Nm"].reshape(n, s)
    scale = np.maximum(np.abs(gen), 0.1)
    assert np.max(np.abs(gen - prop)[moving] / scale[moving]) < 0.02
    # loading the shaft never speeds it up
    assert np.all(p["rpm"] <= p["free_wheel_rpm"] * 1.0001)
    assert np.all(f["rpm"] <= f["free_wheel_rpm"] * 1.0001)
    # the faster boat turns the loaded shaft faster than the top profile speed does
    assert np.all(f["rpm"][moving[:, -1]] >= p["rpm"][moving[:, -1], -1])


def test_extracted_power_below_betz(sample, boat):
    # Betz limit 16/27 x 1/2 rho A V^3 of the propeller disc (A. Betz, 1920): the shaft power the
    # generator takes can never exceed it.
    evaluator, batch, ev = sample
    p = ev.profile
    omega = p["rpm"] * np.pi / 30
    betz = betz_power(evaluator.boat_speeds_m_s, boat.propeller_diameter_m, boat.wake_fraction,
                      boat.water_density_kg_m3)
    assert np.all(p["drag_torque_Nm"] * omega <= betz[None, :] * 1.0001)


def test_amp_hours_and_mean_drag_follow_the_profile(sample, boat):
    _, _, ev = sample
    p, hours = ev.profile, np.array(boat.profile_hours_per_day)
    np.testing.assert_allclose(ev["amp_hours_per_day"], p["charge_current_A"] @ hours, rtol=1e-12)
    np.testing.assert_allclose(ev["mean_added_drag_N"], p["added_drag_N"] @ hours / hours.sum(), rtol=1e-12)
    assert np.all(p["added_drag_N"] >= -1e-6)  # a loaded propeller drags more than a free one
    assert ev.objectives.shape == (len(ev["magnet_cost"]), 4)
    np.testing.assert_array_equal(ev.objectives[:, 0], ev["amp_hours_per_day"])
    # the hottest coil over the profile and the sailing rpm is what the limit checks
    assert np.all(ev["coil_temperature_C"] >= p["coil_temperature_C"].max(axis=1) - 1e-9)


def test_without_a_propeller_nothing_changes(catalogs, sample):
    evaluator, batch, ev = sample
    plain = Evaluator(catalogs, load_scenario(None))
    assert plain.objectives == OBJECTIVES and plain.propeller is None
    ev0 = plain.evaluate(batch)
    assert ev0.profile == {}
    np.testing.assert_array_equal(ev0["charge_current_A"], ev["charge_current_A"])


def test_evaluate_json_has_the_boat_speed_table(runner, catalogs, sample, tmp_path, strict_json):
    _, batch, _ = sample
    design = tmp_path / "d.toml"
    design.write_text(design_toml(batch.take([0]).records(catalogs)[0]))
    scenario = tmp_path / "boat.toml"
    scenario.write_text('propeller_diameter_mm = 406\n')
    res = runner.invoke(app, ["evaluate", "--design", str(design), "--scenario", str(scenario),
                              "--catalogs", str(CATALOGS), "--json"])
    assert res.exit_code == 0, res.output
    out = strict_json(res.stdout)
    rows = out["sailing_profile"]
    assert [r["boat_speed_kn"] for r in rows] == [4.0, 5.0, 6.0, 7.0]
    for key in ("rpm", "free_wheel_rpm", "charge_current_A", "drag_force_N", "added_drag_N",
                "coil_temperature_C", "stalled"):
        assert key in rows[0]
    assert out["amp_hours_per_day"] == pytest.approx(sum(r["charge_current_A"] * r["hours_per_day"] for r in rows))


def test_search_with_a_propeller_trades_the_scenario_objectives(tmp_path):
    from optimiser.search.run import Budget, SearchRun, create_run, run_search

    scenario = tmp_path / "boat.toml"
    scenario.write_text('propeller_diameter_mm = 406\n'
                        'objectives = ["amp_hours_per_day", "mean_added_drag_N", "magnet_cost"]\n')
    run = SearchRun(create_run(tmp_path / "run", scenario, CATALOGS, seed=2, population=20,
                               budget=Budget(evaluations=120)))
    assert run_search(run) == "finished"
    header = (tmp_path / "run" / "front.csv").read_text().splitlines()[0].split(",")
    assert header[11:14] == ["amp_hours_per_day", "mean_added_drag_N", "magnet_cost"]
    assert "charge_current_A" in header  # the default objectives stay beside as values
    history = (tmp_path / "run" / "history.csv").read_text().splitlines()[0]
    assert "best_amp_hours_per_day" in history
