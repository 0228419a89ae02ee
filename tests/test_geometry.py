"""Coil geometry and fit: exact limits checked by brute force, copper mass against a wire table."""

import numpy as np
import pytest

from optimiser.physics import geometry


def _rectangle_corners(center_angle, r_a, r_b, half_width):
    """Corners of a coil rectangle whose centre line points along center_angle (radial sides)."""
    c, s = np.cos(center_angle), np.sin(center_angle)
    out = []
    for r in (r_a, r_b):
        for b in (-half_width, half_width):
            out.append((r * c - b * s, r * s + b * c))
    return np.array(out)


def _overlap(poly_a, poly_b):
    """Separating-axis test for two convex quadrilaterals given as corner arrays (any order)."""
    def hull(p):
        centre = p.mean(axis=0)
        return p[np.argsort(np.arctan2(p[:, 1] - centre[1], p[:, 0] - centre[0]))]
    for poly in (hull(poly_a), hull(poly_b)):
        for i in range(4):
            edge = poly[(i + 1) % 4] - poly[i]
            axis = np.array([-edge[1], edge[0]])
            pa, pb = poly_a @ axis, poly_b @ axis
            if pa.max() <= pb.min() + 1e-12 or pb.max() <= pa.min() + 1e-12:
                return False
    return True


@pytest.mark.parametrize("coils,ring,length,width", [(9, 0.10, 0.040, 0.020), (12, 0.12, 0.046, 0.030),
                                                     (24, 0.14, 0.050, 0.010), (18, 0.09, 0.030, 0.010)])
def test_leg_width_is_the_widest_that_does_not_overlap(coils, ring, length, width):
    # Exactness check by brute force: neighbours touch at the leg width found, overlap if 2 % wider.
    g = geometry.coil_geometry(ring, length, width, coils, 50, 1, 1e-3, 0.8, 1e-3, 0.8e-3, 1.5e-3,
                               coil_spacing_m=0.0)
    w = float(g.leg_width_m)
    assert w > 0
    for factor, expect in ((0.98, False), (1.02, True)):
        ww = w * factor
        r_a = ring - float(g.hole_radial_m) / 2 - ww
        r_b = ring + float(g.hole_radial_m) / 2 + ww
        half = float(g.hole_tangential_m) / 2 + ww
        a = _rectangle_corners(0.0, r_a, r_b, half)
        b = _rectangle_corners(2 * np.pi / coils, r_a, r_b, half)
        assert _overlap(a, b) is expect


def test_mean_turn_length_equals_turn_by_turn_sum():
    # Turns at distance s from the hole round the corners with radius s: length 2(Lh+Wh) + 2 pi s.
    g = geometry.coil_geometry(0.11, 0.04, 0.02, 12, 200, 1, 1e-3, 0.8, 1e-3, 0.8e-3, 1.5e-3)
    w = float(g.leg_width_m)
    s = (np.arange(1000) + 0.5) / 1000 * w
    lengths = 2 * (float(g.hole_radial_m) + float(g.hole_tangential_m)) + 2 * np.pi * s
    assert float(g.mean_turn_length_m) == pytest.approx(lengths.mean(), rel=1e-9)


def test_coil_thickness_from_square_packing():
    # N n_s wires of square cell d_i^2 fill k_f of the window w x t_c.
    g = geometry.coil_geometry(0.11, 0.04, 0.02, 12, 100, 3, 1.1e-3, 0.75, 1e-3, 0.8e-3, 1.5e-3)
    assert float(g.coil_thickness_m) * float(g.leg_width_m) * 0.75 == pytest.approx(100 * 3 * 1.1e-3 ** 2)
    assert float(g.face_gap_m) == pytest.approx(float(g.coil_thickness_m) + 2 * 0.8e-3 + 2 * 1.5e-3)


