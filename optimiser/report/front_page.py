"""front.html: the run's Pareto front as one self-contained interactive page.

The page opens offline (plotly.js is inlined, no fonts or files fetched). Data goes in as one JSON
block inside ``<script type="application/json">`` with ``<``, ``>`` and ``&`` written as ``\\u003c``
etc., so no catalog text can close the tag or be parsed as markup; the page's own script reads it
with JSON.parse and writes every value with ``textContent``. Hover labels are plotly pseudo-HTML, so
the strings put there are HTML-escaped first (plotly shows the entities as the characters).

The side panel's facts are computed here from ``design_report`` for every front design, evaluating
the whole front in two batches (sailing and maximum rpm) and handing design_report one row at a time.
"""

from __future__ import annotations

import json
import shlex
from html import escape
from pathlib import Path

import numpy as np
import plotly.offline

from ..evaluate import Evaluation
from ..report.evaluation import design_report
from ..safe_io import RunLock, write_atomic
from ..search.folder import RunView
from ..search.run import SearchRun
from .drawing import PALETTE

__all__ = ["open_run", "front_reports", "page_data", "front_page_html", "write_front_page",
           "script_json", "FRONT_PAGE"]

FRONT_PAGE = "front.html"


def open_run(run_dir) -> RunView:
    """The run in `run_dir` for reading, from its data files only (never its checkpoint), or an
    InputError saying what is missing or damaged."""
    return RunView(run_dir)


def script_json(obj) -> str:
    """JSON safe inside a <script> element: no '<', '>' or '&' characters survive."""
    text = json.dumps(obj, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
    return (text.replace("&", "\\u0026").replace("<", "\\u003c").replace(">", "\\u003e")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))


class _OneRow:
    """Stands in for an Evaluator inside design_report: answers from batch results already computed.

    design_report asks for the design at the sailing rpm and at the maximum rpm; both were evaluated
    for the whole front at once, so a front of thousands costs two batch calls, not thousands.
    """

    def __init__(self, evaluator, sail, motor, i):
        self.scenario, self.catalogs = evaluator.scenario, evaluator.catalogs
        self.windings, self.settings = evaluator.windings, evaluator.settings
        self._sail, self._motor, self._i = sail, motor, i

    def evaluate(self, design, rpm=None):
        source = self._sail if rpm is None else self._motor
        if rpm is not None and float(rpm) != float(self.scenario.max_rpm):
            raise ValueError("only the sailing and maximum rpm were precomputed")
        return _take(source, self._i)


def _take(ev, i):
    sl = slice(i, i + 1)
    return Evaluation({k: np.asarray(v)[sl] for k, v in ev.values.items()}, ev.objectives[sl],
                      ev.constraints[sl], ev.emf_waveform_V[sl],
                      {k: np.asarray(v)[sl] for k, v in ev.profile.items()},
                      {k: np.asarray(v)[sl] for k, v in ev.at_fastest.items()})


def front_reports(evaluator, batch):
    """design_report of every design of `batch`, and the batch evaluation at the sailing rpm."""
    if len(batch) == 0:
        return [], None
    sail = evaluator.evaluate(batch)
    motor = evaluator.evaluate(batch, rpm=evaluator.scenario.max_rpm)
    reports = [design_report(_OneRow(evaluator, sail, motor, i), batch.take([i]))
               for i in range(len(batch))]
    return reports, sail


def _g(x, digits=3):
    return float(f"{float(x):.{digits}g}")


