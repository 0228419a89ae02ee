"""The overnight search: decoding, cache, determinism, run folders, and resume after kill -9."""

import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from optimiser.catalogs import load_catalogs
from optimiser.cli import app
from optimiser.evaluate import Evaluator
from optimiser.scenario import load_scenario
from optimiser.search.problem import SizingProblem
from optimiser.search.run import Budget, SearchRun, create_run, run_search
from optimiser.search.space import SearchSpace

ROOT = Path(__file__).resolve().parent.parent
CATALOGS = ROOT / "catalogs"


@pytest.fixture(scope="module")
def evaluator():
    return Evaluator(load_catalogs(CATALOGS), load_scenario(None))


def test_every_decoded_design_has_a_balanced_winding(evaluator):
    space = SearchSpace(evaluator)
    rng = np.random.default_rng(0)
    n = 5000
    cols = space.random_columns(n, rng)
    batch = space.decode_columns(cols)
    combo = evaluator.windings.index(batch.layout, batch.multiple)
    assert np.all(combo >= 0)
    assert np.all(evaluator.windings.valid[combo])
    assert np.all(evaluator.windings.paths_allowed(combo, batch.parallel_paths))
    ev = evaluator.evaluate(batch)
    assert np.all(ev.constraints[:, -1] < 0)  # winding_invalid never violated after decoding


def test_cache_evaluates_each_distinct_design_once(evaluator):
    space = SearchSpace(evaluator)
    problem = SizingProblem(space, evaluator)
    calls = []

    def counting(matrix):
        calls.append(len(matrix))
        return problem.evaluate_matrix(matrix)

    rng = np.random.default_rng(1)
    cols = space.random_columns(50, rng)
    matrix = space.decode_columns(cols).as_matrix()
    doubled = np.vstack([matrix, matrix[:10]])
    rows = problem.cache.lookup(doubled, counting)
    assert calls == [len(np.unique(matrix, axis=0))]
    assert np.array_equal(rows[-10:], rows[:10])
    problem.cache.lookup(matrix[5:20], counting)
    assert len(calls) == 1  # nothing new: no evaluation at all
    F_direct, _ = problem.evaluate_matrix(matrix[:5])
    assert np.array_equal(problem.cache.F[rows[:5]], F_direct)


def _run(tmp_path, name, seed, evaluations=600, population=30):
    run_dir = create_run(tmp_path / name, None, CATALOGS, seed=seed, population=population,
                         budget=Budget(evaluations=evaluations))
    run = SearchRun(run_dir)
    assert run_search(run) == "finished"
    return run_dir


def _front(run_dir):
    with open(run_dir / "front.csv") as fh:
        return list(csv.reader(fh))


def test_same_seed_same_front_and_files(tmp_path):
    # (seed 3 found no feasible design in 600 evaluations once natural convection was taken at the
    # surfaces' own rise: feasibility is about 1 in 1 300 random designs, so a short run is luck)
    a = _run(tmp_path, "a", seed=4)
    b = _run(tmp_path, "b", seed=4)
    c = _run(tmp_path, "c", seed=5)
    assert _front(a) == _front(b)
    assert _front(a) != _front(c)
    front = _front(a)
    assert len(front) > 1, "the demo search found no feasible design"
    header = front[0]
    for key in ("id", "magnet", "layout", "multiple", "ring_radius_mm", "turns", "charge_current_A",
                "drag_torque_Nm", "magnet_cost", "coil_temperature_C"):
        assert key in header
    history = list(csv.DictReader(open(a / "history.csv")))
    assert int(history[-1]["evaluations"]) >= 600
    meta = json.loads((a / "run.json").read_text())
    assert meta["status"] == "finished" and meta["seed"] == 4
    assert (a / "catalogs" / "magnets.csv").read_bytes() == (CATALOGS / "magnets.csv").read_bytes()


def test_an_existing_run_is_never_overwritten(tmp_path):
    a = _run(tmp_path, "a", seed=3, evaluations=60, population=20)
    with pytest.raises(FileExistsError):
        create_run(a, None, CATALOGS, seed=1, population=20, budget=Budget(evaluations=60))


def _afpm(*args, **kw):
    env = dict(os.environ, AFPM_CHECKPOINT_S="0")
    return subprocess.Popen([sys.executable, "-m", "optimiser", *args], cwd=ROOT, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, **kw)


def _generations(run_dir):
    try:
        return json.loads((run_dir / "run.json").read_text())["generations"]
    except (FileNotFoundError, json.JSONDecodeError, KeyError):
        return 0


def test_kill_9_and_resume_gives_the_same_front(tmp_path):
    # The run checkpoints every generation here; SIGKILL lands at an arbitrary moment (inside an
    # evaluation, a checkpoint write...) twice, each time while the run is still going.
    args = ["search", "--evaluations", "4000", "--population", "30", "--seed", "11"]
    ref = _afpm(*args, "--run", str(tmp_path / "ref"))
    assert ref.wait(timeout=300) == 0, ref.stderr.read().decode()
    killed = tmp_path / "killed"
    for until in (15, 60):
        proc = _afpm(*args, "--run", str(killed))
        deadline = time.monotonic() + 120
        while _generations(killed) < until and time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.01)
        assert proc.poll() is None, "the run ended before it could be killed"
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        assert json.loads((killed / "run.json").read_text())["status"] == "running"
    resumed = _afpm("search", "--run", str(killed))
    assert resumed.wait(timeout=300) == 0, resumed.stderr.read().decode()
    assert json.loads((killed / "run.json").read_text())["status"] == "finished"
    assert _front(killed) == _front(tmp_path / "ref")
    assert len(_front(killed)) > 10


