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
