"""Build tolerances: each design at fixed low-discrepancy samples of what a workshop cannot hold.

A built machine differs from its drawing: the magnets' Br is anywhere in its grade's window, hand
wound coils come out thicker or thinner (fill factor), the assembled running clearance is off by
the discs' run-out and the shims, the bilge is warmer or cooler, the casting resin conducts more
or less heat. The scenario's ``spread_*`` keys give each as a half-width; a build is taken as
independent and **uniform within +- the spread** (a tolerance band says where the value lies, not
how it is distributed; uniform is the plain reading of "within +-", and it keeps every sample
inside the band, so no sample is a build that the workshop would reject).

The samples are a scrambled Sobol sequence of fixed seed (`SEED`; scipy.stats.qmc), so a run's
results are deterministic and a resumed search sees the same builds. `expanded` repeats each
design row once per sample (design-major) and attaches the per-row build values as a
`BuiltBatch`; the evaluator runs the whole (designs x samples) batch in one call, reading the
per-row values through `Evaluator._scenario_for` and the Br factor in `_geometry`, so there is no
Python loop per sample. `percentiles` reduces the (designs x samples) values to p10, p50 and p90
per design (numpy's linear interpolation between order statistics).

References
----------
J. Matousek, "On the L2-discrepancy for anchored boxes", J. Complexity 14, 1998 (the linear
matrix scrambling scipy uses); S. Joe and F. Y. Kuo, "Constructing Sobol sequences with better
two-dimensional projections", SIAM J. Sci. Comput. 30, 2008 (the direction numbers). Both via
scipy.stats.qmc.Sobol; not re-checked here (the test compares with plain Monte Carlo instead).
"""

from __future__ import annotations

import copy
import dataclasses
import math

import numpy as np
from scipy.stats import qmc

from .design import DesignBatch

SEED = 1414
"""Seed of the scrambled Sobol sequence: fixed, so every run and resume sees the same builds."""

REPORT_SAMPLES = 16
"""Samples a report (evaluate, build sheet) uses when the scenario's robust_samples is 0."""

DIMENSIONS = ("remanence", "fill_factor", "running_clearance", "bilge_air", "resin_conductivity")
"""The spreads, in the order of the sample columns."""

VALUES = ("charge_current_A", "drag_torque_Nm", "coil_temperature_C", "coil_temperature_connected_C",
          "magnet_temperature_connected_C", "cut_in_rpm")
"""Values reduced to p10 / p50 / p90 for every design."""
PROPELLER_VALUES = ("amp_hours_per_day", "mean_added_drag_N")
"""Also reduced when the scenario has a propeller."""

PERCENTILES = (10, 50, 90)


@dataclasses.dataclass(frozen=True)
class Build:
    """Per-row workshop values of an expanded batch (arrays of shape (rows,))."""

    remanence_factor: np.ndarray        # Br of the catalog row multiplied by this [-]
    coil_fill_factor: np.ndarray        # [-]
    running_clearance_m: np.ndarray     # [m]
    bilge_air_C: np.ndarray             # [C]
    resin_conductivity_W_mK: np.ndarray  # [W/(m K)]

    def take(self, index) -> "Build":
        return Build(*(getattr(self, f.name)[index] for f in dataclasses.fields(self)))


class BuiltBatch(DesignBatch):
    """A DesignBatch whose rows carry their own build (`Build`); `take` keeps the two aligned.

    Its design fields (and so `as_matrix`) are those of the plain batch: the build is not part of
    a design, only of one evaluation of it.
    """

    def __init__(self, batch: DesignBatch, build: Build, scenario):
        super().__init__(**{f.name: getattr(batch, f.name) for f in dataclasses.fields(DesignBatch)})
        object.__setattr__(self, "build", build)
        # The scenario as the evaluator sees it for these rows: the sampled keys as arrays.
        object.__setattr__(self, "scenario", dataclasses.replace(
            scenario, coil_fill_factor=build.coil_fill_factor,
            running_clearance_m=build.running_clearance_m, bilge_air_C=build.bilge_air_C,
            resin_conductivity_W_mK=build.resin_conductivity_W_mK))
        object.__setattr__(self, "_nominal_scenario", scenario)

    def take(self, index) -> "BuiltBatch":
        return BuiltBatch(DesignBatch.take(self, index), self.build.take(index), self._nominal_scenario)


