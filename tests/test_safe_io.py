"""Atomic writes that never follow a link, and the run-folder lock.

The oracle for the lock is the operating system itself: a second process (a real one, started with
subprocess) must be refused while the first holds the lock, and must get it once the first is
killed with SIGKILL (POSIX flock semantics: the lock belongs to the open file, closed at exit).
"""

import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from optimiser.errors import InputError
from optimiser.safe_io import LOCK_FILE, RunLock, atomic_writer, write_atomic

ROOT = Path(__file__).resolve().parent.parent


def test_write_atomic_replaces_the_file_and_leaves_no_temporary(tmp_path):
    target = tmp_path / "front.html"
    target.write_text("old")
    write_atomic(target, "new")
    assert target.read_text() == "new"
    write_atomic(target, b"\x00bytes")
    assert target.read_bytes() == b"\x00bytes"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["front.html"]


@pytest.mark.parametrize("name", ["front.html", "checkpoint.pkl", "run.json", "build-D217.html"])
def test_a_planted_link_at_the_old_temporary_name_redirects_nothing(tmp_path, name):
    # The old writer opened "<name>.tmp" and followed links: a received folder with that name
    # linked to another file of the user's had that file overwritten.
    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    run = tmp_path / "run"
    run.mkdir()
    (run / (name + ".tmp")).symlink_to(victim)
    write_atomic(run / name, "written")
    assert victim.read_text() == "precious"
    assert (run / name).read_text() == "written" and not (run / name).is_symlink()


def test_a_target_that_is_a_link_is_refused(tmp_path):
    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    (tmp_path / "front.html").symlink_to(victim)
    with pytest.raises(InputError, match="symbolic link"):
        write_atomic(tmp_path / "front.html", "x")
    assert victim.read_text() == "precious"


def test_a_failed_stream_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "checkpoint.pkl"
    target.write_bytes(b"old")
    with pytest.raises(RuntimeError):
        with atomic_writer(target) as fh:
            fh.write(b"half")
            raise RuntimeError("killed mid-write")
    assert target.read_bytes() == b"old"
    assert [p.name for p in tmp_path.iterdir()] == ["checkpoint.pkl"]


_HOLD = "import sys, time; from optimiser.safe_io import RunLock; RunLock(sys.argv[1]).acquire(); " \
        "print('held', flush=True); time.sleep(60)"


def test_lock_names_the_holder_and_is_released_when_it_is_killed(tmp_path):
    holder = subprocess.Popen([sys.executable, "-c", _HOLD, str(tmp_path)], cwd=ROOT,
                              stdout=subprocess.PIPE)
    try:
        assert holder.stdout.readline().strip() == b"held"
        with pytest.raises(InputError, match=f"afpm process {holder.pid} is running"):
            RunLock(tmp_path).acquire()
    finally:
        holder.send_signal(signal.SIGKILL)
        holder.wait()
    with RunLock(tmp_path):
        with RunLock(tmp_path):  # re-entrant in one process (search, then its front page)
            pass
        assert (tmp_path / LOCK_FILE).read_text().strip() == str(os.getpid())
