"""front.html: it parses, holds every front design, opens offline, and keeps catalog text as text."""

import csv
import io
import json
import shutil
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from optimiser.cli import app
from optimiser.report.front_page import FRONT_PAGE, page_data, script_json, write_front_page
from optimiser.search.run import Budget, SearchRun, create_run, run_search

ROOT = Path(__file__).resolve().parent.parent
CATALOGS = ROOT / "catalogs"
PAYLOAD = "<script>alert(1)</script>\"&'"


def _small_run(path, catalogs=CATALOGS, evaluations=600, population=30):
    run_dir = create_run(path, None, catalogs, seed=2, population=population,
                         budget=Budget(evaluations=evaluations))
    run = SearchRun(run_dir)
    assert run_search(run) == "finished"
    return run


def hostile_catalogs(target: Path) -> Path:
    """The demo catalogs with every magnet id turned into markup (ids stay unique)."""
    shutil.copytree(CATALOGS, target)
    path = target / "magnets.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    out, header_seen = [], False
    for line in lines:
        if line.startswith("#") or not line.strip():
            out.append(line)
            continue
        cells = next(csv.reader([line]))
        if header_seen:
            cells[0] = f"{PAYLOAD}{len(out)}"
        header_seen = True
        buf = io.StringIO()
        csv.writer(buf, lineterminator="").writerow(cells)
        out.append(buf.getvalue())
    path.write_text("\n".join(out) + "\n", encoding="utf-8")
    return target


class _Page(HTMLParser):
    """Collects tags, script bodies and external references."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.scripts, self.external = [], [], []
        self._in_script = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append(tag)
        for key in ("src", "href"):
            if a.get(key):
                self.external.append((tag, a[key]))
        if tag == "link":
            self.external.append((tag, a.get("href")))
        if tag == "script":
            self._in_script = [a, []]

    def handle_data(self, data):
        if self._in_script is not None:
            self._in_script[1].append(data)

    def handle_endtag(self, tag):
        if tag == "script" and self._in_script is not None:
            self.scripts.append((self._in_script[0], "".join(self._in_script[1])))
            self._in_script = None


def _parse(path):
    page = _Page()
    page.feed(Path(path).read_text(encoding="utf-8"))
    page.close()
    return page


def _embedded(page):
    data = [body for attrs, body in page.scripts if attrs.get("id") == "afpm-data"]
    assert len(data) == 1
    return json.loads(data[0])


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    return _small_run(tmp_path_factory.mktemp("front") / "run")


def _front_ids(run_dir):
    with open(run_dir / "front.csv", newline="") as fh:
        return [row["id"] for row in csv.DictReader(fh)]


def test_page_parses_and_holds_every_front_design(demo_run):
    path = write_front_page(demo_run)
    page = _parse(path)
    data = _embedded(page)
    ids = _front_ids(demo_run.dir)
    assert len(ids) > 3
    assert data["ids"] == ids
    assert [p["id"] for p in data["panels"]] == ids
    for name in ("charge", "torque", "cost", "temperature"):
        assert len(data["objectives"][name]) == len(ids)
    # Offline: no script, stylesheet, font or image is fetched; plotly.js is inline (script 1).
    assert page.external == []
    assert len(page.scripts) == 3 and "plotly" in page.scripts[0][1][:3000].lower()


def test_panel_values_match_front_csv(demo_run):
    """The panel and the plotted objectives repeat front.csv's numbers (written by the search)."""
    data = _embedded(_parse(write_front_page(demo_run)))
    with open(demo_run.dir / "front.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for k, row in enumerate(rows):
        assert data["objectives"]["charge"][k] == pytest.approx(float(row["charge_current_A"]), rel=1e-3, abs=1e-4)
        assert data["objectives"]["cost"][k] == pytest.approx(float(row["magnet_cost"]), rel=1e-3)
        assert data["variables"]["turns"][k] == int(row["turns"])
        text = json.dumps(data["panels"][k])
        assert row["magnet"] in text and row["wire"] in text


def test_search_command_writes_front_page(tmp_path, runner):
    run_dir = tmp_path / "cli_run"
    result = runner.invoke(app, ["search", "--evaluations", "150", "--population", "20",
                                 "--catalogs", str(CATALOGS), "--run", str(run_dir)])
    assert result.exit_code == 0, result.output
    assert (run_dir / FRONT_PAGE).is_file()
    assert "front page:" in result.output
    (run_dir / FRONT_PAGE).unlink()
    result = runner.invoke(app, ["front", str(run_dir)])
    assert result.exit_code == 0, result.output
    assert _embedded(_parse(run_dir / FRONT_PAGE))["ids"] == _front_ids(run_dir)


def test_front_command_on_a_folder_without_a_run_exits_2(tmp_path, runner):
    result = runner.invoke(app, ["front", str(tmp_path)])
    assert result.exit_code == 2
    assert "run.json missing" in result.output


def test_script_json_leaves_no_markup_characters():
    obj = {"id": PAYLOAD, "list": ["</script><!--", "a&b", "\u2028"]}
    text = script_json(obj)
    assert not set("<>&") & set(text)
    assert json.loads(text) == obj


def test_injected_catalog_text_stays_text(tmp_path):
    run = _small_run(tmp_path / "run", hostile_catalogs(tmp_path / "catalogs"))
    html = write_front_page(run).read_text(encoding="utf-8")
    assert "<script>alert" not in html
    assert "alert(1)</script>" not in html
    page = _parse(tmp_path / "run" / FRONT_PAGE)
    assert page.tags.count("script") == 3  # ours only: plotly.js, the data, the page script
    data = _embedded(page)
    assert data["ids"]
    # The id arrives in the data as text (JSON.parse gives it back) and escaped in hover labels.
    texts = [cell for p in data["panels"] for _, rows in p["sections"] for row in rows for cell in row]
    assert any(PAYLOAD in t for t in texts)
    assert all("<" not in h for h in data["hover"]) and "&lt;script&gt;" in data["hover"][0]


def test_page_stays_small_for_2000_designs(demo_run):
    """Size of the embedded data for a 2000-design front (the demo front repeated)."""
    ids, batch = demo_run.front_designs()
    index = np.resize(np.arange(len(ids)), 2000)
    big = batch.take(index)
    data = page_data(demo_run.state.problem.evaluator, [f"D{k}" for k in range(2000)], big, demo_run.dir)
    size = len(script_json(data).encode())
    print(f"embedded data for 2000 designs: {size / 1e6:.2f} MB")
    assert size < 2000 * 2500  # budget: 2.5 kB a design, so the page stays a few MB beside plotly.js