def unit_samples(n_samples: int) -> np.ndarray:
    """(n_samples, 5) points of the unit cube: the first n of a scrambled Sobol sequence (seed
    `SEED`; drawn as the smallest power of two holding them, which keeps scipy's balance)."""
    if n_samples <= 0:
        return np.empty((0, len(DIMENSIONS)))
    m = max(0, math.ceil(math.log2(n_samples)))
    return qmc.Sobol(d=len(DIMENSIONS), scramble=True, seed=SEED).random_base2(m)[:n_samples]


def build_values(scenario, u) -> Build:
    """The builds at unit-cube points u (k, 5): each spread uniform within +- its half-width.

    A spread of 0 gives the scenario's own value bit for bit (x * (1 + 0) and x + 0 are exact).
    The fill factor is never taken above 1 (a perfect square packing).
    """
    u = np.asarray(u, float)
    d = 2.0 * u - 1.0  # each column uniform in [-1, 1]
    sc = scenario
    return Build(
        remanence_factor=1.0 + sc.spread_remanence_pct / 100.0 * d[:, 0],
        coil_fill_factor=np.minimum(sc.coil_fill_factor * (1.0 + sc.spread_fill_factor_pct / 100.0 * d[:, 1]),
                                    1.0),
        running_clearance_m=sc.running_clearance_m + sc.spread_running_clearance_m * d[:, 2],
        bilge_air_C=sc.bilge_air_C + sc.spread_bilge_air_C * d[:, 3],
        resin_conductivity_W_mK=sc.resin_conductivity_W_mK * (1.0 + sc.spread_resin_conductivity_pct / 100.0 * d[:, 4]),
    )


def expanded(batch: DesignBatch, scenario, u) -> BuiltBatch:
    """Each design of `batch` repeated once per point of u (design-major: row i * k + j is
    design i at build j), with its build attached."""
    n, k = len(batch), len(u)
    build = build_values(scenario, u)
    tiled = Build(*(np.tile(getattr(build, f.name), n) for f in dataclasses.fields(Build)))
    return BuiltBatch(batch.take(np.repeat(np.arange(n), k)), tiled, scenario)


def value_names(has_propeller: bool) -> tuple:
    return VALUES + (PROPELLER_VALUES if has_propeller else ())


def percentiles(values: dict, n: int, k: int, names) -> dict:
    """p10 / p50 / p90 over the k builds of each of n designs, as `NAME_p10` ... arrays (n,)."""
    out = {}
    for name in names:
        x = np.asarray(values[name], float).reshape(n, k)
        p = np.percentile(x, PERCENTILES, axis=1)
        for q, row in zip(PERCENTILES, p):
            out[f"{name}_p{q}"] = row
    return out


def robust_values(evaluator, batch: DesignBatch, n_samples: int, u=None) -> dict:
    """The p10 / p50 / p90 values of every design of `batch` over `n_samples` builds (or over
    given unit-cube points u): one evaluation of the (designs x samples) batch."""
    u = unit_samples(n_samples) if u is None else np.asarray(u, float)
    if evaluator.settings.thermal_model != "fast":
        # The resolved thermal reference is one sparse solve per row and reads the nominal
        # scenario: the builds' band comes from the fast network (as the search's).
        evaluator = copy.copy(evaluator)
        evaluator.settings = dataclasses.replace(evaluator.settings, thermal_model="fast")
    big = expanded(batch, evaluator.scenario, u)
    ev = evaluator.evaluate(big)
    return percentiles(ev.values, len(batch), len(u), value_names(evaluator.scenario.has_propeller))
