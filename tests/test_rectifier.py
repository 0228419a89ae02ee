"""Tests of optimiser.physics.rectifier (six-diode bridge into a battery, delta helpers, cut-in)."""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import brentq

from optimiser.physics.rectifier import (
    bridge_inductive,
    bridge_resistive,
    bridge_resistive_from_spreads,
    bridge_spreads,
    cut_in_speed_rpm,
    delta_circulating_current,
    delta_circulating_from_harmonics,
    delta_to_star,
    peak_line_emf,
    sixth_symmetry_error,
)

SHIFT = np.array([0.0, -2 * np.pi / 3, -4 * np.pi / 3])[:, None]


def balanced(M=72, amplitudes=(1.0,), phases=None, scale=1.0):
    """Balanced positive-sequence set, odd harmonics 1, 3, 5 ... with given peak amplitudes."""
    theta = 2 * np.pi * np.arange(M) / M
    phases = phases or (0.0,) * len(amplitudes)
    e = sum(a * np.cos((2 * k + 1) * (theta + SHIFT) + p)
            for k, (a, p) in enumerate(zip(amplitudes, phases)))
    return scale * e


def random_batch(rng, n, M=72):
    amp = np.stack([rng.uniform(5, 40, n), rng.uniform(-6, 6, n), rng.uniform(-3, 3, n)], 1)
    theta = 2 * np.pi * np.arange(M) / M
    e = sum(amp[:, k, None, None] * np.cos((2 * k + 1) * (theta + SHIFT) + rng.uniform(0, 6, (n, 1, 1)))
            for k in range(3))
    return e


# ---------------------------------------------------------------- textbook checks


def test_no_load_mean_dc_voltage_1p35_VLL_Mohan_ch5():
    # Mohan, Undeland & Robbins, Power Electronics, 3rd ed. 2003, ch. 5 (three-phase full bridge,
    # L_s = 0): V_do = 3 sqrt(2) / pi V_LL,rms = 1.35 V_LL [from memory]. R = 0, V_d = 0,
    # V_b = 0, R_b = 1 ohm makes I = e_max - e_min, the open-circuit DC waveform. Sampling error
    # of the kinked waveform is ~ (2 pi / M)^2 / 24 = 1e-7 for M = 3600: tolerance 1e-6.
    E_rms = 10.0
    e = balanced(3600, (np.sqrt(2) * E_rms,))
    res = bridge_resistive(e, 0.0, 0.0, 0.0, 1.0)
    V_LL = np.sqrt(3) * E_rms
    assert res.dc_voltage_V == pytest.approx(3 * np.sqrt(2) / np.pi * V_LL, rel=1e-6)
    # the stiff-current-source mode of the inductive solver with negligible L gives the same
    stiff = bridge_inductive(e[:, ::10], 0.0, 1e-9, 2 * np.pi * 50, 0.0, 0.0, 0.0,
                             dc_current_source_A=1.0, n_periods=2)
    assert stiff.dc_voltage_V == pytest.approx(3 * np.sqrt(2) / np.pi * V_LL, rel=1e-4)


@pytest.mark.parametrize("I_d", [1.0, 5.0])
def test_commutation_drop_3_over_pi_omega_L_I_Mohan_ch5(I_d):
    # Mohan, Undeland & Robbins, Power Electronics, 3rd ed. 2003, ch. 5: with AC-side L_s and a
    # constant DC current I_d, V_d = 1.35 V_LL - (3 / pi) omega L_s I_d [from memory], valid for
    # overlap u < 60 deg (here u = 13 and 29 deg). Done with the solver's stiff DC current source
    # mode (our battery circuit has no DC inductor). Tolerance: 1 % of the drop; the stepping is
    # first order at the diode events and measured 0.08 % with 5760 steps per period.
    E_rms, w, Ls = 10.0, 2 * np.pi * 50, 1e-3
    e = balanced(360, (np.sqrt(2) * E_rms,))
    res = bridge_inductive(e, 0.0, Ls, w, 0.0, 0.0, 0.0, dc_current_source_A=I_d,
                           substeps=16, n_periods=2)
    V_do = 3 * np.sqrt(2) / np.pi * np.sqrt(3) * E_rms
    drop = V_do - res.dc_voltage_V
    assert drop == pytest.approx(3 / np.pi * w * Ls * I_d, rel=1e-2)


# ---------------------------------------------------------------- resistive bridge: exactness


