"""Tests of optimiser.physics.losses against published values and
independent solutions."""

import numpy as np
import pytest
from scipy import integrate, special

from optimiser.physics.losses import (
    MU_0,
    air_properties,
    bearing_loss,
    daily_nece_moment_coefficient,
    eddy_loss_density_round_wire,
    eddy_loss_round_wire,
    skin_depth,
    windage_loss,
)

RHO_CU_20 = 1e-6 / 58.0  # IEC 60028: 1/58 ohm mm^2/m


def exact_round_wire_loss_density(frequency_Hz, b_peak_T, diameter_m, resistivity):
    """Exact eddy loss density of a round conductor in a uniform transverse
    sinusoidal field (J. Lammeraner and M. Stafl, Eddy Currents, 1966, the
    cylinder in a transverse field; from memory, re-derived here):
    A_z = C I_1(k r) sin(theta) inside, k^2 = j omega mu0 sigma,
    C = 2 B / (k I_0(k a)) from continuity of A and dA/dr at r = a,
    P' = (pi/2) sigma omega^2 |C|^2 int_0^a |I_1(k r)|^2 r dr per metre.
    Integrated with scipy.integrate.quad, independently of the code."""
    a = diameter_m / 2
    omega = 2 * np.pi * frequency_Hz
    sigma = 1 / resistivity
    k = np.sqrt(1j * omega * MU_0 * sigma)
    c = 2 * b_peak_T / (k * special.iv(0, k * a))
    integral, _ = integrate.quad(lambda r: abs(special.iv(1, k * r)) ** 2 * r, 0, a, epsabs=0, epsrel=1e-12)
    return np.pi / 2 * sigma * omega**2 * abs(c) ** 2 * integral / (np.pi * a * a)


# ---------------------------------------------------------------- eddy loss

def test_eddy_density_model_md_check_1mm_50Hz_half_tesla():
    # /work/shared/MODEL.md: d 1 mm, 50 Hz, 0.5 T -> 44.7 kW/m^3 (printed to 3 figures).
    p = eddy_loss_density_round_wire(50.0, 0.5**2, 1e-3, RHO_CU_20)
    assert p == pytest.approx(44.7e3, rel=1.5e-3)


@pytest.mark.parametrize("d_over_delta, tol", [(0.1, 1e-5), (0.3, 1e-4), (0.5, 1e-3), (1.0, 0.01)])
def test_eddy_density_matches_exact_bessel_solution_below_one_skin_depth(d_over_delta, tol):
    # Exact solution: see exact_round_wire_loss_density (Lammeraner & Stafl 1966, from memory).
    # The leading term's error grows as (d/delta)^4: < 1 % up to d = delta.
    f = 200.0
    d = d_over_delta * skin_depth(f, RHO_CU_20)
    approx = eddy_loss_density_round_wire(f, 0.3**2, d, RHO_CU_20)
    exact = exact_round_wire_loss_density(f, 0.3, d, RHO_CU_20)
    assert approx >= exact  # first term neglects the eddy currents' own opposing field
    assert approx / exact - 1 < tol


def test_eddy_density_departs_from_exact_solution_above_skin_depth():
    # Same exact solution; the documented validity limit must be real: at d = 3 delta
    # the first term overestimates by tens of percent.
    f = 50.0
    d = 3 * skin_depth(f, RHO_CU_20)
    ratio = eddy_loss_density_round_wire(f, 0.25, d, RHO_CU_20) / exact_round_wire_loss_density(f, 0.5, d, RHO_CU_20)
    assert 1.3 < ratio < 2.0


def test_skin_depth_copper_60Hz_handbook():
    # Common-practice value: copper at 60 Hz, delta ~ 8.5 mm (quoted in most EE texts; from memory).
    assert skin_depth(60.0, RHO_CU_20) == pytest.approx(8.5e-3, rel=0.01)
    assert np.isinf(skin_depth(0.0, RHO_CU_20))


def test_eddy_loss_sums_harmonics_and_components():
    # Invariant: total over harmonics = sum of one-harmonic calls; loss ~ f^2 d^2 / rho.
    orders = np.arange(1, 10, 2)
    f = 40.0 * orders
    bz2 = 0.4**2 / orders**3
    bx2 = 0.2**2 / orders**3
    d, vol = 1.2e-3, 2e-4
    total = eddy_loss_round_wire(f, bz2 + bx2, d, RHO_CU_20, vol)
    parts = sum(
        eddy_loss_round_wire(f[i : i + 1], bz2[i : i + 1], d, RHO_CU_20, vol)
        + eddy_loss_round_wire(f[i : i + 1], bx2[i : i + 1], d, RHO_CU_20, vol)
        for i in range(len(orders))
    )
    assert total == pytest.approx(parts, rel=1e-12)
    assert eddy_loss_round_wire(2 * f, bz2, 2 * d, 2 * RHO_CU_20, vol) == pytest.approx(
        8 * eddy_loss_round_wire(f, bz2, d, RHO_CU_20, vol), rel=1e-12
    )


def test_eddy_loss_scalar_array_batch():
    # Scalar: one harmonic as a bare number gives a 0-d result.
    s = eddy_loss_round_wire(50.0, 0.25, 1e-3, RHO_CU_20, 1e-3)
    assert np.ndim(s) == 0 and s == pytest.approx(44.72, rel=1e-3)
    rng = np.random.default_rng(4)
    n, h = 10_000, 5
    orders = np.arange(1, 2 * h, 2)
    f1 = rng.uniform(10, 200, n)
    b2 = rng.uniform(0, 0.5, (n, h)) / orders**2
    d = rng.uniform(0.5e-3, 2.5e-3, n)
    out = eddy_loss_round_wire(f1[:, None] * orders, b2, d, RHO_CU_20, 1e-3)
    assert out.shape == (n,)
    i = 1234
    assert out[i] == pytest.approx(eddy_loss_round_wire(f1[i] * orders, b2[i], d[i], RHO_CU_20, 1e-3), rel=1e-12)


