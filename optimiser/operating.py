"""Operating point of the shaft: the speed where the generator's drag torque
balances the torque the free-wheeling propeller takes from the water.

Both sides are callables ``torque(rpm) -> N m`` over a whole batch (one
call evaluates every element at its own rpm), so the generator side can be
``lambda rpm: evaluator.evaluate(batch, rpm=rpm).values["drag_torque_Nm"]``
and the propeller side :func:`optimiser.physics.propeller.propeller_turbine`
with the boat's propeller, or a :class:`PropellerTable` of it. The solvers
make a fixed number of calls: no per-design Python loops.
"""

from __future__ import annotations

from typing import Callable, NamedTuple

import numpy as np

from optimiser.physics.propeller import propeller_turbine

TorqueFunction = Callable[[np.ndarray], np.ndarray]


class OperatingPoint(NamedTuple):
    """Stable balance of propeller and generator torque, per element."""

    rpm: np.ndarray  # [rpm] 0 where stalled, rpm_max where no balance below rpm_max
    torque_Nm: np.ndarray  # [N m] generator drag torque at that speed (propeller torque where stalled)
    stalled: np.ndarray  # bool: at rpm_min the generator side already holds the propeller
    runaway: np.ndarray  # bool: the propeller still wins at rpm_max
    calls: int  # evaluations of each callable


def operating_point(generator_torque: TorqueFunction, propeller_torque: TorqueFunction,
                    rpm_min=5.0, rpm_max=1000.0, n_scan=16, n_refine=10) -> OperatingPoint:
    """First stable torque balance above rest, by a log-rpm scan and
    Illinois refinement.

    With ``f(rpm) = Q_prop - Q_gen`` the shaft accelerates from rest while
    ``f > 0``; it settles at the first crossing from ``f > 0`` to ``f <= 0``,
    where ``d(Q_gen - Q_prop)/d rpm > 0`` (stable). Crossings the other way
    are unstable and skipped.

    Parameters
    ----------
    generator_torque : callable
        ``rpm array -> drag torque array`` of the generator, bearings
        included [N m]; called with arrays of the problem shape.
    propeller_torque : callable
        ``rpm array -> available torque array`` of the propeller, shaft-line
        friction already subtracted [N m].
    rpm_min : array_like, optional
        Lowest speed scanned, standing in for "at rest" [rpm].
    rpm_max : array_like, optional
        Highest speed scanned, per element if an array (e.g. a little above
        the free-wheeling speed, see :func:`loaded_operating_point`) [rpm].
    n_scan : int, optional
        Log-spaced scan points from rpm_min to rpm_max [-].
    n_refine : int, optional
        Illinois steps in log rpm inside the bracket [-].

    Returns
    -------
    OperatingPoint
        ``calls = n_scan + n_refine + 1`` evaluations of each callable
        (the last one gives the generator torque at the result). The scan
        resolves crossings to (rpm_max/rpm_min)^(1/(n_scan-1)); a stable
        crossing and an unstable one closer together than that can be missed.

    References
    ----------
    M. Dowell and P. Jarratt, "A modified regula falsi method for computing
    the root of an equation", BIT 11, 1971 (the Illinois method; from
    memory). Stability of a torque balance: any dynamics text, J dw/dt =
    Q_prop - Q_gen (from memory).
    """
    lo_log = np.log(np.asarray(rpm_min, dtype=float))
    hi_log = np.log(np.asarray(rpm_max, dtype=float))

    def f(log_rpm):
        rpm = np.exp(log_rpm)
        return np.asarray(propeller_torque(rpm), float) - np.asarray(generator_torque(rpm), float)

    q_rest = np.asarray(propeller_torque(np.exp(lo_log)), float)
    f_prev = q_rest - np.asarray(generator_torque(np.exp(lo_log)), float)
    shape = np.broadcast_shapes(f_prev.shape, lo_log.shape, hi_log.shape)
    lo_log, hi_log = np.broadcast_to(lo_log, shape), np.broadcast_to(hi_log, shape)
    f_prev = np.broadcast_to(f_prev, shape)
    stalled = f_prev <= 0.0
    found = np.zeros(shape, bool)
    a, b = lo_log.copy(), hi_log.copy()
    fa, fb = np.ones(shape), -np.ones(shape)
    x_prev = lo_log
    for j in range(1, n_scan):
        x = lo_log + (hi_log - lo_log) * (j / (n_scan - 1))
        f_cur = f(x)
        first = ~found & ~stalled & (f_prev > 0.0) & (f_cur <= 0.0)
        a, fa = np.where(first, x_prev, a), np.where(first, f_prev, fa)
        b, fb = np.where(first, x, b), np.where(first, f_cur, fb)
        found |= first
        x_prev, f_prev = x, f_cur
    side = np.zeros(shape, np.int8)
    for _ in range(n_refine):
        x = (a * fb - b * fa) / (fb - fa)  # fa > 0 >= fb inside a found bracket
        fx = f(x)
        pos = fx > 0.0
        fb = np.where(pos & (side == 1), 0.5 * fb, fb)
        fa = np.where(~pos & (side == -1), 0.5 * fa, fa)
        a, fa = np.where(pos, x, a), np.where(pos, fx, fa)
        b, fb = np.where(pos, b, x), np.where(pos, fb, fx)
        side = np.where(pos, 1, -1).astype(np.int8)
    log_rpm = (a * fb - b * fa) / (fb - fa)
    runaway = ~found & ~stalled
    rpm = np.where(found, np.exp(log_rpm), np.where(stalled, 0.0, np.exp(hi_log)))
    gen = np.asarray(generator_torque(np.where(found, rpm, np.exp(lo_log))), float)
    torque = np.where(stalled, np.broadcast_to(q_rest, shape), np.broadcast_to(gen, shape))
    return OperatingPoint(rpm, torque, stalled, runaway, n_scan + n_refine + 1)


