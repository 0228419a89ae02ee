"""Evaluation beyond one core: serial, local process pool and Dask give the same front bit for bit;
a lost worker's chunk is re-run; pools and clients stay out of the checkpoint; Dask stays optional.

The oracle here is the serial run of the same seed and budget (itself checked against the physics
references in the other test files): the parallel paths must reproduce it exactly, not closely.
"""

import csv
import logging
import os
import pickle
import sys

import numpy as np
import pytest

distributed = pytest.importorskip("distributed")  # in the test extra; skipped only without it

from optimiser.catalogs import load_catalogs  # noqa: E402
from optimiser.cli import app  # noqa: E402
from optimiser.evaluate import Evaluator, Settings  # noqa: E402
from optimiser.scenario import load_scenario  # noqa: E402
from optimiser.search.parallel import DaskMapper, PoolMapper, SerialMapper  # noqa: E402
from optimiser.search.problem import evaluate_designs, split_chunks  # noqa: E402
from optimiser.search.run import Budget, SearchRun, create_run, run_search  # noqa: E402
from optimiser.search.space import SearchSpace  # noqa: E402

from conftest import DEMO_CATALOGS  # noqa: E402


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None, silence_logs=logging.ERROR) as c:
        yield c


def _run(path, mapper_factory=None, *, model="fast", seed=4, evaluations=600, population=30, chunk=16):
    run_dir = create_run(path, None, DEMO_CATALOGS, seed=seed, population=population,
                         budget=Budget(evaluations=evaluations), settings=Settings(field_model=model),
                         chunk=chunk)
    run = SearchRun(run_dir)
    mapper = mapper_factory(run.state.problem.evaluator) if mapper_factory else None
    run.attach(mapper)
    try:
        assert run_search(run) == "finished"
    finally:
        if mapper is not None:
            mapper.close()
    return run


def _front(run):
    with open(run.dir / "front.csv") as fh:
        return list(csv.reader(fh))


def _same_cache(a, b):
    return all(np.array_equal(x, y) for x, y in zip(a.state.problem.cache.view(), b.state.problem.cache.view()))


@pytest.fixture(scope="module")
def serial_fast(tmp_path_factory):
    return _run(tmp_path_factory.mktemp("serial") / "run")


def test_fast_model_serial_pool_and_dask_give_the_same_front(serial_fast, tmp_path, cluster):
    pool = _run(tmp_path / "pool", lambda ev: PoolMapper(ev, workers=2))
    dask = _run(tmp_path / "dask", lambda ev: DaskMapper(ev, cluster.scheduler_address))
    front = _front(serial_fast)
    assert len(front) > 2, "the demo search found no feasible design"
    assert _front(pool) == front and _front(dask) == front
    # Every design the GA saw, in the order it saw them, with identical objectives and constraints.
    assert _same_cache(serial_fast, pool) and _same_cache(serial_fast, dask)
    assert front[0][-1] == "model" and {row[-1] for row in front[1:]} == {"fast"}


def test_reference_model_tiny_run_is_the_same_serial_pool_and_dask(tmp_path, cluster):
    # Two 3-D reference designs (~0.5 s each), one chunk per worker: the suite stays quick.
    kw = dict(model="reference", seed=5, evaluations=2, population=2, chunk=1)
    serial = _run(tmp_path / "serial", **kw)
    pool = _run(tmp_path / "pool", lambda ev: PoolMapper(ev, workers=2), **kw)
    dask = _run(tmp_path / "dask", lambda ev: DaskMapper(ev, cluster.scheduler_address), **kw)
    assert serial.evaluations == 2
    assert _same_cache(serial, pool) and _same_cache(serial, dask)
    assert _front(serial) == _front(pool) == _front(dask)
    assert serial.model == "reference" and serial.meta["settings"]["field_model"] == "reference"
    # ...and the reference model really ran: its objectives differ from the fast model's.
    designs, F, _ = serial.state.problem.cache.view()
    fast = Evaluator(serial.catalogs, serial.scenario, Settings(field_model="fast"))
    assert not np.array_equal(evaluate_designs(fast, designs)[0], F)


class DiesOnce:
    """An evaluator whose worker process dies (like kill -9 or the OOM killer) on its first chunk."""

    def __init__(self, evaluator, flag):
        self.evaluator, self.flag = evaluator, str(flag)
        self.objectives, self.objective_sign = evaluator.objectives, evaluator.objective_sign
        self.scenario = evaluator.scenario  # front_values reads robust_samples

    def evaluate(self, batch, rpm=None):
        try:
            os.close(os.open(self.flag, os.O_CREAT | os.O_EXCL))
        except FileExistsError:
            return self.evaluator.evaluate(batch, rpm)
        os._exit(1)


