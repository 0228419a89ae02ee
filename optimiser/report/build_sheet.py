"""The build sheet of one front design: parts, magnet layout, coil, wiring, performance, cautions.

`build_sheet` collects the facts once into a `Sheet` (sections of paragraphs, tables, lists and
drawings, all plain text); `sheet_html` and `sheet_markdown` only render it, escaping every string.
`pick` chooses a design from the front by id or by a rule (the most of one objective within limits).
"""

from __future__ import annotations

import datetime as dt
import math
import shlex
from dataclasses import dataclass, field, replace
from html import escape
from pathlib import Path

import numpy as np

from ..design import design_toml
from ..evaluate import RUNAWAY_C, STATOR_RIM_M, Evaluator, Settings
from ..physics.winding import winding_table
from ..report.evaluation import ROBUST_HEADERS, design_report, former_text, robust_note, robust_rows, rpm_table
from ..safe_io import RunLock, write_atomic
from . import drawing
from .front_data import (ALIASES, DEG_C, column_factor, column_label, column_name, column_sense, format_value, load_front,
                         plural, resolve_column, temperature_text, topsis)

__all__ = ["RULES", "NoMatch", "Choice", "pick", "parse_limit", "Sheet", "build_sheet", "sheet_html", "sheet_markdown",
           "write_build_sheet", "CAUTIONS"]

RULES = {"charge": ("charge_current_A", +1, "A"), "torque": ("drag_torque_Nm", -1, "N m"),
         "cost": ("magnet_cost", -1, ""), "temperature": ("coil_temperature_C", -1, DEG_C)}
"""--most WORD -> (value, +1 most / -1 least, unit): the four short words, kept as aliases."""

CAUTIONS = [
    "Rotating parts: fit a fixed guard over the rotors and the shaft coupling before the shaft turns; "
    "keep hands, clothing and lines clear; never work on it with the shaft free to turn.",
    "Magnets: NdFeB blocks snap together and onto steel with force enough to crush fingers and to "
    "shatter into sharp fragments (wear eye protection); keep them away from pacemakers and other "
    "medical implants, from electronics and compasses; store and carry the blocks apart with spacers; "
    "use non-magnetic (brass, aluminium, plastic) tools near them.",
    "Charging: always charge through a regulator or charge controller suited to the battery, with "
    "over-current protection (a fuse or breaker as close to the battery positive as practical). Never "
    "connect the rectifier straight to the battery without one.",
    "Motoring: the open-circuit voltage rises with rpm; disconnect the generator (or short it through a "
    "brake resistor rated for the power) before motoring, and enclose and insulate the wiring as for "
    "the highest voltage it can reach.",
    "This sheet is a design aid, not an approval: follow local codes, the applicable marine electrical "
    "standards, and have the installation checked by a qualified marine electrician.",
]


class NoMatch(Exception):
    """No front design meets the picking rule (the message says why and what the front holds)."""


# --- picking -----------------------------------------------------------------------------------
@dataclass
class Choice:
    """What `pick` chose and why: the index into the front, its id, the rule in words, the limits."""

    index: int
    design_id: str
    rule: str
    limits: list = field(default_factory=list)   # (column, "min" | "max", bound)
    order: list = field(default_factory=list)    # front indices meeting the limits, best first


def _spans(front, names):
    cur = front.scenario.currency
    return "; ".join(f"{column_name(n)} {format_value(n, front.columns[n].min(), cur)} to "
                     f"{format_value(n, front.columns[n].max(), cur)}" for n in names)


def parse_limit(text, columns, option):
    """'NAME=VALUE' -> (front.csv column, value); NoMatch naming the option and the columns."""
    name, sep, value = str(text).partition("=")
    try:
        if not sep:
            raise ValueError
        bound = float(value)
        if not math.isfinite(bound):
            raise ValueError
    except ValueError:
        raise NoMatch(f"{option} {text!r}: write NAME=VALUE, e.g. {option} coil_temperature_C=120") from None
    return _column(name.strip(), columns, option), bound


def _column(name, columns, option):
    numeric = [c for c, v in columns.items() if v.dtype.kind == "f"]
    try:
        found = resolve_column(name, numeric)
    except KeyError:
        raise NoMatch(f"{option} {name!r}: not a column of front.csv; use one of "
                      f"{', '.join([*ALIASES, *numeric])}") from None
    if found not in numeric:
        raise NoMatch(f"{option} {name!r}: not a numeric column of this run's front.csv")
    return found


