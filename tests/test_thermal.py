"""Tests of optimiser.physics.thermal against ht, textbook solutions and
brute-force solves of the same network."""

import time

import numpy as np
import pytest
from scipy.integrate import solve_bvp

from optimiser.physics.losses import air_properties
from optimiser.physics.thermal import (
    magnet_temperature,
    nusselt_free_disc_laminar,
    nusselt_vertical_plate_churchill_chu,
    stator_thermal_resistance,
    steady_coil_temperature,
    thermal_network,
)

# A 300 mm machine of the Kittiwake demo kind (demo geometry, not a source).
GEOM = dict(
    ring_inner_radius_m=0.07,
    ring_outer_radius_m=0.13,
    stator_outer_radius_m=0.16,
    stator_thickness_m=0.012,
    resin_skin_m=0.001,
    resin_conductivity_W_mK=0.25,
    running_clearance_m=0.002,
    air_C=25.0,
)
DISC = dict(disc_radius_m=0.15, disc_thickness_m=0.006)


# ---------------------------------------------------------------- correlations

def test_churchill_chu_matches_ht_over_all_rayleigh():
    # ht.conv_free_immersed.Nu_vertical_plate_Churchill implements the same
    # Churchill & Chu (1975) equation: agreement to rounding.
    ht_free = pytest.importorskip("ht.conv_free_immersed")
    for pr in (0.71, 0.69, 7.0):
        for gr in np.logspace(-2, 13, 31):
            ours = nusselt_vertical_plate_churchill_chu(pr * gr, pr)
            assert ours == pytest.approx(ht_free.Nu_vertical_plate_Churchill(pr, gr), rel=1e-9)


def test_churchill_chu_incropera_example_9_2():
    # Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., Example 9.2
    # (glass fireplace door): Pr 0.69, Gr 2.63e9 -> Nu_L = 147 (from memory, the
    # same case is quoted in ht's docstring). Printed to 3 figures.
    assert nusselt_vertical_plate_churchill_chu(0.69 * 2.63e9, 0.69) == pytest.approx(147.0, rel=0.005)


def von_karman_disc_nusselt_coefficient(pr):
    """-theta'(0) of the von Karman similarity solution for a disc rotating in
    still fluid, isothermal surface; h = -theta'(0) k sqrt(omega/nu), uniform
    over the face, so the face-mean Nu_R = -theta'(0) Re^0.5 (Millsaps &
    Pohlhausen 1952, from memory). Solved here with scipy's solve_bvp."""

    def rhs(x, y):
        F, Fp, G, Gp, H, T, Tp = y
        return np.vstack([Fp, F**2 - G**2 + H * Fp, Gp, 2 * F * G + H * Gp, -2 * F, Tp, pr * H * Tp])

    def bc(a, b):
        return np.array([a[0], a[2] - 1, a[4], a[5] - 1, b[0], b[2], b[5]])

    x = np.linspace(0, 20, 400)
    y = np.zeros((7, x.size))
    y[2] = y[5] = np.exp(-x)
    y[4] = -0.88 * (1 - np.exp(-x))
    sol = solve_bvp(rhs, bc, x, y, tol=1e-8, max_nodes=100_000)
    assert sol.status == 0
    f0 = sol.sol(0)
    # von Karman's constants (H. Schlichting, Boundary-Layer Theory, ch. 5; from memory):
    # F'(0) = 0.510, G'(0) = -0.616.
    assert f0[1] == pytest.approx(0.510, abs=1e-3) and f0[3] == pytest.approx(-0.616, abs=1e-3)
    return -f0[6]


def test_free_disc_laminar_close_to_similarity_solution():
    # Cobb & Saunders' measured 0.36 sits ~10 % above the laminar theory (0.326 at
    # Pr 0.71); tolerance 12 % covers that known offset.
    c = von_karman_disc_nusselt_coefficient(0.71)
    re = np.array([1e4, 1e5])
    assert np.allclose(nusselt_free_disc_laminar(re), c * np.sqrt(re), rtol=0.12)
    assert nusselt_free_disc_laminar(0.0) == 0.0


# ---------------------------------------------------------------- network

def test_thermal_resistance_finite_at_rest_and_falls_with_speed():
    # Invariant: natural convection alone at 0 rpm; more shear and pumping never hurt.
    rpm = np.linspace(0, 3000, 3001)
    r = stator_thermal_resistance(rpm, **GEOM, **DISC)
    assert np.all(np.isfinite(r)) and np.all(r > 0)
    assert np.all(np.diff(r) <= 0)
    assert r[-1] < 0.5 * r[0]
    # no jumps through the gap and disc regime changes: < 0.5 % per rpm step (the
    # steepest, ~0.26 %, is near 25 rpm where forced convection overtakes natural)
    assert np.max(np.abs(np.diff(r)) / r[1:]) < 5e-3


