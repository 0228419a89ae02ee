"""Reading a run folder as untrusted data: run.json, the input snapshot, the front, the checkpoint.

A run folder may come from someone else ("here is my overnight run"), so nothing read from it may
run code, and every defect is one line naming the file and what is wrong (an `InputError`):

- `run.json` is checked key by key (`read_meta`); the catalog snapshot and `scenario.toml` are
  verified against the SHA-256 hashes `run.json` stores (`load_inputs`): an edited snapshot is
  refused, never used to relabel or re-price designs computed from the original.
- `front.npz` holds the front as integer arrays (cache row of each design, its exact codes), read
  with ``allow_pickle=False`` and range-checked against the catalogs: `afpm front` and `afpm pick`
  need nothing else (`RunView`), never the search state.
- `checkpoint.pkl` (the search state, a pickle: pymoo's algorithm object) is authenticated: an
  HMAC-SHA256 over the pickled bytes with a per-user key kept 0600 in the user's config folder
  (`checkpoint_key`). `read_checkpoint` verifies the tag before a single byte is unpickled, so a
  checkpoint made on another account or computer, or altered, is refused and never opened.
  HMAC-SHA256: RFC 2104 (Krawczyk, Bellare, Canetti 1997) with FIPS 180-4 SHA-256, Python's hmac.

The key folder is ``$AFPM_CONFIG_DIR``, else ``$XDG_CONFIG_HOME/afpm``, else ``~/.config/afpm``.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import os
import pickle
import zipfile
from dataclasses import fields
from pathlib import Path

import numpy as np

from ..catalogs import CATALOG_NAMES, load_catalogs
from ..design import DesignBatch
from ..errors import InputError, Problem
from ..evaluate import Evaluator, Settings
from ..safe_io import atomic_writer, refuse_link
from ..scenario import load_scenario
from ..strict_json import dumps as json_dumps

__all__ = ["RUN_JSON", "SCENARIO", "CATALOGS", "CHECKPOINT", "FRONT_DATA", "read_meta", "load_inputs",
           "sha256_file", "checkpoint_key", "write_checkpoint", "read_checkpoint", "write_front_data",
           "read_front_data", "RunView", "RESTART_HINT"]

RUN_JSON, SCENARIO, CATALOGS, CHECKPOINT = "run.json", "scenario.toml", "catalogs", "checkpoint.pkl"
FRONT_DATA = "front.npz"
MAGIC = b"afpm checkpoint, HMAC-SHA256 of the pickle that follows the tag, format 1\n"
TAG_BYTES = 32
KEY_FILE = "checkpoint.key"
RESTART_HINT = ("its front.csv, afpm front and afpm pick still work (they never read the checkpoint); "
                "to search on, start a new run from its inputs: afpm search --scenario {run}/scenario.toml "
                "--catalogs {run}/catalogs")
_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_CHUNK = 1 << 20

# run.json keys a command relies on, and the types they must have (bool is no int here).
_META_TYPES = {"seed": int, "population": int, "budget": dict, "settings": dict, "chunk": int,
               "catalog_hashes": dict, "status": str, "generations": int, "evaluations": int}


def _problem(path, message):
    return Problem(str(path), None, None, message)


def _is(value, kind):
    if kind is int:
        return isinstance(value, int) and not isinstance(value, bool)
    if kind is float:
        return isinstance(value, (int, float)) and not isinstance(value, bool) and np.isfinite(value)
    return isinstance(value, kind)


def sha256_file(path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(_CHUNK), b""):
            digest.update(block)
    return digest.hexdigest()


def _read_text(path) -> str:
    refuse_link(path)
    try:
        return Path(path).read_bytes().decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError([_problem(path, f"not UTF-8 text ({exc.reason} at byte {exc.start})")]) from None
    except OSError as exc:
        raise InputError([_problem(path, f"cannot be read ({exc.strerror})")]) from None


def read_meta(run_dir) -> dict:
    """run.json of `run_dir`, checked: every problem as one line (file, key, what is wrong)."""
    run_dir = Path(run_dir)
    if not run_dir.exists():
        raise InputError([_problem(run_dir, "no such folder")])
    if not run_dir.is_dir():
        raise InputError([_problem(run_dir, "is a file, not a run folder")])
    path = run_dir / RUN_JSON
    if not path.exists() and not path.is_symlink():
        raise InputError([_problem(run_dir, "no run here (run.json missing): give a folder made by "
                                            "afpm search (to start a run, give a new or empty folder: "
                                            "an existing folder's files are never overwritten)")])
    text = _read_text(path)
    if not text.strip():
        raise InputError([_problem(path, "is empty (the run's record is lost); the run cannot be "
                                         "opened")])
    try:
        meta = json.loads(text, parse_constant=_no_constant)
    except (json.JSONDecodeError, ValueError) as exc:
        raise InputError([_problem(path, f"is not valid JSON ({exc})")]) from None
    if not isinstance(meta, dict):
        raise InputError([_problem(path, f"must hold a JSON object (got {type(meta).__name__})")])
    problems = []

    def bad(key, message):
        problems.append(Problem(str(path), None, key, message, column_label="key"))

    for key, kind in _META_TYPES.items():
        if key not in meta:
            bad(key, "missing")
        elif not _is(meta[key], kind):
            bad(key, f"must be {'a whole number' if kind is int else 'a JSON ' + kind.__name__} "
                     f"(got {json_dumps(meta[key])[:40]})")
    if not problems:
        if meta["population"] < 2:
            bad("population", f"must be at least 2 (got {meta['population']})")
        budget = meta["budget"]
        for key in budget:
            if key not in ("evaluations", "seconds"):
                bad(f"budget.{key}", "unknown key; allowed: evaluations, seconds")
            elif budget[key] is not None and not (_is(budget[key], float) and budget[key] >= 0):
                bad(f"budget.{key}", f"must be null or a number >= 0 (got {json_dumps(budget[key])})")
        kinds = {f.name: type(f.default) for f in fields(Settings)}
        for key, value in meta["settings"].items():
            if key not in kinds:
                bad(f"settings.{key}", "unknown setting; allowed: " + ", ".join(kinds))
            elif not (isinstance(value, kinds[key]) and (kinds[key] is bool or not isinstance(value, bool))):
                bad(f"settings.{key}", f"must be a JSON {kinds[key].__name__} (got {json_dumps(value)})")
        if meta["settings"].get("field_model", "fast") not in ("fast", "reference"):
            bad("settings.field_model", "must be \"fast\" or \"reference\"")
        names = {f"{n}.csv" for n in CATALOG_NAMES}
        if set(meta["catalog_hashes"]) != names:
            bad("catalog_hashes", "must give the SHA-256 of each of " + ", ".join(sorted(names)))
        for name, digest in meta["catalog_hashes"].items():
            if not (isinstance(digest, str) and len(digest) == 64):
                bad(f"catalog_hashes.{name}", "must be a SHA-256 (64 hex digits)")
        scen = meta.get("scenario_sha256")
        if scen is not None and not (isinstance(scen, str) and len(scen) == 64):
            bad("scenario_sha256", "must be the SHA-256 of scenario.toml (64 hex digits)")
    if problems:
        raise InputError(problems)
    return meta


def _no_constant(name):
    raise ValueError(f"{name} is not a JSON number")


def load_inputs(run_dir, meta):
    """(catalogs, scenario) of the run's snapshot, verified against the hashes in run.json."""
    run_dir = Path(run_dir)
    snap = run_dir / CATALOGS
    expected = {SCENARIO: meta.get("scenario_sha256")}
    if snap.is_symlink():
        problems = [_problem(snap, "is a symbolic link; a run's inputs must be its own files")]
    else:
        problems = []
        expected.update({CATALOGS + "/" + name: digest for name, digest in meta["catalog_hashes"].items()})
    for name, digest in expected.items():
        path = run_dir / name
        if path.is_symlink():
            problems.append(_problem(path, "is a symbolic link; a run's inputs must be its own files"))
        elif not path.is_file():
            problems.append(_problem(path, "missing from the run folder"))
        elif digest is not None and sha256_file(path) != digest:
            problems.append(_problem(path, "changed since the run started (its SHA-256 differs from "
                                           "run.json): the run's designs were computed with the "
                                           "original; put the original back, or start a new run with "
                                           "the edited file"))
    if problems:
        raise InputError(problems)
    return load_catalogs(snap), load_scenario(run_dir / SCENARIO)


