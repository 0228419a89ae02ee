"""A run's front as data: front.csv and the run's own snapshot, never the search state.

`load_front(run_dir)` reads the run through `search.folder.RunView` (run.json, the verified
snapshot, front.npz) and adds front.csv's values, so `afpm front`, `afpm pick` and
`afpm evaluate --run` never unpickle anything. Column helpers describe any front.csv column (label,
unit, which way is better) from its name, so columns added later show up with their unit.

Also here, pure numpy over the front's objectives (minimisation form, one row per design):

- `representatives`: the readable subset of at most N designs the page draws (see its docstring for
  the method), and for every front design the shown design it is nearest to.
- `topsis`: the best-compromise design by TOPSIS (Hwang and Yoon 1981).
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..design import DESIGN_KEYS, DesignBatch
from ..errors import InputError, Problem
from ..evaluate import OBJECTIVE_SENSE, RUNAWAY_C, Evaluator
from ..search.folder import RunView

__all__ = ["FrontData", "load_front", "column_label", "column_unit", "column_sense", "format_value",
           "ALIASES", "resolve_column", "representatives", "topsis", "DEG_C", "plural", "temperature_text",
           "column_factor", "column_name"]

DEG_C = "\N{DEGREE SIGN}C"

ALIASES = {"charge": "charge_current_A", "torque": "drag_torque_Nm", "cost": "magnet_cost",
           "temperature": "coil_temperature_C"}
"""The short words `afpm pick --most` has always taken, and the front.csv column each names."""

_LABELS = {
    "charge_current_A": "charge current", "drag_torque_Nm": "drag torque", "magnet_cost": "magnet bill",
    "coil_temperature_C": "coil temperature", "amp_hours_per_day": "charge per day",
    "mean_added_drag_N": "mean added drag", "emf_line_rms_per_rpm_V": "EMF constant (line, rms per rpm)",
    "cut_in_rpm": "cut-in speed", "battery_power_W": "battery power", "efficiency": "efficiency",
    "coil_thickness_m": "coil thickness", "face_gap_m": "magnet face gap", "copper_mass_kg": "copper mass",
    "wire_cost": "wire cost", "disc_cost": "disc cost", "magnet_temperature_C": "magnet temperature",
    "back_iron_flux_density_T": "back-iron flux density", "axial_attraction_N": "rotor attraction",
    "open_circuit_line_peak_V": "open-circuit line voltage (peak)",
    "coil_temperature_connected_C": "coil temperature, hottest connected speed",
    "magnet_temperature_connected_C": "magnet temperature, hottest connected speed",
}
# name ending -> (unit shown, factor from the stored SI value); longest ending first
_UNITS = (("_per_rpm_V", "mV/rpm", 1e3), ("_per_day", "A h/day", 1.0), ("_Nm", "N m", 1.0),
          ("_rpm", "rpm", 1.0), ("_kg", "kg", 1.0), ("_mm", "mm", 1.0), ("_m", "mm", 1e3),
          ("_A", "A", 1.0), ("_C", DEG_C, 1.0), ("_V", "V", 1.0), ("_W", "W", 1.0), ("_T", "T", 1.0),
          ("_N", "N", 1.0))
_BETTER_HIGH = ("charge", "amp_hours", "efficiency", "battery_power", "emf")
_BETTER_LOW = ("torque", "drag", "cost", "temperature", "cut_in", "mass", "attraction", "loss")


def _percentile_split(name):
    """('charge_current_A', 'p10') for a build-spread column (robust.py), (name, '') otherwise."""
    for q in ("_p10", "_p50", "_p90"):
        if name.endswith(q):
            return name[: -len(q)], q[1:]
    return name, ""


def _unit_entry(name):
    name = _percentile_split(name)[0]
    for ending, unit, factor in _UNITS:
        if name.endswith(ending):
            return ending, unit, factor
    return "", "", 1.0


def column_unit(name: str, currency: str = "") -> str:
    """Unit a person reads for a front.csv column (lengths in mm, the scenario's currency for costs)."""
    name = _percentile_split(name)[0]
    if name.endswith("cost"):
        return currency
    if name == "efficiency":
        return "%"
    return _unit_entry(name)[1]


def column_factor(name: str) -> float:
    """Factor from the stored SI value to the unit of `column_unit`."""
    name = _percentile_split(name)[0]
    if name == "efficiency":
        return 100.0
    return 1.0 if name.endswith("cost") else _unit_entry(name)[2]


def column_name(name: str) -> str:
    """'coil temperature': a column's readable name without its unit."""
    return column_label(name).split(" [")[0]


def column_label(name: str, currency: str = "") -> str:
    """'coil temperature [°C]': a readable label with its unit, for any column."""
    base = name
    for prefix in ("best_",):
        base = base[len(prefix):] if base.startswith(prefix) else base
    base, q = _percentile_split(base)
    label = _LABELS.get(base)
    if label is None:
        ending = _unit_entry(base)[0]
        label = (base[: -len(ending)] if ending else base).replace("_", " ").strip()
    label += f" ({q} build)" if q else ""
    unit = column_unit(base, currency)
    return f"{label} [{unit}]" if unit else label


def column_sense(name: str) -> float:
    """+1 when more is better, -1 when less is better (objectives by their sense; others by name;
    +1 when the name says nothing)."""
    if name in OBJECTIVE_SENSE:
        return -OBJECTIVE_SENSE[name]
    if any(word in name for word in _BETTER_LOW):
        return -1.0
    return 1.0


def format_value(name: str, value, currency: str = "", digits: int = 3) -> str:
    """One value with its unit for a person; a coil temperature at the runaway cap reads 'runaway'."""
    value = float(value)
    if not np.isfinite(value):
        return "-"
    if "temperature" in name and value >= RUNAWAY_C:
        return "runaway"
    shown = value * column_factor(name)
    unit = column_unit(name, currency)
    text = f"{shown:.0f}" if abs(shown) >= 10 ** digits else f"{shown:.{digits}g}"
    return f"{text} {unit}" if unit else text  # SI: a space before every unit, °C and % included


def resolve_column(name: str, columns) -> str:
    """A front.csv column from a name the user typed (exact, an alias, or case-insensitive)."""
    if name in columns:
        return name
    if name.lower() in ALIASES:
        return ALIASES[name.lower()]
    lowered = {c.lower(): c for c in columns}
    if name.lower() in lowered:
        return lowered[name.lower()]
    raise KeyError(name)


def plural(count, word, many=None):
    """'1 coil', '4 paths': the word in the number's grammatical number."""
    return word if int(count) == 1 else (many or word + "s")


def temperature_text(value, runaway=False):
    """A coil temperature for a person: 'runaway' at the model's cap, never the cap itself."""
    return "runaway" if runaway or float(value) >= RUNAWAY_C else f"{float(value):.0f} {DEG_C}"


# --- the front from the run folder's data files ------------------------------------------------------
@dataclass
class FrontData:
    """A run's front from its data files: what the page, the pick and the build sheet read."""

    dir: Path
    meta: dict
    scenario: object
    catalogs: object
    evaluator: Evaluator
    ids: list
    columns: dict      # front.csv column -> numpy array (float for numbers, str otherwise)
    batch: DesignBatch

    @property
    def objectives(self):
        return tuple(self.evaluator.objectives)

    def front_designs(self):
        return list(self.ids), self.batch

    def numeric_columns(self):
        """front.csv's numeric columns other than the design keys, objectives first."""
        rest = [c for c, v in self.columns.items()
                if c not in self.objectives and c not in DESIGN_KEYS and v.dtype.kind == "f"]
        return [*self.objectives, *rest]

    def minimised(self):
        """(n, k) objectives in minimisation form (natural value times the objective's sign)."""
        if not self.ids:
            return np.empty((0, len(self.objectives)))
        return np.column_stack([self.columns[o] * self.evaluator.objective_sign[j]
                                for j, o in enumerate(self.objectives)])


def _read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    if not rows:
        raise InputError([Problem(str(path), None, None, "empty file: no header line")])
    header, body = rows[0], rows[1:]
    columns = {}
    for j, name in enumerate(header):
        cells = [r[j] if j < len(r) else "" for r in body]
        try:
            columns[name] = np.array([float(c) for c in cells], dtype=float)
        except ValueError:
            columns[name] = np.array(cells, dtype=object)
    return columns


def load_front(run_dir) -> FrontData:
    """The front of the run in `run_dir`: its designs exactly as front.npz holds them (through
    `search.folder.RunView`, which verifies the snapshot and never reads the checkpoint) and their
    values from front.csv, row for row."""
    view = RunView(run_dir)
    ids, batch = view.front_designs()
    path = view.dir / "front.csv"
    columns = _read_csv(path) if ids else {}
    if ids and [str(x) for x in columns.get("id", [])] != ids:
        raise InputError([Problem(str(path), None, "id", "its designs are not those of front.npz: "
                                  "damaged, or edited after the run")])
    return FrontData(view.dir, view.meta, view.scenario, view.catalogs, view.evaluator, ids, columns, batch)


# --- choosing among the front ---------------------------------------------------------------------
def _normalised(F):
    """Objectives (minimisation form) scaled to 0 (best on the front) .. 1 (worst)."""
    F = np.asarray(F, dtype=float)
    lo, hi = F.min(axis=0), F.max(axis=0)
    return (F - lo) / np.where(hi > lo, hi - lo, 1.0)


def representatives(F, n_show, knee_share=0.2):
    """A readable subset of a front and whom each shown design stands for.

    Method (all in objectives normalised to 0-1 over the front, minimisation form):

    1. every objective's two extremes (its best and its worst design on the front);
    2. the best trade-off region: the ``knee_share`` x n_show designs nearest (Euclidean) to the
       ideal point (every objective at its best), the compromise-programming distance of Zeleny,
       *Compromise programming*, in Multiple Criteria Decision Making, 1973;
    3. the rest by farthest-point sampling (each next design the one farthest from every design
       already chosen): the greedy k-center method of Gonzalez, *Clustering to minimize the maximum
       intercluster distance*, Theoretical Computer Science 38, 1985, which keeps every design
       within a factor two of the best possible covering radius of the front.

    Returns (shown: indices into F in order of choice, owner: for each row of F the position in
    `shown` of its nearest shown design). O(n_show x n x k), vectorised per chosen design.
    """
    F = np.asarray(F, dtype=float)
    n = len(F)
    if n == 0:
        return np.empty(0, np.int64), np.empty(0, np.int64)
    if n <= n_show:
        return np.arange(n), np.arange(n)
    Z = _normalised(F)
    first = list(dict.fromkeys([*np.argmin(Z, axis=0).tolist(), *np.argmax(Z, axis=0).tolist()]))
    knee = np.argsort(np.linalg.norm(Z, axis=1), kind="stable")[: max(1, int(knee_share * n_show))]
    chosen = list(dict.fromkeys(first + knee.tolist()))[:n_show]
    dist = np.full(n, np.inf)
    for i in chosen:
        dist = np.minimum(dist, np.sum((Z - Z[i]) ** 2, axis=1))
    while len(chosen) < n_show:
        i = int(np.argmax(dist))
        if dist[i] <= 0.0:
            break
        chosen.append(i)
        dist = np.minimum(dist, np.sum((Z - Z[i]) ** 2, axis=1))
    shown = np.array(chosen, dtype=np.int64)
    owner = np.empty(n, np.int64)
    for start in range(0, n, 4096):  # blocks of rows against every shown design: bounded memory
        block = Z[start:start + 4096]
        d = np.sum((block[:, None, :] - Z[shown][None, :, :]) ** 2, axis=2)
        owner[start:start + 4096] = np.argmin(d, axis=1)
    owner[shown] = np.arange(len(shown))
    return shown, owner


def topsis(F, weights=None):
    """Index of the best-compromise design by TOPSIS and every design's closeness (0-1).

    Hwang and Yoon, *Multiple Attribute Decision Making: Methods and Applications*, Springer 1981:
    vector-normalise each criterion, weight it (equal weights unless given), take the ideal and
    anti-ideal designs, and rank by closeness C = d- / (d+ + d-) to the ideal. F is in minimisation
    form (every criterion a cost); ties go to the first design.
    """
    F = np.asarray(F, dtype=float)
    w = np.ones(F.shape[1]) / F.shape[1] if weights is None else np.asarray(weights, float)
    norm = np.sqrt(np.sum(F ** 2, axis=0))
    V = F / np.where(norm > 0, norm, 1.0) * w
    best, worst = V.min(axis=0), V.max(axis=0)
    d_plus = np.sqrt(np.sum((V - best) ** 2, axis=1))
    d_minus = np.sqrt(np.sum((V - worst) ** 2, axis=1))
    total = d_plus + d_minus
    closeness = np.where(total > 0, d_minus / np.where(total > 0, total, 1.0), 1.0)
    return int(np.argmax(closeness)), closeness
