"""The evaluator's outputs for a fixed set of designs, held bit for bit.

Oracle: the evaluator itself as it was when `tests/data/evaluator_golden.npz` was written by
`tests/data/make_evaluator_golden.py` (not an outside source: this test guards refactorings of the
pipeline, e.g. the split of `Evaluator._at_speed` into stages, against any change of a result).
An intentional physics change regenerates the file in the same commit and says why there.
"""

import importlib.util
from pathlib import Path

import numpy as np
import pytest

HERE = Path(__file__).resolve().parent
_spec = importlib.util.spec_from_file_location("make_evaluator_golden", HERE / "data" / "make_evaluator_golden.py")
golden = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(golden)


@pytest.fixture(scope="module")
def stored():
    return dict(np.load(golden.GOLDEN))


def test_every_output_of_every_case_is_unchanged(stored):
    mismatched, seen = [], set()
    for name, ev, batch, rpm in golden.cases():
        if name == "_designs":
            continue
        now = golden.outputs(ev, batch, rpm, keep_waveform=name in golden.WAVEFORM_CASES)
        for key, value in now.items():
            full = f"{name}:{key}"
            seen.add(full)
            if full not in stored:
                mismatched.append(f"{full}: new output (regenerate the golden file if intended)")
            elif value.shape != stored[full].shape or not np.array_equal(value, stored[full], equal_nan=True):
                diff = np.abs(np.asarray(value, float) - stored[full]) if value.shape == stored[full].shape else None
                mismatched.append(f"{full}: changed (max abs difference "
                                  f"{np.nanmax(diff) if diff is not None else 'shape'})")
    missing = {k for k in stored if ":" in k} - seen
    mismatched += [f"{k}: no longer produced" for k in sorted(missing)]
    assert not mismatched, "\n".join(mismatched[:40])


def test_golden_cases_cover_star_delta_feasible_and_rest(stored):
    # The stored set must exercise both connections, feasible designs and the 0 rpm case.
    fits = stored["designs_fits"]
    assert set(np.unique(fits[:, 9])) == {0.0, 1.0}
    assert set(np.unique(stored["designs_random"][:, 9])) == {0.0, 1.0}
    feasible = np.all(stored["fits_180:constraints"] <= 0, axis=1)
    assert 20 < feasible.sum() < len(feasible)
    assert "propeller:profile/rpm" in stored and "random_0:values/coil_temperature_C" in stored
