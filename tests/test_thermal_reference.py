"""The resolved thermal reference (optimiser/physics/thermal_reference.py) against outside results.

Sources beside each check: the exact 1-D conduction solutions with uniform generation (any heat
transfer text, e.g. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., 2007,
sec. 3.5; from memory), the first law (heat balance), the `ht` library (Churchill & Chu
correlations), and the composite-conductivity bounds of Wiener (1912) and Hashin & Shtrikman
(1962) (from memory).
"""

import numpy as np
import pytest

ht = pytest.importorskip("ht")

from optimiser.physics import thermal_reference as tr  # noqa: E402


def _column(n_cells, thickness, k, q, h_top, layers=None):
    """A thin annulus far from the axis (radially adiabatic): a 1-D wall in z."""
    r = np.array([1.0, 1.001])
    z = np.linspace(0.0, thickness, n_cells + 1)
    shape = (1, n_cells)
    zeros = np.zeros(shape)
    top = np.zeros(shape)
    top[0, -1] = h_top
    return tr.solve_cells(r, z, np.ones(shape, bool), np.full(shape, 1e-6), k * np.ones(shape),
                          q * np.ones(shape), zeros, zeros, top, zeros)


def test_slab_with_uniform_generation_peaks_at_q_L2_over_8k():
    # Slab of thickness L, both faces held at T_s (film 1e12): T_max - T_s = q L^2 / (8 k).
    # Half the slab against its symmetry plane (adiabatic), as the machine model uses it.
    L, k, q = 0.01, 0.4, 2e5
    sol = _column(80, L / 2, k, q, 1e12)
    exact = q * L ** 2 / (8 * k)
    assert abs(np.nanmax(sol.rise_K) / exact - 1) < 1e-3
    assert abs(sol.heat_out_W / sol.generated_W - 1) < 1e-9


def test_composite_wall_within_half_a_percent():
    # Generating layer A (adiabatic back) + plain layer B + film h: exact
    # T(0) = q a^2 / (2 kA) + q a (b / kB + 1 / h).
    a, b, ka, kb, q, h = 0.004, 0.002, 0.6, 0.2, 1e5, 30.0
    n_a, n_b = 40, 20
    r = np.array([1.0, 1.001])
    z = np.concatenate([np.linspace(0, a, n_a + 1), np.linspace(a, a + b, n_b + 1)[1:]])
    shape = (1, n_a + n_b)
    k = np.concatenate([np.full(n_a, ka), np.full(n_b, kb)])[None, :]
    qv = np.concatenate([np.full(n_a, q), np.zeros(n_b)])[None, :]
    top = np.zeros(shape)
    top[0, -1] = h
    z0 = np.zeros(shape)
    sol = tr.solve_cells(r, z, np.ones(shape, bool), np.full(shape, 1e-6), k, qv, z0, z0, top, z0)
    exact = q * a ** 2 / (2 * ka) + q * a * (b / kb + 1 / h)
    assert abs(np.nanmax(sol.rise_K) / exact - 1) < 5e-3


def test_radial_conduction_matches_the_cylindrical_shell():
    # Annulus r1..r2 with uniform generation, adiabatic inside, film h outside: exact
    # T(r1) - T_inf = q/(4k) (r2^2 - r1^2) - q r1^2/(2k) ln(r2/r1) + q (r2^2 - r1^2)/(2 r2 h).
    r1, r2, k, q, h = 0.05, 0.15, 1.0, 1e4, 20.0
    r = np.linspace(r1, r2, 201)
    shape = (200, 1)
    east = np.zeros(shape)
    east[-1, 0] = h
    z0 = np.zeros(shape)
    sol = tr.solve_cells(r, [0, 0.01], np.ones(shape, bool), k * np.ones(shape), k * np.ones(shape),
                         q * np.ones(shape), east, z0, z0, z0)
    exact = q / (4 * k) * (r2 ** 2 - r1 ** 2) - q * r1 ** 2 / (2 * k) * np.log(r2 / r1) + q * (r2 ** 2 - r1 ** 2) / (2 * r2 * h)
    assert abs(sol.rise_K[0, 0] / exact - 1) < 2e-3


DESIGN = dict(ring_radius_m=0.11, magnet_length_m=0.04, magnet_width_m=0.02, magnet_thickness_m=0.01,
              poles=16, coil_inner_radius_m=0.082, coil_outer_radius_m=0.138, coil_thickness_m=0.012,
              winding_area_m2=0.030, resin_skin_m=0.8e-3, stator_outer_radius_m=0.148,
              running_clearance_m=1.5e-3, disc_radius_m=0.15, disc_thickness_m=0.008, hub_radius_m=0.02,
              winding_across_W_mK=0.7, winding_along_W_mK=200.0, resin_W_mK=0.25,
              leg_inner_radius_m=0.089, leg_outer_radius_m=0.131)
"""A plausible demo-sized design (invented for the test): 16 poles of 40 x 20 x 10 mm on 110 mm."""


