"""Tests of optimiser.physics.propeller: momentum-theory limits, Betz's
bound, thin-airfoil theory, signs of the windmill quadrant, batches."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate

from optimiser.operating import free_wheel_rpm
from optimiser.physics.propeller import (
    SEA_WATER_DENSITY,
    betz_power,
    blade_chord,
    blade_section_coefficients,
    propeller_elements,
    propeller_turbine,
)

KNOT = 1852.0 / 3600.0  # [m/s], exact by definition of the international nautical mile
INCH = 0.0254  # [m], exact
# A common cruising-yacht propeller, 16 x 11 in (common practice, no source).
TYPICAL = dict(diameter_m=16 * INCH, pitch_m=11 * INCH, area_ratio=0.4, wake_fraction=0.1)
# Drag-free, attached-flow section: the ideal rotor of momentum theory.
IDEAL = dict(drag_zero_lift=0.0, drag_quadratic_per_rad2=0.0, stall_angle_rad=100.0)


# ------------------------------------------------------------ Betz bound

@settings(max_examples=150, deadline=None)
@given(
    diameter=st.floats(0.25, 0.6),
    pitch_ratio=st.floats(0.4, 1.4),
    blades=st.integers(2, 5),
    ear=st.floats(0.25, 0.8),
    wake=st.floats(0.0, 0.3),
    knots=st.floats(1.0, 9.0),
    rpm=st.floats(0.0, 1200.0),
)
def test_power_never_exceeds_betz_limit(diameter, pitch_ratio, blades, ear, wake, knots, rpm):
    # A. Betz, Z. ges. Turbinenwesen 26, 1920 (from memory): no disc of
    # area A takes more than 16/27 x rho/2 A V^3 from a stream. The model's
    # hydrodynamic power (no shaft friction) must respect it for any blade.
    v = knots * KNOT
    res = propeller_turbine(rpm, v, diameter, pitch_ratio * diameter, blades, ear, wake)
    assert np.isfinite(res.power_W)
    assert res.power_W <= betz_power(v, diameter, wake) * (1 + 1e-9)


def test_betz_bound_formula_against_hand_value():
    # 16/27 x 0.5 x 1025 x pi/4 x 0.4^2 x 3^3 = 1024.6... W, hand-computed.
    assert betz_power(3.0, 0.4, 0.0) == pytest.approx(16 / 27 * 0.5 * 1025 * np.pi / 4 * 0.16 * 27, rel=1e-12)


# ------------------------------------------------ momentum theory limits

def _ideal_annulus(rpm, knots=6.0, pitch_m=11 * INCH):
    # Many blades at fixed solidity (EAR fixed): Prandtl's F -> 1.
    el = propeller_elements(rpm, knots * KNOT, 16 * INCH, pitch_m, 400, 0.4, 0.0, n_stations=12, **IDEAL)
    v = knots * KNOT
    omega = np.asarray(rpm)[..., None] * np.pi / 30
    local_cp = el.torque_per_length_N * omega / (0.5 * SEA_WATER_DENSITY * v**3 * 2 * np.pi * el.radius_m)
    lam = omega * el.radius_m / v
    return el, local_cp, lam


def test_annulus_power_is_glauert_momentum_relation_drag_free():
    # H. Glauert, Airplane Propellers, in Durand, Aerodynamic Theory IV,
    # 1935 (from memory, re-derived): for a drag-free element the force is
    # normal to the relative flow, so dQ omega (1 + a') = dT V (1 - a), and
    # with dT = 4 pi r rho V^2 a (1 - a) F dr the annulus power coefficient
    # is 4 a (1 - a)^2 F / (1 + a'). The model gets dQ from blade forces,
    # so this checks the solution of the coupled equations.
    el, local_cp, _ = _ideal_annulus(rpm=np.array([350.0, 450.0, 520.0]))
    a, a2 = el.axial_induction, el.swirl_induction
    ok = (a > 0.01) & (a < 0.4)  # momentum region, not Buhl's
    assert ok.sum() > 20
    expected = 4 * a * (1 - a) ** 2 * el.loss_factor / (1 + a2)
    np.testing.assert_allclose(local_cp[ok], expected[ok], rtol=1e-4)  # root tolerance of the solver
    assert np.all(el.loss_factor[ok] > 0.99)  # 400 blades: practically no tip loss


def test_glauert_swirl_relation_ideal_rotor():
    # Glauert 1935 (from memory): for the ideal rotor, a' (1 + a') lambda_r^2
    # = a (1 - a) at every annulus (energy balance of the swirl).
    el, _, lam = _ideal_annulus(rpm=np.array([300.0, 450.0]))
    a, a2 = el.axial_induction, el.swirl_induction
    ok = (a > 0.01) & (a < 0.4) & (el.loss_factor > 0.999)
    np.testing.assert_allclose((a2 * (1 + a2) * lam**2)[ok], (a * (1 - a))[ok], rtol=2e-3)


def test_betz_glauert_cp_in_the_no_swirl_limit():
    # Betz / Glauert: C_P = 4 a (1 - a)^2 when the swirl vanishes (high
    # local speed ratio). On the outer part of a fine-pitch (P/D = 0.3),
    # fast-turning ideal rotor a' < 1 %, so the annulus power is within ~1 %
    # of 4 a (1 - a)^2, and nowhere above its maximum 16/27.
    el, local_cp, lam = _ideal_annulus(rpm=np.array([900.0, 1100.0, 1300.0]), pitch_m=0.3 * 16 * INCH)
    a = el.axial_induction
    outer = (lam > 3) & (a > 0.02) & (a < 0.4) & (el.swirl_induction < 0.01)
    assert outer.sum() > 10
    # 1/(1 + a') with a' < 1 % and F > 0.99: the relative gap is below 2 %
    np.testing.assert_allclose(local_cp[outer], 4 * a[outer] * (1 - a[outer]) ** 2, rtol=0.02)
    assert np.all(local_cp <= 16 / 27 + 1e-9)


# ----------------------------------------------------- section and chord

def test_thin_airfoil_lift_slope_and_zero_lift_angle():
    # Abbott & von Doenhoff, Theory of Wing Sections, 1959, sec. 4.3 (from
    # memory): dC_L/d alpha = 2 pi, zero lift at alpha_0 = -2 f/c for a
    # parabolic camber line. The stall blend adds < 1e-5 at 1 degree.
    h = 1e-4
    for f in (0.0, 0.02):
        a0 = -2 * f
        cl, _ = blade_section_coefficients(np.array([a0 - h, a0, a0 + h]), camber_ratio=f)
        assert abs(cl[1]) < 1e-6
        assert (cl[2] - cl[0]) / (2 * h) == pytest.approx(2 * np.pi, rel=1e-4)


def test_flat_plate_post_stall():
    # Hoerner, Fluid-Dynamic Drag, 1965 / Viterna & Corrigan 1982 (from
    # memory): flat plate C_D = 2 sin^2 a, C_L = 2 sin a cos a well past stall;
    # the blend weight at 45 and 90 deg is 1 - O(1e-12).
    cl, cd = blade_section_coefficients(np.radians([45.0, 90.0, -45.0]), camber_ratio=0.0, drag_zero_lift=0.0)
    np.testing.assert_allclose(cl, [1.0, 0.0, -1.0], atol=1e-9)
    np.testing.assert_allclose(cd, [1.0, 2.0, 1.0], atol=1e-9)


def test_chord_integrates_to_expanded_area():
    # Definition of EAR (Carlton, Marine Propellers and Propulsion, 2007,
    # ch. 3; from memory): Z x blade area = EAR x pi D^2 / 4. scipy quad is
    # the independent integrator.
    D, Z, ear, xh = 0.4, 3, 0.45, 0.2
    area, _ = integrate.quad(lambda x: blade_chord(x, D, Z, ear, xh) * D / 2, xh, 1.0, epsabs=0, epsrel=1e-10)
    assert Z * area == pytest.approx(ear * np.pi * D**2 / 4, rel=1e-8)
    assert blade_chord(1.0, D, Z, ear, xh) == 0.0 and blade_chord(xh, D, Z, ear, xh) > 0


# ---------------------------------------------------------- windmill signs

def test_torque_increases_with_boat_speed_at_fixed_rpm():
    # Physical invariant while the blades are attached (and for the held,
    # fully stalled shaft, torque ~ V^2): more inflow at the same shaft
    # speed gives more angle of attack and dynamic pressure. In between, as
    # the inflow pushes the sections into stall, torque can dip (the
    # stall-regulation effect of fixed-pitch turbines), e.g. this propeller
    # at 150 rpm from 4.5 to 5.5 kn, so those speeds are not asserted.
    knots = np.arange(3.0, 9.5, 0.5)
    rpm = np.array([0.0, 300.0, 450.0])[:, None]
    q = propeller_turbine(rpm, knots * KNOT, blades=3, **TYPICAL).torque_Nm
    assert np.all(np.diff(q, axis=-1) > 0)


def test_thrust_is_drag_in_turbine_quadrant():
    # Momentum theory: a disc that takes energy out of the stream slows it
    # and is pushed downstream, i.e. astern: negative thrust, between rest
    # and the free-wheeling speed (power >= 0 there).
    v = np.array([4.0, 6.0, 8.0]) * KNOT
    rpm = np.linspace(0.0, 400.0, 41)[:, None]
    res = propeller_turbine(rpm, v, blades=3, **TYPICAL)
    turbine = res.torque_Nm > 0
    assert turbine.sum() > 60
    assert np.all(res.thrust_N[turbine] < 0)
    assert np.all(res.power_W[turbine & (rpm > 0)] > 0)


def test_held_shaft_gives_starting_torque_and_no_power():
    res = propeller_turbine(0.0, 6 * KNOT, blades=2, **TYPICAL)
    assert res.torque_Nm > 0 and res.power_W == 0 and res.thrust_N < 0


def test_shaft_friction_is_subtracted():
    a = propeller_turbine(300.0, 6 * KNOT, blades=3, **TYPICAL)
    b = propeller_turbine(300.0, 6 * KNOT, blades=3, shaft_friction_Nm=1.5, **TYPICAL)
    assert a.torque_Nm - b.torque_Nm == pytest.approx(1.5, abs=1e-12)
    assert a.thrust_N == b.thrust_N


def test_free_wheel_below_pitch_speed():
    # Without slip a section at the pitch speed has zero geometric angle of
    # attack; camber (wrong way for a turbine), drag and induction all make
    # the torque negative there, so free-wheeling is below the pitch speed.
    knots = np.array([5.0, 6.0, 7.0])
    prop = lambda rpm: propeller_turbine(rpm, knots * KNOT, blades=3, **TYPICAL).torque_Nm  # noqa: E731
    fw = free_wheel_rpm(prop, 0.0)
    pitch_rpm = 60 * knots * KNOT * (1 - TYPICAL["wake_fraction"]) / TYPICAL["pitch_m"]
    assert np.all(~fw.stalled & ~fw.runaway)
    assert np.all(fw.rpm < pitch_rpm)


# The free-wheeling speed itself is checked against published open-water data (the Wageningen
# B-series zero-torque advance ratio, 2 and 3 blades) in test_propeller_bseries.py; the common-
# practice 150-250 rpm needs more shaft-line friction than a held propeller gives, so a boat's
# own measurement calibrates it (tests/test_calibration.py).


# ------------------------------------------------------------- shapes

def test_scalar_array_and_batch_agree():
    rng = np.random.default_rng(7)
    n = 10_000
    D = rng.uniform(0.3, 0.5, (n, 1))
    P = D * rng.uniform(0.5, 1.2, (n, 1))
    Z = rng.integers(2, 5, (n, 1))
    ear = rng.uniform(0.3, 0.6, (n, 1))
    rpm = rng.uniform(0, 600, (n, 1))
    v = np.array([4.0, 5.0, 6.0, 7.0, 8.0]) * KNOT
    batch = propeller_turbine(rpm, v, D, P, Z, ear, 0.1)
    assert batch.torque_Nm.shape == (n, 5) and np.all(np.isfinite(batch.torque_Nm))
    for i in (0, 1234, n - 1):
        one = propeller_turbine(float(rpm[i, 0]), float(v[2]), float(D[i, 0]), float(P[i, 0]), int(Z[i, 0]),
                                float(ear[i, 0]), 0.1)
        assert np.ndim(one.torque_Nm) == 0
        for got, want in zip(one, batch):
            assert got == pytest.approx(want[i, 2], rel=1e-9, abs=1e-9)
    arr = propeller_turbine(rpm[:50, 0], v[1], D[:50, 0], P[:50, 0], Z[:50, 0], ear[:50, 0], 0.1)
    np.testing.assert_allclose(arr.thrust_N, batch.thrust_N[:50, 1], rtol=1e-9)


def test_bem_residual_converged():
    # Fixed scan + Illinois steps: the remaining residual of the flow-angle
    # identity is small compared with its O(1) terms.
    el = propeller_elements(np.linspace(0, 600, 25)[:, None], np.array([3.0, 6.0, 9.0]) * KNOT, blades=3,
                            **{k: TYPICAL[k] for k in ("diameter_m", "pitch_m", "area_ratio", "wake_fraction")})
    assert np.percentile(np.abs(el.residual), 99) < 1e-4
