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

from dataclasses import fields

import numpy as np
from pymoo.core.duplicate import DuplicateElimination
from pymoo.core.problem import Problem

from ..design import DesignBatch
from ..evaluate import OBJECTIVES

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


ROBUST_FRONT_VALUES = ("charge_current_A_p10", "drag_torque_Nm_p90", "coil_temperature_C_p90",
                       "coil_temperature_connected_C_p90", "amp_hours_per_day_p10",
                       "mean_added_drag_N_p90")
"""The build-spread values (robust.py) written to front.csv when the scenario's robust_samples > 0
(the profile ones only with a propeller)."""


def front_values(evaluator):
    """FRONT_VALUES, plus the default objectives a scenario's own objectives leave out, plus the
    build-spread values when the scenario samples builds."""
    extra = [name for name in OBJECTIVES if name not in evaluator.objectives]
    sc = evaluator.scenario
    robust = [name for name in ROBUST_FRONT_VALUES if sc.robust_samples > 0
              and name not in evaluator.objectives
              and (sc.has_propeller or not name.startswith(("amp_hours", "mean_added")))]
    return (*extra, *FRONT_VALUES, *robust)


RING_COLUMN = 3
"""Column of the ring radius in DesignBatch.as_matrix (the only non-integer design field)."""
N_DESIGN_COLUMNS = len(fields(DesignBatch))
"""Columns of DesignBatch.as_matrix and of the cache's codes."""


def split_chunks(matrix, chunk):
    """Consecutive chunks of at most `chunk` rows (0: one chunk)."""
    if chunk <= 0 or len(matrix) <= chunk:
        return [matrix]
    return [matrix[i:i + chunk] for i in range(0, len(matrix), chunk)]


