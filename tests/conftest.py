"""Shared fixtures: the demo catalogs, throw-away copies of them, and a CLI runner."""
from __future__ import annotations

import csv
import io
import os
import shutil
import tempfile
from pathlib import Path

import pytest
from typer.testing import CliRunner

REPO = Path(__file__).resolve().parents[1]
DEMO_CATALOGS = REPO / "catalogs"


# The checkpoint key lives in the user's config folder; tests (and the afpm processes they start,
# which inherit the environment) use a throw-away one instead.
os.environ["AFPM_CONFIG_DIR"] = tempfile.mkdtemp(prefix="afpm-test-config-")


@pytest.fixture
def demo_catalogs_dir() -> Path:
    return DEMO_CATALOGS


@pytest.fixture
def catalog_copy(tmp_path) -> Path:
    """A private copy of the demo catalogs to break one thing in."""
    target = tmp_path / "catalogs"
    shutil.copytree(DEMO_CATALOGS, target)
    return target


@pytest.fixture
def runner() -> CliRunner:
    return CliRunner()


def _first_data_line(lines: list[str]) -> int:
    """0-based index of the header line (first line that is neither blank nor a comment)."""
    return next(i for i, ln in enumerate(lines) if ln.strip() and not ln.startswith("#"))


@pytest.fixture
def set_cell():
    """set_cell(path, item_id, column, value) -> spreadsheet row number (1-based) that changed."""
    def _set(path: Path, item_id: str, column: str, value: str) -> int:
        lines = path.read_text(encoding="utf-8").splitlines()
        h = _first_data_line(lines)
        header = next(csv.reader([lines[h]]))
        for i in range(h + 1, len(lines)):
            cells = next(csv.reader([lines[i]]))
            if cells and cells[0] == item_id:
                cells[header.index(column)] = value
                buf = io.StringIO()
                csv.writer(buf, lineterminator="").writerow(cells)
                lines[i] = buf.getvalue()
                path.write_text("\n".join(lines) + "\n", encoding="utf-8")
                return i + 1
        raise KeyError(item_id)
    return _set


@pytest.fixture
def header_row():
    """header_row(path) -> spreadsheet row number of the header line."""
    def _row(path: Path) -> int:
        return _first_data_line(path.read_text(encoding="utf-8").splitlines()) + 1
    return _row


def _strict_loads(text: str):
    """Parse `text` as RFC 8259 JSON: a bare NaN, Infinity or -Infinity fails the test."""
    import json

    def refuse(name):
        pytest.fail(f"bare {name} in JSON output (RFC 8259 has no such token)")

    return json.loads(text, parse_constant=refuse)


@pytest.fixture
def strict_json():
    """strict_json(text) -> the parsed object; fails on NaN/Infinity tokens (RFC 8259)."""
    return _strict_loads
