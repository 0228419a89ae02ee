"""Magnet field of the dual rotor: a fast quasi-3-D Fourier model and a 3-D reference.

Coordinates: z axial with z = 0 on the mid-plane of the face gap; magnet faces at z = +-g/2, iron
disc faces at z = +-(g/2 + h_m). Both rotors' blocks of pole k are magnetised along +z times
(-1)^k, so the flux crosses the stator straight. Pole 0 is centred at electrical angle theta_e
(mechanical theta_e / p), so a coil centred at electrical angle 0 links sum_n Lambda_n cos(n theta_e).

Fast model (search): 2-D Fourier solution between two ideal iron planes (Parviainen, Niemela &
Pyrhonen 2004) applied in radial slices, plus a radial-end correction derived from the same layered
solution with a radial wavenumber (see `_end_spill`).

Keystone coils (`keystone_flux_linkage_harmonics`) take the same slice field over their own turn
density: each turn's angular half-width on the slice's circle follows its slanted sides and rounded
corners (`keystone_turn_angle`); the reference integrates over the same density in the plane.

Reference model (tests, re-check of picked designs): closed-form field of uniformly magnetised
cuboids (surface-charge model) with the two ideal iron discs replaced by an infinite stack of
images, summed to a finite depth plus a smeared tail.
"""

from __future__ import annotations

import numpy as np

MU0 = 4e-7 * np.pi  # [H/m] (pre-2019 exact value; the CODATA 2018 value differs by 1e-10)

# --------------------------------------------------------------------------------------------
# Reference: closed-form cuboid (charge sheets) and images
# --------------------------------------------------------------------------------------------

_EPS = 1e-12  # [m] points closer than this to an edge line are treated as on it (masked)


def _log_plus(a, r, b2):
    """ln(a + r) with r = sqrt(a^2 + b2), cancellation-free for a < 0 (b2 = r^2 - a^2)."""
    out = np.empty_like(r)
    pos = a >= 0
    out[pos] = np.log(a[pos] + r[pos])
    neg = ~pos
    b2n = b2[neg]
    ok = b2n > _EPS**2
    tmp = np.zeros_like(b2n)
    tmp[ok] = np.log(b2n[ok] / (r[neg][ok] - a[neg][ok]))
    out[neg] = tmp  # on the edge line itself the term is singular; its weight is zero (masked)
    return out


def _sheet_terms(X, Y, Z):
    """Corner terms of a uniformly charged rectangle, for corner offsets X, Y and height Z [m].

    Returns (fx, fy, fz, P) such that summing sign * term over the four corners gives the integrals
    int X/R^3, int Y/R^3, int Z/R^3 and int 1/R over the rectangle (up to the 1/(4 pi) factor)."""
    X2, Y2, Z2 = X * X, Y * Y, Z * Z
    R = np.sqrt(X2 + Y2 + Z2)
    ly = _log_plus(Y, R, X2 + Z2)  # ln(Y + R)
    lx = _log_plus(X, R, Y2 + Z2)  # ln(X + R)
    den = Z * R
    with np.errstate(divide="ignore", invalid="ignore"):
        fz = np.where(np.abs(den) > _EPS**2, np.arctan(X * Y / np.where(den == 0, 1.0, den)), 0.0)
    return -ly, -lx, fz, X * ly + Y * lx - Z * fz


def cuboid_field(points_m, dimensions_m, polarization_T):
    """B field of a uniformly magnetised cuboid in its own frame (centred at the origin, edges on the axes).

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
        Observation points [m].
    dimensions_m : array_like, shape (..., 3)
        Full edge lengths (a, b, c) along x, y, z; broadcasts against points [m].
    polarization_T : array_like, shape (..., 3)
        Polarization J = mu0 M (for a permanent magnet with mu_r = 1, J = Br) [T].

    Returns
    -------
    B : ndarray, shape (..., 3)
        Flux density [T]; inside the magnet it includes J. Points on an edge line get the finite
        part only (the singular term is masked, as magpylib does).

    Notes
    -----
    Surface-charge model: sigma = M.n on the two faces normal to each polarization component; each
    face is a uniformly charged rectangle whose field has a closed form (atan and log terms over
    its four corners). A component along x or y is handled by permuting the axes. The recoil
    permeability is taken as 1 (rigid magnetisation).

    References
    ----------
    .. [1] G. Akoun and J.-P. Yonnet, "3D analytical calculation of the forces exerted between two
       cuboidal magnets", IEEE Trans. Magn. 20(5), 1962-1964, 1984 (from memory).
    .. [2] R. Engel-Herbert and T. Hesjedal, "Calculation of the magnetic stray field of a uniaxial
       magnetic domain", J. Appl. Phys. 97, 074504, 2005, eqs. for H of a z-magnetised cuboid
       (from memory; the implementation is checked against magpylib's Cuboid to 1e-9 relative).
    """
    p = np.asarray(points_m, dtype=float)
    dim = np.broadcast_to(np.asarray(dimensions_m, dtype=float), p.shape)
    J = np.broadcast_to(np.asarray(polarization_T, dtype=float), p.shape)
    B = np.zeros(p.shape)
    for k in range(3):  # polarization component along axis k: permute so that k becomes "z"
        if not np.any(J[..., k]):
            continue
        ax = [(k + 1) % 3, (k + 2) % 3, k]
        Hk = _z_cuboid_H(p[..., ax], dim[..., ax])  # per unit J, in permuted axes
        for i, a in enumerate(ax):
            B[..., a] += J[..., k] * Hk[..., i]
    half = dim / 2
    inside = np.all(np.abs(p) < half, axis=-1)
    B[inside] += J[inside]
    return B


def _z_cuboid_H(p, dim):
    """mu0 H / J of a z-magnetised cuboid (charge sheets at z = +-c/2) [dimensionless]."""
    x, y, z = p[..., 0], p[..., 1], p[..., 2]
    a, b, c = dim[..., 0] / 2, dim[..., 1] / 2, dim[..., 2] / 2
    H = np.zeros(p.shape)
    for zs, q in ((c, 1.0), (-c, -1.0)):
        Z = z - zs
        for xs, sx in ((-a, 1.0), (a, -1.0)):
            for ys, sy in ((-b, 1.0), (b, -1.0)):
                fx, fy, fz, _ = _sheet_terms(x - xs, y - ys, Z)
                s = q * sx * sy
                H[..., 0] += s * fx
                H[..., 1] += s * fy
                H[..., 2] += s * fz
    return H / (4 * np.pi)


def _stack_levels(magnet_thickness_m, face_gap_m, n_images):
    """Charge-sheet heights and weights of one pole's image stack (per unit surface charge).

    Blocks of thickness 2 h_m centred at (m + 1/2) D, m = -K..K-1 (D = g + 2 h_m), each with +1 on
    its top face and -1 on its bottom face; beyond |z| = K D the blocks are smeared into a column of
    mean polarization (2 h_m / D), whose only charge is a sheet at its end (midpoint rule for the
    remaining sum; error O((u D)^2 / 24) of a tail that is already down by exp(-u K D)).
    """
    h, g = magnet_thickness_m, face_gap_m
    D = g + 2 * h
    m = np.arange(-n_images, n_images)
    centres = (m + 0.5) * D
    z = np.concatenate([centres + h, centres - h, [n_images * D, -n_images * D]])
    q = np.concatenate([np.ones(2 * n_images), -np.ones(2 * n_images),
                        [-2 * h / D, 2 * h / D]])
    return z, q


