"""Losses that are not copper loss in the rectifier model: eddy loss in the
round strands, windage of the two rotors, bearing/seal drag; and the air
properties those (and :mod:`optimiser.physics.thermal`) need.

Pure, vectorised kernels: numpy arrays in, arrays out, SI units inside,
no validation.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

MU_0 = 4e-7 * np.pi  # [H/m]; the 2019 SI value differs by ~1e-10, irrelevant here

# Air as an ideal gas (dry air).
GAS_CONSTANT_AIR = 287.05  # [J/(kg K)] R / M_air, M_air = 28.965 g/mol
STANDARD_PRESSURE = 101325.0  # [Pa]
CP_AIR = 1006.0  # [J/(kg K)] near room temperature, varies < 1 % over 0-100 C
# Sutherland constants for air (White, Viscous Fluid Flow, Table 1-2 and 1-3).
_MU_REF, _T_MU, _S_MU = 1.716e-5, 273.15, 110.4  # [Pa s], [K], [K]
_K_REF, _T_K, _S_K = 0.0241, 273.15, 194.0  # [W/(m K)], [K], [K]


# --------------------------------------------------------------------------
# eddy loss in round strands
# --------------------------------------------------------------------------

def skin_depth(frequency_Hz, resistivity_ohm_m, relative_permeability=1.0):
    """Skin depth delta = sqrt(2 rho / (omega mu)).

    Parameters
    ----------
    frequency_Hz : array_like
        Frequency [Hz].
    resistivity_ohm_m : array_like
        Conductor resistivity [ohm m].
    relative_permeability : array_like, optional
        Relative permeability of the conductor, 1 for copper [-].

    Returns
    -------
    ndarray
        Skin depth [m]; ``inf`` at 0 Hz.

    References
    ----------
    Any electromagnetics text, e.g. J. Lammeraner and M. Stafl, *Eddy
    Currents*, Iliffe, London, 1966, ch. 1 (from memory).
    """
    omega = 2.0 * np.pi * np.asarray(frequency_Hz, dtype=float)
    with np.errstate(divide="ignore"):
        return np.sqrt(2.0 * np.asarray(resistivity_ohm_m) / (omega * MU_0 * relative_permeability))


def eddy_loss_density_round_wire(frequency_Hz, b_peak_sq_T2, bare_diameter_m, resistivity_ohm_m):
    """Eddy (proximity) loss per unit copper volume of a round strand in a
    uniform sinusoidal transverse field, low-frequency limit.

    ``p = pi^2 f^2 B^2 d^2 / (8 rho)``, element by element (no summation).

    Parameters
    ----------
    frequency_Hz : array_like
        Frequency of the field component [Hz].
    b_peak_sq_T2 : array_like
        Square of the PEAK amplitude of the transverse flux density at that
        frequency [T^2] (twice the mean square in time).
    bare_diameter_m : array_like
        Bare copper diameter of one strand [m].
    resistivity_ohm_m : array_like
        Copper resistivity at the winding temperature [ohm m].

    Returns
    -------
    ndarray
        Time-averaged loss density [W/m^3].

    Notes
    -----
    First term of the series expansion of the exact Bessel-function solution
    for a cylinder in a uniform transverse field; the field of the eddy
    currents themselves is neglected, so it is valid for ``d << delta``
    (:func:`skin_depth`). Against the exact solution it overestimates by
    0.7 % at ``d/delta = 1``, 11 % at ``d/delta = 2`` and 57 % at 3 (measured
    in tests/test_losses.py). Copper at 1500 rpm and 16 poles is 200 Hz,
    delta = 4.7 mm, so strands of 0.5-2.5 mm are well inside.

    Because the loss is quadratic in B and the field's two orthogonal
    components (axial B_z and tangential B_x, in quadrature in a rotating
    field) each drive their own eddy pattern in a round strand whose
    cross-section is isotropic, the losses ADD: pass
    ``B^2 = B_z,peak^2 + B_x,peak^2`` (each averaged in space over the copper).
    The radial component drives currents along the strand axis only on the
    end turns, and is left to the caller.

    Loss falls as the copper warms (``1/rho``), the opposite of copper loss.

    References
    ----------
    C. R. Sullivan, "Computationally efficient winding loss calculation with
    multiple windings, arbitrary waveforms, and two-dimensional or
    three-dimensional field geometry", IEEE Trans. Power Electron. 16(1),
    142-150, 2001, eq. (1) (the per-length strand loss
    ``pi l d^4 B^2 omega^2 / (128 rho)``; from memory, not checked). The same
    low-frequency strand loss is used in C. R. Sullivan, "Optimal choice for
    number of strands in a litz-wire transformer winding", IEEE Trans. Power
    Electron. 14(2), 283-291, 1999 (from memory). Re-derived here from the
    exact solution (J. Lammeraner and M. Stafl, *Eddy Currents*, 1966,
    cylinder in a transverse field; from memory) as its leading term.
    """
    f = np.asarray(frequency_Hz, dtype=float)
    return (np.pi**2 / 8.0) * f * f * np.asarray(b_peak_sq_T2) * np.square(bare_diameter_m) / resistivity_ohm_m


def eddy_loss_round_wire(frequency_Hz, b_peak_sq_T2, bare_diameter_m, resistivity_ohm_m, copper_volume_m3):
    """Eddy loss of a winding of round strands, summed over harmonics.

    Parameters
    ----------
    frequency_Hz : array_like, shape (..., H)
        Frequency of each harmonic, ``f_n = n f_1``; harmonics on the LAST
        axis (pass shape (n, 1) for one harmonic per design) [Hz].
    b_peak_sq_T2 : array_like, shape (..., H)
        Per-harmonic square of the peak flux density, averaged over the copper
        volume, ``<B_z,n^2> + <B_x,n^2>`` (see
        :func:`eddy_loss_density_round_wire`) [T^2].
    bare_diameter_m : array_like, shape (...)
        Bare strand diameter [m].
    resistivity_ohm_m : array_like, shape (...)
        Copper resistivity at the winding temperature [ohm m].
    copper_volume_m3 : array_like, shape (...)
        Copper volume of the whole stator (all coils, bare copper) [m^3].

    Returns
    -------
    ndarray, shape (...)
        Eddy loss of the stator [W].

    References
    ----------
    See :func:`eddy_loss_density_round_wire` (Sullivan 2001, eq. 1; from memory).
    """
    f = np.atleast_1d(np.asarray(frequency_Hz, dtype=float))
    b2 = np.atleast_1d(np.asarray(b_peak_sq_T2, dtype=float))
    fb = np.sum(f * f * b2, axis=-1)
    return (np.pi**2 / 8.0) * fb * np.square(bare_diameter_m) / resistivity_ohm_m * copper_volume_m3


# --------------------------------------------------------------------------
# air
# --------------------------------------------------------------------------

class AirProperties(NamedTuple):
    """Dry air at 101325 Pa; every field an array of the input's shape."""

    density_kg_m3: np.ndarray
    viscosity_Pa_s: np.ndarray
    kinematic_viscosity_m2_s: np.ndarray
    conductivity_W_mK: np.ndarray
    prandtl: np.ndarray
    expansion_per_K: np.ndarray  # ideal gas: 1/T