def pick(front, design_id=None, most=None, max_torque=None, max_magnet_cost=None, max_coil_temp=None,
         min_charge=None, at_least=(), at_most=(), balanced=False) -> Choice:
    """Choose a front design by id or by a rule, from front.csv's values.

    Rules: within the limits (the four named caps and any `at_least`/`at_most` "NAME=VALUE" on a
    front.csv column), either the best-compromise design of the scenario's objectives (`balanced`,
    TOPSIS: `front_data.topsis`) or the best of `most` (any objective or value column, or one of
    the short words charge, torque, cost, temperature): the most where more is better, the least
    where less is (`front_data.column_sense`). Without a rule: the best of the scenario's first
    objective. Ties go to the design found first. Raises NoMatch.
    """
    ids, cols = front.ids, front.columns
    if not ids:
        raise NoMatch(f"the run in {front.dir} has no feasible design on its front yet")
    if design_id is not None:
        wanted = str(design_id).strip().upper()
        wanted = "D" + wanted if wanted.isdigit() else wanted
        if wanted not in ids:
            raise NoMatch(f"no design {design_id!r} on the front of {front.dir}; its ids run "
                          f"{', '.join(ids[:8])}{' ...' if len(ids) > 8 else ''} (see front.csv)")
        return Choice(ids.index(wanted), wanted, f"design {wanted} by id")
    if balanced and most:
        raise NoMatch("give --most or --balanced, not both")
    limits = [(n, "max", b) for n, b in (("drag_torque_Nm", max_torque), ("magnet_cost", max_magnet_cost),
                                          ("coil_temperature_C", max_coil_temp)) if b is not None]
    limits += [("charge_current_A", "min", min_charge)] if min_charge is not None else []
    limits += [(n, "min", b) for n, b in (parse_limit(t, cols, "--at-least") for t in at_least)]
    limits += [(n, "max", b) for n, b in (parse_limit(t, cols, "--at-most") for t in at_most)]
    cur = front.scenario.currency
    keep = np.ones(len(ids), bool)
    for name, kind, bound in limits:
        keep &= cols[name] >= bound if kind == "min" else cols[name] <= bound
    words = [f"{column_name(name)} {'>=' if kind == 'min' else '<='} {format_value(name, bound, cur)}"
             for name, kind, bound in limits]
    if not keep.any():
        names = list(dict.fromkeys([*front.objectives, *(n for n, _, _ in limits)]))
        raise NoMatch(f"no design on the front has {' and '.join(words)}. The front spans: "
                      f"{_spans(front, names)}")
    if balanced:
        F = front.minimised()
        _, closeness = topsis(F[keep])
        score = np.full(len(ids), -np.inf)
        score[keep] = closeness
        rule = ("the best compromise of " + ", ".join(front.objectives) +
                " (TOPSIS, Hwang and Yoon 1981, equal weights)")
    else:
        name = _column(most, cols, "--most") if most else front.objectives[0]
        sense = column_sense(name)
        score = np.where(keep, sense * cols[name], -np.inf)
        rule = f"the {'most' if sense > 0 else 'least'} {column_name(name)} ({name})"
    if words:
        rule += " with " + " and ".join(words)
    order = [int(i) for i in np.argsort(-score, kind="stable") if keep[i]]
    return Choice(order[0], ids[order[0]], rule, limits, order)


# --- the sheet as data ---------------------------------------------------------------------------
@dataclass
class Table:
    header: list
    rows: list
    align: str = ""       # one letter per column, "l" or "r"
    key: str = ""         # a stable id (html id, test hook)
    foot: list = field(default_factory=list)


@dataclass
class Section:
    title: str
    blocks: list          # ("p", text) | ("table", Table) | ("list", [text]) | ("svg", name, svg)
                          # | ("code", text) | ("warn", [text])


@dataclass
class Sheet:
    design_id: str
    title: str
    lines: list
    sections: list


def _money(x):
    return f"{x:.2f}"


def _mm(x, digits=1):
    return f"{x * 1e3:.{digits}f} mm"


def _size(x):
    """A stock size in mm to four significant figures: 50.8 (2 in) stays 50.8, 20 stays 20."""
    return f"{x * 1e3:.4g}"


def _is_demo(catalogs, name):
    path = catalogs.files.get(name)
    try:
        return path is not None and "DEMO DATA" in Path(path).read_text(encoding="utf-8-sig")[:2000]
    except OSError:
        return False


def _magnet_gaps(ring_radius, length, width, poles):
    """Clear gap between neighbouring magnets at the inner edge (corner to corner) and at mid-length [m]."""
    a = 2.0 * math.pi / poles

    def gap(r):
        ax, ay = r, width / 2.0
        bx, by = r * math.cos(a) + (width / 2.0) * math.sin(a), r * math.sin(a) - (width / 2.0) * math.cos(a)
        d = math.hypot(bx - ax, by - ay)
        return d if by > ay else -d  # overlapping corners give a negative gap

    return gap(ring_radius - length / 2.0), gap(ring_radius)