def dual_rotor_field(points_m, remanence_T, magnet_length_m, magnet_width_m, magnet_thickness_m,
                     face_gap_m, pole_pairs, ring_radius_m, rotor_angle_rad=0.0, n_images=6):
    """3-D B field in the gap of the dual rotor with ideal iron discs (one design).

    Parameters
    ----------
    points_m : array_like, shape (P, 3)
        Observation points in the stator frame, |z| < g/2 [m].
    remanence_T : float
        Remanence Br at the working temperature (magnetisation taken rigid, mu_r = 1) [T].
    magnet_length_m, magnet_width_m, magnet_thickness_m : float
        Block radial length L, tangential width W and axial thickness h_m [m].
    face_gap_m : float
        Gap g between the magnet faces of the two rotors [m].
    pole_pairs : int
        p; 2p blocks per rotor [-].
    ring_radius_m : float
        Radius R_m of the block centres [m].
    rotor_angle_rad : float
        Mechanical angle of pole 0 [rad].
    n_images : int
        K: image blocks per side kept exactly before the smeared tail [-].

    Returns
    -------
    B : ndarray, shape (P, 3)
        Flux density [T].

    References
    ----------
    Images of a z-magnetised block in an ideal iron plane keep the magnetisation (textbook method
    of images for a plane of infinite permeability; e.g. K. J. Binns, P. J. Lawrenson and C. W.
    Trowbridge, The Analytical and Numerical Solution of Electric and Magnetic Fields, Wiley 1992,
    ch. 3, from memory). Cuboid field: see `cuboid_field`.
    """
    p = np.asarray(points_m, dtype=float)
    zl, ql = _stack_levels(magnet_thickness_m, face_gap_m, n_images)
    B = np.zeros(p.shape)
    dim = np.array([magnet_length_m, magnet_width_m, 0.0])
    for j in range(2 * int(pole_pairs)):
        psi = rotor_angle_rad + j * np.pi / pole_pairs
        c, s = np.cos(psi), np.sin(psi)
        xl = c * p[:, 0] + s * p[:, 1] - ring_radius_m
        yl = -s * p[:, 0] + c * p[:, 1]
        Hl = np.zeros(p.shape)
        for zs, q in zip(zl, ql):
            for xs, sx in ((-dim[0] / 2, 1.0), (dim[0] / 2, -1.0)):
                for ys, sy in ((-dim[1] / 2, 1.0), (dim[1] / 2, -1.0)):
                    fx, fy, fz, _ = _sheet_terms(xl - xs, yl - ys, p[:, 2] - zs)
                    w = q * sx * sy * (-1.0) ** j
                    Hl[:, 0] += w * fx
                    Hl[:, 1] += w * fy
                    Hl[:, 2] += w * fz
        B[:, 0] += c * Hl[:, 0] - s * Hl[:, 1]
        B[:, 1] += s * Hl[:, 0] + c * Hl[:, 1]
        B[:, 2] += Hl[:, 2]
    return B * remanence_T / (4 * np.pi)


def _sheet_potential(X, Y, Z):
    """Corner function of int 1/R over a charged rectangle (Z != 0 assumed) [m]."""
    R = np.sqrt(X * X + Y * Y + Z * Z)
    ly = np.log(np.where(Y >= 0, Y + R, (X * X + Z * Z) / (R - Y)))
    lx = np.log(np.where(X >= 0, X + R, (Y * Y + Z * Z) / (R - X)))
    return X * ly + Y * lx - Z * np.arctan(X * Y / (Z * R))


def _gauss_panels(edges, nodes):
    """Gauss-Legendre nodes and weights on consecutive panels [edges[i], edges[i+1]]."""
    xs, ws = [], []
    for (lo, hi), n in zip(zip(edges[:-1], edges[1:]), nodes):
        t, w = np.polynomial.legendre.leggauss(n)
        xs.append(0.5 * (hi - lo) * t + 0.5 * (hi + lo))
        ws.append(0.5 * (hi - lo) * w)
    return np.concatenate(xs), np.concatenate(ws)


def _near_poles(pole_pairs, near_poles):
    """Indices j of the blocks kept: all, or those within near_poles pole pitches of the coil
    (rotor angle in [0, half a pitch])."""
    j = np.arange(2 * pole_pairs)
    if near_poles is None or near_poles + 1 >= pole_pairs:
        return j
    k = np.where(j > pole_pairs, j - 2 * pole_pairs, j)  # signed pole index around the ring
    return j[(k >= -near_poles) & (k <= near_poles + 1)]  # rotor turns by up to half a pitch


def _reduced_angles(n_samples):
    """Map theta_e = 2 pi m / M onto [0, pi/2] with a sign, using lambda(-t) = lambda(t) and
    lambda(t + pi) = -lambda(t) (coil centred on a pole axis, alternating poles)."""
    t = 2 * np.pi * np.arange(n_samples) / n_samples
    sign = np.ones(n_samples)
    over = t >= np.pi
    t[over] -= np.pi
    sign[over] = -1
    back = t > np.pi / 2
    t[back] = np.pi - t[back]
    sign[back] *= -1
    uniq, inv = np.unique(np.round(t, 12), return_inverse=True)
    return uniq, inv, sign


