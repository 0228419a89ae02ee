"""One design, fully described: the nested record behind `afpm evaluate --json` and the build sheet.

Key names here are a contract with users' scripts (see the evaluate command's documentation).
"""

from __future__ import annotations

import numpy as np

from .. import robust
from ..design import COIL_SHAPES, CONNECTIONS, DesignBatch
from ..evaluate import CONSTRAINTS, ELV_LIMIT_AC_RMS_V, Evaluator
from ..strict_json import finite_or_none  # noqa: F401  (kept importable from here)

DEG_C = "\N{DEGREE SIGN}C"

OPERATING_KEYS = ("rpm", "open_circuit_line_rms_V", "open_circuit_line_peak_V", "charge_current_A",
                  "battery_power_W", "copper_loss_W", "eddy_loss_W", "diode_loss_W",
                  "dc_resistance_loss_W", "windage_loss_W", "bearing_loss_W", "shaft_power_W",
                  "drag_torque_Nm", "coil_temperature_C", "magnet_temperature_C", "efficiency",
                  "phase_current_rms_A", "thermal_runaway")


def _f(x):
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    return float(x)


def operating_point(ev, i=0):
    return {k: _f(ev[k][i]) for k in OPERATING_KEYS}


def rpm_sweep(evaluator: Evaluator, design: DesignBatch, rpms):
    """The design (a batch of one) evaluated at every speed in `rpms` [rpm], in one batch."""
    rpms = np.asarray(rpms, dtype=float)
    return evaluator.evaluate(design.take(np.zeros(len(rpms), dtype=int)), rpm=rpms)


def sweep_speeds(scenario, n=13):
    """Speeds for the rpm table: 0 to twice the sailing rpm, then up to the maximum shaft rpm;
    the sailing rpm and (without a propeller) the fastest sailing rpm among them."""
    low = np.linspace(0.0, 2.0 * scenario.sailing_rpm, n)
    high = np.linspace(2.0 * scenario.sailing_rpm, scenario.max_rpm, 5)[1:]
    fastest = [] if scenario.has_propeller else [scenario.fastest_sailing_rpm]
    return np.unique(np.concatenate([low, high, [scenario.sailing_rpm], fastest]))


def _over_limits(point, coil_limit_C, magnet_limit_C):
    """What exceeds a limit at one operating point (a dict of OPERATING_KEYS), as text, or ''."""
    out = []
    if point["thermal_runaway"]:
        out.append("thermal runaway")
    elif point["coil_temperature_C"] > coil_limit_C:
        out.append(f"coils {point['coil_temperature_C']:.0f} C (limit {coil_limit_C:.0f} C)")
    if point["magnet_temperature_C"] > magnet_limit_C:
        out.append(f"magnets {point['magnet_temperature_C']:.0f} C (limit {magnet_limit_C:.0f} C)")
    return ", ".join(out)


def connected_range_warnings(report, rows=()) -> list[str]:
    """Warnings for the connected range (from rest up to the fastest sailing speed): the fastest
    sailing point itself, and every rpm-table row inside the range that exceeds a limit."""
    fast, limits = report["at_fastest_sailing"], report["limits"]
    top = fast["rpm"]
    where = (f"{report['inputs']['fastest_boat_speed_kn']:g} kn ({top:.0f} rpm loaded)"
             if "fastest_boat_speed_kn" in report["inputs"] else f"{top:.0f} rpm")
    out = []
    over = _over_limits(fast, limits["coil_C"], limits["magnet_C"])
    if over:
        out.append(f"connected while sailing at the fastest speed, {where}: {over}; disconnect the "
                   "generator above a lower speed, or choose a design that meets the limits there")
    bad = [(r["rpm"], _over_limits(r, limits["coil_C"], limits["magnet_C"])) for r in rows
           if 0 < r["rpm"] <= top * (1 + 1e-9)]
    bad = [f"{rpm:.0f} rpm: {text}" for rpm, text in bad if text]
    if bad:
        out.append(f"inside the connected range (up to {where}) the rpm table exceeds a limit at "
                   + "; ".join(bad))
    return out


