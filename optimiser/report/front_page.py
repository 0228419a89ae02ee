"""front.html: the run's Pareto front as one self-contained interactive page.

The page opens offline: plotly.js and the page's data are inlined as gzip + base64 text blocks
(``<script type="application/gzip+base64">``, never run by the browser), which the page's own
script unpacks with the browser's DecompressionStream. Base64 holds no markup character, so no
catalog text can close a tag; the data is JSON read with JSON.parse and every value is written with
``textContent``. Hover labels are plotly pseudo-HTML, so the strings put there are HTML-escaped
first (plotly shows the entities as the characters).

Everything comes from the run's data files (`front_data.load_front`: front.csv and the snapshot),
never from the search state. The page draws a representative subset of at most ``show`` designs
(`front_data.representatives`) and lists every front design with its objectives, so a drawn
design's neighbours (the designs it stands for) can be shown. The drawn designs' panel facts come
from ``design_report``, evaluating them in two batches (sailing and maximum rpm) and handing
design_report one row at a time.
"""

from __future__ import annotations

import base64
import gzip
import json
import shlex
from html import escape
from pathlib import Path

import numpy as np
import plotly.offline

from .. import robust
from ..evaluate import Evaluation
from ..report.evaluation import design_report, former_text
from ..safe_io import RunLock, write_atomic
from .drawing import PALETTE
from .front_data import DEG_C, column_label, format_value, load_front, plural, representatives, temperature_text
from ..strict_json import dumps as json_dumps

__all__ = ["open_run", "front_reports", "page_data", "front_page_html", "write_front_page",
           "script_json", "read_page_data", "FRONT_PAGE", "DEFAULT_SHOW"]

FRONT_PAGE = "front.html"


def open_run(run_dir):
    """The front of the run in `run_dir` from its data files (`front_data.load_front`)."""
    return load_front(run_dir)


def script_json(obj) -> str:
    """JSON safe inside a <script> element: no '<', '>' or '&' characters survive."""
    text = json_dumps(obj, ensure_ascii=False, separators=(",", ":"))
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
        self.coil = evaluator.coil  # geometry only: cheap for one design

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
    if evaluator.scenario.robust_samples == 0:  # the build band of every design, in one batch
        sail.values.update(robust.robust_values(evaluator, batch, robust.REPORT_SAMPLES))
    motor = evaluator.evaluate(batch, rpm=evaluator.scenario.max_rpm)
    reports = [design_report(_OneRow(evaluator, sail, motor, i), batch.take([i]))
               for i in range(len(batch))]
    return reports, sail


def _g(x, digits=3):
    return float(f"{float(x):.{digits}g}")