class RowIndex:
    """Exact map from integer rows to their numbers: open addressing on a 64-bit hash of the row,
    every hit verified against the stored row, vectorised over a batch (no per-row Python work).

    About 16 bytes a row at the table's load of at most one half: a Python dict of byte strings
    costs ten times that, which an overnight search of millions of designs cannot afford.
    """

    def __init__(self, capacity=1 << 12):
        self.slots = np.full(capacity, -1, dtype=np.int64)
        self.count = 0

    @staticmethod
    def hash(codes):
        """64-bit FNV-1a over the columns, then the splitmix64 finaliser (avalanche)."""
        with np.errstate(over="ignore"):
            h = np.full(len(codes), 0xCBF29CE484222325, dtype=np.uint64)
            for column in codes.T:
                h = (h ^ column.astype(np.uint64)) * np.uint64(0x100000001B3)
            h = (h ^ (h >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
            h = (h ^ (h >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
            return h ^ (h >> np.uint64(31))

    def find(self, codes, store):
        """(row number or -1, slot where the row is or would go) for each row of `codes`."""
        mask = len(self.slots) - 1
        pos = (self.hash(codes) & np.uint64(mask)).astype(np.int64)
        found = np.full(len(codes), -1, dtype=np.int64)
        slot = np.empty(len(codes), dtype=np.int64)
        active = np.arange(len(codes))
        while len(active):
            held = self.slots[pos[active]]
            empty = held < 0
            match = np.zeros(len(active), dtype=bool)
            occupied = np.flatnonzero(~empty)
            match[occupied] = np.all(store[held[occupied]] == codes[active[occupied]], axis=1)
            found[active[match]] = held[match]
            done = empty | match
            slot[active[done]] = pos[active[done]]
            active = active[~done]
            pos[active] = (pos[active] + 1) & mask
        return found, slot

    def insert(self, codes, rows, store):
        """Add distinct new rows `codes` (not yet present) numbered `rows`; `store[rows] == codes`."""
        if 2 * (self.count + len(codes)) > len(self.slots):
            self._rehash(max(2 * len(self.slots), 1 << int(np.ceil(np.log2(4 * (self.count + len(codes)))))),
                         store)
        pending = np.arange(len(codes))
        while len(pending):
            _, slot = self.find(codes[pending], store)
            # two new rows may want one empty slot: the first takes it, the others probe again
            _, first = np.unique(slot, return_index=True)
            take = pending[first]
            self.slots[slot[first]] = rows[take]
            pending = np.setdiff1d(pending, take, assume_unique=True)
        self.count += len(codes)

    def _rehash(self, capacity, store):
        rows = self.slots[self.slots >= 0]
        self.slots = np.full(capacity, -1, dtype=np.int64)
        self.count = 0
        if len(rows):
            self.insert(store[rows], rows, store)


def violation(G):
    """pymoo's constraint violation of rows of G (<= 0 satisfied): the sum of the positive parts.

    0 exactly when every constraint holds. The search needs no more than this (feasible first, then
    the least violation), so the cache keeps one column instead of one per constraint.
    """
    return np.sum(np.maximum(0.0, np.asarray(G, dtype=float)), axis=1, keepdims=True)


class DesignCache:
    """Objectives and constraint violation of every distinct design evaluated, in order of first
    evaluation.

    Designs are kept as exact integer codes (catalog rows and counts; the ring radius in
    micrometres) in int32, found through a `RowIndex`: about 96 bytes a design in all
    (40 codes, 32 objectives, 8 violation, 16 index), before the arrays' growth margin.
    """

    def __init__(self, n_var, n_obj):
        self.codes = np.empty((0, n_var), dtype=np.int32)
        self.F = np.empty((0, n_obj))   # minimisation form
        self.G = np.empty((0, 1))       # constraint violation, see `violation` (0: feasible)
        self.index = RowIndex()
        self.values = {}  # cache row -> front values, for feasible designs (pruned to the front by the run)
        self._n = 0

    def __len__(self):
        return self._n

    @staticmethod
    def encode(matrix):
        """Exact integer codes of DesignBatch matrices (ring radius [m] -> micrometres)."""
        codes = np.rint(matrix).astype(np.int32)
        codes[:, RING_COLUMN] = np.rint(matrix[:, RING_COLUMN] * 1e6).astype(np.int32)
        return codes

    @staticmethod
    def decode(codes):
        matrix = codes.astype(float)
        matrix[:, RING_COLUMN] = codes[:, RING_COLUMN] / 1e6
        return matrix

    def _grow(self, extra):
        if self._n + extra > len(self.F):
            size = max(len(self.F) + len(self.F) // 2, self._n + extra, 1024)
            for name in ("codes", "F", "G"):
                old = getattr(self, name)
                new = np.empty((size, old.shape[1]), dtype=old.dtype)
                new[: self._n] = old[: self._n]
                setattr(self, name, new)

    def lookup(self, matrix, evaluate):
        """Row of each design in the cache, evaluating (in one call) those not seen before."""
        codes = self.encode(np.asarray(matrix, dtype=float))
        rows, _ = self.index.find(codes, self.codes)
        missing = np.flatnonzero(rows < 0)
        if len(missing):
            # A population may hold one new design twice: evaluate it once, in order of appearance.
            _, first = np.unique(codes[missing], axis=0, return_index=True)
            new = missing[np.sort(first)]
            result = evaluate(matrix[new])
            F, G = result[0], result[1]
            self._grow(len(new))
            start = self._n
            numbers = np.arange(start, start + len(new))
            self.codes[numbers] = codes[new]
            self.F[numbers] = F
            self.G[numbers] = violation(G)
            self.index.insert(codes[new], numbers, self.codes)
            if len(result) > 2:
                ok = np.all(G <= 0, axis=1)
                for j in np.flatnonzero(ok):
                    self.values[start + int(j)] = result[2][j]
            self._n += len(new)
            rows, _ = self.index.find(codes, self.codes)
        return rows

    def designs(self, rows):
        """DesignBatch matrices of cache rows."""
        return self.decode(self.codes[np.asarray(rows, dtype=np.int64)])

    def view(self):
        """(designs, F, violation) of every row (designs rebuilt as matrices: for tests and benchmarks)."""
        return self.designs(np.arange(self._n)), self.F[: self._n], self.G[: self._n]

    def keep_values(self, rows):
        """Forget the front values of every row not in `rows` (designs that left the front)."""
        values = getattr(self, "values", {})
        self.values = {int(r): values[int(r)] for r in rows if int(r) in values}

    def __getstate__(self):
        # Checkpoint only the filled rows, and not the index: it is rebuilt from the codes.
        state = self.__dict__.copy()
        for name in ("codes", "F", "G"):
            state[name] = state[name][: self._n].copy()
        del state["index"]
        return state

    def __setstate__(self, state):
        if state["G"].shape[1] > 1:  # a checkpoint from when every constraint was kept
            state["G"] = violation(state["G"])
        missing = N_DESIGN_COLUMNS - state["codes"].shape[1]
        if missing > 0:  # a checkpoint from before the coil shape: its designs are rectangular (0)
            state["codes"] = np.hstack([state["codes"], np.zeros((len(state["codes"]), missing), np.int32)])
        self.__dict__.update(state)
        self.index = RowIndex()
        if self._n:
            self.index.insert(self.codes[: self._n], np.arange(self._n), self.codes)


class SizingProblem(Problem):
    """The scenario's objectives (by default: charge current maximised; torque, magnet bill and coil
    temperature minimised) under the fit, thermal, saturation and cut-in constraints."""

    def __init__(self, space, evaluator, chunk=0):
        # One constraint for pymoo: the violation of all of them (see `violation`).
        super().__init__(vars=space.variables, n_obj=len(evaluator.objectives), n_ieq_constr=1)
        self.space, self.evaluator = space, evaluator
        self.cache = DesignCache(n_var=space.design_columns, n_obj=len(evaluator.objectives))
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
        # n_ieq_constr is 1, or one per constraint in a run checkpointed before the cache kept one
        # column: zeros beside the violation give pymoo the same sum.
        G = np.zeros((len(rows), self.n_ieq_constr))
        G[:, 0] = self.cache.G[rows, 0]
        out["G"] = G


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
