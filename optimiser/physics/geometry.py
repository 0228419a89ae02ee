"""Geometry and fit of the dual-rotor air-cored stator: coils derived from the magnet and the ring.

Coordinates follow the rest of the physics package: the two rotors carry 2p blocks each on a ring of
mean radius R_m; the stator between them holds Q coils whose hole clears the magnet footprint, of one
of two shapes (`COIL_SHAPES`): rectangular, or keystone (trapezoidal, filling the ring's sector).
Everything here is plain geometry (no field), vectorised over designs, SI units.

The coupling that drives the whole trade-off lives here: more turns or strands make a thicker coil,
a thicker coil widens the magnet face gap, and a wider gap weakens the field.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

COPPER_DENSITY_KG_M3 = 8890.0
"""Density of annealed copper [kg/m^3] (IEC 60028 uses 8.89 g/cm^3 at 20 C)."""


COIL_SHAPES = ("rectangular", "keystone")
"""Coil shapes by code (0, 1): the design file's `coil_shape` values."""


class CoilGeometry(NamedTuple):
    """Derived coil and stator dimensions, every field an array of shape (n,) [m] unless noted.

    The hole (the former) is a trapezoid symmetric about the coil's centre line: radial length
    `hole_radial_m`, width `hole_tangential_m` at its inner end and `hole_outer_tangential_m` at its
    outer end, long sides at `side_angle_rad` to the centre line (0 for a rectangle). Every turn is
    the hole grown by its distance s from it (straight sides moved out by s, corners rounded with
    radius s), so one formula set describes both shapes.
    """

    hole_radial_m: np.ndarray
    hole_tangential_m: np.ndarray
    leg_width_m: np.ndarray
    coil_thickness_m: np.ndarray
    stator_thickness_m: np.ndarray
    face_gap_m: np.ndarray
    mean_turn_length_m: np.ndarray
    coil_inner_radius_m: np.ndarray
    coil_outer_radius_m: np.ndarray
    coil_shape: np.ndarray              # code into COIL_SHAPES [-]
    side_angle_rad: np.ndarray          # long sides of the hole to the centre line [rad]
    hole_outer_tangential_m: np.ndarray
    hole_perimeter_m: np.ndarray
    hole_area_m2: np.ndarray            # [m^2]
    coil_area_m2: np.ndarray            # whole coil outline, hole included [m^2]
    active_length_m: np.ndarray         # conductor of one turn over the magnet length, both legs