def _panel(rep, design_id, currency, objective_rows, count, values):
    """What the side panel shows for one design: sections of rows (strings only); a section with
    a third element (its header) is a table."""
    d, g, w, m = rep["design"], rep["geometry"], rep["winding"], rep["materials"]
    s, mx, e = rep["at_sailing"], rep["at_max_rpm"], rep["electrical"]
    mm = lambda x: f"{x * 1e3:.1f} mm"  # noqa: E731
    paths = w["parallel_paths"]
    sections = [
        ["Objectives", objective_rows + [["stands for", f"{count} {plural(count, 'front design')} (show them: neighbours)"]]],
        ["Parts", [
            ["magnets", f"{2 * w['poles']} x {d['magnet']} (2 rotors x {w['poles']} poles)"],
            ["magnet bill", f"{m['magnet_cost']:.2f} {currency}"],
            ["rotor discs", f"2 x {d['disc']} ({m['disc_cost']:.2f} {currency})"],
            ["wire", f"{d['wire']}: {m['wire_length_m']:.0f} m, {m['copper_mass_kg']:.2f} kg "
                     f"({m['wire_cost']:.2f} {currency} with margin)"],
        ]],
        ["Coil", [
            ["ring radius", f"{d['ring_radius_mm']:g} mm"],
            ["shape", former_text(g)],
            ["leg width", mm(g["coil_leg_width_m"])],
            ["coil thickness", f"{g['coil_thickness_m'] * 1e3:.2f} mm"],
            ["turns x strands in hand", f"{d['turns']} x {d['strands']}"],
            ["stator / face gap", f"{g['stator_thickness_m'] * 1e3:.2f} / {g['face_gap_m'] * 1e3:.2f} mm"],
        ]],
        ["Winding", [
            ["coils / poles", f"{w['coils']} / {w['poles']} (layout {d['layout']} x{d['multiple']})"],
            ["series coils per path", str(w["series_coils_per_path"])],
            ["parallel paths", f"{paths} {plural(paths, 'path')}"],
            ["connection", w["connection"]],
            ["winding factor", f"{w['winding_factor']:.3f}"],
        ]],
        ["Performance at sailing rpm", [
            ["shaft speed", f"{s['rpm']:.0f} rpm (cut-in {rep['cut_in_rpm']:.0f} rpm)"],
            ["charge current", f"{s['charge_current_A']:.2f} A ({s['battery_power_W']:.1f} W)"],
            ["drag torque", f"{s['drag_torque_Nm']:.3f} N m"],
            ["efficiency", f"{100 * s['efficiency']:.0f} %"],
            ["coil / magnet temperature", f"{temperature_text(s['coil_temperature_C'], s['thermal_runaway'])}"
                                          f" / {s['magnet_temperature_C']:.0f} {DEG_C}"],
            ["open-circuit at max rpm", f"{mx['open_circuit_line_rms_V']:.0f} V rms at {mx['rpm']:.0f} rpm"],
            ["rotor attraction", f"{e['axial_attraction_N']:.0f} N"],
        ]],
    ]
    if "sailing_profile" in rep:
        sections.append([
            f"Over the sailing profile: {rep['amp_hours_per_day']:.1f} A h/day, mean added drag "
            f"{rep['mean_added_drag_N']:.0f} N",
            [[f"{r['boat_speed_kn']:g}", f"{r['hours_per_day']:g}",
              "stalled" if r["stalled"] else f"{r['rpm']:.0f}", f"{r['charge_current_A']:.2f}",
              f"{r['added_drag_N']:.0f}", temperature_text(r["coil_temperature_C"], r.get("thermal_runaway"))]
             for r in rep["sailing_profile"]],
            ["boat speed [kn]", "h/day", "loaded [rpm]", "charge [A]", "added drag [N]", f"coil [{DEG_C}]"]])
    sections.append(["Values in front.csv", values])
    return {"id": design_id, "feasible": rep["feasible"], "sections": sections,
            "warnings": list(rep["warnings"]) + list(rep["problems"])}


DEFAULT_SHOW = 300
"""Designs drawn by default (`afpm front --show N`): a 20 000-design front stays readable and light."""


def _design_label(rec, coils, poles):
    return (f"{rec['magnet']}, {coils} {plural(coils, 'coil')} / {poles} poles, ring {rec['ring_radius_mm']:g} mm, "
            f"{rec['coil_shape']} coils, "
            f"{rec['turns']} turns x {rec['strands']} of {rec['wire']}, "
            f"{rec['parallel_paths']} {plural(rec['parallel_paths'], 'path')}, {rec['connection']}")