def brute_force_dc_current(e3, R, Vd, Vb, Rb):
    """Generic nested root finding, no conduction patterns: for a DC current I the rail spacing
    is D = V_b + R_b I + 2 V_d (in EMF terms A - B); the + rail level A balances the upper and
    lower currents; the bridge then delivers sum (e_k - A)^+ / R, which must equal I."""
    def bridge_current(I):
        D = Vb + Rb * I + 2 * Vd
        if e3.max() - e3.min() <= D:
            return 0.0
        kcl = lambda A: np.maximum(e3 - A, 0).sum() - np.maximum(A - D - e3, 0).sum()  # noqa
        A = brentq(kcl, e3.min() + D - 1.0, e3.max() + 1.0, xtol=1e-14, rtol=1e-15)
        return np.maximum(e3 - A, 0).sum() / R
    f = lambda I: bridge_current(I) - I  # noqa: E731
    if f(0.0) <= 0:
        return 0.0
    return brentq(f, 0.0, (e3.max() - e3.min()) / (2 * R + Rb) * 2 + 1, xtol=1e-13, rtol=1e-14)


def test_bridge_resistive_matches_brute_force_root_finding_on_random_samples():
    # independent oracle: scipy.optimize.brentq on the node equations at each instant
    rng = np.random.default_rng(7)
    n = 300
    e = rng.normal(0, 10, (n, 3, 1))
    R = rng.uniform(0.01, 1.0, n)
    Vd = rng.uniform(0, 1.0, n)
    Vb = rng.uniform(0, 15.0, n)
    Rb = rng.uniform(0, 0.5, n)
    res = bridge_resistive(e, R, Vd, Vb, Rb)
    ref = np.array([brute_force_dc_current(e[k, :, 0], R[k], Vd[k], Vb[k], Rb[k]) for k in range(n)])
    assert np.count_nonzero(ref) > 100   # the batch exercises conduction
    np.testing.assert_allclose(res.dc_current_A, ref, rtol=1e-9, atol=1e-10)


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), R=st.one_of(st.just(0.0), st.floats(1e-3, 2.0)),
       Vd=st.floats(0.0, 1.5), Vb=st.floats(0.0, 30.0),
       Rb=st.one_of(st.just(0.0), st.floats(1e-3, 1.0)))
def test_bridge_resistive_instantaneous_energy_balance(seed, R, Vd, Vb, Rb):
    # Invariant: at every sample sum e_k i_k = R sum i_k^2 + V_d sum |i_k| + V_b I + R_b I^2
    # (each phase current passes exactly one diode), computed from the phase-ordered waveforms.
    if 2 * R + Rb == 0:   # no resistance at all: the current is unbounded, not a valid input
        Rb = 0.1
    rng = np.random.default_rng(seed)
    e = random_batch(rng, 20)
    res = bridge_resistive(e, R, Vd, Vb, Rb, waveforms=True)
    i = res.phase_current_waveform_A
    I = res.dc_current_waveform_A
    np.testing.assert_allclose(i.sum(axis=1), 0.0, atol=1e-12 * (1 + np.abs(i).max()))
    np.testing.assert_allclose(np.abs(i).sum(axis=1), 2 * I, rtol=1e-12, atol=1e-12)
    p_in = (e * i).sum(axis=1)
    p_out = R * (i * i).sum(axis=1) + Vd * np.abs(i).sum(axis=1) + Vb * I + Rb * I * I
    scale = (np.abs(e) * np.abs(i)).sum(axis=1).max() + 1e-300
    assert np.abs(p_in - p_out).max() <= 1e-12 * scale
    # and the period means reported by the fast path
    fast = bridge_resistive(e, R, Vd, Vb, Rb)
    total = fast.copper_loss_W + fast.diode_loss_W + fast.battery_power_W + fast.dc_resistance_loss_W
    assert np.abs(fast.electrical_power_W - total).max() <= 1e-12 * scale
    np.testing.assert_allclose(fast.electrical_power_W, p_in.mean(-1), rtol=1e-12, atol=1e-12 * scale)
    np.testing.assert_allclose(fast.phase_current_rms_A, np.sqrt((i * i).mean(-1).mean(-1)),
                               rtol=1e-12, atol=1e-12)


