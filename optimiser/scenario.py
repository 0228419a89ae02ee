"""The boat, the space and the workshop practice a design must fit: one flat TOML file.

Keys carry their unit (``shaft_diameter_mm``, ``bilge_air_C``); ``load_scenario`` converts to SI.
Every key has a default with a reason (``FIELDS``); a missing key takes its default. The loader is
strict: unknown keys (with a did-you-mean), wrong types and out-of-range values are all reported at
once as an ``InputError``. The built-in demo is the fictional 10 m sloop "Kittiwake".
"""
from __future__ import annotations

import dataclasses
import math
import re
import tomllib
from dataclasses import dataclass, fields as dc_fields
from importlib import resources
from pathlib import Path

from .errors import InputError, Problem, did_you_mean
from .operating import fit_shaft_line_friction
from .design import COIL_SHAPES
from .physics.propeller import propeller_turbine

__all__ = ["Scenario", "load_scenario", "write_template", "render_template", "FIELDS",
           "DEMO_SCENARIO"]


@dataclass(frozen=True)
class Field:
    key: str            # TOML key (unit in the name)
    kind: type          # str, float, int, or tuple (a list in the file, of `item`)
    default: object     # in the key's unit
    lo: float | None
    hi: float | None
    reason: str         # why this default; written as a comment in the template
    group: str
    lo_open: bool = False   # lo itself not allowed
    scale: float = 1.0      # key unit -> SI
    item: type = float      # element type of a tuple field
    choices: tuple = ()     # allowed words of a tuple-of-str field

    @property
    def attr(self) -> str:
        return self.key[:-3] + "_m" if self.key.endswith("_mm") else self.key


_MM = 1e-3
OBJECTIVE_NAMES = ("charge_current_A", "drag_torque_Nm", "magnet_cost", "coil_temperature_C",
                   "amp_hours_per_day", "mean_added_drag_N", "charge_current_A_p10",
                   "drag_torque_Nm_p90", "coil_temperature_C_p90", "amp_hours_per_day_p10",
                   "mean_added_drag_N_p90")
