"""Checks of the star-of-slots winding layout against published factors and independent algebra."""

from itertools import combinations
from math import gcd

import numpy as np
import pytest

from optimiser.physics.winding import (WindingError, coil_path, series_coils_per_path,
                                       star_of_slots, winding_table)

BASES = [(3, 4), (3, 2), (9, 8), (9, 10), (12, 10), (12, 14)]
ODD = np.arange(1, 40, 2)


def belt_formula_kd(coils, poles):
    """Fundamental distribution factor of m phasors evenly spread over a 60-degree belt.

    Independent of the code under test: after folding the reversed coils, one repeat of the star
    puts m = Q/(3t) (Q/t odd) or Q/(6t) (Q/t even) phasors per phase at equal spacing, spanning
    60 degrees, so k_d = sin(30 deg) / (m sin(30 deg / m)) (the classical distribution-factor
    formula, e.g. M. G. Say, Alternating Current Machines, 1976, ch. on windings; from memory).
    """
    t = gcd(coils, poles // 2)
    spokes = coils // t
    m = spokes // 3 if spokes % 2 else spokes // 6
    return np.sin(np.pi / 6) / (m * np.sin(np.pi / (6 * m)))


# EL-Refaie, IEEE Trans. Ind. Electron. 57(1), 2010, table of double-layer fundamental winding
# factors (values from memory; the belt formula above reproduces them independently). Published
# to three digits, hence the 1e-3 tolerance.
@pytest.mark.parametrize("coils, poles, kw", [(9, 8, 0.945), (9, 10, 0.945), (12, 10, 0.933),
                                              (12, 14, 0.933), (3, 4, 0.866), (3, 2, 0.866),
                                              (6, 8, 0.866)])
def test_winding_factor_ElRefaie_2010_table(coils, poles, kw):
    w = star_of_slots(coils, poles)
    assert w.winding_factor == pytest.approx(kw, abs=1e-3)
    assert w.distribution_factor == pytest.approx(belt_formula_kd(coils, poles), rel=1e-12)
    assert w.pitch_factor == pytest.approx(abs(np.sin(np.pi * poles / 2 / coils)), rel=1e-12)


@pytest.mark.parametrize("base", BASES)
@pytest.mark.parametrize("k", [1, 2, 3, 4])
def test_multiples_of_base_layouts_are_balanced(base, k):
    w1 = star_of_slots(*base)
    w = star_of_slots(base[0] * k, base[1] * k)
    assert np.bincount(w.coil_phase, minlength=3).tolist() == [base[0] * k // 3] * 3
    assert w.winding_factor == pytest.approx(w1.winding_factor, rel=1e-12)
    assert w.periodicity == gcd(base[0] * k, base[1] * k // 2)
    K = w.phase_factors(ODD)
    shift = np.exp(-2j * np.pi * ODD / 3)
    # b = a exp(-j n 2pi/3), c = a exp(+j n 2pi/3) for every odd harmonic (balanced, positive seq.)
    np.testing.assert_allclose(K[1], K[0] * shift, atol=1e-12)
    np.testing.assert_allclose(K[2], K[0] / shift, atol=1e-12)
    # triplen harmonics are zero-sequence: equal in the three phases
    np.testing.assert_allclose(K[:, 1], np.full(3, K[0, 1]), atol=1e-12)


def test_distribution_factor_matches_belt_formula_for_all_valid_layouts():
    checked = 0
    for coils in range(3, 61, 3):
        for poles in range(2, 82, 2):
            try:
                w = star_of_slots(coils, poles)
            except WindingError:
                t = gcd(coils, poles // 2)
                assert (coils // t) % 3 != 0
                continue
            assert w.distribution_factor == pytest.approx(belt_formula_kd(coils, poles), rel=1e-12)
            assert abs(w.phase_factors([1])[0, 0]) == pytest.approx(w.distribution_factor)
            checked += 1
    assert checked > 300


@pytest.mark.parametrize("k", [1, 2, 3, 5, 8])
def test_three_k_coils_four_k_poles_all_coils_in_step(k):
    # Common practice, no source: Q = 3k coils under 2p = 4k poles puts every coil of a phase in step.
    w = star_of_slots(3 * k, 4 * k)
    phasor = w.coil_polarity * np.exp(-1j * w.coil_angle_elec_rad)
    for ph in range(3):
        sel = phasor[w.coil_phase == ph]
        np.testing.assert_allclose(sel, np.full(sel.shape, sel[0]), atol=1e-12)
    assert w.distribution_factor == pytest.approx(1.0)


def test_positive_sequence_from_sampled_flux():
    # Independent of phase_factors: sum cos(theta_e - theta_k) over each phase's coils and find the
    # peaks; phase b must peak 120 electrical degrees after a, c 240 after.
    for coils, poles in BASES + [(24, 20), (18, 12)]:
        w = star_of_slots(coils, poles)
        theta = np.linspace(0, 2 * np.pi, 3600, endpoint=False)
        flux = np.array([np.sum(w.coil_polarity[w.coil_phase == ph, None]
                                * np.cos(theta[None, :] - w.coil_angle_elec_rad[w.coil_phase == ph,
                                                                                None]), axis=0)
                         for ph in range(3)])
        peak = theta[np.argmax(flux, axis=1)]
        lag = np.degrees((peak - peak[0]) % (2 * np.pi))
        np.testing.assert_allclose(lag, [0, 120, 240], atol=0.2)


@pytest.mark.parametrize("coils, poles", [(6, 6), (12, 12), (4, 6), (3, 6), (6, 12), (9, 3),
                                          (9, 18), (2, 2), (18, 18), (12, 3)])
def test_unbalanced_layouts_rejected(coils, poles):
    with pytest.raises(WindingError):
        star_of_slots(coils, poles)


def test_nine_coils_six_poles_is_three_times_three_two():
    # By the math: t = gcd(9, 3) = 3, Q/t = 3 spokes, so it is balanced (the 3:2 layout thrice).
    w, w1 = star_of_slots(9, 6), star_of_slots(3, 2)
    np.testing.assert_array_equal(w.coil_phase, np.tile(w1.coil_phase, 3))
    assert w.winding_factor == pytest.approx(w1.winding_factor)
    assert w.allowed_parallel_paths == (1, 3)


def test_bad_input_types_rejected():
    with pytest.raises(WindingError):
        star_of_slots(9.0, 8)
    with pytest.raises(WindingError):
        star_of_slots(9, 0)


def _paths_possible(phasors, a):
    """Brute force: can these coils be split into a equal-size groups with equal phasor sums?"""
    n = len(phasors)
    size = n // a
    target = phasors.sum(axis=0) / a

    def rec(remaining):
        if not remaining:
            return True
        first, rest = remaining[0], remaining[1:]
        for combo in combinations(rest, size - 1):
            group = (first,) + combo
            if np.allclose(phasors[list(group)].sum(axis=0), target, atol=1e-9):
                if rec(tuple(i for i in rest if i not in combo)):
                    return True
        return False

    return rec(tuple(range(n)))


@pytest.mark.parametrize("coils, poles", [(9, 8), (12, 10), (12, 14), (6, 8), (9, 6), (18, 16),
                                          (24, 20), (12, 16), (18, 12), (24, 28), (6, 4), (18, 14)])
def test_allowed_parallel_paths_are_exactly_the_identical_splits(coils, poles):
    w = star_of_slots(coils, poles)
    n = np.arange(1, 2 * coils, 2)  # phasors repeat with period Q in n: all odd harmonics
    for ph in range(3):
        sel = w.coil_phase == ph
        phasors = (w.coil_polarity[sel, None]
                   * np.exp(-1j * n[None, :] * w.coil_angle_elec_rad[sel, None]))
        for a in range(1, coils // 3 + 1):
            if (coils // 3) % a:
                continue
            assert _paths_possible(phasors, a) == (a in w.allowed_parallel_paths), (ph, a)


@pytest.mark.parametrize("coils, poles", [(24, 20), (12, 16), (18, 12), (9, 8)])
def test_winding_table_paths_identical(coils, poles):
    w = star_of_slots(coils, poles)
    n = np.arange(1, 2 * coils, 2)
    for a in w.allowed_parallel_paths:
        rows = winding_table(w, a)
        assert [r["coil"] for r in rows] == list(range(1, coils + 1))
        assert {r["phase"] for r in rows} == {"A", "B", "C"}
        path = coil_path(w, a)
        assert series_coils_per_path(w, a) == coils // 3 // a
        for ph in range(3):
            sums = []
            for j in range(1, a + 1):
                sel = (w.coil_phase == ph) & (path == j)
                assert sel.sum() == coils // 3 // a
                sums.append(np.sum(w.coil_polarity[sel, None]
                                   * np.exp(-1j * n * w.coil_angle_elec_rad[sel, None]), axis=0))
            np.testing.assert_allclose(np.array(sums), np.broadcast_to(sums[0], (a, n.size)), atol=1e-9)


def test_series_coils_per_path_array_and_rejection():
    w = star_of_slots(24, 20)
    np.testing.assert_array_equal(series_coils_per_path(w, np.array([1, 2, 4, 4])), [8, 4, 2, 2])
    with pytest.raises(WindingError):
        series_coils_per_path(w, 8)  # 8 divides 8 coils/phase but single coils differ in phase
    with pytest.raises(WindingError):
        series_coils_per_path(w, np.array([1, 3]))