def reference_coil_flux_linkage(remanence_T, magnet_length_m, magnet_width_m, magnet_thickness_m,
                                face_gap_m, pole_pairs, ring_radius_m, hole_tangential_m,
                                leg_width_m, coil_thickness_m, hole_radial_m=None, n_samples=72,
                                n_images=4, nodes_leg=5, nodes_hole=20, near_poles=4,
                                side_angle_rad=None):
    """Per-turn flux linkage waveform of one coil from the 3-D cuboid-plus-images field.

    Parameters
    ----------
    remanence_T : array_like, shape (n,)
        Br at the working temperature; magnetisation rigid (mu_r = 1) [T].
    magnet_length_m, magnet_width_m, magnet_thickness_m : array_like, shape (n,)
        Block radial length L, tangential width W, axial thickness h_m [m].
    face_gap_m : array_like, shape (n,)
        Gap g between the magnet faces [m].
    pole_pairs : array_like of int, shape (n,)
        p [-].
    ring_radius_m : array_like, shape (n,)
        Radius of the block centres and of the coil centre [m].
    hole_tangential_m : array_like, shape (n,)
        Coil hole width W_h (tangential) [m].
    leg_width_m : array_like, shape (n,)
        In-plane width w of the coil legs; turns are spread uniformly across it [m].
    coil_thickness_m : array_like, shape (n,)
        Axial thickness t_c of the winding, centred on z = 0 [m].
    hole_radial_m : array_like, shape (n,), optional
        Coil hole length L_h (radial); default L + (W_h - W), i.e. the same clearance [m].
    n_samples : int
        M samples over one electrical period [-].
    n_images : int
        Exact image blocks per side before the smeared tail [-].
    nodes_leg, nodes_hole : int
        Gauss-Legendre nodes per leg panel and (at least) across the hole, per direction; the hole
        gets one more node per 0.8 x (distance from coil face to magnet face) if that is more [-].
    near_poles : int or None
        Blocks kept: those within this many pole pitches beyond the coil's outer edge (None: all).
        Far blocks of an alternating ring cancel; 4 changes the linkage by < 1e-4 relative [-].
    side_angle_rad : array_like, shape (n,), optional
        Keystone coils: the hole's long sides at this angle to the centre line (pi / Q), turns
        wound round it with rounded corners (`geometry.coil_geometry`); 0 or None: rectangular
        (square-cornered turns, as below) [rad].

    Returns
    -------
    lam : ndarray, shape (n, M)
        Per-turn flux linkage (mean over the turns) at theta_e = 2 pi m / M [Wb].

    Notes
    -----
    A turn at offset s in [0, w] from the hole edge is a rectangle of half-sides (W_h/2 + s,
    L_h/2 + s); averaging over s turns the coil into the weight omega(x, y) = clip(1 - max(|y| -
    W_h/2, |x| - L_h/2) / w, 0, 1) over the coil plane. The thickness average of B_z is exact
    through the scalar potential: (1/t_c) int B_z dz = -mu0 (phi(t_c/2) - phi(-t_c/2)) / t_c =
    -2 mu0 phi(t_c/2) / t_c (phi is odd in z). The plane integral is Gauss-Legendre on panels
    split at the hole edges. The coil is straight-sided and centred on the x axis; every block is
    rotated to its own angle. Loops over designs (one design at a time, vectorised over points,
    blocks and image levels); about 0.1-0.5 s per design with the defaults.

    References
    ----------
    Potential of a uniformly charged rectangle, corner function X ln(Y + R) + Y ln(X + R) -
    Z atan(XY / (Z R)): E. Durand, Electrostatique, vol. I, Masson 1964 (from memory; checked here
    by differentiating it against the closed-form field). Cuboid field and images: see
    `cuboid_field` and `dual_rotor_field`.
    """
    arrs = np.broadcast_arrays(*[np.atleast_1d(np.asarray(a, dtype=float)) for a in (
        remanence_T, magnet_length_m, magnet_width_m, magnet_thickness_m, face_gap_m, pole_pairs,
        ring_radius_m, hole_tangential_m, leg_width_m, coil_thickness_m)])
    Br, L, W, h, g, p, Rm, Wh, w, tc = arrs
    Lh = L + (Wh - W) if hole_radial_m is None else np.broadcast_to(hole_radial_m, L.shape)
    phi = np.zeros(L.shape) if side_angle_rad is None else np.broadcast_to(side_angle_rad, L.shape)
    t_red, inv, sign = _reduced_angles(n_samples)
    out = np.empty((L.size, n_samples))
    for i in range(L.size):
        clear = g[i] / 2 - tc[i] / 2
        nhx = max(nodes_hole, int(np.ceil(Lh[i] / (0.8 * clear))))
        half_outer = Wh[i] / 2 + Lh[i] * np.tan(phi[i])
        nhy = max(nodes_hole, int(np.ceil(2 * half_outer / (0.8 * clear))))
        if phi[i] > 0:
            px, py, wt = _keystone_plane_quadrature(Rm[i], Lh[i], Wh[i], phi[i], w[i], nodes_leg,
                                                    nhx, nhy)
        else:
            xe = [-Lh[i] / 2 - w[i], -Lh[i] / 2, Lh[i] / 2, Lh[i] / 2 + w[i]]
            ye = [-Wh[i] / 2 - w[i], -Wh[i] / 2, Wh[i] / 2, Wh[i] / 2 + w[i]]
            xg, wx = _gauss_panels(xe, (nodes_leg, nhx, nodes_leg))
            yg, wy = _gauss_panels(ye, (nodes_leg, nhy, nodes_leg))
            X, Y = np.meshgrid(xg, yg, indexing="ij")
            om = np.clip(1 - np.maximum(np.abs(X) - Lh[i] / 2, np.abs(Y) - Wh[i] / 2) / w[i], 0, 1)
            wt = (wx[:, None] * wy[None, :] * om).ravel()
            px = Rm[i] + X.ravel()
            py = Y.ravel()
        zl, ql = _stack_levels(h[i], g[i], n_images)
        dz = (tc[i] / 2 - zl)[:, None, None]
        pp = int(p[i])
        acc = np.zeros((t_red.size, px.size))
        span = None if near_poles is None else (half_outer + w[i]) / Rm[i] * pp / np.pi + near_poles
        for j in _near_poles(pp, span):
            psi = t_red[:, None] / pp + j * np.pi / pp
            c, s = np.cos(psi), np.sin(psi)
            xl = (c * px + s * py - Rm[i])[None]
            yl = (-s * px + c * py)[None]
            tot = 0.0
            for xs, sx in ((-L[i] / 2, 1.0), (L[i] / 2, -1.0)):
                for ys, sy in ((-W[i] / 2, 1.0), (W[i] / 2, -1.0)):
                    P = _sheet_potential(xl - xs, yl - ys, dz)
                    tot = tot + sx * sy * np.tensordot(ql, P, axes=(0, 0))
            acc += (-1.0) ** j * tot
        lam = -(2 / tc[i]) * Br[i] / (4 * np.pi) * (acc @ wt)
        out[i] = sign * lam[inv]
    return out


