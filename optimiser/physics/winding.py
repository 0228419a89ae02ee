"""Three-phase layout of the air-cored stator coils from the star of slots.

The stator holds Q single air-cored coils, one at each "slot" position: coil k (k = 0..Q-1) sits at
mechanical angle 2 pi k / Q and therefore at electrical angle theta_k = p 2 pi k / Q. With the rotor at
electrical angle theta_e the flux linkage of coil k is ~ cos(theta_e - theta_k), so each coil is one
phasor exp(-j theta_k) and the layout is the double-layer-equivalent tooth-coil winding of the
literature. Coils are dealt into the six 60-degree belts A+, C-, B+, A-, C+, B- (centred on 0, 60,
..., 300 degrees); a coil in a minus belt is connected reversed (polarity -1). Phase b is the belt at
+120 degrees, i.e. its flux peaks 120 electrical degrees later than a's: b lags a (positive sequence).

Not on the hot path: one call per layout and multiple, plain Python ints in, a frozen dataclass out.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import gcd

import numpy as np

__all__ = ["WindingError", "Winding", "star_of_slots", "series_coils_per_path", "winding_table",
           "PHASE_LETTERS"]

PHASE_LETTERS = ("A", "B", "C")

# Belt index (0..5, belt centre at 60 x index degrees) -> (phase, polarity).
_BELT_PHASE = np.array([0, 2, 1, 0, 2, 1])
_BELT_POLARITY = np.array([1, -1, 1, -1, 1, -1])


class WindingError(ValueError):
    """A coil/pole combination that has no balanced three-phase winding (message says why)."""


def _divisors(n: int) -> tuple[int, ...]:
    return tuple(d for d in range(1, n + 1) if n % d == 0)


@dataclass(frozen=True, eq=False)
class Winding:
    """A balanced three-phase layout of Q concentrated air-cored coils under 2p poles.

    Attributes
    ----------
    coils : int
        Number of coils Q [-].
    poles : int
        Number of magnet poles 2p on each rotor [-].
    pole_pairs : int
        p [-].
    coil_phase : ndarray of int, shape (Q,)
        Phase of each coil: 0 = A, 1 = B, 2 = C.
    coil_polarity : ndarray of int, shape (Q,)
        +1 if the coil is connected forward, -1 if reversed.
    coil_angle_elec_rad : ndarray, shape (Q,)
        Electrical angle p 2 pi k / Q of coil k reduced to [0, 2 pi) [rad].
    periodicity : int
        t = gcd(Q, p): the layout repeats t times round the stator [-].
    segments : int
        Number of identical machine segments used for parallel paths: 2t when Q/t is even (the
        second half of each repeat is the first half reversed), else t [-].
    allowed_parallel_paths : tuple of int
        Numbers of parallel paths a whose paths carry identical EMF (all odd harmonics): the
        divisors of `segments`.
    distribution_factor, pitch_factor, winding_factor : float
        Fundamental k_d = |K[A, 1]|, classical k_p = |sin(p pi / Q)| for a coil spanning one coil
        pitch, and k_w = k_d k_p (the figure quoted in published tables) [-].
    """

    coils: int
    poles: int
    pole_pairs: int
    coil_phase: np.ndarray
    coil_polarity: np.ndarray
    coil_angle_elec_rad: np.ndarray
    periodicity: int
    segments: int
    allowed_parallel_paths: tuple[int, ...]
    distribution_factor: float
    pitch_factor: float
    winding_factor: float

    @property
    def coils_per_phase(self) -> int:
        """Q / 3 [-]."""
        return self.coils // 3

    def phase_factors(self, orders) -> np.ndarray:
        """Complex per-harmonic phase factors K, shape (3, H).

        K[ph, i] = (3 / Q) sum over the coils k of phase ph of polarity_k exp(-j n_i theta_k), so the
        flux linkage per turn of all coils of phase ph in series is
        (Q/3) Re(sum_n Lambda_n K[ph, n] exp(j n theta_e)) when a coil centred at electrical angle 0
        links sum_n Lambda_n cos(n theta_e).

        Parameters
        ----------
        orders : array_like of int, shape (H,)
            Harmonic orders n (odd for the magnet field) [-].

        Returns
        -------
        ndarray of complex, shape (3, H)
            |K[ph, 1]| is the fundamental distribution factor [-].
        """
        n = np.atleast_1d(np.asarray(orders))
        terms = self.coil_polarity[:, None] * np.exp(-1j * n[None, :]
                                                     * self.coil_angle_elec_rad[:, None])
        onehot = self.coil_phase[None, :] == np.arange(3)[:, None]
        return (onehot.astype(float) @ terms) / self.coils_per_phase


def star_of_slots(coils: int, poles: int) -> Winding:
    """Assign Q concentrated coils under 2p poles to three phases by the star of slots.

    Parameters
    ----------
    coils : int
        Number of coils Q on the stator [-].
    poles : int
        Number of magnet poles 2p per rotor (even) [-].

    Returns
    -------
    Winding

    Raises
    ------
    WindingError
        If no balanced three-phase winding exists; the message gives the reason.

    Notes
    -----
    Coil k has electrical angle theta_k = 2 pi r_k / Q with r_k = p k mod Q, so the star has Q/t
    distinct spokes (t = gcd(Q, p)) each holding t coils. A 120-degree rotation of the star maps it
    onto itself, and onto a shift of whole coils, iff 3 divides Q/t; that is the balance condition
    (it also rules out Q = 2p, where Q/t = 2, and a zero pitch factor, where Q/t = 1). The belt index
    floor((theta_k + 30 deg) / 60 deg) is computed in integers, so coils on a belt edge are
    assigned the same way in every phase and the result is exact.

    Parallel paths: shifting by Q/t coils moves every coil by a whole number of electrical periods,
    so the t repeats are identical for every harmonic. When Q/t is even, p/t is odd, and a shift by
    Q/(2t) coils moves every phasor by 180 degrees and flips its belt polarity: the two halves are
    identical for every odd harmonic. Paths made of whole segments are therefore identical.

    References
    ----------
    N. Bianchi and M. Dai Pre, "Use of the star of slots in designing fractional-slot single-layer
    synchronous motors", IEE Proc. Electr. Power Appl. 153(3), 459-466, 2006 (star of slots and the
    balance/periodicity conditions; from memory, reproduced by the derivation above).
    A. M. EL-Refaie, "Fractional-slot concentrated-windings synchronous permanent magnet machines:
    opportunities and challenges", IEEE Trans. Ind. Electron. 57(1), 107-121, 2010 (tables of
    winding factors; values from memory, reproduced in the tests by an independent formula).
    """
    if not (isinstance(coils, (int, np.integer)) and isinstance(poles, (int, np.integer))):
        raise WindingError(f"coils and poles must be integers (got {coils!r}, {poles!r})")
    coils, poles = int(coils), int(poles)
    if coils < 3:
        raise WindingError(f"{coils} coils: a three-phase stator needs at least 3 coils")
    if poles < 2 or poles % 2:
        raise WindingError(f"{poles} poles: the pole count must be even and at least 2")
    if coils % 3:
        raise WindingError(f"{coils} coils / {poles} poles: the coil count is not a multiple of 3, "
                           "so the phases cannot hold equal numbers of coils")
    p = poles // 2
    t = gcd(coils, p)
    spokes = coils // t
    if spokes % 3:
        reason = ("coil pitch equals pole pitch (Q = 2p), every coil is in or against phase with "
                  "every other" if coils == poles else
                  f"the star has {spokes} spoke(s) (Q/gcd(Q,p) = {coils}/{t}), not a multiple of 3, "
                  "so no three phases 120 electrical degrees apart")
        raise WindingError(f"{coils} coils / {poles} poles: {reason}")

    k = np.arange(coils)
    r = (p * k) % coils
    belt = ((12 * r + coils) // (2 * coils)) % 6
    phase = _BELT_PHASE[belt]
    polarity = _BELT_POLARITY[belt]
    angle = 2.0 * np.pi * r / coils
    for arr in (phase, polarity, angle):
        arr.setflags(write=False)

    counts = np.bincount(phase, minlength=3)
    if not np.all(counts == coils // 3):
        raise WindingError(f"{coils} coils / {poles} poles: phases hold {counts.tolist()} coils, "
                           "not equal")
    segments = 2 * t if spokes % 2 == 0 else t
    kd = _distribution_factor(phase, polarity, angle, coils)
    kp = abs(np.sin(p * np.pi / coils))
    if kd * kp < 1e-9:
        raise WindingError(f"{coils} coils / {poles} poles: the fundamental winding factor is zero")
    winding = Winding(coils=coils, poles=poles, pole_pairs=p, coil_phase=phase,
                      coil_polarity=polarity, coil_angle_elec_rad=angle, periodicity=t,
                      segments=segments, allowed_parallel_paths=_divisors(segments),
                      distribution_factor=float(kd), pitch_factor=float(kp),
                      winding_factor=float(kd * kp))
    # Belt construction guarantees balance when 3 | Q/t; keep the check as a guard against edits.
    K = winding.phase_factors([1])[:, 0]
    shift = np.exp(-2j * np.pi / 3)
    if not (np.isclose(K[1], K[0] * shift) and np.isclose(K[2], K[0] / shift)):
        raise WindingError(f"{coils} coils / {poles} poles: phases are not 120 degrees apart")
    return winding


def _distribution_factor(phase, polarity, angle, coils):
    a = phase == 0
    return abs(np.sum(polarity[a] * np.exp(-1j * angle[a]))) / (coils // 3)


def series_coils_per_path(winding: Winding, parallel_paths):
    """Coils in series in one parallel path of a phase.

    Parameters
    ----------
    winding : Winding
        The layout.
    parallel_paths : int or array_like of int
        Number of parallel paths a per phase [-]; each must be in `winding.allowed_parallel_paths`.

    Returns
    -------
    int or ndarray of int
        (Q/3) / a [-].

    Raises
    ------
    WindingError
        If some a gives paths with unequal EMF (they would drive circulating currents).
    """
    a = np.asarray(parallel_paths)
    bad = ~np.isin(a, winding.allowed_parallel_paths)
    if np.any(bad):
        raise WindingError(
            f"{winding.coils} coils / {winding.poles} poles: {np.unique(a[bad]).tolist()} parallel "
            f"paths would carry unequal EMF; allowed: {list(winding.allowed_parallel_paths)}")
    out = winding.coils_per_phase // a
    return int(out) if out.ndim == 0 else out


def coil_path(winding: Winding, parallel_paths: int) -> np.ndarray:
    """Path number 1..a of every coil, shape (Q,): paths are runs of consecutive whole segments."""
    series_coils_per_path(winding, parallel_paths)
    seg_len = winding.coils // winding.segments
    seg = np.arange(winding.coils) // seg_len
    return seg // (winding.segments // int(parallel_paths)) + 1


def winding_table(winding: Winding, parallel_paths: int = 1) -> list[dict]:
    """One row per coil for the build sheet.

    Parameters
    ----------
    winding : Winding
        The layout.
    parallel_paths : int
        Parallel paths per phase a [-].

    Returns
    -------
    list of dict
        Keys: ``coil`` (1..Q, in order round the stator), ``phase`` ("A", "B", "C"), ``polarity``
        (+1 forward, -1 reversed: swap start and finish), ``path`` (1..a within its phase),
        ``angle_elec_deg`` (electrical position, degrees).
    """
    path = coil_path(winding, parallel_paths)
    return [{"coil": k + 1,
             "phase": PHASE_LETTERS[int(winding.coil_phase[k])],
             "polarity": int(winding.coil_polarity[k]),
             "path": int(path[k]),
             "angle_elec_deg": float(np.degrees(winding.coil_angle_elec_rad[k]))}
            for k in range(winding.coils)]
