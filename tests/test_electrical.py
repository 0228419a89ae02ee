"""Resistance and inductance checks against wire tables, handbook coils and direct integrals."""

import time

import numpy as np
import pytest
from scipy import integrate

from optimiser.physics.electrical import (MU0, coil_inductance, copper_resistivity,
                                          image_inductance, mutual_inductance_coaxial_loops,
                                          mutual_inductance_coaxial_rectangles, phase_inductance,
                                          phase_resistance, wheeler_multilayer_inductance)

RNG_SEED = 20240601


def astm_b258_diameter_m(awg):
    # ASTM B258: d = 0.127 mm x 92^((36 - n) / 39) (the AWG definition).
    return 0.127e-3 * 92.0 ** ((36 - awg) / 39)


# Copper wire tables at 20 C, 100 % IACS (NBS Handbook 100, "Copper wire tables", 1966, values from
# memory; they follow from IEC 60028's 1/58 ohm mm^2/m and ASTM B258 diameters). Printed to four
# digits; 0.5 % also covers diameter rounding to 1 um.
@pytest.mark.parametrize("awg, diameter_mm, ohm_per_km", [(10, 2.588, 3.277), (14, 1.628, 8.286),
                                                          (18, 1.024, 20.95), (22, 0.644, 52.96)])
def test_awg_resistance_per_km_copper_wire_tables(awg, diameter_mm, ohm_per_km):
    assert astm_b258_diameter_m(awg) * 1e3 == pytest.approx(diameter_mm, abs=6e-4)
    r = phase_resistance(1000.0, diameter_mm * 1e-3, 1, 1, 20.0)
    assert r == pytest.approx(ohm_per_km, rel=5e-3)


def test_copper_temperature_rise_iec60028():
    # IEC 60028: alpha_20 = 0.00393 /K (from memory), linear law.
    assert copper_resistivity(100.0) / copper_resistivity(20.0) == pytest.approx(1 + 0.00393 * 80,
                                                                                 rel=1e-12)
    assert copper_resistivity(20.0) == pytest.approx(1.7241e-8, rel=1e-4)


def test_phase_resistance_scaling_and_shapes():
    base = phase_resistance(120.0, 1.0e-3, 2, 1, 60.0)
    assert np.ndim(base) == 0
    assert phase_resistance(240.0, 1.0e-3, 2, 1, 60.0) == pytest.approx(2 * base)
    assert phase_resistance(120.0, 1.0e-3, 4, 1, 60.0) == pytest.approx(base / 2)
    assert phase_resistance(120.0, 1.0e-3, 2, 2, 60.0) == pytest.approx(base / 2)
    assert phase_resistance(120.0, 2.0e-3, 2, 1, 60.0) == pytest.approx(base / 4)
    rng = np.random.default_rng(RNG_SEED)
    n = 10_000
    length, d = rng.uniform(10, 500, n), rng.uniform(0.3e-3, 2e-3, n)
    ns, a, temp = rng.integers(1, 8, n), rng.integers(1, 4, n), rng.uniform(0, 150, n)
    r = phase_resistance(length, d, ns, a, temp)
    assert r.shape == (n,)
    i = 1234
    assert r[i] == pytest.approx(phase_resistance(length[i], d[i], ns[i], a[i], temp[i]))


def neumann_loops(a, b, d):
    # Neumann's double integral for coaxial circles reduced to one angle (direct quadrature).
    f = lambda p: np.cos(p) / np.sqrt(a * a + b * b + d * d - 2 * a * b * np.cos(p))
    return MU0 * a * b / 2 * integrate.quad(f, 0, 2 * np.pi, epsabs=0, epsrel=1e-12, limit=200)[0]


@pytest.mark.parametrize("a, b, d", [(0.03, 0.02, 0.01), (0.05, 0.05, 0.002), (0.01, 0.04, 0.1),
                                     (0.03, 0.031, 0.0)])
def test_maxwell_loops_against_neumann_integral(a, b, d):
    assert mutual_inductance_coaxial_loops(a, b, d) == pytest.approx(neumann_loops(a, b, d),
                                                                      rel=1e-9)