def _panel(rep, design_id, currency):
    """What the side panel shows for one design: sections of [label, text] rows (strings only)."""
    d, g, w, m = rep["design"], rep["geometry"], rep["winding"], rep["materials"]
    s, mx, e = rep["at_sailing"], rep["at_max_rpm"], rep["electrical"]
    mm = lambda x: f"{x * 1e3:.1f} mm"  # noqa: E731
    return {
        "id": design_id,
        "feasible": rep["feasible"],
        "sections": [
            ["Parts", [
                ["magnets", f"{2 * w['poles']} x {d['magnet']} (2 rotors x {w['poles']} poles)"],
                ["magnet bill", f"{m['magnet_cost']:.2f} {currency}"],
                ["rotor discs", f"2 x {d['disc']} ({m['disc_cost']:.2f} {currency})"],
                ["wire", f"{d['wire']}: {m['wire_length_m']:.0f} m, {m['copper_mass_kg']:.2f} kg "
                         f"({m['wire_cost']:.2f} {currency} with margin)"],
            ]],
            ["Coil", [
                ["ring radius", f"{d['ring_radius_mm']:g} mm"],
                ["hole (radial x tangential)", f"{g['coil_hole_radial_m'] * 1e3:.1f} x "
                                               f"{g['coil_hole_tangential_m'] * 1e3:.1f} mm"],
                ["leg width", mm(g["coil_leg_width_m"])],
                ["coil thickness", f"{g['coil_thickness_m'] * 1e3:.2f} mm"],
                ["turns x strands in hand", f"{d['turns']} x {d['strands']}"],
                ["stator / face gap", f"{g['stator_thickness_m'] * 1e3:.2f} / {g['face_gap_m'] * 1e3:.2f} mm"],
            ]],
            ["Winding", [
                ["coils / poles", f"{w['coils']} / {w['poles']} (layout {d['layout']} x{d['multiple']})"],
                ["series coils per path", str(w["series_coils_per_path"])],
                ["parallel paths", str(w["parallel_paths"])],
                ["connection", w["connection"]],
                ["winding factor", f"{w['winding_factor']:.3f}"],
            ]],
            ["Performance at sailing rpm", [
                ["shaft speed", f"{s['rpm']:.0f} rpm (cut-in {rep['cut_in_rpm']:.0f} rpm)"],
                ["charge current", f"{s['charge_current_A']:.2f} A ({s['battery_power_W']:.1f} W)"],
                ["drag torque", f"{s['drag_torque_Nm']:.3f} N m"],
                ["efficiency", f"{100 * s['efficiency']:.0f} %"],
                ["coil / magnet temperature", f"{s['coil_temperature_C']:.0f} / {s['magnet_temperature_C']:.0f} C"],
                ["open-circuit at max rpm", f"{mx['open_circuit_line_rms_V']:.0f} V rms at {mx['rpm']:.0f} rpm"],
                ["rotor attraction", f"{e['axial_attraction_N']:.0f} N"],
            ]],
        ] + ([["Over the sailing profile", [
                ["charge per day", f"{rep['amp_hours_per_day']:.1f} A h"],
                ["mean added drag", f"{rep['mean_added_drag_N']:.0f} N"]] + [
                [f"{r['boat_speed_kn']:g} kn, {r['hours_per_day']:g} h/day",
                 "stalled" if r["stalled"] else
                 f"{r['rpm']:.0f} rpm, {r['charge_current_A']:.2f} A, {r['added_drag_N']:.0f} N added drag, "
                 f"coil {r['coil_temperature_C']:.0f} C"] for r in rep["sailing_profile"]]]]
             if "sailing_profile" in rep else []),
        "warnings": list(rep["warnings"]) + list(rep["problems"]),
    }


