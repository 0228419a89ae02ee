"""Tests of optimiser.physics.emf with hand-made phase factors (the winding module is not used)."""

import time

import numpy as np
import pytest

from optimiser.physics import emf

ORDERS = np.arange(1, 16, 2)
M = 72


def _factors(orders=ORDERS):
    """Three coils per phase all in step, phases at 0, 120, 240 electrical degrees: the common
    practice layout (coils 3k, poles 4k; MODEL.md, no source). K[ph, n] = exp(-j n theta_ph)."""
    th = np.array([0.0, 2 * np.pi / 3, 4 * np.pi / 3])
    return np.exp(-1j * np.outer(th, orders))[None]


def _lam(n, rng):
    lam = np.zeros((n, ORDERS.size))
    lam[:, 0] = rng.uniform(1e-4, 5e-4, n)
    lam[:, 1:] = lam[:, :1] * rng.uniform(-0.1, 0.1, (n, ORDERS.size - 1))
    return lam


def test_emf_zero_mean_and_phase_sequence():
    # Faraday: e = -d lambda/dt of a periodic lambda integrates to zero over a period.
    # Positive sequence: b lags a by 120 electrical degrees (M/3 samples).
    rng = np.random.default_rng(1)
    lam = _lam(4, rng)
    e = emf.phase_emf_waveform(lam, _factors(), 4, 50, 8, 200.0, ORDERS, M)
    assert e.shape == (4, 3, M)
    assert np.allclose(e.mean(axis=-1), 0, atol=1e-12 * np.abs(e).max())
    assert np.allclose(e[:, 1], np.roll(e[:, 0], M // 3, axis=-1))
    assert np.allclose(e[:, 2], np.roll(e[:, 0], 2 * M // 3, axis=-1))


def test_emf_of_pure_sinusoid_matches_faraday_closed_form():
    # lambda = N n_s Lambda_1 cos(theta_e) -> e = omega_e N n_s Lambda_1 sin(theta_e);
    # rms = peak / sqrt(2); star line-line rms = sqrt(3) x phase rms (textbook three-phase).
    lam = np.zeros((1, ORDERS.size))
    lam[0, 0] = 3e-4
    p, rpm, N, ns = 7, 240.0, 60, 5
    e = emf.phase_emf_waveform(lam, _factors(), ns, N, p, rpm, ORDERS, M)
    w = p * rpm * 2 * np.pi / 60
    th = 2 * np.pi * np.arange(M) / M
    assert np.allclose(e[0, 0], w * N * ns * 3e-4 * np.sin(th), rtol=1e-12, atol=1e-12)
    assert emf.rms(e)[0, 0] == pytest.approx(emf.peak(e)[0, 0] / np.sqrt(2), rel=1e-12)
    ll = emf.line_line(e)
    assert np.allclose(emf.rms(ll), np.sqrt(3) * emf.rms(e), rtol=1e-12)
    assert np.allclose(ll[0, 0], e[0, 0] - e[0, 1])
    k = emf.emf_constant_line_rms_per_rpm(lam, _factors(), ns, N, p, ORDERS, M)
    assert k[0] * rpm == pytest.approx(np.sqrt(3) * w * N * ns * 3e-4 / np.sqrt(2), rel=1e-12)


def test_emf_linear_in_speed_and_turns():
    rng = np.random.default_rng(2)
    lam = _lam(3, rng)
    base = emf.phase_emf_waveform(lam, _factors(), 2, 40, 6, 150.0, ORDERS)
    assert np.allclose(emf.phase_emf_waveform(lam, _factors(), 2, 40, 6, 300.0, ORDERS), 2 * base)
    assert np.allclose(emf.phase_emf_waveform(lam, _factors(), 2, 120, 6, 150.0, ORDERS),
                       3 * base)
    assert np.allclose(emf.phase_emf_waveform(lam, _factors(), 4, 40, 6, 150.0, ORDERS), 2 * base)


def test_emf_scalar_array_and_batch():
    rng = np.random.default_rng(3)
    n = 5000
    lam = _lam(n, rng)
    p = rng.integers(4, 17, n)
    rpm = rng.uniform(50, 1500, n)
    turns = rng.integers(10, 200, n)
    e = emf.phase_emf_waveform(lam, _factors(), 4, turns, p, rpm, ORDERS)
    assert e.shape == (n, 3, M)
    one = emf.phase_emf_waveform(lam[7], _factors()[0], 4, turns[7], p[7], rpm[7], ORDERS)
    assert np.allclose(one[0], e[7], rtol=1e-12)
    assert emf.emf_constant_line_rms_per_rpm(lam, _factors(), 4, turns, p, ORDERS).shape == (n,)


def test_fast_field_plus_emf_speed_50000_designs():
    # Throughput target of the evaluator (brief): 50 000 designs/s for the whole EM part; these
    # two kernels should take well under 0.5 s. The assertion is loose (shared CI machines).
    from optimiser.physics.field import coil_flux_linkage_harmonics
    rng = np.random.default_rng(4)
    n = 50_000
    L, W = rng.uniform(0.03, 0.05, n), rng.uniform(0.01, 0.02, n)
    h, g = rng.uniform(0.005, 0.012, n), rng.uniform(0.008, 0.025, n)
    p, R = rng.integers(4, 17, n), rng.uniform(0.1, 0.15, n)
    best = np.inf
    for _ in range(3):
        t0 = time.perf_counter()
        lam = coil_flux_linkage_harmonics(1.3, 1.05, L, W, h, g, p, R, W + 0.002,
                                          rng.uniform(0.004, 0.02, n), g - 0.0046, ORDERS)
        emf.phase_emf_waveform(lam, _factors(), 4, 50, p, 200.0, ORDERS)
        best = min(best, time.perf_counter() - t0)
    print(f"\nflux linkage + EMF for {n} designs: {best:.3f} s")
    assert best < 2.0, f"{best:.3f} s"


def test_first_samples_and_zero_sequence_harmonics_match_the_full_waveform():
    # n_first gives the first samples of the period; the zero-sequence harmonics equal the
    # one-sided FFT of the sampled e0 = mean of the phases (numpy's FFT as the independent method:
    # peak of harmonic h = 2 |rfft(e0)_h| / M).
    rng = np.random.default_rng(5)
    n = 40
    lam = _lam(n, rng)
    K = _factors() * rng.uniform(0.5, 1.0, (n, 3, ORDERS.size))  # unbalanced: every order in e0
    p, rpm, turns = rng.integers(4, 17, n), rng.uniform(50, 900, n), rng.integers(10, 200, n)
    full = emf.phase_emf_waveform(lam, K, 3, turns, p, rpm, ORDERS, M)
    first = emf.phase_emf_waveform(lam, K, 3, turns, p, rpm, ORDERS, M, n_first=M // 6)
    assert first.shape == (n, 3, M // 6)
    np.testing.assert_allclose(first, full[..., : M // 6], rtol=0, atol=1e-13 * np.abs(full).max())
    A = emf.zero_sequence_emf_harmonics(lam, K, 3, turns, p, rpm, ORDERS)
    spectrum = np.fft.rfft(full.mean(axis=1), axis=-1)[:, ORDERS] * 2 / M
    np.testing.assert_allclose(A, np.abs(spectrum), rtol=1e-11, atol=1e-13 * np.abs(full).max())
    # balanced (equal coils at 0, 120, 240 degrees): only the triplen orders survive
    A_bal = emf.zero_sequence_emf_harmonics(lam, _factors(), 3, turns, p, rpm, ORDERS)
    triplen = ORDERS % 3 == 0
    assert np.all(A_bal[:, ~triplen] < 1e-12 * A_bal[:, triplen].max())
    assert np.all(A_bal[:, triplen] > 0)