def test_copper_mass_of_awg18_matches_wire_table():
    # AWG 18 (1.024 mm, ASTM B258) weighs about 7.32 kg per km of bare copper (common wire tables,
    # e.g. 4.92 lb per 1000 ft; value from memory). 0.5 % covers the tables' rounding.
    assert float(geometry.copper_mass_kg(1000.0, 1.024e-3)) == pytest.approx(7.32, rel=5e-3)


def test_fit_margins_flag_each_check_alone():
    kw = dict(min_coil_leg_m=4e-3, max_rotor_diameter_m=0.32, max_axial_length_m=0.11,
              shaft_diameter_m=0.025, hub_clearance_m=0.015)

    def margins(ring=0.11, length=0.04, width=0.02, thick=0.01, poles=16, coils=12, disc=0.30,
                disc_t=0.008, turns=80, **over):
        g = geometry.coil_geometry(ring, length, width, coils, turns, 1, 1e-3, 0.8, 1e-3, 0.8e-3, 1.5e-3)
        return geometry.fit_margins(ring, length, width, thick, poles, disc, disc_t, g, **(kw | over))

    names = [n for n, _ in geometry.FIT_CHECKS]
    assert np.all(margins() <= 0)
    cases = {"magnets_overlap": dict(poles=40), "coils_do_not_fit": dict(coils=36),
             "ring_beyond_disc": dict(disc=0.22), "disc_beyond_envelope": dict(disc=0.40),
             "axial_beyond_envelope": dict(turns=2000), "bore_clash": dict(ring=0.05, length=0.04, poles=4, coils=3)}
    for name, change in cases.items():
        m = margins(**change)
        assert m[names.index(name)] > 0, name


def test_vectorised_batch_matches_scalar_calls():
    rng = np.random.default_rng(3)
    n = 5000
    args = (rng.uniform(0.07, 0.15, n), rng.uniform(0.03, 0.05, n), rng.uniform(0.01, 0.025, n),
            rng.choice([9, 12, 18, 24], n), rng.integers(10, 300, n), rng.integers(1, 6, n),
            rng.uniform(0.5e-3, 2e-3, n))
    g = geometry.coil_geometry(*args, 0.8, 1e-3, 0.8e-3, 1.5e-3)
    i = 1234
    one = geometry.coil_geometry(*(a[i] for a in args), 0.8, 1e-3, 0.8e-3, 1.5e-3)
    for a, b in zip(g, one):
        assert a.shape == (n,)
        assert a[i] == pytest.approx(float(b))


# -- keystone coils -------------------------------------------------------------------------------

def _keystone(ring=0.115, length=0.040, width=0.020, coils=12, turns=100, spacing=0.5e-3, **kw):
    args = dict(strands=1, insulated_diameter_m=1.1e-3, fill_factor=0.6, hole_clearance_m=1e-3,
                resin_skin_m=0.8e-3, running_clearance_m=1.5e-3) | kw
    return geometry.coil_geometry(ring, length, width, coils, turns, coil_spacing_m=spacing,
                                  coil_shape=1, **args)


def _rotate(points, angle):
    c, s = np.cos(angle), np.sin(angle)
    return points @ np.array([[c, s], [-s, c]])


def _outline(g, ring, leg, n=400, step=2e-5):
    """The wound outline, resampled every `step` metres along its length (chords included)."""
    corners = geometry.hole_corners(ring, float(g.hole_radial_m), float(g.hole_tangential_m),
                                    float(g.hole_outer_tangential_m))
    p = geometry.turn_path(corners, leg, n)
    q = np.roll(p, -1, axis=0)
    pieces = [a + (b - a) * np.linspace(0, 1, max(2, int(np.linalg.norm(b - a) / step)), endpoint=False)[:, None]
              for a, b in zip(p, q)]
    return np.concatenate(pieces)