@pytest.mark.parametrize("rpm", [0.0, 180.0, 1000.0])
def test_machine_heat_balance_closes_to_1e_9(rpm):
    res = tr.machine_temperature(30.0, rpm, 35.0, cell_m=4e-3, emissivity=0.8, **DESIGN)
    assert abs(res.heat_out_W / res.loss_W - 1) < 1e-9
    assert res.hot_spot_rise_K > res.mean_rise_K > res.rotor_rise_K > 0


def test_grid_convergence_halving_cells_moves_the_hot_spot_under_1_percent():
    coarse = tr.machine_temperature(30.0, 180.0, 35.0, cell_m=2e-3, **DESIGN)
    fine = tr.machine_temperature(30.0, 180.0, 35.0, cell_m=1e-3, **DESIGN)
    assert abs(coarse.hot_spot_rise_K / fine.hot_spot_rise_K - 1) < 0.01


def test_faster_is_cooler_and_radiation_and_calibration_cool_it():
    base = [tr.machine_temperature(30.0, rpm, 35.0, cell_m=4e-3, **DESIGN).hot_spot_rise_K for rpm in (0, 200, 1000)]
    assert base[0] > base[1] > base[2]
    rad = tr.machine_temperature(30.0, 0.0, 35.0, cell_m=4e-3, emissivity=0.8, **DESIGN).hot_spot_rise_K
    better = tr.machine_temperature(30.0, 0.0, 35.0, cell_m=4e-3, conductance_factor=1.5, **DESIGN).hot_spot_rise_K
    assert rad < base[0] and better < base[0]


def test_horizontal_cylinder_natural_convection_matches_ht():
    # ht.conv_free_immersed.Nu_horizontal_cylinder_Churchill_Chu (Churchill & Chu 1975).
    for pr in (0.7, 0.71, 5.0):
        for ra in (1e2, 1e5, 1e8, 1e11):
            ours = tr.nusselt_horizontal_cylinder_churchill_chu(ra, pr)
            assert ours == pytest.approx(ht.conv_free_immersed.Nu_horizontal_cylinder_Churchill_Chu(pr, pr * 0 + ra / pr), rel=1e-9)


def test_winding_composite_conductivity_limits_and_bounds():
    # Limits: no fibres -> matrix; equal phases -> that value; dilute slope 2 f (kf - km)/(kf + km)
    # (Maxwell, from memory); between the Wiener bounds (series <= k <= parallel) and equal to
    # the Hashin-Shtrikman lower bound in 2-D (both from memory).
    km, kf = 0.25, 390.0
    assert tr.fibre_composite_conductivity(kf, km, 0.0) == pytest.approx(km)
    assert tr.fibre_composite_conductivity(0.7, 0.7, 0.5) == pytest.approx(0.7)
    f = 1e-6
    assert (tr.fibre_composite_conductivity(kf, km, f) - km) / (km * f) == pytest.approx(2 * (kf - km) / (kf + km), rel=1e-4)
    fr = np.linspace(0.05, 0.9, 18)
    k = tr.fibre_composite_conductivity(kf, km, fr)
    assert np.all(k >= 1 / (fr / kf + (1 - fr) / km)) and np.all(k <= fr * kf + (1 - fr) * km)
    hs_lower = km + fr / (1 / (kf - km) + (1 - fr) / (2 * km))
    np.testing.assert_allclose(k, hs_lower, rtol=1e-12)
    # a hand-wound demo coil (fill 0.8 of d_ins^2, 0.5 mm wire): across the wires between the
    # resin's 0.25 and about 1 W/(m K), along them near the copper share of 390
    across, along = tr.winding_conductivity(0.5e-3, 0.55e-3, 0.8 * np.pi / 4, km)
    assert 0.4 < across < 1.2 and along > 150


def test_evaluator_reference_thermal_model_is_near_the_fast_one_and_closes_its_own_balance():
    # Settings(thermal_model="reference"): the coil temperature from the resolved model, fed back
    # through the same electro-thermal loop. Same order as the fast network (within 40 % of the
    # rise on these designs; the benchmark states the distribution), losses consistent.
    from pathlib import Path
    from optimiser.catalogs import load_catalogs
    from optimiser.evaluate import Evaluator, Settings
    from optimiser.scenario import load_scenario
    from optimiser.search.space import SearchSpace
    cat, sc = load_catalogs(Path(__file__).resolve().parents[1] / "catalogs"), load_scenario(None)
    fast = Evaluator(cat, sc)
    space = SearchSpace(fast)
    batch = space.decode_columns(space.random_columns(20000, np.random.default_rng(11)))
    batch = batch.take(np.flatnonzero(fast.evaluate(batch).feasible)[:4])
    a = fast.evaluate(batch, rpm=360.0)
    b = Evaluator(cat, sc, Settings(thermal_model="reference")).evaluate(batch, rpm=360.0)
    rise_a, rise_b = a["coil_temperature_C"] - 35.0, b["coil_temperature_C"] - 35.0
    assert np.all(rise_b > 0) and np.all(np.abs(rise_b / rise_a - 1) < 0.4)
    assert np.all(b["magnet_temperature_C"] < b["coil_temperature_C"])
