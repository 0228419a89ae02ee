"""Build sheets and afpm pick: totals add up, the wiring balances, rules pick right, text stays text."""

import csv
import math
import re
import shutil
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import pytest

from optimiser.cli import app
from optimiser.report.build_sheet import CAUTIONS, _magnet_gaps, md_escape
from optimiser.search.run import Budget, SearchRun, create_run, run_search

ROOT = Path(__file__).resolve().parent.parent
CATALOGS = ROOT / "catalogs"
PAYLOAD = "<script>alert(1)</script>\"&'"


def _small_run(path, catalogs=CATALOGS, seed=2):
    run_dir = create_run(path, None, catalogs, seed=seed, population=30, budget=Budget(evaluations=600))
    run = SearchRun(run_dir)
    assert run_search(run) == "finished"
    return run


def _front(run_dir):
    with open(run_dir / "front.csv", newline="") as fh:
        return list(csv.DictReader(fh))


class _Tables(HTMLParser):
    """table id -> {"body": rows of cell text, "foot": rows}; and whether any script tag appears."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tables, self.scripts, self.text = {}, 0, []
        self._table = self._row = self._cell = None
        self._part = "body"

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "script":
            self.scripts += 1
        if tag == "table":
            self._table = self.tables.setdefault(a.get("id", f"t{len(self.tables)}"), {"body": [], "foot": []})
        elif tag in ("tbody", "thead", "tfoot"):
            self._part = {"tfoot": "foot", "tbody": "body", "thead": "head"}[tag]
        elif tag == "tr" and self._table is not None:
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            if self._part in ("body", "foot"):
                self._table[self._part].append(self._row)
            self._row = None
        elif tag == "table":
            self._table = None


def _sheet(path):
    p = _Tables()
    p.feed(Path(path).read_text(encoding="utf-8"))
    p.close()
    return p


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    return _small_run(tmp_path_factory.mktemp("sheet") / "run")


@pytest.fixture(scope="module")
def picked(run):
    """Build sheets of every front design, written through the CLI."""
    from typer.testing import CliRunner

    runner = CliRunner()
    out = {}
    rows, seen = [], set()
    for row in _front(run.dir):  # up to 5 designs, different windings first
        key = (row["layout"], row["multiple"], row["parallel_paths"], row["connection"])
        if key not in seen and len(rows) < 5:
            seen.add(key)
            rows.append(row)
    for row in rows:
        result = runner.invoke(app, ["pick", str(run.dir), row["id"]])
        assert result.exit_code == 0, result.output
        out[row["id"]] = (row, _sheet(run.dir / f"build-{row['id']}.html"),
                          (run.dir / f"build-{row['id']}.md").read_text(encoding="utf-8"), result.output)
    return out


def _money(text):
    return float(text.split("/")[0].split()[0])


def test_parts_total_equals_the_sum_of_its_lines(picked, run):
    for design_id, (row, sheet, md, _) in picked.items():
        parts = sheet.tables["parts"]
        priced = [r for r in parts["body"] if r[4] != "not priced"]
        assert [r[0] for r in priced] == ["Magnets", "Magnet wire", "Rotor discs"]
        assert any("not priced" in r[4] and "regulator" in r[1] and "fuse" in r[1] for r in parts["body"])
        total = _money(parts["foot"][0][4])
        assert total == pytest.approx(sum(_money(r[4]) for r in priced), abs=1e-9)
        # Quantity x unit price = line total, to the cent (the wire quantity is rounded to 10 g).
        for r in priced:
            qty, unit, line = _money(r[2]), _money(r[3]), _money(r[4])
            tol = 0.006 + (0.005 * unit if "kg" in r[2] else 0.0)
            assert qty * unit == pytest.approx(line, abs=tol), (design_id, r)
        # Independent of the sheet's code: magnets = 2 rotors x poles, poles from the layout catalog.
        layouts = {l["id"]: l for l in csv.DictReader(
            line for line in (run.dir / "catalogs" / "layouts.csv").open() if not line.startswith("#"))}
        poles = int(layouts[row["layout"]]["poles_per_unit"]) * int(row["multiple"])
        assert int(priced[0][2]) == 2 * poles
        assert _money(priced[0][4]) == pytest.approx(float(row["magnet_cost"]), abs=0.01)
        # The Markdown sheet carries the same total.
        assert f"**{parts['foot'][0][4]}**" in md


def test_wiring_table_gives_each_phase_its_coils(picked):
    for design_id, (row, sheet, md, _) in picked.items():
        rows = sheet.tables["wiring"]["body"]
        q = len(rows)
        assert q % 3 == 0 and [int(r[0]) for r in rows] == list(range(1, q + 1))
        paths = int(row["parallel_paths"])
        for phase in "ABC":
            mine = [r for r in rows if r[1] == phase]
            assert len(mine) == q // 3, (design_id, phase)
            for path in range(1, paths + 1):
                assert sum(int(r[4]) == path for r in mine) == q // 3 // paths
        for r in rows:  # reversed coils connect finish first
            assert r[3].startswith("reversed: finish in") == (r[2] == "-")
        assert f"{row['connection']} connection" in " ".join(sheet.text)


def test_every_sheet_carries_the_cautions_and_no_script(picked):
    for _, (row, sheet, md, output) in picked.items():
        text = " ".join(" ".join(sheet.text).split())
        for caution in CAUTIONS:
            assert caution in text
            assert md_escape(caution) in md
        assert sheet.scripts == 0
        assert "Cautions:" in output


def test_reference_recheck_beside_fast_model(picked):
    for design_id, (row, sheet, md, _) in picked.items():
        rows = sheet.tables["recheck"]["body"]
        assert [r[0].split(" [")[0] for r in rows] == ["EMF constant (line, rms per rpm)", "charge current",
                                                     "drag torque", "coil temperature"]
        # The fast column repeats what the search wrote in front.csv.
        assert float(rows[1][1]) == pytest.approx(float(row["charge_current_A"]), abs=6e-4)
        assert float(rows[2][1]) == pytest.approx(float(row["drag_torque_Nm"]), abs=6e-4)
        for r in rows:
            if float(r[1]) == 0.0:  # prints as zero (a design at cut-in): no percent difference
                assert r[3] == "-"
                continue
            fast, ref, diff = float(r[1]), float(r[2]), float(r[3])
            half = 0.5 * 10.0 ** -len(r[1].split(".")[1])  # half a unit of the printed last digit
            tol = 0.05 + 100 * half * (1 / abs(fast) + abs(ref) / fast ** 2)  # propagated rounding
            assert diff == pytest.approx((ref - fast) / fast * 100, abs=tol)


def test_drawings_are_valid_svg_with_every_magnet_and_coil(picked, run):
    design_id, (row, sheet, md, _) = next(iter(picked.items()))
    svg = "{http://www.w3.org/2000/svg}"
    rotor = ET.parse(run.dir / f"build-{design_id}-rotor.svg").getroot()
    stator = ET.parse(run.dir / f"build-{design_id}-stator.svg").getroot()
    ET.parse(run.dir / f"build-{design_id}-performance.svg")
    poles = int(sheet.tables["layout"]["body"][0][1])
    labels = [t.text for t in rotor.iter(svg + "text")]
    assert len(list(rotor.iter(svg + "rect"))) == poles
    assert labels.count("N") == labels.count("S") == poles // 2
    q = len(sheet.tables["wiring"]["body"])
    coil_labels = [t.text for t in stator.iter(svg + "text") if t.text and t.text[0] in "ABC"]
    assert len(coil_labels) == q
    assert f"![rotor drawing](build-{design_id}-rotor.svg)" in md


def test_magnet_gap_of_thin_magnets_is_the_chord():
    # Plane geometry: two points on a circle of radius r, 2 pi / n apart, are 2 r sin(pi / n) apart.
    r, n = 0.1, 12
    inner, mid = _magnet_gaps(r + 0.02, 0.04, 1e-9, n)
    assert inner == pytest.approx(2 * r * math.sin(math.pi / n), rel=1e-6)
    assert mid == pytest.approx(2 * (r + 0.02) * math.sin(math.pi / n), rel=1e-6)
    assert _magnet_gaps(0.05, 0.02, 0.03, 12)[0] < 0  # blocks that overlap show a negative gap


def test_pick_by_rule_chooses_the_best_within_limits(run, runner):
    rows = _front(run.dir)
    ts = sorted(float(r["drag_torque_Nm"]) for r in rows)
    torque = 0.5 * (ts[len(ts) // 2] + ts[len(ts) // 2 + 1])  # between two designs: csv rounding is moot
    ok = [r for r in rows if float(r["drag_torque_Nm"]) <= torque]
    best = max(ok, key=lambda r: float(r["charge_current_A"]))
    result = runner.invoke(app, ["pick", str(run.dir), "--most", "charge", "--max-torque", str(torque),
                                 "--max-magnet-cost", "1e6", "--max-coil-temp", "500"])
    assert result.exit_code == 0, result.output
    assert f"Design {best['id']}:" in result.output
    least = min(rows, key=lambda r: float(r["drag_torque_Nm"]))
    result = runner.invoke(app, ["pick", str(run.dir), "--most", "torque"])
    assert f"Design {least['id']}:" in result.output
    coolest = min(rows, key=lambda r: float(r["coil_temperature_C"]))
    result = runner.invoke(app, ["pick", str(run.dir), "--most", "temperature", "--min-charge", "0"])
    assert f"Design {coolest['id']}:" in result.output


def test_pick_with_no_match_says_so_and_exits_2(run, runner):
    result = runner.invoke(app, ["pick", str(run.dir), "--most", "charge", "--max-torque", "0.0001"])
    assert result.exit_code == 2
    assert "no design on the front has drag torque <= 0.0001 N m" in result.output
    result = runner.invoke(app, ["pick", str(run.dir), "NOPE"])
    assert result.exit_code == 2 and "no design 'NOPE'" in result.output
    result = runner.invoke(app, ["pick", str(run.dir), "--most", "glitter"])
    assert result.exit_code == 2 and "use one of charge, torque, cost, temperature" in result.output


def test_injected_catalog_text_stays_text_in_the_build_sheet(tmp_path, runner):
    cats = tmp_path / "catalogs"
    shutil.copytree(CATALOGS, cats)
    path = cats / "magnets.csv"
    text = path.read_text(encoding="utf-8")
    # Every magnet id gets the markup (kept unique), so the front's designs all carry it.
    lines = [re.sub(r"^(SM-[^,]+)", lambda m: '"' + (PAYLOAD + m.group(1)).replace('"', '""') + '"', ln)
             for ln in text.splitlines()]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    run = _small_run(tmp_path / "run", cats)
    design_id = _front(run.dir)[0]["id"]
    result = runner.invoke(app, ["pick", str(run.dir), design_id])
    assert result.exit_code == 0, result.output
    for name in (f"build-{design_id}.html", f"build-{design_id}.md", f"build-{design_id}-rotor.svg"):
        body = (run.dir / name).read_text(encoding="utf-8")
        assert "<script" not in body and "alert(1)</script>" not in body, name
    sheet = _sheet(run.dir / f"build-{design_id}.html")
    assert sheet.scripts == 0
    assert PAYLOAD in " ".join(sheet.text)  # shown to the reader as the text it is
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in (run.dir / f"build-{design_id}.md").read_text()


def test_evaluate_a_front_design_of_the_run_as_strict_json(run, strict_json):
    # afpm evaluate --run RUN --id ID: the run's own scenario and snapshot, RFC 8259 output.
    from typer.testing import CliRunner

    row = _front(run.dir)[0]
    result = CliRunner().invoke(app, ["evaluate", "--run", str(run.dir), "--id", row["id"], "--json"])
    assert result.exit_code == 0, result.output
    report = strict_json(result.stdout)
    assert report["feasible"] is True
    assert math.isclose(report["at_sailing"]["charge_current_A"], float(row["charge_current_A"]),
                        rel_tol=1e-5)  # (front.csv holds 6 significant digits)


def test_front_csv_and_sheets_name_the_coil_shape_and_draw_its_outline(picked, run):
    # Both shapes are searched by default: front.csv says which each design is, the coil table
    # gives the former, and a keystone coil is drawn as wound (a polygon path, not a rectangle).
    rows = _front(run.dir)
    assert {r["coil_shape"] for r in rows} <= {"rectangular", "keystone"}
    svg = "{http://www.w3.org/2000/svg}"
    for design_id, (row, sheet, md, _) in picked.items():
        cells = {r[0]: r[1] for r in sheet.tables["coil"]["body"]}
        assert cells["coil shape and former"].startswith(row["coil_shape"] + ": former ")
        stator = ET.parse(run.dir / f"build-{design_id}-stator.svg").getroot()
        paths = [p.get("d") for p in stator.iter(svg + "path")]
        assert paths and all(("L" in d) == (row["coil_shape"] == "keystone") for d in paths), paths[:1]