def _parts(rep, cat, sc, row):
    d, w, m = rep["design"], rep["winding"], rep["materials"]
    cur = sc.currency
    mag = cat.magnets.iloc[int(row.magnet[0])]
    disc = cat.discs.iloc[int(row.disc[0])]
    wire = cat.wires.iloc[int(row.wire[0])]
    n_mag = 2 * w["poles"]
    buy_kg = m["copper_mass_kg"] * (1.0 + sc.wire_margin)
    lines = [
        ["Magnets", f"{d['magnet']} ({mag['grade']}, {_size(mag['length_m'])} x {_size(mag['width_m'])} "
                    f"x {_size(mag['thickness_m'])} mm): 2 rotors x {w['poles']} poles", f"{n_mag}",
         _money(float(mag["price_each"])), _money(n_mag * float(mag["price_each"]))],
        ["Magnet wire", f"{d['wire']} (bare {wire['bare_diameter_m'] * 1e3:.3f} mm): {m['wire_length_m']:.0f} m, "
                        f"{m['copper_mass_kg']:.2f} kg computed, plus the scenario's "
                        f"{100 * sc.wire_margin:.0f} % wire margin", f"{buy_kg:.2f} kg",
         f"{float(wire['price_per_kg']):.2f}/kg", _money(m["wire_cost"])],
        ["Rotor discs", f"{d['disc']} (mild steel, {_mm(disc['diameter_m'], 0)} x {_mm(disc['thickness_m'], 0)})",
         "2", _money(float(disc["price_each"])), _money(2 * float(disc["price_each"]))],
    ]
    total = sum(float(x[4]) for x in lines)
    lines.append(["Not priced", "bearings and housing, casting resin, three-phase bridge rectifier "
                  "(diodes), regulator or charge controller, fuse or breaker and cable, fasteners, "
                  "hub and spacers", "", "", "not priced"])
    return Table(["Part", "Description", "Quantity", f"Unit price [{cur}]", f"Line total [{cur}]"],
                 lines, "llrrr", key="parts", foot=["Total of priced lines", "", "", "", _money(total)])


def _wiring(rep, winding):
    w = rep["winding"]
    a = w["parallel_paths"]
    rows = winding_table(winding, a)
    table = Table(["Coil", "Phase", "Polarity", "Connect", "Path", "Electrical angle [deg]"],
                  [[str(r["coil"]), r["phase"], "+" if r["polarity"] > 0 else "-",
                    "start in, finish out" if r["polarity"] > 0 else "reversed: finish in, start out",
                    str(r["path"]), f"{r['angle_elec_deg']:.1f}"] for r in rows], "rllllr", key="wiring")
    chains = []
    for letter in "ABC":
        for path in range(1, a + 1):
            coils = [r for r in rows if r["phase"] == letter and r["path"] == path]
            steps = " \N{RIGHTWARDS ARROW} ".join(f"coil {r['coil']} ({'S-F' if r['polarity'] > 0 else 'F-S'})" for r in coils)
            chains.append(f"Phase {letter}, path {path}: terminal {letter}1 \N{RIGHTWARDS ARROW} {steps} "
                          f"\N{RIGHTWARDS ARROW} end {letter}2")
    if w["connection"] == "star":
        join = ("Star: join the three ends A2, B2 and C2 at one insulated star point (connect it to "
                "nothing else); A1, B1 and C1 go to the three AC inputs of the bridge rectifier.")
    else:
        join = ("Delta: join A2 to B1, B2 to C1 and C2 to A1; the three junctions go to the three AC "
                "inputs of the bridge rectifier.")
    paths = (f"The {a} paths of each phase carry identical EMF: join the paths' terminals of each "
             "phase together (every A1 to every A1, and so on) and their ends likewise, before the star "
             "or delta." if a > 1 else
             "One path per phase: every coil of a phase is in series.")
    summary = [f"{w['coils']} {plural(w['coils'], 'coil')}, {w['coils'] // 3} per phase; {w['series_coils_per_path']} coils in "
               f"series per path; {a} parallel {plural(a, 'path')} per phase; {w['connection']} connection.",
               "S-F: the coil's start lead towards the phase terminal; F-S (a reversed coil): its finish "
               "lead towards the terminal. Every coil is wound the same way, start lead on the same side.",
               paths, join,
               "Rectifier to battery: the bridge's DC + and DC - go to the regulator or charge controller's "
               "generator input; its output goes to the battery through a fuse or breaker close to the "
               "battery positive. Never straight from the rectifier to the battery."]
    return table, chains, summary