"""Objectives a scenario may ask the search for; the first four are the default. The `_p10`/`_p90`
ones are the build-spread values (robust.py) and need `robust_samples` > 0."""
ROBUST_OBJECTIVES = OBJECTIVE_NAMES[6:]
FIELDS: tuple[Field, ...] = (
    Field("name", str, "Kittiwake", None, None, "label printed on the build sheet; demo boat: "
          "fictional 10 m sloop", "boat"),
    Field("currency", str, "EUR", None, None, "currency of the catalog prices", "boat"),
    Field("battery_nominal_V", float, 12.0, 6, 60, "12 V house bank (lead-acid/AGM)", "battery"),
    Field("battery_charging_V", float, 14.0, 6, 80, "lead-acid/AGM absorption voltage, about "
          "2.33 V per cell; designs are rated at this voltage", "battery"),
    Field("battery_resistance_ohm", float, 0.03, 0, 1, "battery internal plus round-trip cable "
          "resistance of a 12 V bank with a few metres of cable (estimate; measure yours)",
          "battery"),
    Field("diode_forward_drop_V", float, 0.8, 0, 2, "silicon bridge rectifier diode at a few "
          "amperes (Schottky about 0.5 V)", "battery"),
    Field("sailing_rpm", float, 180.0, 10, 3000, "free-wheeling shaft at about 6 knots (common "
          "practice: roughly 150-250 rpm at 5-7 knots)", "shaft"),
    Field("fastest_sailing_rpm", float, 240.0, 10, 6000, "fastest shaft speed with the "
          "generator connected while sailing (no propeller model; at least sailing_rpm): a "
          "displacement boat's hull speed, 1.34 sqrt(waterline in ft) kn, is about 7.1 kn for the "
          "demo's 8.5 m waterline, and gusts or surfing take it briefly to about 8 kn; a free-"
          "wheeling shaft's rpm grows in proportion to boat speed, so 180 rpm x 8 / 6 (common "
          "practice, from memory)", "shaft"),
    Field("max_rpm", float, 1500.0, 10, 6000, "highest shaft speed under engine: sets the open-"
          "circuit voltage and the strength checks", "shaft"),
    Field("shaft_diameter_mm", float, 25.0, 5, 200, "propeller shaft of a 10 m yacht", "shaft",
          scale=_MM),
    Field("bearing_drag_Nm", float, 0.25, 0, 20, "drag torque of the generator's own bearings and "
          "seal (estimate; measure yours)", "shaft"),
    Field("bilge_air_C", float, 35.0, -20, 80, "warm bilge next to the engine in summer",
          "space"),
    Field("max_rotor_diameter_mm", float, 320.0, 50, 1500, "room around the shaft inside the "
          "hull, minus a hand's width for the guard", "space", scale=_MM),
    Field("max_axial_length_mm", float, 110.0, 10, 1000, "free shaft length between coupling and "
          "stern gland, minus room for the guard", "space", scale=_MM),
    Field("hub_clearance_mm", float, 20.0, 0, 200, "radial ring around the shaft kept free of "
          "magnets for hub, key and bolts", "space", scale=_MM),
    Field("running_clearance_mm", float, 1.5, 0.2, 20, "gap each side between magnet faces and "
          "stator: disc run-out plus shaft movement", "space", scale=_MM),
    Field("coil_hole_clearance_mm", float, 1.0, 0, 20, "coil hole larger than the magnet on each "
          "side: winding former tolerance", "coils", scale=_MM),
    Field("min_coil_leg_mm", float, 4.0, 0.5, 100, "narrower coil legs are hard to wind and to "
          "cast", "coils", scale=_MM),
    Field("coil_fill_factor", float, 0.80, 0, 1, "N x strands x d_ins^2 over the winding window "
          "(square packing) reached by careful hand winding (common practice)", "coils",
          lo_open=True),
    Field("resin_skin_mm", float, 0.8, 0, 10, "resin over each coil face, holds and protects the "
          "wire", "coils", scale=_MM),
    Field("resin_conductivity_W_mK", float, 0.25, 0.05, 5, "unfilled casting resin about 0.2, "
          "filled resins up to about 1 (from memory)", "coils"),
    Field("surface_emissivity", float, 0.0, 0, 1, "radiation off: bare steel is about 0.1-0.3, "
          "paint and resin 0.8-0.9 (from memory); 0 is the cautious side", "coils"),
    Field("temperature_margin_K", float, 20.0, 0, 100, "kept below the wire's thermal class and "
          "the magnets' maximum temperature", "limits"),
    Field("back_iron_saturation_T", float, 1.6, 0.5, 2.2, "mild steel is well into saturation "
          "above about 1.6 T (common practice)", "limits"),
    Field("turns_min", int, 10, 1, 5000, "fewest turns per coil the search tries", "search"),
    Field("turns_max", int, 400, 1, 5000, "most turns per coil the search tries; more is a long "
          "evening per coil", "search"),
    Field("strands_min", int, 1, 1, 50, "fewest wires in hand", "search"),
    Field("strands_max", int, 8, 1, 50, "most wires in hand; more than 8 is hard to wind neatly",
          "search"),
    Field("ring_radius_min_mm", float, 60.0, 5, 750, "smallest mean radius of the magnet ring",
          "search", scale=_MM),
    Field("ring_radius_max_mm", float, 150.0, 5, 750, "largest mean radius of the magnet ring",
          "search", scale=_MM),
    Field("ring_radius_step_mm", float, 2.5, 0, 100, "ring radius grid: as close as marking out "
          "by hand with a template holds", "search", lo_open=True, scale=_MM),
    Field("wire_margin", float, 0.10, 0, 1, "extra wire bought over the computed length for "
          "leads, terminations and waste (fraction)", "search"),
    Field("objectives", tuple, OBJECTIVE_NAMES[:4], None, None, "what the search trades off; "
          "also amp_hours_per_day and mean_added_drag_N when a propeller is given", "search",
          item=str, choices=OBJECTIVE_NAMES),
    Field("coil_shapes", tuple, COIL_SHAPES, None, None, "coil shapes the search tries: "
          "rectangular, or keystone (a former whose long sides run parallel to the lines between "
          "neighbouring coils, so the legs fill the ring)", "search", item=str, choices=COIL_SHAPES),
    Field("spread_remanence_pct", float, 1.5, 0, 20, "magnet Br within +-1.5 % of its "
          "grade's typical value: sintered NdFeB grade tables give a Br window of about that "
          "width (e.g. N42 1.28-1.32 T; common practice, from memory)", "tolerances"),
    Field("spread_fill_factor_pct", float, 10.0, 0, 50, "hand-wound coil fill factor within "
          "+-10 % of coil_fill_factor (so the coil's thickness within about +-10 %): tension, "
          "crossovers and resin between the layers vary from coil to coil (common practice; never "
          "taken above a fill of 1)", "tolerances"),
    Field("spread_running_clearance_mm", float, 0.5, 0, 10, "running clearance within "
          "+-0.5 mm of running_clearance_mm: disc run-out, shim stack and bearing float of a "
          "workshop assembly (common practice, from memory); less than running_clearance_mm",
          "tolerances", scale=_MM),
    Field("spread_bilge_air_C", float, 5.0, 0, 40, "bilge air within +-5 K of bilge_air_C: "
          "day to day and season to season, engine recently run or not (estimate)", "tolerances"),
    Field("spread_resin_conductivity_pct", float, 20.0, 0, 90, "resin conductivity within "
          "+-20 %: mixing ratio, trapped air and filler settling change it, and it sets most of "
          "the coil's thermal resistance (conduction through the winding and the skin), so after "
          "the bilge air it moves the coil temperature most (estimate)", "tolerances"),
    Field("robust_samples", int, 0, 0, 1024, "0: the search evaluates the nominal build only (as "
          "fast as without tolerances). n > 0: every design also at n fixed low-discrepancy "
          "samples of the spreads above (n + 1 times the work; 16 gives usable p10/p90) for the "
          "_p10/_p90 values, objectives and robust_constraints. Reports always show the band "
          "(with 16 samples when this is 0)", "tolerances"),
    Field("robust_constraints", bool, False, None, None, "false: the coil and magnet limits "
          "hold for the nominal build; true: for the p90 build (needs robust_samples > 0)",
          "tolerances"),
    Field("propeller_diameter_mm", float, 0.0, 0, 3000, "0: no propeller model, the shaft turns "
          "at sailing_rpm; give the propeller to find the loaded rpm at each boat speed",
          "propeller", scale=_MM),
    Field("propeller_pitch_mm", float, 280.0, 10, 5000, "11 in pitch, a common 16 x 11 cruising "
          "propeller", "propeller", lo_open=True, scale=_MM),
    Field("propeller_blades", int, 3, 2, 7, "fixed three-blade propeller", "propeller"),
    Field("propeller_area_ratio", float, 0.40, 0.1, 1.5, "expanded blade-area ratio of a "
          "cruising propeller (0.35-0.5, common practice)", "propeller"),
    Field("wake_fraction", float, 0.10, 0, 0.6, "inflow slowed by the hull at the propeller "
          "(common practice for a sailing yacht, about 0.05-0.15)", "propeller"),
    Field("shaft_line_friction_Nm", float, 1.0, 0, 100, "stern gland, cutless bearing and "
          "gearbox in neutral (estimate; measure yours: the two measured_free_wheel keys fit it "
          "and replace this value)", "propeller"),
    Field("fastest_boat_speed_kn", float, 0.0, 0, 30, "0: the top profile speed plus 1 kn. "
          "Fastest boat speed with the generator connected; the shaft runs at its loaded "
          "operating point there. Gusts and surfing take a displacement boat briefly about 1 kn "
          "past the speed it sails for hours near hull speed (common practice, from memory)",
          "propeller"),
    Field("measured_free_wheel_rpm", float, 0.0, 0, 6000, "0: not measured. The shaft speed "
          "you measured sailing steadily in flat water, engine in neutral and no generator "
          "load on the shaft; with the boat speed below it fits shaft_line_friction_Nm",
          "propeller"),
    Field("measured_free_wheel_boat_speed_kn", float, 0.0, 0, 30, "0: not measured. Boat "
          "speed through the water (log, not GPS, in current) during that measurement (knots)",
          "propeller"),
    Field("water_density_kg_m3", float, 1025.0, 990, 1050, "sea water", "propeller"),
    Field("profile_boat_speed_kn", tuple, (4.0, 5.0, 6.0, 7.0), 0.5, 30, "boat speeds of the "
          "sailing profile (knots)", "propeller"),
    Field("profile_hours_per_day", tuple, (3.0, 5.0, 4.0, 2.0), 0, 24, "hours per day sailed at "
          "each profile speed", "propeller"),
)
_BY_KEY = {f.key: f for f in FIELDS}
_GROUP_TITLES = {"boat": "Boat", "battery": "Battery bank and rectifier", "shaft": "Shaft",
                 "space": "Space and clearances", "coils": "Coils and casting",
                 "limits": "Limits", "search": "What the search may choose",
                 "tolerances": "Build tolerances: what a workshop cannot hold exactly",
                 "propeller": "Propeller and sailing profile (optional)"}


