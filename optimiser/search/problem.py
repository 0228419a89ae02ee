"""The pymoo problem: one vectorised evaluation per population, with a cache of every design seen.

pymoo's duplicate elimination only looks inside the current population, so a GA revisits good
designs again and again; the cache answers those without running the physics, and it counts the
distinct designs evaluated, which is what the search's evaluation budget measures.
"""

from __future__ import annotations

import numpy as np
from pymoo.core.duplicate import DuplicateElimination
from pymoo.core.problem import Problem

from ..evaluate import CONSTRAINTS, OBJECTIVE_SIGN, OBJECTIVES


class DesignCache:
    """Objectives and constraints of every distinct design evaluated, in order of first evaluation."""

    def __init__(self, n_var):
        self.index = {}
        self.designs = np.empty((0, n_var))
        self.F = np.empty((0, len(OBJECTIVES)))   # minimisation form
        self.G = np.empty((0, len(CONSTRAINTS)))
        self._n = 0

    def __len__(self):
        return self._n

    def _grow(self, extra):
        if self._n + extra > len(self.F):
            size = max(2 * len(self.F), self._n + extra, 1024)
            for name in ("designs", "F", "G"):
                old = getattr(self, name)
                new = np.empty((size, old.shape[1]))
                new[: self._n] = old[: self._n]
                setattr(self, name, new)

    def lookup(self, matrix, evaluate):
        """Row of each design in the cache, evaluating (in one call) those not seen before."""
        keys = [row.tobytes() for row in matrix]
        rows = np.fromiter((self.index.get(k, -1) for k in keys), dtype=np.int64, count=len(keys))
        missing = np.flatnonzero(rows < 0)
        if len(missing):
            # A population may hold one new design twice: evaluate it once.
            first = {}
            for i in missing:
                first.setdefault(keys[i], i)
            new = np.fromiter(first.values(), dtype=np.int64, count=len(first))
            F, G = evaluate(matrix[new])
            self._grow(len(new))
            start = self._n
            self.designs[start:start + len(new)] = matrix[new]
            self.F[start:start + len(new)] = F
            self.G[start:start + len(new)] = G
            for j, i in enumerate(new):
                self.index[keys[i]] = start + j
            self._n += len(new)
            rows = np.fromiter((self.index[k] for k in keys), dtype=np.int64, count=len(keys))
        return rows

    def view(self):
        return self.designs[: self._n], self.F[: self._n], self.G[: self._n]


class SizingProblem(Problem):
    """Four objectives (charge current maximised; torque, magnet bill, coil temperature minimised)."""

    def __init__(self, space, evaluator):
        super().__init__(vars=space.variables, n_obj=len(OBJECTIVES), n_ieq_constr=len(CONSTRAINTS))
        self.space, self.evaluator = space, evaluator
        self.cache = DesignCache(n_var=10)

    def evaluate_matrix(self, matrix):
        """F (minimisation form) and G of designs given as DesignBatch matrices."""
        from ..design import DesignBatch

        ev = self.evaluator.evaluate(DesignBatch.from_matrix(matrix))
        return ev.objectives * OBJECTIVE_SIGN, ev.constraints

    def _evaluate(self, X, out, *args, **kwargs):
        matrix = self.space.decode(X).as_matrix()
        rows = self.cache.lookup(matrix, self.evaluate_matrix)
        out["F"] = self.cache.F[rows]
        out["G"] = self.cache.G[rows]


def _row_keys(matrix):
    """One opaque, comparable key per row (a void view of the row's bytes)."""
    matrix = np.ascontiguousarray(matrix)
    return matrix.view(np.dtype((np.void, matrix.dtype.itemsize * matrix.shape[1]))).ravel()


class DesignDuplicateElimination(DuplicateElimination):
    """Duplicates by decoded design, vectorised.

    pymoo's mixed-variable default compares genotype dicts pair by pair in Python (most of a
    generation's time here) and misses different genotypes that decode to the same design.
    """

    def __init__(self, space):
        super().__init__(func=self._designs)
        self.space = space

    def _designs(self, pop):
        return self.space.decode(pop.get("X")).as_matrix()

    def _do(self, pop, other, is_duplicate):
        keys = _row_keys(self.func(pop))
        if other is None:
            _, first = np.unique(keys, return_index=True)
            is_duplicate[:] = True
            is_duplicate[first] = False
        else:
            is_duplicate |= np.isin(keys, _row_keys(self.func(other)))
        return is_duplicate