def build_sheet(run, design_id, choice: Choice | None = None) -> Sheet:
    """Collect every fact of the build sheet of front design `design_id` of `run` (a FrontData);
    `choice` (from `pick`) lets the 3-D re-check say when it breaks one of the user's limits."""
    ids, batch = run.front_designs()
    i = ids.index(design_id)
    one = batch.take([i])
    evaluator = run.evaluator
    sc, cat = run.scenario, run.catalogs
    rows = rpm_table(evaluator, one)
    rep = design_report(evaluator, one, rows)
    combo = int(evaluator.windings.index(one.layout, one.multiple)[0])
    winding = evaluator.windings.windings[combo]
    d, g, w, s = rep["design"], rep["geometry"], rep["winding"], rep["at_sailing"]
    disc = cat.discs.iloc[int(one.disc[0])]
    wire = cat.wires.iloc[int(one.wire[0])]

    sections = []
    parts = _parts(rep, cat, sc, one)
    demo = [n for n in ("magnets", "wires", "discs") if _is_demo(cat, n)]
    price_note = (f"Prices in {sc.currency} from the run's catalog snapshot ({run.dir / 'catalogs'})."
                  + (f" The {', '.join(demo)} catalogs are marked DEMO DATA: their prices are invented "
                     "demo values from a fictional supplier; ask your supplier for real prices." if demo else
                     " The catalogs shipped with afpm hold demo prices: check that these are yours."))
    sections.append(Section("Parts list", [("table", parts), ("p", price_note)]))

    poles = w["poles"]
    gap_in, gap_mid = _magnet_gaps(g["ring_radius_m"], g["magnet_length_m"], g["magnet_width_m"], poles)
    order = " ".join("NS"[k % 2] for k in range(min(poles, 12))) + (" ..." if poles > 12 else "")
    layout = Table(["Quantity", "Value"], [
        ["magnets per rotor (poles)", str(poles)],
        ["ring radius (magnet centres)", _mm(g["ring_radius_m"])],
        ["magnet inner / outer edge radius", f"{_mm(g['ring_radius_m'] - g['magnet_length_m'] / 2)} / "
                                             f"{_mm(g['ring_radius_m'] + g['magnet_length_m'] / 2)}"],
        ["angular pitch", f"{360.0 / poles:.3f} deg"],
        ["clear gap at the inner edge (corner to corner)", _mm(gap_in)],
        ["clear gap at the ring radius", _mm(gap_mid)],
        ["polarity order round each rotor", order],
        ["rotor disc", f"{d['disc']}: {_mm(disc['diameter_m'], 0)} diameter, {_mm(disc['thickness_m'], 0)} thick"],
    ], "lr", key="layout")
    rotor = drawing.rotor_svg(disc["diameter_m"] / 2, sc.shaft_diameter_m / 2, g["ring_radius_m"],
                              g["magnet_length_m"], g["magnet_width_m"], poles)
    sections.append(Section("Magnet layout", [
        ("table", layout),
        ("p", "Magnet 1 at 3 o'clock, numbers counter-clockwise, seen from the magnet side. On the second "
              "rotor each magnet faces one of the opposite pole across the gap (a N face towards a S "
              "face), so the rotors attract and the flux crosses the stator."),
        ("svg", "rotor", rotor)]))

    letters = [r["phase"] for r in winding_table(winding, w["parallel_paths"])]
    stator = drawing.stator_svg(g["coil_inner_radius_m"], g["coil_outer_radius_m"], STATOR_RIM_M,
                                sc.shaft_diameter_m / 2, g["ring_radius_m"], g["coil_hole_radial_m"],
                                g["coil_hole_tangential_m"], g["coil_leg_width_m"], letters,
                                list(winding.coil_polarity), hole_outer_tangential_m=g["former_outer_width_m"])
    coil = Table(["Quantity", "Value"], [
        ["coils", f"{w['coils']} (layout {d['layout']} x{d['multiple']})"],
        ["coil shape and former", former_text(g)],
        ["hole (radial x tangential)", f"{g['coil_hole_radial_m'] * 1e3:.1f} x {g['coil_hole_tangential_m'] * 1e3:.1f} mm"
                                       + (f" (inner end; {g['former_outer_width_m'] * 1e3:.1f} mm at the outer end)"
                                          if g["coil_shape"] == "keystone" else "")],
        ["leg width", _mm(g["coil_leg_width_m"])],
        ["coil thickness (axial)", _mm(g["coil_thickness_m"], 2)],
        ["turns per coil", str(d["turns"])],
        ["strands in hand", str(d["strands"])],
        ["wire", f"{d['wire']} ({wire['standard']}), bare {wire['bare_diameter_m'] * 1e3:.3f} mm, "
                 f"overall {wire['overall_diameter_m'] * 1e3:.3f} mm, class {wire['thermal_class_C']:.0f} {DEG_C}"],
        ["mean turn length", _mm(g["mean_turn_length_m"], 0)],
        ["wire per coil (all strands)", f"{g['mean_turn_length_m'] * d['turns'] * d['strands']:.1f} m"],
        ["coil radial extent", f"{_mm(g['coil_inner_radius_m'])} to {_mm(g['coil_outer_radius_m'])}"],
        ["stator thickness (coil + resin skins)", _mm(g["stator_thickness_m"], 2)],
        ["magnet face gap", _mm(g["face_gap_m"], 2)],
        ["running clearance each side", _mm(sc.running_clearance_m, 2)],
        ["resin skin each face", _mm(sc.resin_skin_m, 2)],
        ["overall axial length (discs, magnets, gap)", _mm(g["axial_length_m"])],
    ], "lr", key="coil")
    sections.append(Section("Coil and stator", [
        ("table", coil),
        ("p", "Coil 1 at 3 o'clock, numbers counter-clockwise, seen from the rotor. Label: phase and "
              "polarity. Filled dot: start lead; open dot: finish lead."),
        ("svg", "stator", stator)]))

    table, chains, summary = _wiring(rep, winding)
    sections.append(Section("Wiring", [("table", table), ("list", chains), ("list", summary)]))

    perf = Table(["rpm", "open-circuit line [V rms]", "charge [A]", "battery [W]", "drag torque [N m]",
                  "efficiency [%]", f"coil [{DEG_C}]"],
                 [[f"{r['rpm']:.0f}", f"{r['open_circuit_line_rms_V']:.1f}", f"{r['charge_current_A']:.2f}",
                   f"{r['battery_power_W']:.1f}", f"{r['drag_torque_Nm']:.3f}", f"{100 * r['efficiency']:.0f}",
                   "runaway" if r["thermal_runaway"] else f"{r['coil_temperature_C']:.0f}"] for r in rows],
                 "rrrrrrr", key="performance")
    plot = drawing.performance_svg(rows, sc.sailing_rpm, rep["cut_in_rpm"])
    sections.append(Section("Performance against shaft speed", [
        ("p", f"Cut-in (charging starts): {rep['cut_in_rpm']:.0f} rpm. Battery at {sc.battery_charging_V:g} V, "
              f"bilge air {sc.bilge_air_C:g} {DEG_C}, {sc.diode_forward_drop_V:g} V per diode."),
        ("table", perf), ("svg", "performance", plot)]))

    if "sailing_profile" in rep:
        boat = Table(["boat speed [kn]", "hours/day", "shaft [rpm]", "free-wheeling [rpm]", "charge [A]",
                      "drag torque [N m]", "drag on boat [N]", "added drag [N]", f"coil [{DEG_C}]"],
                     [[f"{r['boat_speed_kn']:g}", f"{r['hours_per_day']:g}",
                       "stalled" if r["stalled"] else f"{r['rpm']:.0f}", f"{r['free_wheel_rpm']:.0f}",
                       f"{r['charge_current_A']:.2f}", f"{r['drag_torque_Nm']:.2f}", f"{r['drag_force_N']:.0f}",
                       f"{r['added_drag_N']:.0f}",
                       "runaway" if r.get("thermal_runaway") else f"{r['coil_temperature_C']:.0f}"]
                      for r in rep["sailing_profile"]], "rrrrrrrrr", key="profile")
        sections.append(Section("Over the sailing profile", [
            ("p", f"With the {sc.propeller_diameter_m * 1e3:.0f} mm propeller turning the shaft as a water "
                  f"turbine: {rep['amp_hours_per_day']:.1f} A h per day, mean added drag "
                  f"{rep['mean_added_drag_N']:.0f} N. The shaft settles where the generator's drag torque "
                  "meets the torque the propeller takes from the water."),
            ("table", boat)]))

    sections.append(Section("What to expect from your build", [
        ("p", "No workshop builds exactly what is drawn. " + robust_note(rep)),
        ("table", Table(list(ROBUST_HEADERS), robust_rows(rep, sc.currency), "lrrrr", key="build_band"))]))

    recheck, ref = _recheck(run, one, s, rep)
    cap_notes = _recheck_limits(run, ref, choice) if choice is not None else []
    sections.append(Section("Re-checked with the 3-D reference field model", [
        ("table", recheck), *[("warn", [note]) for note in cap_notes],
        ("p", "The search ranks designs with the fast field model; the reference model integrates the 3-D "
              "field of every magnet block and its images in the discs. Differences of a few per cent are "
              "expected; a large one is a reason to measure the EMF of a test coil before winding them all.")]))

    warnings = list(rep["problems"]) + list(rep["warnings"])
    sections.append(Section("Warnings for this design", [("warn", warnings)]))
    sections.append(Section("Cautions", [("list", CAUTIONS)]))
    sections.append(Section("Design file", [
        ("p", "Save as a .toml file to re-evaluate it with afpm evaluate --design FILE "
              f"--catalogs {run.dir / 'catalogs'} --scenario {run.dir / 'scenario.toml'}"),
        ("code", design_file_text(run, design_id, d))]))

    fastest = (f"connected up to {sc.fastest_boat_speed_kn:g} kn" if sc.has_propeller
               else f"connected up to {sc.fastest_sailing_rpm:g} rpm")
    head = [f"Boat: {sc.name}; battery {sc.battery_nominal_V:g} V; sailing at {sc.sailing_rpm:g} rpm "
            f"({fastest}), up to {sc.max_rpm:g} rpm under engine.",
            f"Run {run.dir} ({run.meta.get('status', '?')}, {run.meta.get('evaluations', '?')} designs "
            f"evaluated); written {dt.date.today().isoformat()} by afpm pick {shlex.quote(str(run.dir))} {design_id}.",
            f"Design {design_id}: {w['coils']} coils / {poles} poles, {d['magnet']}, ring {d['ring_radius_mm']:g} mm, "
            f"{d['turns']} turns x {d['strands']} of {d['wire']}, {d['parallel_paths']} {plural(d['parallel_paths'], 'path')}, {d['connection']}."
            + ("" if rep["feasible"] else " DOES NOT MEET EVERY LIMIT: see the warnings.")]
    return Sheet(design_id, f"Build sheet: design {design_id}", head, sections)


