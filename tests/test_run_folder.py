"""Run folders received from someone else, damaged, shared by two processes, or killed while made.

Oracles outside the project: Python's own pickle protocol (a `__reduce__` that calls a function
runs it on unpickling: that is the attack, and the marker file proves whether it ran), the OS
(flock held by a live process, released by SIGKILL; os.fork + SIGKILL for kills at random
moments), and RFC 8259 JSON as parsed by Python's json module with NaN refused.
"""

import json
import os
import pickle
import random
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from optimiser.cli import app
from optimiser.search import folder
from optimiser.search.run import Budget, SearchRun, create_run, run_search

ROOT = Path(__file__).resolve().parent.parent
CATALOGS = ROOT / "catalogs"


class _Marker:
    """Unpickling this creates a file: what a hostile checkpoint would do with os.system."""

    def __init__(self, path):
        self.path = path

    def __reduce__(self):
        return (Path.touch, (Path(self.path),))


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    run_dir = create_run(tmp_path_factory.mktemp("made") / "run", None, CATALOGS, seed=2, population=30,
                         budget=Budget(evaluations=300))
    run = SearchRun(run_dir)
    assert run_search(run) == "finished"
    run.close()
    assert (run_dir / "front.npz").is_file()
    return run_dir


@pytest.fixture
def received(made, tmp_path):
    """A private copy of a finished run, as if sent by another sailor."""
    target = tmp_path / "received"
    shutil.copytree(made, target)
    return target


def _out(result):
    return result.output + (result.stderr if result.stderr_bytes else "")


def _one_line(result):
    text = _out(result).strip()
    assert "Traceback" not in text
    return text


def _hostile(run_dir, marker, authenticated_header):
    payload = pickle.dumps(_Marker(marker))
    data = folder.MAGIC + bytes(folder.TAG_BYTES) + payload if authenticated_header else payload
    (run_dir / "checkpoint.pkl").write_bytes(data)


@pytest.mark.parametrize("header", [False, True], ids=["bare-pickle", "forged-header"])
def test_a_hostile_checkpoint_never_runs(received, tmp_path, runner, header):
    marker = tmp_path / "marker"
    _hostile(received, marker, header)
    first = _front_ids(received)[0]
    for args, code in ((["front", str(received)], 0), (["pick", str(received), first], 0),
                       (["search", "--run", str(received), "--evaluations", "400"], 2)):
        result = runner.invoke(app, args)
        assert result.exit_code == code, _out(result)
        assert not marker.exists(), f"afpm {args[0]} ran code from the checkpoint"
    text = _one_line(result)
    assert "checkpoint.pkl" in text and "never opened" in text and "afpm search --scenario" in text


def _front_ids(run_dir):
    import csv
    with open(run_dir / "front.csv", newline="") as fh:
        return [r["id"] for r in csv.DictReader(fh)]


def test_front_and_pick_work_without_the_checkpoint(received, runner):
    (received / "checkpoint.pkl").unlink()
    assert runner.invoke(app, ["front", str(received)]).exit_code == 0
    result = runner.invoke(app, ["pick", str(received), "--most", "charge"])
    assert result.exit_code == 0, _out(result)


def test_a_link_planted_in_a_received_folder_redirects_no_write(received, tmp_path, runner):
    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    first = _front_ids(received)[0]
    for name in ("front.html.tmp", f"build-{first}.html.tmp", "checkpoint.pkl.tmp", "run.json.tmp"):
        (received / name).symlink_to(victim)
    assert runner.invoke(app, ["front", str(received)]).exit_code == 0
    assert runner.invoke(app, ["pick", str(received), first]).exit_code == 0
    assert runner.invoke(app, ["search", "--run", str(received), "--evaluations", "330"]).exit_code == 0
    assert victim.read_text() == "precious"
    (received / "front.html").unlink()
    (received / "front.html").symlink_to(victim)
    result = runner.invoke(app, ["front", str(received)])
    assert result.exit_code == 2 and "symbolic link" in _one_line(result)
    assert victim.read_text() == "precious"


def _edit(path, old, new):
    path.write_bytes(path.read_bytes().replace(old, new, 1))


def _truncate(path):
    path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])


def _flip_last_byte(path):
    data = bytearray(path.read_bytes())
    data[-1] ^= 1
    path.write_bytes(bytes(data))


def _own_checkpoint_of_another_type(path):
    folder.write_checkpoint(path, {"not": "a search state"})


def _meta(run_dir, change):
    meta = json.loads((run_dir / "run.json").read_text())
    change(meta)
    (run_dir / "run.json").write_text(json.dumps(meta))


