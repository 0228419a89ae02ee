"""The free-wheeling propeller as a water turbine: blade-element momentum
(BEM) theory in the windmill quadrant.

Pure, vectorised kernels: numpy arrays in, arrays out, any broadcast shape
of designs x boat speeds x shaft speeds, radial stations on a trailing axis
that never leaves this module. SI units inside, no validation.

Sign conventions (derived in full in the Notes of :func:`propeller_turbine`):
the shaft turns in its ahead (propulsion) sense, ``speed_rpm >= 0``; the boat
moves ahead, ``boat_speed_m_s > 0``. Torque is positive when the water
drives the shaft; thrust is positive ahead, so the drag of a windmilling
propeller on the boat is a negative thrust.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

SEA_WATER_DENSITY = 1025.0  # [kg/m^3] near 15 C, 35 g/kg salinity (common practice)
N_STATIONS = 12  # radial blade elements (torque within 1 % of 60 stations for a 16 x 11 in propeller)
N_SCAN = 25  # inflow-angle grid points scanned for a bracket (3.7 deg apart)
N_REFINE = 7  # Illinois steps inside the bracket (the residual is smooth there)
_PHI_MIN = np.radians(0.25)  # [rad] lower end of the inflow-angle scan
_PHI_MAX = 0.5 * np.pi  # [rad] flow along the shaft: a stalled, stopped blade

# Assumed planform: elliptic chord outline whose widest point lies 45 % of the
# way from hub to tip, cut by the hub (own choice, resembling common cruising
# propellers: a finite root chord, widest a little outboard of mid-span,
# rounded tip).
_WIDEST_FRACTION = 0.45


class PropellerResult(NamedTuple):
    """Shaft torque, thrust and shaft power of the propeller."""

    torque_Nm: np.ndarray  # [N m] driving the shaft, after shaft-line friction
    thrust_N: np.ndarray  # [N] ahead positive: negative = drag on the boat
    power_W: np.ndarray  # [W] torque_Nm x omega, available to the generator


class BladeElements(NamedTuple):
    """Converged blade-element solution, radial stations on the last axis."""

    radius_m: np.ndarray  # [m] station radius
    width_m: np.ndarray  # [m] radial width of the annulus the station stands for
    chord_m: np.ndarray  # [m]
    solidity: np.ndarray  # [-] Z c / (2 pi r)
    pitch_angle_rad: np.ndarray  # [rad] geometric pitch angle atan(P / (2 pi r))
    inflow_angle_rad: np.ndarray  # [rad] angle of the relative flow to the disc plane
    axial_induction: np.ndarray  # [-] a: axial flow at the disc is V_a (1 - a)
    swirl_induction: np.ndarray  # [-] a': tangential relative flow is omega r (1 + a')
    loss_factor: np.ndarray  # [-] Prandtl tip x hub loss factor F
    drag_per_length_N_m: np.ndarray  # [N/m] dT/dr, astern (drag on the boat) positive
    torque_per_length_N: np.ndarray  # [N m / m] dQ/dr, driving the shaft positive
    residual: np.ndarray  # [-] remaining BEM residual at the root


def blade_section_coefficients(angle_of_attack_rad, camber_ratio=0.02, lift_slope_per_rad=2.0 * np.pi,
                               drag_zero_lift=0.01, drag_quadratic_per_rad2=0.5,
                               stall_angle_rad=np.radians(12.0), stall_width_rad=np.radians(6.0),
                               flat_plate_normal=2.0):
    """Lift and drag coefficients of a thin propeller section, attached flow
    blended smoothly into the flat-plate post-stall forms.

    Propeller convention: ``angle_of_attack_rad`` is measured from the chord
    line, positive when the section pushes the boat ahead (the pressure face
    towards the stern).

    Parameters
    ----------
    angle_of_attack_rad : array_like
        Angle of attack of the relative flow on the chord line [rad].
    camber_ratio : array_like, optional
        Maximum camber over chord of a parabolic camber line; positive camber
        helps propulsion [-].
    lift_slope_per_rad : array_like, optional
        Attached-flow lift-curve slope [1/rad].
    drag_zero_lift : array_like, optional
        Profile drag coefficient at zero lift [-].
    drag_quadratic_per_rad2 : array_like, optional
        Growth of profile drag with the square of the angle from zero lift
        [1/rad^2].
    stall_angle_rad : array_like, optional
        Angle from zero lift at which the blend is half way to the flat plate
        [rad].
    stall_width_rad : array_like, optional
        Half-width of the blend into stall: attached below stall angle minus
        it, flat plate above stall angle plus it [rad].
    flat_plate_normal : array_like, optional
        Normal-force coefficient of a flat plate at 90 degrees [-].

    Returns
    -------
    lift, drag : ndarray
        Section lift and drag coefficients [-]; lift is odd in the angle from
        zero lift, drag even in the chord angle.

    Notes
    -----
    Attached: ``C_L = m (alpha - alpha_0)`` with thin-airfoil theory's slope
    ``m = 2 pi`` and zero-lift angle ``alpha_0 = -2 f/c`` of a parabolic
    camber line; ``C_D = C_D0 + k (alpha - alpha_0)^2``. Post-stall: the flat
    plate ``C_L = C_N sin(alpha) cos(alpha)``, ``C_D = C_N sin^2(alpha)``
    with ``C_N = 2``. The weight is the smoothstep ``s = t^2 (3 - 2 t)``,
    ``t = clip((|alpha - alpha_0| - alpha_s)/(2 w) + 1/2, 0, 1)``: C1-smooth,
    so the BEM residual stays smooth in the inflow angle, and exactly the
    attached model below 6 degrees from zero lift (defaults). The wide band
    (6-18 degrees) stands for the gentle stall of low-aspect-ratio blades and
    keeps the stalled BEM from folding into many close roots (our choice). Thickness, Reynolds number and
    cavitation are not modelled.

    References
    ----------
    I. H. Abbott and A. E. von Doenhoff, *Theory of Wing Sections*, Dover,
    1959, sec. 4.3: thin-airfoil lift slope 2 pi and the zero-lift angle of a
    parabolic camber line (from memory).
    S. F. Hoerner, *Fluid-Dynamic Drag*, 1965, and L. A. Viterna and
    R. D. Corrigan, "Fixed pitch rotor performance of large horizontal axis
    wind turbines", NASA CP-2230, 1982: flat-plate post-stall forms
    C_D = C_Dmax sin^2 alpha, C_L = C_Dmax/2 sin 2 alpha with C_Dmax ~ 2
    (from memory). The smoothstep blend and the quadratic drag growth are our
    own choices.
    """
    alpha = np.asarray(angle_of_attack_rad, dtype=float)
    return _section(alpha, np.sin(alpha), np.cos(alpha), camber_ratio, lift_slope_per_rad, drag_zero_lift,
                    drag_quadratic_per_rad2, stall_angle_rad, stall_width_rad, flat_plate_normal)


def _section(alpha, s, c, camber_ratio=0.02, lift_slope_per_rad=2.0 * np.pi, drag_zero_lift=0.01,
             drag_quadratic_per_rad2=0.5, stall_angle_rad=np.radians(12.0), stall_width_rad=np.radians(6.0),
             flat_plate_normal=2.0):
    """:func:`blade_section_coefficients` given sin and cos of the angle."""
    alpha_e = alpha + 2.0 * np.asarray(camber_ratio)  # angle from zero lift
    lift_att = lift_slope_per_rad * alpha_e
    drag_att = drag_zero_lift + drag_quadratic_per_rad2 * alpha_e * alpha_e
    lift_fp = flat_plate_normal * s * c
    drag_fp = flat_plate_normal * s * s + drag_zero_lift
    t = np.clip((np.abs(alpha_e) - stall_angle_rad) / (2.0 * stall_width_rad) + 0.5, 0.0, 1.0)
    w = t * t * (3.0 - 2.0 * t)  # smoothstep: exactly attached / flat plate outside the band
    return lift_att + w * (lift_fp - lift_att), drag_att + w * (drag_fp - drag_att)


def blade_chord(radius_fraction, diameter_m, blades, area_ratio, hub_ratio=0.2):
    """Chord of the assumed elliptic planform at radius fraction x = r/R.

    ``c(x) = c_max sqrt(1 - ((x - x_w) / (1 - x_w))^2)``, widest at
    ``x_w = x_h + 0.45 (1 - x_h)``, zero at the tip, scaled so that
    ``Z int_{x_h}^1 c R dx = EAR pi D^2 / 4`` (expanded blade area).

    Parameters
    ----------
    radius_fraction : array_like
        r / R, between the hub ratio and 1 [-].
    diameter_m : array_like
        Propeller diameter [m].
    blades : array_like
        Number of blades Z [-].
    area_ratio : array_like
        Expanded blade-area ratio EAR [-].
    hub_ratio : array_like, optional
        Hub diameter over propeller diameter [-].

    Returns
    -------
    ndarray
        Expanded chord [m].

    References
    ----------
    Definition of the expanded area ratio, e.g. J. Carlton, *Marine
    Propellers and Propulsion*, 2nd ed., 2007, ch. 3 (from memory). The
    planform is our own assumption. The area integral is closed form:
    ``int sqrt(1 - u^2) du = (u sqrt(1 - u^2) + asin u) / 2``.
    """
    x = np.asarray(radius_fraction, dtype=float)
    xh = np.asarray(hub_ratio, dtype=float)
    xw = xh + _WIDEST_FRACTION * (1.0 - xh)
    half = 1.0 - xw
    u = np.clip((x - xw) / half, -1.0, 1.0)
    u_h = (xh - xw) / half
    prim = lambda v: 0.5 * (v * np.sqrt(1.0 - v * v) + np.arcsin(v))  # noqa: E731
    shape_area = half * (prim(1.0) - prim(u_h))  # int_{xh}^1 sqrt(1-u^2) dx
    R = 0.5 * np.asarray(diameter_m, dtype=float)
    c_max = np.asarray(area_ratio) * np.pi * R / (np.asarray(blades) * shape_area)
    return c_max * np.sqrt(1.0 - u * u)


def _element_terms(phi, pitch_angle, tip_speed_ratio_local, solidity, x, xh, blades, section):
    """BEM residual and its by-products at inflow angle ``phi`` (all arrays
    of the element shape); ``pitch_angle`` is (angle, sin, cos)."""
    sin_p, cos_p = np.sin(phi), np.cos(phi)
    pa, sin_pa, cos_pa = pitch_angle
    # turbine lift and normal/tangential coefficients (see propeller_turbine Notes)
    cl, cd = _section(pa - phi, sin_pa * cos_p - cos_pa * sin_p, cos_pa * cos_p + sin_pa * sin_p, **section)
    cl_t = -cl
    c_n = cl_t * cos_p + cd * sin_p  # along the stream: drag on the boat
    c_t = cl_t * sin_p - cd * cos_p  # along the rotation: drives the shaft
    g = 0.5 * blades / (x * sin_p)
    f_tip = g * (1.0 - x)
    f_hub = g * (x - xh)
    F = (4.0 / np.pi**2) * np.arccos(np.exp(-f_tip)) * np.arccos(np.exp(-f_hub))
    F = np.maximum(F, 1e-9)
    k = solidity * c_n / (4.0 * F * sin_p * sin_p)
    # 1/(1 - a): momentum a = k/(1+k) up to a = 0.4 (k = 2/3), Buhl's
    # empirical thrust curve above it, solved in closed form without the
    # 0/0 of the quadratic formula.
    gamma2 = np.maximum(2.0 * F * k - F * (4.0 / 3.0 - F), 0.0)
    inv_1ma = np.where(k <= 2.0 / 3.0, 1.0 + k, np.sqrt(gamma2) + 5.0 / 3.0 - F)
    # tan(phi) = (1 - a) / (lambda_r (1 + a')) with 1 + a' = 1 / (1 - k'),
    # multiplied through so that lambda_r = 0 (shaft held still) is regular.
    residual = tip_speed_ratio_local * sin_p * inv_1ma - cos_p + solidity * c_t / (4.0 * F * sin_p)
    return residual, inv_1ma, c_n, c_t, F, k


def propeller_elements(speed_rpm, boat_speed_m_s, diameter_m, pitch_m, blades, area_ratio,
                       wake_fraction=0.1, hub_ratio=0.2, density_kg_m3=SEA_WATER_DENSITY,
                       n_stations=N_STATIONS, **section):
    """Solve the blade-element momentum equations at every radial station.

    Same parameters as :func:`propeller_turbine` (without the friction);
    ``section`` keywords go to :func:`blade_section_coefficients`.

    Returns
    -------
    BladeElements
        Per-station solution, shape ``broadcast(inputs) + (n_stations,)``.
    """
    omega = np.asarray(speed_rpm, dtype=float) * (np.pi / 30.0)
    v_a = np.maximum(np.asarray(boat_speed_m_s, dtype=float) * (1.0 - np.asarray(wake_fraction)), 1e-9)
    D, P = np.asarray(diameter_m, dtype=float), np.asarray(pitch_m, dtype=float)
    Z, ear, xh = np.asarray(blades, dtype=float), np.asarray(area_ratio, dtype=float), np.asarray(hub_ratio, dtype=float)
    shape = np.broadcast_shapes(omega.shape, v_a.shape, D.shape, P.shape, Z.shape, ear.shape, xh.shape)
    e = lambda q: np.broadcast_to(q, shape)[..., None]  # noqa: E731  element axis last
    j = (np.arange(n_stations) + 0.5) / n_stations
    x = e(xh) + j * (1.0 - e(xh))  # midpoints of equal annuli
    R = 0.5 * e(D)
    r = x * R
    dr = (1.0 - e(xh)) * R / n_stations
    chord = blade_chord(x, e(D), e(Z), e(ear), e(xh))
    sigma = e(Z) * chord / (2.0 * np.pi * r)
    pitch_angle = np.arctan(e(P) / (2.0 * np.pi * r))
    lam = e(omega) * r / e(v_a)
    args = ((pitch_angle, np.sin(pitch_angle), np.cos(pitch_angle)), lam, sigma, x, e(xh), e(Z), section)

    # Bracket: the residual is negative as phi -> 0 (drag and propulsive lift
    # oppose the rotation) and positive at phi = pi/2 (a stalled blade in an
    # axial stream drives the shaft). Keep the sign change with the LARGEST
    # phi, i.e. the least induction: the windmill-state branch.
    grid = np.linspace(_PHI_MIN, _PHI_MAX, N_SCAN)
    lo, hi, f_lo, f_hi = _scan_bracket(grid, args, sigma.shape)
    side = np.zeros(sigma.shape, dtype=np.int8)  # which end moved last: -1 lo, +1 hi
    for _ in range(N_REFINE):
        # Illinois regula falsi: halve the stale end's value when the same
        # end moves twice, which keeps superlinear convergence in the bracket.
        x_new = hi - f_hi * (hi - lo) / (f_hi - f_lo)
        f_new = _element_terms(x_new, *args)[0]
        neg = f_new <= 0.0
        f_hi = np.where(neg & (side == -1), 0.5 * f_hi, f_hi)
        f_lo = np.where(~neg & (side == 1), 0.5 * f_lo, f_lo)
        lo, f_lo = np.where(neg, x_new, lo), np.where(neg, f_new, f_lo)
        hi, f_hi = np.where(neg, hi, x_new), np.where(neg, f_hi, f_new)
        side = np.where(neg, -1, 1).astype(np.int8)
    phi = np.where(-f_lo < f_hi, lo, hi)
    res, inv_1ma, c_n, c_t, F, k = _element_terms(phi, *args)
    one_minus_a = 1.0 / inv_1ma
    sin_p = np.sin(phi)
    w = e(v_a) * one_minus_a / sin_p  # relative speed from its axial component
    q = 0.5 * np.asarray(density_kg_m3) * w * w * chord * e(Z)
    k_t = sigma * c_t / (4.0 * F * sin_p * np.cos(phi))
    with np.errstate(divide="ignore", invalid="ignore"):
        swirl = k_t / (1.0 - k_t)
    return BladeElements(r, np.broadcast_to(dr, r.shape), chord, sigma, pitch_angle, phi, 1.0 - one_minus_a,
                         swirl, F, q * c_n, q * c_t * r, res)


def _scan_bracket(grid, args, shape):
    """Bracket [lo, hi] on ``grid`` around the largest-phi sign change of the
    residual from <= 0 to > 0 (the residual is > 0 at the top of the grid),
    with the residual at both ends."""
    lo = np.full(shape, grid[0])
    hi = np.full(shape, grid[1])
    r_prev = _element_terms(lo, *args)[0]
    f_lo, f_hi = r_prev, r_prev
    for g_prev, g in zip(grid[:-1], grid[1:]):
        r_cur = _element_terms(np.full(shape, g), *args)[0]
        flip = (r_prev <= 0.0) & (r_cur > 0.0)
        lo, f_lo = np.where(flip, g_prev, lo), np.where(flip, r_prev, f_lo)
        hi, f_hi = np.where(flip, g, hi), np.where(flip, r_cur, f_hi)
        r_prev = r_cur
    return lo, hi, f_lo, f_hi


def propeller_turbine(speed_rpm, boat_speed_m_s, diameter_m, pitch_m, blades, area_ratio,
                      wake_fraction=0.1, shaft_friction_Nm=0.0, hub_ratio=0.2,
                      density_kg_m3=SEA_WATER_DENSITY, n_stations=N_STATIONS, **section):
    """Torque, thrust and power of a fixed-pitch propeller driven by the
    water as a turbine (the windmill quadrant), by blade-element momentum.

    Parameters
    ----------
    speed_rpm : array_like
        Shaft speed, in the ahead sense of rotation, >= 0 [rpm].
    boat_speed_m_s : array_like
        Boat speed through the water, > 0 [m/s].
    diameter_m : array_like
        Propeller diameter D [m].
    pitch_m : array_like
        Geometric pitch P, constant over the radius [m].
    blades : array_like
        Number of blades Z [-].
    area_ratio : array_like
        Expanded blade-area ratio EAR [-].
    wake_fraction : array_like, optional
        Taylor wake fraction w: the inflow is V_a = V (1 - w) [-].
    shaft_friction_Nm : array_like, optional
        Friction torque of the shaft line (stern gland, cutless bearing,
        gearbox in neutral), subtracted from the hydrodynamic torque [N m].
    hub_ratio : array_like, optional
        Hub diameter over D [-].
    density_kg_m3 : array_like, optional
        Water density, sea water by default [kg/m^3].
    n_stations : int, optional
        Number of radial blade elements [-].
    **section
        Keywords of :func:`blade_section_coefficients` (camber, drag, stall).

    Returns
    -------
    PropellerResult
        ``torque_Nm`` [N m] (driving the shaft positive, net of friction),
        ``thrust_N`` [N] (ahead positive; negative = drag on the boat),
        ``power_W`` [W] = torque x omega; all of the broadcast input shape.

    Notes
    -----
    *Geometry.* Section at radius r: pitch angle ``phi_p = atan(P/(2 pi r))``
    from the disc plane; chord from :func:`blade_chord`; solidity
    ``sigma = Z c/(2 pi r)``; local speed ratio ``lambda_r = omega r/V_a``.

    *Signs.* Take x astern along the shaft (the water passes the propeller
    in +x at V_a relative to the boat) and y along the blade's ahead motion.
    The section sees the water coming at angle ``phi`` to the disc plane,
    ``tan phi = V_a (1 - a) / (omega r (1 + a'))``. In propulsion the angle
    of attack is ``alpha = phi_p - phi > 0``; its lift has an ahead
    component (thrust) and a component against the rotation (absorbed
    torque). A windmilling propeller turns in the same sense but slower than
    the pitch would carry it (``omega r < V_a/tan phi_p``), so ``phi > phi_p``
    and ``alpha < 0``: the lift reverses, pushes astern and drives the shaft.
    Writing the turbine lift as ``C_Lt = -C_L(phi_p - phi)``, the force
    coefficients along the stream (astern, drag on the boat) and along the
    rotation (driving) are

        c_n = C_Lt cos phi + C_D sin phi,   c_t = C_Lt sin phi - C_D cos phi,

    the wind-turbine forms with the blade "twist" phi_p. Positive camber of a
    propeller section shifts the zero-lift angle the wrong way for a turbine:
    C_Lt vanishes at ``phi - phi_p = 2 f/c``, not at 0.

    *Momentum.* Annulus thrust ``dT = 4 pi r rho V_a^2 a (1 - a) F dr``,
    torque ``dQ = 4 pi r^3 rho V_a omega a' (1 - a) F dr`` (Glauert). With
    ``k = sigma c_n/(4 F sin^2 phi)`` and ``k' = sigma c_t/(4 F sin phi cos
    phi)`` the element and annulus balances give ``a = k/(1 + k)``,
    ``a' = k'/(1 - k')``. For ``a > 0.4`` momentum theory fails (turbulent
    wake state); Buhl's curve ``C_T = 8/9 + (4F - 40/9) a + (50/9 - 4F) a^2``
    replaces it, whose root gives ``1/(1 - a) = sqrt(2Fk - F(4/3 - F)) +
    5/3 - F`` (continuous with 1 + k at k = 2/3). The single unknown phi
    solves ``lambda_r sin phi/(1 - a) - cos phi + sigma c_t/(4 F sin phi) =
    0`` (the flow-angle identity ``sin phi/(1 - a) = cos phi (1 - k')/
    lambda_r`` multiplied by lambda_r, so that a held shaft is regular), bracketed on a fixed grid and
    refined by a fixed number of Illinois (modified regula falsi) steps. Element forces then use
    ``W = V_a (1 - a)/sin phi``: ``dT/dr = q c_n``, ``dQ/dr = q c_t r``,
    ``q = rho W^2 Z c/2``; midpoint rule over equal annuli. Prandtl's factor
    ``F = (2/pi)^2 acos(exp(-Z (R - r)/(2 r sin phi))) acos(exp(-Z (r - r_h)
    /(2 r sin phi)))`` models tip and hub loss.

    Valid for V_a > 0 and rpm >= 0, from the held shaft to somewhat past
    free-wheeling (light propulsion at the tips); not for motoring, astern
    or crash-stop states, nor cavitation. Chosen root: the largest inflow
    angle (least induction) where the stalled BEM has several.

    References
    ----------
    H. Glauert, "Airplane Propellers", div. L in W. F. Durand (ed.),
    *Aerodynamic Theory*, vol. IV, Springer, 1935: blade-element and
    momentum relations, windmill brake state, Prandtl's tip-loss factor
    (from memory, equations re-derived in the Notes).
    M. L. Buhl, "A new empirical relationship between thrust coefficient and
    induction factor for the turbulent windmill state", NREL/TP-500-36834,
    2005, eq. (5) (from memory; the closed-form root is re-derived here).
    S. A. Ning, "A simple solution method for the blade element momentum
    equations with guaranteed convergence", Wind Energy 17, 2014: the
    idea of one residual in the inflow angle with a bracket (from memory;
    our residual is multiplied through differently).
    A. Betz, "Das Maximum der theoretisch moeglichen Ausnuetzung des Windes
    durch Windmotoren", Z. ges. Turbinenwesen 26, 1920: the 16/27 bound
    (from memory).
    """
    el = propeller_elements(speed_rpm, boat_speed_m_s, diameter_m, pitch_m, blades, area_ratio,
                            wake_fraction, hub_ratio, density_kg_m3, n_stations, **section)
    torque = np.sum(el.torque_per_length_N * el.width_m, axis=-1) - np.asarray(shaft_friction_Nm)
    thrust = -np.sum(el.drag_per_length_N_m * el.width_m, axis=-1)
    omega = np.asarray(speed_rpm, dtype=float) * (np.pi / 30.0)
    return PropellerResult(torque, thrust, torque * omega)


def betz_power(boat_speed_m_s, diameter_m, wake_fraction=0.1, density_kg_m3=SEA_WATER_DENSITY):
    """Betz's upper bound on the power a disc of diameter D can take out of
    the inflow V_a = V (1 - w): ``16/27 x rho/2 x pi D^2/4 x V_a^3``.

    Parameters
    ----------
    boat_speed_m_s : array_like
        Boat speed [m/s].
    diameter_m : array_like
        Disc diameter [m].
    wake_fraction : array_like, optional
        Taylor wake fraction [-].
    density_kg_m3 : array_like, optional
        Water density [kg/m^3].

    Returns
    -------
    ndarray
        Power bound [W].

    References
    ----------
    A. Betz, Z. ges. Turbinenwesen 26, 1920 (from memory).
    """
    v_a = np.asarray(boat_speed_m_s, dtype=float) * (1.0 - np.asarray(wake_fraction))
    return 16.0 / 27.0 * 0.5 * density_kg_m3 * np.pi * np.asarray(diameter_m) ** 2 / 4.0 * v_a**3