def _keystone_plane_quadrature(ring_radius_m, hole_radial_m, hole_tangential_m, side_angle_rad,
                               leg_width_m, nodes_leg, nodes_x, nodes_y, nodes_arc=8):
    """Points and weights of the turn density of a keystone coil over its plane (one coil).

    The density of turns enclosing a point at distance d from the trapezoidal former is
    omega = 1 - d / w (turns at depths d..w, uniform in depth). The plane splits into pieces on
    which omega is smooth: the hole (omega = 1; Gauss on the bilinear map of the trapezoid), a
    strip along each side (omega = 1 - sigma / w at distance sigma; Gauss along and across) and a
    sector at each corner (omega = 1 - rho / w; polar Gauss). The weights sum to the mean turn's
    area A_h + P_h w / 2 + pi w^2 / 3.

    Returns
    -------
    x, y : ndarray
        Points in the stator plane, coil centred on the x axis at the ring radius [m].
    weight : ndarray
        omega x area element [m^2].
    """
    Rm, Lh, Wh, phi, w = ring_radius_m, hole_radial_m, hole_tangential_m, side_angle_rad, leg_width_m
    x_in, x_out = Rm - Lh / 2, Rm + Lh / 2
    y_in, y_out = Wh / 2, Wh / 2 + Lh * np.tan(phi)
    V = np.array([[x_in, -y_in], [x_out, -y_out], [x_out, y_out], [x_in, y_in]])  # anticlockwise
    xs, ys, ws = [], [], []
    # the hole: x = x_in + Lh a, y = (2 b - 1) Y(x), a, b in [0, 1]; Jacobian Lh 2 Y(x)
    a, wa = _gauss_panels([0.0, 1.0], (nodes_x,))
    b, wb = _gauss_panels([0.0, 1.0], (nodes_y,))
    X = x_in + Lh * a
    Y = y_in + (X - x_in) * np.tan(phi)
    xs.append(np.repeat(X, b.size))
    ys.append(((2 * b[None, :] - 1) * Y[:, None]).ravel())
    ws.append((wa[:, None] * wb[None, :] * Lh * 2 * Y[:, None]).ravel())
    sig, wsig = _gauss_panels([0.0, w], (nodes_leg,))
    rho, wrho = sig, wsig
    edge = np.roll(V, -1, axis=0) - V
    length = np.hypot(edge[:, 0], edge[:, 1])
    normal = np.stack([edge[:, 1], -edge[:, 0]], axis=1) / length[:, None]
    out_angle = np.arctan2(normal[:, 1], normal[:, 0])
    for k in range(4):
        n_along = nodes_x if k in (1, 3) else nodes_y  # long sides are edges 1 and 3
        tau, wtau = _gauss_panels([0.0, 1.0], (n_along,))
        P = V[k] + tau[:, None, None] * edge[k] + sig[None, :, None] * normal[k]
        xs.append(P[..., 0].ravel())
        ys.append(P[..., 1].ravel())
        ws.append((wtau[:, None] * wsig[None, :] * length[k] * (1 - sig / w)[None, :]).ravel())
        start = out_angle[k - 1]
        sweep = np.mod(out_angle[k] - start, 2 * np.pi)
        alpha, walpha = _gauss_panels([start, start + sweep], (nodes_arc,))
        xs.append((V[k, 0] + rho[:, None] * np.cos(alpha)[None, :]).ravel())
        ys.append((V[k, 1] + rho[:, None] * np.sin(alpha)[None, :]).ravel())
        ws.append((wrho[:, None] * walpha[None, :] * (rho * (1 - rho / w))[:, None]).ravel())
    return np.concatenate(xs), np.concatenate(ys), np.concatenate(ws)


# --------------------------------------------------------------------------------------------
# Fast model: 2-D Fourier series between ideal iron planes, in radial slices
# --------------------------------------------------------------------------------------------


def _gap_transfer(u, h, delta, mu):
    """sinh(u h) / [sinh(u h) cosh(u d) + mu cosh(u h) sinh(u d)] * cosh(u d), overflow-free [-]."""
    th = np.tanh(u * h)
    return th / (th + mu * np.tanh(u * delta))


def _sech(x):
    return 2 * np.exp(-x) / (1 + np.exp(-2 * x))


def fourier_coefficients(remanence_T, recoil_permeability, magnet_thickness_m, magnet_width_m,
                         face_gap_m, pole_pairs, radius_m, orders):
    """Amplitude B_n of harmonic n of B_z on the gap mid-plane, at one radius (2-D solution).

    All parameters broadcast; each is expanded with a trailing axis against `orders`, so pass
    shape (...) arrays and get (..., H).

    Parameters
    ----------
    remanence_T : array_like
        Br at the working temperature [T].
    recoil_permeability : array_like
        Relative recoil permeability mu_r of the magnet [-].
    magnet_thickness_m : array_like
        Axial thickness h_m of one block [m].
    magnet_width_m : array_like
        Tangential width W of a block; alpha_p = p W / (pi r) [m].
    face_gap_m : array_like
        Gap g between the magnet faces, delta = g / 2 [m].
    pole_pairs : array_like
        p [-].
    radius_m : array_like
        Slice radius r; pole pitch tau = pi r / p [m].
    orders : array_like, shape (H,)
        Odd harmonic orders n [-].

    Returns
    -------
    B_n : ndarray, shape (..., H)
        B_z(x, z) = sum_n B_n cosh(u_n z) cos(u_n x), u_n = n pi / tau [T].

    References
    ----------
    .. [1] J. Parviainen, M. Niemela and J. Pyrhonen, "Modeling of axial flux permanent-magnet
       machines", IEEE Trans. Ind. Appl. 40(5), 1333-1340, 2004 (quasi-3-D slices; from memory).
       The closed form here is re-derived for two ideal iron planes (scalar potential in the magnet
       and air layers, B_z and phi continuous at z = g/2, phi = 0 on the iron) and checked against
       the cuboid image sum to 1e-3 for mu_r = 1 (tests/test_field.py).
    """
    n = np.asarray(orders, dtype=float)
    Br, mu, h, W, g, p, r = (np.asarray(a, dtype=float)[..., None] for a in (
        remanence_T, recoil_permeability, magnet_thickness_m, magnet_width_m, face_gap_m,
        pole_pairs, radius_m))
    u = n * p / r
    alpha = p * W / (np.pi * r)
    d = g / 2
    return 4 * Br / (n * np.pi) * np.sin(n * np.pi * alpha / 2) * _gap_transfer(u, h, d, mu) \
        * _sech(u * d)


def _slices(ring_radius_m, magnet_length_m, n_slices):
    t, w = np.polynomial.legendre.leggauss(n_slices)
    Rm = np.asarray(ring_radius_m, dtype=float)[..., None]
    L = np.asarray(magnet_length_m, dtype=float)[..., None]
    return Rm + 0.5 * L * t, 0.5 * L * w  # (..., S) radii [m] and weights [m]


