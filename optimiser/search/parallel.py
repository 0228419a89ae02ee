"""Where a population's chunks are evaluated: this process, a local process pool, or a Dask cluster.

A mapper has one method, ``map(chunks) -> [evaluate_designs(evaluator, c) for c in chunks]``, with
the results in chunk order whatever order the workers finish in. Each worker gets the run's
Evaluator once (pool initializer, Dask worker plugin) and then only design matrices, so a chunk
costs a few hundred bytes of traffic each way. The same evaluator object that the checkpoint
holds is what the workers run, so a parallel run gives the serial run's results bit for bit.

Losing a worker never loses a result: the pool replaces a broken pool and re-runs the chunks that
had not come back (falling back to this process if pools keep breaking); Dask re-runs the tasks of
a lost worker itself and retries a failed task.

Dask is optional (``pip install 'afpm[cluster]'``); nothing here imports it until a Dask mapper is
made.
"""

from __future__ import annotations

import ctypes
import hashlib
import multiprocessing
import os
import pickle
import signal
import sys
import threading
import time
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from .problem import evaluate_designs

THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
"""Math-library thread counts set to 1 in pool workers (unless the user set them): the pool already
uses every core, and each worker's BLAS threads on top would fight for them (Dask's nanny does the
same for its workers)."""

INSTALL_HINT = "--scheduler needs Dask: pip install 'afpm[cluster]'"
"""The one line shown when Dask is asked for and not installed."""


def local_cores() -> int:
    """CPUs this process may run on (the pool's default size)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not Linux
        return os.cpu_count() or 1


def roomy_allocator() -> bool:
    """Let this process keep freed memory for reuse (glibc only; returns whether it applied).

    An evaluation allocates many large temporaries. glibc hands blocks above its mmap threshold
    straight back to the OS and trims the heap top, so each chunk faults the same pages in again;
    Dask's nanny makes it worse (MALLOC_TRIM_THRESHOLD_=65536 also freezes the threshold at
    128 kB). Measured on the reference model: 2.4x slower with Dask's setting, and ~35 % faster
    than glibc's default with a 32 MB mmap threshold (glibc's maximum) and a 128 MB trim threshold.
    The cost is up to that much freed memory held per process.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL("libc.so.6")
    except OSError:  # another C library (musl): leave it alone
        return False
    m_trim_threshold, m_mmap_threshold = -1, -3
    return bool(libc.mallopt(m_mmap_threshold, 32 << 20)) and bool(libc.mallopt(m_trim_threshold, 128 << 20))


def dask_available() -> bool:
    try:
        import distributed  # noqa: F401
    except ImportError:
        return False
    return True


class SerialMapper:
    """Every chunk in this process, in order (what a problem without a mapper does too)."""

    description = "serial"

    def __init__(self, evaluator):
        self.evaluator = evaluator

    def map(self, chunks):
        return [evaluate_designs(self.evaluator, c) for c in chunks]

    def close(self):
        pass


# -- local process pool ------------------------------------------------------------------------
_WORKER_EVALUATOR = None


def _exit_with_parent(parent_pid):
    # A parent killed with kill -9 leaves its pool's workers waiting on a queue nobody will ever
    # write to: each worker watches for it and leaves.
    while os.getppid() == parent_pid:
        time.sleep(1.0)
    os._exit(0)


def _pool_init(evaluator_bytes):
    global _WORKER_EVALUATOR
    threading.Thread(target=_exit_with_parent, args=(os.getppid(),), daemon=True).start()
    # Ctrl-C in the terminal reaches the whole process group: the main process finishes the
    # generation and saves, so the workers must not die of it half-way through a chunk.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    roomy_allocator()
    _WORKER_EVALUATOR = pickle.loads(evaluator_bytes)


def _pool_chunk(matrix):
    return evaluate_designs(_WORKER_EVALUATOR, matrix)


