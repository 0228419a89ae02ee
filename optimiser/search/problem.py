"""The pymoo problem: one vectorised evaluation per population, with a cache of every design seen.

pymoo's duplicate elimination only looks inside the current population, so a GA revisits good
designs again and again; the cache answers those without running the physics, and it counts the
distinct designs evaluated, which is what the search's evaluation budget measures.

A population's new designs are cut into chunks of a size fixed when the run starts and each chunk
is one call of `evaluate_designs`, a pure function of the chunk. The chunks go to the problem's
`mapper` (serial when None; a process pool or a Dask cluster, see `parallel.py`) and come back in
chunk order, so the same run gives bit-identical results however (and wherever) it is evaluated.
The chunking itself must not depend on the mapper: the reference field model's results differ in
the last bit between a batch of one and a larger batch, so only equal chunks guarantee equal fronts.
"""

from __future__ import annotations

import numpy as np
from pymoo.core.duplicate import DuplicateElimination
from pymoo.core.problem import Problem

from ..design import DesignBatch
from ..evaluate import CONSTRAINTS, OBJECTIVES

FRONT_VALUES = ("emf_line_rms_per_rpm_V", "cut_in_rpm", "battery_power_W", "efficiency",
                "coil_thickness_m", "face_gap_m", "copper_mass_kg", "wire_cost", "disc_cost",
                "magnet_temperature_C", "back_iron_flux_density_T", "axial_attraction_N",
                "open_circuit_line_peak_V")
"""Derived values written beside the design and objectives in front.csv (kept for feasible designs,
so writing the front never re-runs the physics: with the reference model that would take minutes)."""


def evaluate_designs(evaluator, matrix):
    """(F minimisation form, G, V front values) of designs given as DesignBatch matrix rows.

    A pure function of (evaluator, matrix): what every worker runs on its chunks.
    """
    ev = evaluator.evaluate(DesignBatch.from_matrix(matrix))
    V = np.column_stack([np.asarray(ev[name], float) for name in front_values(evaluator)])
    return ev.objectives * evaluator.objective_sign, ev.constraints, V


def front_values(evaluator):
    """FRONT_VALUES, plus the default objectives a scenario's own objectives leave out."""
    extra = [name for name in OBJECTIVES if name not in evaluator.objectives]
    return (*extra, *FRONT_VALUES)


def split_chunks(matrix, chunk):
    """Consecutive chunks of at most `chunk` rows (0: one chunk)."""
    if chunk <= 0 or len(matrix) <= chunk:
        return [matrix]
    return [matrix[i:i + chunk] for i in range(0, len(matrix), chunk)]


class DesignCache:
    """Objectives and constraints of every distinct design evaluated, in order of first evaluation."""

    def __init__(self, n_var, n_obj):
        self.index = {}
        self.designs = np.empty((0, n_var))
        self.F = np.empty((0, n_obj))   # minimisation form
        self.G = np.empty((0, len(CONSTRAINTS)))
        self.values = {}  # cache row -> FRONT_VALUES, for feasible designs (pruned to the front by the run)
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
            result = evaluate(matrix[new])
            F, G = result[0], result[1]
            self._grow(len(new))
            start = self._n
            self.designs[start:start + len(new)] = matrix[new]
            self.F[start:start + len(new)] = F
            self.G[start:start + len(new)] = G
            for j, i in enumerate(new):
                self.index[keys[i]] = start + j
            if len(result) > 2:
                ok = np.all(G <= 0, axis=1)
                for j in np.flatnonzero(ok):
                    self.values[start + int(j)] = result[2][j]
            self._n += len(new)
            rows = np.fromiter((self.index[k] for k in keys), dtype=np.int64, count=len(keys))
        return rows

    def view(self):
        return self.designs[: self._n], self.F[: self._n], self.G[: self._n]

    def keep_values(self, rows):
        """Forget the front values of every row not in `rows` (designs that left the front)."""
        values = getattr(self, "values", {})
        self.values = {int(r): values[int(r)] for r in rows if int(r) in values}

    def __getstate__(self):
        # Checkpoint only the filled rows, and not the index: it is rebuilt from the designs.
        state = self.__dict__.copy()
        for name in ("designs", "F", "G"):
            state[name] = state[name][: self._n].copy()
        del state["index"]
        return state

    def __setstate__(self, state):
        state.setdefault("values", {})  # checkpoints from before the values were kept
        self.__dict__.update(state)
        if "index" not in state:
            self.index = {row.tobytes(): i for i, row in enumerate(self.designs[: self._n])}


class SizingProblem(Problem):
    """The scenario's objectives (by default: charge current maximised; torque, magnet bill and coil
    temperature minimised) under the fit, thermal, saturation and cut-in constraints."""

    def __init__(self, space, evaluator, chunk=0):
        super().__init__(vars=space.variables, n_obj=len(evaluator.objectives), n_ieq_constr=len(CONSTRAINTS))
        self.space, self.evaluator = space, evaluator
        self.cache = DesignCache(n_var=10, n_obj=len(evaluator.objectives))
        self.chunk = int(chunk)  # designs per chunk, fixed for the run's life (0: whole population)
        self.mapper = None       # where chunks are evaluated; never pickled (see __getstate__)

    def __getstate__(self):
        # A pool or a Dask client cannot (and must not) go into the checkpoint: the resumed run
        # attaches its own, possibly a different kind, and gets the same results.
        state = dict(super().__getstate__())
        state["mapper"] = None
        return state

    def __setstate__(self, state):
        state.setdefault("chunk", 0)  # checkpoints from before chunking evaluated whole populations
        state["mapper"] = None
        self.__dict__.update(state)

    def evaluate_matrix(self, matrix):
        """F (minimisation form) and G of designs given as DesignBatch matrices (in this process)."""
        F, G, _ = evaluate_designs(self.evaluator, matrix)
        return F, G

    def evaluate_new(self, matrix):
        """(F, G, V) of designs not seen before: chunked, mapped, joined back in chunk order."""
        chunks = split_chunks(matrix, self.chunk)
        if self.mapper is None:
            results = [evaluate_designs(self.evaluator, c) for c in chunks]
        else:
            results = self.mapper.map(chunks)
        return tuple(np.concatenate([r[k] for r in results]) for k in range(3))

    def _evaluate(self, X, out, *args, **kwargs):
        matrix = self.space.decode(X).as_matrix()
        rows = self.cache.lookup(matrix, self.evaluate_new)
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