def test_bridge_resistive_sixth_symmetry_path_equals_general_path():
    rng = np.random.default_rng(3)
    n = 500
    amp = rng.uniform(5, 40, n)[:, None, None]
    e = balanced(72, (1.0, 0.15, -0.05), (0.0, 0.3, 1.0)) * amp
    assert sixth_symmetry_error(e).max() < 1e-12
    R = rng.uniform(0.05, 1.0, n)
    full = bridge_resistive(e, R, 0.7, 14.2, 0.02, per_phase=True)
    sixth = bridge_resistive(e, R, 0.7, 14.2, 0.02, assume_sixth_symmetry=True)
    for name in ("dc_current_A", "dc_current_rms_A", "copper_loss_W", "electrical_power_W",
                 "phase_current_rms_each_A"):
        np.testing.assert_allclose(getattr(sixth, name), getattr(full, name), rtol=1e-10,
                                   atol=1e-12)
    # a balanced set: the three phases carry the same rms current
    np.testing.assert_allclose(full.phase_current_rms_each_A, full.phase_current_rms_A[:, None]
                               * np.ones(3), rtol=1e-10, atol=1e-12)
    # an unbalanced set is detected
    e_bad = e.copy()
    e_bad[:, 1] *= 1.05
    assert sixth_symmetry_error(e_bad).min() > 1e-3


def test_bridge_from_spreads_of_a_scaled_set_equals_the_bridge_of_the_scaled_set():
    # The spreads of e scale with e: the bridge of (scale x e) from the spreads of e equals the
    # bridge fed the scaled waveforms (rounding only), cut-in and three-phase samples included.
    rng = np.random.default_rng(7)
    n = 3000
    e = random_batch(rng, n)[..., :12] / 20.0
    scale = rng.uniform(0.0, 60.0, n)
    R = rng.uniform(0.0, 2.0, n)
    ref = bridge_resistive(e * scale[:, None, None], R, 0.7, 14.2, 0.03)
    got = bridge_resistive_from_spreads(*bridge_spreads(e), scale, R, 0.7, 14.2, 0.03)
    assert np.any(ref.dc_current_A == 0) and np.any(ref.dc_current_A > 1.0)
    for name in ("dc_current_A", "dc_current_rms_A", "dc_voltage_V", "phase_current_rms_A",
                 "diode_loss_W", "battery_power_W", "copper_loss_W", "electrical_power_W"):
        a, b = getattr(ref, name), getattr(got, name)
        np.testing.assert_allclose(b, a, rtol=1e-12, atol=1e-12 * np.abs(a).max(), err_msg=name)


def test_delta_circulating_from_harmonics_one_harmonic_phasor():
    # the same per-harmonic phasor solution as below, from the harmonic's mean square
    E3, R, L, w = 2.0, 0.4, 2e-4, 2 * np.pi * 60
    i_rms, loss = delta_circulating_from_harmonics(np.array([[0.0, E3**2 / 2]]), [1, 3], R, L, w)
    expect = E3 / np.sqrt(2) / abs(R + 3j * w * L)
    assert i_rms[0] == pytest.approx(expect, rel=1e-12)
    assert loss[0] == pytest.approx(3 * R * expect**2, rel=1e-12)


def test_zero_sequence_emf_drives_no_current():
    # floating star neutral: adding a common (triplen) EMF to all phases changes nothing
    e = balanced(72, (30.0,))
    common = 7.0 * np.cos(3 * 2 * np.pi * np.arange(72) / 72)
    a = bridge_resistive(e, 0.2, 0.7, 14.2, 0.05)
    b = bridge_resistive(e + common, 0.2, 0.7, 14.2, 0.05)
    assert b.dc_current_A == pytest.approx(a.dc_current_A, rel=1e-13)
    assert b.electrical_power_W == pytest.approx(a.electrical_power_W, rel=1e-12)


# ---------------------------------------------------------------- inductive bridge


def test_bridge_inductive_tends_to_bridge_resistive_as_L_to_0():
    # same sample grid (substeps=1) so only the inductance differs; omega L / R = 1e-5
    rng = np.random.default_rng(11)
    e = random_batch(rng, 50)
    R = rng.uniform(0.05, 1.0, 50)
    w = 2 * np.pi * 30.0
    res = bridge_resistive(e, R, 0.7, 14.2, 0.05)
    ind = bridge_inductive(e, R, 1e-5 * R / w, w, 0.7, 14.2, 0.05, substeps=1, n_periods=2)
    np.testing.assert_allclose(ind.dc_current_A, res.dc_current_A, rtol=1e-3, atol=1e-6)
    np.testing.assert_allclose(ind.copper_loss_W, res.copper_loss_W, rtol=2e-3, atol=1e-6)