def design_file_text(run, design_id, record) -> str:
    """The design file `pick` writes: where it came from as comments (run, scenario, catalog hashes
    from run.json), then the design keys. `afpm evaluate --run RUN --id ID` re-evaluates it with
    exactly that scenario and snapshot."""
    sc = run.scenario
    hashes = run.meta.get("catalog_hashes", {})
    lines = [f"# design {design_id} of the run in {run.dir}, written by afpm pick",
             f"# scenario: {sc.name} (the run's copy: {run.dir / 'scenario.toml'})",
             f"# catalogs: the run's snapshot in {run.dir / 'catalogs'}, sha256:"]
    lines += [f"#   {name} {digest}" for name, digest in sorted(hashes.items())]
    lines += [f"# re-evaluate with: afpm evaluate --run {shlex.quote(str(run.dir))} --id {design_id}"]
    return "\n".join(_comment_safe(x) for x in lines) + "\n" + design_toml(record)


def _comment_safe(line):
    """One TOML comment line: no line breaks or control characters from a folder or boat name."""
    return "".join(ch if ch.isprintable() else "?" for ch in line)


def _recheck(run, one, fast_sail, rep):
    """Fast against 3-D reference model on the EMF constant, the scenario's objectives (but the
    magnet bill, the same in both) and the coil temperature; (table, reference evaluation)."""
    settings = replace(Settings(**run.meta["settings"]), field_model="reference", thermal_model="reference")
    ref = Evaluator(run.catalogs, run.scenario, settings).evaluate(one)
    names = [n for n in dict.fromkeys(["emf_line_rms_per_rpm_V", *run.objectives, "coil_temperature_C"])
             if n != "magnet_cost"]
    fast_of = {"emf_line_rms_per_rpm_V": rep["electrical"]["emf_line_rms_per_rpm_V"]}
    rows = []
    for key in names:
        fast = fast_of.get(key, rep.get(key, fast_sail.get(key)))
        if fast is None:
            continue
        scale = column_factor(key)
        digits = 1 if "temperature" in key else 3
        fast, reference = float(fast) * scale, float(ref[key][0]) * scale
        # A value that prints as zero (e.g. the charge current of a design just at cut-in) has
        # no meaningful percent difference.
        diff = (reference - fast) / fast * 100.0 if abs(fast) >= 0.5 * 10.0 ** -digits else float("nan")
        shown = ["runaway" if "temperature" in key and x >= RUNAWAY_C else f"{x:.{digits}f}"
                 for x in (fast, reference)]
        rows.append([column_label(key, run.scenario.currency), *shown,
                     f"{diff:+.1f}" if math.isfinite(diff) and "runaway" not in shown else "-"])
    return Table([f"At {run.scenario.sailing_rpm:g} rpm", "fast model", "reference model",
                  "difference [%]"], rows, "lrrr", key="recheck"), ref


