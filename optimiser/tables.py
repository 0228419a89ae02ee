"""Reference tables for catalog parts: NdFeB grades, AWG sizes, enamel build, thermal classes.

Values here fill blanks in the catalogs and bound what the loader accepts. Each table names its
source and says when a value was recalled from memory rather than read from the original.
"""
from __future__ import annotations

import re

import numpy as np

__all__ = [
    "BR_RANGE_T", "SUFFIX_MAX_TEMP_C", "parse_grade", "grade_remanence_T", "grade_max_temp_C",
    "awg_diameter_m", "nearest_awg", "enamel_max_overall_diameter_m", "THERMAL_CLASSES_C",
    "parse_thermal_class",
]

# --- Sintered NdFeB grades -------------------------------------------------------------------
# Remanence Br at 20 C, (min, max) [T], by grade number. Source: typical supplier datasheet ranges
# as summarised in /work/shared/MODEL.md (N35 1.17-1.22, N42 1.28-1.32, N52 1.42-1.48 T); the
# intermediate grades are from the same kind of supplier tables, recalled from memory. IEC 60404-8-1
# specifies only minimum values, so it bounds these from below rather than giving typical values.
# High-coercivity suffixes keep roughly the same Br for the same number, so one table serves all.
BR_RANGE_T: dict[int, tuple[float, float]] = {
    35: (1.17, 1.22),
    38: (1.22, 1.25),
    40: (1.25, 1.28),
    42: (1.28, 1.32),
    45: (1.32, 1.38),
    48: (1.38, 1.42),
    50: (1.40, 1.45),
    52: (1.42, 1.48),
}

# Maximum working temperature by coercivity suffix [C]. Source: supplier tables as in MODEL.md.
# The real limit also depends on the block's shape (permeance coefficient); these values assume a
# typical working point, so the scenario's temperature margin stays on top of them.
SUFFIX_MAX_TEMP_C: dict[str, float] = {"": 80.0, "M": 100.0, "H": 120.0, "SH": 150.0, "UH": 180.0,
                                       "EH": 200.0}

_GRADE_RE = re.compile(r"^N(\d{2})(|M|H|SH|UH|EH)$")


def parse_grade(text: str) -> tuple[int, str]:
    """Split a grade such as ``"N42SH"`` into (42, "SH"); raise ValueError if it is not a known grade."""
    match = _GRADE_RE.match(text.strip().upper())
    if not match or int(match.group(1)) not in BR_RANGE_T:
        raise ValueError(
            f"unknown grade '{text}'; allowed: N followed by one of "
            f"{', '.join(str(n) for n in BR_RANGE_T)} and an optional suffix "
            f"{', '.join(s for s in SUFFIX_MAX_TEMP_C if s)} (e.g. N42, N42SH)")
    return int(match.group(1)), match.group(2)


def grade_remanence_T(grade: str) -> float:
    """Typical remanence at 20 C of a grade (middle of the supplier range) [T]."""
    lo, hi = BR_RANGE_T[parse_grade(grade)[0]]
    return round((lo + hi) / 2, 4)


def grade_max_temp_C(grade: str) -> float:
    """Maximum working temperature of a grade [C]."""
    return SUFFIX_MAX_TEMP_C[parse_grade(grade)[1]]


# --- American Wire Gauge -----------------------------------------------------------------------
def awg_diameter_m(gauge):
    """Bare diameter of an AWG size.

    d_n = 0.127 mm x 92^((36 - n) / 39); gauge 0 is 1/0, -1 is 2/0, and so on.

    Parameters
    ----------
    gauge : int or array_like
        AWG number [-]

    Returns
    -------
    ndarray
        Bare diameter [m]

    References
    ----------
    ASTM B258, Standard Specification for Standard Nominal Diameters and Cross-Sectional Areas of
    AWG Sizes of Solid Round Wires Used as Electrical Conductors; defining formula (checked against
    the tabulated diameters in tests/test_tables.py).
    """
    n = np.asarray(gauge, dtype=float)
    return 0.127e-3 * 92.0 ** ((36.0 - n) / 39.0)


def nearest_awg(diameter_m) -> tuple[int, float]:
    """Nearest AWG number to a bare diameter and the relative difference from it [-]."""
    n = int(round(36.0 - 39.0 * np.log(diameter_m / 0.127e-3) / np.log(92.0)))
    return n, float(diameter_m / awg_diameter_m(n) - 1.0)


# --- Enamel build: IEC 60317-0-1 ----------------------------------------------------------------
# Maximum overall diameter minus nominal conductor diameter [mm] for grades 1, 2, 3 at a few nominal
# diameters [mm]. Recalled from memory of the standard's dimension table (the 1.0 mm row agrees with
# the 1.016 mm example in MODEL.md to 0.4 %); verify against the standard before relying on it.
# Between anchors the increment is interpolated linearly in log-log; outside them the end interval's
# slope is extended (not from the standard). The MAXIMUM is used so coils are never drawn too thin.
_ENAMEL_D_MM = np.array([0.1, 0.2, 0.5, 1.0, 2.0])
_ENAMEL_MAX_INCREMENT_MM = {
    1: np.array([0.017, 0.026, 0.044, 0.062, 0.079]),
    2: np.array([0.025, 0.039, 0.066, 0.093, 0.118]),
    3: np.array([0.032, 0.052, 0.087, 0.124, 0.157]),
}


def enamel_max_overall_diameter_m(bare_diameter_m, grade):
    """Maximum overall diameter of enamelled round copper wire of an IEC 60317-0-1 grade.

    Parameters
    ----------
    bare_diameter_m : float or array_like
        Nominal conductor diameter [m]
    grade : int
        Enamel grade 1, 2 or 3 (thicker build for higher grades) [-]

    Returns
    -------
    ndarray
        Maximum overall diameter [m]

    References
    ----------
    IEC 60317-0-1, Specifications for particular types of winding wires - Part 0-1: General
    requirements - Enamelled round copper wire, dimension table. Anchor values from memory.
    """
    inc = _ENAMEL_MAX_INCREMENT_MM[int(grade)]
    x = np.log(np.asarray(bare_diameter_m, dtype=float) * 1e3)
    xs, ys = np.log(_ENAMEL_D_MM), np.log(inc)
    y = np.interp(x, xs, ys)
    lo_slope = (ys[1] - ys[0]) / (xs[1] - xs[0])
    hi_slope = (ys[-1] - ys[-2]) / (xs[-1] - xs[-2])
    y = np.where(x < xs[0], ys[0] + lo_slope * (x - xs[0]), y)
    y = np.where(x > xs[-1], ys[-1] + hi_slope * (x - xs[-1]), y)
    return np.asarray(bare_diameter_m, dtype=float) + np.exp(y) * 1e-3


# --- Thermal classes: IEC 60085 ---------------------------------------------------------------
THERMAL_CLASSES_C: dict[str, int] = {"A": 105, "E": 120, "B": 130, "F": 155, "H": 180, "N": 200,
                                     "R": 220}


def parse_thermal_class(text: str) -> int:
    """Thermal class given as a letter (``"F"``) or as degrees (``"155"``) -> degrees C."""
    t = str(text).strip().upper()
    if t in THERMAL_CLASSES_C:
        return THERMAL_CLASSES_C[t]
    try:
        value = float(t)
    except ValueError:
        value = None
    if value is not None and value in THERMAL_CLASSES_C.values():
        return int(value)
    raise ValueError(f"unknown thermal class '{text}'; allowed (IEC 60085): "
                     + ", ".join(f"{k} {v}" for k, v in THERMAL_CLASSES_C.items()))
