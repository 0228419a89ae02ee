"""Keystone coils in the fast field model: flux linkage and EMF against two references.

1. The project's 3-D reference (`field.reference_coil_flux_linkage`: cuboid charge sheets with the
   iron discs as image stacks, Akoun & Yonnet 1984) integrated over the keystone's turn density.
2. magpylib (an independent library from PyPI): both rotors' blocks as `magpylib.magnet.Cuboid`
   with their images in the ideal iron discs, B_z integrated over the polygon of each turn
   (`geometry.turn_path`, the wound turn at its depth) and over the coil thickness.
Target (the issue): flux linkage and EMF within 1 % over a sweep of ring radius, coil count and
turns. Rectangular coils stay bit for bit what they were (the golden test).
"""

from __future__ import annotations

import numpy as np
import pytest

from optimiser.physics import field, geometry

magpylib = pytest.importorskip("magpylib")

ORDERS = np.arange(1, 16, 2)
BR = 1.3
MAGNET = (0.040, 0.020, 0.010)  # L, W, h [m]
M = 24  # samples over one electrical period


def _coil(ring, coils, turns, wire=1.1e-3, magnet=MAGNET):
    return geometry.coil_geometry(ring, magnet[0], magnet[1], coils, turns, 1, wire, 0.6, 1e-3, 0.8e-3,
                                  1.5e-3, coil_shape=1)


def _fast(g, ring, pole_pairs, magnet=MAGNET):
    L, W, h = magnet
    return field.keystone_flux_linkage_harmonics(BR, 1.0, L, W, h, float(g.face_gap_m), pole_pairs, ring,
                                                 float(g.hole_radial_m), float(g.hole_tangential_m),
                                                 float(g.side_angle_rad), float(g.leg_width_m),
                                                 float(g.coil_thickness_m), ORDERS)