def test_maxwell_loops_limits():
    # Far field: coaxial dipoles, M = mu0 pi a^2 b^2 / (2 d^3) (1 + O((a/d)^2)).
    a, b = 0.02, 0.03
    for d in (1.0, 3.0):
        far = MU0 * np.pi * a * a * b * b / (2 * d ** 3)
        assert mutual_inductance_coaxial_loops(a, b, d) == pytest.approx(far, rel=3 * (b / d) ** 2)
    # Close equal loops: M -> mu0 a (ln(8a/d) - 2) (Maxwell; Grover 1946 ch. 13, from memory);
    # the error is O((d/a)^2 ln), so it must shrink by ~100x per decade of d.
    a = 0.05
    errs = [abs(mutual_inductance_coaxial_loops(a, a, d) / (MU0 * a * (np.log(8 * a / d) - 2)) - 1)
            for d in (1e-3, 1e-4)]
    assert errs[0] < 2e-4 and errs[1] < errs[0] / 50


def neumann_rectangles(x1, y1, x2, y2, d):
    # Direct numerical Neumann integral, side by side: only parallel sides couple (dl1.dl2 = 0
    # otherwise); sign +1 for sides carrying current the same way.
    total = 0.0
    sides = lambda x, y: [((-x / 2, x / 2), y / 2, +1), ((-x / 2, x / 2), -y / 2, -1)]
    for (lx, ly, pairs_xy) in [(x1, y1, (x2, y2)), (y1, x1, (y2, x2))]:
        for (r1, c1, s1) in sides(lx, ly):
            for (r2, c2, s2) in sides(*pairs_xy):
                f = lambda u, v: 1.0 / np.sqrt((u - v) ** 2 + (c1 - c2) ** 2 + d * d)
                val = integrate.dblquad(f, r1[0], r1[1], r2[0], r2[1], epsabs=0, epsrel=1e-10)[0]
                total += s1 * s2 * val
    return MU0 / (4 * np.pi) * total


@pytest.mark.parametrize("dims", [(0.05, 0.03, 0.05, 0.03, 0.02), (0.05, 0.03, 0.07, 0.05, 0.01),
                                  (0.02, 0.02, 0.03, 0.04, 0.15)])
def test_rectangles_against_neumann_integral(dims):
    assert mutual_inductance_coaxial_rectangles(*dims) == pytest.approx(neumann_rectangles(*dims),
                                                                         rel=1e-7)
    x1, y1, x2, y2, d = dims
    assert mutual_inductance_coaxial_rectangles(x2, y2, x1, y1, d) == pytest.approx(
        mutual_inductance_coaxial_rectangles(*dims), rel=1e-12)


def test_rectangles_far_field_equals_equal_area_loops():
    # Both tend to coaxial dipoles mu0 A1 A2 / (2 pi d^3): two independent formulas agree.
    x, y, d = 0.04, 0.025, 1.5
    a = np.sqrt(x * y / np.pi)
    rect = mutual_inductance_coaxial_rectangles(x, y, x, y, d)
    assert rect == pytest.approx(mutual_inductance_coaxial_loops(a, a, d), rel=1e-3)
    assert rect == pytest.approx(MU0 * (x * y) ** 2 / (2 * np.pi * d ** 3), rel=1e-3)


def thick_coil_quadrature(a, b, c, n):
    # Independent: average Maxwell's filament formula over the rectangular winding cross-section
    # (Gauss-Legendre, n and n + 1 nodes so no pair coincides). Converges from below at ~n^-2;
    # at n = 36 the shortfall is ~0.1 %.
    x1, w1 = np.polynomial.legendre.leggauss(n)
    x2, w2 = np.polynomial.legendre.leggauss(n + 1)
    r1, z1, r2, z2 = np.meshgrid(a + c / 2 * x1, b / 2 * x1, a + c / 2 * x2, b / 2 * x2,
                                 indexing="ij")
    w = np.einsum("i,j,k,l->ijkl", w1, w1, w2, w2) / 16
    return np.sum(w * mutual_inductance_coaxial_loops(r1, r2, np.abs(z1 - z2)))


@pytest.mark.parametrize("a, b, c", [(0.03, 0.02, 0.018), (0.03, 0.008, 0.012), (0.04, 0.01, 0.02)])
def test_wheeler_1928_multilayer_against_cross_section_integral(a, b, c):
    # Wheeler (Proc. IRE 16(10), 1928) claims ~1 % when 6a, 9b, 10c are comparable; allow 1.5 %
    # for that plus the quadrature's ~0.1 % shortfall.
    ref = thick_coil_quadrature(a, b, c, 36)
    assert wheeler_multilayer_inductance(a, b, c, 1) == pytest.approx(ref, rel=1.5e-2)
    assert wheeler_multilayer_inductance(a, b, c, 7) == pytest.approx(
        49 * wheeler_multilayer_inductance(a, b, c, 1), rel=1e-12)


