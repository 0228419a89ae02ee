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
from optimiser.report.front_data import load_front, representatives, topsis
from optimiser.report.front_page import FRONT_PAGE, page_data, read_page_data, script_json, unpacked, write_front_page
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
    return json.loads(unpacked(data[0]))


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
    assert data["all"]["ids"] == ids  # every front design listed; all drawn when fewer than --show
    assert sorted(data["ids"]) == sorted(ids)
    assert [p["id"] for p in data["panels"]] == data["ids"]
    assert [o["name"] for o in data["objectives"]] == list(demo_run.state.problem.evaluator.objectives)
    for o in data["objectives"]:
        assert len(o["values"]) == len(ids)
    # Offline: no script, stylesheet, font or image is fetched; plotly.js is inline (script 1),
    # packed, and the browser never runs the packed blocks (their type is not JavaScript).
    assert page.external == []
    assert len(page.scripts) == 3
    assert page.scripts[0][0]["type"] == "application/gzip+base64"
    assert "plotly" in unpacked(page.scripts[0][1])[:3000].decode().lower()


def test_panel_values_match_front_csv(demo_run):
    """The panel and the plotted objectives repeat front.csv's numbers (written by the search)."""
    data = _embedded(_parse(write_front_page(demo_run)))
    with open(demo_run.dir / "front.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    by_id = {row["id"]: row for row in rows}
    objectives = {o["name"]: o["values"] for o in data["objectives"]}
    turns = next(d["values"] for d in data["dims"] if d["label"] == "turns")
    for k, design_id in enumerate(data["ids"]):
        row = by_id[design_id]
        assert objectives["charge_current_A"][k] == pytest.approx(float(row["charge_current_A"]), rel=1e-3, abs=1e-4)
        assert objectives["magnet_cost"][k] == pytest.approx(float(row["magnet_cost"]), rel=1e-3)
        assert turns[k] == int(row["turns"])
        text = json.dumps(data["panels"][k], ensure_ascii=False)
        assert row["magnet"] in text and row["wire"] in text
        assert "\N{DEGREE SIGN}C" in text and " C " not in text


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
    assert _embedded(_parse(run_dir / FRONT_PAGE))["all"]["ids"] == _front_ids(run_dir)


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


def test_subset_keeps_extremes_and_knee_and_covers_the_front():
    """representatives(): at most N, each objective's best and worst, the design nearest the ideal
    point, every design owned by its nearest drawn one; checked by brute force here."""
    rng = np.random.default_rng(3)
    F = rng.random((3000, 4)) ** 2
    shown, owner = representatives(F, 120)
    assert len(shown) == 120 == len(set(shown.tolist()))
    for j in range(4):
        assert np.argmin(F[:, j]) in shown and np.argmax(F[:, j]) in shown
    Z = (F - F.min(0)) / (F.max(0) - F.min(0))
    assert np.argmin(np.linalg.norm(Z, axis=1)) in shown
    d = ((Z[:, None, :] - Z[shown][None, :, :]) ** 2).sum(axis=2)
    assert np.array_equal(owner, np.argmin(d, axis=1))
    # Farthest-point sampling covers the front far better than the same number drawn at random.
    covering = np.sqrt(d.min(axis=1).max())
    random_pick = rng.choice(3000, 120, replace=False)
    d_random = ((Z[:, None, :] - Z[random_pick][None, :, :]) ** 2).sum(axis=2)
    assert covering < 0.8 * np.sqrt(d_random.min(axis=1).max())
    small, own = representatives(F[:50], 120)
    assert np.array_equal(small, np.arange(50)) and np.array_equal(own, np.arange(50))


def test_topsis_matches_a_hand_worked_example():
    """TOPSIS (Hwang and Yoon 1981) on a 3 x 2 cost matrix worked by hand: vector norms sqrt(1+4+9)
    and sqrt(9+4+1); the middle design is nearest the ideal and farthest from the anti-ideal
    symmetrically, so closeness 0.5 for all three by symmetry except the tie order."""
    best, c = topsis(np.array([[1.0, 3.0], [2.0, 2.0], [3.0, 1.0]]))
    assert c == pytest.approx([0.5, 0.5, 0.5])
    # A dominated design scores lower than the one dominating it; the dominating one wins.
    best, c = topsis(np.array([[1.0, 3.0], [2.0, 2.0], [2.5, 2.5]]))
    assert c[1] > c[2] and best in (0, 1)
    # Hand value: V = F / norm / 2; ideal (1/(2 sqrt 10.25) ...): closeness of row 1 computed here.
    F = np.array([[1.0, 3.0], [2.0, 2.0], [2.5, 2.5]])
    V = F / np.sqrt((F ** 2).sum(0)) / 2
    dp = np.linalg.norm(V[1] - V.min(0))
    dm = np.linalg.norm(V[1] - V.max(0))
    assert c[1] == pytest.approx(dm / (dp + dm))


def test_large_front_page_draws_a_subset_and_lists_every_design(demo_run, tmp_path):
    """A front of 2000 (the demo front repeated): the page draws --show designs, lists all."""
    front = load_front(demo_run.dir)
    index = np.resize(np.arange(len(front.ids)), 2000)
    front.ids = [f"D{k}" for k in range(2000)]
    front.columns = {k: v[index] for k, v in front.columns.items()}
    front.batch = front.batch.take(index)
    data = page_data(front, demo_run.dir, show=50)
    assert len(data["ids"]) == len(data["panels"]) == 50
    assert len(data["all"]["ids"]) == 2000 and sum(data["counts"]) == 2000
    size = len(script_json(data).encode())
    print(f"embedded data for 2000 designs, 50 drawn: {size / 1e6:.2f} MB")
    assert size < 2000 * 400 + 50 * 4000  # listed designs cost ~0.2 kB each, drawn ones a few kB
