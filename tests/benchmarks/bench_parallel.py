"""Benchmark: reference-model designs per second serial vs every local core; cost of a chunk round trip.

Prints one JSON object (not a pytest test). Run on an otherwise idle machine:

    python tests/benchmarks/bench_parallel.py [--quick] [--out FILE]

What it measures (demo catalogs and demo boat, random decoded designs, fixed seed):
- reference_s_per_design: 3-D reference model, in this process, by chunk size;
- reference_designs_per_s: serial vs a local process pool vs a Dask LocalCluster, one worker per
  core, chunks of the run default (start-up of the pool/cluster reported separately);
- chunk_round_trip_s: one 1-design fast-model chunk at a time through each mapper (latency) and
  the in-process time of the same chunk; the difference is the per-chunk overhead;
- fast_designs_per_s: the fast model for a population of 100 and 1000, serial vs pool.
"""

from __future__ import annotations

import argparse
import json
import logging
import os
import platform
import time
from pathlib import Path

import numpy as np

from optimiser.catalogs import load_catalogs
from optimiser.evaluate import Evaluator, Settings
from optimiser.scenario import load_scenario
from optimiser.search.parallel import (DaskMapper, PoolMapper, SerialMapper, dask_available, local_cores,
                                       roomy_allocator)
from optimiser.search.problem import split_chunks
from optimiser.search.run import DEFAULT_CHUNK
from optimiser.search.space import SearchSpace

ROOT = Path(__file__).resolve().parents[2]


def designs(evaluator, n, seed=0):
    space = SearchSpace(evaluator)
    rng = np.random.default_rng(seed)
    cols = space.random_columns(n, rng)
    return space.decode_columns(cols).as_matrix()


def timed(fn, repeat=1):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def round_trip(mapper, chunk, n=40):
    """Fastest of n round trips of one chunk sent alone (submit, evaluate, return): the minimum,
    because other load on the machine only ever adds time."""
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        mapper.map([chunk])
        times.append(time.perf_counter() - t0)
    return float(np.min(times))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer reference designs (about a minute)")
    ap.add_argument("--out", type=Path, help="also write the JSON here")
    args = ap.parse_args()
    cores = local_cores()
    tuned = roomy_allocator()  # as the search does in its own process and in every worker
    catalogs, scenario = load_catalogs(ROOT / "catalogs"), load_scenario(None)
    fast = Evaluator(catalogs, scenario, Settings(field_model="fast"))
    ref = Evaluator(catalogs, scenario, Settings(field_model="reference"))
    n_ref = 8 * cores if args.quick else 16 * cores
    out = {"machine": {"python": platform.python_version(), "cores": cores,
                       "processor": platform.processor() or platform.machine()},
           "allocator_tuned": tuned, "load_average_at_start": os.getloadavg(),
           "reference_designs": n_ref, "reference_chunk": DEFAULT_CHUNK["reference"],
           "fast_chunk": DEFAULT_CHUNK["fast"]}

    # Reference model in this process, by chunk size (does batching help the 3-D model?).
    m_ref = designs(ref, n_ref, seed=1)
    serial = SerialMapper(ref)
    by_chunk = {}
    for size in (1, DEFAULT_CHUNK["reference"], 16):
        sub = m_ref[: max(size, 8 if args.quick else 16)]
        by_chunk[str(size)] = timed(lambda: serial.map(split_chunks(sub, size))) / len(sub)
    out["reference_s_per_design"] = by_chunk

    chunks = split_chunks(m_ref, DEFAULT_CHUNK["reference"])
    c0 = time.process_time()
    t_serial = timed(lambda: serial.map(chunks))
    # CPU seconds per design (all threads of this process): wall time on a loaded machine says
    # little; with chunk overhead this small, an idle machine's speed-up is about cores x wall/CPU.
    out["reference_cpu_s_per_design_serial"] = (time.process_time() - c0) / n_ref
    out["reference_wall_s_per_design_serial"] = t_serial / n_ref
    rates = {"serial": n_ref / t_serial}
    one_fast = designs(fast, 1, seed=2)
    t_local_1 = round_trip(SerialMapper(fast), one_fast)
    trips = {"in_process": t_local_1}
    startup = {}

    t0 = time.perf_counter()
    pool = PoolMapper(ref, workers=cores)
    pool.map(split_chunks(m_ref[:cores], 1))  # every worker spawned and holding the evaluator
    startup["pool"] = time.perf_counter() - t0
    rates[f"pool_{cores}"] = n_ref / timed(lambda: pool.map(chunks))
    pool.close()
    pool = PoolMapper(fast, workers=cores)
    pool.map([one_fast] * cores)
    trips["pool"] = round_trip(pool, one_fast)
    m_fast = designs(fast, 1000, seed=3)
    fast_rates = {}
    for pop in (100, 1000):
        fc = split_chunks(m_fast[:pop], DEFAULT_CHUNK["fast"])
        fc_small = split_chunks(m_fast[:pop], max(pop // cores, 1))
        fast_rates[str(pop)] = {
            "serial": pop / timed(lambda: SerialMapper(fast).map(fc), repeat=5),
            f"pool_{cores}_chunk_{DEFAULT_CHUNK['fast']}": pop / timed(lambda: pool.map(fc), repeat=5),
            f"pool_{cores}_chunk_{max(pop // cores, 1)}": pop / timed(lambda: pool.map(fc_small), repeat=5),
        }
    pool.close()
    out["fast_designs_per_s"] = fast_rates

    if dask_available():
        from distributed import LocalCluster

        t0 = time.perf_counter()
        with LocalCluster(n_workers=cores, threads_per_worker=1, processes=True, dashboard_address=None,
                          silence_logs=logging.ERROR) as cluster:
            dask = DaskMapper(ref, cluster.scheduler_address)
            dask.map(split_chunks(m_ref[:cores], 1))
            startup["dask_local_cluster"] = time.perf_counter() - t0
            rates[f"dask_{cores}"] = n_ref / timed(lambda: dask.map(chunks))
            dask.close()
            dask = DaskMapper(fast, cluster.scheduler_address)
            dask.map([one_fast] * cores)
            trips["dask"] = round_trip(dask, one_fast)
            dask.close()
    out["reference_designs_per_s"] = rates
    out["speed_up"] = {k: v / rates["serial"] for k, v in rates.items() if k != "serial"}
    out["startup_s"] = startup
    out["chunk_round_trip_s"] = trips
    out["chunk_overhead_s"] = {k: v - t_local_1 for k, v in trips.items() if k != "in_process"}
    out["load_average_at_end"] = os.getloadavg()
    text = json.dumps(out, indent=2)
    print(text)
    if args.out:
        args.out.write_text(text + "\n")


if __name__ == "__main__":
    main()