def page_data(evaluator, ids, batch, run_dir, reports=None, sail=None) -> dict:
    """Everything the page's script needs, as plain JSON-ready values."""
    if reports is None:
        reports, sail = front_reports(evaluator, batch)
    sc = evaluator.scenario
    n = len(reports)
    cur = sc.currency
    col = lambda name: [_g(x, 4) for x in sail[name]] if n else []  # noqa: E731
    wires = evaluator.catalogs.wires["bare_diameter_m"].to_numpy()
    hover = [escape(f"{ids[i]}: {r['at_sailing']['charge_current_A']:.2f} A, "
                    f"{r['at_sailing']['drag_torque_Nm']:.2f} N m, {r['materials']['magnet_cost']:.0f} {cur}, "
                    f"{r['at_sailing']['coil_temperature_C']:.0f} C | {r['design']['magnet']}, "
                    f"{r['winding']['coils']} coils / {r['winding']['poles']} poles, "
                    f"{r['design']['turns']} turns x {r['design']['strands']} of {r['design']['wire']}",
                    quote=False)  # plotly decodes &lt; &gt; &amp; in labels but shows &quot; raw
             for i, r in enumerate(reports)]
    run_arg = shlex.quote(str(Path(run_dir)))
    return {
        "ids": list(ids),
        "hover": hover,
        "objectives": {"charge": col("charge_current_A"), "torque": col("drag_torque_Nm"),
                       "cost": col("magnet_cost"), "temperature": col("coil_temperature_C"),
                       **({"amp_hours": col("amp_hours_per_day"), "added_drag": col("mean_added_drag_N")}
                          if n and "amp_hours_per_day" in sail.values else {})},
        "variables": {
            "turns": [int(x) for x in batch.turns], "strands": [int(x) for x in batch.strands],
            "ring_mm": [_g(x * 1e3, 4) for x in batch.ring_radius_m],
            "poles": [int(x) for x in sail["poles"]] if n else [],
            "coils": [int(x) for x in sail["coils"]] if n else [],
            "wire_mm": [_g(wires[k] * 1e3, 4) for k in batch.wire],
        },
        "panels": [_panel(r, ids[i], cur) for i, r in enumerate(reports)],
        "command": f"afpm pick {run_arg} ",
        "currency": cur,
        "sailing_rpm": sc.sailing_rpm,
        "palette": PALETTE,
    }


_CSS = """
body{margin:0;font-family:system-ui,-apple-system,"Segoe UI",sans-serif;background:%(paper)s;color:%(ink)s}
header{background:%(navy)s;color:#fff;padding:10px 18px}
header h1{font-size:1.25em;margin:0 0 4px 0}
header p{margin:0;font-size:.85em;opacity:.9}
main{display:flex;gap:12px;padding:12px;align-items:flex-start}
#plots{flex:1 1 auto;min-width:0}
.card{background:#fff;border:1px solid %(sand)s;border-radius:6px;padding:6px;margin-bottom:12px}
#panel{flex:0 0 360px;background:#fff;border:1px solid %(sand)s;border-left:5px solid %(teal)s;
 border-radius:6px;padding:10px 14px;position:sticky;top:8px;max-height:94vh;overflow:auto}
#panel h2{font-size:1.1em;margin:0 0 6px 0;color:%(navy)s}
#panel h3{font-size:.95em;margin:10px 0 3px 0;color:%(teal)s;border-bottom:1px solid %(sand)s}
#panel table{border-collapse:collapse;width:100%%;font-size:.85em}
#panel td{padding:2px 4px;vertical-align:top}
#panel td:first-child{color:%(grey)s;width:45%%}
#panel ul{padding-left:18px;font-size:.82em;color:%(rust)s}
code{background:%(sand)s;padding:3px 6px;border-radius:3px;display:block;user-select:all;word-break:break-all}
.tools{font-size:.85em;margin:0 0 8px 0}
.tools button{background:%(teal)s;color:#fff;border:0;border-radius:3px;padding:3px 10px;cursor:pointer}
.tools input{width:8em}
.safety{font-size:.8em;color:%(ink)s;padding:0 18px 14px 18px}
"""