def test_still_gap_is_fourier_conduction_through_the_air_film():
    # Fourier's law through two parallel air films of thickness s over the ring
    # area (Incropera ch. 3): R = s / (2 k A) at 0 rpm, k of air at the film
    # temperature (Incropera Table A.4 via the air model, checked in test_losses).
    net = thermal_network(0.0, **GEOM, **DISC)
    area = np.pi * (0.13**2 - 0.07**2)
    k = air_properties(25.0 + 20.0).conductivity_W_mK
    assert net.face_to_rotors_K_W == pytest.approx(0.002 / (2 * k * area), rel=1e-12)
    # slab with uniform heating (mean rise q t^2/(12k)) plus two 1 mm skins
    assert net.coil_to_face_K_W == pytest.approx(0.010 / (12 * 0.25 * area) + 0.001 / (2 * 0.25 * area), rel=1e-12)


def test_radiation_option_only_lowers_resistance():
    r0 = stator_thermal_resistance(np.array([0.0, 1500.0]), **GEOM, **DISC)
    r9 = stator_thermal_resistance(np.array([0.0, 1500.0]), **GEOM, **DISC, emissivity=0.9)
    assert np.all(r9 < r0) and r9[0] > 0


def test_magnet_temperature_matches_linear_solve_of_the_network():
    # Independent oracle: nodal equations of the same 2-node network solved with
    # numpy.linalg.solve (coil node held at T_c).
    net = thermal_network(np.array([0.0, 180.0, 1500.0]), **GEOM, **DISC)
    tc, ta, q = 110.0, 25.0, 3.0
    out = magnet_temperature(tc, ta, net, rotor_heat_W=q)
    for i in range(3):
        rcf, rfr, rra, rfa = (x[i] for x in net[:4])
        a = np.array([[1 / rcf + 1 / rfr + 1 / rfa, -1 / rfr], [-1 / rfr, 1 / rfr + 1 / rra]])
        b = np.array([tc / rcf + ta / rfa, ta / rra + q])
        assert out[i] == pytest.approx(np.linalg.solve(a, b)[1], rel=1e-12)
    assert np.all((magnet_temperature(tc, ta, net) > ta) & (magnet_temperature(tc, ta, net) < tc))


def test_thermal_network_batch_of_20000_designs():
    rng = np.random.default_rng(11)
    n = 20_000
    ri = rng.uniform(0.04, 0.09, n)
    ro = ri + rng.uniform(0.03, 0.07, n)
    geom = dict(GEOM, ring_inner_radius_m=ri, ring_outer_radius_m=ro, stator_outer_radius_m=ro + 0.02)
    rpm = rng.uniform(0, 1500, n)
    t0 = time.perf_counter()
    r = stator_thermal_resistance(rpm, **geom, disc_radius_m=ro + 0.01)
    elapsed = time.perf_counter() - t0
    assert r.shape == (n,) and np.all(np.isfinite(r) & (r > 0))
    assert elapsed < 1.0  # vectorised: ~10 ms expected
    i = 777
    one = stator_thermal_resistance(rpm[i], **dict(geom, ring_inner_radius_m=ri[i], ring_outer_radius_m=ro[i],
                                                   stator_outer_radius_m=ro[i] + 0.02), disc_radius_m=ro[i] + 0.01)
    assert np.ndim(one) == 0 and one == pytest.approx(r[i], rel=1e-12)


# ---------------------------------------------------------------- fixed point

def brute_iteration(p20, alpha, other, r, ta, n_iter=2000):
    t = np.full(np.broadcast(p20, r).shape, float(ta))
    for _ in range(n_iter):
        t = ta + r * (p20 * (1 + alpha * (t - 20)) + other)
    return t


def test_closed_form_coil_temperature_equals_brute_iteration():
    # Independent oracle: plain fixed-point iteration of the heat balance.
    p20 = np.array([10.0, 50.0, 120.0, 200.0])
    r = np.array([2.0, 1.5, 0.7, 1.0])
    t, runaway = steady_coil_temperature(p20, 0.00393, 5.0, r, 25.0)
    assert not runaway.any()
    assert np.allclose(t, brute_iteration(p20, 0.00393, 5.0, r, 25.0), rtol=1e-10)


def test_runaway_flag_when_loss_outgrows_cooling():
    alpha, r = 0.00393, 2.0
    p_crit = 1 / (alpha * r)
    t, runaway = steady_coil_temperature(np.array([0.99 * p_crit, p_crit, 1.5 * p_crit]), alpha, 0.0, r, 25.0)
    assert list(runaway) == [False, True, True]
    assert np.isfinite(t[0]) and t[0] > 1000 and np.all(np.isinf(t[1:]))
    # brute iteration confirms the divergence
    assert brute_iteration(1.5 * p_crit, alpha, 0.0, r, 25.0, n_iter=200) > 1e6


def test_steady_coil_temperature_scalar_and_batch():
    t, run = steady_coil_temperature(0.0, 0.00393, 0.0, 1.0, 25.0)
    assert np.ndim(t) == 0 and t == pytest.approx(25.0) and not run
    rng = np.random.default_rng(3)
    p20 = rng.uniform(0, 300, 10_000)
    t, run = steady_coil_temperature(p20, 0.00393, 2.0, 1.2, 30.0)
    assert t.shape == (10_000,) and np.all(np.isinf(t) == run)
