"""The evaluator: catalogs + scenario + a batch of designs -> performance, objectives and constraints.

This is the only module that knows the whole pipeline. It turns catalog rows into arrays once
(`Evaluator.__init__`), then chains the pure physics kernels for thousands of designs per call:

    geometry -> field (Fourier, per tesla of Br) -> winding -> EMF per rpm -> resistance, inductance
    -> [rectifier into the battery -> losses -> coil and magnet temperature] repeated to a fixed point
    -> shaft torque, energy balance, costs, objectives and constraints.

The search sees only `Evaluator.evaluate` and the names below; it never imports the physics.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from .design import DesignBatch
from .operating import PropellerTable, loaded_operating_point, sailing_profile
from .physics import electrical, emf, field as fieldmodel, geometry, losses, rectifier, thermal, thermal_reference
from .physics.winding import WindingError, star_of_slots
from . import robust

OBJECTIVES = ("charge_current_A", "drag_torque_Nm", "magnet_cost", "coil_temperature_C")
"""The default objectives (a scenario may choose others, `Evaluator.objectives`)."""
OBJECTIVE_SENSE = {"charge_current_A": -1.0, "drag_torque_Nm": 1.0, "magnet_cost": 1.0,
                   "coil_temperature_C": 1.0, "amp_hours_per_day": -1.0, "mean_added_drag_N": 1.0,
                   "charge_current_A_p10": -1.0, "drag_torque_Nm_p90": 1.0, "coil_temperature_C_p90": 1.0,
                   "amp_hours_per_day_p10": -1.0, "mean_added_drag_N_p90": 1.0}
"""Multiply a value by its sense to get the minimisation form (charge is maximised)."""
OBJECTIVE_SIGN = np.array([OBJECTIVE_SENSE[name] for name in OBJECTIVES])

CONSTRAINTS = tuple(name for name, _ in geometry.FIT_CHECKS) + (
    "coil_too_hot", "magnet_too_hot", "back_iron_saturated", "cut_in_above_sailing", "winding_invalid",
)
"""Constraint names in the order of `Evaluation.constraints` (each <= 0 when satisfied)."""

CONSTRAINT_REASONS = dict(geometry.FIT_CHECKS) | {
    "coil_too_hot": "coil temperature above the wire's thermal class less the scenario's margin",
    "magnet_too_hot": "magnet temperature above its grade's maximum working temperature",
    "back_iron_saturated": "rotor disc too thin: back-iron flux density above saturation",
    "cut_in_above_sailing": "cut-in speed above the sailing rpm (with a propeller: above its "
                            "free-wheeling rpm at the fastest profile speed): no charge while sailing",
    "winding_invalid": "layout, multiple or parallel paths give no balanced three-phase winding",
}

ELV_LIMIT_AC_RMS_V = 50.0
"""Extra-low voltage, AC: 50 V rms (IEC 61140 / IEC 60449 voltage band I, from memory)."""

STATOR_RIM_M = 10e-3
"""Resin cast beyond the coils' outer corners, for the stator's mounting ring [m]."""

KNOT_M_S = 1852.0 / 3600.0
"""One knot [m/s] (international nautical mile of 1852 m)."""

RUNAWAY_C = 400.0
"""Coil temperature reported for a design with no steady state (thermal runaway) [C]."""


@dataclass(frozen=True)
class Settings:
    """Model settings; defaults are the search's fast model (measured trade-offs in DEVELOPERS.md)."""

    n_harmonics: int = 8
    n_slices: int = 5
    n_samples: int = 72
    field_model: str = "fast"  # "fast" (Fourier, quasi-3-D) or "reference" (3-D cuboids + images)
    thermal_model: str = "fast"  # "fast" (network) or "reference" (finite volumes, one solve a design)
    inductance: bool = False   # include commutation (slower time-domain bridge) instead of resistive
    thermal_iterations: int = 6
    inductance_images: int = 1  # image coils per side summed exactly before the tail integral
    #                             (within 0.7 % of 200 exact images over the search space)


@dataclass
class Evaluation:
    """Results of one evaluate() call: every entry of `values` is an array of shape (n,)."""

    values: dict
    objectives: np.ndarray      # (n, k), natural sense, columns as Evaluator.objectives
    constraints: np.ndarray     # (n, len(CONSTRAINTS)), <= 0 satisfied
    emf: object = field(repr=False)  # the (n, 3, M) waveform, or a function making it when first read
    profile: dict = field(default_factory=dict, repr=False)  # (n, s) per boat speed, with a propeller
    at_fastest: dict = field(default_factory=dict, repr=False)  # (n,) values at the fastest sailing speed

    def __getitem__(self, name):
        return self.values[name]

    @property
    def emf_waveform_V(self):
        """(n, 3, M) phase EMF at the operating rpm [V]; made when first read (the search never
        reads it: the evaluation itself needs only the first sixth of the period)."""
        if callable(self.emf):
            self.emf = self.emf()
        return self.emf

    @property
    def feasible(self):
        return np.all(self.constraints <= 0.0, axis=1)

    def problems(self, i):
        """User-facing reasons for every failed constraint of design i."""
        return [CONSTRAINT_REASONS[n] for n, g in zip(CONSTRAINTS, self.constraints[i]) if g > 0]


class Geometry(NamedTuple):
    """Stage 1 of `Evaluator._at_speed`: catalog values per design, winding and coil geometry."""

    mag: dict                 # magnet catalog columns indexed by the batch
    wire: dict                # wire catalog columns
    disc: dict                # disc catalog columns
    coils: np.ndarray         # Q
    poles: np.ndarray         # 2p
    pole_pairs: np.ndarray    # p
    combo: np.ndarray         # row in the WindingTable (0 where invalid)
    winding_ok: np.ndarray    # balanced winding with allowed parallel paths
    paths: np.ndarray         # parallel paths (>= 1)
    series: np.ndarray        # series coils per path
    coil: geometry.CoilGeometry  # the coil the physics uses (capped to the axial envelope)
    built: geometry.CoilGeometry  # the coil as it would be built: reported and fit-checked
    fit: np.ndarray           # (n, 6) fit margins
    leg: np.ndarray           # coil leg width, floored at 0.1 mm [m]
    path_len: np.ndarray      # wire length of one path [m]
    total_wire: np.ndarray    # wire length of the machine [m]


