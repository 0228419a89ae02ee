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
from ..evaluate import STATOR_RIM_M, Evaluator, Settings
from ..physics.winding import winding_table
from ..report.evaluation import design_report, rpm_table
from ..safe_io import RunLock, write_atomic
from . import drawing
from .front_page import open_run

__all__ = ["RULES", "NoMatch", "pick", "Sheet", "build_sheet", "sheet_html", "sheet_markdown",
           "write_build_sheet", "CAUTIONS"]

RULES = {"charge": ("charge_current_A", +1, "A"), "torque": ("drag_torque_Nm", -1, "N m"),
         "cost": ("magnet_cost", -1, ""), "temperature": ("coil_temperature_C", -1, "C")}
"""--most WORD -> (value, +1 most / -1 least, unit)."""

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
def _front(run):
    ids, batch = run.front_designs()
    ev = run.evaluator.evaluate(batch) if len(batch) else None
    return ids, batch, ev


def pick(run, design_id=None, most=None, max_torque=None, max_magnet_cost=None, max_coil_temp=None,
         min_charge=None):
    """Index into the front and id of the chosen design.

    By id, or the design with the most (charge) or least (torque, cost, temperature) of `most` among
    those within the limits (drag torque [N m], magnet bill [currency], coil temperature [C], charge
    current [A]); ties go to the design found first. Raises NoMatch.
    """
    ids, batch, ev = _front(run)
    if not ids:
        raise NoMatch(f"the run in {run.dir} has no feasible design on its front yet")
    if design_id is not None:
        if design_id not in ids:
            raise NoMatch(f"no design {design_id!r} on the front of {run.dir}; its ids run "
                          f"{', '.join(ids[:8])}{' ...' if len(ids) > 8 else ''} (see front.csv)")
        return ids.index(design_id), design_id
    most = most or "charge"
    if most not in RULES:
        raise NoMatch(f"--most {most!r}: use one of {', '.join(RULES)}")
    keep = np.ones(len(ids), bool)
    limits = []
    for name, bound, sign, label in (("drag_torque_Nm", max_torque, 1, "drag torque <= {} N m"),
                                     ("magnet_cost", max_magnet_cost, 1, "magnet bill <= {}"),
                                     ("coil_temperature_C", max_coil_temp, 1, "coil temperature <= {} C"),
                                     ("charge_current_A", min_charge, -1, "charge current >= {} A")):
        if bound is not None:
            keep &= sign * ev[name] <= sign * bound
            limits.append(label.format(f"{bound:g}"))
    if not keep.any():
        spans = "; ".join(f"{key} {ev[v].min():.3g} to {ev[v].max():.3g}{(' ' + u) if u else ''}"
                          for key, (v, _, u) in RULES.items())
        raise NoMatch(f"no design on the front has {' and '.join(limits)}. The front spans: {spans}")
    value, sense, _ = RULES[most]
    score = np.where(keep, sense * ev[value], -np.inf)
    i = int(np.argmax(score))
    return i, ids[i]


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
        ["Magnets", f"{d['magnet']} ({mag['grade']}, {_mm(mag['length_m'], 0)} x {_mm(mag['width_m'], 0)} "
                    f"x {_mm(mag['thickness_m'], 0)}): 2 rotors x {w['poles']} poles", f"{n_mag}",
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
            steps = " -> ".join(f"coil {r['coil']} ({'S-F' if r['polarity'] > 0 else 'F-S'})" for r in coils)
            chains.append(f"Phase {letter}, path {path}: terminal {letter}1 -> {steps} -> end {letter}2")
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
    summary = [f"{w['coils']} coils, {w['coils'] // 3} per phase; {w['series_coils_per_path']} coils in "
               f"series per path; {a} parallel path(s) per phase; {w['connection']} connection.",
               "S-F: the coil's start lead towards the phase terminal; F-S (a reversed coil): its finish "
               "lead towards the terminal. Every coil is wound the same way, start lead on the same side.",
               paths, join,
               "Rectifier to battery: the bridge's DC + and DC - go to the regulator or charge controller's "
               "generator input; its output goes to the battery through a fuse or breaker close to the "
               "battery positive. Never straight from the rectifier to the battery."]
    return table, chains, summary


def build_sheet(run, design_id) -> Sheet:
    """Collect every fact of the build sheet of front design `design_id` of `run`."""
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
                                list(winding.coil_polarity))
    coil = Table(["Quantity", "Value"], [
        ["coils", f"{w['coils']} (layout {d['layout']} x{d['multiple']})"],
        ["hole (radial x tangential)", f"{g['coil_hole_radial_m'] * 1e3:.1f} x {g['coil_hole_tangential_m'] * 1e3:.1f} mm"],
        ["leg width", _mm(g["coil_leg_width_m"])],
        ["coil thickness (axial)", _mm(g["coil_thickness_m"], 2)],
        ["turns per coil", str(d["turns"])],
        ["strands in hand", str(d["strands"])],
        ["wire", f"{d['wire']} ({wire['standard']}), bare {wire['bare_diameter_m'] * 1e3:.3f} mm, "
                 f"overall {wire['overall_diameter_m'] * 1e3:.3f} mm, class {wire['thermal_class_C']:.0f} C"],
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
                  "efficiency [%]", "coil [C]"],
                 [[f"{r['rpm']:.0f}", f"{r['open_circuit_line_rms_V']:.1f}", f"{r['charge_current_A']:.2f}",
                   f"{r['battery_power_W']:.1f}", f"{r['drag_torque_Nm']:.3f}", f"{100 * r['efficiency']:.0f}",
                   "runaway" if r["thermal_runaway"] else f"{r['coil_temperature_C']:.0f}"] for r in rows],
                 "rrrrrrr", key="performance")
    plot = drawing.performance_svg(rows, sc.sailing_rpm, rep["cut_in_rpm"])
    sections.append(Section("Performance against shaft speed", [
        ("p", f"Cut-in (charging starts): {rep['cut_in_rpm']:.0f} rpm. Battery at {sc.battery_charging_V:g} V, "
              f"bilge air {sc.bilge_air_C:g} C, {sc.diode_forward_drop_V:g} V per diode."),
        ("table", perf), ("svg", "performance", plot)]))

    if "sailing_profile" in rep:
        boat = Table(["boat speed [kn]", "hours/day", "shaft [rpm]", "free-wheeling [rpm]", "charge [A]",
                      "drag torque [N m]", "drag on boat [N]", "added drag [N]", "coil [C]"],
                     [[f"{r['boat_speed_kn']:g}", f"{r['hours_per_day']:g}",
                       "stalled" if r["stalled"] else f"{r['rpm']:.0f}", f"{r['free_wheel_rpm']:.0f}",
                       f"{r['charge_current_A']:.2f}", f"{r['drag_torque_Nm']:.2f}", f"{r['drag_force_N']:.0f}",
                       f"{r['added_drag_N']:.0f}", f"{r['coil_temperature_C']:.0f}"]
                      for r in rep["sailing_profile"]], "rrrrrrrrr", key="profile")
        sections.append(Section("Over the sailing profile", [
            ("p", f"With the {sc.propeller_diameter_m * 1e3:.0f} mm propeller turning the shaft as a water "
                  f"turbine: {rep['amp_hours_per_day']:.1f} A h per day, mean added drag "
                  f"{rep['mean_added_drag_N']:.0f} N. The shaft settles where the generator's drag torque "
                  "meets the torque the propeller takes from the water."),
            ("table", boat)]))

    sections.append(Section("Re-checked with the 3-D reference field model", [
        ("table", _recheck(run, one, s, rep)),
        ("p", "The search ranks designs with the fast field model; the reference model integrates the 3-D "
              "field of every magnet block and its images in the discs. Differences of a few per cent are "
              "expected; a large one is a reason to measure the EMF of a test coil before winding them all.")]))

    warnings = list(rep["problems"]) + list(rep["warnings"])
    sections.append(Section("Warnings for this design", [("warn", warnings)]))
    sections.append(Section("Cautions", [("list", CAUTIONS)]))
    sections.append(Section("Design file", [
        ("p", "Save as a .toml file to re-evaluate it with afpm evaluate --design FILE "
              f"--catalogs {run.dir / 'catalogs'} --scenario {run.dir / 'scenario.toml'}"),
        ("code", design_toml(d))]))

    fastest = (f"connected up to {sc.fastest_boat_speed_kn:g} kn" if sc.has_propeller
               else f"connected up to {sc.fastest_sailing_rpm:g} rpm")
    head = [f"Boat: {sc.name}; battery {sc.battery_nominal_V:g} V; sailing at {sc.sailing_rpm:g} rpm "
            f"({fastest}), up to {sc.max_rpm:g} rpm under engine.",
            f"Run {run.dir} ({run.meta.get('status', '?')}, {run.meta.get('evaluations', '?')} designs "
            f"evaluated); written {dt.date.today().isoformat()} by afpm pick {shlex.quote(str(run.dir))} {design_id}.",
            f"Design {design_id}: {w['coils']} coils / {poles} poles, {d['magnet']}, ring {d['ring_radius_mm']:g} mm, "
            f"{d['turns']} turns x {d['strands']} of {d['wire']}, {d['parallel_paths']} path(s), {d['connection']}."
            + ("" if rep["feasible"] else " DOES NOT MEET EVERY LIMIT: see the warnings.")]
    return Sheet(design_id, f"Build sheet: design {design_id}", head, sections)