@dataclass(frozen=True)
class Scenario:
    """All scenario values in SI (or the unit named in the attribute)."""

    name: str
    currency: str
    battery_nominal_V: float
    battery_charging_V: float
    battery_resistance_ohm: float
    diode_forward_drop_V: float
    sailing_rpm: float
    fastest_sailing_rpm: float
    max_rpm: float
    shaft_diameter_m: float
    bearing_drag_Nm: float
    bilge_air_C: float
    max_rotor_diameter_m: float
    max_axial_length_m: float
    hub_clearance_m: float
    running_clearance_m: float
    coil_hole_clearance_m: float
    min_coil_leg_m: float
    coil_fill_factor: float
    resin_skin_m: float
    resin_conductivity_W_mK: float
    surface_emissivity: float
    temperature_margin_K: float
    back_iron_saturation_T: float
    turns_min: int
    turns_max: int
    strands_min: int
    strands_max: int
    ring_radius_min_m: float
    ring_radius_max_m: float
    ring_radius_step_m: float
    wire_margin: float
    objectives: tuple
    spread_remanence_pct: float
    spread_fill_factor_pct: float
    spread_running_clearance_m: float
    spread_bilge_air_C: float
    spread_resin_conductivity_pct: float
    robust_samples: int
    robust_constraints: bool
    propeller_diameter_m: float
    propeller_pitch_m: float
    propeller_blades: int
    propeller_area_ratio: float
    wake_fraction: float
    shaft_line_friction_Nm: float
    fastest_boat_speed_kn: float
    measured_free_wheel_rpm: float
    measured_free_wheel_boat_speed_kn: float
    water_density_kg_m3: float
    profile_boat_speed_kn: tuple
    profile_hours_per_day: tuple
    source: str = "built-in demo"
    shaft_line_friction_fitted: bool = False  # True: shaft_line_friction_Nm fitted to the measurement
    coil_shapes: tuple = COIL_SHAPES  # (after the defaults: a scenario pickled before it has both)

    @property
    def has_propeller(self) -> bool:
        return self.propeller_diameter_m > 0   # file it came from, for run records

    def as_dict(self) -> dict:
        return {f.name: getattr(self, f.name) for f in dc_fields(self)}