def coil_geometry(ring_radius_m, magnet_length_m, magnet_width_m, coils, turns, strands,
                  insulated_diameter_m, fill_factor, hole_clearance_m, resin_skin_m,
                  running_clearance_m, coil_spacing_m=0.5e-3, coil_shape=0):
    """Air-cored coils around the magnet footprint, as wide as their neighbours allow.

    Parameters
    ----------
    ring_radius_m : array_like
        Mean radius of the magnet ring R_m [m].
    magnet_length_m, magnet_width_m : array_like
        Radial length L and tangential width W of a magnet block [m].
    coils : array_like
        Number of coils Q on the stator [-].
    turns, strands : array_like
        Turns per coil N and strands in hand n_s [-].
    insulated_diameter_m : array_like
        Overall (enamelled) wire diameter d_i [m].
    fill_factor : float
        k_f = N n_s d_i^2 / (leg width x coil thickness): 1 is perfect square (layer) packing [-].
    hole_clearance_m : float
        Clearance added to each side of the magnet footprint to give the coil hole [m].
    resin_skin_m : float
        Resin over each face of the coils [m].
    running_clearance_m : float
        Air between the stator and a magnet face, per side [m].
    coil_spacing_m : float
        Minimum air between neighbouring coils at their closest point [m].
    coil_shape : array_like of int
        0 rectangular, 1 keystone (`COIL_SHAPES`) [-].

    Returns
    -------
    CoilGeometry

    Notes
    -----
    Leg width: neighbouring coils are identical rectangles rotated by 2 pi / Q. A rectangle of
    half-width b whose radial sides run parallel to its centre line stays on its side of the bisector
    between two coils if b <= r_a tan(pi/Q), where r_a is its innermost radius (the corner nearest the
    shaft is the first to touch). With r_a = R_m - L_h/2 - w and b = W_h/2 + w + s/2 this is linear in
    w and solved exactly. Negative widths mean the coils do not fit (checked in `fit_margins`).

    The winding window of one leg is w x t_c and holds N n_s wires of square cell d_i^2 at fill factor
    k_f, so t_c = N n_s d_i^2 / (k_f w) (square packing assumed).

    Turns wound on a rectangular former round its corners with radius equal to their distance s from
    the hole, so a turn at distance s has length 2 (L_h + W_h) + 2 pi s; averaged over 0..w the mean
    turn length is 2 (L_h + W_h) + pi w.

    Keystone. The former is a trapezoid: inner and outer ends square to the coil's centre line at
    R_m -+ L_h/2, long sides parallel to the bisectors between this coil and its two neighbours
    (at phi = pi/Q to the centre line), each through an inner corner of the footprint plus
    clearance, so the hole is W_h wide at its inner end and W_h + 2 L_h tan(phi) at its outer end
    and clears the whole footprint. Turns wound on it lie each on the one before, so a turn at
    depth s is the trapezoid grown by s with corners rounded to radius s (what a wire pulled taut
    round a flat former does): the legs have one width w along their length, and the long sides
    of neighbouring coils are parallel, so the coils fill the ring with an even gap between them.
    The widest leg keeps that gap at s_c: the hole's inner corner lies e = x_i sin(phi) - (W_h/2)
    cos(phi) from the bisector (x_i = R_m - L_h/2), so w = e - s_c/2, exact for the rounded and for
    a sharp-cornered outline alike. The former is a flat board cut on two radial-parallel lines,
    wound between two cheeks as the rectangular coil is: nothing a workshop does not already do.
    A turn at depth s has length P_h + 2 pi s (the corners' arcs add up to a full circle for any
    convex former), so the mean turn is P_h + pi w, with the hole perimeter
    P_h = 2 W_h + 2 L_h tan(phi) + 2 L_h / cos(phi); it encloses A_h + P_h s + pi s^2. The coil's
    outermost point is an outer corner of the hole plus w (rounded outline).
    """
    ring_radius_m = np.asarray(ring_radius_m, dtype=float)
    hole_radial = np.asarray(magnet_length_m, dtype=float) + 2.0 * hole_clearance_m
    hole_tangential = np.asarray(magnet_width_m, dtype=float) + 2.0 * hole_clearance_m
    tan_half_pitch = np.tan(np.pi / np.asarray(coils, dtype=float))
    leg = ((ring_radius_m - hole_radial / 2.0) * tan_half_pitch
           - hole_tangential / 2.0 - coil_spacing_m / 2.0) / (1.0 + tan_half_pitch)
    # A non-positive leg is infeasible; keep the thickness finite so the field model stays defined.
    leg_for_thickness = np.maximum(leg, 1e-4)
    coil_thickness = (np.asarray(turns, dtype=float) * np.asarray(strands, dtype=float)
                      * np.asarray(insulated_diameter_m, dtype=float) ** 2
                      / (fill_factor * leg_for_thickness))
    stator = coil_thickness + 2.0 * resin_skin_m
    gap = stator + 2.0 * running_clearance_m
    mean_turn = 2.0 * (hole_radial + hole_tangential) + np.pi * leg_for_thickness
    inner = ring_radius_m - hole_radial / 2.0 - leg
    half_width = hole_tangential / 2.0 + leg
    outer = np.hypot(ring_radius_m + hole_radial / 2.0 + leg, half_width)
    shape = np.broadcast_to(np.asarray(coil_shape, dtype=np.int64), ring_radius_m.shape)
    keystone = shape == 1
    zero = np.zeros(np.broadcast(ring_radius_m, hole_radial, tan_half_pitch).shape)
    hole_outer = hole_tangential + zero
    perimeter = 2.0 * (hole_radial + hole_tangential) + zero
    active = 2.0 * np.asarray(magnet_length_m, dtype=float) + zero
    angle = zero.copy()
    if np.any(keystone):
        # Only keystone designs take this branch, so rectangular values stay as they were, bit for bit.
        phi = np.broadcast_to(np.pi / np.asarray(coils, dtype=float), zero.shape)
        x_in = ring_radius_m - hole_radial / 2.0
        k_leg = x_in * np.sin(phi) - hole_tangential / 2.0 * np.cos(phi) - coil_spacing_m / 2.0
        k_for_thickness = np.maximum(k_leg, 1e-4)
        k_thick = (np.asarray(turns, dtype=float) * np.asarray(strands, dtype=float)
                   * np.asarray(insulated_diameter_m, dtype=float) ** 2
                   / (fill_factor * k_for_thickness))
        k_outer_hole = hole_tangential + 2.0 * hole_radial * np.tan(phi)
        k_perimeter = hole_tangential + k_outer_hole + 2.0 * hole_radial / np.cos(phi)
        pick = lambda rect, key: np.where(keystone, key, rect)  # noqa: E731
        leg, leg_for_thickness = pick(leg, k_leg), pick(leg_for_thickness, k_for_thickness)
        coil_thickness = pick(coil_thickness, k_thick)
        stator = coil_thickness + 2.0 * resin_skin_m
        gap = stator + 2.0 * running_clearance_m
        mean_turn = pick(mean_turn, k_perimeter + np.pi * k_for_thickness)
        inner = pick(inner, x_in - k_leg)
        outer = pick(outer, np.hypot(x_in + hole_radial, k_outer_hole / 2.0) + np.maximum(k_leg, 0.0))
        hole_outer, perimeter = pick(hole_outer, k_outer_hole), pick(perimeter, k_perimeter)
        active = pick(active, active / np.cos(phi))
        angle = pick(angle, phi)
    hole_area = hole_radial * (hole_tangential + hole_outer) / 2.0
    grown = np.maximum(leg, 0.0)
    coil_area = hole_area + perimeter * grown + np.pi * grown ** 2  # the wound (rounded) outline
    return CoilGeometry(hole_radial + zero, hole_tangential + zero, leg, coil_thickness, stator, gap,
                        mean_turn, inner, outer, shape.copy(), angle, hole_outer, perimeter,
                        hole_area, coil_area, active)