RECHECK_CANDIDATES = 8
"""Next designs (in the rule's order) re-checked with the 3-D model, in one batch, when the chosen
one breaks a limit there (a reference evaluation costs about half a second a design)."""


def _broken(values, limits, i):
    """The limits (of `limits`) the row i of evaluation `values` breaks, as (name, kind, bound, value)."""
    out = []
    for name, kind, bound in limits:
        if name in values:
            v = float(values[name][i])
            if (kind == "min" and v < bound) or (kind == "max" and v > bound):
                out.append((name, kind, bound, v))
    return out


def _recheck_limits(run, ref, choice):
    """Notes when the chosen design's 3-D re-check breaks a limit the user gave, naming the next
    design of the rule's order whose re-check keeps every limit (or saying none of the next few does)."""
    cur = run.scenario.currency
    broken = _broken(ref.values, choice.limits, 0)
    if not broken:
        return []
    said = "; ".join(f"{column_name(name)} {format_value(name, v, cur)} with the 3-D model, beyond the limit "
                     f"{'>=' if kind == 'min' else '<='} {format_value(name, bound, cur)}"
                     for name, kind, bound, v in broken)
    rest = [i for i in choice.order if i != choice.index][:RECHECK_CANDIDATES]
    settings = replace(run.evaluator.settings, field_model="reference", thermal_model="reference")
    keeps = None
    if rest:
        ev = Evaluator(run.catalogs, run.scenario, settings).evaluate(run.batch.take(rest))
        ok = [k for k in range(len(rest)) if not _broken(ev.values, choice.limits, k) and ev.feasible[k]]
        keeps = run.ids[rest[ok[0]]] if ok else None
    tail = (f"the next design by the same rule that keeps every limit with the 3-D model is {keeps} "
            f"(afpm pick {shlex.quote(str(run.dir))} {keeps})" if keeps else
            f"none of the next {len(rest)} designs by the same rule keeps every limit with the 3-D model: "
            "loosen a limit or check a test coil")
    return [f"Design {choice.design_id} breaks a limit you gave when re-checked: {said}; {tail}."]