def test_bridge_inductive_balances_energy_over_a_period():
    # energy balance holds on average over a period up to the stored-energy change (zero in
    # periodic steady state) and the numerical dissipation of backward Euler at the diode
    # events (measured ~3e-4 of the input power with the default 288 steps): tolerance 2e-3
    rng = np.random.default_rng(5)
    n = 200
    e = random_batch(rng, n)
    R = rng.uniform(0.05, 1.0, n)
    w = 2 * np.pi * 40.0
    x = rng.uniform(0.01, 2.0, n)
    ind = bridge_inductive(e, R, x * R / w, w, 0.7, 14.2, 0.05)
    total = ind.copper_loss_W + ind.diode_loss_W + ind.battery_power_W + ind.dc_resistance_loss_W
    on = ind.electrical_power_W > 1.0
    assert on.sum() > 50
    np.testing.assert_allclose(total[on], ind.electrical_power_W[on], rtol=2e-3)
    assert np.nanmax(ind.steady_state_residual) < 1e-3


# ---------------------------------------------------------------- cut-in


def test_cut_in_speed_current_zero_below_positive_above_and_monotonic():
    Vb, Vd = 14.2, 0.7
    shape = balanced(72, (1.0, 0.2, 0.05))           # EMF per rpm shape incl. harmonics
    k = peak_line_emf(shape) / 100.0                   # V/rpm at 100 rpm for unit shape
    n_cut = cut_in_speed_rpm(k, Vb, Vd)
    speeds = n_cut * np.array([0.5, 0.9, 0.999, 1.001, 1.1, 1.5, 2.0, 3.0])
    e = shape[None] * (speeds / 100.0)[:, None, None]
    for res in (bridge_resistive(e, 0.3, Vd, Vb, 0.05),
                bridge_inductive(e, 0.3, 1e-4, 2 * np.pi * 30, Vd, Vb, 0.05)):
        I = res.dc_current_A
        assert np.all(I[:3] == 0.0)
        assert np.all(I[3:] > 0.0)
        assert np.all(np.diff(I) >= 0.0) and np.all(np.diff(I[3:]) > 0.0)


# ---------------------------------------------------------------- delta connection


def test_delta_to_star_balanced_magnitude_and_phase():
    # Kennelly (1899) delta-star equivalence: balanced delta of E -> star E / sqrt(3) lagging
    # e_ab by 30 deg, impedance / 3 [textbook, from memory]
    M = 72
    theta = 2 * np.pi * np.arange(M) / M
    e_delta = 10.0 * np.cos(theta + SHIFT)
    e_star, R_s, L_s = delta_to_star(e_delta, 0.6, 3e-4)
    np.testing.assert_allclose(e_star[0], 10.0 / np.sqrt(3) * np.cos(theta - np.pi / 6), atol=1e-12)
    assert (R_s, L_s) == pytest.approx((0.2, 1e-4))
    # line voltages are preserved: e_a - e_b = e_ab minus its zero-sequence part
    np.testing.assert_allclose(e_star[0] - e_star[1], e_delta[0] - e_delta.mean(0), atol=1e-12)


def test_delta_circulating_current_of_third_harmonic():
    # per-harmonic phasor solution I3 = E3 / |R + j 3 omega L| (triplens are in phase round the
    # delta); the fundamental does not circulate
    M, E1, E3, R, L, w = 72, 20.0, 2.0, 0.4, 2e-4, 2 * np.pi * 60
    theta = 2 * np.pi * np.arange(M) / M
    e = E1 * np.cos(theta + SHIFT) + E3 * np.cos(3 * (theta + SHIFT) + 0.3)
    i_rms, loss = delta_circulating_current(e, R, L, w)
    expect = E3 / np.sqrt(2) / abs(R + 3j * w * L)
    assert i_rms == pytest.approx(expect, rel=1e-12)
    assert loss == pytest.approx(3 * R * expect**2, rel=1e-12)
    assert delta_circulating_current(E1 * np.cos(theta + SHIFT), R, L, w)[0] < 1e-12