def hole_corners(ring_radius_m, hole_radial_m, hole_tangential_m, hole_outer_tangential_m):
    """Corners of the coil hole (the former) of one coil centred on the x axis, anticlockwise.

    Parameters
    ----------
    ring_radius_m, hole_radial_m, hole_tangential_m, hole_outer_tangential_m : float
        Coil centre radius, hole length and its widths at the inner and outer end [m].

    Returns
    -------
    ndarray, shape (4, 2)
        (x, y) of the inner-lower, outer-lower, outer-upper and inner-upper corners [m].
    """
    x_in, x_out = ring_radius_m - hole_radial_m / 2.0, ring_radius_m + hole_radial_m / 2.0
    y_in, y_out = hole_tangential_m / 2.0, hole_outer_tangential_m / 2.0
    return np.array([[x_in, -y_in], [x_out, -y_out], [x_out, y_out], [x_in, y_in]])


def turn_path(corners_m, depth_m, points_per_corner=16):
    """One turn wound at a depth s round a convex former: the polygon grown by s, corners rounded.

    Parameters
    ----------
    corners_m : array_like, shape (K, 2)
        Corners of the former (the hole), anticlockwise [m].
    depth_m : float
        Distance s of the turn from the former [m].
    points_per_corner : int
        Points on each corner's arc (radius s, centred on the corner) [-].

    Returns
    -------
    ndarray, shape (K * points_per_corner, 2)
        Closed polyline (last point joins the first) of the turn's centre line [m]; the straight
        sides are the chords between consecutive arcs.
    """
    v = np.asarray(corners_m, dtype=float)
    edge = np.roll(v, -1, axis=0) - v
    normal_angle = np.arctan2(-edge[:, 0], edge[:, 1])  # outward normal (dy, -dx) of each edge
    start = np.roll(normal_angle, 1)                     # the edge arriving at each corner
    sweep = np.mod(normal_angle - start, 2.0 * np.pi)
    t = np.linspace(0.0, 1.0, points_per_corner)
    ang = start[:, None] + sweep[:, None] * t[None, :]
    pts = v[:, None, :] + depth_m * np.stack([np.cos(ang), np.sin(ang)], axis=-1)
    return pts.reshape(-1, 2)


