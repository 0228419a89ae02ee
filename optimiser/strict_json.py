"""Strict JSON (RFC 8259) for everything afpm writes for programs: never a bare NaN or Infinity.

RFC 8259 has no NaN or Infinity, but Python's json module writes them by default. Every JSON
that afpm prints or writes goes through `dumps`, which turns each non-finite number into null
(a value that does not exist: a design that cannot be built has no EMF) and refuses anything
else that is not JSON (allow_nan=False), so a bug shows as an error, never as invalid output.
"""
from __future__ import annotations

import json
import math

import numpy as np

__all__ = ["finite_or_none", "dumps"]


def finite_or_none(obj):
    """`obj` with every NaN or infinite number replaced by None, numpy scalars and arrays as Python.

    Dicts, lists and tuples are walked; numpy integers and booleans become int and bool.
    """
    if isinstance(obj, dict):
        return {k: finite_or_none(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [finite_or_none(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return finite_or_none(obj.tolist())
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    return obj


def dumps(obj, **kwargs) -> str:
    """json.dumps of `obj` after `finite_or_none`, with allow_nan=False (keyword arguments pass on)."""
    return json.dumps(finite_or_none(obj), allow_nan=False, **kwargs)
