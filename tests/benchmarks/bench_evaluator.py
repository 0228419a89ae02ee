"""Evaluator speed: `python tests/benchmarks/bench_evaluator.py [--repeats 5] [--batch 20000]`.

Prints one JSON object. Not a pytest module (no test_ prefix): run it by hand on a quiet machine.

(a) electromagnetic part only: coil geometry, fit margins, Fourier field -> per-turn flux linkage,
    winding lookup, EMF waveform, resistance and inductance, called exactly as
    `Evaluator.evaluate` calls them (the sequence is copied below; keep it in step with
    optimiser/evaluate.py). Target >= 50 000 designs/s in one batch.
(b) the whole `Evaluator.evaluate` at the sailing rpm, default Settings. Target >= 20 000 designs/s
    at batch 20 000.
(c) the same model, one design per call in a Python loop (a few hundred designs), and the ratio of
    (b)'s per-design throughput to it. Target >= 50x.
Each figure is the median of `--repeats` runs; designs are random decodes of the demo search space
(feasible or not, as the search sees them).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import sys
import time
from dataclasses import asdict
from pathlib import Path

import numpy as np

from optimiser.catalogs import load_catalogs
from optimiser.evaluate import Evaluator, Settings
from optimiser.physics import electrical, emf, geometry
from optimiser.physics import field as fieldmodel
from optimiser.scenario import load_scenario
from optimiser.search.space import SearchSpace

ROOT = Path(__file__).resolve().parents[2]
TARGETS = {"electromagnetic_designs_per_s": 50_000, "evaluate_designs_per_s": 20_000, "batch_over_loop": 50}


def random_designs(evaluator, n, seed=0):
    space = SearchSpace(evaluator)
    rng = np.random.default_rng(seed)
    cols = space.random_columns(n, rng)
    return space.decode_columns(cols)


class _Clock:
    """Accumulates wall time per stage name when given to `electromagnetic_part`."""

    def __init__(self):
        self.totals, self._t = {}, None

    def __call__(self, name):
        now = time.perf_counter()
        if self._t is not None:
            self.totals[self._t[0]] = self.totals.get(self._t[0], 0.0) + now - self._t[1]
        self._t = (name, now) if name else None


def electromagnetic_part(ev: Evaluator, batch, clock=None):
    """Geometry + field + winding + EMF + resistance + inductance, as in Evaluator.evaluate."""
    clock = clock or (lambda name: None)
    clock("lookups and geometry")
    sc, st = ev.scenario, ev.settings
    n = len(batch)
    mag = {k: v[batch.magnet] for k, v in ev.magnet.items()}
    wire = {k: v[batch.wire] for k, v in ev.wire.items()}
    disc = {k: v[batch.disc] for k, v in ev.disc.items()}
    coils = ev.layout["coils_per_unit"][batch.layout] * batch.multiple
    poles = ev.layout["poles_per_unit"][batch.layout] * batch.multiple
    pole_pairs = poles // 2
    combo = np.maximum(ev.windings.index(batch.layout, batch.multiple), 0)
    paths = np.maximum(batch.parallel_paths, 1)
    series = np.maximum(coils // (3 * paths), 1)
    coil = geometry.coil_geometry(batch.ring_radius_m, mag["length_m"], mag["width_m"], coils, batch.turns,
                                  batch.strands, wire["overall_diameter_m"], sc.coil_fill_factor,
                                  sc.coil_hole_clearance_m, sc.resin_skin_m, sc.running_clearance_m)
    geometry.fit_margins(batch.ring_radius_m, mag["length_m"], mag["width_m"], mag["thickness_m"], poles,
                         disc["diameter_m"], disc["thickness_m"], coil, min_coil_leg_m=sc.min_coil_leg_m,
                         max_rotor_diameter_m=sc.max_rotor_diameter_m,
                         max_axial_length_m=sc.max_axial_length_m, shaft_diameter_m=sc.shaft_diameter_m,
                         hub_clearance_m=sc.hub_clearance_m)
    leg = np.maximum(coil.leg_width_m, 1e-4)
    gap_cap = np.maximum(sc.max_axial_length_m - 2.0 * (disc["thickness_m"] + mag["thickness_m"]), 5e-3)
    if np.any(coil.face_gap_m > gap_cap):  # over-long designs: physics at the envelope (as evaluate)
        over = coil.face_gap_m > gap_cap
        t_cap = np.maximum(gap_cap - 2.0 * (sc.resin_skin_m + sc.running_clearance_m), 1e-4)
        coil = coil._replace(face_gap_m=np.where(over, gap_cap, coil.face_gap_m),
                             coil_thickness_m=np.where(over, t_cap, coil.coil_thickness_m),
                             stator_thickness_m=np.where(over, t_cap + 2.0 * sc.resin_skin_m,
                                                         coil.stator_thickness_m))
    path_len, _ = geometry.winding_lengths(coil.mean_turn_length_m, batch.turns, batch.strands, coils, series)
    clock("field (flux linkage harmonics)")
    lam = fieldmodel.coil_flux_linkage_harmonics(np.ones(n), mag["recoil_permeability"], mag["length_m"],
                                                 mag["width_m"], mag["thickness_m"], coil.face_gap_m,
                                                 pole_pairs, batch.ring_radius_m, coil.hole_tangential_m,
                                                 leg, coil.coil_thickness_m, ev.orders, n_slices=st.n_slices,
                                                 hole_radial_m=coil.hole_radial_m)
    clock("emf waveform")
    e = emf.phase_emf_waveform(lam, ev.windings.phase_factors[combo], series, batch.turns, pole_pairs,
                               np.ones(n), ev.orders, n_samples=st.n_samples)
    clock("resistance")
    r20 = electrical.phase_resistance(path_len, wire["bare_diameter_m"], batch.strands, paths, 20.0)
    clock("inductance")
    l_coil = electrical.coil_inductance(batch.turns, coil.hole_radial_m, coil.hole_tangential_m, leg,
                                        coil.coil_thickness_m, coil.face_gap_m + 2.0 * mag["thickness_m"],
                                        n_images=st.inductance_images)
    l_phase = electrical.phase_inductance(l_coil, series, paths)
    clock(None)
    return e, r20, l_phase


def median_time(fn, repeats):
    """Median wall time and median process CPU time of `repeats` calls (after one warm-up): on a
    shared machine the CPU time shows what the code costs when it gets a core to itself."""
    fn()  # warm-up (imports, caches, page faults)
    wall, cpu = [], []
    for _ in range(repeats):
        t, c = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t)
        cpu.append(time.process_time() - c)
    return statistics.median(wall), [round(x, 4) for x in wall], statistics.median(cpu)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--batch", type=int, default=20000)
    ap.add_argument("--loop", type=int, default=300, help="designs evaluated one at a time in (c)")
    args = ap.parse_args(argv)

    catalogs, scenario = load_catalogs(ROOT / "catalogs"), load_scenario(None)
    settings = Settings()
    ev = Evaluator(catalogs, scenario, settings)
    batch = random_designs(ev, args.batch)

    # sanity: the copied sequence computes what the evaluator reports
    e_unit, r20, l_phase = electromagnetic_part(ev, batch.take(np.arange(200)))
    full = ev.evaluate(batch.take(np.arange(200)))
    assert np.allclose(r20, full["phase_resistance_20C_ohm"], rtol=1e-12)
    assert np.allclose(l_phase, full["phase_inductance_H"], rtol=1e-12)
    assert np.allclose(e_unit * (full["remanence_T"] * full["rpm"])[:, None, None], full.emf_waveform_V,
                       rtol=1e-9, atol=1e-12)

    t_em, em_runs, c_em = median_time(lambda: electromagnetic_part(ev, batch), args.repeats)
    clock = _Clock()
    electromagnetic_part(ev, batch, clock)
    t_ev, ev_runs, c_ev = median_time(lambda: ev.evaluate(batch), args.repeats)
    singles = [batch.take([i]) for i in range(args.loop)]

    def loop():
        for one in singles:
            ev.evaluate(one)

    t_loop, loop_runs, c_loop = median_time(loop, max(3, args.repeats // 2))
    em_rate, ev_rate, loop_rate = args.batch / t_em, args.batch / t_ev, args.loop / t_loop
    result = {
        "machine": {"nproc": os.cpu_count(), "numpy": np.__version__, "python": platform.python_version(),
                    "platform": platform.platform(), "processor": platform.processor() or platform.machine(),
                    "load_average_1min": os.getloadavg()[0],
                    "omp_num_threads": os.environ.get("OMP_NUM_THREADS"),
                    "openblas_num_threads": os.environ.get("OPENBLAS_NUM_THREADS")},
        "settings": asdict(settings),
        "rpm": scenario.sailing_rpm,
        "repeats": args.repeats,
        "electromagnetic": {"batch": args.batch, "median_s": t_em, "designs_per_s": em_rate,
                            "target_designs_per_s": TARGETS["electromagnetic_designs_per_s"],
                            "meets_target": em_rate >= TARGETS["electromagnetic_designs_per_s"],
                            "designs_per_cpu_s": args.batch / c_em, "runs_s": em_runs,
                            "stages_s": {k: round(v, 4) for k, v in clock.totals.items()}},
        "evaluate": {"batch": args.batch, "median_s": t_ev, "designs_per_s": ev_rate,
                     "target_designs_per_s": TARGETS["evaluate_designs_per_s"],
                     "meets_target": ev_rate >= TARGETS["evaluate_designs_per_s"],
                     "designs_per_cpu_s": args.batch / c_ev, "runs_s": ev_runs},
        "loop": {"designs": args.loop, "median_s": t_loop, "designs_per_s": loop_rate,
                 "designs_per_cpu_s": args.loop / c_loop, "runs_s": loop_runs},
        "batch_over_loop": {"ratio": ev_rate / loop_rate, "ratio_cpu": (args.batch / c_ev) / (args.loop / c_loop),
                            "target": TARGETS["batch_over_loop"],
                            "meets_target": ev_rate / loop_rate >= TARGETS["batch_over_loop"]},
    }
    json.dump(result, sys.stdout, indent=2)
    sys.stdout.write("\n")
    return result


if __name__ == "__main__":
    main()