DEMO_SCENARIO = "demo_scenario.toml"


def load_scenario(path=None) -> Scenario:
    """Read a scenario TOML file; ``None`` gives the built-in demo (Kittiwake)."""
    if path is None:
        text = resources.files("optimiser").joinpath("data", DEMO_SCENARIO).read_text("utf-8")
        return _parse(text, "built-in demo scenario", "built-in demo")
    path = Path(path)
    if not path.is_file():
        raise InputError([Problem(str(path), None, None, "file not found; `afpm scenario new "
                                  f"{path}` writes a commented template")])
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError([Problem(str(path), None, None, f"not UTF-8 text ({exc.reason})")])
    return _parse(text, str(path), str(path))


def _parse(text: str, file: str, source: str) -> Scenario:
    def problem(line, key, msg):
        return Problem(file, line, key, msg, row_label="line", column_label="key")

    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        found = re.search(r"at line (\d+)", str(exc))  # Python 3.11 has no exc.lineno
        line = int(found.group(1)) if found else None
        raise InputError([problem(line, None, f"not valid TOML: {exc}")])
    lines = _key_lines(text)
    problems, values = [], {}
    for key, value in data.items():
        f = _BY_KEY.get(key)
        if f is None:
            problems.append(problem(lines.get(key), key, "unknown key; " + did_you_mean(key,
                                    _BY_KEY)))
            continue
        msg = _check(f, value)
        if msg:
            problems.append(problem(lines.get(key), key, msg))
        else:
            values[key] = (float(value) if f.kind is float else
                           tuple(f.item(v) for v in value) if f.kind is tuple else value)
    merged = {f.key: values.get(f.key, f.default) for f in FIELDS}
    if not problems:
        for key, msg in _cross_checks(merged, lines):
            problems.append(problem(lines.get(key), key, msg))
    if problems:
        raise InputError(problems)
    if merged["fastest_boat_speed_kn"] == 0:
        merged["fastest_boat_speed_kn"] = max(merged["profile_boat_speed_kn"]) + 1.0
    scenario = Scenario(source=source, **{f.attr: merged[f.key] * f.scale if f.kind is float
                                          else tuple(merged[f.key]) if f.kind is tuple
                                          else merged[f.key] for f in FIELDS})
    if scenario.measured_free_wheel_rpm > 0:
        key = "measured_free_wheel_rpm"
        scenario, msg = _calibrated(scenario)
        if msg:
            raise InputError([problem(lines.get(key), key, msg)])
    return scenario