def design_report(evaluator: Evaluator, design: DesignBatch, rows=()) -> dict:
    """Nested, JSON-ready description of one design (a batch of one), SI units throughout.

    `rows` (the design's `rpm_table`, if computed) adds a warning for each row inside the
    connected range that exceeds a limit."""
    sc = evaluator.scenario
    sail = evaluator.evaluate(design)
    motor = evaluator.evaluate(design, rpm=sc.max_rpm)
    w = evaluator.windings.windings[evaluator.windings.index(design.layout, design.multiple)[0]]
    v = lambda name: _f(sail[name][0])  # noqa: E731
    warnings = []
    peak = _f(motor["open_circuit_line_peak_V"][0])
    rms = _f(motor["open_circuit_line_rms_V"][0])
    if rms > ELV_LIMIT_AC_RMS_V:
        warnings.append(
            f"open-circuit line voltage at {sc.max_rpm:.0f} rpm (motoring) is {rms:.0f} V rms "
            f"({peak:.0f} V peak), above the {ELV_LIMIT_AC_RMS_V:.0f} V rms extra-low-voltage limit "
            "(IEC 61140 / IEC 60449 band I): disconnect or brake the generator before motoring, "
            "and insulate and enclose it as for hazardous voltage")
    limit = _f(motor["coil_limit_C"][0])
    if motor["thermal_runaway"][0]:
        warnings.append(
            f"left connected while motoring at {sc.max_rpm:.0f} rpm the coils would run away "
            f"thermally (no steady temperature at all; the wire's limit is {limit:.0f} {DEG_C}) "
            f"charging {_f(motor['charge_current_A'][0]):.1f} A: disconnect it before motoring")
    elif motor["coil_temperature_C"][0] > limit:
        warnings.append(
            f"left connected while motoring at {sc.max_rpm:.0f} rpm the coils would reach "
            f"{_f(motor['coil_temperature_C'][0]):.0f} {DEG_C} (limit {limit:.0f} {DEG_C}) "
            f"charging {_f(motor['charge_current_A'][0]):.1f} A: disconnect it before motoring")
    if sail["thermal_runaway"][0]:
        warnings.append("thermal runaway at the sailing rpm: the coils find no steady temperature")
    force = v("axial_attraction_N")
    if np.isfinite(force):  # (no value: the design cannot be built, its problems say why)
        warnings.append(f"the two rotors pull together with about {force:.0f} N: choose bearings and "
                        "spacers for it and assemble with jacking screws, never by hand")
    report = {
        "design": design.records(evaluator.catalogs)[0],
        "geometry": {k: v(k) for k in (
            "ring_radius_m", "magnet_length_m", "magnet_width_m", "magnet_thickness_m", "face_gap_m",
            "stator_thickness_m", "coil_thickness_m", "coil_hole_radial_m", "coil_hole_tangential_m",
            "coil_leg_width_m", "mean_turn_length_m", "coil_inner_radius_m", "coil_outer_radius_m",
            "axial_length_m")} | former_geometry(evaluator.coil(design)),
        "magnet": {"remanence_T": v("remanence_T"), "recoil_permeability": v("recoil_permeability"),
                   "temperature_C": v("magnet_temperature_C")},
        "winding": {
            "coils": int(sail["coils"][0]), "poles": int(sail["poles"][0]),
            "coil_phase": [int(x) for x in w.coil_phase] if w else [],
            "coil_polarity": [int(x) for x in w.coil_polarity] if w else [],
            "series_coils_per_path": int(sail["series_coils_per_path"][0]),
            "parallel_paths": int(design.parallel_paths[0]),
            "connection": CONNECTIONS[int(design.connection[0])],
            "winding_factor": v("winding_factor"),
        },
        "electrical": {k: v(k) for k in (
            "phase_resistance_20C_ohm", "phase_resistance_hot_ohm", "phase_inductance_H",
            "emf_line_rms_per_rpm_V", "emf_line_peak_per_rpm_V", "back_iron_flux_density_T",
            "axial_attraction_N")},
        "materials": {k: v(k) for k in ("wire_length_m", "copper_mass_kg", "wire_cost", "magnet_cost",
                                        "disc_cost")},
        "inputs": {"battery_charging_voltage_V": sc.battery_charging_V,
                   "battery_resistance_ohm": sc.battery_resistance_ohm,
                   "diode_forward_drop_V": sc.diode_forward_drop_V, "bilge_air_C": sc.bilge_air_C,
                   "sailing_rpm": sc.sailing_rpm, "max_rpm": sc.max_rpm,
                   **({"fastest_boat_speed_kn": sc.fastest_boat_speed_kn} if sc.has_propeller
                      else {"fastest_sailing_rpm": sc.fastest_sailing_rpm})},
        "limits": {"coil_C": v("coil_limit_C"), "magnet_C": v("magnet_limit_C")},
        "at_sailing": operating_point(sail),
        "at_fastest_sailing": operating_point(sail.at_fastest),
        "at_max_rpm": operating_point(motor),
        "cut_in_rpm": v("cut_in_rpm"),
        "model": {"field_model": evaluator.settings.field_model,
                  "inductance": evaluator.settings.inductance},
        "feasible": bool(sail.feasible[0]),
        "problems": problems_with_numbers(sail, sc),
        "warnings": warnings,
    }
    warnings[-1:-1] = connected_range_warnings(report, rows)  # before the rotor-force note
    report["robust"] = robust_block(evaluator, design, sail)
    warnings[-1:-1] = robust_warnings(report)
    if sail.profile:
        report["sailing_profile"] = profile_rows(sc, sail.profile)
        report["amp_hours_per_day"] = v("amp_hours_per_day")
        report["mean_added_drag_N"] = v("mean_added_drag_N")
    return report