def winding_lengths(mean_turn_length_m, turns, strands, coils, series_coils_per_path):
    """Wire lengths of the stator.

    Parameters
    ----------
    mean_turn_length_m : array_like
        Mean length of one turn [m].
    turns, strands, coils, series_coils_per_path : array_like
        Turns per coil, strands in hand, coils Q and coils in series in one parallel path [-].

    Returns
    -------
    path_length_m : ndarray
        Length of one conductor (one strand) along one parallel path of a phase [m].
    total_wire_m : ndarray
        Wire to buy for the whole stator, all strands, before any margin [m].
    """
    per_coil = np.asarray(mean_turn_length_m) * np.asarray(turns)
    path_length = per_coil * np.asarray(series_coils_per_path)
    total = per_coil * np.asarray(strands) * np.asarray(coils)
    return path_length, total


def copper_mass_kg(total_wire_m, bare_diameter_m):
    """Copper mass of a wire length [kg]: length [m] x pi d^2/4 [m^2] x 8890 kg/m^3."""
    return np.asarray(total_wire_m) * np.pi * np.asarray(bare_diameter_m) ** 2 / 4.0 * COPPER_DENSITY_KG_M3


FIT_CHECKS = (
    ("magnets_overlap", "magnets overlap on the ring: fewer poles, narrower magnets or a larger ring"),
    ("coils_do_not_fit", "coil legs narrower than the minimum: fewer coils or a larger ring"),
    ("ring_beyond_disc", "magnets overhang the rotor disc: a larger disc or a smaller ring"),
    ("disc_beyond_envelope", "rotor disc or stator wider than the space allows"),
    ("axial_beyond_envelope", "rotors and stator longer than the axial space allows"),
    ("bore_clash", "coils or magnets reach into the shaft and hub clearance"),
)
"""Name and user-facing reason of each geometric fit check, in the order `fit_margins` returns them."""


def fit_margins(ring_radius_m, magnet_length_m, magnet_width_m, magnet_thickness_m, poles,
                disc_diameter_m, disc_thickness_m, coil: CoilGeometry, *, min_coil_leg_m,
                max_rotor_diameter_m, max_axial_length_m, shaft_diameter_m, hub_clearance_m,
                magnet_spacing_m=1.0e-3):
    """Normalised violation of each fit check: <= 0 fits, > 0 fails (pymoo's G <= 0 convention).

    Parameters
    ----------
    ring_radius_m, magnet_length_m, magnet_width_m, magnet_thickness_m : array_like
        Ring radius and magnet block sides [m].
    poles : array_like
        Number of poles 2p on one rotor [-].
    disc_diameter_m, disc_thickness_m : array_like
        Rotor disc plate [m].
    coil : CoilGeometry
        Output of `coil_geometry`.
    min_coil_leg_m, max_rotor_diameter_m, max_axial_length_m, shaft_diameter_m, hub_clearance_m : float
        Limits from the scenario [m].
    magnet_spacing_m : float
        Minimum air between neighbouring magnets at their inner corners [m].

    Returns
    -------
    ndarray, shape (n, 6)
        Columns in the order of `FIT_CHECKS`, each divided by a length of the design so that values
        of different checks are comparable.
    """
    r = np.asarray(ring_radius_m, dtype=float)
    length = np.asarray(magnet_length_m, dtype=float)
    width = np.asarray(magnet_width_m, dtype=float)
    inner_magnet = r - length / 2.0
    allowed_half = inner_magnet * np.tan(np.pi / np.asarray(poles, dtype=float)) - magnet_spacing_m / 2.0
    overlap = (width / 2.0 - allowed_half) / width
    coils_fit = (min_coil_leg_m - coil.leg_width_m) / min_coil_leg_m
    magnet_corner = np.hypot(r + length / 2.0, width / 2.0)
    disc_radius = np.asarray(disc_diameter_m, dtype=float) / 2.0
    beyond_disc = (magnet_corner - disc_radius) / length
    widest = np.maximum(disc_radius, coil.coil_outer_radius_m)
    beyond_envelope = (widest - max_rotor_diameter_m / 2.0) / (max_rotor_diameter_m / 2.0)
    axial = 2.0 * np.asarray(disc_thickness_m) + 2.0 * np.asarray(magnet_thickness_m) + coil.face_gap_m
    beyond_axial = (axial - max_axial_length_m) / max_axial_length_m
    bore = shaft_diameter_m / 2.0 + hub_clearance_m
    innermost = np.minimum(coil.coil_inner_radius_m, inner_magnet)
    clash = (bore - innermost) / bore
    return np.stack(np.broadcast_arrays(overlap, coils_fit, beyond_disc, beyond_envelope,
                                        beyond_axial, clash), axis=-1)