def test_delta_copper_loss_splits_into_line_and_circulating_parts():
    # Independent check by nodal analysis of the full delta (branch EMFs with triplens, feeding a
    # balanced star resistive load) per harmonic with numpy.linalg.solve: branch copper loss =
    # 3 R_star I_line_rms^2 + 3 R_delta I_circ_rms^2 (orthogonality of the circulating current).
    Rd, Ld, w, R_load = 0.5, 3e-4, 2 * np.pi * 50, 2.0
    harmonics = {1: 20.0, 3: 3.0, 5: 1.0}
    loss_branch = 0.0
    line_sq = 0.0
    for h, E in harmonics.items():
        Zd = Rd + 1j * h * w * Ld
        Eab = E * np.exp(-1j * h * np.array([0, 2, 4]) * np.pi / 3)  # ab, bc, ca
        # unknowns: terminal potentials Va, Vb, Vc, load neutral Vn (Vc = 0 reference -> drop)
        # branch xy current i_xy = (E_xy - (V_x - V_y)) / Zd flows from y to x inside the source
        # with the orientation e_xy = v_x - v_y at no load.
        pairs = ((0, 1), (1, 2), (2, 0))
        Y = np.zeros((4, 4), complex)
        J = np.zeros(4, complex)
        for k, (x, y) in enumerate(pairs):
            # current Eab/Zd injected into x, out of y; admittance 1/Zd between x and y
            J[x] += Eab[k] / Zd
            J[y] -= Eab[k] / Zd
            for p, q in ((x, x), (y, y)):
                Y[p, q] += 1 / Zd
            Y[x, y] -= 1 / Zd
            Y[y, x] -= 1 / Zd
        for x in range(3):
            Y[x, x] += 1 / R_load
            Y[x, 3] -= 1 / R_load
            Y[3, x] -= 1 / R_load
            Y[3, 3] += 1 / R_load
        Y[2, :], J[2] = 0, 0
        Y[2, 2] = 1.0                                   # reference node c
        V = np.linalg.solve(Y, J)
        i_branch = [(Eab[k] - (V[x] - V[y])) / Zd for k, (x, y) in enumerate(pairs)]
        loss_branch += Rd * sum(abs(i) ** 2 for i in i_branch) / 2
        line_sq += sum(abs((V[x] - V[3]) / R_load) ** 2 for x in range(3)) / 2
    M = 72
    theta = 2 * np.pi * np.arange(M) / M
    e_delta = sum(E * np.cos(h * (theta + SHIFT)) for h, E in harmonics.items())
    _, R_star, _ = delta_to_star(e_delta, Rd, Ld)
    _, circ_loss = delta_circulating_current(e_delta, Rd, Ld, w)
    assert loss_branch == pytest.approx(R_star * line_sq + circ_loss, rel=1e-10)


# ---------------------------------------------------------------- shapes and batches


def test_scalar_array_and_batch_of_10000():
    rng = np.random.default_rng(1)
    e1 = balanced(72, (25.0, 2.0))
    r = bridge_resistive(e1, 0.3, 0.7, 14.2, 0.05)
    assert np.ndim(r.dc_current_A) == 0 and r.dc_current_A > 0
    ri = bridge_inductive(e1, 0.3, 1e-4, 300.0, 0.7, 14.2, 0.05)
    assert np.ndim(ri.dc_current_A) == 0 and 0 < ri.dc_current_A < r.dc_current_A
    e = random_batch(rng, 10_000)
    R = rng.uniform(0.05, 1.0, 10_000)
    big = bridge_resistive(e, R, 0.7, 14.2, 0.05)
    assert big.dc_current_A.shape == (10_000,)
    # element k of the batch equals the same design alone (scalar parameters)
    for k in (0, 4321, 9999):
        one = bridge_resistive(e[k], R[k], 0.7, 14.2, 0.05)
        assert one.dc_current_A == pytest.approx(big.dc_current_A[k], rel=1e-14, abs=1e-14)
    bigi = bridge_inductive(e[:2000], R[:2000], 1e-4, 300.0, np.full(2000, 0.7), 14.2, 0.05,
                            n_periods=3)
    assert bigi.dc_current_A.shape == (2000,) and bigi.phase_current_rms_each_A.shape == (2000, 3)
    assert cut_in_speed_rpm(np.array([0.1, 0.2]), 14.2, 0.7).shape == (2,)
    assert np.ndim(cut_in_speed_rpm(0.1, 14.2, 0.7)) == 0