def _distance_to_polygon(points, corners):
    """Distance of points to a convex polygon (0 inside), by brute force over its edges."""
    a, b = corners, np.roll(corners, -1, axis=0)
    ab = b - a
    t = np.clip(np.einsum("pke,ke->pk", points[:, None, :] - a, ab) / np.sum(ab * ab, axis=1), 0, 1)
    nearest = a + t[..., None] * ab
    d = np.min(np.linalg.norm(points[:, None, :] - nearest, axis=-1), axis=1)
    cross = ab[:, 0] * (points[:, None, 1] - a[:, 1]) - ab[:, 1] * (points[:, None, 0] - a[:, 0])
    return np.where(np.all(cross >= 0, axis=1), 0.0, d)


@pytest.mark.parametrize("coils,ring,length,width", [(9, 0.10, 0.040, 0.020), (12, 0.115, 0.040, 0.020),
                                                     (24, 0.14, 0.050, 0.010), (18, 0.09, 0.030, 0.010)])
def test_keystone_leg_keeps_the_spacing_to_both_neighbours(coils, ring, length, width):
    # Brute force on the wound (rounded) outline: neighbours are the spacing apart, and closer
    # (overlapping) with a 2 % wider leg. Independent of the closed form: nearest sampled points.
    from scipy.spatial import cKDTree
    spacing = 0.5e-3
    g = _keystone(ring, length, width, coils, spacing=spacing)
    w = float(g.leg_width_m)
    assert w > 0
    for factor, far_enough in ((1.0, True), (1.02, False)):
        a = _outline(g, ring, w * factor, 200)
        b = _rotate(a, 2 * np.pi / coils)
        gap = cKDTree(b).query(a)[0].min()
        assert bool(gap >= spacing * (1 - 1e-3)) is far_enough
    assert gap < spacing  # 2 % wider: closer than the spacing
    # the hole holds the footprint and its clearance
    corners = geometry.hole_corners(ring, float(g.hole_radial_m), float(g.hole_tangential_m),
                                    float(g.hole_outer_tangential_m))
    foot = np.array([[ring + sx * (length / 2 + 1e-3), sy * (width / 2 + 1e-3)] for sx in (-1, 1)
                     for sy in (-1, 1)])
    assert np.all(_distance_to_polygon(foot, corners) < 1e-12)
    # widest point and innermost point of the outline
    radius = np.hypot(*_outline(g, ring, w, 2000).T)
    assert float(g.coil_outer_radius_m) == pytest.approx(radius.max(), rel=1e-6)
    assert float(g.coil_inner_radius_m) == pytest.approx(radius.min(), rel=1e-6)


@pytest.mark.parametrize("shape", [0, 1])
def test_mean_turn_length_and_area_against_traced_turns(shape):
    # Numerical integration of the turn paths, independent of the closed forms: each turn is the
    # level set {distance to the former = s}, traced by bisection along rays from the hole's centre
    # and measured as a polyline (length) and by the shoelace formula (area); the mean over s is
    # Gauss-Legendre. The closed forms are P_h + pi w and A_h + P_h s + pi s^2.
    ring = 0.115
    g = geometry.coil_geometry(ring, 0.04, 0.02, 12, 100, 1, 1.1e-3, 0.6, 1e-3, 0.8e-3, 1.5e-3,
                               coil_shape=shape)
    w = float(g.leg_width_m)
    corners = geometry.hole_corners(ring, float(g.hole_radial_m), float(g.hole_tangential_m),
                                    float(g.hole_outer_tangential_m))
    centre = corners.mean(axis=0)
    psi = np.linspace(0, 2 * np.pi, 6001)[:-1]
    ray = np.stack([np.cos(psi), np.sin(psi)], axis=1)
    nodes, weights = np.polynomial.legendre.leggauss(6)
    lengths, areas = [], []
    for s in 0.5 * w * (nodes + 1):
        lo, hi = np.zeros(psi.size), np.full(psi.size, 0.2)
        for _ in range(50):
            mid = 0.5 * (lo + hi)
            outside = _distance_to_polygon(centre + mid[:, None] * ray, corners) > s
            hi, lo = np.where(outside, mid, hi), np.where(outside, lo, mid)
        p = centre + 0.5 * (lo + hi)[:, None] * ray
        q = np.roll(p, -1, axis=0)
        lengths.append(np.sum(np.linalg.norm(q - p, axis=1)))
        areas.append(0.5 * abs(np.sum(p[:, 0] * q[:, 1] - q[:, 0] * p[:, 1])))
        assert areas[-1] == pytest.approx(float(g.hole_area_m2 + g.hole_perimeter_m * s + np.pi * s * s),
                                          rel=1e-4)
    assert float(g.mean_turn_length_m) == pytest.approx(0.5 * weights @ np.array(lengths), rel=1e-4)
    assert float(g.coil_area_m2) == pytest.approx(float(g.hole_area_m2 + g.hole_perimeter_m * w
                                                        + np.pi * w * w), rel=1e-12)