def _calibrated(sc: Scenario) -> tuple[Scenario, str | None]:
    """The scenario with shaft_line_friction_Nm fitted to the measured free-wheeling speed, or
    why no friction gives it (operating.fit_shaft_line_friction on the scenario's propeller)."""
    knots = sc.measured_free_wheel_boat_speed_kn
    speed = knots * 1852.0 / 3600.0

    def torque(rpm):
        return propeller_turbine(rpm, speed, sc.propeller_diameter_m, sc.propeller_pitch_m,
                                 sc.propeller_blades, sc.propeller_area_ratio, sc.wake_fraction,
                                 density_kg_m3=sc.water_density_kg_m3).torque_Nm

    fit = fit_shaft_line_friction(torque, sc.measured_free_wheel_rpm, rpm_max=sc.max_rpm * 2)
    f, n = float(fit.friction_Nm), sc.measured_free_wheel_rpm
    if bool(fit.ok):
        return dataclasses.replace(sc, shaft_line_friction_Nm=f, shaft_line_friction_fitted=True), None
    at = f"{n:g} rpm at {knots:g} kn"
    check = ("check the log speed and the rpm reading, then propeller_pitch_mm, "
             "propeller_diameter_mm, propeller_blades and wake_fraction")
    span = (f"started from rest, this propeller free-wheels at {knots:g} kn between "
            f"{float(fit.lowest_rpm):.0f} rpm (with the most friction it gets past) and "
            f"{float(fit.frictionless_rpm):.0f} rpm (none)")
    if f < 0:
        return sc, f"no shaft-line friction gives {at}: the model propeller is slower even " \
                   f"with none ({span}); {check}"
    start = float(fit.starting_torque_Nm)
    why = (f"the {f:.2f} N m that would hold it there is more than the {start:.2f} N m it gives "
           "on a held shaft, so it would never start" if f >= start else
           f"with the {f:.2f} N m that would hold it there it stops at {float(fit.rpm):.0f} rpm "
           "on the way up (its torque rises with speed below there)")
    return sc, f"no shaft-line friction gives {at} without stalling the propeller: {why} ({span}); {check}"


def _key_lines(text: str) -> dict[str, int]:
    out = {}
    for i, line in enumerate(text.splitlines(), start=1):
        m = re.match(r'\s*["\']?([A-Za-z0-9_\-]+)["\']?\s*=', line)
        if m:
            out.setdefault(m.group(1), i)
    return out