def free_wheel_rpm(propeller_torque: TorqueFunction, drag_torque_Nm=0.0, rpm_min=5.0, rpm_max=3000.0,
                   n_scan=24, n_refine=12) -> OperatingPoint:
    """Free-wheeling speed: the propeller against a constant drag only (the
    generator open-circuit, or no generator).

    Parameters
    ----------
    propeller_torque : callable
        ``rpm array -> available torque array`` [N m].
    drag_torque_Nm : array_like, optional
        Constant drag torque, e.g. the generator's bearings and seal [N m].
    rpm_min, rpm_max : array_like, optional
        Scan range [rpm].
    n_scan, n_refine : int, optional
        As :func:`operating_point` [-].

    Returns
    -------
    OperatingPoint
        ``stalled`` where the propeller's torque at rest cannot overcome the
        drag (and the friction inside ``propeller_torque``).
    """
    drag = np.asarray(drag_torque_Nm, dtype=float)
    return operating_point(lambda rpm: drag + np.zeros(np.shape(rpm)), propeller_torque,
                           rpm_min, rpm_max, n_scan, n_refine)


class FrictionFit(NamedTuple):
    """Shaft-line friction fitted to a measured free-wheeling speed, per element."""

    friction_Nm: np.ndarray  # [N m] the propeller's own torque at the measured rpm
    rpm: np.ndarray  # [rpm] where the model free-wheels from rest with that friction
    lowest_rpm: np.ndarray  # [rpm] slowest free-wheel reachable from rest (the most friction it passes)
    frictionless_rpm: np.ndarray  # [rpm] free-wheel with no friction at all
    starting_torque_Nm: np.ndarray  # [N m] the propeller's torque on a held shaft
    ok: np.ndarray  # bool: friction >= 0 and the model free-wheels at the measured rpm


