"""Resistance and inductance of the air-cored stator coils and phases.

Pure, vectorised kernels: every argument broadcasts, SI units inside (temperatures in degrees C where
the name says `_C`). No validation here; the evaluator feeds sensible arrays.

Inductance model. One coil is a flat rectangular winding (hole L_h x W_h, legs of width w, axial
thickness t_c, N turns spread uniformly over w x t_c) centred between the two steel rotor discs whose
faces lie at z = +-D/2, D = g + 2 h_m (the magnets are close to air for the coil's AC field, recoil
permeability ~1.05). With ideal iron planes the coil's images are coils with the SAME current at
z = m D, m = +-1, +-2, ..., so L_coil = L_self + N^2 sum_{m != 0} M(m D). The self part uses Wheeler's
multilayer formula on a circular coil of the same mean turn length; the image part uses the exact
mutual inductance of coaxial rectangular filaments (closed-form Neumann integral), because the image
sum is dominated by the flux through the coil AREA, which an equal-perimeter circle overstates (by
27 % for a square). Mutual inductance between neighbouring coils is NEGLECTED (the phase inductance is
the sum of its own coils' inductances); see `phase_inductance`.

References
----------
See each function; values and equations marked [from memory] were re-derived or reproduced by an
independent numerical integral in tests/test_electrical.py.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ellipe, ellipk

__all__ = ["MU0", "COPPER_RESISTIVITY_20C", "COPPER_TEMP_COEFF_20C", "copper_resistivity",
           "phase_resistance", "wheeler_multilayer_inductance", "mutual_inductance_coaxial_loops",
           "mutual_inductance_coaxial_rectangles", "image_inductance", "coil_inductance",
           "phase_inductance", "neumann_mutual_inductance", "keystone_coil_inductance_neumann",
           "keystone_coil_inductance"]

MU0 = 4e-7 * np.pi
"""Magnetic constant [H/m] (the pre-2019 exact value; the SI 2019 value differs by 5e-10 rel.)."""

COPPER_RESISTIVITY_20C = 1.0 / 58.0 * 1e-6
"""Resistivity of annealed copper at 20 C, 1/58 ohm mm^2/m = 1.7241e-8 [ohm m] (IEC 60028)."""

COPPER_TEMP_COEFF_20C = 0.00393
"""Constant-mass temperature coefficient of resistance at 20 C for 100 % IACS copper [1/K]
(IEC 60028; from memory, not checked against the standard's text)."""


def copper_resistivity(temperature_C):
    """Resistivity of annealed copper at a temperature.

    Parameters
    ----------
    temperature_C : array_like
        Conductor temperature [degC].

    Returns
    -------
    ndarray
        rho = rho_20 (1 + alpha_20 (T - 20)) [ohm m].

    References
    ----------
    IEC 60028:1925, "International standard of resistance for copper": rho_20 = 1/58 ohm mm^2/m
    (100 % IACS) [checked against the AWG resistance tables in the tests]; alpha_20 = 0.00393 /K
    [from memory]. The linear law is the standard's; it is good to ~0.5 % up to ~200 C.
    """
    t = np.asarray(temperature_C, dtype=float)
    return COPPER_RESISTIVITY_20C * (1.0 + COPPER_TEMP_COEFF_20C * (t - 20.0))


def phase_resistance(wire_length_per_path_m, bare_diameter_m, strands, parallel_paths,
                     temperature_C):
    """DC resistance of one phase: a parallel paths, each n_s strands in hand in parallel.

    Parameters
    ----------
    wire_length_per_path_m : array_like
        Length of ONE strand along one parallel path (turns x mean turn x series coils, plus leads)
        [m].
    bare_diameter_m : array_like
        Bare copper diameter of one strand [m].
    strands : array_like
        Strands in hand n_s [-].
    parallel_paths : array_like
        Parallel paths per phase a [-].
    temperature_C : array_like
        Copper temperature [degC].

    Returns
    -------
    ndarray
        R = rho(T) l / (n_s pi d^2 / 4) / a [ohm]. DC value: at the alternator's frequencies
        (< 200 Hz) the skin depth (> 4.5 mm) is much larger than the strand; the eddy loss from the
        magnet field is booked separately in losses.py.

    References
    ----------
    IEC 60028:1925 (resistivity), see `copper_resistivity`.
    """
    d = np.asarray(bare_diameter_m, dtype=float)
    area = np.asarray(strands, dtype=float) * np.pi * d * d / 4.0
    return (copper_resistivity(temperature_C) * np.asarray(wire_length_per_path_m, dtype=float)
            / area / np.asarray(parallel_paths, dtype=float))


def wheeler_multilayer_inductance(mean_radius_m, length_m, depth_m, turns):
    """Self-inductance of a multilayer circular air coil, Wheeler's formula.

    Parameters
    ----------
    mean_radius_m : array_like
        Mean radius of the winding a [m].
    length_m : array_like
        Axial length of the winding b [m].
    depth_m : array_like
        Radial depth of the winding c [m].
    turns : array_like
        Number of turns N [-].

    Returns
    -------
    ndarray
        L [H]. In inches and microhenry L = 0.8 a^2 N^2 / (6a + 9b + 10c); in SI
        L = (0.8e-6 / 0.0254) a^2 N^2 / (6a + 9b + 10c) = 3.1496e-5 a^2 N^2 / (6a + 9b + 10c).

    Notes
    -----
    Wheeler states about 1 % accuracy when the three denominator terms are about equal; it is
    a fit, worse for very flat or very long coils (checked against a numerical cross-section
    integral of Maxwell's formula in the tests).

    References
    ----------
    H. A. Wheeler, "Simple inductance formulas for radio coils", Proc. IRE 16(10), 1398-1400, 1928,
    multilayer-coil formula [from memory].
    """
    a = np.asarray(mean_radius_m, dtype=float)
    b = np.asarray(length_m, dtype=float)
    c = np.asarray(depth_m, dtype=float)
    n = np.asarray(turns, dtype=float)
    return (0.8e-6 / 0.0254) * a * a * n * n / (6.0 * a + 9.0 * b + 10.0 * c)


def mutual_inductance_coaxial_loops(radius1_m, radius2_m, distance_m):
    """Mutual inductance of two coaxial circular filaments, Maxwell's formula.

    Parameters
    ----------
    radius1_m, radius2_m : array_like
        Loop radii a, b [m].
    distance_m : array_like
        Axial distance between the loop planes d [m] (d = 0 only for a != b).

    Returns
    -------
    ndarray
        M = mu0 sqrt(a b) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4ab / ((a + b)^2 + d^2) [H].
        scipy's ellipk/ellipe take the PARAMETER m = k^2, so they are called with k^2.

    References
    ----------
    J. C. Maxwell, A Treatise on Electricity and Magnetism, vol. 2, art. 701, 1873; F. W. Grover,
    Inductance Calculations, 1946, ch. 13, eq. (1) [from memory; checked in the tests against a
    direct Neumann integral and the dipole far field].
    """
    a = np.asarray(radius1_m, dtype=float)
    b = np.asarray(radius2_m, dtype=float)
    d = np.asarray(distance_m, dtype=float)
    m = 4.0 * a * b / ((a + b) ** 2 + d * d)
    k = np.sqrt(m)
    return MU0 * np.sqrt(a * b) * ((2.0 / k - k) * ellipk(m) - (2.0 / k) * ellipe(m))


def _parallel_segments(l1, l2, rho):
    """Mutual inductance of two parallel, centred straight filaments of lengths l1, l2 at distance
    rho [H]: mu0/(4 pi) times the double integral of 1/r, whose antiderivative in the offset u is
    G(u) = u asinh(u/rho) - sqrt(u^2 + rho^2) (even in u)."""
    def g(u):
        return u * np.arcsinh(u / rho) - np.sqrt(u * u + rho * rho)
    return (MU0 / (2.0 * np.pi)) * (g(0.5 * (l1 + l2)) - g(0.5 * (l1 - l2)))


def mutual_inductance_coaxial_rectangles(x1_m, y1_m, x2_m, y2_m, distance_m):
    """Mutual inductance of two coaxial rectangular filaments with parallel sides.

    Parameters
    ----------
    x1_m, y1_m : array_like
        Side lengths of the first rectangle [m].
    x2_m, y2_m : array_like
        Side lengths of the second rectangle (sides parallel to the first's) [m].
    distance_m : array_like
        Axial distance between the two planes (> 0) [m].

    Returns
    -------
    ndarray
        M [H], both currents circulating the same way. Sides at right angles do not couple; each
        pair of parallel sides is Neumann's integral in closed form.

    References
    ----------
    F. W. Grover, Inductance Calculations, 1946, ch. 2 (parallel filaments) and ch. 17 (coaxial
    rectangles) [from memory; the closed form is re-derived from Neumann's integral here and
    checked against numerical integration in the tests].
    """
    x1, y1, x2, y2, d = (np.asarray(v, dtype=float) for v in (x1_m, y1_m, x2_m, y2_m, distance_m))
    d2 = d * d
    m_x = (_parallel_segments(x1, x2, np.sqrt(d2 + 0.25 * (y1 - y2) ** 2))
           - _parallel_segments(x1, x2, np.sqrt(d2 + 0.25 * (y1 + y2) ** 2)))
    m_y = (_parallel_segments(y1, y2, np.sqrt(d2 + 0.25 * (x1 - x2) ** 2))
           - _parallel_segments(y1, y2, np.sqrt(d2 + 0.25 * (x1 + x2) ** 2)))
    return 2.0 * (m_x + m_y)


TAIL_NODES = 3
"""Gauss-Legendre points for the image tail integral (see `image_inductance`)."""


def image_inductance(turns, hole_radial_m, hole_tangential_m, leg_width_m, coil_thickness_m,
                     iron_gap_m, n_images=8, n_gauss=2):
    """Extra coil inductance from the two rotor discs (ideal iron planes), by images.

    Parameters
    ----------
    turns : array_like
        Turns per coil N [-].
    hole_radial_m, hole_tangential_m : array_like
        Coil hole L_h x W_h [m].
    leg_width_m : array_like
        In-plane width of the winding w [m].
    coil_thickness_m : array_like
        Axial thickness of the winding t_c [m].
    iron_gap_m : array_like
        Distance between the two disc faces D = g + 2 h_m [m]; np.inf gives 0.
    n_images : int
        Images m = 1..n_images on each side summed exactly; beyond, the sum is replaced by the
        integral over image position (midpoint rule, Euler-Maclaurin), by TAIL_NODES points [-].
    n_gauss : int
        Gauss-Legendre points across w and across t_c for the turn distribution [-].

    Returns
    -------
    ndarray
        N^2 sum_{m != 0} <M(m D)> [H], <> the average over the turn distributions of coil and image.

    Notes
    -----
    A turn at distance s from the hole is taken as a sharp rectangle (L_h + 2s) x (W_h + 2s) (the
    wound turn has rounded corners; the area differs by (4 - pi) s^2). Images m and -m contribute
    equally. Truncation: the tail integral replaces images beyond n_images; the tests compare
    with 400 exact images.
    Ideal iron (mu -> inf, no eddy currents in the solid discs) makes this an upper bound.

    References
    ----------
    Method of images for a plane of infinite permeability: W. R. Smythe, Static and Dynamic
    Electricity, 1950, ch. 7 [from memory]. Mutual inductance: `mutual_inductance_coaxial_rectangles`.
    """
    n = np.asarray(turns, dtype=float)
    lh = np.asarray(hole_radial_m, dtype=float)[..., None, None]
    wh = np.asarray(hole_tangential_m, dtype=float)[..., None, None]
    w = np.asarray(leg_width_m, dtype=float)[..., None, None]
    tc = np.asarray(coil_thickness_m, dtype=float)[..., None, None]
    big_d = np.asarray(iron_gap_m, dtype=float)
    finite = np.isfinite(big_d)
    dd = np.where(finite, big_d, 1.0)[..., None, None]

    x, wt = np.polynomial.legendre.leggauss(n_gauss)
    x, wt = 0.5 * (x + 1.0), 0.5 * wt               # nodes and weights on [0, 1]
    # M is symmetric in the two rectangles and depends on z only through z_p - z_q: keep the
    # unique pairs (9 instead of 16 for n_gauss = 2) with their summed weights.
    i, j = np.triu_indices(n_gauss)
    w_s = wt[i] * wt[j] * np.where(i == j, 1.0, 2.0)
    dz, inverse = np.unique(np.round((x[:, None] - x[None, :]).ravel(), 12), return_inverse=True)
    w_z = np.bincount(inverse, weights=(wt[:, None] * wt[None, :]).ravel())
    s_i = x[i][:, None]                              # leg position, real coil
    s_j = x[j][:, None]                              # leg position, image coil
    z_pq = dz[None, :]                               # axial offsets / t_c
    weight = w_s[:, None] * w_z[None, :]
    m_axis = np.arange(1, n_images + 1, dtype=float)

    def mean_mutual(m):  # <M> at image position m (any real m > 0), averaged over the turns
        dist = np.abs(m * dd + z_pq * tc)
        mut = mutual_inductance_coaxial_rectangles(lh + 2 * s_i * w, wh + 2 * s_i * w,
                                                   lh + 2 * s_j * w, wh + 2 * s_j * w, dist)
        return np.sum(weight * mut, axis=(-2, -1))

    total = 0.0
    for m in m_axis:  # loop over a handful of images, not designs
        total = total + mean_mutual(m)
    # Tail m > K: the sum is the midpoint rule of int_{K+1/2}^inf <M(x D)> dx (Euler-Maclaurin; the
    # error is -f'/24 at K + 1/2, small because <M> varies over the coil size, >= one image step
    # once m D exceeds it). With y = 1/x the integrand <M(1/y)>/y^2 ~ y near 0 (dipole far field)
    # is smooth, so a few Gauss-Legendre points integrate it.
    y_nodes, y_weights = np.polynomial.legendre.leggauss(TAIL_NODES)
    y_top = 1.0 / (n_images + 0.5)
    tail = 0.0
    for y, wy in zip(0.5 * y_top * (y_nodes + 1.0), 0.5 * y_top * y_weights):
        tail = tail + wy * mean_mutual(1.0 / y) / (y * y)
    return np.where(finite, 2.0 * n * n * (total + tail), 0.0)


def coil_inductance(turns, hole_radial_m, hole_tangential_m, leg_width_m, coil_thickness_m,
                    iron_gap_m, n_images=8, n_gauss=2):
    """Self-inductance of one air-cored stator coil between the two rotor discs.

    Parameters
    ----------
    turns : array_like
        Turns per coil N [-].
    hole_radial_m, hole_tangential_m : array_like
        Coil hole L_h x W_h [m].
    leg_width_m : array_like
        In-plane width of the winding w [m].
    coil_thickness_m : array_like
        Axial thickness of the winding t_c [m].
    iron_gap_m : array_like
        Distance between the two rotor disc faces D = g + 2 h_m [m]; np.inf for a coil in free air.
    n_images, n_gauss : int
        See `image_inductance` [-].

    Returns
    -------
    ndarray
        L [H] = Wheeler multilayer self-inductance of a circular coil with the same mean turn
        length 2 (L_h + W_h) + pi w (turns round the hole with corner radius equal to their
        distance from it, as in geometry.py), axial length t_c and radial depth w, plus the images.

    References
    ----------
    H. A. Wheeler, Proc. IRE 16(10), 1928 (see `wheeler_multilayer_inductance`); images: see
    `image_inductance`. An equal-perimeter circle slightly overstates a rectangle's self-inductance
    (Grover 1946 notes the circle has the largest inductance for a given perimeter) [from memory].
    """
    w = np.asarray(leg_width_m, dtype=float)
    mean_turn = 2.0 * (np.asarray(hole_radial_m, dtype=float)
                       + np.asarray(hole_tangential_m, dtype=float)) + np.pi * w
    own = wheeler_multilayer_inductance(mean_turn / (2.0 * np.pi), coil_thickness_m, w, turns)
    return own + image_inductance(turns, hole_radial_m, hole_tangential_m, leg_width_m,
                                  coil_thickness_m, iron_gap_m, n_images, n_gauss)


def phase_inductance(coil_inductance_H, series_coils_per_path, parallel_paths):
    """Inductance of one phase: a identical paths of s coils in series.

    Parameters
    ----------
    coil_inductance_H : array_like
        Inductance of one coil [H].
    series_coils_per_path : array_like
        Coils in series per path s [-].
    parallel_paths : array_like
        Parallel paths a [-].

    Returns
    -------
    ndarray
        L_ph = s L_coil / a [H]. Mutual inductance between coils (same or other phases) is
        NEGLECTED and not estimated here: coplanar neighbours couple negatively in free air, and
        between the discs the returning flux of one coil threads its neighbours, so the true
        phase (and commutation) inductance may differ by tens of percent.
    """
    return (np.asarray(coil_inductance_H, dtype=float) * np.asarray(series_coils_per_path)
            / np.asarray(parallel_paths))


# --------------------------------------------------------------------------------------------
# Keystone coils: Neumann's integral over filament paths (reference) and the search's estimate
# --------------------------------------------------------------------------------------------

RECTANGLE_GMD = 0.2235
"""Geometric mean distance of a rectangle's area from itself over the sum of its sides (Maxwell's
approximation, exact to about 0.5 % for any aspect ratio: F. W. Grover, Inductance Calculations,
1946, ch. 3, from memory) [-]."""


def _segments(path_m, max_length_m):
    """Closed polyline (K, 3) cut into pieces no longer than max_length_m: (starts, ends)."""
    p = np.asarray(path_m, dtype=float)
    q = np.roll(p, -1, axis=0)
    k = np.maximum(1, np.ceil(np.linalg.norm(q - p, axis=1) / max_length_m).astype(int))
    t = np.concatenate([np.arange(n) / n for n in k])
    base, step = np.repeat(p, k, axis=0), np.repeat((q - p) / k[:, None], k, axis=0)
    start = base + np.repeat(q - p, k, axis=0) * t[:, None]
    return start, start + step


def neumann_mutual_inductance(path1_m, path2_m, max_segment_m=1e-3, n_gauss=2):
    """Mutual inductance of two closed filaments by Neumann's integral, numerically.

    Parameters
    ----------
    path1_m : array_like, shape (K1, 3)
        Closed polyline of the first filament (last point joins the first) [m].
    path2_m : array_like, shape (B, K2, 3) or (K2, 3)
        One or B closed polylines of second filaments [m].
    max_segment_m : float
        Longest straight piece; keep it below the smallest distance between the filaments [m].
    n_gauss : int
        Gauss-Legendre points along each piece [-].

    Returns
    -------
    ndarray, shape (B,) or ()
        M = mu0 / (4 pi) oint oint dl1 . dl2 / |r1 - r2| [H].

    References
    ----------
    F. Neumann's formula (e.g. F. W. Grover, Inductance Calculations, 1946, ch. 1, eq. 1; from
    memory). Vectorised over all pairs of pieces: points x points per batch.
    """
    a1, b1 = _segments(path1_m, max_segment_m)
    x, w = np.polynomial.legendre.leggauss(n_gauss)
    x, w = 0.5 * (x + 1.0), 0.5 * w
    r1 = (a1[:, None, :] + (b1 - a1)[:, None, :] * x[None, :, None]).reshape(-1, 3)
    dl1 = np.repeat(b1 - a1, n_gauss, axis=0) * np.tile(w, len(a1))[:, None]
    paths = np.asarray(path2_m, dtype=float)
    single = paths.ndim == 2
    out = []
    for path in np.atleast_3d(paths) if not single else [paths]:
        a2, b2 = _segments(path, max_segment_m)
        r2 = (a2[:, None, :] + (b2 - a2)[:, None, :] * x[None, :, None]).reshape(-1, 3)
        dl2 = np.repeat(b2 - a2, n_gauss, axis=0) * np.tile(w, len(a2))[:, None]
        total = 0.0
        for lo in range(0, len(r1), 2048):  # blocks of points: bounded memory
            d = np.linalg.norm(r1[lo:lo + 2048, None, :] - r2[None, :, :], axis=-1)
            total += np.sum((dl1[lo:lo + 2048] @ dl2.T) / d)
        out.append(MU0 / (4.0 * np.pi) * total)
    return out[0] if single else np.array(out)


def keystone_coil_inductance_neumann(turns, ring_radius_m, hole_radial_m, hole_tangential_m,
                                     side_angle_rad, leg_width_m, coil_thickness_m, iron_gap_m=np.inf,
                                     n_cells=3, n_images=10, points_per_corner=8, neighbour_rad=None):
    """Coil inductance from filament Neumann sums: own part, image part, mutual with the next coil.

    Parameters
    ----------
    turns : float
        Turns N spread uniformly over the winding's cross-section w x t_c [-].
    ring_radius_m, hole_radial_m, hole_tangential_m, side_angle_rad : float
        The former as in `geometry.coil_geometry` (side_angle 0: a rectangular former) [m, rad].
    leg_width_m, coil_thickness_m : float
        Winding cross-section w x t_c [m].
    iron_gap_m : float
        Distance D between the two disc faces (images at m D with the same current); inf: free air [m].
    n_cells : int
        The cross-section is cut into n_cells x n_cells cells, each a filament turn (the former
        grown by the cell's depth, corners rounded) at the cell's centre [-].
    n_images : int
        Images per side summed exactly (the rest is left out: the tail falls as 1/K^2) [-].
    points_per_corner : int
        Points on each corner arc of a filament [-].
    neighbour_rad : float, optional
        Angle 2 pi / Q to the next coil on the ring: its mutual inductance is computed too [rad].

    Returns
    -------
    dict
        "own": N^2 / n^4 sum_ab M_ab over the cells in free air (a cell with itself: its filament
        and a copy displaced axially by the cell's geometric mean distance 0.2235 (w + t_c) / n,
        `RECTANGLE_GMD`) [H]; "images": the same sum between the cells and the images' cells
        [H]; "neighbour": the mutual inductance with the next coil and its images (NaN unless
        `neighbour_rad`) [H]; "total": own + images [H].

    References
    ----------
    Filament summation with the GMD of the winding's cross-section: F. W. Grover, Inductance
    Calculations, 1946, ch. 3 and 16 (from memory). One design per call (a check, not for the
    search); checked against the round-wire rectangle formula and Maxwell's coaxial circles in
    tests/test_inductance_keystone.py.
    """
    from .geometry import hole_corners, turn_path

    lh, wh, phi = hole_radial_m, hole_tangential_m, side_angle_rad
    corners = hole_corners(ring_radius_m, lh, wh, wh + 2 * lh * np.tan(phi))
    n = int(n_cells)
    s = (np.arange(n) + 0.5) / n * leg_width_m
    z = ((np.arange(n) + 0.5) / n - 0.5) * coil_thickness_m
    gmd = RECTANGLE_GMD * (leg_width_m + coil_thickness_m) / n
    near = max(min(gmd, coil_thickness_m / n, leg_width_m / n) / 1.5, 2e-4)
    far = max(3 * near, 2e-3)
    images = [] if not np.isfinite(iron_gap_m) else [m * iron_gap_m for m in range(-n_images, n_images + 1) if m]
    rings = [turn_path(corners, si, points_per_corner) for si in s]

    def lift(ring, dz, angle=0.0):
        c, s_ = np.cos(angle), np.sin(angle)
        return np.column_stack([ring @ np.array([[c, s_], [-s_, c]]), np.full(len(ring), dz)])

    own = image = mutual = 0.0
    for i in range(n):
        for j in range(n):
            for zi in range(n):
                for zj in range(n):
                    dz = z[zi] - z[zj]
                    me = lift(rings[i], 0.0)
                    self_dz = gmd if (i == j and zi == zj) else dz
                    own += float(neumann_mutual_inductance(me, lift(rings[j], self_dz), near))
                    if images:
                        others = np.stack([lift(rings[j], dz + m) for m in images])
                        image += float(np.sum(neumann_mutual_inductance(me, others, far)))
                    if neighbour_rad is not None:
                        nb = np.stack([lift(rings[j], dz + m, neighbour_rad) for m in [0.0] + images])
                        mutual += float(np.sum(neumann_mutual_inductance(me, nb, far)))
    scale = turns ** 2 / n ** 4
    return {"own": scale * own, "images": scale * image, "total": scale * (own + image),
            "neighbour": scale * mutual if neighbour_rad is not None else np.nan}


def keystone_coil_inductance(turns, hole_perimeter_m, hole_area_m2, leg_width_m, coil_thickness_m,
                             iron_gap_m, n_images=8, n_gauss=2):
    """Self-inductance of one keystone (or any convex-former) coil between the rotor discs: the
    search's estimate.

    Parameters
    ----------
    turns : array_like
        Turns per coil N [-].
    hole_perimeter_m, hole_area_m2 : array_like
        Perimeter P_h [m] and area A_h [m^2] of the former (`geometry.CoilGeometry`).
    leg_width_m, coil_thickness_m : array_like
        Winding cross-section w x t_c [m].
    iron_gap_m : array_like
        Distance between the disc faces D [m]; np.inf for free air.
    n_images, n_gauss : int
        See `image_inductance` [-].

    Returns
    -------
    ndarray
        L [H]: Wheeler's multilayer formula on the circle of the mean turn's AREA (the turn at
        depth w/2 encloses A_h + P_h w/2 + pi w^2/4), plus the images of the rectangle with the
        former's perimeter whose turn at depth w/2 encloses that same area (sides a + b = P_h/2,
        a b = A_h - (1 - pi/4) w^2; `image_inductance` grows it by s on every side) .

    Notes
    -----
    Measured against `keystone_coil_inductance_neumann` (tests/test_inductance_keystone.py):
    the own part (equal-area circle) is within 3 % for cross-sections with 0.4 <= t_c / w <= 3.5
    (the equal-perimeter circle the rectangular coils use overstates a keystone by 13-22 %); very
    flat or very tall cross-sections are underestimated by up to about 11 % (Wheeler's formula's
    own range). The image part is 1-5 % above the filament sum, the whole within 3 %.

    References
    ----------
    H. A. Wheeler 1928 (`wheeler_multilayer_inductance`); images: `image_inductance`.
    """
    p = np.asarray(hole_perimeter_m, dtype=float)
    area = np.asarray(hole_area_m2, dtype=float)
    w = np.asarray(leg_width_m, dtype=float)
    mean_area = area + p * w / 2.0 + np.pi * w * w / 4.0
    own = wheeler_multilayer_inductance(np.sqrt(mean_area / np.pi), coil_thickness_m, w, turns)
    half = p / 4.0
    # the rectangle's turn at depth w/2 encloses the wound turn's area there: a b = A_h - (1 - pi/4) w^2
    spread = np.sqrt(np.maximum(half * half - area + (1.0 - np.pi / 4.0) * w * w, 0.0))
    return own + image_inductance(turns, half + spread, half - spread, leg_width_m, coil_thickness_m,
                                  iron_gap_m, n_images, n_gauss)