def _check(f: Field, value) -> str | None:
    """What is wrong with one value, or None."""
    if f.kind is tuple:
        if not isinstance(value, list) or not value:
            return f"must be a non-empty list in brackets, e.g. {_value_text(f, f.default)} (got {value!r})"
        if f.item is str:
            bad = [v for v in value if v not in f.choices]
            if bad:
                return f"unknown {bad[0]!r}; " + did_you_mean(str(bad[0]), f.choices)
            return "lists a name twice" if len(set(value)) != len(value) else None
        for v in value:
            msg = _check(dataclasses.replace(f, kind=float), v)
            if msg:
                return "each entry " + msg
        return None
    if f.kind is str:
        return None if isinstance(value, str) and value.strip() else \
            f"must be a non-empty text in quotes (got {value!r})"
    if f.kind is bool:
        return None if isinstance(value, bool) else f"must be true or false (got {value!r})"
    ok = isinstance(value, int) if f.kind is int else isinstance(value, (int, float))
    if isinstance(value, bool) or not ok:
        what = "a whole number" if f.kind is int else "a number"
        return f"must be {what} (got {value!r})"
    if not math.isfinite(value):  # TOML allows nan and inf; no key of a boat means either
        return f"must be a finite number (got {value!r})"
    if f.lo is None or f.hi is None:
        return None
    low_bad = value <= f.lo if f.lo_open else value < f.lo
    if low_bad or value > f.hi:
        lo = f"> {f.lo:g}" if f.lo_open else f">= {f.lo:g}"
        return f"must be {lo} and <= {f.hi:g} (got {value:g})"
    return None


def _cross_checks(v: dict, in_file) -> list[tuple[str, str]]:
    """Checks between keys; each is reported on a key the user wrote, if any."""
    out = []

    def order(lo_key, hi_key, strict=False, lo=None, hi=None, lo_name=None, hi_name=None):
        lo = v[lo_key] if lo is None else lo
        hi = v[hi_key] if hi is None else hi
        lo_name, hi_name = lo_name or lo_key, hi_name or hi_key
        if (lo < hi) if strict else (lo <= hi):
            return
        if hi_key in in_file or lo_key not in in_file:
            out.append((hi_key, f"must be {'>' if strict else '>='} {lo_name} ({lo:g}) "
                                f"(got {hi:g})"))
        elif lo_name != lo_key:  # a derived quantity: name it
            out.append((lo_key, f"{lo_name} ({lo:g}) must be {'<' if strict else '<='} "
                                f"{hi_name} ({hi:g})"))
        else:
            out.append((lo_key, f"must be {'<' if strict else '<='} {hi_name} ({hi:g}) "
                                f"(got {lo:g})"))

    order("battery_nominal_V", "battery_charging_V")
    before = len(out)
    order("sailing_rpm", "max_rpm", strict=True)
    if len(out) == before:  # one problem per wrong speed
        order("sailing_rpm", "fastest_sailing_rpm")
    if len(out) == before:
        order("fastest_sailing_rpm", "max_rpm", strict=True)
    if v["fastest_boat_speed_kn"] > 0:
        order("fastest_boat_speed_kn", "fastest_boat_speed_kn", lo=max(v["profile_boat_speed_kn"]),
              lo_name="the top of profile_boat_speed_kn")
    order("turns_min", "turns_max")
    order("strands_min", "strands_max")
    order("ring_radius_min_mm", "ring_radius_max_mm")
    span = v["ring_radius_max_mm"] - v["ring_radius_min_mm"]
    if span > 0:
        order("ring_radius_step_mm", "ring_radius_max_mm", hi=span,
              hi_name="ring_radius_max_mm - ring_radius_min_mm", lo_name="ring_radius_step_mm")
    order("ring_radius_max_mm", "max_rotor_diameter_mm", strict=True,
          hi=v["max_rotor_diameter_mm"] / 2, hi_name="max_rotor_diameter_mm / 2")
    hub = v["shaft_diameter_mm"] / 2 + v["hub_clearance_mm"]
    order("hub_clearance_mm", "ring_radius_max_mm", strict=True, lo=hub,
          lo_name="shaft radius + hub_clearance_mm")
    if len(v["profile_boat_speed_kn"]) != len(v["profile_hours_per_day"]):
        key = "profile_hours_per_day" if "profile_hours_per_day" in in_file else "profile_boat_speed_kn"
        out.append((key, f"profile_boat_speed_kn has {len(v['profile_boat_speed_kn'])} speeds but "
                         f"profile_hours_per_day {len(v['profile_hours_per_day'])} entries: give "
                         "one number of hours per speed"))
    hours = v["profile_hours_per_day"]
    if not any(h > 0 for h in hours):
        out.append(("profile_hours_per_day", "gives no hours at all: at least one speed needs hours "
                                             "> 0 (the profile's means are weighted by them)"))
    elif sum(hours) > 24:
        out.append(("profile_hours_per_day", f"adds up to {sum(hours):g} h, more than the 24 h of a day"))
    measured = ("measured_free_wheel_rpm", "measured_free_wheel_boat_speed_kn")
    given = [k for k in measured if v[k] > 0]
    if given and len(given) < 2:
        other = measured[1 - measured.index(given[0])]
        out.append((given[0], f"needs {other} as well (the boat speed of the measurement)"
                    if other.endswith("_kn") else f"needs {other} as well (the rpm measured)"))
    elif given and v["propeller_diameter_mm"] <= 0:
        out.append((given[0], "fits shaft_line_friction_Nm with the propeller model: set "
                              "propeller_diameter_mm (and its pitch and blades)"))
    needs = [o for o in v["objectives"] if o.startswith(("amp_hours_per_day", "mean_added_drag_N"))]
    if needs and v["propeller_diameter_mm"] <= 0:
        out.append(("objectives", f"{needs[0]} needs a propeller: set propeller_diameter_mm"))
    robust = [o for o in v["objectives"] if o in ROBUST_OBJECTIVES]
    if robust and v["robust_samples"] <= 0:
        out.append(("objectives", f"{robust[0]} is a build-spread value: set robust_samples "
                                  "(16 is a good start)"))
    elif v["robust_constraints"] and v["robust_samples"] <= 0:
        out.append(("robust_constraints", "needs robust_samples > 0 (16 is a good start)"))
    if v["spread_running_clearance_mm"] > 0:
        order("spread_running_clearance_mm", "running_clearance_mm", strict=True)
    if len(v["objectives"]) < 2:
        out.append(("objectives", "a Pareto search needs at least two objectives"))
    fixed = 2 * v["running_clearance_mm"] + 2 * v["resin_skin_mm"]
    order("running_clearance_mm", "max_axial_length_mm", strict=True, lo=fixed,
          lo_name="2 x (running_clearance_mm + resin_skin_mm)")
    return out


