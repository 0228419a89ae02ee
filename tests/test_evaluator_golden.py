"""The evaluator's outputs for a fixed set of designs, held bit for bit.

Oracle: the evaluator itself as it was when `tests/data/evaluator_golden.npz` was written by
`tests/data/make_evaluator_golden.py` (not an outside source: this test guards refactorings of the
pipeline, e.g. the split of `Evaluator._at_speed` into stages, against any change of a result).
An intentional physics change regenerates the file in the same commit and says why there.

Floating-point outputs are held to RTOL = 1e-12 relative, not bit for bit: the evaluator's speed-ups
reorder arithmetic (the line EMF from the first sixth of the period, the bridge fed the scaled
spreads instead of scaled waveforms, the zero-sequence EMF from its harmonics), which moves results
by a few units in the last place. Each element is compared relative to itself or, if smaller, to
FLOOR = 1e-3 of the largest magnitude of that output (per column of 2-D outputs), so a value that
cancels to near zero (a constraint at its bound) is judged on a scale its inputs had. Any change of the physics moves
results by far more; integer and boolean outputs and the NaN pattern must match exactly. The
thermal residual |T - T_used| is a difference of two temperatures a few millikelvin (or less)
apart, so it is judged on the scale of the coil temperature (`OPERAND_SCALE`).
"""

import importlib.util
from pathlib import Path

import numpy as np
import pytest

HERE = Path(__file__).resolve().parent
_spec = importlib.util.spec_from_file_location("make_evaluator_golden", HERE / "data" / "make_evaluator_golden.py")
golden = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(golden)


RTOL = 1e-12
FLOOR = 1e-3


OPERAND_SCALE = {"values/thermal_residual_K": "values/coil_temperature_C",
                 "at_fastest/thermal_residual_K": "at_fastest/coil_temperature_C"}


def mismatch(value, stored, operand=None):
    """None if `value` equals `stored` within RTOL (see the module docstring), else a reason;
    `operand` (same shape) replaces |stored| as each element's scale for a difference."""
    value = np.asarray(value)
    if value.shape != stored.shape:
        return f"shape {value.shape} instead of {stored.shape}"
    if not (np.issubdtype(value.dtype, np.floating) or np.issubdtype(stored.dtype, np.floating)):
        return None if np.array_equal(value, stored) else "changed (exact output)"
    value, stored = value.astype(float), stored.astype(float)
    if not np.array_equal(np.isnan(value), np.isnan(stored)):
        return "NaN pattern changed"
    ok = ~np.isnan(stored)
    a, b = np.where(ok, value, 0.0), np.where(ok, stored, 0.0)
    size = np.abs(b) if operand is None else np.abs(np.asarray(operand, dtype=float))
    scale = size.max(axis=0, keepdims=True) if b.ndim == 2 else size.max(initial=0.0)
    err = np.abs(a - b) / np.maximum(np.maximum(size, FLOOR * scale), np.finfo(float).tiny)
    worst = float(err.max(initial=0.0))
    return None if worst <= RTOL else f"changed (max relative difference {worst:.3g})"


def test_mismatch_catches_a_change_far_below_any_physics_change():
    stored = np.array([[1.0, -2e-3], [3.0, 5e-3]])
    assert mismatch(stored * (1 + 1e-14), stored) is None
    bumped = stored.copy()
    bumped[1, 1] *= 1 + 1e-10
    assert mismatch(bumped, stored) is not None
    assert mismatch(np.array([1, 2]), np.array([1, 3])) is not None
    assert mismatch(np.array([np.nan, 1.0]), np.array([0.0, 1.0])) is not None


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
            elif (why := mismatch(value, stored[full], stored.get(f"{name}:{OPERAND_SCALE[key]}")
                                  if key in OPERAND_SCALE else None)) is not None:
                mismatched.append(f"{full}: {why}")
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
