"""Fast thermal network vs the finite-volume reference: `python tests/benchmarks/bench_thermal.py [--designs 200]`.

Prints one JSON object: for random feasible designs of the demo space (at the sailing rpm), at the
sailing rpm, twice it, and the scenario's `fastest_sailing_rpm` if that key exists, the ratio of
the fast model's coil temperature rise to the reference's hot-spot rise at the same loss (the
fast design's losses): median, 5th and 95th percentiles, range, and the share within 10 %.
Not a pytest module (no test_ prefix).
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from optimiser.catalogs import load_catalogs  # noqa: E402
from optimiser.evaluate import Evaluator  # noqa: E402
from optimiser.scenario import load_scenario  # noqa: E402
from optimiser.search.space import SearchSpace  # noqa: E402


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--designs", type=int, default=200)
    ap.add_argument("--seed", type=int, default=13)
    args = ap.parse_args(argv)
    cat, sc = load_catalogs(ROOT / "catalogs"), load_scenario(None)
    ev = Evaluator(cat, sc)
    space = SearchSpace(ev)
    rng = np.random.default_rng(args.seed)
    found = []
    while sum(map(len, found)) < args.designs:
        batch = space.decode_columns(space.random_columns(50000, rng))
        found.append(batch.take(np.flatnonzero(ev.evaluate(batch).feasible)))
    from optimiser.design import DesignBatch
    batch = DesignBatch.from_matrix(np.vstack([b.as_matrix() for b in found])[: args.designs])
    speeds = {"sailing": sc.sailing_rpm, "2x sailing": 2 * sc.sailing_rpm}
    fastest = getattr(sc, "fastest_sailing_rpm", None)
    if fastest:
        speeds["fastest sailing"] = fastest
    out = {"designs": len(batch), "fastest_sailing_rpm": "present" if fastest else "not in the scenario",
           "ratio": "fast coil rise / reference hot-spot rise at the same loss", "speeds": {}}
    for name, rpm in speeds.items():
        t = time.process_time()
        res = ev.evaluate(batch, rpm=rpm)
        geo = ev._geometry(batch)
        loss = res["copper_loss_W"] + res["eddy_loss_W"]
        r_ref, _ = ev._reference_thermal(batch, geo, np.full(len(batch), float(rpm)), loss)
        rise_fast = res["coil_temperature_C"] - sc.bilge_air_C
        rise_ref = r_ref * np.maximum(loss, 1e-3)
        ok = (rise_ref > 0.05) & ~res["thermal_runaway"]
        ratio = rise_fast[ok] / rise_ref[ok]
        err = np.abs(ratio - 1)
        out["speeds"][name] = {
            "rpm": rpm, "compared": int(ok.sum()), "median_ratio": float(np.median(ratio)),
            "p5_ratio": float(np.percentile(ratio, 5)), "p95_ratio": float(np.percentile(ratio, 95)),
            "min_ratio": float(ratio.min()), "max_ratio": float(ratio.max()),
            "median_abs_error": float(np.median(err)), "p95_abs_error": float(np.percentile(err, 95)),
            "share_within_10_percent": float(np.mean(err <= 0.10)), "cpu_s": time.process_time() - t}
    json.dump(out, sys.stdout, indent=2)
    sys.stdout.write("\n")
    return out


if __name__ == "__main__":
    main()