class FieldEMF(NamedTuple):
    """Stage 2: everything per tesla of remanence (and EMF per rpm), plus R20 and L."""

    e_unit: np.ndarray            # (n, 3, M/6) phase EMF per rpm per T, first sixth [V]
    #                               (the whole period with the inductive bridge)
    whole_period: object          # () -> (n, 3, M) phase EMF per rpm per T over the period [V]
    e_star_unit: np.ndarray       # star(-equivalent) EMF the bridge sees, per rpm per T [V]
    spreads: tuple | None         # resistive bridge: rectifier.bridge_spreads of its first sixth [V]
    e_zero_ms_unit: np.ndarray    # delta designs: mean square of each zero-sequence harmonic [V^2]
    delta: np.ndarray             # connection is delta
    line_peak_per_rpm_per_T: np.ndarray
    line_rms_per_rpm_per_T: np.ndarray
    b_sq: np.ndarray              # (n, harmonics) mean square gap field in the coil, per T^2 [T^2]
    phi_unit: np.ndarray          # flux per pole per T [Wb]
    force_unit: np.ndarray        # axial attraction per T^2 [N]
    r20: np.ndarray               # phase resistance at 20 C [ohm]
    l_phase: np.ndarray           # phase inductance [H]
    active_copper_m3: np.ndarray  # copper volume in the field (eddy loss) [m^3]


class HotState(NamedTuple):
    """Stage 3: the electro-thermal fixed point and what was computed at it."""

    t_coil: np.ndarray        # coil temperature reported [C]
    t_used: np.ndarray        # temperature the last losses were computed at [C]
    t_mag: np.ndarray         # magnet temperature at the reported coil temperature [C]
    br: np.ndarray            # remanence of the last pass (its EMFs and currents) [T]
    resistance: np.ndarray    # hot phase resistance [ohm]
    bridge: rectifier.BridgeResult
    copper_W: np.ndarray      # stator copper loss incl. the delta's circulating current [W]
    eddy_W: np.ndarray        # strand eddy loss [W]
    runaway: np.ndarray       # no steady state
    omega: np.ndarray         # shaft speed [rad/s]


class WindingTable:
    """Star-of-slots windings of every (layout row, multiple) the catalog allows, built once."""

    def __init__(self, layouts, orders):
        self.offset = {}
        self.windings, self.reasons = [], []
        factors, kw = [], []
        for row, lay in enumerate(layouts.itertuples(index=False)):
            self.offset[row] = len(self.windings)
            for k in range(int(lay.min_multiple), int(lay.max_multiple) + 1):
                coils, poles = int(lay.coils_per_unit) * k, int(lay.poles_per_unit) * k
                try:
                    w = star_of_slots(coils, poles)
                    self.windings.append(w)
                    self.reasons.append("")
                    factors.append(w.phase_factors(orders))
                    kw.append(w.winding_factor)
                except WindingError as exc:
                    self.windings.append(None)
                    self.reasons.append(str(exc))
                    factors.append(np.zeros((3, len(orders)), complex))
                    kw.append(0.0)
        self.min_multiple = layouts["min_multiple"].to_numpy(int)
        self.max_multiple = layouts["max_multiple"].to_numpy(int)
        self.phase_factors = np.array(factors)
        self.winding_factor = np.array(kw)
        self.valid = np.array([w is not None for w in self.windings])
        max_paths = 1 + max((max(w.allowed_parallel_paths) for w in self.windings if w), default=1)
        self.paths_ok = np.zeros((len(self.windings), max_paths + 1), bool)
        for i, w in enumerate(self.windings):
            if w is not None:
                self.paths_ok[i, list(w.allowed_parallel_paths)] = True

    def index(self, layout, multiple):
        """Row of each design in this table; -1 where the multiple is outside the layout's range."""
        layout = np.asarray(layout)
        offsets = np.array([self.offset[r] for r in range(len(self.offset))])
        k = np.asarray(multiple)
        inside = (k >= self.min_multiple[layout]) & (k <= self.max_multiple[layout])
        return np.where(inside, offsets[layout] + k - self.min_multiple[layout], -1)

    def valid_multiples(self, layout_row):
        lo, hi = self.min_multiple[layout_row], self.max_multiple[layout_row]
        return [k for k in range(lo, hi + 1) if self.valid[self.offset[layout_row] + k - lo]]

    def problem(self, layout_row, multiple, paths):
        """(key, message) saying why one design's winding is not buildable, or None."""
        combo = int(self.index(np.array([layout_row]), np.array([multiple]))[0])
        if combo < 0:
            return None  # the multiple's own range check reports it
        if not self.valid[combo]:
            return "layout", f"no balanced three-phase winding: {self.reasons[combo]}"
        if not self.paths_allowed(np.array([combo]), np.array([paths]))[0]:
            allowed = ", ".join(map(str, self.windings[combo].allowed_parallel_paths))
            return "parallel_paths", f"this winding allows {allowed} parallel paths (got {paths})"
        return None

    def paths_allowed(self, combo, paths):
        paths = np.asarray(paths)
        inside = (combo >= 0) & (paths >= 1) & (paths < self.paths_ok.shape[1])
        return inside & self.paths_ok[np.where(combo >= 0, combo, 0), np.clip(paths, 0, self.paths_ok.shape[1] - 1)]