def coil_flux_linkage_harmonics(remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
                                magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m,
                                hole_tangential_m, leg_width_m, coil_thickness_m, orders,
                                n_slices=5, hole_radial_m=None, end_correction=True):
    """Peak per-turn flux linkage of each harmonic for a coil centred on a pole at theta_e = 0.

    Parameters
    ----------
    remanence_T : array_like, shape (n,)
        Br at the working temperature [T].
    recoil_permeability : array_like, shape (n,)
        mu_r of the magnet [-].
    magnet_length_m, magnet_width_m, magnet_thickness_m : array_like, shape (n,)
        Block radial length L, tangential width W, axial thickness h_m [m].
    face_gap_m : array_like, shape (n,)
        Gap g between the magnet faces [m].
    pole_pairs : array_like, shape (n,)
        p [-].
    ring_radius_m : array_like, shape (n,)
        Radius of the block centres (and coil centre) [m].
    hole_tangential_m : array_like, shape (n,)
        Coil hole width W_h [m].
    leg_width_m : array_like, shape (n,)
        In-plane leg width w, turns spread uniformly across it [m].
    coil_thickness_m : array_like, shape (n,)
        Axial winding thickness t_c, centred on the mid-plane [m].
    orders : array_like, shape (H,)
        Odd harmonic orders [-].
    n_slices : int
        Gauss-Legendre radial slices over the magnet length [-].
    hole_radial_m : array_like, shape (n,), optional
        Coil hole length L_h; default L + (W_h - W) (same clearance) [m].
    end_correction : bool
        Subtract the flux that fringes radially past each turn at the two magnet ends [-].

    Returns
    -------
    Lambda_n : ndarray, shape (n, H)
        Per-turn flux linkage lambda(theta_e) = sum_n Lambda_n cos(n theta_e), mean over the turns
        [Wb].

    Notes
    -----
    Per slice radius r and harmonic n, a turn of tangential half-width a links
    int_{-a}^{a} B_n cosh(u z) cos(u x) dx = (2 B_n / u) sin(u a) cosh(u z); the mean over the
    thickness gives sinh(u t_c/2) / (u t_c/2) and the mean over a = W_h/2 + s, s uniform on
    [0, w], gives (2 / (u^2 w)) [cos(u W_h/2) - cos(u (W_h/2 + w))]. x is taken as arc length at
    the slice radius (straight-sided coil and block, small angle). Every turn encloses the whole
    magnet length (the hole is longer than the block), so the slice sum covers the magnet length;
    see `_end_spill` for the radial ends.

    References
    ----------
    Parviainen, Niemela & Pyrhonen 2004 (see `fourier_coefficients`) for the slice method; the
    tangential and axial integrals are elementary.
    """
    args = (remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
            magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m, hole_tangential_m,
            leg_width_m, coil_thickness_m)
    if all(np.ndim(a) == 0 for a in args) and np.ndim(hole_radial_m) == 0:
        one = [np.atleast_1d(a) for a in args]
        hr = None if hole_radial_m is None else np.atleast_1d(hole_radial_m)
        return coil_flux_linkage_harmonics(*one, orders, n_slices, hr, end_correction)[0]
    n = np.asarray(orders, dtype=float)
    H = n.size
    f = lambda a: np.asarray(a, dtype=float)[..., None]  # noqa: E731  (N, 1)
    Br, mu, L, W, h = f(remanence_T), f(recoil_permeability), f(magnet_length_m), \
        f(magnet_width_m), f(magnet_thickness_m)
    d, p, Rm, a0 = f(face_gap_m) / 2, f(pole_pairs), f(ring_radius_m), f(hole_tangential_m) / 2
    w, t = f(leg_width_m), f(coil_thickness_m)
    r, wr = _slices(ring_radius_m, magnet_length_m, n_slices)  # (N, S)
    u1 = p / r
    # sin(n pi alpha/2), cos(n u1 a0), cos(n u1 (a0 + w)) for odd n by angle addition (no trig
    # on the harmonic axis: this kernel runs for every design of the search)
    # harmonic axis FIRST inside this kernel (contiguous per-harmonic rows), (H, N, S)
    s_a = _odd_multiples(0.5 * p * W / r, H)[1]
    c_0 = _odd_multiples(u1 * a0, H)[0]
    c_w = _odd_multiples(u1 * (a0 + w), H)[0]
    nn = n[:, None, None]
    u = nn * u1
    ed = np.exp(-2 * u * d)
    th, td = -np.expm1(-2 * u * h), -np.expm1(-2 * u * d)
    th, td = th / (2 - th), td / (2 - td)  # tanh via exp
    x = u * (t / 2)
    # sech(u d) sinh(x) / x, overflow-free (x < u d always)
    sx = (np.exp(x - u * d) - np.exp(-x - u * d)) / ((1 + ed) * x)
    amp = (4 / np.pi) * Br / nn * s_a * th / (th + mu * td) * sx
    tang = 2 * (c_0 - c_w) / (u * u * w)
    lam = np.einsum("...s,h...s->...h", wr, amp * tang)
    if not end_correction:
        return lam
    # radial ends, on a straight strip at the mean radius
    Lh = L + 2 * a0 - W if hole_radial_m is None else f(hole_radial_m)
    c_h = (Lh - L) / 2
    u0 = n * p / Rm  # (N, H)
    B0 = fourier_coefficients(Br[..., 0], mu[..., 0], h[..., 0], W[..., 0], 2 * d[..., 0],
                              p[..., 0], Rm[..., 0], n)
    x0 = u0 * t / 2
    beta = _end_decay_rate(u0, h, d, mu, t)
    spill = _end_spill(u0, beta, a0, w, c_h, L, p / Rm, H)
    # B0 decays as sech(u0 d) while sinh(x0) grows: cap x0 where B0 has underflowed anyway
    x0 = np.minimum(x0, 700.0)
    return lam - 2 * B0 / u0 * np.sinh(x0) / x0 * spill


def _odd_multiples(x, H):
    """cos(n x) and sin(n x) for n = 1, 3, ..., 2H-1 on a new FIRST axis, by angle addition."""
    c1, s1 = np.cos(x), np.sin(x)
    c2, s2 = c1 * c1 - s1 * s1, 2 * s1 * c1
    C = np.empty((H,) + x.shape)
    S = np.empty((H,) + x.shape)
    C[0], S[0] = c1, s1
    for k in range(1, H):
        C[k] = C[k - 1] * c2 - S[k - 1] * s2
        S[k] = S[k - 1] * c2 + C[k - 1] * s2
    return C, S


def _end_decay_rate(u, h, delta, mu, t):
    """Decay rate beta [1/m] of the exponential end kernel (beta/2) exp(-beta |y|) that has the
    same second moment as the exact radial spreading kernel of the layered solution.

    A radial wavenumber k turns u into kappa = sqrt(u^2 + k^2) in the same closed form, so the
    mid-plane, thickness-averaged field of a radially finite block is the 2-D value convolved in
    the radial direction with K, K^(k) = F(kappa) / F(u), F = G(kappa) S(kappa). For small k,
    K^ = 1 + k^2 F'(u) / (2 u F(u)), which an exponential kernel matches with
    1/beta^2 = -(ln F)'(u) / (2 u)."""
    th, td = np.tanh(u * h), np.tanh(u * delta)
    x = u * t / 2
    dlnF = (2 * h / np.sinh(2 * u * h)
            - (h * (1 - th**2) + mu * delta * (1 - td**2)) / (th + mu * td)
            - delta * td
            + (t / 2) / np.tanh(x) - 1 / u)
    return np.sqrt(2 * u / np.maximum(-dlnF, 1e-30))


def _end_spill(u, beta, a0, w, c_h, L, u1, H, rate=None):
    """Mean over s in [0, w] of sin(u (a0 + k s)) * spill(c_h + s) [m] (k = `rate`, 1 when None:
    the turn's half-width grows as its depth), where
    spill(c) = (exp(-beta c) - exp(-beta (c + L))) / beta is the flux (in units of B x length)
    of the radially spread field that falls beyond a turn overhanging the block ends by c, summed
    over both ends (each end: int_c^inf (zeta - c) K dzeta, minus the part already missing at the
    far end). u = n u1 on the last axis (H odd orders).

    Im[exp(j u a0 - beta c_h) (exp(z w) - 1) / (z w)], z = j u k - beta, in real arithmetic."""
    ca, sa = (c.T for c in _odd_multiples((u1 * a0)[..., 0], H))
    if rate is not None:  # keystone ends (the rectangular coil's arithmetic stays as it was)
        u = u * rate
        cw, sw = (c.T for c in _odd_multiples((u1 * rate * w)[..., 0], H))
    else:
        cw, sw = (c.T for c in _odd_multiples((u1 * w)[..., 0], H))
    E = np.exp(-beta * w)
    nr, ni = E * cw - 1, E * sw  # exp(z w) - 1
    den = (beta * beta + u * u) * w
    qr, qi = (-beta * nr + u * ni) / den, (-beta * ni - u * nr) / den  # (exp(zw)-1)/(z w)
    core = np.exp(-beta * c_h) * (sa * qr + ca * qi)
    return core * (-np.expm1(-beta * L)) / beta


