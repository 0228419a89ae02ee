"""Writing into folders a user may have received from someone else: atomically, never through a link.

Every file afpm writes into a run folder goes through `write_atomic` (or `atomic_writer` to stream,
e.g. a pickle). The bytes go to a temporary file with a fresh random name, created exclusively
(O_CREAT | O_EXCL, and O_NOFOLLOW where the OS has it) in the target's own folder, so no file or
link planted under a predictable name can redirect the write; the file is flushed and fsynced and
then renamed over the target, and the folder is fsynced where the OS allows, so a crash at any
moment leaves either the old file or the new one, never half of one. A target that is itself a
symbolic link is refused: afpm never writes through a link.

`RunLock` is the run-folder lock: an OS advisory lock (flock on POSIX) on the folder's `lock`
file, released by the OS when the holding process ends however it ends (kill -9 included), with
the holder's pid in the file for the message a second process prints.
"""

from __future__ import annotations

import contextlib
import os
import secrets
from pathlib import Path

from .errors import InputError, Problem

__all__ = ["write_atomic", "atomic_writer", "RunLock", "LOCK_FILE", "refuse_link", "fsync_dir"]

LOCK_FILE = "lock"
_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_BINARY = getattr(os, "O_BINARY", 0)


def refuse_link(path) -> None:
    """InputError if `path` is a symbolic link (a received folder may hold one pointing anywhere)."""
    if Path(path).is_symlink():
        raise InputError([Problem(str(path), None, None, "is a symbolic link; afpm never writes or "
                                  "reads run files through a link (remove the link and retry)")])


def fsync_dir(folder) -> None:
    """fsync a folder so a rename in it survives a power cut (a no-op where the OS cannot)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_writer(path):
    """Context manager yielding a binary file; on a clean exit its bytes replace `path` atomically.

    On an exception the temporary file is removed and `path` is untouched.
    """
    path = Path(path)
    refuse_link(path)
    folder = path.parent
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | _NOFOLLOW | _BINARY
    for _ in range(100):
        tmp = folder / f".{path.name}.{secrets.token_hex(8)}.tmp"
        try:
            fd = os.open(tmp, flags, 0o644)
            break
        except FileExistsError:
            continue
    else:  # pragma: no cover - 100 collisions of 64 random bits
        raise FileExistsError(f"could not create a temporary file in {folder}")
    try:
        with os.fdopen(fd, "wb") as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        refuse_link(path)  # planted while we wrote? (os.replace would only swap the link itself)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    fsync_dir(folder)


def write_atomic(path, data: str | bytes) -> None:
    """Replace `path` by `data` (str is written as UTF-8) so a crash leaves the old or the new file."""
    if isinstance(data, str):
        data = data.encode("utf-8")
    with atomic_writer(path) as fh:
        fh.write(data)


class RunLock:
    """Exclusive lock of a run folder while a process writes in it (re-entrant within a process).

    ``RunLock(folder).acquire()`` raises InputError naming the holder's pid when another process
    holds it. The OS drops the lock when the holder exits, so a killed run never leaves it stuck.
    """

    _held: dict[str, list] = {}   # real path of the folder -> [fd, count] held by this process

    def __init__(self, folder):
        self.folder = Path(folder)
        self.key = os.path.realpath(self.folder)

    def acquire(self):
        held = self._held.get(self.key)
        if held is not None:
            held[1] += 1
            return self
        path = self.folder / LOCK_FILE
        refuse_link(path)
        fd = os.open(path, os.O_RDWR | os.O_CREAT | _NOFOLLOW | _BINARY, 0o644)
        try:
            if not _try_lock(fd):
                raise InputError([Problem(str(self.folder), None, None,
                                          f"in use: afpm process {_holder(fd)} is running a search in "
                                          "this folder; wait for it to finish (or stop it with Ctrl-C) "
                                          "and retry")])
            os.ftruncate(fd, 0)
            os.write(fd, f"{os.getpid()}\n".encode())
        except BaseException:
            os.close(fd)
            raise
        self._held[self.key] = [fd, 1]
        return self

    def release(self):
        held = self._held.get(self.key)
        if held is None:
            return
        held[1] -= 1
        if held[1] == 0:
            del self._held[self.key]
            os.close(held[0])   # closing the descriptor drops the lock

    def __enter__(self):
        return self.acquire()

    def __exit__(self, *exc):
        self.release()
        return False


def _holder(fd) -> str:
    try:
        text = os.pread(fd, 32, 0).decode("ascii", "replace").strip()
    except OSError:
        text = ""
    return text if text.isdigit() else "(pid unknown)"


def _try_lock(fd) -> bool:
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows
        import msvcrt
        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
            return True
        except OSError:
            return False
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except BlockingIOError:
        return False
