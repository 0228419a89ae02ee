"""Non-dominated filtering and hypervolume, checked against pymoo's own sorting and a brute force."""

import numpy as np
from pymoo.util.nds.non_dominated_sorting import NonDominatedSorting

from optimiser.search.front import hv_box, hypervolume, nondominated


def _brute_force(F):
    keep = []
    for i, f in enumerate(F):
        dominated = np.any(np.all(F <= f, axis=1) & np.any(F < f, axis=1))
        if not dominated:
            keep.append(i)
    return np.array(keep)


def test_nondominated_matches_pymoo_and_brute_force():
    # Independent oracle: pymoo's non-dominated sorting (first front), and a direct O(n^2) check.
    rng = np.random.default_rng(7)
    for n, m in ((300, 2), (2000, 4), (5000, 3)):
        F = rng.random((n, m))
        F[: n // 10] = F[n // 10: 2 * (n // 10)]  # exact duplicates: neither dominates the other
        ours = nondominated(F, block=257)
        assert np.array_equal(ours, _brute_force(F))
        theirs = NonDominatedSorting().do(F, only_non_dominated_front=True)
        assert set(ours) == set(theirs)


def test_hypervolume_of_known_shapes():
    # A single point at the ideal corner covers the whole unit box; at the reference, nothing.
    box = (np.zeros(4), np.ones(4))
    assert hypervolume(np.zeros((1, 4)), box) == 1.0
    assert hypervolume(np.ones((1, 4)), box) == 0.0
    # Two points (0.5, 0) and (0, 0.5) in 2-D: union of two rectangles = 0.75 (inclusion-exclusion).
    assert abs(hypervolume(np.array([[0.5, 0.0], [0.0, 0.5]]), (np.zeros(2), np.ones(2))) - 0.75) < 1e-12


def test_hv_box_contains_the_points():
    F = np.random.default_rng(1).random((50, 4))
    ideal, ref = hv_box(F)
    assert np.all(ideal < F.min(axis=0)) and np.all(ref > F.max(axis=0))
    assert 0.0 < hypervolume(F, (ideal, ref)) < 1.0


def test_merging_batch_by_batch_equals_the_front_of_everything():
    # merge_front keeps a front up to date generation by generation; it must equal the front of
    # the union every time (ties included), checked against pymoo's own sorting.
    from optimiser.search.front import merge_front

    rng = np.random.default_rng(11)
    F = np.round(rng.random((3000, 4)), 2)  # rounding makes ties common
    front = np.empty(0, dtype=np.int64)
    for start in range(0, len(F), 150):
        front = merge_front(F, front, np.arange(start, start + 150))
        seen = F[: start + 150]
        expected = NonDominatedSorting().do(seen, only_non_dominated_front=True)
        assert np.array_equal(front, np.sort(expected))