def _slice_coefficients(remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
                        magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m, orders,
                        n_slices):
    r, wr = _slices(ring_radius_m, magnet_length_m, n_slices)
    ex = lambda a: np.asarray(a, dtype=float)[..., None]  # noqa: E731
    Bn = fourier_coefficients(ex(remanence_T), ex(recoil_permeability), ex(magnet_thickness_m),
                              ex(magnet_width_m), ex(face_gap_m), ex(pole_pairs), r, orders)
    u = np.asarray(orders, dtype=float) * ex(pole_pairs)[..., None] / r[..., None]
    return r, wr, Bn, u  # (N, S), (N, S), (N, S, H), (N, S, H)


def axial_attraction_force(remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
                           magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m, orders,
                           n_slices=5):
    """Axial force pulling the two rotors together, from the Maxwell stress on the mid-plane.

    Parameters are as in `coil_flux_linkage_harmonics` (per design, shape (n,)) [SI units:
    T, -, m, m, m, m, -, m, -]; `n_slices` radial Gauss-Legendre slices [-].

    Returns
    -------
    F : ndarray, shape (n,)
        Attraction force [N].

    Notes
    -----
    On z = 0, B_x = 0 by symmetry, so the stress is B_z^2 / (2 mu0) and
    F = int B_z^2 / (2 mu0) dA. The mean over a pole pitch of (sum B_n cos(u_n x))^2 is
    sum B_n^2 / 2, so F = int_{magnet length} 2 pi r sum_n B_n(r)^2 / (4 mu0) dr. Approximations:
    the harmonic series is truncated; the field is the 2-D one in every slice (no radial fringing
    beyond the magnet ends, which slightly overstates F because spreading lowers int B^2); ideal
    iron; the force on the stator is zero by symmetry, this is the rotor-to-rotor pull the bearings
    and hub must carry.

    References
    ----------
    Maxwell stress tensor: J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley 1999, sec. 6.7
    (from memory). Field: `fourier_coefficients`.
    """
    r, wr, Bn, _ = _slice_coefficients(remanence_T, recoil_permeability, magnet_length_m,
                                       magnet_width_m, magnet_thickness_m, face_gap_m, pole_pairs,
                                       ring_radius_m, orders, n_slices)
    return _force(r, wr, Bn)


def _force(r, wr, Bn):
    return np.sum(wr * 2 * np.pi * r * np.sum(Bn**2, axis=-1), axis=-1) / (4 * MU0)


def flux_per_pole(remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
                  magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m, orders, n_slices=5,
                  surface="face"):
    """Flux of one pole over a pole pitch, through the magnet face or into the iron disc.

    Parameters are as in `axial_attraction_force` [SI]; `surface` is "face" (z = g/2, the magnet
    face, as the spec asks) or "iron" (z = g/2 + h_m, the flux the disc carries) [-].

    Returns
    -------
    phi : ndarray, shape (n,)
        int over |x| < tau/2 and the magnet length of B_z [Wb].

    Notes
    -----
    At the face, B_z,n = B_n cosh(u delta); at the iron, solving the magnet layer (scalar potential
    zero on the iron) gives B_n^iron = Br_n - mu_r B_n sinh(u delta) / sinh(u h_m), with
    Br_n = (4 Br / (n pi)) sin(n pi alpha_p / 2): larger than at the face because flux also leaks
    sideways between neighbouring blocks inside the magnet layer. int_{-tau/2}^{tau/2} cos(u x) dx
    = 2 sin(n pi / 2) / u. The iron value is the one to use for disc saturation.

    References
    ----------
    Layered 2-D solution as in `fourier_coefficients` (derived here).
    """
    coefficients = _slice_coefficients(remanence_T, recoil_permeability, magnet_length_m,
                                       magnet_width_m, magnet_thickness_m, face_gap_m, pole_pairs,
                                       ring_radius_m, orders, n_slices)
    return _flux_per_pole(coefficients, remanence_T, recoil_permeability, magnet_width_m,
                          magnet_thickness_m, face_gap_m, pole_pairs, orders, surface)


def _flux_per_pole(coefficients, remanence_T, recoil_permeability, magnet_width_m,
                   magnet_thickness_m, face_gap_m, pole_pairs, orders, surface):
    r, wr, Bn, u = coefficients
    n = np.asarray(orders, dtype=float)
    d = np.asarray(face_gap_m, dtype=float)[..., None, None] / 2
    h = np.asarray(magnet_thickness_m, dtype=float)[..., None, None]
    if surface == "face":
        Bs = Bn * np.cosh(np.minimum(u * d, 700.0))  # cap: beyond it B_n has underflowed
    else:
        mu = np.asarray(recoil_permeability, dtype=float)[..., None, None]
        p = np.asarray(pole_pairs, dtype=float)[..., None, None]
        Br = np.asarray(remanence_T, dtype=float)[..., None, None]
        W = np.asarray(magnet_width_m, dtype=float)[..., None, None]
        alpha = p * W / (np.pi * r[..., None])
        Brn = 4 * Br / (n * np.pi) * np.sin(n * np.pi * alpha / 2)
        Bs = Brn - mu * Bn * np.sinh(np.minimum(u * d, 700.0)) / np.sinh(np.minimum(u * h, 700.0))
    per_slice = np.sum(Bs * 2 * np.sin(n * np.pi / 2) / u, axis=-1)
    return np.sum(wr * per_slice, axis=-1)


def back_iron_flux_density(flux_per_pole, disc_thickness_m, magnet_length_m):
    """Peak tangential flux density in a rotor disc.

    Parameters
    ----------
    flux_per_pole : array_like
        Flux entering the disc per pole (`flux_per_pole(..., surface="iron")`) [Wb].
    disc_thickness_m : array_like
        Steel disc thickness t_d [m].
    magnet_length_m : array_like
        Radial width of the disc band carrying the flux, taken as the block length L [m].

    Returns
    -------
    B : ndarray
        phi / (2 t_d L): half the pole flux turns each way in the disc [T]. Conservative: the flux
        also spreads radially beyond L in the disc.

    References
    ----------
    Magnetic-circuit estimate (textbook practice, e.g. J. F. Gieras, R.-J. Wang and M. J. Kamper,
    Axial Flux Permanent Magnet Brushless Machines, Springer 2008, ch. 2; from memory).
    """
    return np.asarray(flux_per_pole) / (2 * np.asarray(disc_thickness_m)
                                        * np.asarray(magnet_length_m))


