"""Tests of optimiser.search.mating (the fill-in along the turns) and SearchSpace.genotypes."""

from pathlib import Path

import numpy as np
import pytest
from pymoo.core.population import Population

from optimiser.catalogs import load_catalogs
from optimiser.evaluate import Evaluator
from optimiser.scenario import load_scenario
from optimiser.search.front import nondominated
from optimiser.search.mating import TURNS_COLUMN, FrontFillMating
from optimiser.search.problem import DesignDuplicateElimination, SizingProblem
from optimiser.search.space import SearchSpace

BENCH = Path(__file__).resolve().parent / "benchmarks" / "data"  # every fourth random design feasible


@pytest.fixture(scope="module")
def setup():
    evaluator = Evaluator(load_catalogs(BENCH / "catalogs"), load_scenario(BENCH / "bench_scenario.toml"))
    space = SearchSpace(evaluator)
    problem = SizingProblem(space, evaluator)
    matrix = space.sample(3000, np.random.default_rng(4)).as_matrix()
    rows = problem.cache.lookup(matrix, problem.evaluate_new)
    _, F, violation = problem.cache.view()
    feasible = np.flatnonzero(violation[:, 0] <= 0)
    archive = feasible[nondominated(F[feasible])]
    assert len(archive) > 10 and len(rows) == 3000
    return space, problem, archive


def _mating(space, archive, progress):
    m = FrontFillMating(space, eliminate_duplicates=DesignDuplicateElimination(space))
    m.archive, m.progress = archive, progress
    return m


def test_genotypes_decode_back_to_the_same_designs(setup):
    space, _, _ = setup
    matrix = space.sample(2000, np.random.default_rng(9)).as_matrix()
    again = space.decode(np.array(space.genotypes(matrix), dtype=object)).as_matrix()
    np.testing.assert_array_equal(again, matrix)


def test_turn_neighbours_are_exactly_the_unevaluated_one_turn_steps(setup):
    space, problem, archive = setup
    cache = problem.cache
    got = _mating(space, archive, 1.0).turn_neighbours(cache, 10**9, np.random.default_rng(0))
    # Brute force, one design at a time: every archived design, one turn up and down.
    lo, hi = space.variables["turns"].bounds
    seen = {tuple(c) for c in cache.codes[: len(cache)]}
    want = set()
    for r in archive:
        for step in (-1, 1):
            c = cache.codes[r].copy()
            c[TURNS_COLUMN] += step
            if lo <= c[TURNS_COLUMN] <= hi and tuple(c) not in seen:
                want.add(tuple(c))
    assert {tuple(c) for c in got} == want and len(got) == len(want) > 0
    few = _mating(space, archive, 1.0).turn_neighbours(cache, 7, np.random.default_rng(0))
    assert len(few) == 7 and {tuple(c) for c in few} <= want


def test_fill_in_leads_the_offspring_only_late_in_the_run(setup):
    space, problem, archive = setup
    pop = Population.new(X=space.genotypes(problem.cache.designs(archive[:40])))
    neighbours = {tuple(c) for c in _mating(space, archive, 1.0).turn_neighbours(
        problem.cache, 10**9, np.random.default_rng(0))}

    def offspring(progress):
        off = _mating(space, archive, progress).do(problem, pop, 60, random_state=np.random.default_rng(3))
        codes = problem.cache.encode(space.decode(off.get("X")).as_matrix())
        return [tuple(c) in neighbours for c in codes], codes

    late, codes = offspring(1.0)
    assert len(late) == 60 and len(np.unique(codes, axis=0)) == 60
    assert all(late[: min(60, len(neighbours))])  # the fill-in first, the GA after
    early, _ = offspring(0.1)
    assert len(early) == 60 and sum(early) < 30  # the GA alone: few land on a one-turn step
