"""Tests of optimiser.operating on synthetic torque curves with known
crossings (closed forms worked by hand), and on the propeller model."""

import time

import numpy as np
import pytest

from optimiser.operating import (
    PropellerTable,
    free_wheel_rpm,
    loaded_operating_point,
    operating_point,
    sailing_profile,
)
from optimiser.physics.propeller import propeller_turbine

KNOT = 1852.0 / 3600.0  # [m/s], exact
INCH = 0.0254  # [m], exact
TYPICAL = dict(diameter_m=16 * INCH, pitch_m=11 * INCH, blades=3, area_ratio=0.4, wake_fraction=0.1)


def falling_line(q0, rpm_fw):
    """Propeller torque falling linearly from q0 at rest to 0 at rpm_fw."""
    return lambda rpm: q0 * (1.0 - rpm / rpm_fw)


def test_linear_generator_against_falling_propeller_closed_form():
    # k rpm = q0 (1 - rpm/rpm_fw)  =>  rpm* = q0 / (k + q0/rpm_fw), by hand.
    k = np.geomspace(0.005, 0.5, 200)
    q0, rpm_fw = 12.0, 500.0
    op = operating_point(lambda rpm: k * rpm, falling_line(q0, rpm_fw), rpm_min=1.0, rpm_max=1000.0)
    expected = q0 / (k + q0 / rpm_fw)
    np.testing.assert_allclose(op.rpm, expected, rtol=1e-9)  # Illinois on a straight line in log rpm
    np.testing.assert_allclose(op.torque_Nm, k * expected, rtol=1e-9)
    assert not op.stalled.any() and not op.runaway.any()


def test_curved_crossing_converges():
    # Q_gen = c rpm^2 against Q_prop = q0 - b rpm: rpm* = (-b + sqrt(b^2 + 4 c q0)) / (2 c).
    c = np.array([1e-5, 1e-4, 1e-3])
    q0, b = 10.0, 0.01
    op = operating_point(lambda rpm: c * rpm**2, lambda rpm: q0 - b * rpm, rpm_min=1.0, rpm_max=2000.0)
    np.testing.assert_allclose(op.rpm, (-b + np.sqrt(b * b + 4 * c * q0)) / (2 * c), rtol=1e-7)


def test_first_stable_crossing_is_chosen():
    # f = Q_prop - Q_gen has three sign changes: + -> - at 100 rpm (stable),
    # - -> + at 300 (unstable), + -> - at 600 (stable). Starting from rest
    # the shaft stops at the first one.
    f = lambda rpm: -(rpm - 100.0) * (rpm - 300.0) * (rpm - 600.0) / 1e6  # noqa: E731
    op = operating_point(lambda rpm: 5.0 - f(rpm), lambda rpm: np.full(np.shape(rpm), 5.0),
                         rpm_min=10.0, rpm_max=1000.0, n_scan=24)
    assert op.rpm == pytest.approx(100.0, rel=1e-8)
    # the slope of Q_gen - Q_prop is positive there: a stable balance
    h = 1e-3
    assert -(f(100.0 + h) - f(100.0 - h)) > 0


def test_stall_and_runaway_flags():
    prop = falling_line(4.0, 500.0)
    # generator drag at rest (bearing + cogging) above the starting torque: stall
    op = operating_point(lambda rpm: 5.0 + 0.01 * rpm, prop, rpm_min=1.0, rpm_max=1000.0)
    assert op.stalled and op.rpm == 0.0 and not op.runaway
    assert op.torque_Nm == pytest.approx(4.0 * (1 - 1 / 500))  # propeller torque at rest reported
    # propeller wins all the way to rpm_max: runaway, rpm = rpm_max
    op = operating_point(lambda rpm: 0.0 * rpm, prop, rpm_min=1.0, rpm_max=400.0)
    assert op.runaway and op.rpm == pytest.approx(400.0) and not op.stalled
    # a stable point beyond an initial dip is NOT reachable from rest: stalled
    op = operating_point(lambda rpm: np.where(rpm < 50, 6.0, 0.004 * rpm), prop, rpm_min=1.0, rpm_max=1000.0)
    assert op.stalled