def gap_field_rms_in_coil(remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
                          magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m,
                          coil_thickness_m, orders, n_slices=5):
    """Mean over the coil region of the squared peak amplitudes of B_z and B_x, per harmonic.

    Parameters are as in `coil_flux_linkage_harmonics` [SI]; `coil_thickness_m` t_c [m].

    Returns
    -------
    Bz2, Bx2 : ndarray, shape (n, H)
        Mean over the active length (the magnet length, Gauss slices) and the coil thickness of
        the squared peak amplitude of B_z and of B_x for harmonic n [T^2]. A conductor sees
        harmonic n at frequency n f_e with these amplitudes wherever it sits along a pole pitch.

    Notes
    -----
    In the air region div B = 0 and curl B = 0. With B_z = B_n cosh(u z) cos(u x),
    (curl B)_y = dB_x/dz - dB_z/dx = 0 gives B_x = -B_n sinh(u z) sin(u x) (sign for x along
    the motion with the pole centre at x = 0), and div B = -u B_n sinh cos + u B_n sinh cos = 0.
    Over z in [-t/2, t/2]: mean cosh^2 = 1/2 + sinh(u t)/(2 u t), mean sinh^2 =
    sinh(u t)/(2 u t) - 1/2. Radial fringing at the block ends is ignored (slightly overstates).

    References
    ----------
    Parviainen, Niemela & Pyrhonen 2004 (see `fourier_coefficients`); B_x derived here.
    """
    coefficients = _slice_coefficients(remanence_T, recoil_permeability, magnet_length_m,
                                       magnet_width_m, magnet_thickness_m, face_gap_m, pole_pairs,
                                       ring_radius_m, orders, n_slices)
    return _gap_field_rms(coefficients, coil_thickness_m)


def _gap_field_rms(coefficients, coil_thickness_m):
    _, wr, Bn, u = coefficients
    t = np.asarray(coil_thickness_m, dtype=float)[..., None, None]
    # B_n^2 decays as sech^2(u g/2) faster than sinh(u t) grows (t < g): cap x where B_n^2 is 0
    x = np.minimum(u * t, 700.0)
    sh = np.where(x > 1e-8, np.sinh(x) / (2 * np.where(x > 1e-8, x, 1.0)), 0.5)
    Lsum = np.sum(wr, axis=-1)[..., None]
    Bz2 = np.einsum("...s,...sh->...h", wr, Bn**2 * (0.5 + sh)) / Lsum
    Bx2 = np.einsum("...s,...sh->...h", wr, Bn**2 * (sh - 0.5)) / Lsum
    return Bz2, Bx2


def rotor_field_summary(remanence_T, recoil_permeability, magnet_length_m, magnet_width_m,
                        magnet_thickness_m, face_gap_m, pole_pairs, ring_radius_m,
                        coil_thickness_m, orders, n_slices=5):
    """`axial_attraction_force`, `flux_per_pole(surface="iron")` and `gap_field_rms_in_coil` in
    one call, with the slice coefficients they share computed once (same results, bit for bit).

    Parameters are as in `gap_field_rms_in_coil` [SI].

    Returns
    -------
    force_N : ndarray, shape (n,)
        Rotor-to-rotor attraction [N].
    iron_flux_per_pole_Wb : ndarray, shape (n,)
        Flux one pole sends into the disc [Wb].
    Bz2, Bx2 : ndarray, shape (n, H)
        Squared peak amplitudes of B_z and B_x over the coil region [T^2].
    """
    coefficients = _slice_coefficients(remanence_T, recoil_permeability, magnet_length_m,
                                       magnet_width_m, magnet_thickness_m, face_gap_m, pole_pairs,
                                       ring_radius_m, orders, n_slices)
    r, wr, Bn, _ = coefficients
    phi = _flux_per_pole(coefficients, remanence_T, recoil_permeability, magnet_width_m,
                         magnet_thickness_m, face_gap_m, pole_pairs, orders, "iron")
    return (_force(r, wr, Bn), phi) + _gap_field_rms(coefficients, coil_thickness_m)


# --------------------------------------------------------------------------------------------
# Keystone coils (physics/geometry.py): the fast model over the keystone's turn density
# --------------------------------------------------------------------------------------------


def keystone_turn_angle(radius_m, depth_m, ring_radius_m, hole_radial_m, hole_tangential_m,
                        side_angle_rad):
    """Angular half-width of a keystone turn where it crosses the circle of radius r [rad].

    Parameters
    ----------
    radius_m : array_like
        Radius r of the circle, between the hole's inner and outer ends [m].
    depth_m : array_like
        Distance s of the turn from the former (0 at the hole, the leg width at the outside) [m].
    ring_radius_m, hole_radial_m, hole_tangential_m : array_like
        Coil centre radius R_m, hole length L_h and the hole's width W_h at its inner end [m].
    side_angle_rad : array_like
        phi = pi / Q, the long sides' angle to the centre line [rad].

    Returns
    -------
    theta : ndarray
        Largest polar angle of the turn on that circle (the turn spans -theta..theta) [rad].

    Notes
    -----
    The turn is the set of points at distance s from the trapezoid (`geometry.coil_geometry`):
    the union of the trapezoid, the strip of width s along each side and a disc of radius s at
    each corner. The circle leaves the union at the largest of the angles at which it leaves each
    piece (they overlap in a chain from the hole's interior): the long side's strip, where the
    circle is e - s from the bisector (theta = phi - arcsin((e - s) / r), e = x_i sin(phi) -
    (W_h/2) cos(phi)), when that point lies along the side; the inner end's strip (x_i - s <= x
    <= x_i, |y| <= W_h/2); the discs at the inner and outer corners (rho_c, gamma_c): theta =
    gamma_c + arccos((r^2 + rho_c^2 - s^2) / (2 r rho_c)). Plane geometry, derived here.
    """
    r, s = np.asarray(radius_m, dtype=float), np.asarray(depth_m, dtype=float)
    Rm, Lh, Wh, phi = (np.asarray(a, dtype=float) for a in (ring_radius_m, hole_radial_m,
                                                            hole_tangential_m, side_angle_rad))
    x_in, x_out = Rm - Lh / 2, Rm + Lh / 2
    y_in = Wh / 2
    y_out = y_in + Lh * np.tan(phi)
    sp, cp = np.sin(phi), np.cos(phi)
    e = x_in * sp - y_in * cp
    t_in, t_out = x_in * cp + y_in * sp, x_out * cp + y_out * sp
    none = -np.inf
    d = e - s
    foot = np.sqrt(np.maximum(r * r - d * d, 0.0))
    side = np.where((foot >= t_in) & (foot <= t_out), phi - np.arcsin(np.clip(d / r, -1, 1)), none)
    # inner end strip: leaves through its top edge y = y_in, or through its far edge x = x_in - s
    x_top = np.sqrt(np.maximum(r * r - y_in * y_in, 0.0))
    top = np.where((x_top >= x_in - s) & (x_top <= x_in) & (r >= y_in),
                   np.arcsin(np.clip(y_in / r, -1, 1)), none)
    x_far = x_in - s
    y_far = np.sqrt(np.maximum(r * r - x_far * x_far, 0.0))
    far = np.where((r >= x_far) & (y_far <= y_in), np.arccos(np.clip(x_far / r, -1, 1)), none)
    theta = np.maximum(side, np.maximum(top, far))
    for xc, yc in ((x_in, y_in), (x_out, y_out)):
        rho, gamma = np.hypot(xc, yc), np.arctan2(yc, xc)
        arg = (r * r + rho * rho - s * s) / (2 * r * rho)
        theta = np.maximum(theta, np.where(arg <= 1.0, gamma + np.arccos(np.clip(arg, -1, 1)), none))
    return theta