def page_data(front, run_dir=None, show=DEFAULT_SHOW, reports=None) -> dict:
    """Everything the page's script needs, as plain JSON-ready values.

    `front` is a `front_data.FrontData` (front.csv and the run's snapshot). Every front design is
    listed (id, objectives, a one-line description, the drawn design it is nearest to); the panels
    and the plots hold the `show` drawn ones, chosen by `front_data.representatives`.
    """
    run_dir = Path(run_dir if run_dir is not None else front.dir)
    evaluator, sc, cur = front.evaluator, front.scenario, front.scenario.currency
    ids, batch, cols = front.ids, front.batch, front.columns
    n = len(ids)
    shown, owner = representatives(front.minimised(), max(1, int(show)))
    counts = np.bincount(owner, minlength=len(shown)) if n else np.empty(0, int)
    sub = batch.take(shown) if n else batch
    if reports is None:
        reports = front_reports(evaluator, sub)[0] if n else []
    objectives = list(front.objectives)
    obj = [{"name": o, "label": column_label(o, cur),
            "all": [_g(x, 4) for x in cols[o]] if n else [],
            "text": [format_value(o, x, cur) for x in cols[o][shown]] if n else []} for o in objectives]
    records = batch.records(front.catalogs) if n else []
    coils = evaluator.layout["coils_per_unit"][batch.layout] * batch.multiple
    poles = evaluator.layout["poles_per_unit"][batch.layout] * batch.multiple
    labels = [_design_label(records[i], int(coils[i]), int(poles[i])) for i in range(n)]
    wires = evaluator.catalogs.wires["bare_diameter_m"].to_numpy()
    shown_ids = [ids[i] for i in shown]
    hover = [escape(f"{ids[i]}: " + ", ".join(o["text"][k] for o in obj)
                    + f" | stands for {int(counts[k])} {plural(int(counts[k]), 'design')} | {labels[i]}",
                    quote=False)  # plotly decodes &lt; &gt; &amp; in labels but shows &quot; raw
             for k, i in enumerate(shown)]
    numeric = [c for c in front.numeric_columns() if c not in objectives]
    run_arg = shlex.quote(str(run_dir))
    dims = [{"label": o["label"], "values": [o["all"][i] for i in shown]} for o in obj] + [
        {"label": "turns", "values": [int(x) for x in sub.turns]},
        {"label": "strands", "values": [int(x) for x in sub.strands]},
        {"label": "ring radius [mm]", "values": [_g(x * 1e3, 4) for x in sub.ring_radius_m]},
        {"label": "poles", "values": [int(x) for x in poles[shown]]},
        {"label": "coils", "values": [int(x) for x in coils[shown]]},
        {"label": "wire diameter [mm]", "values": [_g(wires[k] * 1e3, 4) for k in sub.wire]},
        {"label": "coil shape (0 rectangular, 1 keystone)", "values": [int(x) for x in sub.coil_shape]},
    ] if n else []
    return {
        "ids": shown_ids,
        "hover": hover,
        "counts": [int(c) for c in counts],
        "objectives": [{"name": o["name"], "label": o["label"],
                        "values": [o["all"][i] for i in shown]} for o in obj],
        "dims": dims,
        "panels": [_panel(r, ids[i], cur, [[o["label"], o["text"][k]] for o in obj], int(counts[k]),
                          [[column_label(c, cur), format_value(c, cols[c][i], cur)] for c in numeric])
                   for k, (i, r) in enumerate(zip(shown, reports))],
        "all": {"ids": list(ids), "owner": [int(x) for x in owner], "labels": labels,
                "objectives": [o["all"] for o in obj]},
        "command": f"afpm pick {run_arg} ",
        "currency": cur,
        "sailing_rpm": sc.sailing_rpm,
        "palette": PALETTE,
        "method": REPRESENTATIVES_NOTE,
    }