# --- rendering ------------------------------------------------------------------------------------
_PRINT_CSS = """
@page { size: A4; margin: 15mm 15mm 18mm 15mm; }
body { font-family: "DejaVu Sans", Helvetica, Arial, sans-serif; color: #22313f; font-size: 10pt;
       max-width: 180mm; margin: 0 auto; line-height: 1.35; }
h1 { color: #1d3557; font-size: 16pt; border-bottom: 2pt solid #2a7f84; padding-bottom: 2pt; }
h2 { color: #1d3557; font-size: 12.5pt; margin-top: 14pt; border-bottom: 0.6pt solid #c9a66b;
     break-after: avoid; page-break-after: avoid; }
table { border-collapse: collapse; width: 100%; margin: 4pt 0 6pt 0; font-size: 9pt;
        break-inside: auto; }
tr { break-inside: avoid; page-break-inside: avoid; }
th { background: #e9d8a6; text-align: left; padding: 2pt 4pt; }
td { border-bottom: 0.4pt solid #e9d8a6; padding: 2pt 4pt; vertical-align: top; }
td.r, th.r { text-align: right; }
tfoot td { font-weight: bold; border-top: 1pt solid #1d3557; }
.head p { margin: 1pt 0; }
.warn li { color: #b5523b; }
figure { margin: 6pt 0; break-inside: avoid; page-break-inside: avoid; text-align: center; }
pre { background: #fbf8f1; border: 0.5pt solid #e9d8a6; padding: 4pt; font-size: 8.5pt; }
section.cautions { border: 1pt solid #b5523b; padding: 0 6pt; }
@media screen { body { padding: 10mm; background: #fbf8f1; } svg { background: white; max-width: 100%; height: auto; } }
@media print { a { color: inherit; text-decoration: none; } }
"""


def _html_table(t: Table) -> str:
    align = t.align or "l" * len(t.header)
    cls = lambda j: ' class="r"' if j < len(align) and align[j] == "r" else ""  # noqa: E731
    out = [f'<table id="{escape(t.key)}">' if t.key else "<table>", "<thead><tr>"]
    out += [f"<th{cls(j)}>{escape(h)}</th>" for j, h in enumerate(t.header)]
    out.append("</tr></thead><tbody>")
    for row in t.rows:
        out.append("<tr>" + "".join(f"<td{cls(j)}>{escape(str(c))}</td>" for j, c in enumerate(row)) + "</tr>")
    out.append("</tbody>")
    if t.foot:
        out.append("<tfoot><tr>" + "".join(f"<td{cls(j)}>{escape(str(c))}</td>" for j, c in enumerate(t.foot))
                   + "</tr></tfoot>")
    out.append("</table>")
    return "".join(out)