def fit_shaft_line_friction(hydro_torque: TorqueFunction, measured_rpm, rpm_min=5.0,
                            rpm_max=3000.0, tolerance_rpm=0.5) -> FrictionFit:
    """Shaft-line friction that makes the propeller free-wheel at a measured speed.

    A shaft free-wheels where the propeller's hydrodynamic torque equals the
    friction, ``Q_h(n) = Q_f``: the friction that gives the measured speed
    ``n_m`` is the propeller's own torque there, ``Q_f = Q_h(n_m)`` (the root
    in ``Q_f`` of ``n_fw(Q_f) = n_m`` is linear, so exact in one call). It is
    the answer only if the shaft, started from rest, settles there: then
    ``Q_h(n) > Q_f`` on the way up and the balance is stable. That is checked
    with :func:`free_wheel_rpm` on ``Q_h - Q_f``; where the first stable
    balance from rest is not within ``tolerance_rpm`` of the measurement (the
    friction would stall the propeller at rest, or the measured speed lies
    where the propeller's torque rises with speed), or the friction would be
    negative (measured faster than the frictionless propeller), ``ok`` is
    False and the other fields say why.

    Parameters
    ----------
    hydro_torque : callable
        ``rpm array -> propeller torque array`` with no friction subtracted
        [N m], at the boat speed of the measurement.
    measured_rpm : array_like
        Measured free-wheeling shaft speed (generator absent or its own drag
        not on the shaft) [rpm].
    rpm_min, rpm_max : array_like, optional
        Scan range of the free-wheel check [rpm].
    tolerance_rpm : float, optional
        Largest accepted difference between the model's free-wheel and the
        measurement [rpm].

    Returns
    -------
    FrictionFit
        ``3 x (24 + 12 + 1) + 3`` calls of ``hydro_torque`` (one on a
        65-point leading grid axis: it must broadcast one).

    References
    ----------
    Torque balance of a free shaft, J dw/dt = Q_h - Q_f (from memory, any
    dynamics text); the solver is :func:`operating_point`.
    """
    n_m = np.asarray(measured_rpm, dtype=float)
    friction = np.asarray(hydro_torque(n_m), float)
    start = np.asarray(hydro_torque(np.asarray(rpm_min, float) + 0.0 * n_m), float)

    def balance(q_f):
        return free_wheel_rpm(lambda rpm: np.asarray(hydro_torque(rpm), float) - q_f, 0.0,
                              rpm_min, rpm_max)

    fit = balance(np.maximum(friction, 0.0))
    free = balance(0.0)
    # The most friction a shaft starting from rest gets past: the least torque on the way up to
    # the propeller's peak (a grid on a leading axis up to the frictionless free-wheel).
    t = np.linspace(0.0, 1.0, 65).reshape((-1,) + (1,) * free.rpm.ndim)
    q = np.asarray(hydro_torque(rpm_min + (np.maximum(free.rpm, rpm_min) - rpm_min) * t), float)
    rising = np.arange(len(t)).reshape(t.shape) <= np.argmax(q, axis=0)
    most = np.min(np.where(rising, q, np.inf), axis=0)
    lowest = balance((1.0 - 1e-3) * np.maximum(most, 0.0))
    ok = (friction >= 0.0) & ~fit.stalled & ~fit.runaway & (np.abs(fit.rpm - n_m) <= tolerance_rpm)
    return FrictionFit(friction, fit.rpm, lowest.rpm, free.rpm, start, ok)


def loaded_operating_point(generator_torque: TorqueFunction, propeller_torque: TorqueFunction,
                           bearing_drag_Nm=0.0, rpm_min=5.0, rpm_max=3000.0, n_scan=16,
                           n_refine=10) -> tuple[OperatingPoint, OperatingPoint]:
    """Free-wheeling speed first, then the loaded balance below it.

    The generator's drag is never less than its bearing drag, and the
    propeller's torque falls past free-wheeling, so the loaded speed lies
    below the free-wheeling speed against the bearing drag alone; scanning
    only up to there (5 % margin) spends the generator calls where the root
    is.

    Parameters
    ----------
    generator_torque, propeller_torque : callable
        As :func:`operating_point` [N m].
    bearing_drag_Nm : array_like, optional
        Lower bound of the generator's drag torque [N m].
    rpm_min, rpm_max : array_like, optional
        Scan range of the free-wheeling search [rpm].
    n_scan, n_refine : int, optional
        Generator-side scan and refinement counts [-].

    Returns
    -------
    (loaded, free) : tuple of OperatingPoint
        ``free.calls`` propeller-only calls, then ``loaded.calls`` calls of
        both callables.
    """
    free = free_wheel_rpm(propeller_torque, bearing_drag_Nm, rpm_min, rpm_max)
    top = np.where(free.stalled, 2.0 * np.asarray(rpm_min, float), 1.05 * free.rpm)
    loaded = operating_point(generator_torque, propeller_torque, rpm_min, top, n_scan, n_refine)
    # a propeller that cannot free-wheel cannot turn a generator either
    stalled = loaded.stalled | free.stalled
    return loaded._replace(stalled=stalled, rpm=np.where(stalled, 0.0, loaded.rpm),
                           runaway=loaded.runaway & ~stalled), free