def test_cli_search_refuses_a_folder_that_is_not_a_run(tmp_path, runner):
    target = tmp_path / "notes"
    target.mkdir()
    (target / "mine.txt").write_text("keep me")
    result = runner.invoke(app, ["search", "--evaluations", "50", "--run", str(target)])
    assert result.exit_code == 2
    assert "never overwritten" in result.output + (result.stderr if result.stderr_bytes else "")
    assert (target / "mine.txt").read_text() == "keep me"


def test_cache_checkpoint_keeps_rows_and_rebuilds_its_index(evaluator):
    import pickle

    space = SearchSpace(evaluator)
    problem = SizingProblem(space, evaluator)
    matrix = space.sample(300, np.random.default_rng(8)).as_matrix()
    rows = problem.cache.lookup(matrix, problem.evaluate_matrix)
    restored = pickle.loads(pickle.dumps(problem.cache))
    assert len(restored.F) == len(restored) == len(problem.cache)  # no empty capacity saved
    assert restored.index.count == problem.cache.index.count
    assert np.array_equal(restored.lookup(matrix, None), rows)  # all found: evaluate never called


def test_cache_keeps_pymoos_violation_and_feasibility(evaluator):
    # pymoo's own calc_cv (pymoo.core.individual, default config) is the oracle: the one
    # column kept must equal it,
    # be 0 exactly for the designs the evaluator calls feasible, and an old checkpoint holding
    # every constraint must come back as that column.
    import pickle

    from pymoo.core.individual import calc_cv

    space = SearchSpace(evaluator)
    problem = SizingProblem(space, evaluator)
    matrix = space.sample(400, np.random.default_rng(5)).as_matrix()
    rows = problem.cache.lookup(matrix, problem.evaluate_matrix)
    _, G = problem.evaluate_matrix(matrix)
    np.testing.assert_array_equal(problem.cache.G[rows, 0], calc_cv(G=G))
    assert np.array_equal(problem.cache.G[rows, 0] <= 0, np.all(G <= 0, axis=1))
    old = pickle.loads(pickle.dumps(problem.cache))
    old.G = np.empty((len(old), G.shape[1]))
    old.G[rows] = G
    np.testing.assert_array_equal(pickle.loads(pickle.dumps(old)).G, problem.cache.G[: len(problem.cache)])


def test_row_index_agrees_with_a_dict_through_growth_and_collisions():
    # The cache's compact index against Python's dict, the obvious independent oracle; few distinct
    # column values make many rows share hash prefixes, and 20 batches force several rehashes.
    from optimiser.search.problem import RowIndex

    rng = np.random.default_rng(3)
    index, reference = RowIndex(capacity=8), {}
    store = np.empty((0, 10), dtype=np.int32)
    for _ in range(20):
        batch = rng.integers(0, 4, size=(700, 10)).astype(np.int32)
        found, _ = index.find(batch, store)
        expected = np.array([reference.get(row.tobytes(), -1) for row in batch])
        assert np.array_equal(found, expected)
        _, first = np.unique(batch[found < 0], axis=0, return_index=True)
        new = batch[found < 0][np.sort(first)]
        numbers = np.arange(len(store), len(store) + len(new))
        store = np.vstack([store, new])
        index.insert(new, numbers, store)
        for row, k in zip(new, numbers):
            reference[row.tobytes()] = k
    found, _ = index.find(store, store)
    assert np.array_equal(found, np.arange(len(store))) and index.count == len(reference)


def test_hypervolume_of_a_large_front_is_carried_forward(tmp_path, monkeypatch):
    # With few points per recomputation every archive counts as "large": the history must say
    # from which generation each value is, stay within the recomputation interval, and the fresh
    # values never fall (the archive only improves inside a fixed box).
    import optimiser.search.run as run_module

    monkeypatch.setattr(run_module, "HV_POINTS_PER_GENERATION", 4)
    rows = list(csv.DictReader(open(_run(tmp_path, "hv", seed=4) / "history.csv")))
    gen = np.array([int(r["generation"]) for r in rows])
    at = np.array([int(r["hypervolume_generation"]) for r in rows])
    hv = np.array([float(r["hypervolume"]) for r in rows])
    size = np.array([int(r["front_size"]) for r in rows])
    computed = at >= 0
    assert np.all(at <= gen) and np.any(computed & (at < gen))
    assert np.all((gen - at)[computed] < np.maximum(1, size[computed] // 4))
    fresh = computed & (at == gen)
    assert np.all(np.diff(hv[fresh]) >= -1e-12) and hv[fresh][-1] > 0
    for g in np.unique(at[computed]):
        assert len(set(hv[at == g])) == 1