def test_keystone_at_the_issue_ring_is_wider_and_thinner():
    # 12 coils at 115 mm, 40 x 20 mm magnets: rectangular legs are about 11 mm (the issue's figure).
    rect = geometry.coil_geometry(0.115, 0.04, 0.02, 12, 100, 1, 1.1e-3, 0.6, 1e-3, 0.8e-3, 1.5e-3)
    key = _keystone()
    assert float(rect.leg_width_m) == pytest.approx(11e-3, abs=0.1e-3)
    assert float(key.leg_width_m) > 1.2 * float(rect.leg_width_m)
    # square packing in both: N n_s d^2 = k_f w t_c
    assert float(key.coil_thickness_m * key.leg_width_m) * 0.6 == pytest.approx(100 * 1.1e-3 ** 2)
    assert float(key.face_gap_m) < float(rect.face_gap_m)
    # the active conductor runs along the slanted sides: 2 L / cos(pi / Q)
    assert float(key.active_length_m) == pytest.approx(0.08 / np.cos(np.pi / 12))


def test_mixed_shapes_batch_matches_single_shape_calls_bit_for_bit():
    rng = np.random.default_rng(4)
    n = 3000
    args = (rng.uniform(0.07, 0.15, n), rng.uniform(0.03, 0.05, n), rng.uniform(0.01, 0.025, n),
            rng.choice([9, 12, 18, 24], n), rng.integers(10, 300, n), rng.integers(1, 6, n),
            rng.uniform(0.5e-3, 2e-3, n), 0.8, 1e-3, 0.8e-3, 1.5e-3)
    shape = rng.integers(0, 2, n)
    mixed = geometry.coil_geometry(*args, coil_shape=shape)
    rect = geometry.coil_geometry(*args)
    key = geometry.coil_geometry(*args, coil_shape=np.ones(n, int))
    for a, r, k in zip(mixed, rect, key):
        assert a.shape == (n,)
        assert np.array_equal(a, np.where(shape == 1, k, r))
    i = 77
    one = geometry.coil_geometry(*(a[i] for a in args[:7]), *args[7:], coil_shape=shape[i])
    for a, b in zip(mixed, one):
        assert a[i] == pytest.approx(float(b))


def test_fit_margins_hold_for_keystone_coils():
    kw = dict(min_coil_leg_m=4e-3, max_rotor_diameter_m=0.32, max_axial_length_m=0.11,
              shaft_diameter_m=0.025, hub_clearance_m=0.015)
    names = [n for n, _ in geometry.FIT_CHECKS]

    def margins(ring=0.11, coils=12, disc=0.30, **over):
        g = geometry.coil_geometry(ring, 0.04, 0.02, coils, 80, 1, 1e-3, 0.8, 1e-3, 0.8e-3, 1.5e-3,
                                   coil_shape=1)
        return geometry.fit_margins(ring, 0.04, 0.02, 0.01, 16, disc, 0.008, g, **(kw | over))

    assert np.all(margins() <= 0)
    assert margins(coils=36)[names.index("coils_do_not_fit")] > 0
    assert margins(max_rotor_diameter_m=0.29)[names.index("disc_beyond_envelope")] > 0
    assert margins(ring=0.05, coils=3)[names.index("bore_clash")] > 0
