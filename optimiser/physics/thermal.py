"""Steady temperatures of the stator coils and the rotor magnets.

The network (all resistances for the whole machine, both sides in parallel)::

    coil --R_cf-- stator faces --R_fr-- rotors --R_ra-- bilge air
                        |                                  |
                        +-----------------R_fa-------------+

* ``R_cf``  conduction: half the coil's own thickness (uniform heating, mean
  temperature) plus the resin skin, over the coil ring area, two faces.
* ``R_fr``  the rotor-stator gaps: heat crosses the thin air film to the
  rotor discs. Pure conduction ``k/s`` when still or in laminar Couette
  flow; when the rotors shear the air harder, the Reynolds analogy applied
  to the Daily & Nece torque gives more.
* ``R_ra``  each rotor's outer face and rim to the bilge: free rotating disc
  (laminar, conservative at the top speed) combined with natural convection.
* ``R_fa``  the stator's exposed rim and any face beyond the discs, by radial
  conduction through the resin and natural convection.

Pumped through-flow in the gaps is NOT credited (the coil ring leaves
little inlet near the hub); this and the laminar free-disc law make the
model lean to the hot side. Radiation is off by default (``emissivity=0``)
because bare steel and resin finishes vary from 0.1 to 0.9.

Natural convection depends on the surface temperature rise. The caller
either passes an estimate (``surface_rise_K``), or the coil's own rise over
the air (``coil_rise_K``): the network then takes the rotors' rise (the
surfaces that shed most of the heat) from its own split of the coil rise,
two substitutions from half the coil rise (Nu ~ Ra^(1/4) makes the second
change the conductances by well under 1 %). The evaluator passes the coil
rise of each pass of its fixed point, so the loop sees one function of the
coil temperature.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from .losses import CP_AIR, DAILY_NECE_REGIMES, air_properties, daily_nece_moment_coefficient

STEFAN_BOLTZMANN = 5.670374419e-8  # [W/(m^2 K^4)] CODATA 2018
GRAVITY = 9.80665  # [m/s^2] standard


def nusselt_vertical_plate_churchill_chu(rayleigh, prandtl):
    """Mean Nusselt number of an isothermal vertical plate in free
    convection, all Rayleigh numbers (laminar and turbulent).

    ``Nu = {0.825 + 0.387 Ra^(1/6) / [1 + (0.492/Pr)^(9/16)]^(8/27)}^2``

    Parameters
    ----------
    rayleigh : array_like
        Rayleigh number on the plate height, ``g beta dT L^3 / (nu alpha)`` [-].
    prandtl : array_like
        Prandtl number of the fluid [-].

    Returns
    -------
    ndarray
        Nusselt number on the plate height [-].

    References
    ----------
    S. W. Churchill and H. H. S. Chu, "Correlating equations for laminar and
    turbulent free convection from a vertical plate", Int. J. Heat Mass
    Transfer 18(11), 1323-1329, 1975, eq. (4) (from memory; the test compares
    with ``ht.conv_free_immersed.Nu_vertical_plate_Churchill``).
    """
    ra = np.maximum(np.asarray(rayleigh, dtype=float), 0.0)
    psi = (1.0 + (0.492 / np.asarray(prandtl, dtype=float)) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return np.square(0.825 + 0.387 * ra ** (1.0 / 6.0) / psi)


def nusselt_free_disc_laminar(reynolds):
    """Mean Nusselt number of one face of a disc rotating in still air,
    laminar boundary layer: ``Nu_R = 0.36 Re^0.5`` (Nu and Re on the radius).

    Parameters
    ----------
    reynolds : array_like
        Rotational Reynolds number ``omega R^2 / nu`` [-].

    Returns
    -------
    ndarray
        Face-mean Nusselt number ``h R / k`` [-].

    Notes
    -----
    Laminar up to Re ~ 2.4e5 (a 300 mm disc at ~1500 rpm); the turbulent law
    gives more above that, so using the laminar law throughout is a lower
    bound on cooling.

    References
    ----------
    W. M. Cobb and O. A. Saunders, "Heat transfer from a rotating disk",
    Proc. R. Soc. London A 236, 343-351, 1956 (from memory; also the
    von Karman similarity solution, ~0.33 Re^0.5 at Pr = 0.71).
    """
    return 0.36 * np.sqrt(np.maximum(np.asarray(reynolds, dtype=float), 0.0))


class ThermalNetwork(NamedTuple):
    """Resistances of the stator/rotor network [K/W], arrays of one shape."""

    coil_to_face_K_W: np.ndarray
    face_to_rotors_K_W: np.ndarray
    rotors_to_air_K_W: np.ndarray
    face_to_air_K_W: np.ndarray
    coil_to_air_K_W: np.ndarray


def _natural_h(height_m, dT_K, air):
    ra = GRAVITY * air.expansion_per_K * dT_K * height_m**3 / (
        air.kinematic_viscosity_m2_s**2 / air.prandtl
    )
    return nusselt_vertical_plate_churchill_chu(ra, air.prandtl) * air.conductivity_W_mK / height_m


def _gap_conductance_analogy(omega, r_in, r_out, gap, disc_radius, air):
    """Stator-to-rotor conductance of ONE gap over the ring r_in..r_out [W/K].

    Reynolds analogy h(r) = c_p tau(r) / (omega r Pr^(2/3)) with tau(r) from
    differentiating the Daily & Nece one-face torque M(r) = C_M/2 * rho
    omega^2 r^5 / 2 (local similarity, regime fixed at the disc radius).
    Both boundary layers (rotor and stator) carry the same torque, so their
    velocity jumps add up to omega r whatever the core swirl: the series
    conductance depends on omega r only.
    """
    re = omega * disc_radius**2 / air.kinematic_viscosity_m2_s
    _, regime = daily_nece_moment_coefficient(re, gap / disc_radius)
    a, b, c = np.moveaxis(DAILY_NECE_REGIMES[regime], -1, 0)
    m = 5.0 - b - 2.0 * c  # M(r) ~ r^m
    k_face = 0.25 * a * air.density_kg_m3 * omega**2 * gap**b * (omega / air.kinematic_viscosity_m2_s) ** (-c)
    integral = (r_out ** (m - 2.0) - r_in ** (m - 2.0)) / (m - 2.0)
    return CP_AIR * m * k_face * integral / (omega * air.prandtl ** (2.0 / 3.0))


def thermal_network(
    speed_rpm,
    ring_inner_radius_m,
    ring_outer_radius_m,
    stator_outer_radius_m,
    stator_thickness_m,
    resin_skin_m,
    resin_conductivity_W_mK,
    running_clearance_m,
    air_C,
    disc_radius_m=None,
    disc_thickness_m=0.0,
    winding_conductivity_W_mK=None,
    surface_rise_K=40.0,
    emissivity=0.0,
    coil_rise_K=None,
):
    """Thermal resistances from the coils to bilge air for a batch of designs.

    Parameters
    ----------
    speed_rpm : array_like
        Shaft speed, 0 allowed [rpm].
    ring_inner_radius_m, ring_outer_radius_m : array_like
        Inner and outer radius of the annulus the coils occupy [m].
    stator_outer_radius_m : array_like
        Outer radius of the resin stator casting [m].
    stator_thickness_m : array_like
        Axial thickness of the stator, coil plus both skins [m].
    resin_skin_m : array_like
        Resin skin over the coils, each face [m].
    resin_conductivity_W_mK : array_like
        Thermal conductivity of the casting resin [W/(m K)].
    running_clearance_m : array_like
        Axial gap between stator face and magnet face, each side [m].
    air_C : array_like
        Bilge air temperature [degC].
    disc_radius_m : array_like, optional
        Rotor disc radius; default the stator outer radius [m].
    disc_thickness_m : array_like, optional
        Rotor disc thickness, for its rim area [m].
    winding_conductivity_W_mK : array_like, optional
        Through-thickness conductivity of the resin-filled winding; default
        the resin's (copper only raises it, so this is the cautious side) [W/(m K)].
    surface_rise_K : array_like, optional
        Estimated surface-to-air temperature difference for the natural
        convection Rayleigh numbers and the film temperature [K].
    emissivity : array_like, optional
        Emissivity of stator and rotor surfaces; 0 switches radiation off [-].
    coil_rise_K : array_like, optional
        Coil (mean) temperature rise over the air. Given, it replaces
        ``surface_rise_K``: the surface rise is the rotor node's share of it
        in this network (two substitutions from half of it) [K].

    Returns
    -------
    ThermalNetwork
        The four branch resistances and the total coil-to-air resistance [K/W].

    References
    ----------
    Conduction with uniform generation in a slab (mean rise ``q t^2/(12 k)``):
    F. P. Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th
    ed., Wiley, 2007, sec. 3.5 (from memory). Rotor-stator gap: Reynolds
    (Colburn) analogy, A. P. Colburn, Trans. AIChE 29, 174-210, 1933, on the
    torque of J. W. Daily and R. E. Nece, ASME J. Basic Eng. 82, 1960; the
    conduction floor is the laminar Couette limit reviewed in D. A. Howey,
    P. R. N. Childs and A. S. Holmes, "Air-gap convection in rotating
    electrical machines", IEEE Trans. Ind. Electron. 59(3), 1367-1375, 2012
    (all from memory). Free disc: Cobb & Saunders 1956. Natural convection:
    Churchill & Chu 1975. Mixed convection ``h = (h_F^3 + h_N^3)^(1/3)``:
    S. W. Churchill, AIChE J. 23(1), 10-16, 1977 (from memory).
    """
    if coil_rise_K is not None:
        args = (speed_rpm, ring_inner_radius_m, ring_outer_radius_m, stator_outer_radius_m,
                stator_thickness_m, resin_skin_m, resin_conductivity_W_mK, running_clearance_m, air_C)
        kw = dict(disc_radius_m=disc_radius_m, disc_thickness_m=disc_thickness_m,
                  winding_conductivity_W_mK=winding_conductivity_W_mK, emissivity=emissivity)
        rise = np.maximum(np.asarray(coil_rise_K, dtype=float), 0.0)
        first = thermal_network(*args, surface_rise_K=0.5 * rise, **kw)
        share = rotor_share(first)
        return thermal_network(*args, surface_rise_K=share * rise, **kw)
    omega = np.abs(np.asarray(speed_rpm, dtype=float)) * (np.pi / 30.0)
    omega = np.maximum(omega, 1e-6)  # at rest the gap is regime I: finite limit
    ri = np.asarray(ring_inner_radius_m, dtype=float)
    ro = np.asarray(ring_outer_radius_m, dtype=float)
    r_so = np.asarray(stator_outer_radius_m, dtype=float)
    t_s = np.asarray(stator_thickness_m, dtype=float)
    t_r = np.asarray(resin_skin_m, dtype=float)
    k_r = np.asarray(resin_conductivity_W_mK, dtype=float)
    s = np.asarray(running_clearance_m, dtype=float)
    r_d = r_so if disc_radius_m is None else np.asarray(disc_radius_m, dtype=float)
    k_w = k_r if winding_conductivity_W_mK is None else np.asarray(winding_conductivity_W_mK, dtype=float)
    dT = np.asarray(surface_rise_K, dtype=float)
    eps = np.asarray(emissivity, dtype=float)

    air = air_properties(np.asarray(air_C, dtype=float) + 0.5 * dT)
    t_film = np.asarray(air_C, dtype=float) + 0.5 * dT + 273.15
    h_rad = 4.0 * eps * STEFAN_BOLTZMANN * t_film**3  # linearised about the film
    area_ring = np.pi * (ro**2 - ri**2)

    # coil -> faces: mean of a uniformly heated slab, then the skins, both faces
    t_c = t_s - 2.0 * t_r
    r_cf = t_c / (12.0 * k_w * area_ring) + t_r / (2.0 * k_r * area_ring)

    # faces -> rotors: two gaps
    g_cond = air.conductivity_W_mK * area_ring / s
    g_an = _gap_conductance_analogy(omega, ri, ro, s, r_d, air)
    eps_pair = np.where(eps > 0, 1.0 / (2.0 / np.maximum(eps, 1e-12) - 1.0), 0.0)
    g_gap_rad = 4.0 * eps_pair * STEFAN_BOLTZMANN * t_film**3 * area_ring
    r_fr = 1.0 / (2.0 * (np.maximum(g_cond, g_an) + g_gap_rad))

    # rotors -> air: outer face and rim of each of the two discs
    re_d = omega * r_d**2 / air.kinematic_viscosity_m2_s
    h_forced = nusselt_free_disc_laminar(re_d) * air.conductivity_W_mK / r_d
    h_nat_d = _natural_h(2.0 * r_d, dT, air)
    h_d = np.cbrt(h_forced**3 + h_nat_d**3) + h_rad
    area_d = np.pi * r_d**2 + 2.0 * np.pi * r_d * np.asarray(disc_thickness_m, dtype=float)
    r_ra = 1.0 / (2.0 * h_d * area_d)

    # faces -> air directly: resin stator's rim and faces beyond the discs,
    # fed by radial conduction through the resin from the coil ring's edge
    h_s = _natural_h(2.0 * r_so, dT, air) + h_rad
    r_covered = np.maximum(r_d, ro)
    area_exposed = 2.0 * np.pi * np.maximum(r_so**2 - r_covered**2, 0.0) + 2.0 * np.pi * r_so * t_s
    r_radial = np.log(np.maximum(r_so, ro) / ro) / (2.0 * np.pi * k_r * t_s)
    r_fa = r_radial + 1.0 / (h_s * area_exposed)

    r_total = r_cf + 1.0 / (1.0 / (r_fr + r_ra) + 1.0 / r_fa)
    return ThermalNetwork(*(np.array(x) for x in np.broadcast_arrays(r_cf, r_fr, r_ra, r_fa, r_total)))


def stator_thermal_resistance(*args, **kwargs):
    """Thermal resistance from the coils (mean temperature) to bilge air.

    Parameters are those of :func:`thermal_network` (positional and keyword alike).

    Returns
    -------
    ndarray
        ``(T_coil - T_air) / P_stator`` [K/W]; positive and finite at 0 rpm,
        falling with speed.

    References
    ----------
    See :func:`thermal_network`.
    """
    return thermal_network(*args, **kwargs).coil_to_air_K_W


def rotor_share(network):
    """Rotor (magnet) rise over the air as a share of the coil's, no rotor heat [-].

    Parameters
    ----------
    network : ThermalNetwork
        From :func:`thermal_network`.

    Returns
    -------
    ndarray
        ``(T_rotor - T_air) / (T_coil - T_air)``, in (0, 1).

    References
    ----------
    Voltage divider of the linear network (any circuit text).
    """
    n = network
    r_par = 1.0 / (1.0 / (n.face_to_rotors_K_W + n.rotors_to_air_K_W) + 1.0 / n.face_to_air_K_W)
    return r_par / (n.coil_to_face_K_W + r_par) * n.rotors_to_air_K_W / (n.face_to_rotors_K_W + n.rotors_to_air_K_W)


def magnet_temperature(coil_temperature_C, air_C, network, rotor_heat_W=0.0):
    """Temperature of the rotor discs and magnets.

    Parameters
    ----------
    coil_temperature_C : array_like
        Mean coil temperature [degC].
    air_C : array_like
        Bilge air temperature [degC].
    network : ThermalNetwork
        From :func:`thermal_network` for the same designs and speed.
    rotor_heat_W : array_like, optional
        Heat generated in the two rotors (magnet eddy loss, windage if the
        caller wants it counted here) [W].

    Returns
    -------
    ndarray
        Rotor (magnet) temperature [degC].

    Notes
    -----
    The steel disc spreads heat well, so each rotor with its magnets is one
    node, and the two rotors are alike. With the coil temperature held, the
    coil heat divides at the stator faces between the gap-rotor path and the
    direct path; the rotor heat adds by superposition through the rotor
    node's resistance to the (then grounded) coil and air nodes.

    References
    ----------
    Linear two-node network; superposition (any circuit text).
    """
    n = network
    tc = np.asarray(coil_temperature_C, dtype=float)
    ta = np.asarray(air_C, dtype=float)
    r_par = 1.0 / (1.0 / (n.face_to_rotors_K_W + n.rotors_to_air_K_W) + 1.0 / n.face_to_air_K_W)
    t_face = ta + (tc - ta) * r_par / (n.coil_to_face_K_W + r_par)
    t_rotor = ta + (t_face - ta) * n.rotors_to_air_K_W / (n.face_to_rotors_K_W + n.rotors_to_air_K_W)
    r_cf_fa = 1.0 / (1.0 / n.coil_to_face_K_W + 1.0 / n.face_to_air_K_W)
    r_rotor = 1.0 / (1.0 / n.rotors_to_air_K_W + 1.0 / (n.face_to_rotors_K_W + r_cf_fa))
    return t_rotor + np.asarray(rotor_heat_W, dtype=float) * r_rotor


def steady_coil_temperature(loss_at_20C_W, loss_temp_coeff, other_loss_W, r_th_K_W, air_C):
    """Closed-form steady coil temperature when copper loss rises linearly
    with temperature at a fixed current.

    Solves ``T = T_air + R (P20 (1 + alpha (T - 20)) + P_other)``:
    ``T = (T_air + R (P20 (1 - 20 alpha) + P_other)) / (1 - R P20 alpha)``.

    Parameters
    ----------
    loss_at_20C_W : array_like
        Copper loss of the stator at 20 C for the current in question [W].
    loss_temp_coeff : array_like
        Temperature coefficient of that loss, the resistivity's
        (0.00393 /K for copper, IEC 60028) [1/K].
    other_loss_W : array_like
        Other heat generated in the stator (strand eddy loss), taken as
        constant; NOT the diode loss, which heats the rectifier [W].
    r_th_K_W : array_like
        Coil-to-air thermal resistance [K/W].
    air_C : array_like
        Bilge air temperature [degC].

    Returns
    -------
    temperature_C : ndarray
        Steady coil temperature; ``inf`` where runaway [degC].
    runaway : ndarray of bool
        True where ``R P20 alpha >= 1``: the loss grows faster with
        temperature than the cooling, and no steady state exists.

    References
    ----------
    Linear fixed point of the heat balance; the resistivity law is IEC 60028
    (``rho(T) = rho_20 (1 + alpha_20 (T - 20))``).
    """
    p20 = np.asarray(loss_at_20C_W, dtype=float)
    alpha = np.asarray(loss_temp_coeff, dtype=float)
    r = np.asarray(r_th_K_W, dtype=float)
    gain = r * p20 * alpha
    runaway = gain >= 1.0
    num = np.asarray(air_C, dtype=float) + r * (p20 * (1.0 - 20.0 * alpha) + np.asarray(other_loss_W, dtype=float))
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(runaway, np.inf, num / np.where(runaway, 1.0, 1.0 - gain))
    return t, runaway
