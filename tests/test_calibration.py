"""Calibrating the shaft line from one measured free-wheeling speed: the fitted friction makes the
propeller model free-wheel at the measured rpm, checked with an independent root finder
(scipy.optimize.brentq on a fine scan), and the scenario refuses a measurement no friction gives."""

import numpy as np
import pytest
from scipy.optimize import brentq

from optimiser.cli import app
from optimiser.errors import InputError
from optimiser.operating import PropellerTable, fit_shaft_line_friction, free_wheel_rpm
from optimiser.physics.propeller import propeller_turbine
from optimiser.scenario import load_scenario

KNOT = 1852.0 / 3600.0  # [m/s], exact

# A range of small-craft propellers (diameter, pitch ratio, blades, area ratio, boat speed in kn):
# the B-series-like ranges of tests/test_propeller_bseries.py, boat speeds of a sailing profile.
RNG = np.random.default_rng(14)
K = 24
D = RNG.uniform(0.30, 0.50, K)
PD = RNG.uniform(0.6, 1.1, K)
Z = RNG.integers(2, 5, K)
EAR = RNG.uniform(0.35, 0.55, K)
V = RNG.uniform(4.0, 8.0, K) * KNOT
WAKE = RNG.uniform(0.05, 0.15, K)


def hydro(rpm):
    return propeller_turbine(rpm, V, D, PD * D, Z, EAR, WAKE).torque_Nm


def first_stable_balance(i, friction):
    """Independent of operating.py: a 1 rpm scan from 5 rpm, then brentq in the first interval
    where the propeller's torque less the friction turns from driving to braking."""
    q = lambda n: float(propeller_turbine(n, V[i], D[i], PD[i] * D[i], Z[i], EAR[i], WAKE[i]).torque_Nm) - friction  # noqa: E731
    grid = np.arange(5.0, 3000.0, 1.0)
    f = propeller_turbine(grid, V[i], D[i], PD[i] * D[i], Z[i], EAR[i], WAKE[i]).torque_Nm - friction
    assert f[0] > 0, "stalled at rest"
    j = int(np.argmax(f <= 0))
    return brentq(q, grid[j - 1], grid[j], xtol=1e-6)


def test_fitted_friction_reproduces_the_measured_rpm_within_1_rpm():
    span = fit_shaft_line_friction(hydro, np.full(K, 100.0))  # where each propeller can free-wheel
    u = RNG.uniform(0.1, 0.9, K)
    measured = span.lowest_rpm + u * (span.frictionless_rpm - span.lowest_rpm)
    fit = fit_shaft_line_friction(hydro, measured)
    assert fit.ok.all() and np.all(fit.friction_Nm > 0)
    for i in range(K):
        assert first_stable_balance(i, float(fit.friction_Nm[i])) == pytest.approx(measured[i], abs=1.0)
    # and as the evaluator sees it: the tabulated curve (5 rpm grid) with the friction subtracted
    for i in range(0, K, 6):
        table = PropellerTable([V[i]], rpm_max=1500.0, diameter_m=D[i], pitch_m=PD[i] * D[i], blades=Z[i],
                               area_ratio=EAR[i], wake_fraction=WAKE[i], shaft_friction_Nm=fit.friction_Nm[i])
        assert float(free_wheel_rpm(table.torque, 0.0).rpm[0]) == pytest.approx(measured[i], abs=1.0)


def test_friction_range_is_ordered():
    # more friction, slower free-wheel: the slowest reachable lies below the frictionless speed
    fit = fit_shaft_line_friction(hydro, np.full(K, 100.0))
    assert np.all(fit.lowest_rpm < fit.frictionless_rpm)
    assert np.all(fit.starting_torque_Nm > 0)


def write(tmp_path, text, name="boat.toml"):
    path = tmp_path / name
    path.write_text("propeller_diameter_mm = 406\n" + text, encoding="utf-8")
    return path


def test_scenario_check_prints_the_fitted_friction(tmp_path, runner):
    path = write(tmp_path, "measured_free_wheel_rpm = 450\nmeasured_free_wheel_boat_speed_kn = 6\n"
                           "shaft_line_friction_Nm = 1.0\n")
    s = load_scenario(path)
    assert s.shaft_line_friction_fitted and s.shaft_line_friction_Nm != 1.0
    sc = load_scenario(write(tmp_path, "", "plain.toml"))
    q = propeller_turbine(450.0, 6 * KNOT, sc.propeller_diameter_m, sc.propeller_pitch_m, sc.propeller_blades,
                          sc.propeller_area_ratio, sc.wake_fraction).torque_Nm
    assert s.shaft_line_friction_Nm == pytest.approx(float(q), rel=1e-12)
    result = runner.invoke(app, ["scenario", "check", str(path)])
    assert result.exit_code == 0 and f"fitted: {s.shaft_line_friction_Nm:.3f} N m" in result.stdout


@pytest.mark.parametrize("rpm,words", [
    (900, "slower even with none"),     # faster than the frictionless 16 x 11 in propeller
    (200, "would never start"),         # common-practice figure: far more than its starting torque
])
def test_impossible_measurement_is_one_line_exit_2(tmp_path, runner, rpm, words):
    path = write(tmp_path, f"measured_free_wheel_rpm = {rpm}\nmeasured_free_wheel_boat_speed_kn = 6\n")
    result = runner.invoke(app, ["scenario", "check", str(path)])
    assert result.exit_code == 2
    lines = [ln for ln in result.stderr.splitlines() if "measured_free_wheel_rpm" in ln]
    assert len(lines) == 1 and words in lines[0] and "propeller_pitch_mm" in lines[0] and "rpm" in lines[0]
    assert "Traceback" not in result.output


@pytest.mark.parametrize("text,key,words", [
    ("measured_free_wheel_rpm = 450\n", "measured_free_wheel_rpm", "measured_free_wheel_boat_speed_kn"),
    ("measured_free_wheel_boat_speed_kn = 6\n", "measured_free_wheel_boat_speed_kn", "measured_free_wheel_rpm"),
])
def test_measurement_needs_both_keys(tmp_path, text, key, words):
    with pytest.raises(InputError) as info:
        load_scenario(write(tmp_path, text))
    (p,) = info.value.problems
    assert p.column == key and words in p.message


def test_measurement_needs_a_propeller(tmp_path):
    path = tmp_path / "boat.toml"
    path.write_text("measured_free_wheel_rpm = 450\nmeasured_free_wheel_boat_speed_kn = 6\n")
    with pytest.raises(InputError) as info:
        load_scenario(path)
    assert "propeller_diameter_mm" in info.value.problems[0].message