def air_properties(temperature_C, pressure_Pa=STANDARD_PRESSURE):
    """Density, viscosity, conductivity and Prandtl number of dry air.

    Parameters
    ----------
    temperature_C : array_like
        Air (film) temperature [degC].
    pressure_Pa : array_like, optional
        Absolute pressure [Pa].

    Returns
    -------
    AirProperties
        Arrays of the broadcast input shape, SI units.

    Notes
    -----
    Ideal gas density; Sutherland's law for viscosity and conductivity;
    constant c_p = 1006 J/(kg K). Within 1 % of handbook tables from -20 to
    150 C (tests/test_losses.py compares with Incropera Table A.4 and the
    U.S. Standard Atmosphere 1976 in ``fluids``). Humidity of bilge air is
    ignored (it changes density by ~1 %).

    References
    ----------
    F. M. White, *Viscous Fluid Flow*, 2nd ed., McGraw-Hill, 1991, eqs.
    (1-36) and (1-42), Tables 1-2 and 1-3 (Sutherland constants for air:
    mu0 = 1.716e-5 Pa s, S = 110.4 K; k0 = 0.0241 W/(m K), S = 194 K at
    273 K; from memory).
    """
    T = np.asarray(temperature_C, dtype=float) + 273.15
    rho = np.asarray(pressure_Pa, dtype=float) / (GAS_CONSTANT_AIR * T)
    mu = _MU_REF * (T / _T_MU) ** 1.5 * (_T_MU + _S_MU) / (T + _S_MU)
    k = _K_REF * (T / _T_K) ** 1.5 * (_T_K + _S_K) / (T + _S_K)
    return AirProperties(rho, mu, mu / rho, k, mu * CP_AIR / k, 1.0 / T)


# --------------------------------------------------------------------------
# windage
# --------------------------------------------------------------------------

