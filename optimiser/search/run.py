"""A search run folder: snapshot of the inputs, atomic checkpoints, history, front; start and resume.

Layout of a run folder (names are a contract; scripts read them)::

    run.json         seed, population, budget, settings, status, counters, catalog hashes
    scenario.toml    the scenario the run uses (a copy)
    catalogs/        a snapshot of the catalog CSVs the run uses
    checkpoint.pkl   the whole search state after the last saved generation (atomic replace)
    history.csv      one line per generation
    front.csv        every feasible non-dominated design found so far
    front.npz        the same front as integer arrays (design codes), what `front` and `pick` read
    lock             locked by the process searching in the folder (holds its pid)

The checkpoint pickles the pymoo algorithm (its problem, cache and random generator included)
between generations, so a run resumed after Ctrl-C or kill -9 continues exactly as if it had never
stopped. Time budgets count running time only. The pickle is authenticated with the user's own
key and verified before it is opened (`folder.py`): a checkpoint from anyone else is never unpickled.
Every file is written through `safe_io.write_atomic`; a new folder appears whole or not at all.

Each population's new designs are evaluated in chunks of `run.json`'s `chunk` designs (fixed when
the run starts, whatever evaluates them): `SearchRun.attach(mapper)` sends them to a process pool or
a Dask cluster (`parallel.py`). The mapper lives outside the checkpoint; a resumed run attaches its
own.
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import json
import os
import re
import shutil
import signal
import tempfile
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np
from pymoo.algorithms.moo.nsga2 import RankAndCrowding
from pymoo.core.mixed import MixedVariableGA

from ..catalogs import load_catalogs
from ..design import DESIGN_KEYS, DesignBatch
from ..evaluate import Evaluator, Settings
from ..safe_io import RunLock, fsync_dir, write_atomic
from ..scenario import load_scenario
from .folder import (CATALOGS, CHECKPOINT, FRONT_DATA, RUN_JSON, SCENARIO, load_inputs, read_checkpoint,
                     read_meta, sha256_file, write_checkpoint, write_front_data)
from .front import hypervolume, merge_front
from .mating import FrontFillMating
from .problem import DesignDuplicateElimination, SizingProblem, evaluate_designs, front_values
from .space import SearchSpace
from ..strict_json import dumps as json_dumps

HV_POINTS_PER_GENERATION = 250
"""The archive's hypervolume is recomputed every max(1, front size // this) generations: in four
objectives it took 0.8 s for the 16 700-point front of a one-hour demo run, ten times a
generation's evaluations, so a large front's value is carried forward (history.csv says from
which generation)."""
CHECKPOINT_EVERY_S = float(os.environ.get("AFPM_CHECKPOINT_S", "5"))
"""Seconds between checkpoints (and front/history rewrites); AFPM_CHECKPOINT_S=0 saves every generation."""
DEFAULT_CHUNK = {"fast": 256, "reference": 4}
"""Designs per chunk by field model. The fast model costs ~5 ms per call plus ~35 us per design,
so smaller chunks mostly add call overhead (one chunk per population of 100: a pool only helps
populations of many hundreds); a reference design costs ~0.3-0.9 s, so small chunks balance the
workers at no measurable cost (tests/benchmarks/bench_parallel.py)."""


@dataclass
class Budget:
    evaluations: int | None = None
    seconds: float | None = None

    def describe(self):
        parts = []
        if self.evaluations:
            parts.append(f"{self.evaluations} evaluations")
        if self.seconds:
            parts.append(f"{self.seconds / 60:.1f} minutes")
        return " or ".join(parts) or "no limit"


@dataclass
class SearchState:
    """Everything a resumed run needs, pickled as one object."""

    algorithm: MixedVariableGA
    archive: np.ndarray = field(default_factory=lambda: np.empty(0, np.int64))
    history: list = field(default_factory=list)
    elapsed_s: float = 0.0
    hv_box: tuple | None = None
    feasible: int = 0  # feasible designs among those evaluated
    hv_value: float = 0.0  # hypervolume of the archive when last computed ...
    hv_generation: int = -1  # ... at this generation (see HV_POINTS_PER_GENERATION)

    @property
    def problem(self) -> SizingProblem:
        return self.algorithm.problem


def new_run_dir(base="runs") -> Path:
    """runs/<date-time>, with a suffix when that name is taken: an earlier run is never reused."""
    base = Path(base)
    stamp = dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    candidate, n = base / stamp, 1
    while candidate.exists():
        n += 1
        candidate = base / f"{stamp}-{n}"
    return candidate


def demo_scenario_path() -> Path:
    return Path(__file__).resolve().parent.parent / "data" / "demo_scenario.toml"


def create_run(run_dir, scenario_path, catalogs_dir, *, seed, population, budget: Budget,
               settings: Settings = Settings(), chunk: int | None = None):
    """Make a new run folder with its input snapshot; the inputs are checked before anything is written.

    The folder is built whole under a hidden temporary name beside `run_dir` and renamed into place,
    so a kill at any moment leaves either no run or a complete one (an empty `run_dir` is taken;
    any other existing one raises FileExistsError: an earlier run is never overwritten).
    `chunk` (designs per evaluation chunk) defaults by field model (DEFAULT_CHUNK); it is part of
    the run, like the seed, because it must not change for the run's results to repeat.
    """
    run_dir = Path(run_dir)
    catalogs_dir = Path(catalogs_dir)
    catalogs = load_catalogs(catalogs_dir)
    source = Path(scenario_path) if scenario_path else demo_scenario_path()
    load_scenario(source)
    _check_free(run_dir)
    run_dir.parent.mkdir(parents=True, exist_ok=True)
    _remove_abandoned(run_dir.parent)
    tmp = Path(tempfile.mkdtemp(prefix=f".{run_dir.name}{PARTIAL}{os.getpid()}-", dir=run_dir.parent))
    try:
        scenario_bytes = source.read_bytes()
        write_atomic(tmp / SCENARIO, scenario_bytes)
        (tmp / CATALOGS).mkdir()
        hashes = {}
        for name, path in catalogs.files.items():
            data = path.read_bytes()
            write_atomic(tmp / CATALOGS / path.name, data)
            hashes[path.name] = hashlib.sha256(data).hexdigest()
        meta = {
            "created": dt.datetime.now().isoformat(timespec="seconds"),
            "seed": seed, "population": population, "budget": asdict(budget),
            "settings": asdict(settings),
            "chunk": int(chunk if chunk is not None else DEFAULT_CHUNK.get(settings.field_model, 0)),
            "scenario_source": str(source.resolve()),
            "scenario_sha256": hashlib.sha256(scenario_bytes).hexdigest(),
            "catalog_source": str(catalogs_dir.resolve()), "catalog_hashes": hashes,
            "status": "new", "generations": 0, "evaluations": 0, "elapsed_s": 0.0,
        }
        write_atomic(tmp / RUN_JSON, json_dumps(meta, indent=2))
        fsync_dir(tmp / CATALOGS)
        try:
            os.rename(tmp, run_dir)  # POSIX: replaces an empty folder, fails on a full one
        except OSError as exc:
            raise FileExistsError(f"{run_dir} exists and is not empty: an earlier run is never "
                                  "overwritten") from exc
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    fsync_dir(run_dir.parent)
    return run_dir


PARTIAL = ".afpm-partial-"
"""Infix of the hidden name a new run folder is built under before it is renamed into place."""


def _check_free(run_dir):
    if run_dir.is_symlink() or (run_dir.exists() and not run_dir.is_dir()):
        raise FileExistsError(f"{run_dir} exists and is not a folder")
    if run_dir.is_dir() and any(run_dir.iterdir()):
        raise FileExistsError(f"{run_dir} exists and is not empty: an earlier run is never overwritten")


def _remove_abandoned(parent):
    """Remove run folders left half-built by processes killed while creating them.

    Their hidden name holds the creator's pid; one whose creator is gone is removed.
    """
    for partial in parent.glob(f".*{PARTIAL}*"):
        found = re.search(re.escape(PARTIAL) + r"(\d+)-", partial.name)
        if found and partial.is_dir() and not partial.is_symlink() and not _alive(int(found.group(1))):
            shutil.rmtree(partial, ignore_errors=True)


def _alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # another user's process
        return True
    return True


class SearchRun:
    """One run folder being searched: load or start, step generation by generation, save.

    Opening it takes the folder's lock (held for this object's life, see `close`): a second search,
    or a front page or build sheet written while it runs, is refused with this process's pid.
    """

    def __init__(self, run_dir):
        self.dir = Path(run_dir)
        self.meta = read_meta(self.dir)
        self._lock = RunLock(self.dir).acquire()
        try:
            self._open()
        except BaseException:
            self.close()
            raise

    def _open(self):
        self.meta = read_meta(self.dir)  # again, now that no other process can be writing it
        self.catalogs, self.scenario = load_inputs(self.dir, self.meta)
        self.budget = Budget(**self.meta["budget"])
        checkpoint = self.dir / CHECKPOINT
        if checkpoint.exists() or checkpoint.is_symlink():
            self.state: SearchState = read_checkpoint(checkpoint, SearchState, self.dir)
        else:
            evaluator = Evaluator(self.catalogs, self.scenario, Settings(**self.meta["settings"]))
            space = SearchSpace(evaluator)
            problem = SizingProblem(space, evaluator, chunk=self.meta.get("chunk", 0))
            duplicates = DesignDuplicateElimination(space)
            algorithm = MixedVariableGA(pop_size=self.meta["population"], survival=RankAndCrowding(),
                                        eliminate_duplicates=duplicates,
                                        mating=FrontFillMating(space, eliminate_duplicates=duplicates))
            algorithm.setup(problem, termination=("n_gen", 10 ** 9), seed=self.meta["seed"], verbose=False)
            self.state = SearchState(algorithm)
        self._last_save, self._save_s = time.monotonic(), 0.0

    def close(self):
        """Release the folder's lock (also released by the OS when the process ends)."""
        self._lock.release()

    @property
    def evaluator(self):
        return self.state.problem.evaluator

    @property
    def model(self):
        """The field model every design of this run is evaluated with ("fast" or "reference")."""
        return self.state.problem.evaluator.settings.field_model

    def attach(self, mapper):
        """Evaluate new designs with `mapper` from now on (None: serial in this process)."""
        self.state.problem.mapper = mapper

    # -- inputs changed since the run started? ------------------------------------------------------
    def changed_catalogs(self):
        """Names of source catalog files that differ from the run's snapshot (the run keeps its own)."""
        source = Path(self.meta["catalog_source"])
        changed = []
        for name, digest in self.meta["catalog_hashes"].items():
            path = source / name
            if not path.is_file() or sha256_file(path) != digest:
                changed.append(name)
        return changed

    # -- budget -----------------------------------------------------------------------------------
    @property
    def evaluations(self):
        return len(self.state.problem.cache)

    def done(self):
        b = self.budget
        return bool((b.evaluations and self.evaluations >= b.evaluations)
                    or (b.seconds and self.state.elapsed_s >= b.seconds))

    def progress(self):
        """Share of the budget spent (0-1; the larger of evaluations and time; 0 without a budget)."""
        b, spent = self.budget, [0.0]
        if b.evaluations:
            spent.append(self.evaluations / b.evaluations)
        if b.seconds:
            spent.append(self.state.elapsed_s / b.seconds)
        return min(max(spent), 1.0)

    def set_budget(self, budget: Budget):
        self.budget = budget
        self.meta["budget"] = asdict(budget)

    # -- one generation -----------------------------------------------------------------------------
    def step(self):
        """Run one generation, update the archive and history; returns the history row."""
        t0 = time.monotonic()
        st = self.state
        seen_before = self.evaluations
        mating = st.algorithm.mating
        if isinstance(mating, FrontFillMating):  # (a run checkpointed before it existed: GA alone)
            mating.archive, mating.progress = st.archive, self.progress()
        st.algorithm.next()
        problem = st.problem
        cache = problem.cache
        F = cache.F[: len(cache)]
        new = np.arange(seen_before, len(cache))
        feasible_new = new[cache.G[new, 0] <= 0]
        st.feasible += len(feasible_new)
        st.archive = merge_front(F, st.archive, feasible_new)
        problem.cache.keep_values(st.archive)
        if st.hv_box is None and len(st.archive):
            st.hv_box = self._hv_box(F[st.archive])
        front_F = F[st.archive]
        generation = st.algorithm.n_gen - 1
        if st.hv_box and generation - st.hv_generation >= max(1, len(front_F) // HV_POINTS_PER_GENERATION):
            st.hv_value, st.hv_generation = hypervolume(front_F, st.hv_box), generation
        st.elapsed_s += time.monotonic() - t0
        row = {
            "generation": generation, "evaluations": self.evaluations,
            "feasible": st.feasible, "front_size": len(st.archive),
            "hypervolume": st.hv_value, "hypervolume_generation": st.hv_generation,
            "elapsed_s": round(st.elapsed_s, 3),
        }
        ev = problem.evaluator
        for j, name in enumerate(ev.objectives):
            row["best_" + name] = float(np.min(front_F[:, j]) * ev.objective_sign[j]) if len(front_F) else ""
        st.history.append(row)
        return row

    def _hv_box(self, F):
        """Hypervolume box, frozen when the first feasible design appears (so values compare over time).

        Minimisation form, per objective: charge (current or amp-hours) from twice the best found
        to none; drag (torque or added force) from none to twice the worst found; magnet bill
        from nothing to the dearest possible; coil temperature from bilge air to the hottest
        wire limit.
        """
        ev = self.state.problem.evaluator
        poles_max = max(int(r.poles_per_unit) * int(r.max_multiple) for r in self.catalogs.layouts.itertuples())
        known = {
            "magnet_cost": (0.0, 2.0 * poles_max * float(ev.magnet["price_each"].max())),
            "coil_temperature_C": (self.scenario.bilge_air_C,
                                   float((ev.wire["thermal_class_C"] - self.scenario.temperature_margin_K).max())),
        }
        known["coil_temperature_C_p90"] = known["coil_temperature_C"]
        ideal, ref = [], []
        for j, name in enumerate(ev.objectives):
            if name in known:
                lo, hi = known[name]
            elif ev.objective_sign[j] < 0:   # maximised: F = -value <= 0
                lo, hi = 2.0 * F[:, j].min(), 0.0
            else:                            # minimised drag: >= 0
                lo, hi = 0.0, 2.0 * F[:, j].max()
            ideal.append(lo)
            ref.append(hi if hi > lo else lo + 1.0)
        return np.array(ideal), np.array(ref)

    def save(self, status, force=False):
        """Checkpoint (at most every few seconds unless forced), history, front and run.json."""
        # Saving grows with the cache: keep it to a small share of the running time.
        interval = CHECKPOINT_EVERY_S and max(CHECKPOINT_EVERY_S, 20.0 * self._save_s)
        if not force and time.monotonic() - self._last_save < interval:
            return False
        t0 = time.monotonic()
        write_checkpoint(self.dir / CHECKPOINT, self.state)
        self._write_history()
        self._write_front()
        self.meta.update(status=status, generations=len(self.state.history),
                         evaluations=self.evaluations, elapsed_s=round(self.state.elapsed_s, 3),
                         front_size=int(len(self.state.archive)))
        write_atomic(self.dir / "run.json", json_dumps(self.meta, indent=2).encode())
        self._last_save = time.monotonic()
        self._save_s = self._last_save - t0
        return True

    def _write_history(self):
        rows = self.state.history
        if not rows:
            return
        write_atomic(self.dir / "history.csv", _csv_bytes(list(rows[0]), [list(r.values()) for r in rows]))

    def front_designs(self):
        """(ids, DesignBatch) of the archived front, ids stable for the run's life ('D' + cache row)."""
        rows = self.state.archive
        return [f"D{r}" for r in rows], DesignBatch.from_matrix(self.state.problem.cache.designs(rows))

    def _front_values(self):
        """(objectives in natural sense, FRONT_VALUES) of the archive, from the cache.

        Rows without kept values (a checkpoint from before they were kept) are evaluated here.
        """
        problem = self.state.problem
        cache, rows = problem.cache, self.state.archive
        objectives = cache.F[rows] * self.state.problem.evaluator.objective_sign
        missing = [r for r in rows if int(r) not in cache.values]
        if missing:
            _, _, V = evaluate_designs(problem.evaluator, cache.designs(missing))
            cache.values.update({int(r): V[j] for j, r in enumerate(missing)})
        names = front_values(self.state.problem.evaluator)
        values = np.array([cache.values[int(r)] for r in rows]).reshape(len(rows), len(names))
        return objectives, values

    def _write_front(self):
        ids, batch = self.front_designs()
        ev = self.state.problem.evaluator
        # Design keys added after the layout was fixed go just before "model" (the last column), so
        # every earlier column keeps its position.
        keys = [k for k in DESIGN_KEYS if k not in LATER_KEYS]
        header = ["id", *keys, *ev.objectives, *front_values(ev), *LATER_KEYS, "model"]
        lines = []
        if len(batch):
            objectives, values = self._front_values()
            for i, rec in enumerate(batch.records(self.catalogs)):
                lines.append([ids[i], *[rec[k] for k in keys], *map(_num, objectives[i]),
                              *map(_num, values[i]), *[rec[k] for k in LATER_KEYS], self.model])
        write_front_data(self.dir / FRONT_DATA, self.state.archive,
                         self.state.problem.cache.codes[self.state.archive])
        write_atomic(self.dir / "front.csv", _csv_bytes(header, lines))


LATER_KEYS = ("coil_shape",)
"""Design keys written just before the "model" column of front.csv (added after its layout was fixed)."""


def _num(x):
    return float(f"{float(x):.6g}")


def _csv_bytes(header, rows):
    import io

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buf.getvalue().encode()


class StopFlag:
    """Ctrl-C (SIGINT) or SIGTERM asks the loop to stop after the current generation."""

    def __init__(self):
        self.stop = False
        self.signum = None  # the signal that asked (exit status 128 + it, by shell convention)

    def __enter__(self):
        self._old = {s: signal.signal(s, self._handler) for s in (signal.SIGINT, signal.SIGTERM)}
        return self

    def _handler(self, signum, frame):
        if self.stop:  # a second Ctrl-C: the user really means it
            raise KeyboardInterrupt
        self.stop, self.signum = True, signum

    def __exit__(self, *exc):
        for s, h in self._old.items():
            signal.signal(s, h)
        return False


def run_search(run: SearchRun, on_generation=None, stop: StopFlag | None = None):
    """Step `run` until its budget is spent or `stop` is raised; checkpoint as it goes.

    Returns "finished" or "stopped".
    """
    while not run.done():
        if stop is not None and stop.stop:
            run.save("stopped", force=True)
            return "stopped"
        row = run.step()
        t0 = time.monotonic()
        run.save("running")
        run.state.elapsed_s += time.monotonic() - t0  # saving is running time too
        if on_generation is not None:
            on_generation(row)
    run.save("finished", force=True)
    return "finished"