# --- the per-user checkpoint key and the authenticated checkpoint -------------------------------
def config_dir() -> Path:
    explicit = os.environ.get("AFPM_CONFIG_DIR")
    if explicit:
        return Path(explicit)
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "afpm"


def checkpoint_key() -> bytes:
    """This user's checkpoint key: 32 random bytes, made 0600 on first use, never leaves the machine."""
    folder = config_dir()
    path = folder / KEY_FILE
    folder.mkdir(parents=True, exist_ok=True, mode=0o700)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _NOFOLLOW, 0o600)
    except FileExistsError:
        pass
    else:
        with os.fdopen(fd, "wb") as fh:
            fh.write(os.urandom(TAG_BYTES))
            fh.flush()
            os.fsync(fh.fileno())
    refuse_link(path)
    if os.name == "posix" and os.stat(path).st_mode & 0o077:
        raise InputError([_problem(path, "is readable or writable by other users: anyone who can read "
                                         "it can forge checkpoints; run chmod 600 on it")])
    key = path.read_bytes()
    if len(key) != TAG_BYTES:  # e.g. a write that was interrupted before it was fsynced
        raise InputError([_problem(path, f"must hold {TAG_BYTES} bytes (holds {len(key)}); delete it "
                                         "(checkpoints made with it can then no longer be resumed)")])
    return key


