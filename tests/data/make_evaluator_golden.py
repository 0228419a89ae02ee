"""Regenerate tests/data/evaluator_golden.npz: the evaluator's outputs for a fixed set of designs.

    python tests/data/make_evaluator_golden.py      # same designs, new outputs

Regenerate ONLY for an intentional change of the physics, and say in the same commit which
change and why the numbers moved: `tests/test_evaluator_golden.py` holds every value of
`Evaluation.values`, the constraints, the objectives and the propeller profile against this file,
so a refactoring that changes any result is caught.

The designs are stored in the file (as `DesignBatch.as_matrix()`), so the test does not depend on
the search space's random decoding staying the same. Cases (demo catalogs, demo scenario, fast
model unless said):

* `random`: 300 uniform random decodes of the demo space (star and delta, feasible or not) at
  0, 180 (sailing) and 540 rpm, and at one rpm per design drawn in 0-1500;
* `fits`: 100 random designs that pass the six fit checks but fail another constraint, and the
  feasible ones (at sailing rpm) among 40 000 random decodes (26), at the same speeds;
* `inductive`: 40 of the fitting designs with `Settings(inductance=True)` at sailing rpm;
* `fits_sailing`: the fitting designs with `evaluate(batch)` (sailing rpm, and the fastest sailing
  rpm of the connected range in `at_fastest`);
* `propeller`: 30 fitting designs with a 16 in propeller in the scenario, `evaluate(batch)`
  (the loaded operating point per profile speed).
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
GOLDEN = Path(__file__).resolve().with_name("evaluator_golden.npz")
SPEEDS = (0.0, 180.0, 540.0, "mixed")
WAVEFORM_CASES = ("fits_180", "inductive_180")


def cases(new_designs=False):
    """Yield (case name, evaluator, batch, rpm or None) for every stored case: the designs stored
    in the golden file unless `new_designs` (or no file yet), then drawn afresh."""
    import sys
    sys.path.insert(0, str(ROOT))
    from optimiser.catalogs import load_catalogs
    from optimiser.design import DesignBatch
    from optimiser.evaluate import Evaluator, Settings
    from optimiser.scenario import load_scenario

    catalogs, scenario = load_catalogs(ROOT / "catalogs"), load_scenario(None)
    ev = Evaluator(catalogs, scenario)
    stored = np.load(GOLDEN) if GOLDEN.exists() and not new_designs else None
    if stored is not None:
        random_b = DesignBatch.from_matrix(stored["designs_random"])
        fits_b = DesignBatch.from_matrix(stored["designs_fits"])
        mixed = {"random": stored["mixed_rpm_random"], "fits": stored["mixed_rpm_fits"]}
    else:
        from optimiser.search.space import SearchSpace
        space = SearchSpace(ev)
        rng = np.random.default_rng(20261202)
        random_b = space.decode_columns(space.random_columns(300, rng))
        pool = space.decode_columns(space.random_columns(40000, rng))
        g = ev.evaluate(pool).constraints
        fit, feasible = g[:, :6].max(axis=1) <= 0, g.max(axis=1) <= 0
        fits_b = pool.take(np.concatenate([np.flatnonzero(fit & ~feasible)[:100], np.flatnonzero(feasible)[:100]]))
        mixed = {"random": rng.uniform(0.0, 1500.0, len(random_b)),
                 "fits": rng.uniform(0.0, 1500.0, len(fits_b))}
    for name, b in (("random", random_b), ("fits", fits_b)):
        for rpm in SPEEDS:
            yield f"{name}_{rpm if rpm == 'mixed' else int(rpm)}", ev, b, mixed[name] if rpm == "mixed" else rpm
    yield "fits_sailing", ev, fits_b, None  # evaluate(batch): sailing and fastest sailing rpm
    small = fits_b.take(np.arange(80, 120))
    yield "inductive_180", Evaluator(catalogs, scenario, Settings(inductance=True)), small, 180.0
    boat = dataclasses.replace(scenario, propeller_diameter_m=0.406)
    yield "propeller", Evaluator(catalogs, boat), fits_b.take(np.arange(85, 115)), None
    # the designs themselves, for storing
    yield "_designs", None, (random_b, fits_b, mixed), None


def outputs(ev, batch, rpm, keep_waveform=False):
    """Flat dict of every output array of one evaluate() call (the EMF waveform only if asked:
    it is large and only rescaled by the rest)."""
    res = ev.evaluate(batch, rpm)
    out = {f"values/{k}": np.asarray(v) for k, v in res.values.items()}
    out["constraints"] = res.constraints
    out["objectives"] = res.objectives
    if keep_waveform:
        out["emf_waveform_V"] = res.emf_waveform_V
    out.update({f"profile/{k}": np.asarray(v) for k, v in res.profile.items()})
    out.update({f"at_fastest/{k}": np.asarray(v) for k, v in res.at_fastest.items()})
    return out


def main():
    import argparse
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--new-designs", action="store_true", help="draw the designs afresh (default: keep "
                    "the stored ones, so a physics change shows as changed outputs of the same designs)")
    new_designs = ap.parse_args().new_designs
    arrays = {}
    for name, ev, batch, rpm in cases(new_designs):
        if name == "_designs":
            random_b, fits_b, mixed = batch
            arrays["designs_random"], arrays["designs_fits"] = random_b.as_matrix(), fits_b.as_matrix()
            arrays["mixed_rpm_random"], arrays["mixed_rpm_fits"] = mixed["random"], mixed["fits"]
            continue
        for key, value in outputs(ev, batch, rpm, keep_waveform=name in WAVEFORM_CASES).items():
            arrays[f"{name}:{key}"] = value
    np.savez_compressed(GOLDEN, **arrays)
    print(f"wrote {GOLDEN.relative_to(ROOT)}: {len(arrays)} arrays")


if __name__ == "__main__":
    main()