def _chunks(evaluator, n=60, size=10):
    space = SearchSpace(evaluator)
    rng = np.random.default_rng(2)
    cols = space.random_columns(n, rng)
    return split_chunks(space.decode_columns(cols).as_matrix(), size)


@pytest.fixture(scope="module")
def evaluator():
    return Evaluator(load_catalogs(DEMO_CATALOGS), load_scenario(None))


def _same_results(a, b):
    return len(a) == len(b) and all(np.array_equal(x, y) for ra, rb in zip(a, b) for x, y in zip(ra, rb))


def test_a_pool_worker_lost_mid_run_has_its_chunk_rerun(evaluator, tmp_path):
    chunks = _chunks(evaluator)
    expected = SerialMapper(evaluator).map(chunks)
    mapper = PoolMapper(DiesOnce(evaluator, tmp_path / "died"), workers=2)
    try:
        got = mapper.map(chunks)
        assert mapper.restarts >= 1  # the pool broke and was replaced
        assert _same_results(got, expected)
        assert _same_results(mapper.map(chunks[:2]), expected[:2])  # the fresh pool keeps working
    finally:
        mapper.close()
    assert (tmp_path / "died").exists()


def test_a_dask_worker_lost_mid_run_has_its_chunk_rerun(evaluator, tmp_path, cluster):
    chunks = _chunks(evaluator, n=40)
    expected = SerialMapper(evaluator).map(chunks)
    mapper = DaskMapper(DiesOnce(evaluator, tmp_path / "died"), cluster.scheduler_address)
    try:
        assert _same_results(mapper.map(chunks), expected)
    finally:
        mapper.close()
    assert (tmp_path / "died").exists()


def test_checkpoint_holds_no_mapper_and_resumes_on_another(serial_fast, tmp_path, cluster):
    # Start on Dask, stop after a few generations, resume serially: same front as never stopping.
    run_dir = create_run(tmp_path / "r", None, DEMO_CATALOGS, seed=4, population=30,
                         budget=Budget(evaluations=600), chunk=16)
    run = SearchRun(run_dir)
    mapper = DaskMapper(run.state.problem.evaluator, cluster.scheduler_address)
    run.attach(mapper)
    for _ in range(6):
        run.step()
    run.save("stopped", force=True)
    assert pickle.loads(pickle.dumps(run.state.problem)).mapper is None
    mapper.close()
    resumed = SearchRun(run_dir)
    assert resumed.state.problem.mapper is None and resumed.state.problem.chunk == 16
    assert run_search(resumed) == "finished"
    assert _front(resumed) == _front(serial_fast)


def test_chunks_come_back_in_order_and_the_fast_model_does_not_care_how_it_is_cut(evaluator):
    # The fast model is a per-design function to the last bit whatever the batch (observed here,
    # relied on only for runs from before chunking); the run fixes its chunk size regardless.
    chunks = _chunks(evaluator, n=50, size=7)
    assert [len(c) for c in chunks] == [7] * 7 + [1]
    whole = evaluate_designs(evaluator, np.vstack(chunks))
    parts = SerialMapper(evaluator).map(chunks)
    for k in range(3):
        assert np.array_equal(np.concatenate([p[k] for p in parts]), whole[k])


def test_scheduler_without_dask_says_what_to_install(tmp_path, runner, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # `import distributed` now fails
    result = runner.invoke(app, ["search", "--scheduler", "tcp://127.0.0.1:9", "--evaluations", "10",
                                 "--run", str(tmp_path / "r")])
    assert result.exit_code == 2
    assert "pip install 'afpm[cluster]'" in result.output + (result.stderr if result.stderr_bytes else "")
    assert not (tmp_path / "r").exists()


def test_a_run_keeps_its_fidelity(tmp_path, runner):
    run_dir = create_run(tmp_path / "r", None, DEMO_CATALOGS, seed=1, population=10,
                         budget=Budget(evaluations=10), settings=Settings(field_model="reference"))
    result = runner.invoke(app, ["search", "--run", str(run_dir), "--fidelity", "fast"])
    assert result.exit_code == 2
    assert "--fidelity reference" in result.output + (result.stderr if result.stderr_bytes else "")
    bad = runner.invoke(app, ["search", "--fidelity", "exact", "--run", str(tmp_path / "s")])
    assert bad.exit_code == 2 and not (tmp_path / "s").exists()