_SCRIPT = r"""
(function(){
"use strict";
var D = JSON.parse(document.getElementById("afpm-data").textContent);
var P = D.palette, O = D.objectives, V = D.variables, n = D.ids.length;
var byId = {}; D.ids.forEach(function(id, i){ byId[id] = i; });
function el(tag, text){ var e = document.createElement(tag); if (text !== undefined) e.textContent = text; return e; }
var panel = document.getElementById("panel-body");
function show(i){
  var p = D.panels[i];
  panel.replaceChildren();
  panel.appendChild(el("h2", "Design " + p.id + (p.feasible ? "" : " (fails a limit)")));
  p.sections.forEach(function(sec){
    panel.appendChild(el("h3", sec[0]));
    var t = el("table");
    sec[1].forEach(function(row){
      var tr = el("tr"); tr.appendChild(el("td", row[0])); tr.appendChild(el("td", row[1])); t.appendChild(tr);
    });
    panel.appendChild(t);
  });
  if (p.warnings.length){
    panel.appendChild(el("h3", "Warnings"));
    var ul = el("ul"); p.warnings.forEach(function(w){ ul.appendChild(el("li", w)); }); panel.appendChild(ul);
  }
  panel.appendChild(el("h3", "Build sheet"));
  panel.appendChild(el("p", "Print its build sheet (parts, magnet layout, wiring, cautions) with:"));
  var c = el("code", D.command + p.id); c.id = "pick-command"; panel.appendChild(c);
  window.afpmShown = p.id;
}
window.afpmShow = function(id){ if (id in byId) { show(byId[id]); return true; } return false; };
var scatter = document.getElementById("scatter");
var sizes = O.cost.map(function(c){ return c; });
var cmax = Math.max.apply(null, O.cost.concat([1]));
Plotly.newPlot(scatter, [{
  type: "scatter", mode: "markers", x: O.torque, y: O.charge, text: D.hover,
  customdata: D.ids, hovertemplate: "%{text}<extra></extra>",
  marker: {size: sizes, sizemode: "area", sizeref: 2 * cmax / (26 * 26), sizemin: 4,
           color: O.temperature, colorscale: [[0, P.teal], [0.5, P.sand], [1, P.rust]],
           line: {color: P.navy, width: 0.6}, opacity: 0.9,
           colorbar: {title: {text: "coil temperature [C]"}, thickness: 14}},
  selected: {marker: {opacity: 1}}, unselected: {marker: {opacity: 0.08}}
}], {
  title: {text: "Charge current against drag torque at " + D.sailing_rpm + " rpm; marker area: magnet bill",
          font: {size: 14, color: P.navy}, x: 0.01, xanchor: "left"},
  xaxis: {title: {text: "drag torque [N m]"}, gridcolor: P.sand, zeroline: false},
  yaxis: {title: {text: "charge current [A]"}, gridcolor: P.sand, zeroline: false},
  plot_bgcolor: "#ffffff", paper_bgcolor: "#ffffff", hovermode: "closest",
  font: {family: "system-ui, sans-serif", color: P.ink}, margin: {l: 60, r: 10, t: 40, b: 50}, height: 460
}, {displaylogo: false, responsive: true});
scatter.on("plotly_click", function(ev){ if (ev.points && ev.points.length) show(ev.points[0].pointIndex); });
var dims = [
  ["charge current [A]", O.charge], ["drag torque [N m]", O.torque],
  ["magnet bill [" + D.currency + "]", O.cost], ["coil temperature [C]", O.temperature]].concat(
  O.amp_hours ? [["charge per day [A h]", O.amp_hours], ["mean added drag [N]", O.added_drag]] : []).concat([
  ["turns", V.turns], ["strands", V.strands], ["ring radius [mm]", V.ring_mm],
  ["poles", V.poles], ["coils", V.coils], ["wire diameter [mm]", V.wire_mm]]);
var par = document.getElementById("parcoords");
Plotly.newPlot(par, [{
  type: "parcoords",
  line: {color: O.charge, colorscale: [[0, P.sand], [0.5, P.teal], [1, P.navy]], showscale: false},
  dimensions: dims.map(function(d){ return {label: d[0], values: d[1]}; }),
  labelfont: {size: 11, color: P.navy}, tickfont: {size: 10}, labelangle: -20
}], {title: {text: "Objectives and main choices: drag along an axis to filter", font: {size: 14, color: P.navy},
             x: 0.01, xanchor: "left"},
     paper_bgcolor: "#ffffff", margin: {l: 50, r: 60, t: 110, b: 20}, height: 430,
     font: {family: "system-ui, sans-serif", color: P.ink}}, {displaylogo: false, responsive: true});
var count = document.getElementById("count");
function applyFilter(){
  var ds = par.data[0].dimensions, keep = [];
  for (var i = 0; i < n; i++){
    var ok = true;
    for (var j = 0; j < ds.length && ok; j++){
      var r = ds[j].constraintrange; if (!r || !r.length) continue;
      var rs = Array.isArray(r[0]) ? r : [r], v = dims[j][1][i], any = false;
      for (var k = 0; k < rs.length; k++){ if (v >= rs[k][0] && v <= rs[k][1]) { any = true; break; } }
      ok = any;
    }
    if (ok) keep.push(i);
  }
  Plotly.restyle(scatter, {selectedpoints: [keep.length === n ? null : keep]});
  count.textContent = keep.length + " of " + n + " designs shown";
  window.afpmKept = keep.length;
}
par.on("plotly_restyle", applyFilter);
document.getElementById("clear").addEventListener("click", function(){
  Plotly.restyle(par, {"dimensions": [dims.map(function(d){ return {label: d[0], values: d[1]}; })]});
  applyFilter();
});
document.getElementById("goto").addEventListener("change", function(ev){
  if (!window.afpmShow(ev.target.value.trim())) count.textContent = "no design " + ev.target.value.trim() + " on this front";
});
count.textContent = n + " designs on the front";
if (n === 0) panel.replaceChildren(el("p", "This run has no feasible design yet: nothing to show."));
window.afpmReady = true;
})();
"""