REPRESENTATIVES_NOTE = (
    "Drawn: every objective's best and worst design, the designs nearest the ideal point (every "
    "objective at its best, objectives scaled 0-1 over the front), then the rest by farthest-point "
    "sampling, so every design of the front is near a drawn one; each drawn design stands for the "
    "designs nearest to it. Every design stays in front.csv and can be picked.")


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
.method{font-size:.78em;color:%(grey)s;margin:4px 6px}
#panel table.grid td, #panel table.grid th{text-align:right;font-size:.9em}
#panel table.grid td:first-child{width:auto;color:%(ink)s}
#panel button{background:%(teal)s;color:#fff;border:0;border-radius:3px;padding:3px 10px;cursor:pointer;margin:4px 0}
"""

_SCRIPT = r"""
(function(){
"use strict";
var note = document.getElementById("count");
function bytesOf(id){
  var b = atob(document.getElementById(id).textContent.trim()), u = new Uint8Array(b.length);
  for (var i = 0; i < b.length; i++) u[i] = b.charCodeAt(i);
  return u;
}
function inflate(id){
  return new Response(new Blob([bytesOf(id)]).stream().pipeThrough(new DecompressionStream("gzip"))).text();
}
if (typeof DecompressionStream === "undefined"){
  note.textContent = "This page unpacks its plotting library and data offline and needs a browser from 2023 or later.";
  return;
}
Promise.all([inflate("afpm-plotly"), inflate("afpm-data")]).then(function(parts){
  (0, eval)(parts[0]);  // plotly.js, in the global scope as its own script tag would run it
  start(JSON.parse(parts[1]));
}).catch(function(err){ note.textContent = "could not open the page: " + err; window.afpmError = String(err); });

function start(D){
window.afpmData = D;
var P = D.palette, O = D.objectives, A = D.all, n = D.ids.length, N = A.ids.length;
var byId = {}; A.ids.forEach(function(id, j){ byId[id] = j; });
var drawnAt = {}; D.ids.forEach(function(id, k){ drawnAt[byId[id]] = k; });
function el(tag, text){ var e = document.createElement(tag); if (text !== undefined) e.textContent = text; return e; }
var panel = document.getElementById("panel-body");
var scatter = document.getElementById("scatter");
var X = O.length > 1 ? 1 : 0, Y = 0;
function neighbours(k){ var out = []; for (var j = 0; j < N; j++) if (A.owner[j] === k) out.push(j); return out; }
function commandBlock(id){
  panel.appendChild(el("h3", "Build sheet"));
  panel.appendChild(el("p", "Print its build sheet (parts, magnet layout, templates, wiring, cautions) with:"));
  var c = el("code", D.command + id); c.id = "pick-command"; panel.appendChild(c);
}
function highlight(j){
  Plotly.restyle(scatter, {x: [[A.objectives[X][j]]], y: [[A.objectives[Y][j]]]}, [2]);
  window.afpmHighlighted = A.ids[j];
}
function showNeighbours(k){
  var js = neighbours(k);
  Plotly.restyle(scatter, {x: [js.map(function(j){ return A.objectives[X][j]; })],
                           y: [js.map(function(j){ return A.objectives[Y][j]; })],
                           text: [js.map(function(j){ return A.ids[j] + ": " + A.labels[j]; })],
                           customdata: [js]}, [1]);
  window.afpmNeighbours = js.length;
  return js.length;
}
function show(k){
  var p = D.panels[k];
  panel.replaceChildren();
  panel.appendChild(el("h2", "Design " + p.id + (p.feasible ? "" : " (fails a limit)")));
  var b = el("button", "show the " + D.counts[k] + " designs it stands for"); b.type = "button"; b.id = "neighbours";
  b.addEventListener("click", function(){ showNeighbours(k); });
  panel.appendChild(b);
  p.sections.forEach(function(sec){
    panel.appendChild(el("h3", sec[0]));
    var t = el("table");
    if (sec.length > 2){
      var hr = el("tr"); sec[2].forEach(function(h){ hr.appendChild(el("th", h)); }); t.appendChild(hr);
    }
    sec[1].forEach(function(row){
      var tr = el("tr"); row.forEach(function(cell){ tr.appendChild(el("td", cell)); }); t.appendChild(tr);
    });
    if (sec.length > 2) t.className = "grid";
    panel.appendChild(t);
  });
  if (p.warnings.length){
    panel.appendChild(el("h3", "Warnings"));
    var ul = el("ul"); p.warnings.forEach(function(w){ ul.appendChild(el("li", w)); }); panel.appendChild(ul);
  }
  commandBlock(p.id);
  window.afpmShown = p.id;
  highlight(byId[p.id]);
}
function showOther(j){
  if (j in drawnAt) { show(drawnAt[j]); return; }
  var k = A.owner[j];
  panel.replaceChildren();
  panel.appendChild(el("h2", "Design " + A.ids[j]));
  panel.appendChild(el("p", "Not drawn: one of the " + D.counts[k] + " designs drawn design " + D.ids[k] +
                            " stands for. " + A.labels[j] + "."));
  var t = el("table");
  O.forEach(function(o, q){ var tr = el("tr"); tr.appendChild(el("td", o.label));
    tr.appendChild(el("td", String(A.objectives[q][j]))); t.appendChild(tr); });
  panel.appendChild(t);
  var b = el("button", "show design " + D.ids[k]); b.type = "button";
  b.addEventListener("click", function(){ show(k); });
  panel.appendChild(b);
  commandBlock(A.ids[j]);
  window.afpmShown = A.ids[j];
  highlight(j);
}
function goTo(text){
  var id = String(text).trim().toUpperCase();
  if (/^[0-9]+$/.test(id)) id = "D" + id;
  if (!(id in byId)) return false;
  showOther(byId[id]);
  return true;
}
window.afpmShow = goTo;
function scaled(v, lo, hi){ var a = Math.min.apply(null, v), b = Math.max.apply(null, v);
  return v.map(function(x){ return b > a ? lo + (hi - lo) * (x - a) / (b - a) : (lo + hi) / 2; }); }
var sizeBy = O.length > 2 ? O[2] : null, colourBy = O.length > 3 ? O[3] : null;
var title = O[Y].label + " against " + O[X].label + (sizeBy ? "; marker size: " + sizeBy.label : "");
var marker = {size: sizeBy ? scaled(sizeBy.values, 6, 24) : 9, line: {color: P.navy, width: 0.6}, opacity: 0.9,
              color: colourBy ? colourBy.values : P.teal};
if (colourBy){ marker.colorscale = [[0, P.teal], [0.5, P.sand], [1, P.rust]];
  marker.colorbar = {title: {text: colourBy.label}, thickness: 14}; }
Plotly.newPlot(scatter, [{
  type: "scatter", mode: "markers", x: O[X].values, y: O[Y].values, text: D.hover, name: "drawn",
  customdata: D.ids.map(function(id){ return byId[id]; }), hovertemplate: "%{text}<extra></extra>", marker: marker,
  selected: {marker: {opacity: 1}}, unselected: {marker: {opacity: 0.08}}
}, {type: "scatter", mode: "markers", x: [], y: [], text: [], customdata: [], name: "neighbours",
    hovertemplate: "%{text}<extra></extra>", marker: {size: 5, color: P.grey, opacity: 0.7}},
   {type: "scatter", mode: "markers", x: [], y: [], name: "highlighted", hoverinfo: "skip",
    marker: {size: 26, color: "rgba(0,0,0,0)", line: {color: P.rust, width: 3}}}], {
  title: {text: title, font: {size: 14, color: P.navy}, x: 0.01, xanchor: "left"},
  xaxis: {title: {text: O[X].label}, gridcolor: P.sand, zeroline: false},
  yaxis: {title: {text: O[Y].label}, gridcolor: P.sand, zeroline: false},
  showlegend: false, plot_bgcolor: "#ffffff", paper_bgcolor: "#ffffff", hovermode: "closest",
  font: {family: "system-ui, sans-serif", color: P.ink}, margin: {l: 60, r: 10, t: 40, b: 50}, height: 460
}, {displaylogo: false, responsive: true});
scatter.on("plotly_click", function(ev){
  if (!ev.points || !ev.points.length) return;
  var pt = ev.points[0], curve = pt.curveNumber || 0;
  if (curve === 0) show(pt.pointIndex);
  else if (curve === 1) showOther(pt.customdata);
});
var par = document.getElementById("parcoords");
function dimensions(){ return D.dims.map(function(d){ return {label: d.label, values: d.values}; }); }
if (n) Plotly.newPlot(par, [{
  type: "parcoords",
  line: {color: O[0].values, colorscale: [[0, P.sand], [0.5, P.teal], [1, P.navy]], showscale: false},
  dimensions: dimensions(), labelfont: {size: 11, color: P.navy}, tickfont: {size: 10}, labelangle: -20
}], {title: {text: "Objectives and main choices of the drawn designs (line colour: " + O[0].label +
                   "): drag along an axis to filter", font: {size: 14, color: P.navy}, x: 0.01, xanchor: "left"},
     paper_bgcolor: "#ffffff", margin: {l: 50, r: 60, t: 110, b: 20}, height: 430,
     font: {family: "system-ui, sans-serif", color: P.ink}}, {displaylogo: false, responsive: true});
var summary = n + " of " + N + " front designs drawn";
function applyFilter(){
  var ds = par.data[0].dimensions, keep = [];
  for (var i = 0; i < n; i++){
    var ok = true;
    for (var j = 0; j < ds.length && ok; j++){
      var r = ds[j].constraintrange; if (!r || !r.length) continue;
      var rs = Array.isArray(r[0]) ? r : [r], v = D.dims[j].values[i], any = false;
      for (var k = 0; k < rs.length; k++){ if (v >= rs[k][0] && v <= rs[k][1]) { any = true; break; } }
      ok = any;
    }
    if (ok) keep.push(i);
  }
  Plotly.restyle(scatter, {selectedpoints: [keep.length === n ? null : keep]}, [0]);
  summary = keep.length + " of " + n + " drawn designs kept by the filters (" + N + " on the front)";
  note.textContent = summary;
  window.afpmKept = keep.length;
}
if (n) par.on("plotly_restyle", applyFilter);
document.getElementById("clear").addEventListener("click", function(){
  if (n) { Plotly.restyle(par, {"dimensions": [dimensions()]}); applyFilter(); }
  Plotly.restyle(scatter, {x: [[]], y: [[]]}, [1]);
});
document.getElementById("goto").addEventListener("change", function(ev){
  var text = ev.target.value.trim();
  note.textContent = goTo(text) ? summary : "no design " + text + " on this front";
});
note.textContent = summary;
if (n === 0) panel.replaceChildren(el("p", "This run has no feasible design yet: nothing to show."));
window.afpmReady = true;
}
})();
"""


def packed(data: bytes) -> str:
    """gzip (reproducible: no time stamp) then base64: text with no markup characters at all."""
    return base64.b64encode(gzip.compress(data, compresslevel=9, mtime=0)).decode("ascii")


def unpacked(text: str) -> bytes:
    """The inverse of `packed` (for tests and scripts that read a page's data)."""
    return gzip.decompress(base64.b64decode(text))


def read_page_data(html: str) -> dict:
    """The data block of a front page's text, as the page's own script reads it."""
    start = html.index('id="afpm-data">') + len('id="afpm-data">')
    return json.loads(unpacked(html[start:html.index("</script>", start)]))


def front_page_html(data: dict, title: str, subtitle: str) -> str:
    """The whole page as text: plotly.js and the data are gzip + base64 blocks the page unpacks
    (about 2 MB of it is plotly.js; unpacked it would be 4.8 MB)."""
    css = _CSS % PALETTE
    return "\n".join([
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{escape(title)}</title>",
        f"<style>{css}</style>",
        f'<script type="application/gzip+base64" id="afpm-plotly">'
        f'{packed(plotly.offline.get_plotlyjs().encode("utf-8"))}</script>',
        "</head><body>",
        f"<header><h1>{escape(title)}</h1><p>{escape(subtitle)}</p></header>",
        "<main><div id=\"plots\">",
        '<div class="card"><div id="scatter"></div></div>',
        '<div class="card"><p class="tools"><span id="count">opening the page ...</span> '
        '<button id="clear" type="button">clear filters and neighbours</button> '
        '<label>show design <input id="goto" placeholder="D123"></label></p>'
        '<div id="parcoords"></div>'
        f'<p class="method">{escape(data.get("method", ""))}</p></div>',
        '</div><aside id="panel"><div id="panel-body"><p>Click a design in the chart to see its parts, '
        "coil, winding and performance, and the command that prints its build sheet.</p></div></aside></main>",
        '<p class="safety">Safety: guard the shaft and coupling; strong magnets pinch, shatter and '
        "affect pacemakers; always charge through a regulator or charge controller with a fuse close "
        "to the battery; disconnect the generator before motoring (its open-circuit voltage rises with "
        "rpm). Follow local codes, the applicable marine electrical standards and a qualified marine "
        "electrician.</p>",
        f'<script type="application/gzip+base64" id="afpm-data">{packed(script_json(data).encode("utf-8"))}'
        "</script>",
        f"<script>{_SCRIPT}</script>",
        "</body></html>",
    ])


def write_front_page(run, show: int = DEFAULT_SHOW) -> Path:
    """Write (or redraw) front.html in the run folder from its data files; returns its path."""
    run_dir = Path(getattr(run, "dir", run))
    front = load_front(run_dir)
    data = page_data(front, run_dir, show=show)
    sc, meta = front.scenario, front.meta
    title = f"Pareto front: {sc.name}, run {run_dir.name}"
    objectives = ", ".join(column_label(o, sc.currency) for o in front.objectives)
    subtitle = (f"{len(front.ids)} designs on the front after {meta.get('evaluations', '?')} evaluated "
                f"({meta.get('status', '?')}), {len(data['ids'])} drawn; objectives: {objectives}; "
                f"sailing at {sc.sailing_rpm:g} rpm, charging at {sc.battery_charging_V:g} V; prices in "
                f"{sc.currency} from the run's catalog snapshot")
    path = run_dir / FRONT_PAGE
    with RunLock(run_dir):
        write_atomic(path, front_page_html(data, title, subtitle))
    return path