def test_free_wheel_against_constant_drag_closed_form():
    # q0 (1 - rpm/rpm_fw) = d  =>  rpm = rpm_fw (1 - d/q0), by hand.
    d = np.array([0.0, 0.5, 2.0, 3.9, 4.5])
    fw = free_wheel_rpm(falling_line(4.0, 500.0), d, rpm_min=1.0, rpm_max=3000.0)
    np.testing.assert_allclose(fw.rpm[:4], 500.0 * (1 - d[:4] / 4.0), rtol=1e-8)
    assert list(fw.stalled) == [False, False, False, False, True]


def test_callable_evaluation_count_is_fixed():
    calls = {"gen": 0, "prop": 0}

    def gen(rpm):
        calls["gen"] += 1
        return 0.02 * rpm

    def prop(rpm):
        calls["prop"] += 1
        return 8.0 - 0.016 * rpm

    op = operating_point(gen, prop, rpm_min=1.0, rpm_max=1000.0, n_scan=12, n_refine=6)
    assert calls["gen"] == op.calls == 12 + 6 + 1
    assert calls["prop"] == 12 + 6


def test_loaded_point_on_propeller_table_matches_direct_model():
    # One propeller for a batch of generators: the tabulated curve and the
    # direct BEM model give the same balance (linear interpolation on a 5 rpm
    # grid of a smooth curve: well under 1 rpm).
    v = np.array([4.0, 5.0, 6.0, 7.0, 8.0]) * KNOT
    table = PropellerTable(v, rpm_max=1500.0, n_rpm=301, **TYPICAL)
    k = np.array([[0.02], [0.05], [0.1]])  # three linear generators x 5 speeds
    gen = lambda rpm: 0.25 + k * rpm  # noqa: E731
    loaded_t, free_t = loaded_operating_point(gen, table.torque, 0.25)
    direct = lambda rpm: propeller_turbine(rpm, v, **TYPICAL).torque_Nm  # noqa: E731
    loaded_d, free_d = loaded_operating_point(gen, direct, 0.25)
    assert loaded_t.rpm.shape == (3, 5)
    np.testing.assert_allclose(loaded_t.rpm, loaded_d.rpm, atol=1.0)
    np.testing.assert_allclose(free_t.rpm, free_d.rpm, atol=1.0)
    assert np.all(loaded_t.rpm < free_t.rpm)  # loading slows the shaft
    # the balance holds: propeller torque = generator torque there
    np.testing.assert_allclose(direct(loaded_d.rpm), gen(loaded_d.rpm), atol=1e-3)
    # thrust at the operating point is drag on the boat
    assert np.all(table.thrust(loaded_t.rpm) < 0)


def test_batch_of_10000_designs_by_5_speeds():
    v = np.array([4.0, 5.0, 6.0, 7.0, 8.0]) * KNOT
    table = PropellerTable(v, **TYPICAL)
    k = np.random.default_rng(3).uniform(0.0, 0.2, (10_000, 1))
    gen = lambda rpm: 0.25 + k * rpm  # noqa: E731
    t = time.perf_counter()
    loaded, free = loaded_operating_point(gen, table.torque, 0.25)
    elapsed = time.perf_counter() - t
    assert loaded.rpm.shape == (10_000, 5)
    ok = ~loaded.stalled & ~loaded.runaway
    assert ok.mean() > 0.9
    np.testing.assert_allclose(table.torque(loaded.rpm)[ok], gen(loaded.rpm)[ok], atol=1e-6)
    assert elapsed < 5.0  # generous: ~0.1 s measured on 2 cores


def test_scalar_problem():
    op = operating_point(lambda rpm: 0.01 * rpm, falling_line(6.0, 400.0), rpm_min=1.0, rpm_max=1000.0)
    assert np.ndim(op.rpm) == 0 and op.rpm == pytest.approx(6.0 / (0.01 + 6.0 / 400.0))


def test_sailing_profile_hand_sum():
    # Sum I(v) h(v) and sum F h / sum h, worked by hand:
    # 2*3 + 4*2 + 6*1 = 20 A h; (30*3 + 50*2 + 80*1)/6 = 45 N.
    ah, drag = sailing_profile([[2.0, 4.0, 6.0], [0.0, 0.0, 1.0]], [[30.0, 50.0, 80.0], [0, 0, 6.0]], [3.0, 2.0, 1.0])
    np.testing.assert_allclose(ah, [20.0, 1.0])
    np.testing.assert_allclose(drag, [45.0, 1.0])