class PropellerTable:
    """The propeller's torque and thrust tabulated once over a uniform rpm
    grid for a few boat speeds, then interpolated linearly: the boat has one
    propeller, so a whole batch of generator designs shares the curve.

    Parameters
    ----------
    boat_speeds_m_s : array_like
        Boat speeds, shape (s,) [m/s].
    rpm_max : float, optional
        Top of the table [rpm]; beyond it the last interval is extrapolated.
    n_rpm : int, optional
        Table points from 0 to rpm_max [-].
    **propeller
        Geometry and options of :func:`propeller_turbine` (diameter_m,
        pitch_m, blades, area_ratio, wake_fraction, shaft_friction_Nm ...).
    """

    def __init__(self, boat_speeds_m_s, rpm_max=1500.0, n_rpm=301, **propeller):
        self.boat_speeds_m_s = np.atleast_1d(np.asarray(boat_speeds_m_s, dtype=float))
        self.rpm_grid = np.linspace(0.0, float(rpm_max), int(n_rpm))
        res = propeller_turbine(self.rpm_grid, self.boat_speeds_m_s[:, None], **propeller)
        self.torque_table_Nm, self.thrust_table_N = res.torque_Nm, res.thrust_N  # (s, n_rpm)

    def _interp(self, table, rpm):
        rpm = np.asarray(rpm, dtype=float)
        s, m = table.shape
        shape = np.broadcast_shapes(rpm.shape, (s,))
        t = np.broadcast_to(rpm, shape) / self.rpm_grid[1]
        finite = np.isfinite(t)  # NaN rpm (a design that cannot be built): NaN out, never an index
        i = np.clip(np.floor(np.where(finite, t, 0.0)), 0, m - 2).astype(np.intp)
        w = np.where(finite, t - i, np.nan)
        flat = table.ravel()
        base = np.broadcast_to(np.arange(s) * m, shape) + i
        return flat[base] * (1.0 - w) + flat[base + 1] * w

    def torque(self, rpm):
        """Available torque [N m] at ``rpm`` of shape (..., s), speeds on the last axis."""
        return self._interp(self.torque_table_Nm, rpm)

    def thrust(self, rpm):
        """Thrust [N] (negative = drag on the boat) at ``rpm`` of shape (..., s)."""
        return self._interp(self.thrust_table_N, rpm)


def sailing_profile(current_A, drag_force_N, hours_per_day):
    """Daily charge and mean added drag over a sailing profile.

    Parameters
    ----------
    current_A : array_like
        Charge current at each boat speed, speeds on the last axis [A].
    drag_force_N : array_like
        Added drag force on the boat (minus the propeller thrust) at each
        speed [N].
    hours_per_day : array_like
        Hours per day sailed at each speed, shape (s,) [h].

    Returns
    -------
    amp_hours_per_day : ndarray
        ``sum I(v) h(v)`` [A h].
    mean_drag_N : ndarray
        Time-weighted mean drag ``sum F(v) h(v) / sum h`` [N].
    """
    h = np.asarray(hours_per_day, dtype=float)
    amp_hours = np.sum(np.asarray(current_A, dtype=float) * h, axis=-1)
    mean_drag = np.sum(np.asarray(drag_force_N, dtype=float) * h, axis=-1) / np.sum(h)
    return amp_hours, mean_drag