def keystone_flux_linkage_harmonics(remanence_T, recoil_permeability, magnet_length_m,
                                    magnet_width_m, magnet_thickness_m, face_gap_m, pole_pairs,
                                    ring_radius_m, hole_radial_m, hole_tangential_m, side_angle_rad,
                                    leg_width_m, coil_thickness_m, orders, n_slices=5, n_depths=4,
                                    end_correction=True):
    """Peak per-turn flux linkage of each harmonic for a keystone coil centred on a pole.

    Parameters
    ----------
    remanence_T, recoil_permeability, magnet_length_m, magnet_width_m, magnet_thickness_m,
    face_gap_m, pole_pairs, ring_radius_m : array_like, shape (n,)
        As in `coil_flux_linkage_harmonics` [T, -, m, m, m, m, -, m].
    hole_radial_m, hole_tangential_m : array_like, shape (n,)
        Hole length L_h and its width W_h at the inner end [m].
    side_angle_rad : array_like, shape (n,)
        phi = pi / Q, the hole's long sides to the centre line [rad].
    leg_width_m, coil_thickness_m : array_like, shape (n,)
        Leg width w (turns spread uniformly over depths 0..w) and axial thickness t_c [m].
    orders : array_like, shape (H,)
        Odd harmonic orders [-].
    n_slices : int
        Gauss-Legendre radial slices over the magnet length [-].
    n_depths : int
        Linear pieces of the turn's angle against its depth (see Notes) [-].
    end_correction : bool
        Subtract the flux that fringes radially past each turn at the magnet ends [-].

    Returns
    -------
    Lambda_n : ndarray, shape (n, H)
        lambda(theta_e) = sum_n Lambda_n cos(n theta_e), mean over the turns [Wb].

    Notes
    -----
    The slice field is the rectangular coil's (`coil_flux_linkage_harmonics`): in a slice of
    radius r, harmonic n of B_z is B_n(r) cosh(u z) cos(n p psi) (psi the mechanical angle), so a
    turn spanning -theta..theta links (2 B_n / u) sin(n p theta) r-lengths of arc, and the
    thickness mean gives sinh(u t_c/2) / (u t_c/2). A keystone turn's theta(r, s) follows its
    sides and corners (`keystone_turn_angle`), so the mean over the turn density (s uniform on
    0..w) is taken on `n_depths` pieces in s, theta linear on each: on a piece,
    mean sin(n p theta) = (cos(n p theta_k) - cos(n p theta_k+1)) / (n p (theta_k+1 - theta_k)),
    exact for any harmonic where theta is linear in s (it is to within the arcsine's curvature
    along the sides). The radial ends take the rectangular model's spill (`_end_spill`) at each
    end with that end's half-width and its growth with s, averaged over the two ends.

    References
    ----------
    Parviainen, Niemela & Pyrhonen 2004 (see `fourier_coefficients`) for the slice method; the
    turn's shape and the piecewise integral are derived here. Checked against the 3-D reference
    over the keystone's turn density (`reference_coil_flux_linkage`) and against magpylib
    (tests/test_keystone_field.py).
    """
    args = (remanence_T, recoil_permeability, magnet_length_m, magnet_width_m, magnet_thickness_m,
            face_gap_m, pole_pairs, ring_radius_m, hole_radial_m, hole_tangential_m, side_angle_rad,
            leg_width_m, coil_thickness_m)
    if all(np.ndim(a) == 0 for a in args):
        return keystone_flux_linkage_harmonics(*[np.atleast_1d(a) for a in args], orders, n_slices,
                                               n_depths, end_correction)[0]
    (remanence_T, recoil_permeability, magnet_length_m, magnet_width_m, magnet_thickness_m,
     face_gap_m, pole_pairs, ring_radius_m, hole_radial_m, hole_tangential_m, side_angle_rad,
     leg_width_m, coil_thickness_m) = np.broadcast_arrays(*[np.asarray(a, dtype=float) for a in args])
    n = np.asarray(orders, dtype=float)
    H = n.size
    f = lambda a: np.asarray(a, dtype=float)[..., None]  # noqa: E731  (N, 1)
    Br, mu, L, W, h = f(remanence_T), f(recoil_permeability), f(magnet_length_m), \
        f(magnet_width_m), f(magnet_thickness_m)
    d, p, Rm = f(face_gap_m) / 2, f(pole_pairs), f(ring_radius_m)
    Lh, Wh, phi, w, t = f(hole_radial_m), f(hole_tangential_m), f(side_angle_rad), f(leg_width_m), \
        f(coil_thickness_m)
    r, wr = _slices(ring_radius_m, magnet_length_m, n_slices)  # (N, S)
    depth = w[..., None] * np.linspace(0.0, 1.0, n_depths + 1)  # (N, 1, K+1)
    geo = [a[..., None] for a in (Rm, Lh, Wh, phi)]
    theta = keystone_turn_angle(r[..., None], depth, *geo)  # (N, S, K+1)
    C = _odd_multiples(p[..., None] * theta, H)[0]  # cos(n p theta), (H, N, S, K+1)
    nn = n[:, None, None]
    step = nn[..., None] * (p[..., None] * np.diff(theta, axis=-1))  # n p (theta_k+1 - theta_k)
    mean_sin = np.mean((C[..., :-1] - C[..., 1:]) / step, axis=-1)  # (H, N, S)
    u1 = p / r
    s_a = _odd_multiples(0.5 * p * W / r, H)[1]
    u = nn * u1
    ed = np.exp(-2 * u * d)
    th, td = -np.expm1(-2 * u * h), -np.expm1(-2 * u * d)
    th, td = th / (2 - th), td / (2 - td)
    x = u * (t / 2)
    sx = (np.exp(x - u * d) - np.exp(-x - u * d)) / ((1 + ed) * x)
    amp = (4 / np.pi) * Br / nn * s_a * th / (th + mu * td) * sx
    lam = np.einsum("...s,h...s->...h", wr, amp * (2 / u) * mean_sin)
    if not end_correction:
        return lam
    c_h = (Lh - L) / 2
    u0 = n * p / Rm  # (N, H)
    B0 = fourier_coefficients(Br[..., 0], mu[..., 0], h[..., 0], W[..., 0], 2 * d[..., 0],
                              p[..., 0], Rm[..., 0], n)
    x0 = u0 * t / 2
    beta = _end_decay_rate(u0, h, d, mu, t)
    spill = 0.0
    for r_end in (Rm - L / 2, Rm + L / 2):
        th_end = keystone_turn_angle(r_end, np.concatenate([0 * w, w], axis=-1), Rm, Lh, Wh, phi)
        a0 = Rm * th_end[..., :1]  # the end's half-width and its growth, as angles times R_m
        rate = Rm * (th_end[..., 1:] - th_end[..., :1]) / w
        spill = spill + 0.5 * _end_spill(u0, beta, a0, w, c_h, L, p / Rm, H, rate)
    x0 = np.minimum(x0, 700.0)
    return lam - 2 * B0 / u0 * np.sinh(x0) / x0 * spill