DAMAGE = {
    "run.json empty": (lambda d: (d / "run.json").write_text(""), "run.json: is empty"),
    "run.json not JSON": (lambda d: (d / "run.json").write_text("{seed: 1"), "run.json: is not valid JSON"),
    "run.json a list": (lambda d: (d / "run.json").write_text("[1, 2]"), "must hold a JSON object"),
    "run.json NaN": (lambda d: _edit(d / "run.json", b'"elapsed_s": ', b'"elapsed_s": NaN, "x": '),
                     "NaN is not a JSON number"),
    "run.json without budget": (lambda d: _meta(d, lambda m: m.pop("budget")), "key budget: missing"),
    "run.json budget text": (lambda d: _meta(d, lambda m: m.update(budget="lots")),
                             "key budget: must be a JSON dict"),
    "run.json unknown setting": (lambda d: _meta(d, lambda m: m["settings"].update(speed=1)),
                                 "key settings.speed: unknown setting"),
    "run.json population 0": (lambda d: _meta(d, lambda m: m.update(population=0)), "at least 2"),
    "checkpoint empty": (lambda d: (d / "checkpoint.pkl").write_bytes(b""), "checkpoint.pkl: is empty"),
    "checkpoint truncated": (lambda d: _truncate(d / "checkpoint.pkl"), "or was changed since"),
    "checkpoint altered": (lambda d: _flip_last_byte(d / "checkpoint.pkl"), "or was changed since"),
    "checkpoint of an older afpm": (lambda d: (d / "checkpoint.pkl").write_bytes(pickle.dumps([1, 2])),
                                    "older afpm without authentication"),
    "checkpoint of another type": (lambda d: _own_checkpoint_of_another_type(d / "checkpoint.pkl"),
                                   "holds a dict, not a search state"),
    "checkpoint not a file": (lambda d: ((d / "checkpoint.pkl").unlink(), (d / "checkpoint.pkl").mkdir()),
                              "checkpoint.pkl"),
    "snapshot price edited": (lambda d: _edit(d / "catalogs" / "magnets.csv", b"\n", b"\n# edited\n"),
                              "magnets.csv: changed since the run started"),
    "scenario edited": (lambda d: _edit(d / "scenario.toml", b"\n", b"\n# edited\n"),
                        "scenario.toml: changed since the run started"),
    "snapshot file missing": (lambda d: (d / "catalogs" / "wires.csv").unlink(), "wires.csv: missing"),
    "snapshot a link": (lambda d: (shutil.rmtree(d / "catalogs"), (d / "catalogs").symlink_to(CATALOGS)),
                        "catalogs: is a symbolic link"),
    "front data damaged": (lambda d: (d / "front.npz").write_bytes(b"PK\x03\x04junk"), "front.npz: is damaged"),
}


@pytest.mark.parametrize("case", list(DAMAGE))
def test_a_damaged_run_folder_gives_one_line_and_exit_2(received, runner, case):
    damage, expected = DAMAGE[case]
    damage(received)
    commands = []
    if not case.startswith("front"):  # a search rewrites the front data from its checkpoint
        commands += [["search", "--run", str(received), "--evaluations", "400"]]
    if not case.startswith("checkpoint"):  # front and pick never read the checkpoint
        commands += [["front", str(received)], ["pick", str(received), "--most", "charge"]]
    for args in commands:
        result = runner.invoke(app, args)
        text = _one_line(result)
        assert result.exit_code == 2, (args, text)
        assert expected in text, (args, text)


def test_run_option_naming_a_file_or_an_empty_folder(tmp_path, runner):
    note = tmp_path / "note.txt"
    note.write_text("keep me")
    result = runner.invoke(app, ["search", "--evaluations", "40", "--population", "20", "--run", str(note)])
    assert result.exit_code == 2 and "not a folder" in _one_line(result)
    assert note.read_text() == "keep me"
    empty = tmp_path / "empty"
    empty.mkdir()
    result = runner.invoke(app, ["search", "--evaluations", "40", "--population", "20", "--run", str(empty)])
    assert result.exit_code == 0, _out(result)
    assert json.loads((empty / "run.json").read_text())["status"] == "finished"


_SEARCH = [sys.executable, "-m", "optimiser", "search", "--evaluations", "100000", "--population", "30",
           "--seed", "5", "--run"]


def test_two_searches_on_one_folder_one_refuses(tmp_path, runner):
    run_dir = tmp_path / "shared"
    env = dict(os.environ, AFPM_CHECKPOINT_S="0")
    first = subprocess.Popen(_SEARCH + [str(run_dir)], cwd=ROOT, env=env, stdout=subprocess.DEVNULL,
                             stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 60
        while not (run_dir / "front.npz").exists() and time.monotonic() < deadline:
            time.sleep(0.05)
        assert first.poll() is None
        for args in (["search", "--run", str(run_dir)], ["front", str(run_dir)]):
            result = runner.invoke(app, args)
            assert result.exit_code == 2, _out(result)
            assert f"afpm process {first.pid} is running a search" in _one_line(result)
    finally:
        first.send_signal(signal.SIGKILL)
        first.wait()
    result = runner.invoke(app, ["search", "--run", str(run_dir), "--evaluations", "200"])
    assert result.exit_code == 0, _out(result)  # the lock died with its holder


def test_kill_9_while_a_run_is_created_leaves_nothing_or_a_whole_run(tmp_path):
    # Forked children create runs and are SIGKILLed at random moments; after
    # every kill the folder is absent or opens as a run, and the next creation clears leftovers.
    rng = random.Random(12)
    base = tmp_path / "runs"
    base.mkdir()
    t0 = time.perf_counter()
    create_run(tmp_path / "timed", None, CATALOGS, seed=1, population=20, budget=Budget(evaluations=40))
    whole = time.perf_counter() - t0  # kills land over 3 times this (the machine may be busy)
    made = 0
    for attempt in range(24):
        target = base / f"r{attempt}"
        pid = os.fork()
        if pid == 0:  # child: make the run, never return into pytest
            try:
                create_run(target, None, CATALOGS, seed=1, population=20, budget=Budget(evaluations=40))
            finally:
                os._exit(0)
        time.sleep(rng.uniform(0.0, 3.0 * whole))
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        if target.exists():
            made += 1
            SearchRun(target).close()   # opens whole: run.json, inputs, hashes
        assert sorted(p.name for p in base.iterdir() if not p.name.startswith(".")) == \
            sorted(p.name for p in base.iterdir() if p.name.startswith("r") and (p / "run.json").is_file())
    assert made < 24, "no kill landed before the rename"
    create_run(base / "last", None, CATALOGS, seed=1, population=20, budget=Budget(evaluations=40))
    assert not [p for p in base.iterdir() if p.name.startswith(".")], "abandoned partial folders remain"