class PoolMapper:
    """A pool of local worker processes, each holding the run's Evaluator.

    Workers are spawned (not forked): the main process runs a progress-bar thread, and forking a
    process with threads can leave a lock held in the child.
    """

    MAX_BROKEN = 3
    """Pools that may break in one map() before the remaining chunks run in this process."""

    def __init__(self, evaluator, workers=None):
        self.evaluator = evaluator
        self.workers = int(workers or local_cores())
        self.description = f"{self.workers} local processes"
        self._bytes = pickle.dumps(evaluator, protocol=pickle.HIGHEST_PROTOCOL)
        self._pool = None
        self._env = None  # the environment before the pool set its thread variables
        self.restarts = 0

    def _start(self):
        # Spawned children read the environment when they start (possibly later, on demand), and
        # load numpy before any initializer runs: so the variables are set here, while the pool
        # lives. This process's own numpy is already loaded and keeps its threads.
        if self._env is None:
            self._env = {k: os.environ.get(k) for k in THREAD_VARS}
        for k in THREAD_VARS:
            os.environ.setdefault(k, "1")
        self._pool = ProcessPoolExecutor(max_workers=self.workers,
                                         mp_context=multiprocessing.get_context("spawn"),
                                         initializer=_pool_init, initargs=(self._bytes,))

    def map(self, chunks):
        results = [None] * len(chunks)
        broken = 0
        while True:
            todo = [i for i, r in enumerate(results) if r is None]
            if not todo:
                return results
            if broken >= self.MAX_BROKEN:
                print(f"afpm: worker processes keep dying; evaluating {len(todo)} chunk(s) here",
                      file=sys.stderr)
                for i in todo:
                    results[i] = evaluate_designs(self.evaluator, chunks[i])
                return results
            if self._pool is None:
                self._start()
            futures = {i: self._pool.submit(_pool_chunk, chunks[i]) for i in todo}
            try:
                for i, fut in futures.items():
                    results[i] = fut.result()
            except BrokenProcessPool:
                # A worker died (killed, out of memory): results already back are kept, the
                # rest are re-run in a fresh pool.
                broken += 1
                self.restarts += 1
                self._pool.shutdown(wait=False, cancel_futures=True)
                self._pool = None
                for i, fut in futures.items():
                    if results[i] is None and fut.done() and not fut.cancelled() and fut.exception() is None:
                        results[i] = fut.result()

    def close(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
        for k, v in (self._env or {}).items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v
        self._env = None


# -- Dask distributed ---------------------------------------------------------------------------
def _dask_chunk(plugin_name, matrix):
    from distributed import get_worker

    return evaluate_designs(get_worker().plugins[plugin_name].evaluator, matrix)


def _evaluator_plugin(evaluator, name):
    # Made here so that importing this module never imports Dask; Dask pickles the class by value.
    from distributed.diagnostics.plugin import WorkerPlugin

    class EvaluatorPlugin(WorkerPlugin):
        """Holds the run's Evaluator on each worker, including workers that join later."""

        def __init__(self, evaluator, name):
            self.name = name
            self.evaluator = evaluator

        def setup(self, worker):
            roomy_allocator()

    return EvaluatorPlugin(evaluator, name)


class DaskMapper:
    """Chunks as tasks on an existing Dask distributed scheduler (address like tcp://host:8786).

    The Evaluator goes to every worker once as a worker plugin (re-sent by the scheduler to workers
    that join or restart); each task then carries only its chunk. Tasks are impure (never merged
    by key) and retried on error; tasks of a lost worker are re-run by the scheduler.
    """

    RETRIES = 3

    def __init__(self, evaluator, address, timeout="20s"):
        if not dask_available():
            raise ImportError(INSTALL_HINT)
        from distributed import Client

        self.evaluator = evaluator
        blob = pickle.dumps(evaluator, protocol=pickle.HIGHEST_PROTOCOL)
        self.plugin_name = "afpm-evaluator-" + hashlib.sha256(blob).hexdigest()[:16]
        self.client = Client(address, timeout=timeout)
        self.client.register_plugin(_evaluator_plugin(evaluator, self.plugin_name), name=self.plugin_name)
        self.description = f"Dask scheduler {address}"

    def workers(self):
        return len(self.client.scheduler_info(n_workers=-1)["workers"]) if self.client else 0

    def map(self, chunks):
        futures = self.client.map(_dask_chunk, [self.plugin_name] * len(chunks), chunks, pure=False,
                                  retries=self.RETRIES)
        return self.client.gather(futures)  # in the order of `chunks`

    def close(self):
        if self.client is not None:
            try:
                self.client.unregister_worker_plugin(self.plugin_name)
            except Exception:  # the cluster may already be gone; nothing to clean then
                pass
            self.client.close()
            self.client = None


def make_mapper(evaluator, workers=None, scheduler=None):
    """Serial for one worker, a local pool for more, Dask when a scheduler address is given.

    This process's allocator is tuned too (`roomy_allocator`): serial chunks run here.
    """
    roomy_allocator()
    if scheduler:
        return DaskMapper(evaluator, scheduler)
    if workers is None or workers <= 1:
        return SerialMapper(evaluator)
    return PoolMapper(evaluator, workers)