# Daily & Nece (1960) regimes: C_M = a * G**b * Re**(-c), G = s/R, Re = omega R^2/nu.
# C_M is for the TORQUE ON BOTH FACES of one disc: M = C_M * 0.5 rho omega^2 R^5.
# (Check: regime I is laminar Couette flow, whose torque on one face is
# pi mu omega R^4 / (2 s), i.e. pi/(G Re) per face, 2 pi/(G Re) for two.)
DAILY_NECE_REGIMES = np.array(
    [
        # a,      b,        c
        [2 * np.pi, -1.0, 1.0],  # I   laminar, merged boundary layers
        [3.70, 0.1, 0.5],  # II  laminar, separate boundary layers
        [0.080, -1.0 / 6.0, 0.25],  # III turbulent, merged
        [0.102, 0.1, 0.2],  # IV  turbulent, separate
    ]
)


def daily_nece_moment_coefficient(reynolds, gap_ratio):
    """Moment coefficient of a smooth disc enclosed in a housing.

    Parameters
    ----------
    reynolds : array_like
        Disc Reynolds number ``omega R^2 / nu`` [-]; > 0.
    gap_ratio : array_like
        Axial clearance over disc radius ``s/R`` [-].

    Returns
    -------
    coefficient : ndarray
        ``C_M`` for both faces of the disc, ``M = C_M rho omega^2 R^5 / 2`` [-].
    regime : ndarray of int
        0..3 for regimes I..IV.

    Notes
    -----
    The regime is the one giving the LARGEST coefficient, the usual way of
    using these four fits (each is a lower bound outside its own regime: a
    laminar layer gives less drag than a turbulent one at the same Re, and
    separate boundary layers less than a merged Couette layer at low Re).
    The envelope of continuous curves is continuous (no jump at a regime
    change, only a kink); the crossings fall near the regime boundaries
    Daily & Nece drew (laminar to turbulent near Re ~ 1e5). Magnets standing proud of the disc add form drag
    that this smooth-disc model does not include.

    References
    ----------
    J. W. Daily and R. E. Nece, "Chamber dimension effects on induced flow
    and frictional resistance of enclosed rotating disks", ASME J. Basic
    Eng. 82(1), 217-232, 1960, eqs. (11), (12), (13), (14) (from memory, not
    checked; the regime IV constant 0.102, not 0.0102, is confirmed by
    continuity with regime III, and the two-face convention by the Couette
    limit of regime I).
    """
    re = np.asarray(reynolds, dtype=float)[..., None]
    g = np.asarray(gap_ratio, dtype=float)[..., None]
    a, b, c = DAILY_NECE_REGIMES.T
    cm = a * g**b * re ** (-c)
    return np.max(cm, axis=-1), np.argmax(cm, axis=-1)


def windage_loss(omega_rad_s, disc_radius_m, axial_gap_m, air_density, air_viscosity, n_discs=2):
    """Windage (air friction) loss of the rotor discs.

    Parameters
    ----------
    omega_rad_s : array_like
        Shaft speed [rad/s].
    disc_radius_m : array_like
        Rotor disc outer radius [m].
    axial_gap_m : array_like
        Axial clearance between a rotor and the stator (the magnet faces'
        running clearance) [m].
    air_density : array_like
        Air density [kg/m^3].
    air_viscosity : array_like
        Dynamic viscosity of air [Pa s].
    n_discs : int, optional
        Number of rotor discs [-].

    Returns
    -------
    ndarray
        Windage power of all discs [W].

    Notes
    -----
    Each disc is taken as a Daily & Nece disc with the clearance ``s`` on BOTH
    faces. The outer face really sees open air (a larger gap), so this
    over-estimates the drag of that face in the laminar merged regime and
    barely changes it elsewhere (``G^0.1``); over-estimating a loss that is
    below 1 % of output is the safe side. Rims and the hub are ignored.

    References
    ----------
    Daily & Nece 1960, see :func:`daily_nece_moment_coefficient`.
    """
    omega = np.abs(np.asarray(omega_rad_s, dtype=float))
    R = np.asarray(disc_radius_m, dtype=float)
    nu = np.asarray(air_viscosity) / np.asarray(air_density)
    with np.errstate(divide="ignore", invalid="ignore"):
        re = omega * R * R / nu
        cm, _ = daily_nece_moment_coefficient(np.maximum(re, 1e-300), np.asarray(axial_gap_m) / R)
        torque = cm * 0.5 * air_density * omega**2 * R**5
    return n_discs * torque * omega


def bearing_loss(omega_rad_s, torque_Nm):
    """Power absorbed by bearings and shaft seal at a constant drag torque.

    Parameters
    ----------
    omega_rad_s : array_like
        Shaft speed [rad/s].
    torque_Nm : array_like
        Drag torque of bearings and seal (from the scenario) [N m].

    Returns
    -------
    ndarray
        Loss [W].

    References
    ----------
    Definition of mechanical power, P = M omega; the constant-torque model is
    common practice for a lightly loaded rolling bearing with a lip seal.
    """
    return np.abs(np.asarray(omega_rad_s, dtype=float)) * np.asarray(torque_Nm, dtype=float)