def test_brooks_coil_grover_1946():
    # Brooks coil (square section c x c, mean radius 1.5 c): L = 0.025491 c N^2 uH with c in cm
    # (Grover, Inductance Calculations, 1946, multilayer coils; value from memory, reproduced by
    # the cross-section quadrature to 0.1 %). Wheeler is expected within its ~1 %.
    c = 0.01
    brooks = 0.025491e-6 * (c * 100)
    assert thick_coil_quadrature(1.5 * c, c, c, 36) == pytest.approx(brooks, rel=2e-3)
    assert wheeler_multilayer_inductance(1.5 * c, c, c, 1) == pytest.approx(brooks, rel=1e-2)


COIL = dict(turns=60, hole_radial_m=0.05, hole_tangential_m=0.03, leg_width_m=0.012,
            coil_thickness_m=0.008)


def test_images_raise_inductance_and_vanish_far_away():
    free = coil_inductance(iron_gap_m=np.inf, **COIL)
    gaps = np.array([0.02, 0.03, 0.05, 0.2, 2.0])
    with_iron = coil_inductance(iron_gap_m=gaps, **COIL)
    assert np.all(with_iron > free)
    assert np.all(np.diff(with_iron) < 0)           # closer discs, more inductance
    assert (with_iron[-1] - free) / free < 1e-4
    assert image_inductance(iron_gap_m=np.inf, **COIL) == 0.0


def test_image_truncation_and_quadrature_converge():
    ref = image_inductance(iron_gap_m=0.025, n_images=400, n_gauss=6, **COIL)
    assert image_inductance(iron_gap_m=0.025, **COIL) == pytest.approx(ref, rel=1e-3)
    assert image_inductance(iron_gap_m=0.025, n_images=1, **COIL) > ref  # dipole tail overstates


def test_images_tend_to_long_solenoid_limit():
    # Discs much closer than the coil size: the row of images is a solenoid of N/D turns per metre,
    # so N^2 sum M -> mu0 N^2 A / D (infinite-solenoid field, any textbook). Edge and self-term
    # corrections are O(D / size), so the ratio must climb towards 1.
    lh, wh = 0.05, 0.03
    ratio = [image_inductance(1, lh, wh, 1e-6, 1e-6, d, n_images=ni, n_gauss=1) * d
             / (MU0 * lh * wh) for d, ni in [(0.01, 400), (0.002, 2000), (0.0005, 8000)]]
    assert ratio[0] < ratio[1] < ratio[2] < 1.0
    assert ratio[2] > 0.94


def test_coil_inductance_scalar_array_batch():
    scalar = coil_inductance(iron_gap_m=0.03, **COIL)
    assert np.ndim(scalar) == 0
    assert coil_inductance(**{**COIL, "turns": 120}, iron_gap_m=0.03) == pytest.approx(4 * scalar)
    rng = np.random.default_rng(RNG_SEED)
    n = 10_000
    args = dict(turns=rng.integers(10, 200, n), hole_radial_m=rng.uniform(0.02, 0.06, n),
                hole_tangential_m=rng.uniform(0.01, 0.04, n),
                leg_width_m=rng.uniform(0.005, 0.02, n), coil_thickness_m=rng.uniform(3e-3, 15e-3, n))
    gap = rng.uniform(0.02, 0.04, n)
    t0 = time.perf_counter()
    L = coil_inductance(iron_gap_m=gap, **args)
    elapsed = time.perf_counter() - t0
    assert L.shape == (n,) and np.all(np.isfinite(L)) and np.all(L > 0)
    i = 4321
    one = coil_inductance(iron_gap_m=gap[i], **{k: v[i] for k, v in args.items()})
    assert L[i] == pytest.approx(one, rel=1e-12)
    assert elapsed < 5.0  # measured ~0.2 s here; generous for a loaded CI machine


def test_phase_inductance_series_parallel():
    assert phase_inductance(2e-4, 4, 1) == pytest.approx(8e-4)
    assert phase_inductance(2e-4, 2, 2) == pytest.approx(2e-4)
    np.testing.assert_allclose(phase_inductance(np.array([1e-4, 2e-4]), np.array([8, 4]),
                                                np.array([1, 2])), [8e-4, 4e-4])