def render_template() -> str:
    """The commented scenario template (also the built-in demo file) generated from FIELDS."""
    out = ["# afpm scenario: the boat, the space and the workshop practice a design must fit.",
           "# Units are in the key names (mm, V, ohm, C, K, N m). A deleted line takes the default",
           "# shown here; the comment above each value says why it is the default.",
           "# Demo values: \"Kittiwake\", a fictional 10 m sloop with a 12 V bank.",
           "# Safety: guard the rotating shaft; strong magnets pinch and shatter; charge through a",
           "# regulator with over-current protection; follow local codes, the applicable marine",
           "# electrical standards and a qualified marine electrician."]
    group = None
    for f in FIELDS:
        if f.group != group:
            group = f.group
            out += ["", f"# --- {_GROUP_TITLES[group]} ---"]
        out += [f"# {f.reason}", f"{f.key} = {_value_text(f, f.default)}"]
    return "\n".join(out) + "\n"


def _value_text(f: Field, value) -> str:
    """A value as TOML text, in the key's unit."""
    if f.kind is tuple:
        return "[" + ", ".join(f'"{v}"' if f.item is str else _float_text(v) for v in value) + "]"
    if f.kind is str:
        return f'"{value}"'
    if f.kind is bool:
        return "true" if value else "false"
    return f"{value:g}" if f.kind is int else _float_text(value)


def _float_text(x: float) -> str:
    text = f"{x:g}"
    return text if any(c in text for c in ".e") else text + ".0"


def write_template(path) -> Path:
    """Write the commented template to ``path``; refuse to overwrite an existing file."""
    path = Path(path)
    if path.exists():
        raise InputError([Problem(str(path), None, None, "already exists; choose a new file "
                                  "name or move the old file away (it is never overwritten)")])
    if not path.parent.is_dir():
        raise InputError([Problem(str(path), None, None, f"folder {path.parent} does not exist")])
    path.write_text(render_template(), encoding="utf-8")
    return path


if __name__ == "__main__":  # regenerate optimiser/data/demo_scenario.toml
    print(render_template(), end="")