ROBUST_REPORT_VALUES = ("charge_current_A", "drag_torque_Nm", "coil_temperature_C",
                        "coil_temperature_connected_C", "magnet_temperature_connected_C", "cut_in_rpm",
                        "amp_hours_per_day", "mean_added_drag_N")
"""Values of the `robust` block of `afpm evaluate --json` (the last two with a propeller)."""


def robust_block(evaluator: Evaluator, design: DesignBatch, sail=None) -> dict:
    """What to expect from a real build of one design (a batch of one): p10 / p50 / p90 of each
    value over sampled builds (robust.py: each spread uniform within +- its half-width). Uses the
    scenario's robust_samples, or robust.REPORT_SAMPLES when that is 0 (the search then saw the
    nominal build only)."""
    sc = evaluator.scenario
    n = sc.robust_samples if sc.robust_samples > 0 else robust.REPORT_SAMPLES
    if sail is not None and "charge_current_A_p10" in sail.values:  # the evaluation sampled them
        values = sail.values
    else:
        values = robust.robust_values(evaluator, design, n)
    out = {"samples": int(n), "distribution": "each spread uniform within +- its half-width "
           "(scrambled Sobol, fixed seed)",
           "spreads": {"remanence_pct": sc.spread_remanence_pct, "fill_factor_pct": sc.spread_fill_factor_pct,
                       "running_clearance_mm": sc.spread_running_clearance_m * 1e3,
                       "bilge_air_C": sc.spread_bilge_air_C,
                       "resin_conductivity_pct": sc.spread_resin_conductivity_pct},
           "robust_constraints": bool(sc.robust_constraints)}
    for name in ROBUST_REPORT_VALUES:
        if f"{name}_p10" in values:
            out[name] = {f"p{q}": _f(values[f"{name}_p{q}"][0]) for q in robust.PERCENTILES}
            if sail is not None:
                out[name]["nominal"] = _f(sail[name][0])
    return out


def robust_rows(report, currency="") -> list[list[str]]:
    """The `robust` block as table rows for a person: quantity, nominal, p10, p50, p90."""
    from .front_data import column_label, format_value  # (front_data reads the evaluator's names)
    rows = []
    for name in ROBUST_REPORT_VALUES:
        entry = report["robust"].get(name)
        if entry is not None:
            rows.append([column_label(name, currency)] + [
                format_value(name, entry.get(k, float("nan")), currency) for k in ("nominal", "p10", "p50", "p90")])
    return rows


ROBUST_HEADERS = ("quantity", "as drawn", "p10 build", "p50 build", "p90 build")


def robust_note(report) -> str:
    """One line saying what the band is."""
    b = report["robust"]
    sp = b["spreads"]
    return (f"{b['samples']} sampled builds, each within +-{sp['remanence_pct']:g} % magnet Br, "
            f"+-{sp['fill_factor_pct']:g} % coil fill factor, +-{sp['running_clearance_mm']:g} mm "
            f"running clearance, +-{sp['bilge_air_C']:g} K bilge air and +-{sp['resin_conductivity_pct']:g} % "
            "resin conductivity (uniform, fixed samples): one build in ten comes out below its p10, one "
            "in ten above its p90.")


def robust_warnings(report) -> list[str]:
    """A warning when one build in ten would exceed a limit at the hottest connected speed."""
    band, limits = report["robust"], report["limits"]
    out = []
    for key, limit, what in (("coil_temperature_connected_C", limits["coil_C"], "coils"),
                             ("magnet_temperature_connected_C", limits["magnet_C"], "magnets")):
        p90 = band[key]["p90"]
        if np.isfinite(p90) and p90 > limit and (report["feasible"] or not band["robust_constraints"]):
            out.append(f"with the build spread, one build in ten has its {what} above "
                       f"{p90:.0f} {DEG_C} at the hottest connected speed (p90 of {band['samples']} "
                       f"sampled builds; limit {limit:.0f} {DEG_C}): measure a test coil, or choose a "
                       "design with margin (robust_constraints = true keeps the search to those)")
    sailing = report["inputs"]["sailing_rpm"]
    cut_in = band["cut_in_rpm"]["p90"]
    if "fastest_sailing_rpm" in report["inputs"] and report["feasible"] and cut_in > sailing:
        out.append(f"with the build spread, one build in ten only starts charging at {cut_in:.0f} rpm "
                   f"(p90), above the {sailing:.0f} rpm sailing speed")
    return out