def _recheck(run, one, fast_sail, rep):
    settings = replace(Settings(**run.meta["settings"]), field_model="reference", thermal_model="reference")
    ref = Evaluator(run.catalogs, run.scenario, settings).evaluate(one)
    items = [("EMF constant (line, rms per rpm)", "emf_line_rms_per_rpm_V", rep["electrical"]["emf_line_rms_per_rpm_V"] * 1e3,
              1e3, "mV/rpm", 3),
             ("charge current", "charge_current_A", fast_sail["charge_current_A"], 1.0, "A", 3),
             ("drag torque", "drag_torque_Nm", fast_sail["drag_torque_Nm"], 1.0, "N m", 3),
             ("coil temperature", "coil_temperature_C", fast_sail["coil_temperature_C"], 1.0, "C", 1)]
    rows = []
    for label, key, fast, scale, unit, digits in items:
        reference = float(ref[key][0]) * scale
        # A value that prints as zero (e.g. the charge current of a design just at cut-in) has
        # no meaningful percent difference.
        diff = (reference - fast) / fast * 100.0 if abs(fast) >= 0.5 * 10.0 ** -digits else float("nan")
        rows.append([f"{label} [{unit}]", f"{fast:.{digits}f}", f"{reference:.{digits}f}",
                     f"{diff:+.1f}" if math.isfinite(diff) else "-"])
    return Table([f"At {run.scenario.sailing_rpm:g} rpm", "fast model", "reference model",
                  "difference [%]"], rows, "lrrr", key="recheck")


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


def write_build_sheet(run, design_id) -> tuple[Path, Path, Sheet]:
    """Write build-<ID>.html, build-<ID>.md, its drawings (build-<ID>-*.svg) and its design file
    (build-<ID>.toml) into the run folder."""
    if isinstance(run, (str, Path)):
        run = open_run(run)
    sheet = build_sheet(run, design_id)
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