def front_page_html(data: dict, title: str, subtitle: str) -> str:
    """The whole page as text (about 4.8 MB of it is plotly.js)."""
    css = _CSS % PALETTE
    return "\n".join([
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{escape(title)}</title>",
        f"<style>{css}</style>",
        f'<script type="text/javascript">{plotly.offline.get_plotlyjs()}</script>',
        "</head><body>",
        f"<header><h1>{escape(title)}</h1><p>{escape(subtitle)}</p></header>",
        "<main><div id=\"plots\">",
        '<div class="card"><div id="scatter"></div></div>',
        '<div class="card"><p class="tools"><span id="count"></span> '
        '<button id="clear" type="button">clear filters</button> '
        '<label>show design <input id="goto" placeholder="D123"></label></p>'
        '<div id="parcoords"></div></div>',
        '</div><aside id="panel"><div id="panel-body"><p>Click a design in the chart to see its parts, '
        "coil, winding and performance, and the command that prints its build sheet.</p></div></aside></main>",
        '<p class="safety">Safety: guard the shaft and coupling; strong magnets pinch, shatter and '
        "affect pacemakers; always charge through a regulator or charge controller with a fuse close "
        "to the battery; disconnect the generator before motoring (its open-circuit voltage rises with "
        "rpm). Follow local codes, the applicable marine electrical standards and a qualified marine "
        "electrician.</p>",
        f'<script type="application/json" id="afpm-data">{script_json(data)}</script>',
        f"<script>{_SCRIPT}</script>",
        "</body></html>",
    ])


def write_front_page(run) -> Path:
    """Write (or redraw) front.html in the run folder; returns its path."""
    if not isinstance(run, (SearchRun, RunView)):
        run = open_run(run)
    ids, batch = run.front_designs()
    evaluator = run.evaluator
    data = page_data(evaluator, ids, batch, run.dir)
    meta = run.meta
    title = f"Pareto front: {run.scenario.name}, run {run.dir.name}"
    subtitle = (f"{len(ids)} designs on the front after {meta.get('evaluations', run.evaluations)} "
                f"evaluated ({meta.get('status', '?')}); sailing at {run.scenario.sailing_rpm:g} rpm, "
                f"charging at {run.scenario.battery_charging_V:g} V; prices in {run.scenario.currency} "
                "from the run's catalog snapshot")
    path = run.dir / FRONT_PAGE
    with RunLock(run.dir):
        write_atomic(path, front_page_html(data, title, subtitle))
    return path