def sheet_html(sheet: Sheet) -> str:
    """A printable page (A4, no scripts); drawings inline as SVG."""
    body = [f"<h1>{escape(sheet.title)}</h1>", '<div class="head">']
    body += [f"<p>{escape(x)}</p>" for x in sheet.lines]
    body.append("</div>")
    for sec in sheet.sections:
        cls = ' class="cautions"' if sec.title == "Cautions" else ""
        body.append(f"<section{cls}><h2>{escape(sec.title)}</h2>")
        for block in sec.blocks:
            kind = block[0]
            if kind == "p":
                body.append(f"<p>{escape(block[1])}</p>")
            elif kind == "table":
                body.append(_html_table(block[1]))
            elif kind in ("list", "warn"):
                body.append(f'<ul class="{kind}">' + "".join(f"<li>{escape(x)}</li>" for x in block[1]) + "</ul>"
                            if block[1] else "<p>None.</p>")
            elif kind == "svg":
                body.append(f'<figure id="fig-{block[1]}">{block[2]}</figure>')  # our own SVG, labels escaped
            elif kind == "code":
                body.append(f"<pre>{escape(block[1])}</pre>")
        body.append("</section>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{escape(sheet.title)}</title><style>{_PRINT_CSS}</style></head><body>\n"
            + "\n".join(body) + "\n</body></html>\n")


def md_escape(text: str) -> str:
    """Text safe in Markdown: no raw HTML, no table breaks, no emphasis or links from catalog text."""
    text = str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    for ch in "\\`*_[]|#":
        text = text.replace(ch, "\\" + ch)
    return text


def _md_table(t: Table) -> list[str]:
    align = t.align or "l" * len(t.header)
    out = ["| " + " | ".join(md_escape(h) for h in t.header) + " |",
           "|" + "|".join("---:" if a == "r" else ":---" for a in align) + "|"]
    out += ["| " + " | ".join(md_escape(c) for c in row) + " |" for row in t.rows]
    if t.foot:
        out.append("| " + " | ".join(f"**{md_escape(c)}**" if c else "" for c in t.foot) + " |")
    return out


def sheet_markdown(sheet: Sheet, svg_files: dict | None = None) -> str:
    """The same sheet as Markdown; drawings and the design file are linked files (`svg_files`:
    drawing name or "design" -> file name)."""
    out = [f"# {md_escape(sheet.title)}", ""]
    out += [md_escape(x) + "  " for x in sheet.lines] + [""]
    for sec in sheet.sections:
        out += [f"## {md_escape(sec.title)}", ""]
        for block in sec.blocks:
            kind = block[0]
            if kind == "p":
                out += [md_escape(block[1]), ""]
            elif kind == "table":
                out += _md_table(block[1]) + [""]
            elif kind in ("list", "warn"):
                out += ([f"- {md_escape(x)}" for x in block[1]] or ["None."]) + [""]
            elif kind == "svg":
                name = (svg_files or {}).get(block[1])
                out += [f"![{block[1]} drawing]({name})" if name else "(drawing: see the HTML sheet)", ""]
            elif kind == "code":
                # A code block would show catalog text raw; link the file, or escape it line by line.
                name = (svg_files or {}).get("design")
                out += ([f"Design file: [{name}]({name})", ""] if name else
                        [md_escape(x) + "  " for x in block[1].splitlines()] + [""])
    return "\n".join(out)


def write_build_sheet(run, design_id, choice: Choice | None = None) -> tuple[Path, Path, Sheet]:
    """Write build-<ID>.html, build-<ID>.md, its drawings (build-<ID>-*.svg) and its design file
    (build-<ID>.toml) into the run folder."""
    if isinstance(run, (str, Path)):
        run = load_front(run)
    sheet = build_sheet(run, design_id, choice)
    with RunLock(run.dir):
        svg_files = {}
        for sec in sheet.sections:
            for block in sec.blocks:
                if block[0] == "svg":
                    name = f"build-{design_id}-{block[1]}.svg"
                    write_atomic(run.dir / name, block[2] + "\n")
                    svg_files[block[1]] = name
        design_file = f"build-{design_id}.toml"
        for sec in sheet.sections:
            for block in sec.blocks:
                if block[0] == "code":
                    write_atomic(run.dir / design_file, block[1])
                    svg_files["design"] = design_file
        html_path = run.dir / f"build-{design_id}.html"
        md_path = run.dir / f"build-{design_id}.md"
        write_atomic(html_path, sheet_html(sheet))
        write_atomic(md_path, sheet_markdown(sheet, svg_files))
    return html_path, md_path, sheet