class _MacWriter:
    """File-like wrapper that feeds what pickle writes to an HMAC on its way to the file."""

    def __init__(self, fh, mac):
        self.fh, self.mac = fh, mac

    def write(self, data):
        self.mac.update(data)
        return self.fh.write(data)


def write_checkpoint(path, state) -> None:
    """Pickle `state` to `path` atomically behind MAGIC and its HMAC tag (streamed, one copy)."""
    mac = hmac.new(checkpoint_key(), digestmod=hashlib.sha256)
    with atomic_writer(path) as fh:
        fh.write(MAGIC + bytes(TAG_BYTES))
        pickle.dump(state, _MacWriter(fh, mac), protocol=pickle.HIGHEST_PROTOCOL)
        fh.seek(len(MAGIC))
        fh.write(mac.digest())


def read_checkpoint(path, kind, run_dir):
    """The `kind` object in checkpoint `path`, unpickled only after its HMAC tag is verified."""
    hint = RESTART_HINT.format(run=run_dir)

    def refuse(why):
        return InputError([_problem(path, f"{why}; {hint}")])

    refuse_link(path)
    try:
        return _read_checkpoint(path, kind, refuse)
    except OSError as exc:
        raise refuse(f"cannot be read ({exc.strerror or exc})") from None


def _read_checkpoint(path, kind, refuse):
    fd = os.open(path, os.O_RDONLY | _NOFOLLOW)
    with os.fdopen(fd, "rb") as fh:
        head = fh.read(len(MAGIC) + TAG_BYTES)
        if head[:len(MAGIC)] != MAGIC or len(head) < len(MAGIC) + TAG_BYTES:
            if not head:
                raise refuse("is empty: not a checkpoint, so it is not opened")
            if head[:1] == b"\x80":
                raise refuse("was made by an older afpm without authentication, so it is never opened "
                             "(unpickling an unproven file can run code); older runs cannot be resumed")
            raise refuse("is not an afpm checkpoint (truncated, or another file), so it is not opened")
        mac = hmac.new(checkpoint_key(), digestmod=hashlib.sha256)
        for block in iter(lambda: fh.read(_CHUNK), b""):
            mac.update(block)
        if not hmac.compare_digest(mac.digest(), head[len(MAGIC):]):
            raise refuse("was not written by afpm for this user on this computer, or was changed since, "
                         "so it is never opened (unpickling an unproven file can run code)")
        fh.seek(len(MAGIC) + TAG_BYTES)
        try:
            state = pickle.load(fh)
        except Exception as exc:  # noqa: BLE001  our own file from another afpm version
            raise refuse(f"was written by another version of afpm and cannot be resumed by this one "
                         f"({type(exc).__name__}: {exc})") from None
    if not isinstance(state, kind):
        raise refuse(f"holds a {type(state).__name__}, not a search state")
    return state