def former_geometry(coil, i=0):
    """The coil's shape and the former it is wound on (design i of a `CoilGeometry`), SI units."""
    return {"coil_shape": COIL_SHAPES[int(coil.coil_shape[i])],
            "former_length_m": float(coil.hole_radial_m[i]),
            "former_inner_width_m": float(coil.hole_tangential_m[i]),
            "former_outer_width_m": float(coil.hole_outer_tangential_m[i]),
            "former_side_angle_deg": float(np.degrees(coil.side_angle_rad[i]))}


def former_text(g):
    """The coil's shape and its former, from a report's geometry (`report.evaluation.former_geometry`)."""
    if g["coil_shape"] == "keystone":
        return (f"keystone: former {g['former_length_m'] * 1e3:.1f} mm long, "
                f"{g['former_inner_width_m'] * 1e3:.1f} to {g['former_outer_width_m'] * 1e3:.1f} mm wide "
                f"(sides {g['former_side_angle_deg']:.1f}\N{DEGREE SIGN} to the centre line)")
    return (f"rectangular: former {g['former_length_m'] * 1e3:.1f} x "
            f"{g['former_inner_width_m'] * 1e3:.1f} mm (radial x tangential)")


def problems_with_numbers(ev, scenario, i=0):
    """`Evaluation.problems` of design i, each with the numbers behind it (value and limit)."""
    v = {k: _f(np.asarray(x)[i]) for k, x in ev.values.items() if np.ndim(x) == 1}
    g = dict(zip(CONSTRAINTS, ev.constraints[i]))
    mm = lambda x: f"{1e3 * x:.1f} mm"  # noqa: E731
    numbers = {
        "magnets_overlap": lambda: f"by {mm(g['magnets_overlap'] * v['magnet_width_m'])} at the inner edge",
        "coils_do_not_fit": lambda: f"legs {mm(v['coil_leg_width_m'])}, minimum "
                                    f"{mm(scenario.min_coil_leg_m)}",
        "ring_beyond_disc": lambda: f"by {mm(g['ring_beyond_disc'] * v['magnet_length_m'])}",
        "disc_beyond_envelope": lambda: f"by {mm(g['disc_beyond_envelope'] * scenario.max_rotor_diameter_m / 2)} "
                                        f"in radius",
        "axial_beyond_envelope": lambda: f"{mm(v['axial_length_m'])}, allowed {mm(scenario.max_axial_length_m)}",
        "coil_too_hot": lambda: ("runaway: no steady temperature" if v["thermal_runaway"] else
                                 f"{v['coil_temperature_C']:.0f} {DEG_C}") + f", limit {v['coil_limit_C']:.0f} {DEG_C}",
        "magnet_too_hot": lambda: f"{v['magnet_temperature_C']:.0f} {DEG_C}, limit "
                                  f"{v['magnet_temperature_C'] - 100 * g['magnet_too_hot']:.0f} {DEG_C}",
        "back_iron_saturated": lambda: f"{v['back_iron_flux_density_T']:.2f} T, limit "
                                       f"{scenario.back_iron_saturation_T:.2f} T",
        "cut_in_above_sailing": lambda: f"cut-in {v['cut_in_rpm']:.0f} rpm",
    }
    out = []
    for reason, name in zip(ev.problems(i), [n for n in CONSTRAINTS if g[n] > 0]):
        try:
            extra = numbers[name]() if name in numbers else ""
        except (KeyError, AttributeError):
            extra = ""
        out.append(f"{reason} ({extra})" if extra else reason)
    return out


def profile_rows(scenario, profile, i=0):
    """Boat-speed table of design i: loaded rpm, charge, torque, drag on the boat, coil temperature."""
    rows = []
    for j, (knots, hours) in enumerate(zip(scenario.profile_boat_speed_kn, scenario.profile_hours_per_day)):
        row = {"boat_speed_kn": float(knots), "hours_per_day": float(hours)}
        for key in ("rpm", "free_wheel_rpm", "charge_current_A", "battery_power_W", "drag_torque_Nm",
                    "drag_force_N", "added_drag_N", "coil_temperature_C"):
            row[key] = float(profile[key][i, j])
        row["stalled"] = bool(profile["stalled"][i, j])
        if "thermal_runaway" in profile:
            row["thermal_runaway"] = bool(profile["thermal_runaway"][i, j])
        rows.append(row)
    return rows


def rpm_table(evaluator: Evaluator, design: DesignBatch, rpms=None) -> list[dict]:
    """Rows of (rpm, charge current, torque, efficiency, coil temperature ...) for one design."""
    rpms = sweep_speeds(evaluator.scenario) if rpms is None else rpms
    ev = rpm_sweep(evaluator, design, rpms)
    return [operating_point(ev, i) for i in range(len(rpms))]
