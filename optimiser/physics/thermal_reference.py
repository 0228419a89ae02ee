"""Resolved steady thermal reference: finite-volume conduction in (r, z) over the stator and rotors.

One side of the machine is solved (the two sides are alike; the stator's mid-plane is a symmetry
plane), circumferentially averaged: as the rotor turns, every point of the stator face sees magnets
and the pockets between them in turn, and the stator's heat capacity averages what it sees, so the
rotor-stator interface is the circumferential mean of the two paths (over a magnet: the running
clearance, then the magnet; in a pocket: clearance plus magnet thickness of air to the steel). The
coils' ring is averaged the same way (winding and the resin in the coil holes). A 3-D pole-pitch
sector is not solved: the stator sees a time-mean interface, and within the stationary stator the
circumferential variation (winding vs hole) is one leg width across, where the through-thickness
path dominates.

Cell layers in z, from the stator's mid-plane (symmetry, adiabatic):

    coil ring (heat generated)  |  resin skin  |  clearance + magnet layer  |  steel disc
    (resin outside the ring)                     (interface conductance      (outer face and rim
                                                  as an effective layer)      to the bilge air)

Boundaries: rotor disc outer face (free rotating disc + natural convection + radiation), disc rim
(rotating cylinder + natural convection + radiation), stator rim and any stator face beyond the
discs (natural convection + radiation). The hub and the stator's bore are taken as adiabatic (no
heat credited to the shaft: the cautious side).

Not a search kernel: one sparse solve per design (a few thousand cells, milliseconds), for the
re-checks (`Settings(thermal_model="reference")`) and for checking the fast network.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.linalg import spsolve

from .losses import air_properties
from .thermal import (STEFAN_BOLTZMANN, _gap_conductance_analogy, _natural_h, nusselt_free_disc_laminar)

COPPER_W_MK = 390.0
"""Thermal conductivity of annealed copper near 50 C [W/(m K)] (handbook value, from memory)."""
ENAMEL_W_MK = 0.2
"""Polyesterimide/polyamide-imide wire enamel [W/(m K)] (common-practice value, from memory)."""
STEEL_W_MK = 50.0
"""Mild (structural) steel [W/(m K)] (handbook value, from memory)."""
MAGNET_W_MK = 8.0
"""Sintered NdFeB [W/(m K)] (manufacturers quote about 7-9; from memory)."""


def fibre_composite_conductivity(k_fibre, k_matrix, fraction):
    """Transverse conductivity of parallel round fibres in a matrix (heat across the fibres).

    ``k = k_m [(1 + f) k_f + (1 - f) k_m] / [(1 - f) k_f + (1 + f) k_m]``

    Parameters
    ----------
    k_fibre, k_matrix : array_like
        Conductivities of fibre and matrix [W/(m K)].
    fraction : array_like
        Fibre volume fraction f, 0 <= f < 1 [-].

    Returns
    -------
    ndarray
        Effective conductivity across the fibres [W/(m K)].

    Notes
    -----
    Exact for Hashin's composite-cylinder assemblage and equal to the Hashin-Shtrikman bound on
    the matrix side; it is also the first term of Rayleigh's square-array series. Applied twice
    for an impregnated winding: copper in its enamel (the coated cylinder, exact), then the wires
    in the resin. Along the wires the conductivity is the volume mean (parallel paths).

    References
    ----------
    Z. Hashin and B. W. Rosen, "The elastic moduli of fiber-reinforced materials", J. Appl.
    Mech. 31, 223-232, 1964 (the transverse-conduction analogue); Z. Hashin, "Theory of
    composite materials", in Mechanics of Composite Materials, Pergamon, 1970; Lord Rayleigh,
    "On the influence of obstacles arranged in rectangular order upon the properties of a
    medium", Phil. Mag. 34, 481-502, 1892 (all from memory).
    """
    kf, km, f = (np.asarray(x, dtype=float) for x in (k_fibre, k_matrix, fraction))
    return km * ((1 + f) * kf + (1 - f) * km) / ((1 - f) * kf + (1 + f) * km)


def winding_conductivity(bare_diameter_m, overall_diameter_m, insulated_fraction, resin_W_mK):
    """Through-thickness (across the wires) and along-wire conductivity of an impregnated
    round-wire winding.

    Parameters
    ----------
    bare_diameter_m, overall_diameter_m : array_like
        Copper and enamelled wire diameters [m].
    insulated_fraction : array_like
        Volume share of the winding taken by enamelled wire (fill factor x pi/4 for square
        packing of the overall diameter) [-].
    resin_W_mK : array_like
        Impregnating resin [W/(m K)].

    Returns
    -------
    across, along : ndarray
        [W/(m K)].

    References
    ----------
    :func:`fibre_composite_conductivity` (Hashin & Rosen 1964, coated cylinder then wires in
    resin).
    """
    core = np.square(np.asarray(bare_diameter_m, float) / np.asarray(overall_diameter_m, float))
    wire = fibre_composite_conductivity(COPPER_W_MK, ENAMEL_W_MK, core)
    f = np.asarray(insulated_fraction, float)
    across = fibre_composite_conductivity(wire, resin_W_mK, f)
    along = f * (core * COPPER_W_MK + (1 - core) * ENAMEL_W_MK) + (1 - f) * np.asarray(resin_W_mK, float)
    return across, along


def nusselt_free_disc(reynolds):
    """Mean Nusselt number ``h R / k`` of one face of a disc rotating in still air.

    ``max(0.36 Re^0.5, 0.015 Re^0.8)``: the laminar law (Cobb & Saunders;
    :func:`thermal.nusselt_free_disc_laminar`) and a turbulent one, which overtakes it near
    Re = 2e5, where transition is observed. The turbulent mean over a partly laminar face is
    lower than the turbulent law alone; taking the larger of the two is a simplification (not
    checked against a table).

    References
    ----------
    W. M. Cobb and O. A. Saunders, "Heat transfer from a rotating disk", Proc. R. Soc. London A
    236, 343-351, 1956 (both laws from memory).
    """
    re = np.maximum(np.asarray(reynolds, dtype=float), 0.0)
    return np.maximum(nusselt_free_disc_laminar(re), 0.015 * re ** 0.8)


def nusselt_horizontal_cylinder_churchill_chu(rayleigh, prandtl):
    """Mean Nusselt number of a long isothermal horizontal cylinder in free convection.

    ``Nu = {0.6 + 0.387 Ra^(1/6) / [1 + (0.559/Pr)^(9/16)]^(8/27)}^2`` (Ra, Nu on the diameter).

    References
    ----------
    S. W. Churchill and H. H. S. Chu, "Correlating equations for laminar and turbulent free
    convection from a horizontal cylinder", Int. J. Heat Mass Transfer 18(9), 1049-1053, 1975,
    eq. (4) (from memory; tested against ``ht.conv_free_immersed.Nu_horizontal_cylinder_Churchill_Chu``).
    """
    ra = np.maximum(np.asarray(rayleigh, dtype=float), 0.0)
    psi = (1.0 + (0.559 / np.asarray(prandtl, dtype=float)) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return np.square(0.6 + 0.387 * ra ** (1.0 / 6.0) / psi)


def nusselt_rotating_cylinder(reynolds, prandtl):
    """Mean Nusselt number of a cylinder rotating about its axis in still air, on the diameter:
    ``Nu_D = 0.133 Re_D^(2/3) Pr^(1/3)`` with ``Re_D = omega D^2 / (2 nu)`` (rim speed x D / nu).

    References
    ----------
    W. M. Kays and I. S. Bjorklund, "Heat transfer from a rotating cylinder with and without
    crossflow", Trans. ASME 80, 70-78, 1958 (from memory; valid for Re_D below about 4.3e5).
    """
    re = np.maximum(np.asarray(reynolds, dtype=float), 0.0)
    return 0.133 * re ** (2.0 / 3.0) * np.asarray(prandtl, dtype=float) ** (1.0 / 3.0)


def _h_rad(emissivity, surface_C, air_C):
    ts, ta = np.asarray(surface_C, float) + 273.15, np.asarray(air_C, float) + 273.15
    return emissivity * STEFAN_BOLTZMANN * (ts ** 2 + ta ** 2) * (ts + ta)


# -- the generic solver ------------------------------------------------------------------------
class CellField(NamedTuple):
    """Solution of :func:`solve_cells`."""

    rise_K: np.ndarray       # (nr, nz) temperature over the ambient, NaN where inactive [K]
    heat_out_W: float        # heat leaving through all boundary conductances [W]
    generated_W: float       # heat generated [W]


def solve_cells(r_edges, z_edges, active, k_r, k_z, q, h_east, h_west, h_top, h_bottom):
    """Steady conduction on an axisymmetric (r, z) cell grid, cell-centred finite volumes.

    Parameters
    ----------
    r_edges : array_like, shape (nr + 1,)
        Radial cell edges, increasing, r >= 0 [m].
    z_edges : array_like, shape (nz + 1,)
        Axial cell edges, increasing [m].
    active : array_like of bool, shape (nr, nz)
        Cells that are solid (or an effective layer); inactive cells are outside the body.
    k_r, k_z : array_like, shape (nr, nz)
        Radial and axial conductivity of each cell [W/(m K)].
    q : array_like, shape (nr, nz)
        Heat generated per volume [W/m^3].
    h_east, h_west, h_top, h_bottom : array_like, shape (nr, nz)
        Heat transfer coefficient to the ambient on each side of a cell (larger r, smaller r,
        larger z, smaller z), used where that side is exposed (grid edge or inactive
        neighbour); 0 is adiabatic [W/(m^2 K)].

    Returns
    -------
    CellField

    References
    ----------
    S. V. Patankar, *Numerical Heat Transfer and Fluid Flow*, Hemisphere, 1980, ch. 4
    (harmonic-mean interface conductances; from memory).
    """
    re, ze = np.asarray(r_edges, float), np.asarray(z_edges, float)
    nr, nz = len(re) - 1, len(ze) - 1
    act = np.asarray(active, bool)
    kr, kz, qv = (np.broadcast_to(np.asarray(x, float), (nr, nz)) for x in (k_r, k_z, q))
    rc = 0.5 * (re[1:] + re[:-1])[:, None]
    dr = np.diff(re)[:, None]
    dz = np.diff(ze)[None, :]
    area_z = np.pi * (re[1:] ** 2 - re[:-1] ** 2)[:, None] * np.ones((1, nz))  # faces normal to z
    vol = area_z * dz
    idx = -np.ones((nr, nz), int)
    idx[act] = np.arange(act.sum())
    rows, cols, vals = [], [], []
    diag = np.zeros(act.sum())

    def couple(a, b, g):
        ia, ib = idx[a], idx[b]
        rows.extend([ia, ib]); cols.extend([ib, ia]); vals.extend([-g, -g])
        np.add.at(diag, ia, g); np.add.at(diag, ib, g)

    # radial neighbours: series half-cell resistances ln(r_face/r_c) / (2 pi k dz)
    with np.errstate(divide="ignore"):
        r_in = np.log(re[1:-1, None] / rc[:-1]) / (2 * np.pi * kr[:-1] * dz)
        r_out = np.log(rc[1:] / re[1:-1, None]) / (2 * np.pi * kr[1:] * dz)
    both = act[:-1] & act[1:]
    a = np.argwhere(both)
    couple((a[:, 0], a[:, 1]), (a[:, 0] + 1, a[:, 1]), 1.0 / (r_in + r_out)[both])
    # axial neighbours
    g_half = 2.0 * kz * area_z / dz
    both = act[:, :-1] & act[:, 1:]
    a = np.argwhere(both)
    couple((a[:, 0], a[:, 1]), (a[:, 0], a[:, 1] + 1),
           1.0 / (1.0 / g_half[:, :-1] + 1.0 / g_half[:, 1:])[both])

    # exposed sides to the ambient (rise 0): half-cell in series with the film
    pad = np.pad(act, 1, constant_values=False)
    exposed = {"east": ~pad[2:, 1:-1], "west": ~pad[:-2, 1:-1], "top": ~pad[1:-1, 2:], "bottom": ~pad[1:-1, :-2]}
    with np.errstate(divide="ignore", invalid="ignore"):
        side = {
            "east": (h_east, 2 * np.pi * re[1:, None] * dz, np.log(re[1:, None] / rc) / (2 * np.pi * kr * dz)),
            "west": (h_west, 2 * np.pi * re[:-1, None] * dz,
                     np.log(rc / np.maximum(re[:-1, None], 1e-300)) / (2 * np.pi * kr * dz)),
            "top": (h_top, area_z, 1.0 / g_half),
            "bottom": (h_bottom, area_z, 1.0 / g_half),
        }
    g_out = np.zeros((nr, nz))
    for name, (h, area, r_half) in side.items():
        h = np.broadcast_to(np.asarray(h, float), (nr, nz))
        use = act & exposed[name] & (h > 0) & (area > 0)
        g = np.zeros((nr, nz))
        g[use] = 1.0 / (r_half[use] + 1.0 / (h[use] * area[use]))
        g_out += g
    diag += g_out[act]
    n = int(act.sum())
    rows.append(np.arange(n)); cols.append(np.arange(n)); vals.append(diag)
    a_mat = coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)).tocsr()
    source = (qv * vol)[act]
    t = spsolve(a_mat, source)
    rise = np.full((nr, nz), np.nan)
    rise[act] = t
    return CellField(rise, float(np.sum(g_out[act] * t)), float(source.sum()))


def _edges(breaks, cell_m, minimum=2):
    """Cell edges through every break point, cells of about `cell_m` (at least `minimum` a span)."""
    breaks = np.unique(np.asarray(breaks, float))
    parts = [breaks[:1]]
    for a, b in zip(breaks[:-1], breaks[1:]):
        n = max(minimum, int(np.ceil((b - a) / cell_m - 1e-9)))
        parts.append(np.linspace(a, b, n + 1)[1:])
    return np.concatenate(parts)


# -- the machine --------------------------------------------------------------------------------
class ReferenceTemperature(NamedTuple):
    """Result of :func:`machine_temperature` (rises over the bilge air) for one design."""

    hot_spot_rise_K: float   # hottest coil cell
    mean_rise_K: float       # volume mean over the coil ring
    rotor_rise_K: float      # mean of the steel disc
    heat_out_W: float        # whole machine (both sides)
    loss_W: float            # whole machine


def machine_temperature(loss_W, speed_rpm, air_C, *, ring_radius_m, magnet_length_m, magnet_width_m,
                        magnet_thickness_m, poles, coil_inner_radius_m, coil_outer_radius_m,
                        coil_thickness_m, winding_area_m2, resin_skin_m, stator_outer_radius_m,
                        running_clearance_m, disc_radius_m, disc_thickness_m, hub_radius_m,
                        winding_across_W_mK, winding_along_W_mK, resin_W_mK, leg_inner_radius_m,
                        leg_outer_radius_m, emissivity=0.0, conductance_factor=1.0, cell_m=1e-3,
                        outer_iterations=4):
    """Steady temperatures of one design by finite volumes (see the module docstring).

    Parameters
    ----------
    loss_W : float
        Heat generated in the coils, whole machine [W].
    speed_rpm : float
        Shaft speed, 0 allowed [rpm].
    air_C : float
        Bilge air [degC].
    ring_radius_m, magnet_length_m, magnet_width_m, magnet_thickness_m, poles
        Magnet ring: mean radius, radial length, tangential width, thickness [m]; poles [-].
    coil_inner_radius_m, coil_outer_radius_m, coil_thickness_m : float
        The coils' ring and its axial thickness [m].
    winding_area_m2 : float
        Face area of winding of all coils (ring area less the holes and spaces; a coil shape
        passes its own) [m^2].
    resin_skin_m, stator_outer_radius_m, running_clearance_m : float
        Skin over each coil face, stator casting's outer radius, gap to the magnets [m].
    disc_radius_m, disc_thickness_m, hub_radius_m : float
        Rotor disc and the radius inside which the hub (adiabatic) is [m].
    winding_across_W_mK, winding_along_W_mK, resin_W_mK : float
        Winding (:func:`winding_conductivity`) and resin [W/(m K)].
    leg_inner_radius_m, leg_outer_radius_m : float
        Radial span of the coil legs (wires radial there: along-wire conduction in r; the end
        turns outside it conduct across the wires) [m].
    emissivity : float
        Surfaces' emissivity; 0 switches radiation off [-].
    conductance_factor : float
        Multiplies every surface heat-transfer coefficient (calibration from a measured
        temperature) [-].
    cell_m : float
        Target cell size in r; axial cells are a fifth of it or finer [m].
    outer_iterations : int
        Passes updating natural convection and radiation with the surfaces' rise [-].

    Returns
    -------
    ReferenceTemperature

    References
    ----------
    Conduction: :func:`solve_cells`. Gap: laminar Couette conduction, or the Colburn analogy on
    the Daily & Nece torque where larger (as ``thermal._gap_conductance_analogy``), evaluated
    locally over the depth of each path. Free disc :func:`nusselt_free_disc`; rim
    :func:`nusselt_rotating_cylinder` and :func:`nusselt_horizontal_cylinder_churchill_chu`;
    faces at rest ``thermal.nusselt_vertical_plate_churchill_chu``; mixed as
    ``(h_F^3 + h_N^3)^(1/3)`` (Churchill 1977).
    """
    R, L, W, hm = ring_radius_m, magnet_length_m, magnet_width_m, magnet_thickness_m
    rci, rco, tc, ts = coil_inner_radius_m, coil_outer_radius_m, coil_thickness_m, resin_skin_m
    rso, s, rd, td, rh = stator_outer_radius_m, running_clearance_m, disc_radius_m, disc_thickness_m, hub_radius_m
    r_mi, r_mo = R - L / 2, R + L / 2
    omega = max(abs(float(speed_rpm)) * np.pi / 30.0, 1e-6)
    layer = s + hm
    r_e = _edges([min(rh, rci), rci, r_mi, r_mo, leg_inner_radius_m, leg_outer_radius_m, rco, rd, rso], cell_m)
    dz_cell = cell_m / 5
    z_e = _edges([0.0, tc / 2, tc / 2 + ts], dz_cell)
    n_st = len(z_e) - 1
    z_e = np.concatenate([z_e, z_e[-1] + np.array([layer / 2, layer])])  # effective layer, 2 cells
    z_e = np.concatenate([z_e, _edges([z_e[-1], z_e[-1] + td], dz_cell / 2)[1:]])
    nr, nz = len(r_e) - 1, len(z_e) - 1
    rc = 0.5 * (r_e[1:] + r_e[:-1])
    zc = 0.5 * (z_e[1:] + z_e[:-1])
    R2 = np.repeat(rc[:, None], nz, 1)
    Z2 = np.repeat(zc[None, :], nr, 0)
    in_st = (Z2 < z_e[n_st]) & (R2 > rci) & (R2 < rso)
    in_gap = (Z2 > z_e[n_st]) & (Z2 < z_e[n_st + 2]) & (R2 > rci) & (R2 < min(rso, rd))
    in_disc = (Z2 > z_e[n_st + 2]) & (R2 > rh) & (R2 < rd)
    coil = in_st & (Z2 < tc / 2) & (R2 < rco)
    active = in_st | in_gap | in_disc

    ring_area = np.pi * (rco ** 2 - rci ** 2)
    share = min(winding_area_m2 / ring_area, 1.0)  # winding share of the ring; resin the rest
    legs = (R2 > leg_inner_radius_m) & (R2 < leg_outer_radius_m)
    k_r = np.where(in_st, resin_W_mK, 1e-3)
    k_z = np.where(in_st, resin_W_mK, 1e-3)
    k_r = np.where(coil, share * np.where(legs, winding_along_W_mK, winding_across_W_mK)
                   + (1 - share) * resin_W_mK, k_r)
    k_z = np.where(coil, share * winding_across_W_mK + (1 - share) * resin_W_mK, k_z)
    k_r = np.where(in_disc, STEEL_W_MK, k_r)
    k_z = np.where(in_disc, STEEL_W_MK, k_z)
    q = np.where(coil, loss_W / 2.0 / (ring_area * tc / 2.0), 0.0)

    air = air_properties(air_C)
    k_air = float(air.conductivity_W_mK)
    cover = np.clip(poles * W / (2 * np.pi * rc), 0.0, 1.0) * ((rc > r_mi) & (rc < r_mo))
    areas = np.pi * (r_e[1:] ** 2 - r_e[:-1] ** 2)

    def gap_h(depth):
        analogy = _gap_conductance_analogy(omega, r_e[:-1], r_e[1:], depth, rd, air) / areas
        return np.maximum(k_air / depth, analogy)

    f = conductance_factor
    rise_face = rise_disc = rise_rim = np.zeros(nr)
    rise_st_rim, rise_st_face = 0.0, np.zeros(nr)
    eps_pair = 1.0 / (2.0 / emissivity - 1.0) if emissivity > 0 else 0.0
    for _ in range(outer_iterations):
        # interface (clearance + magnets | pockets) per unit area, as an effective layer's k_z
        g_rad = 4 * eps_pair * STEFAN_BOLTZMANN * (air_C + 0.5 * (rise_face + rise_disc) + 273.15) ** 3
        g_mag = 1.0 / (1.0 / (f * gap_h(s)) + hm / MAGNET_W_MK)
        g_if = cover * g_mag + (1 - cover) * f * gap_h(layer) + g_rad
        k_z = np.where(in_gap, (g_if * layer)[:, None], k_z)
        # disc outer face: free rotating disc with natural convection (plate of height 2 r_d)
        re_d = omega * rd ** 2 / float(air.kinematic_viscosity_m2_s)
        h_f = float(nusselt_free_disc(re_d)) * k_air / rd
        h_n = _natural_h(2 * rd, np.maximum(rise_disc, 0.1), air)
        h_top = f * np.cbrt(h_f ** 3 + h_n ** 3) + _h_rad(emissivity, air_C + rise_disc, air_C)
        # disc rim: rotating cylinder with natural convection (horizontal cylinder)
        re_rim = omega * (2 * rd) ** 2 / (2 * float(air.kinematic_viscosity_m2_s))
        h_rf = float(nusselt_rotating_cylinder(re_rim, air.prandtl)) * k_air / (2 * rd)
        ra = (9.80665 * air.expansion_per_K * np.maximum(rise_rim, 0.1) * (2 * rd) ** 3
              / (air.kinematic_viscosity_m2_s ** 2 / air.prandtl))
        h_rn = nusselt_horizontal_cylinder_churchill_chu(ra, air.prandtl) * k_air / (2 * rd)
        h_rim = f * np.cbrt(h_rf ** 3 + h_rn ** 3) + _h_rad(emissivity, air_C + rise_rim, air_C)
        # stator rim and faces beyond the discs: natural convection
        h_sr = f * _natural_h(2 * rso, max(rise_st_rim, 0.1), air) + _h_rad(emissivity, air_C + rise_st_rim, air_C)
        h_sf = f * _natural_h(2 * rso, np.maximum(rise_st_face, 0.1), air) + _h_rad(emissivity, air_C + rise_st_face, air_C)
        h_e = np.where(in_disc, np.broadcast_to(np.asarray(h_rim), (nr,))[:, None], h_sr)
        h_t = np.where(in_disc, np.broadcast_to(np.asarray(h_top), (nr,))[:, None],
                       np.broadcast_to(np.asarray(h_sf), (nr,))[:, None]) * (in_disc | (R2 > rd))
        h_b = np.where(in_disc, np.broadcast_to(np.asarray(h_top), (nr,))[:, None], 0.0) * (R2 > rso)
        sol = solve_cells(r_e, z_e, active, k_r, k_z, q, h_e, np.zeros((nr, nz)), h_t, h_b)
        t = sol.rise_K
        top_disc = np.where(in_disc[:, -1], t[:, -1], np.nan)
        rise_disc = np.nan_to_num(top_disc, nan=0.0)
        rise_face = np.nan_to_num(t[:, n_st - 1], nan=0.0)
        rise_rim = float(np.nanmean(t[np.searchsorted(rc, rd) - 1, n_st + 2:]))
        rise_st_rim = float(np.nanmean(t[-1, :n_st])) if in_st[-1, 0] else rise_face.max()
        rise_st_face = rise_face
    vol = (areas[:, None] * np.diff(z_e)[None, :])
    return ReferenceTemperature(float(np.nanmax(np.where(coil, t, np.nan))),
                                float(np.sum((t * vol)[coil]) / np.sum(vol[coil])),
                                float(np.sum((t * vol)[in_disc]) / np.sum(vol[in_disc])),
                                2.0 * sol.heat_out_W, 2.0 * sol.generated_W)