# --- the front as data ---------------------------------------------------------------------------
def write_front_data(path, rows, codes) -> None:
    """front.npz: `rows` (cache row of each front design: its id is 'D' + row) and their `codes`."""
    with atomic_writer(path) as fh:
        np.savez(fh, rows=np.asarray(rows, np.int64), codes=np.asarray(codes, np.int32))


def read_front_data(path, catalogs):
    """(rows, codes) from front.npz, checked against the catalogs (no pickle is ever loaded)."""
    refuse_link(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            rows, codes = data["rows"], data["codes"]
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile) as exc:
        raise InputError([_problem(path, f"is damaged or not afpm's front data ({exc})")]) from None
    n_cols = len(fields(DesignBatch))
    if codes.ndim == 2 and codes.shape[1] == n_cols - 1 and codes.dtype.kind == "i":
        # a front saved before the coil shape existed: its designs are rectangular (code 0)
        codes = np.hstack([codes, np.zeros((len(codes), 1), codes.dtype)])
    if rows.ndim != 1 or codes.shape != (len(rows), n_cols) or rows.dtype.kind != "i" \
            or codes.dtype.kind != "i":
        raise InputError([_problem(path, f"must hold integer rows (n) and codes (n, {n_cols}); holds "
                                         f"{rows.dtype}{rows.shape} and {codes.dtype}{codes.shape}")])
    sizes = [len(catalogs.magnets), len(catalogs.layouts), None, None, len(catalogs.discs),
             len(catalogs.wires), None, None, None, 2, 2]
    bad = (rows < 0) | np.any(codes[:, [2, 3, 6, 7, 8]] < 1, axis=1)
    for j, size in enumerate(sizes):
        if size is not None:
            bad |= (codes[:, j] < 0) | (codes[:, j] >= size)
    lay = np.clip(codes[:, 1], 0, len(catalogs.layouts) - 1)
    bad |= (codes[:, 2] < catalogs.layouts["min_multiple"].to_numpy()[lay]) \
        | (codes[:, 2] > catalogs.layouts["max_multiple"].to_numpy()[lay])
    if bad.any() or len(np.unique(rows)) != len(rows):
        which = np.flatnonzero(bad)
        raise InputError([_problem(path, f"design {which[0] if len(which) else 'ids'} out of the "
                                         "catalogs' ranges or repeated: damaged, or not this run's")])
    return rows, codes


def decode_codes(codes):
    """DesignBatch matrices of exact codes (ring radius in micrometres, as the search cache keeps it)."""
    from .problem import DesignCache

    return DesignCache.decode(np.asarray(codes, np.int32))


class RunView:
    """A run folder opened for reading only, from its data files: what `afpm front` and `pick` use.

    Never reads checkpoint.pkl. Its interface matches the parts of `SearchRun` the reports use:
    dir, meta, catalogs, scenario, evaluator, model, evaluations, front_designs().
    """

    def __init__(self, run_dir):
        self.dir = Path(run_dir)
        self.meta = read_meta(self.dir)
        self.catalogs, self.scenario = load_inputs(self.dir, self.meta)
        self.evaluator = Evaluator(self.catalogs, self.scenario, Settings(**self.meta["settings"]))
        path = self.dir / FRONT_DATA
        if path.exists() or path.is_symlink():
            self._rows, self._codes = read_front_data(path, self.catalogs)
        elif (self.dir / "front.csv").exists() and self.meta["generations"] > 0:
            raise InputError([_problem(path, "missing: this run was made by an older afpm (or damaged); "
                                             "its front.csv is still readable as it is")])
        else:  # no generation saved yet: an empty front
            self._rows, self._codes = np.empty(0, np.int64), np.empty((0, len(fields(DesignBatch))), np.int32)

    @property
    def model(self):
        return self.evaluator.settings.field_model

    @property
    def evaluations(self):
        return self.meta["evaluations"]

    def front_designs(self):
        """(ids, DesignBatch) of the saved front, as SearchRun.front_designs gives them."""
        return [f"D{r}" for r in self._rows], DesignBatch.from_matrix(decode_codes(self._codes))