# ---------------------------------------------------------------- air

# Incropera, DeWitt et al., Fundamentals of Heat and Mass Transfer, 6th ed., Table A.4,
# air at 1 atm (from memory): T [K], rho, mu*1e7, k*1e3, Pr.
INCROPERA_A4 = [(300, 1.1614, 184.6, 26.3, 0.707), (350, 0.9950, 208.2, 30.0, 0.700)]


@pytest.mark.parametrize("T, rho, mu7, k3, pr", INCROPERA_A4)
def test_air_properties_incropera_table_A4(T, rho, mu7, k3, pr):
    # Tolerance 1 %: the table is printed to 3-4 figures and c_p is held constant here.
    # Density 1.5 %: the table's density column sits ~1.3 % below the ideal gas at
    # 1 atm (1.1614 vs 101325/(287.05*300) = 1.1766); ideal gas is checked against
    # fluids below.
    a = air_properties(T - 273.15)
    assert a.density_kg_m3 == pytest.approx(rho, rel=0.015)
    assert a.viscosity_Pa_s == pytest.approx(mu7 * 1e-7, rel=0.01)
    assert a.conductivity_W_mK == pytest.approx(k3 * 1e-3, rel=0.01)
    assert a.prandtl == pytest.approx(pr, rel=0.01)


def test_air_properties_vs_fluids_standard_atmosphere():
    # fluids.atmosphere.ATMOSPHERE_1976 (U.S. Standard Atmosphere 1976) at sea level,
    # temperature shifted by dT; its own Sutherland-type constants, so 1 % agreement.
    fluids_atm = pytest.importorskip("fluids.atmosphere")
    temps = np.array([-10.0, 20.0, 60.0, 120.0])
    a = air_properties(temps)
    for i, t in enumerate(temps):
        ref = fluids_atm.ATMOSPHERE_1976(0.0, dT=t + 273.15 - 288.15)
        assert a.density_kg_m3[i] == pytest.approx(ref.rho, rel=1e-3)
        assert a.viscosity_Pa_s[i] == pytest.approx(ref.mu, rel=0.01)
        assert a.conductivity_W_mK[i] == pytest.approx(ref.k, rel=0.01)
    big = air_properties(np.linspace(0, 80, 10_000))
    assert big.prandtl.shape == (10_000,) and np.all(np.abs(big.prandtl - 0.705) < 0.015)


# ---------------------------------------------------------------- windage

def test_daily_nece_regime_I_is_couette_flow_both_faces():
    # Newton's law of viscosity, laminar Couette flow in a gap s on each face:
    # tau = mu omega r / s, M = 2 * int tau r 2 pi r dr = pi mu omega R^4 / s (textbook).
    mu, rho, omega, R, s = 1.8e-5, 1.2, 0.5, 0.15, 0.002
    expected = np.pi * mu * omega * R**4 / s
    cm, regime = daily_nece_moment_coefficient(rho * omega * R**2 / mu, s / R)
    assert regime == 0
    assert cm * 0.5 * rho * omega**2 * R**5 == pytest.approx(expected, rel=1e-12)
    assert windage_loss(omega, R, s, rho, mu, n_discs=1) == pytest.approx(expected * omega, rel=1e-12)


@pytest.mark.parametrize("gap_ratio", [0.005, 0.0133, 0.05, 0.2])
def test_daily_nece_envelope_continuous_and_regimes_in_order(gap_ratio):
    # Invariant (no source): the coefficient changes smoothly through regime changes
    # (steps of 0.25 % in Re give < 0.3 % change) and turbulent regimes follow laminar.
    re = np.logspace(2, 8, 6001)
    cm, regime = daily_nece_moment_coefficient(re, gap_ratio)
    assert np.max(np.abs(np.diff(np.log(cm)))) < 3e-3
    assert np.all(np.diff(cm) < 0)
    laminar = regime <= 1
    assert not np.any(laminar[np.argmax(~laminar):])  # once turbulent, stays turbulent
    assert regime[-1] in (2, 3)


def test_windage_small_at_sailing_speed():
    # Sanity, not a source: a 300 mm disc pair at 200 rpm with 2 mm clearances
    # wastes far less than 0.1 W; at 1500 rpm a few watts at most.
    a = air_properties(25.0)
    w = windage_loss(np.array([0.0, 200.0, 1500.0]) * np.pi / 30, 0.15, 0.002, a.density_kg_m3, a.viscosity_Pa_s)
    assert w[0] == 0.0
    assert 0 < w[1] < 0.1
    assert w[1] < w[2] < 10.0


def test_windage_batch():
    rng = np.random.default_rng(7)
    n = 10_000
    omega = rng.uniform(0, 160, n)
    R = rng.uniform(0.08, 0.2, n)
    a = air_properties(rng.uniform(0, 50, n))
    w = windage_loss(omega, R, 0.002, a.density_kg_m3, a.viscosity_Pa_s)
    assert w.shape == (n,) and np.all(np.isfinite(w)) and np.all(w >= 0)
    i = 99
    assert w[i] == pytest.approx(windage_loss(omega[i], R[i], 0.002, a.density_kg_m3[i], a.viscosity_Pa_s[i]))


def test_bearing_loss_power_is_torque_times_speed():
    # Definition P = M omega.
    assert bearing_loss(100.0, 0.2) == pytest.approx(20.0)
    out = bearing_loss(np.linspace(0, 150, 10_000), 0.3)
    assert out.shape == (10_000,) and out[-1] == pytest.approx(45.0)
