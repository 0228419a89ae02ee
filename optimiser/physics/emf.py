"""Open-circuit EMF waveforms from per-turn flux-linkage harmonics and winding phase factors.

Waveform convention: M samples over one electrical period, theta_e = 2 pi m / M on the last axis;
phases a, b, c on the axis before: shape (n, 3, M).
"""

from __future__ import annotations

import numpy as np


def electrical_speed(pole_pairs, speed_rpm):
    """omega_e = p 2 pi rpm / 60 [rad/s] from pole pairs p [-] and shaft speed [rpm]."""
    return np.asarray(pole_pairs, dtype=float) * np.asarray(speed_rpm, dtype=float) * np.pi / 30


def phase_emf_waveform(Lambda_n, phase_factors, series_coils_per_path, turns, pole_pairs,
                       speed_rpm, orders, n_samples=72, n_first=None):
    """EMF of each phase of one parallel path, e = -d lambda / dt.

    Parameters
    ----------
    Lambda_n : array_like, shape (n, H)
        Per-turn peak flux linkage per harmonic of a coil centred at electrical angle 0 [Wb].
    phase_factors : array_like, complex, shape (n or 1, 3, H) or (3, H)
        K[ph, n] = (1/(Q/3)) sum over the coils k of phase ph of polarity_k exp(-j n theta_k) [-].
    series_coils_per_path : array_like, shape (n,)
        Coils in series in one path of a phase (Q / (3 a) for a parallel paths) [-].
    turns : array_like, shape (n,)
        Turns per coil N [-].
    pole_pairs : array_like, shape (n,)
        p [-].
    speed_rpm : array_like, shape (n,)
        Shaft speed [rpm].
    orders : array_like, shape (H,)
        Harmonic orders [-].
    n_samples : int
        M samples per electrical period, a multiple of 6 [-].
    n_first : int, optional
        Compute only the first n_first of the M samples (e.g. M // 6: for a balanced winding and
        an odd-harmonic field the first sixth of the period holds every line voltage and every
        conduction pattern of the bridge, see `rectifier.bridge_resistive`) [-].

    Returns
    -------
    e : ndarray, shape (n, 3, M) (or (n, 3, n_first))
        Phase EMF of one path [V].

    Notes
    -----
    lambda_ph(theta_e) = N Q_s Re(sum_n Lambda_n K[ph, n] exp(j n theta_e)) with N turns per
    coil and Q_s series coils per path, and d theta_e / dt = omega_e, so
    e = -omega_e N Q_s Re(sum_n j n Lambda_n K exp(j n theta_e)).
    The strands in hand of one turn are conductors in parallel: they carry the current between
    them and do not multiply the EMF (they appear only in the resistance and the coil's size).
    Computed as one real matrix product (n 3, 2H) x (2H, M).

    References
    ----------
    Faraday's law for the coil's flux linkage; phase factors from the star of slots (Bianchi &
    Dai Pre, IEE Proc. Electr. Power Appl. 153(3), 2006; from memory).
    """
    n = np.asarray(orders, dtype=float)
    c, scale = _coefficients(Lambda_n, phase_factors, series_coils_per_path, turns, pole_pairs,
                             speed_rpm, n)
    theta = 2 * np.pi * np.arange(n_samples if n_first is None else n_first) / n_samples
    arg = np.outer(n, theta)
    # Re(j c e^{j a}) = -Re(c) sin(a) - Im(c) cos(a)
    basis = np.concatenate([-np.sin(arg), -np.cos(arg)], axis=0)  # (2H, M)
    coef = np.concatenate([c.real, c.imag], axis=-1)  # (n, 3, 2H)
    e = coef @ basis
    return e * np.asarray(scale)[..., None, None]


def _coefficients(Lambda_n, phase_factors, series_coils_per_path, turns, pole_pairs, speed_rpm, n):
    """c[ph, n] = K[ph, n] Lambda_n n (complex, (n, 3, H)) and the factor -omega_e N n_s [V/Wb]:
    lambda_ph = N n_s Re(sum_n Lambda_n K exp(j n theta)), e = scale Re(sum_n j c exp(j n theta))."""
    K = np.asarray(phase_factors)
    if K.ndim == 2:
        K = K[None]
    scale = -(electrical_speed(pole_pairs, speed_rpm) * np.asarray(series_coils_per_path, float)
              * np.asarray(turns, dtype=float))
    c = K * (np.asarray(Lambda_n, dtype=float) * n)[..., None, :]
    return c, scale


def zero_sequence_emf_harmonics(Lambda_n, phase_factors, series_coils_per_path, turns, pole_pairs,
                                speed_rpm, orders):
    """Peak amplitude of each harmonic of the zero-sequence EMF e0 = (e_a + e_b + e_c) / 3 [V].

    Parameters are as in `phase_emf_waveform`. Returns shape (n, H), harmonic `orders[h]` on the
    last axis: e0 = sum_h A_h cos(n_h theta_e + phi_h). Only triplen orders survive for a
    balanced winding; this is the EMF that drives a delta's circulating current
    (`rectifier.delta_circulating_from_harmonics`), without sampling the waveform.
    """
    n = np.asarray(orders, dtype=float)
    c, scale = _coefficients(Lambda_n, phase_factors, series_coils_per_path, turns, pole_pairs,
                             speed_rpm, n)
    return np.abs(c.mean(axis=-2)) * np.abs(np.asarray(scale))[..., None]


def rms(x, axis=-1):
    """Root mean square over one period of evenly spaced samples [same unit as x]."""
    x = np.asarray(x)
    return np.sqrt(np.mean(x * x, axis=axis))


def peak(x, axis=-1):
    """Largest absolute sample over one period [same unit as x]."""
    return np.max(np.abs(np.asarray(x)), axis=axis)


def line_line(e):
    """Line-to-line voltages (ab, bc, ca) from phase (line-to-neutral) EMFs, shape (..., 3, M) [V]."""
    e = np.asarray(e)
    return e - np.roll(e, -1, axis=-2)


def emf_constant_line_rms_per_rpm(Lambda_n, phase_factors, series_coils_per_path, turns,
                                  pole_pairs, orders, n_samples=72):
    """Line-to-line rms EMF per rpm of a star connection, one path [V/rpm], shape (n,).

    Parameters are as in `phase_emf_waveform` (without the speed). The EMF is linear in speed, so
    the waveform at 1 rpm is the constant; the rms is the mean of the three line voltages' rms
    (equal for a balanced winding).
    """
    e = phase_emf_waveform(Lambda_n, phase_factors, series_coils_per_path, turns, pole_pairs, 1.0,
                           orders, n_samples)
    return np.mean(rms(line_line(e)), axis=-1)