def _emf_rms(wave):
    """rms of d lambda / d theta_e of a sampled period (the EMF per unit speed), by FFT."""
    k = np.arange(wave.shape[-1] // 2 + 1)
    d = np.fft.irfft(1j * k * np.fft.rfft(wave), wave.shape[-1])
    return np.sqrt(np.mean(d ** 2))


def _fast_wave(lam, M=M):
    """The fast model's waveform sampled as the reference is, harmonics below M/2 (as an FFT sees)."""
    theta = 2 * np.pi * np.arange(M) / M
    keep = ORDERS < M // 2
    return lam[keep] @ np.cos(np.outer(ORDERS[keep], theta))


SWEEP = [  # ring radius [m], coils Q, pole pairs p, turns: rings, coil counts and coil thicknesses
    (0.090, 9, 4, 60), (0.090, 9, 6, 140), (0.115, 12, 8, 100), (0.115, 12, 5, 40),
    (0.130, 12, 8, 40), (0.140, 18, 12, 150), (0.100, 15, 10, 80), (0.150, 24, 16, 120),
]


@pytest.mark.parametrize("ring,coils,p,turns", SWEEP)
def test_keystone_fast_model_within_1_percent_of_the_3d_reference(ring, coils, p, turns):
    g = _coil(ring, coils, turns)
    assert float(g.leg_width_m) > 3e-3
    L, W, h = MAGNET
    ref = field.reference_coil_flux_linkage(BR, L, W, h, float(g.face_gap_m), p, ring,
                                            float(g.hole_tangential_m), float(g.leg_width_m),
                                            float(g.coil_thickness_m), hole_radial_m=float(g.hole_radial_m),
                                            n_samples=M, side_angle_rad=float(g.side_angle_rad))[0]
    lam = _fast(g, ring, p)
    fundamental = lam[0] / (np.fft.rfft(ref)[1].real * 2 / M) - 1
    emf = _emf_rms(_fast_wave(lam)) / _emf_rms(ref) - 1
    print(f"\nR {ring} Q {coils} p {p} N {turns}: fundamental {fundamental:+.3%}, EMF rms {emf:+.3%}")
    assert abs(fundamental) < 0.01 and abs(emf) < 0.01


def test_keystone_reference_weights_are_the_mean_turn_area():
    # The turn density integrates to the mean of the turns' areas A_h + P_h s + pi s^2 over s in
    # 0..w (areas checked against traced turns in test_geometry.py).
    g = _coil(0.115, 12, 100)
    w = float(g.leg_width_m)
    _, _, wt = field._keystone_plane_quadrature(0.115, float(g.hole_radial_m), float(g.hole_tangential_m),
                                                float(g.side_angle_rad), w, 5, 20, 20)
    assert wt.sum() == pytest.approx(float(g.hole_area_m2 + g.hole_perimeter_m * w / 2 + np.pi * w * w / 3),
                                     rel=1e-12)


def test_turn_angle_lies_on_the_traced_turn():
    # keystone_turn_angle against the traced turn path (geometry.turn_path): the point at that angle
    # on the circle is at the turn's depth from the former (brute-force distance to the polygon).
    g = _coil(0.115, 12, 100)
    corners = geometry.hole_corners(0.115, float(g.hole_radial_m), float(g.hole_tangential_m),
                                    float(g.hole_outer_tangential_m))
    r = np.linspace(0.115 - 0.02, 0.115 + 0.02, 9)[:, None]
    s = np.linspace(0.0, float(g.leg_width_m), 7)[None, :]
    theta = field.keystone_turn_angle(r, s, 0.115, float(g.hole_radial_m), float(g.hole_tangential_m),
                                      float(g.side_angle_rad))
    pts = np.stack([r * np.cos(theta), r * np.sin(theta)], axis=-1).reshape(-1, 2)
    a, b = corners, np.roll(corners, -1, axis=0)
    ab = b - a
    t = np.clip(np.einsum("pke,ke->pk", pts[:, None, :] - a, ab) / np.sum(ab * ab, axis=1), 0, 1)
    dist = np.min(np.linalg.norm(pts[:, None, :] - (a + t[..., None] * ab), axis=-1), axis=1)
    assert np.allclose(dist, np.broadcast_to(s, theta.shape).ravel(), atol=1e-9)


def _magpylib_flux_linkage(g, ring, p, n_images=2, n_depths=4, edge_step=4e-3, n_radial=6, M=12):
    """Per-turn flux linkage at theta_e = 2 pi m / M from magpylib cuboids (mean over the turns).

    Magnets: 2p blocks per rotor, alternating, both rotors (polarization +-Br along z), and their
    images in the two ideal iron discs: each pole's blocks and images form a stack of period
    D = g + 2 h_m (blocks 2 h_m thick centred at (m + 1/2) D, the method of images for a plane of
    infinite permeability), n_images per side exactly and the rest as one long block of the mean
    polarization 2 h_m / D. Turns: Gauss-Legendre depths s over 0..w, each turn's polygon (the
    former grown by s, corners rounded) cut into triangles from the hole's centre, each triangle
    integrated by a collapsed Gauss rule; thickness: 3 Gauss-Legendre levels (B_z is even in z
    between the two rotors, so the levels at +-z share one evaluation).
    """
    L, W, h = MAGNET
    gap, tc = float(g.face_gap_m), float(g.coil_thickness_m)
    D = gap + 2 * h
    cuboids = []
    for j in range(2 * p):
        psi = j * np.pi / p
        sign = (-1.0) ** j
        for m in range(-n_images, n_images):
            cuboids.append(magpylib.magnet.Cuboid(dimension=(L, W, 2 * h), polarization=(0, 0, sign * BR),
                                                  position=(ring * np.cos(psi), ring * np.sin(psi),
                                                            (m + 0.5) * D)).rotate_from_angax(np.degrees(psi), "z"))
        for end in (1, -1):  # the smeared rest of the stack beyond |z| = K D
            length = 200 * D
            cuboids.append(magpylib.magnet.Cuboid(
                dimension=(L, W, length), polarization=(0, 0, sign * BR * 2 * h / D),
                position=(ring * np.cos(psi), ring * np.sin(psi), end * (n_images * D + length / 2))
            ).rotate_from_angax(np.degrees(psi), "z"))
    magnets = magpylib.Collection(*cuboids)
    corners = geometry.hole_corners(ring, float(g.hole_radial_m), float(g.hole_tangential_m),
                                    float(g.hole_outer_tangential_m))
    centre = corners.mean(axis=0)
    s_nodes, s_weights = np.polynomial.legendre.leggauss(n_depths)
    w = float(g.leg_width_m)
    u, wu = np.polynomial.legendre.leggauss(n_radial)  # collapsed (Duffy) rule on each triangle
    u, wu = 0.5 * (u + 1), 0.5 * wu
    v, wv = np.polynomial.legendre.leggauss(3)
    v, wv = 0.5 * (v + 1), 0.5 * wv
    pts, wts = [], []
    for s, ws in zip(0.5 * w * (s_nodes + 1), 0.5 * s_weights):
        poly = geometry.turn_path(corners, s, 12)
        q = np.roll(poly, -1, axis=0)
        a_list, b_list = [], []
        for a, b in zip(poly, q):  # split long chords so each triangle is narrow
            k = max(1, int(np.ceil(np.linalg.norm(b - a) / edge_step)))
            t = np.linspace(0, 1, k + 1)
            seg = a + (b - a) * t[:, None]
            a_list.append(seg[:-1])
            b_list.append(seg[1:])
        A, B = np.concatenate(a_list), np.concatenate(b_list)
        area = 0.5 * np.abs((A[:, 0] - centre[0]) * (B[:, 1] - centre[1]) - (A[:, 1] - centre[1]) * (B[:, 0] - centre[0]))
        # point = centre + u ((1 - v) A + v B - centre), Jacobian 2 area u
        P = centre + u[None, :, None, None] * ((1 - v)[None, None, :, None] * A[:, None, None, :]
                                               + v[None, None, :, None] * B[:, None, None, :] - centre)
        W8 = ws * 2 * area[:, None, None] * (u * wu)[None, :, None] * wv[None, None, :]
        pts.append(P.reshape(-1, 2))
        wts.append(W8.ravel())
    pts, wts = np.concatenate(pts), np.concatenate(wts)  # sum of wts = mean turn area
    zn, zw = np.array([0.0, np.sqrt(0.6)]), np.array([8 / 9, 10 / 9])  # 3-point Gauss, +-z folded
    t_red, inv, sign = field._reduced_angles(M)  # lambda(-t) = lambda(t), lambda(t + pi) = -lambda(t)
    obs = []
    for theta in t_red:  # the rotor turned by theta / p is the coil turned back by it
        c, s_ = np.cos(-theta / p), np.sin(-theta / p)
        xy = pts @ np.array([[c, s_], [-s_, c]])
        for z in zn * tc / 2:
            obs.append(np.column_stack([xy, np.full(len(xy), z)]))
    Bz = magpylib.getB(magnets, np.concatenate(obs))[:, 2].reshape(len(t_red), len(zn), len(pts))
    lam = np.einsum("azp,z,p->a", Bz, zw / 2, wts)
    return sign * lam[inv], wts.sum()


M_MAGPYLIB = 12
MAGPYLIB_SWEEP = [(0.090, 9, 4, 60), (0.115, 12, 8, 100), (0.140, 18, 12, 150)]


@pytest.mark.parametrize("ring,coils,p,turns", MAGPYLIB_SWEEP)
def test_keystone_fast_model_within_1_percent_of_magpylib(ring, coils, p, turns):
    g = _coil(ring, coils, turns)
    w = float(g.leg_width_m)
    wave, area = _magpylib_flux_linkage(g, ring, p, M=M_MAGPYLIB)
    # the polygon quadrature holds the mean turn's area (its chords cut the corners' arcs slightly)
    assert area == pytest.approx(float(g.hole_area_m2 + g.hole_perimeter_m * w / 2 + np.pi * w * w / 3), rel=2e-3)
    lam = _fast(g, ring, p)
    fundamental = lam[0] / (np.fft.rfft(wave)[1].real * 2 / M_MAGPYLIB) - 1
    emf = _emf_rms(_fast_wave(lam, M_MAGPYLIB)) / _emf_rms(wave) - 1
    print(f"\nmagpylib R {ring} Q {coils} p {p} N {turns}: fundamental {fundamental:+.3%}, EMF rms {emf:+.3%}")
    assert abs(fundamental) < 0.01 and abs(emf) < 0.01