class Evaluator:
    """Evaluate batches of designs against one catalog set and one scenario."""

    def __init__(self, catalogs, scenario, settings: Settings = Settings()):
        self.catalogs, self.scenario, self.settings = catalogs, scenario, settings
        self.orders = np.arange(1, 2 * settings.n_harmonics, 2)

        def cols(frame, names, dtype=float):
            return {n: frame[n].to_numpy(dtype) for n in names}

        self.magnet = cols(catalogs.magnets, ("length_m", "width_m", "thickness_m", "remanence_T",
                                              "max_temp_C", "recoil_permeability",
                                              "br_temp_coeff_per_K", "price_each"))
        self.wire = cols(catalogs.wires, ("bare_diameter_m", "overall_diameter_m", "thermal_class_C",
                                          "price_per_kg"))
        self.disc = cols(catalogs.discs, ("diameter_m", "thickness_m", "price_each"))
        self.layout = cols(catalogs.layouts, ("coils_per_unit", "poles_per_unit"), int)
        self.windings = WindingTable(catalogs.layouts, self.orders)
        self.objectives = tuple(scenario.objectives)
        self.objective_sign = np.array([OBJECTIVE_SENSE[name] for name in self.objectives])
        self.propeller = None
        if scenario.has_propeller:
            # One boat, one propeller: tabulate its turbine curve once for the profile speeds.
            # The fastest connected boat speed is one more column after the profile's.
            self.boat_speeds_m_s = np.asarray(scenario.profile_boat_speed_kn) * KNOT_M_S
            self.propeller = PropellerTable(
                np.append(self.boat_speeds_m_s, scenario.fastest_boat_speed_kn * KNOT_M_S), rpm_max=scenario.max_rpm, diameter_m=scenario.propeller_diameter_m,
                pitch_m=scenario.propeller_pitch_m, blades=scenario.propeller_blades,
                area_ratio=scenario.propeller_area_ratio, wake_fraction=scenario.wake_fraction,
                shaft_friction_Nm=scenario.shaft_line_friction_Nm,
                density_kg_m3=scenario.water_density_kg_m3)

    # -- the pipeline ---------------------------------------------------------------------------
    def evaluate(self, batch: DesignBatch, rpm=None) -> Evaluation:
        """Evaluate every design of `batch` at shaft speed `rpm` [rpm] (default: the sailing rpm).

        `rpm` may be a scalar or an array of shape (n,) (one speed per design, e.g. an rpm sweep
        of one design repeated). With a propeller in the scenario and no `rpm` given, the designs
        are also run at their loaded operating point at every boat speed of the sailing profile
        (`Evaluation.profile`), which gives amp-hours per day and the mean added drag, and the coil
        temperature becomes the hottest over the profile and the sailing rpm.
        """
        if rpm is not None:
            ev = self._at_speed(batch, rpm)
        else:
            stages = self._stages(batch)
            ev = self._at_speed(batch, None, stages)
            if self.propeller is not None:
                self._add_profile(batch, ev)
            else:
                ev.at_fastest = self._at_speed(batch, self.scenario.fastest_sailing_rpm, stages).values
            self._connected_limits(ev)
            if self.scenario.robust_samples > 0 and not isinstance(batch, robust.BuiltBatch):
                self._add_robust(batch, ev)
        # Profile objectives exist only for the sailing evaluation (no `rpm` given): NaN otherwise.
        missing = np.full(len(batch), np.nan)
        ev.objectives = np.column_stack([ev.values.get(name, missing) for name in self.objectives])
        return ev

    def coil(self, batch: DesignBatch) -> geometry.CoilGeometry:
        """The coils of `batch` as they would be built (shape, former, legs, thickness): for reports."""
        return self._geometry(batch).built

    def _connected_limits(self, ev):
        """Temperature limits over the whole connected range: the coil and magnet constraints hold
        at the hotter of the sailing point (with a propeller: the hottest profile speed) and the
        fastest sailing speed, where the charge current and so the heating is largest."""
        v, fast = ev.values, ev.at_fastest
        names = list(CONSTRAINTS)
        v["fastest_sailing_rpm"] = fast["rpm"]
        v["coil_temperature_connected_C"] = np.maximum(v["coil_temperature_C"], fast["coil_temperature_C"])
        v["magnet_temperature_connected_C"] = np.maximum(v["magnet_temperature_C"], fast["magnet_temperature_C"])
        ev.constraints[:, names.index("coil_too_hot")] = (
            (v["coil_temperature_connected_C"] - v["coil_limit_C"]) / 100.0)
        ev.constraints[:, names.index("magnet_too_hot")] = (
            (v["magnet_temperature_connected_C"] - v["magnet_limit_C"]) / 100.0)

    def _add_robust(self, batch, ev):
        """Build tolerances (robust.py): p10 / p50 / p90 of each design over the scenario's
        robust_samples builds, one evaluation of the (designs x samples) batch; with
        robust_constraints the coil and magnet limits hold for the p90 build."""
        ev.values.update(robust.robust_values(self, batch, self.scenario.robust_samples))
        if self.scenario.robust_constraints:
            v, names = ev.values, list(CONSTRAINTS)
            ev.constraints[:, names.index("coil_too_hot")] = (
                (v["coil_temperature_connected_C_p90"] - v["coil_limit_C"]) / 100.0)
            ev.constraints[:, names.index("magnet_too_hot")] = (
                (v["magnet_temperature_connected_C_p90"] - v["magnet_limit_C"]) / 100.0)

    def _scenario_for(self, batch):
        """The scenario as the rows of `batch` see it: the scenario itself, or for a batch of
        sampled builds (robust.BuiltBatch) the scenario with its sampled keys as per-row arrays."""
        return batch.scenario if isinstance(batch, robust.BuiltBatch) else self.scenario

    def _add_profile(self, batch, ev):
        """Loaded operating point at each profile speed: where the generator's drag torque meets the
        torque the free-wheeling propeller takes from the water (operating.loaded_operating_point)."""
        sc, prop = self.scenario, self.propeller
        n, s, s1 = len(batch), len(self.boat_speeds_m_s), len(prop.boat_speeds_m_s)
        tiled = batch.take(np.repeat(np.arange(n), s1))  # design-major: reshape (n, s + 1)

        def generator(rpm):
            return self._at_speed(tiled, np.asarray(rpm).ravel())["drag_torque_Nm"].reshape(n, s1)

        top = np.full((n, s1), float(sc.max_rpm))
        loaded, free = loaded_operating_point(generator, prop.torque, sc.bearing_drag_Nm, rpm_max=top)
        at = {k: np.asarray(a).reshape(n, s1) for k, a in self._at_speed(tiled, loaded.rpm.ravel()).values.items()}
        ev.at_fastest = {k: a[:, s] for k, a in at.items()} | {"stalled": loaded.stalled[:, s],
                                                               "free_wheel_rpm": free.rpm[:, s]}
        at = {k: a[:, :s] for k, a in at.items()}  # the profile proper: its s speeds
        current = at["charge_current_A"]
        drag = -prop.thrust(loaded.rpm)[:, :s]
        added = drag - (-prop.thrust(free.rpm)[:, :s])
        amp_hours, mean_added = sailing_profile(current, added, sc.profile_hours_per_day)
        coil = at["coil_temperature_C"]
        ev.profile = {"boat_speed_m_s": np.broadcast_to(self.boat_speeds_m_s, (n, s)),
                      "rpm": loaded.rpm[:, :s], "free_wheel_rpm": free.rpm[:, :s],
                      "stalled": loaded.stalled[:, :s], "charge_current_A": current,
                      "drag_torque_Nm": at["drag_torque_Nm"], "drag_force_N": drag, "added_drag_N": added,
                      "coil_temperature_C": coil, "battery_power_W": at["battery_power_W"]}
        v = ev.values
        v["amp_hours_per_day"], v["mean_added_drag_N"] = amp_hours, mean_added
        v["coil_temperature_C"] = np.maximum(v["coil_temperature_C"], coil.max(axis=1))
        v["thermal_runaway"] = v["thermal_runaway"] | at["thermal_runaway"].any(axis=1)
        # With a propeller the shaft speed is found, not given: a design must charge at the
        # fastest profile speed at least (its cut-in below the propeller's free-wheeling rpm).
        ev.constraints[:, list(CONSTRAINTS).index("cut_in_above_sailing")] = (
            (v["cut_in_rpm"] - free.rpm[:, :s].max(axis=1)) / sc.sailing_rpm)

    def _stages(self, batch: DesignBatch) -> tuple:
        """The stages that do not depend on the shaft speed (geometry, field and EMF)."""
        geo = self._geometry(batch)
        return geo, self._field_and_emf(batch, geo)

    def _at_speed(self, batch: DesignBatch, rpm=None, stages=None) -> Evaluation:
        """The pipeline at one shaft speed per design (objectives filled in by `evaluate`).

        Four stages, each a method returning a small record the next one reads:
        geometry and fit (`_geometry`) -> field, EMF and circuit (`_field_and_emf`) ->
        electro-thermal fixed point (`_electro_thermal`) -> losses and results (`_results`).
        """
        n = len(batch)
        rpm = np.broadcast_to(np.asarray(self.scenario.sailing_rpm if rpm is None else rpm, float), (n,)).copy()
        geo, fem = self._stages(batch) if stages is None else stages
        hot = self._electro_thermal(batch, geo, fem, rpm)
        return self._results(batch, geo, fem, hot, rpm)

    def _geometry(self, batch: DesignBatch) -> "Geometry":
        """Stage 1: catalog lookups, winding lookup, coil geometry, fit margins, wire lengths."""
        sc = self._scenario_for(batch)
        mag = {k: v[batch.magnet] for k, v in self.magnet.items()}
        if isinstance(batch, robust.BuiltBatch):  # a sampled build's magnets
            mag["remanence_T"] = mag["remanence_T"] * batch.build.remanence_factor
        wire = {k: v[batch.wire] for k, v in self.wire.items()}
        disc = {k: v[batch.disc] for k, v in self.disc.items()}
        coils = self.layout["coils_per_unit"][batch.layout] * batch.multiple
        poles = self.layout["poles_per_unit"][batch.layout] * batch.multiple
        pole_pairs = poles // 2
        combo = self.windings.index(batch.layout, batch.multiple)
        winding_ok = (combo >= 0) & self.windings.valid[np.maximum(combo, 0)] \
            & self.windings.paths_allowed(combo, batch.parallel_paths)
        combo = np.maximum(combo, 0)
        paths = np.maximum(batch.parallel_paths, 1)
        series = np.maximum(coils // (3 * paths), 1)

        coil = geometry.coil_geometry(batch.ring_radius_m, mag["length_m"], mag["width_m"], coils,
                                      batch.turns, batch.strands, wire["overall_diameter_m"],
                                      sc.coil_fill_factor, sc.coil_hole_clearance_m, sc.resin_skin_m,
                                      sc.running_clearance_m, coil_shape=batch.coil_shape)
        fit = geometry.fit_margins(batch.ring_radius_m, mag["length_m"], mag["width_m"],
                                   mag["thickness_m"], poles, disc["diameter_m"], disc["thickness_m"],
                                   coil, min_coil_leg_m=sc.min_coil_leg_m,
                                   max_rotor_diameter_m=sc.max_rotor_diameter_m,
                                   max_axial_length_m=sc.max_axial_length_m,
                                   shaft_diameter_m=sc.shaft_diameter_m, hub_clearance_m=sc.hub_clearance_m)
        leg = np.maximum(coil.leg_width_m, 1e-4)
        # A design wider than the axial envelope is infeasible whatever its field; evaluating its
        # physics at the envelope keeps every number finite for the search's ranking.
        gap_cap = np.maximum(sc.max_axial_length_m - 2.0 * (disc["thickness_m"] + mag["thickness_m"]),
                             5e-3)
        built = coil  # the coil as it would be built: reported and fit-checked
        if np.any(coil.face_gap_m > gap_cap):
            over = coil.face_gap_m > gap_cap
            t_cap = gap_cap - 2.0 * (sc.resin_skin_m + sc.running_clearance_m)
            coil = coil._replace(face_gap_m=np.where(over, gap_cap, coil.face_gap_m),
                                 coil_thickness_m=np.where(over, np.maximum(t_cap, 1e-4), coil.coil_thickness_m),
                                 stator_thickness_m=np.where(over, np.maximum(t_cap, 1e-4) + 2.0 * sc.resin_skin_m,
                                                             coil.stator_thickness_m))
        path_len, total_wire = geometry.winding_lengths(coil.mean_turn_length_m, batch.turns,
                                                        batch.strands, coils, series)
        return Geometry(mag, wire, disc, coils, poles, pole_pairs, combo, winding_ok, paths, series,
                        coil, built, fit, leg, path_len, total_wire)

    def _field_and_emf(self, batch: DesignBatch, geo: "Geometry") -> "FieldEMF":
        """Stage 2: field and EMF per tesla of remanence and per rpm (both are linear in Br and
        speed, so the thermal loop only rescales them), gap field, flux, force, R and L."""
        st = self.settings
        n = len(batch)
        mag, coil, pole_pairs, combo, series = geo.mag, geo.coil, geo.pole_pairs, geo.combo, geo.series
        unit_br = np.ones(n)
        lam = self._flux_linkage(batch, mag, coil, geo.leg, pole_pairs, unit_br)
        factors = self.windings.phase_factors[combo]
        def whole_period(n_first=None):
            return emf.phase_emf_waveform(lam, factors, series, batch.turns, pole_pairs, np.ones(n),
                                          self.orders, n_samples=st.n_samples, n_first=n_first)

        # The inductive bridge steps through whole periods; everything else needs only the first
        # sixth (see below); the whole period's waveform is made only if a report reads it.
        e_unit = whole_period(None if st.inductance else st.n_samples // 6)
        delta = batch.connection == 1
        # Delta: the bridge sees the star equivalent (linear in the EMF, so converted once) and the
        # zero-sequence (triplen) EMF drives a circulating current round the delta.
        e_star_unit = e_unit.copy()
        if np.any(delta):
            e_star_unit[delta] = rectifier.delta_to_star(e_unit[delta], 1.0, 1.0)[0]
        # Mean square of each harmonic of the delta's zero-sequence EMF, per (tesla x rpm)^2.
        e_zero_ms_unit = 0.5 * emf.zero_sequence_emf_harmonics(
            lam[delta], factors[delta], series[delta], batch.turns[delta], pole_pairs[delta], 1.0,
            self.orders) ** 2
        spreads = None
        if not st.inductance:
            # Balanced windings and an odd-harmonic field make the three phases one waveform
            # shifted by thirds of a period, so the first sixth holds every conduction pattern and
            # its means are the period's (see rectifier.bridge_resistive): keep only that sixth,
            # and of it only the two spreads the resistive bridge depends on (they scale with
            # Br x rpm like the EMF, so the thermal loop rescales them).
            spreads = rectifier.bridge_spreads(e_star_unit[..., : st.n_samples // 6])
        # A delta's terminals carry each branch EMF less the zero-sequence part, which only
        # drives the circulating current round the delta. The same sixth symmetry puts every line
        # voltage's values (up to sign) in the first sixth of the period: its peak and rms are
        # the period's.
        sixth = e_unit[..., : st.n_samples // 6]
        line_unit = np.where(delta[:, None, None], sixth - sixth.mean(axis=1, keepdims=True),
                             emf.line_line(sixth))
        line_peak_per_rpm_per_T = np.max(np.abs(line_unit), axis=(1, 2))
        line_rms_per_rpm_per_T = np.sqrt(np.mean(line_unit ** 2, axis=(1, 2)))
        force_unit, phi_unit, bz_sq, bx_sq = fieldmodel.rotor_field_summary(
            unit_br, mag["recoil_permeability"], mag["length_m"], mag["width_m"], mag["thickness_m"],
            coil.face_gap_m, pole_pairs, batch.ring_radius_m, coil.coil_thickness_m, self.orders,
            n_slices=st.n_slices)
        r20 = electrical.phase_resistance(geo.path_len, geo.wire["bare_diameter_m"], batch.strands,
                                          geo.paths, 20.0)
        l_coil = electrical.coil_inductance(batch.turns, coil.hole_radial_m, coil.hole_tangential_m,
                                            geo.leg, coil.coil_thickness_m,
                                            coil.face_gap_m + 2.0 * mag["thickness_m"],
                                            n_images=st.inductance_images)
        keystone = coil.coil_shape == 1
        if np.any(keystone):
            k = keystone
            l_coil[k] = electrical.keystone_coil_inductance(
                batch.turns[k], coil.hole_perimeter_m[k], coil.hole_area_m2[k], geo.leg[k],
                coil.coil_thickness_m[k], coil.face_gap_m[k] + 2.0 * mag["thickness_m"][k],
                n_images=st.inductance_images)
        l_phase = electrical.phase_inductance(l_coil, series, geo.paths)
        active_copper_m3 = (geo.coils * 2.0 * batch.turns * batch.strands * mag["length_m"]
                            * np.pi * geo.wire["bare_diameter_m"] ** 2 / 4.0)
        if np.any(keystone):  # the keystone's legs cross the field on slanted sides, 2 L / cos(pi/Q)
            active_copper_m3[k] = (geo.coils[k] * batch.turns[k] * batch.strands[k] * coil.active_length_m[k]
                                   * np.pi * geo.wire["bare_diameter_m"][k] ** 2 / 4.0)
        return FieldEMF(e_unit, whole_period, e_star_unit, spreads, e_zero_ms_unit, delta,
                        line_peak_per_rpm_per_T, line_rms_per_rpm_per_T, bz_sq + bx_sq, phi_unit,
                        force_unit, r20, l_phase, active_copper_m3)

    def _electro_thermal(self, batch: DesignBatch, geo: "Geometry", fem: "FieldEMF", rpm) -> "HotState":
        """Stage 3: the coil temperature's fixed point T = g(T) = T_air + R_th P(T).

        Coil temperature -> resistance and Br -> currents -> losses. The first pass is at the
        hottest temperature considered: if the coils would still heat up from there, there is no
        steady state (runaway). The second tries the closed-form heat balance with the currents of
        the first held; from then on the root is bracketed (g(T) > T: it lies above T) and found by
        the Illinois variant of regula falsi, bisecting whenever a step would leave the bracket.
        """
        sc, st = self._scenario_for(batch), self.settings
        coil = geo.coil
        ring_outer = batch.ring_radius_m + coil.hole_radial_m / 2.0 + geo.leg

        def network_at(t_coil):
            return thermal.thermal_network(
                rpm, coil.coil_inner_radius_m, ring_outer, coil.coil_outer_radius_m + STATOR_RIM_M,
                coil.stator_thickness_m, sc.resin_skin_m, sc.resin_conductivity_W_mK,
                sc.running_clearance_m, sc.bilge_air_C, disc_radius_m=geo.disc["diameter_m"] / 2.0,
                disc_thickness_m=geo.disc["thickness_m"], coil_rise_K=t_coil - sc.bilge_air_C,
                emissivity=sc.surface_emissivity)

        def fast_at(t_coil):
            # natural convection depends on how warm the surfaces are: the network at this T
            network = network_at(t_coil)
            return network.coil_to_air_K_W, thermal.magnet_temperature(t_coil, sc.bilge_air_C, network)

        omega = rpm * 2.0 * np.pi / 60.0
        omega_e = omega * geo.pole_pairs
        f_e = omega_e / (2.0 * np.pi)
        state = self._fixed_point(batch, geo, fem, rpm, omega_e, f_e, fast_at)
        if st.thermal_model == "reference":
            # The resolved reference at the fast model's loss, then again at the loss it gives:
            # its thermal resistance (hot spot) and rotor share per design, held in the loop.
            for _ in range(2):
                r_ref, share = self._reference_thermal(batch, geo, rpm, state.copper_W + state.eddy_W)
                state = self._fixed_point(batch, geo, fem, rpm, omega_e, f_e, lambda t: (
                    r_ref, sc.bilge_air_C + share * (t - sc.bilge_air_C)))
        elif st.thermal_model != "fast":
            raise ValueError(f"unknown thermal model {st.thermal_model!r}: use 'fast' or 'reference'")
        return state._replace(omega=omega)

    def _fixed_point(self, batch, geo, fem, rpm, omega_e, f_e, thermal_at):
        """The fixed point of `_electro_thermal` for one thermal model: `thermal_at(T)` gives the
        coil-to-air resistance [K/W] and the magnet temperature [C] at coil temperature T."""
        sc, st = self._scenario_for(batch), self.settings
        n = len(batch)
        mag, delta = geo.mag, fem.delta
        alpha = electrical.COPPER_TEMP_COEFF_20C
        lo, hi = np.broadcast_to(np.asarray(sc.bilge_air_C, float), (n,)).copy(), np.full(n, RUNAWAY_C)
        h_lo, h_hi = np.full(n, np.nan), np.zeros(n)
        side = np.zeros(n)
        t_coil = hi.copy()
        for it in range(st.thermal_iterations):
            r_th, t_mag = thermal_at(t_coil)
            br = mag["remanence_T"] * (1.0 + mag["br_temp_coeff_per_K"] * (t_mag - 20.0))
            resistance = fem.r20 * (1.0 + alpha * (t_coil - 20.0))
            scale = br * rpm
            bridge, circ_loss = self._bridge(fem, scale, resistance, omega_e)
            copper_W = bridge.copper_loss_W + circ_loss
            eddy_W = losses.eddy_loss_round_wire(f_e[:, None] * self.orders, fem.b_sq * br[:, None] ** 2,
                                                 geo.wire["bare_diameter_m"],
                                                 electrical.copper_resistivity(t_coil),
                                                 fem.active_copper_m3)
            t_heat = sc.bilge_air_C + r_th * (copper_W + eddy_W)
            if it == 0:
                runaway = t_heat > RUNAWAY_C
            if it == st.thermal_iterations - 1:
                break
            h = t_heat - t_coil
            up = h > 0
            h_hi = np.where(up & (side > 0), 0.5 * h_hi, h_hi)  # Illinois: same end moved twice
            h_lo = np.where(~up & (side < 0), 0.5 * h_lo, h_lo)
            lo, h_lo = np.where(up, t_coil, lo), np.where(up, h, h_lo)
            hi, h_hi = np.where(up, hi, t_coil), np.where(up, h_hi, h)
            side = np.where(up, 1.0, -1.0)
            p20 = copper_W / (1.0 + alpha * (t_coil - 20.0))
            t_try, _ = thermal.steady_coil_temperature(p20, alpha, eddy_W, r_th, sc.bilge_air_C)
            with np.errstate(invalid="ignore", divide="ignore"):
                secant = (lo * h_hi - hi * h_lo) / (h_hi - h_lo)
            t_next = np.where(np.isnan(h_lo), t_try, secant)
            inside = (t_next >= lo) & (t_next <= hi)  # the bracket's ends may be the root itself
            t_coil = np.where(runaway, RUNAWAY_C, np.where(inside, t_next, 0.5 * (lo + hi)))
        # Magnets at the reported coil temperature, not at the last iterate's. Br stays the one the
        # last pass's EMFs and currents were computed with (one consistent electrical state, at
        # most thermal_residual_K of coil temperature away; the loop lands on the root at rest).
        t_report = np.minimum(t_heat, RUNAWAY_C)
        t_mag = thermal_at(t_report)[1]
        return HotState(t_report, t_coil, t_mag, br, resistance, bridge, copper_W, eddy_W, runaway, None)

    def _reference_thermal(self, batch, geo, rpm, loss_W):
        """Resolved finite-volume reference (physics/thermal_reference.py) for each design at its
        loss: hot-spot thermal resistance [K/W] and the rotors' share of the coil rise [-].
        One sparse solve per design: for re-checks, not the search."""
        sc, coil = self.scenario, geo.coil
        across, along = thermal_reference.winding_conductivity(
            geo.wire["bare_diameter_m"], geo.wire["overall_diameter_m"], sc.coil_fill_factor * np.pi / 4.0,
            sc.resin_conductivity_W_mK)
        ring_outer = batch.ring_radius_m + coil.hole_radial_m / 2.0 + geo.leg
        winding = geo.coils * (coil.coil_area_m2 - coil.hole_area_m2)
        r_th, share = np.empty(len(batch)), np.empty(len(batch))
        for i in range(len(batch)):
            p = max(float(loss_W[i]), 1e-3)  # the resistance at vanishing loss
            res = thermal_reference.machine_temperature(
                p, rpm[i], sc.bilge_air_C, ring_radius_m=batch.ring_radius_m[i],
                magnet_length_m=geo.mag["length_m"][i], magnet_width_m=geo.mag["width_m"][i],
                magnet_thickness_m=geo.mag["thickness_m"][i], poles=geo.poles[i],
                coil_inner_radius_m=coil.coil_inner_radius_m[i], coil_outer_radius_m=ring_outer[i],
                coil_thickness_m=coil.coil_thickness_m[i], winding_area_m2=winding[i],
                resin_skin_m=sc.resin_skin_m, stator_outer_radius_m=coil.coil_outer_radius_m[i] + STATOR_RIM_M,
                running_clearance_m=sc.running_clearance_m, disc_radius_m=geo.disc["diameter_m"][i] / 2.0,
                disc_thickness_m=geo.disc["thickness_m"][i],
                hub_radius_m=sc.shaft_diameter_m / 2.0 + sc.hub_clearance_m / 2.0,
                winding_across_W_mK=across[i], winding_along_W_mK=along[i],
                resin_W_mK=sc.resin_conductivity_W_mK,
                leg_inner_radius_m=batch.ring_radius_m[i] - coil.hole_radial_m[i] / 2.0,
                leg_outer_radius_m=batch.ring_radius_m[i] + coil.hole_radial_m[i] / 2.0,
                emissivity=sc.surface_emissivity)
            r_th[i], share[i] = res.hot_spot_rise_K / p, res.rotor_rise_K / res.hot_spot_rise_K
        return r_th, share


    def _results(self, batch: DesignBatch, geo: "Geometry", fem: "FieldEMF", hot: "HotState",
                 rpm) -> Evaluation:
        """Stage 4: windage and bearing loss, shaft power and torque, cut-in, back iron, costs,
        constraints and every reported value."""
        sc = self._scenario_for(batch)
        n = len(batch)
        mag, wire, disc, coil, built = geo.mag, geo.wire, geo.disc, geo.coil, geo.built
        bridge, br, omega = hot.bridge, hot.br, hot.omega
        air = losses.air_properties(sc.bilge_air_C)
        windage_W = losses.windage_loss(omega, disc["diameter_m"] / 2.0, sc.running_clearance_m,
                                       air.density_kg_m3, air.viscosity_Pa_s)
        bearing_W = losses.bearing_loss(omega, sc.bearing_drag_Nm)
        copper_W, eddy_W, t_coil, t_mag = hot.copper_W, hot.eddy_W, hot.t_coil, hot.t_mag

        # The delta's circulating (triplen) current is driven by the EMFs too: its loss is shaft power.
        shaft_W = bridge.electrical_power_W + (copper_W - bridge.copper_loss_W) + eddy_W + windage_W + bearing_W
        torque = np.where(omega > 0, shaft_W / np.where(omega > 0, omega, 1.0), sc.bearing_drag_Nm)
        efficiency = np.where(shaft_W > 0, bridge.battery_power_W / np.where(shaft_W > 0, shaft_W, 1.0), 0.0)
        cut_in = rectifier.cut_in_speed_rpm(fem.line_peak_per_rpm_per_T * br, sc.battery_charging_V,
                                            sc.diode_forward_drop_V)
        b_disc = fieldmodel.back_iron_flux_density(fem.phi_unit * br, disc["thickness_m"], mag["length_m"])
        magnet_cost = 2.0 * geo.poles * mag["price_each"]
        copper_kg = geometry.copper_mass_kg(geo.total_wire, wire["bare_diameter_m"])

        limit_coil = wire["thermal_class_C"] - sc.temperature_margin_K
        constraints = np.column_stack([
            geo.fit,
            (t_coil - limit_coil) / 100.0,
            (t_mag - mag["max_temp_C"]) / 100.0,
            (b_disc - sc.back_iron_saturation_T) / sc.back_iron_saturation_T,
            (cut_in - sc.sailing_rpm) / sc.sailing_rpm,
            np.where(geo.winding_ok, -1.0, 1.0),
        ])
        values = {
            "rpm": rpm, "coils": geo.coils, "poles": geo.poles, "series_coils_per_path": geo.series,
            "winding_factor": self.windings.winding_factor[geo.combo],
            "ring_radius_m": batch.ring_radius_m, "magnet_length_m": mag["length_m"],
            "magnet_width_m": mag["width_m"], "magnet_thickness_m": mag["thickness_m"],
            "face_gap_m": built.face_gap_m, "stator_thickness_m": built.stator_thickness_m,
            "coil_thickness_m": built.coil_thickness_m, "coil_hole_radial_m": coil.hole_radial_m,
            "coil_hole_tangential_m": coil.hole_tangential_m, "coil_leg_width_m": coil.leg_width_m,
            "mean_turn_length_m": coil.mean_turn_length_m, "coil_outer_radius_m": coil.coil_outer_radius_m,
            "coil_inner_radius_m": coil.coil_inner_radius_m,
            "remanence_T": br, "recoil_permeability": mag["recoil_permeability"], "magnet_temperature_C": t_mag,
            "phase_resistance_20C_ohm": fem.r20, "phase_resistance_hot_ohm": hot.resistance,
            "phase_inductance_H": fem.l_phase,
            "emf_line_rms_per_rpm_V": fem.line_rms_per_rpm_per_T * br,
            "emf_line_peak_per_rpm_V": fem.line_peak_per_rpm_per_T * br,
            "open_circuit_line_rms_V": fem.line_rms_per_rpm_per_T * br * rpm,
            "open_circuit_line_peak_V": fem.line_peak_per_rpm_per_T * br * rpm,
            "charge_current_A": bridge.dc_current_A, "phase_current_rms_A": bridge.phase_current_rms_A,
            "battery_power_W": bridge.battery_power_W, "dc_resistance_loss_W": bridge.dc_resistance_loss_W,
            "copper_loss_W": copper_W, "eddy_loss_W": eddy_W, "diode_loss_W": bridge.diode_loss_W,
            "windage_loss_W": windage_W, "bearing_loss_W": bearing_W, "shaft_power_W": shaft_W,
            "drag_torque_Nm": torque, "efficiency": efficiency,
            "coil_temperature_C": t_coil, "thermal_runaway": hot.runaway,
            "thermal_residual_K": np.abs(t_coil - hot.t_used), "coil_limit_C": limit_coil,
            "magnet_limit_C": mag["max_temp_C"],
            "cut_in_rpm": cut_in, "back_iron_flux_density_T": b_disc,
            "axial_attraction_N": fem.force_unit * br ** 2,
            "wire_length_m": geo.total_wire, "copper_mass_kg": copper_kg,
            "wire_cost": copper_kg * (1.0 + sc.wire_margin) * wire["price_per_kg"],
            "magnet_cost": magnet_cost, "disc_cost": 2.0 * disc["price_each"],
            "axial_length_m": 2.0 * disc["thickness_m"] + 2.0 * mag["thickness_m"] + built.face_gap_m,
        }
        at_speed = (br * rpm)[:, None, None]
        return Evaluation(values, np.empty((n, 0)), constraints, lambda: fem.whole_period() * at_speed)

    # -- pieces the pipeline switches between ------------------------------------------------------
    def _flux_linkage(self, batch, mag, coil, leg, pole_pairs, br):
        st = self.settings
        geometry_args = (mag["length_m"], mag["width_m"], mag["thickness_m"], coil.face_gap_m,
                         pole_pairs, batch.ring_radius_m, coil.hole_tangential_m, leg,
                         coil.coil_thickness_m)
        if st.field_model == "fast":
            keystone = coil.coil_shape == 1
            if np.all(keystone):
                lam = np.empty((len(batch), len(self.orders)))
            else:  # every row: rectangular results stay bit for bit what they were
                lam = fieldmodel.coil_flux_linkage_harmonics(br, mag["recoil_permeability"], *geometry_args,
                                                             self.orders, n_slices=st.n_slices,
                                                             hole_radial_m=coil.hole_radial_m)
            if np.any(keystone):
                k = keystone
                lam[k] = fieldmodel.keystone_flux_linkage_harmonics(
                    br[k], mag["recoil_permeability"][k], mag["length_m"][k], mag["width_m"][k],
                    mag["thickness_m"][k], coil.face_gap_m[k], pole_pairs[k], batch.ring_radius_m[k],
                    coil.hole_radial_m[k], coil.hole_tangential_m[k], coil.side_angle_rad[k], leg[k],
                    coil.coil_thickness_m[k], self.orders, n_slices=st.n_slices)
            return lam
        if st.field_model == "reference":
            # The cuboid reference treats the magnets as rigid (mu_r = 1). Their recoil
            # permeability lowers the working point; scale Br by the magnetic-circuit ratio
            # (h + g/2) / (h + mu_r g/2) so both models describe the same magnets (the fast
            # model's own mu_r effect is within about 1 % of this ratio, tests/test_evaluate.py).
            h, g = mag["thickness_m"], coil.face_gap_m
            br = br * (h + g / 2.0) / (h + mag["recoil_permeability"] * g / 2.0)
            wave = fieldmodel.reference_coil_flux_linkage(br, *geometry_args,
                                                          hole_radial_m=coil.hole_radial_m,
                                                          n_samples=st.n_samples,
                                                          side_angle_rad=coil.side_angle_rad)
            # Project the reference waveform on the same odd cosine harmonics the EMF code expects.
            theta = 2.0 * np.pi * np.arange(st.n_samples) / st.n_samples
            basis = np.cos(self.orders[:, None] * theta[None, :])
            return 2.0 * wave @ basis.T / st.n_samples
        raise ValueError(f"unknown field model {st.field_model!r}: use 'fast' or 'reference'")

    def _bridge(self, fem, scale, resistance, omega_e):
        """Rectifier fed by the star (or star-equivalent) EMFs fem.e_star_unit x scale (the
        resistive bridge from their scaled spreads); returns the result and the loss of the delta's
        circulating current (zero where star), driven by the zero-sequence harmonics x scale."""
        delta, inductance = fem.delta, fem.l_phase
        r_star = np.where(delta, resistance / 3.0, resistance)
        l_star = np.where(delta, inductance / 3.0, inductance)
        circ_loss = np.zeros(len(resistance))
        if np.any(delta):
            circ_loss[delta] = rectifier.delta_circulating_from_harmonics(
                fem.e_zero_ms_unit * scale[delta, None] ** 2, self.orders, resistance[delta],
                inductance[delta], omega_e[delta])[1]
        sc = self.scenario
        if self.settings.inductance:
            result = rectifier.bridge_inductive(fem.e_star_unit * scale[:, None, None], r_star, l_star,
                                                omega_e, sc.diode_forward_drop_V, sc.battery_charging_V,
                                                sc.battery_resistance_ohm)
        else:
            result = rectifier.bridge_resistive_from_spreads(*fem.spreads, scale, r_star,
                                                             sc.diode_forward_drop_V, sc.battery_charging_V,
                                                             sc.battery_resistance_ohm)
        return result, circ_loss
