"""Generate the illustrative time histories of the bundled demo study.

Everything this script writes is INVENTED and ILLUSTRATIVE. The building (the Corrowby
Community Library), its fires and every number below were made up to exercise
egressmargin; they are not measurements, not the output of any fire model and not data
from any real building. The script is kept in the repository so that anyone can see how
the demo data were made and regenerate them byte for byte::

    python demo/generate.py              # writes demo/data/*.csv
    python demo/generate.py --out DIR    # writes the CSV files into DIR instead

Only numpy and the standard library are used; nothing is random (the small differences
between locations are fixed sine terms), so the output is the same on every run.

What the histories are
----------------------
A hand-method "zone" estimate, deliberately simple and physically sensible, not a CFD
claim:

1. Design fire: a t-squared growth Q = alpha t^2 with the NFPA growth constants,
   alpha = 1055 kW / t_g^2 (fast t_g = 150 s, medium t_g = 300 s), capped at a steady
   maximum (scenarios a, b) or held constant once a sprinkler link in the room
   activates (scenario c, the "sprinkler-controlled" assumption of common practice).
2. Plume: Heskestad's axisymmetric plume mass flow in the form printed in NFPA 92,
   with convective heat release Qc = 0.7 Q.
3. Smoke layer: a two-zone filling mass and energy balance at constant pressure,
   with a heat-loss fraction to the boundaries, and removal of layer gas by exhaust
   fans (the atrium) or by buoyant outflow through a door or an open corridor end.
4. Species: assumed yields per kg of fuel burnt (heat of combustion 20 MJ/kg, assumed)
   for CO2, CO, HCN and soot; oxygen depletion from Huggett's 13.1 MJ per kg of O2
   consumed. Each species' mass in the layer over the layer's mass gives its mass
   fraction, converted to a volume fraction with the molar masses.
5. Locations: occupants' head height sees a small fraction of the layer until the
   interface falls past it, with a smooth (tanh) transition; rooms behind doors see a
   fraction of the layer through a first-order lag. Visibility follows from the soot
   density by K = K_m rho_soot with K_m = 8700 m^2/kg.
6. Radiant heat flux: grey-layer emission eps sigma (T^4 - T0^4) times an assumed view
   factor, plus point-source radiation from the flame chi_r Q / (4 pi r^2).
7. Heat detector position and lobby sprinkler: Alpert's ceiling-jet temperature and
   velocity, and the RTI model for the sprinkler link.
8. Grid variants of scenario a: the finest histories with an invented second-order
   discretisation error (times stretched, rises reduced), for the grid-sensitivity table.
9. Growth-rate variants of scenario a (its ensemble members): the same fire with the
   medium (t_g = 300 s) and ultra-fast (t_g = 75 s) NFPA growth classes.

All yields, fractions, view factors, dimensions and flow rates marked "assumed" are
illustrative choices for this invented building.

References
----------
NFPA 72 (2019), National Fire Alarm and Signaling Code, Annex B (t-squared fires,
    t_g = 150 s fast, 300 s medium, Q_g = 1055 kW); the same classes appear in
    NFPA 204 and NFPA 92 (edition details from memory).
NFPA 92 (2012), Standard for Smoke Control Systems, sec. 5.5.1 (axisymmetric plume:
    z_l = 0.166 Qc^(2/5); m = 0.071 Qc^(1/3) z^(5/3) + 0.0018 Qc for z > z_l;
    m = 0.032 Qc^(3/5) z for z <= z_l; Qc = 0.7 Q) and sec. 5.4 (empirical filling
    correlation z/H = 1.11 - 0.28 ln[(t Q^(1/3)/H^(4/3)) / (A/H^2)], used only in the
    tests) -- section and equation numbers from memory.
Heskestad, G. (2016). Fire plumes, flame height and air entrainment. SFPE Handbook of
    Fire Protection Engineering, 5th ed. (chapter number from memory).
Alpert, R. L. (1972). Calculation of response time of ceiling-mounted fire detectors.
    Fire Technology 8(3), 181-195 (ceiling-jet correlations, quoted from memory:
    dT = 16.9 Q^(2/3)/H^(5/3) for r/H <= 0.18, dT = 5.38 (Q/r)^(2/3)/H beyond;
    U = 0.96 (Q/H)^(1/3) for r/H <= 0.15, U = 0.195 Q^(1/3) H^(1/2)/r^(5/6) beyond).
Heskestad, G. and Bill, R. G. (1988). Quantification of thermal responsiveness of
    automatic sprinklers including conduction effects. Fire Safety Journal 14, 113-125
    (RTI model dT_d/dt = sqrt(u) (T_g - T_d)/RTI).
Huggett, C. (1980). Estimation of rate of heat release by means of oxygen consumption
    measurements. Fire and Materials 4(2), 61-65 (13.1 MJ/kg O2).
Mulholland, G. W. and Croarkin, C. (2000). Specific extinction coefficient of flame
    generated smoke. Fire and Materials 24, 227-230 (8.7 m^2/g; page numbers from memory).
Emmons, H. W. Vent flows. SFPE Handbook of Fire Protection Engineering (buoyant outflow
    through an opening, m = (2/3) Cd W sqrt(2 g rho_L (rho_0 - rho_L)) d^(3/2); edition
    and chapter from memory).
Modak, A. T. (1977). Thermal radiation from pool fires. Combustion and Flame 29,
    177-192 (point-source radiation model; details from memory).
CODATA 2018 (Stefan-Boltzmann constant 5.670374419e-8 W m^-2 K^-4).
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

# --------------------------------------------------------------------------------------
# Physical constants and the published correlations' constants
# --------------------------------------------------------------------------------------

#: Reference heat release rate of the t-squared classes, 1055 kW (= 1000 Btu/s), NFPA 72 Annex B.
Q_GROWTH_REF_KW = 1055.0
#: Growth times t_g [s] of the t-squared classes (NFPA 72 Annex B; NFPA 204).
GROWTH_TIME_S = {"slow": 600.0, "medium": 300.0, "fast": 150.0, "ultrafast": 75.0}

#: Convective fraction of the heat release rate, Qc = 0.7 Q (NFPA 92, sec. 5.5.1).
CONVECTIVE_FRACTION = 0.7
#: Radiative fraction chi_r of the flame (assumed; the complement of the convective fraction).
RADIATIVE_FRACTION = 0.3

#: Stefan-Boltzmann constant [kW m^-2 K^-4] (CODATA 2018: 5.670374419e-8 W m^-2 K^-4).
SIGMA_KW = 5.670374419e-11
#: Standard gravity [m/s^2] (CGPM 1901 conventional value).
G = 9.80665
#: Specific heat of air at constant pressure [kJ/(kg K)] (common practice: 1.0).
CP = 1.0
#: Ambient temperature [K] (20 degC, common design value).
T0_K = 293.15
#: Ambient pressure [Pa] (standard atmosphere).
P0_PA = 101325.0
#: Specific gas constant of dry air [J/(kg K)] (R / M_air = 8.314462618 / 0.028965).
R_AIR = 8.314462618 / 0.028965
#: Ambient air density [kg/m^3] from the ideal gas law (about 1.204).
RHO0 = P0_PA / (R_AIR * T0_K)

#: Mass-specific extinction coefficient of flaming smoke [m^2/kg] (Mulholland & Croarkin 2000).
K_M_M2_KG = 8700.0
#: Heat released per kg of oxygen consumed [kJ/kg] (Huggett 1980: 13.1 MJ/kg).
O2_HEAT_KJ_KG = 13100.0

#: Molar masses [g/mol] (standard atomic weights; air: dry-air mean).
MOLAR_MASS = {"air": 28.965, "co": 28.010, "co2": 44.009, "o2": 31.998, "hcn": 27.025}
#: Ambient volume fractions of dry air: O2 20.9 % and CO2 400 ppm (common practice).
X_O2_AMBIENT = 0.209
X_CO2_AMBIENT = 0.0004

#: Effective heat of combustion of the burning contents [kJ/kg] (assumed, illustrative).
HEAT_OF_COMBUSTION_KJ_KG = 20000.0
#: Yields [kg per kg of fuel burnt] (assumed, illustrative; well-ventilated mixed
#: cellulosic and plastic furnishings).
YIELDS = {"co2": 1.5, "co": 0.03, "soot": 0.05, "hcn": 0.003}
#: Yield of HCl [kg/kg] (assumed, illustrative: a little PVC cable sheathing among the
#: furnishings). HCl is carried like the other species (no wall deposition, which keeps
#: its concentration on the high side), so its volume fraction is the HCN fraction times
#: (Y_HCl / M_HCl) / (Y_HCN / M_HCN).
YIELD_HCL = 0.004
MOLAR_MASS_HCL = 36.461
HCL_PER_HCN = (YIELD_HCL / MOLAR_MASS_HCL) / (YIELDS["hcn"] / MOLAR_MASS["hcn"])

#: Time step of the internal integration [s] and of the written CSV files [s].
DT_S = 0.25
OUTPUT_STEP_S = 5.0

#: Head height above a walking surface [m] (common practice: 1.8 m).
HEAD_HEIGHT_M = 1.8
#: Width of the smooth transition as the layer interface passes a height [m] (assumed).
TRANSITION_M = 0.30
#: Fraction of the layer excess seen below the interface (mixing; assumed).
LOWER_LAYER_FRACTION = 0.01


# --------------------------------------------------------------------------------------
# Published correlations (pure functions on floats / numpy arrays)
# --------------------------------------------------------------------------------------

def growth_constant(t_g_s: float) -> float:
    """Growth constant alpha of a t-squared fire [kW/s^2].

    Parameters
    ----------
    t_g_s : float
        Growth time to reach 1055 kW [s].

    Notes
    -----
    alpha = Q_g / t_g^2 with Q_g = 1055 kW (NFPA 72 Annex B): fast (150 s) gives
    0.0469 kW/s^2, medium (300 s) 0.01172 kW/s^2.

    Examples
    --------
    >>> round(growth_constant(150.0), 4)
    0.0469
    """
    return Q_GROWTH_REF_KW / t_g_s**2


def t_squared_hrr(t_s, alpha_kw_s2: float, q_max_kw: float = math.inf):
    """Heat release rate of a t-squared fire capped at a steady maximum [kW].

    Parameters
    ----------
    t_s : array_like
        Time from effective ignition [s].
    alpha_kw_s2 : float
        Growth constant [kW/s^2].
    q_max_kw : float
        Steady maximum [kW].

    Notes
    -----
    Q = min(alpha t^2, Q_max) (NFPA 72 Annex B; NFPA 92).

    Examples
    --------
    >>> round(float(t_squared_hrr(150.0, growth_constant(150.0))), 6)
    1055.0
    """
    t = np.maximum(np.asarray(t_s, dtype=float), 0.0)
    return np.minimum(alpha_kw_s2 * t * t, q_max_kw)


def plume_mass_flow(q_conv_kw, z_m):
    """Axisymmetric plume mass flow at a height above the fuel [kg/s].

    Parameters
    ----------
    q_conv_kw : array_like
        Convective heat release rate Qc [kW].
    z_m : array_like
        Height above the top of the fuel [m].

    Notes
    -----
    NFPA 92 (2012), sec. 5.5.1 (Heskestad's plume), equation numbers from memory::

        z_l = 0.166 Qc^(2/5)                        limiting (flame) height [m]
        m   = 0.071 Qc^(1/3) z^(5/3) + 0.0018 Qc    for z >  z_l
        m   = 0.032 Qc^(3/5) z                      for z <= z_l

    Examples
    --------
    >>> round(float(plume_mass_flow(1000.0, 10.0)), 2)
    34.76
    """
    qc = np.maximum(np.asarray(q_conv_kw, dtype=float), 0.0)
    z = np.maximum(np.asarray(z_m, dtype=float), 0.0)
    z_l = 0.166 * qc**0.4
    far = 0.071 * np.cbrt(qc) * z ** (5.0 / 3.0) + 0.0018 * qc
    near = 0.032 * qc**0.6 * z
    return np.where(z > z_l, far, near)


def nfpa92_steady_fill_height(t_s, q_kw: float, h_m: float, area_m2: float):
    """Smoke layer height of the NFPA 92 empirical filling correlation, steady fire [m].

    Parameters
    ----------
    t_s : array_like
        Time [s].
    q_kw : float
        Steady heat release rate [kW].
    h_m : float
        Ceiling height above the fire [m].
    area_m2 : float
        Plan area of the space [m^2].

    Notes
    -----
    NFPA 92 (2012), sec. 5.4 (from memory)::

        z/H = 1.11 - 0.28 ln[(t Q^(1/3) / H^(4/3)) / (A / H^2)]

    fitted for 0.9 <= A/H^2 <= 14 and z/H >= 0.2; clipped here to [0, H]. Not used to
    make the demo data; the tests compare the zone model with it.
    """
    t = np.asarray(t_s, dtype=float)
    with np.errstate(divide="ignore"):
        arg = (t * q_kw ** (1.0 / 3.0) / h_m ** (4.0 / 3.0)) / (area_m2 / h_m**2)
        z_over_h = 1.11 - 0.28 * np.log(arg)
    return np.clip(z_over_h, 0.0, 1.0) * h_m


def alpert_ceiling_jet(q_kw, h_m: float, r_m: float):
    """Ceiling-jet temperature rise [K] and velocity [m/s] (Alpert 1972).

    Parameters
    ----------
    q_kw : array_like
        Total heat release rate [kW].
    h_m : float
        Ceiling height above the fuel [m].
    r_m : float
        Radial distance from the plume axis [m].

    Notes
    -----
    Alpert (1972), as printed in the SFPE Handbook (quoted from memory)::

        dT = 16.9 Q^(2/3) / H^(5/3)            r/H <= 0.18
        dT = 5.38 (Q/r)^(2/3) / H              r/H >  0.18
        U  = 0.96 (Q/H)^(1/3)                  r/H <= 0.15
        U  = 0.195 Q^(1/3) H^(1/2) / r^(5/6)   r/H >  0.15

    Examples
    --------
    >>> dt, u = alpert_ceiling_jet(1000.0, 4.0, 3.0)
    >>> round(float(dt), 1), round(float(u), 2)
    (64.7, 1.56)
    """
    q = np.maximum(np.asarray(q_kw, dtype=float), 0.0)
    if r_m / h_m <= 0.18:
        dt = 16.9 * q ** (2.0 / 3.0) / h_m ** (5.0 / 3.0)
    else:
        dt = 5.38 * (q / r_m) ** (2.0 / 3.0) / h_m
    if r_m / h_m <= 0.15:
        u = 0.96 * np.cbrt(q / h_m)
    else:
        u = 0.195 * np.cbrt(q) * math.sqrt(h_m) / r_m ** (5.0 / 6.0)
    return dt, u


def door_outflow(width_m: float, soffit_m: float, z_int_m: float, t_layer_k: float,
                 cd: float = 0.7) -> float:
    """Buoyant outflow of layer gas through an opening [kg/s].

    Notes
    -----
    With the neutral plane taken at the interface (a simplification, assumed)::

        m = (2/3) Cd W sqrt(2 g rho_L (rho_0 - rho_L)) d^(3/2),   d = soffit - z_int

    (Emmons, SFPE Handbook, vent flows; from memory). Cd = 0.7 (common practice).
    """
    depth = soffit_m - z_int_m
    if depth <= 0.0 or t_layer_k <= T0_K:
        return 0.0
    rho_l = RHO0 * T0_K / t_layer_k
    return (2.0 / 3.0) * cd * width_m * math.sqrt(2.0 * G * rho_l * (RHO0 - rho_l)) * depth**1.5


def point_source_flux(q_kw, r_m: float):
    """Radiant flux from a flame treated as a point source [kW/m^2].

    Notes
    -----
    q'' = chi_r Q / (4 pi r^2) with chi_r = 0.3 (Modak 1977 point-source model; chi_r
    assumed).
    """
    return RADIATIVE_FRACTION * np.asarray(q_kw, dtype=float) / (4.0 * math.pi * r_m**2)


def link_temperature_rise(t_s, gas_rise_k, u_m_s, rti: float):
    """Rise of a heat-detector or sprinkler link above ambient, RTI model [K].

    Notes
    -----
    d(theta_d)/dt = sqrt(u) (theta_g - theta_d) / RTI (Heskestad & Bill 1988), stepped
    exactly for the gas rise held constant over each step. The lobby sprinkler in
    scenario c uses the same update inline (it is coupled to the layer); this function
    serves the tests and anyone checking the heat detector of the demo by hand.
    """
    theta = np.zeros_like(np.asarray(gas_rise_k, dtype=float))
    for i in range(1, len(t_s)):
        c = math.sqrt(max(u_m_s[i], 0.0)) / rti
        e = math.exp(-c * (t_s[i] - t_s[i - 1]))
        theta[i] = gas_rise_k[i] + (theta[i - 1] - gas_rise_k[i]) * e
    return theta


# --------------------------------------------------------------------------------------
# Two-zone filling of one space
# --------------------------------------------------------------------------------------

SPECIES = ("co2", "co", "soot", "hcn", "o2def")


def fire_source(q_kw: np.ndarray, fuel_height_m: float):
    """Source terms of a fire at ``fuel_height_m`` releasing ``q_kw`` (one value per step).

    Returns a function (step, z_int, t_layer_k) -> (plume mass flow [kg/s], convective
    heat [kW], species mass flows [kg/s]); species are yields times the fuel burning rate
    Q / dH_c, and the oxygen consumed is Q / 13.1 MJ/kg (Huggett 1980).
    """
    def source(i: int, z_int: float, t_layer_k: float):
        q = float(q_kw[i])
        qc = CONVECTIVE_FRACTION * q
        fuel = q / HEAT_OF_COMBUSTION_KJ_KG
        flux = {k: YIELDS[k] * fuel for k in ("co2", "co", "soot", "hcn")}
        flux["o2def"] = q / O2_HEAT_KJ_KG
        return float(plume_mass_flow(qc, z_int - fuel_height_m)), qc, flux
    return source


def spill_source(upstream: dict, base_height_m: float | None, extra_entrainment: float = 0.0):
    """Source terms of smoke spilling from an upstream space.

    The outflow of the upstream layer (mass, excess enthalpy, species) enters this
    space. With ``extra_entrainment`` = e the mass flow grows by the factor (1 + e) of
    ambient air (door jet; assumed). With ``base_height_m`` not None the spill also
    rises as a plume from that height, entraining as a Heskestad plume of the carried
    convective heat (a crude stand-in for a spill-plume correlation; assumed).
    """
    m_up, t_up, y_up = upstream["m_out"], upstream["t_layer_k"], upstream["y"]

    def source(i: int, z_int: float, t_layer_k: float):
        m = float(m_up[i])
        q = m * CP * (float(t_up[i]) - T0_K)
        flux = {k: float(y_up[k][i]) * m for k in SPECIES}
        m_in = m * (1.0 + extra_entrainment)
        if base_height_m is not None:
            m_in += float(plume_mass_flow(q, z_int - base_height_m))
        return m_in, q, flux
    return source


def fill_zone(n_steps: int, area_m2: float, ceiling_m: float, source, heat_loss: float,
              exhaust_m3_s: np.ndarray | None = None, vent: dict | None = None,
              floor_m: float = 0.0) -> dict:
    """Integrate the layer of one space by explicit steps of DT_S.

    Parameters
    ----------
    n_steps : int
        Number of time steps (times i * DT_S).
    area_m2, ceiling_m, floor_m : float
        Plan area [m^2] and ceiling and floor heights [m] (absolute heights).
    source : callable
        (step, z_int, t_layer_k) -> (mass inflow [kg/s], convective heat [kW],
        species [kg/s]).
    heat_loss : float
        Fraction of the convective heat lost to the boundaries [-] (assumed).
    exhaust_m3_s : ndarray, optional
        Volume flow of layer gas drawn by fans at each step [m^3/s].
    vent : dict, optional
        ``{"width": W, "soffit": z_s}`` buoyant outflow through an opening.

    Notes
    -----
    Ideal gas at constant pressure: the layer enthalpy m_L cp T_L = cp rho0 T0 V_L, so
    the energy balance gives the layer volume directly and the mass balance its mass::

        dV/dt = m_p/rho0 + (1 - lambda) Qc / (rho0 cp T0) - V_out
        dm/dt = m_p - rho_L V_out,           T_L = rho0 T0 V / m
        dM_i/dt = S_i - (M_i/m) rho_L V_out  (species masses)

    When fans would draw more than the layer holds, the rest is ambient air
    (plugholing) and the layer keeps a thin minimum volume.
    """
    v_min = area_m2 * 0.01
    v_max = area_m2 * (ceiling_m - floor_m - 0.05)
    vol, mass = v_min, RHO0 * v_min
    spec = {k: 0.0 for k in SPECIES}
    out = {"z_int": np.empty(n_steps), "t_layer_k": np.empty(n_steps), "m_out": np.empty(n_steps),
           "y": {k: np.empty(n_steps) for k in SPECIES}}
    for i in range(n_steps):
        z_int = ceiling_m - vol / area_m2
        t_layer = RHO0 * T0_K * vol / mass
        rho_l = mass / vol
        out["z_int"][i], out["t_layer_k"][i] = z_int, t_layer
        for k in SPECIES:
            out["y"][k][i] = spec[k] / mass
        m_in, q_conv, flux = source(i, z_int, t_layer)
        v_out = 0.0
        if exhaust_m3_s is not None:
            v_out += float(exhaust_m3_s[i])
        if vent is not None:
            v_out += door_outflow(vent["width"], vent["soffit"], z_int, t_layer) / rho_l
        dvol = m_in / RHO0 + (1.0 - heat_loss) * q_conv / (RHO0 * CP * T0_K) - v_out
        new_vol = vol + dvol * DT_S
        if new_vol < v_min:          # fans draw ambient air as well (plugholing)
            v_out -= (v_min - new_vol) / DT_S
            new_vol = v_min
        elif new_vol > v_max:        # the space is full of smoke: the surplus leaves
            v_out += (new_vol - v_max) / DT_S
            new_vol = v_max
        m_out = rho_l * max(v_out, 0.0)
        out["m_out"][i] = m_out
        for k in SPECIES:
            spec[k] = max(spec[k] + (flux[k] - spec[k] / mass * m_out) * DT_S, 0.0)
        mass = min(mass + (m_in - m_out) * DT_S, RHO0 * new_vol)
        mass = max(mass, 1e-6)
        vol = new_vol
    return out


def layer_state(zone: dict, ceiling_m: float) -> dict:
    """Layer temperature, volume fractions and extinction from a filled zone."""
    y = zone["y"]
    mw = MOLAR_MASS
    return {
        "z_int": zone["z_int"],
        "depth": ceiling_m - zone["z_int"],
        "dT": zone["t_layer_k"] - T0_K,
        "co": y["co"] * mw["air"] / mw["co"],
        "co2": y["co2"] * mw["air"] / mw["co2"],
        "o2def": y["o2def"] * mw["air"] / mw["o2"],
        "hcn": y["hcn"] * mw["air"] / mw["hcn"],
        # soot density = Y_soot * rho_L; K = K_m * rho_soot
        "K": K_M_M2_KG * y["soot"] * RHO0 * T0_K / zone["t_layer_k"],
    }


# --------------------------------------------------------------------------------------
# The invented building: Corrowby Community Library (all dimensions assumed)
# --------------------------------------------------------------------------------------

ATRIUM = {"area": 320.0, "ceiling": 16.5}        # 16 m x 20 m void, roof glazing at 16.5 m
LEVEL_FLOOR = {1: 0.0, 2: 4.5, 3: 9.0}            # floor levels [m]
FAN_M3_S = 25.0                                   # each of two roof exhaust fans [m^3/s]
FAN_START_S, FAN_RAMP_S = 60.0, 30.0              # start on detection, run-up (assumed)
ATRIUM_FIRE = {"growth": "fast", "q_max": 2500.0, "fuel_height": 0.5}
LOBBY = {"area": 30.0, "ceiling": 3.0, "door_width": 1.0, "door_soffit": 2.1}
LOBBY_FIRE = {"growth": "medium", "fuel_height": 0.5, "sprinkler_h": 2.5, "sprinkler_r": 2.0,
              "rti": 50.0, "activation_c": 68.0}
CORRIDOR = {"area": 48.0, "ceiling": 3.0, "end_width": 2.4, "end_soffit": 3.0}   # open end, no downstand
HEAT_LOSS = {"atrium": 0.35, "lobby": 0.6, "corridor": 0.5}   # fractions (assumed)


def fan_flow(t: np.ndarray, fans: int) -> np.ndarray:
    """Exhaust volume flow [m^3/s]: ``fans`` fans of FAN_M3_S, linear run-up after start."""
    ramp = np.clip((t - FAN_START_S) / FAN_RAMP_S, 0.0, 1.0)
    return fans * FAN_M3_S * ramp


def atrium_fire_zones(t: np.ndarray, fans: int, growth: str | None = None) -> dict:
    """Scenarios a and b: fast t-squared fire on the atrium floor (``growth``: another NFPA class)."""
    alpha = growth_constant(GROWTH_TIME_S[growth or ATRIUM_FIRE["growth"]])
    q = t_squared_hrr(t, alpha, ATRIUM_FIRE["q_max"])
    zone = fill_zone(len(t), ATRIUM["area"], ATRIUM["ceiling"], fire_source(q, ATRIUM_FIRE["fuel_height"]),
                     HEAT_LOSS["atrium"], exhaust_m3_s=fan_flow(t, fans))
    out = {"q": q, "atrium": layer_state(zone, ATRIUM["ceiling"]), "fire_in": "atrium"}
    if growth is not None:        # an ensemble member (see LAYER_EXCESS_FLOOR_K)
        out["layer_floor_k"] = LAYER_EXCESS_FLOOR_K
    return out


def lobby_fire_zones(t: np.ndarray) -> dict:
    """Scenario c: medium t-squared fire in the ground-floor west stair lobby.

    The heat release rate is held constant once the lobby sprinkler link activates
    (sprinkler control, common practice). The link follows the RTI model in Alpert's
    ceiling jet, with the jet's rise added to the lobby layer's rise (assumed).
    """
    alpha = growth_constant(GROWTH_TIME_S[LOBBY_FIRE["growth"]])
    q = t_squared_hrr(t, alpha)
    state = {"theta": 0.0, "t_act": None, "q_act": None}
    rise_act = LOBBY_FIRE["activation_c"] - (T0_K - 273.15)
    base = fire_source(q, LOBBY_FIRE["fuel_height"])

    def source(i: int, z_int: float, t_layer_k: float):
        if state["q_act"] is None:
            dt_jet, u = alpert_ceiling_jet(q[i], LOBBY_FIRE["sprinkler_h"], LOBBY_FIRE["sprinkler_r"])
            gas = float(dt_jet) + (t_layer_k - T0_K)
            c = math.sqrt(float(u)) / LOBBY_FIRE["rti"]
            state["theta"] = gas + (state["theta"] - gas) * math.exp(-c * DT_S)
            if state["theta"] >= rise_act:
                state["t_act"], state["q_act"] = float(t[i]), float(q[i])
        else:
            q[i] = state["q_act"]
        return base(i, z_int, t_layer_k)

    lobby = fill_zone(len(t), LOBBY["area"], LOBBY["ceiling"], source, HEAT_LOSS["lobby"],
                      vent={"width": LOBBY["door_width"], "soffit": LOBBY["door_soffit"]})
    corridor = fill_zone(len(t), CORRIDOR["area"], CORRIDOR["ceiling"],
                         spill_source(lobby, None, extra_entrainment=0.5), HEAT_LOSS["corridor"],
                         vent={"width": CORRIDOR["end_width"], "soffit": CORRIDOR["end_soffit"]})
    atrium = fill_zone(len(t), ATRIUM["area"], ATRIUM["ceiling"],
                       spill_source(corridor, CORRIDOR["ceiling"]), HEAT_LOSS["atrium"],
                       exhaust_m3_s=fan_flow(t, 2))
    return {"q": q, "lobby": layer_state(lobby, LOBBY["ceiling"]),
            "corridor": layer_state(corridor, CORRIDOR["ceiling"]),
            "atrium": layer_state(atrium, ATRIUM["ceiling"]), "fire_in": "lobby",
            "sprinkler_s": state["t_act"]}


# --------------------------------------------------------------------------------------
# Locations
# --------------------------------------------------------------------------------------

def lag(x: np.ndarray, tau_s: float) -> np.ndarray:
    """First-order lag y' = (x - y)/tau, stepped exactly on the DT_S grid (tau 0: none)."""
    if tau_s <= 0:
        return x.copy()
    a = 1.0 - math.exp(-DT_S / tau_s)
    y = np.empty_like(x)
    acc = x[..., 0].copy()
    for i in range(x.shape[-1]):
        acc = acc + a * (x[..., i] - acc)
        y[..., i] = acc
    return y


def transition(z_ref_m: float, z_int: np.ndarray, width_m: float = TRANSITION_M) -> np.ndarray:
    """Share of the layer excess seen at height z_ref: LOWER_LAYER_FRACTION well below
    the interface, 1 well inside the layer, a tanh step between (assumed)."""
    s = 0.5 * (1.0 + np.tanh((z_ref_m - z_int) / width_m))
    return LOWER_LAYER_FRACTION + (1.0 - LOWER_LAYER_FRACTION) * s


def wobble(t: np.ndarray, k: int, amplitude: float = 0.04) -> np.ndarray:
    """Small fixed, smooth variation between locations (two sines; not random)."""
    ph1 = 2.0 * math.pi * ((0.618034 * (k + 1)) % 1.0)
    ph2 = 2.0 * math.pi * ((0.414214 * (k + 3)) % 1.0)
    return 1.0 + amplitude * (0.7 * np.sin(2 * math.pi * t / (47.0 + 6.0 * k) + ph1)
                              + 0.3 * np.sin(2 * math.pi * t / (13.0 + 1.7 * k) + ph2))


def exposure(zones: dict, t: np.ndarray, spec: dict, k: int, amp: float = 1.0) -> dict:
    """Conditions at one location from its zone, connection fraction, lag and height."""
    layer = zones[spec["zone"]]
    w = transition(spec["z"], layer["z_int"]) * spec.get("f", 1.0) * amp * wobble(t, k)
    keys = ("dT", "co", "co2", "o2def", "hcn", "K")
    stacked = np.vstack([w * layer[key] for key in keys])
    stacked = lag(stacked, spec.get("tau", 0.0))
    res = dict(zip(keys, stacked))
    # radiation: grey layer overhead (emissivity from the extinction over its depth, the
    # extinction standing in for the absorption coefficient; assumed) plus the flame
    eps = 1.0 - np.exp(-layer["K"] * np.maximum(layer["depth"], 0.0))
    t_l = T0_K + layer["dT"]
    q_layer = spec.get("view", 0.0) * eps * SIGMA_KW * (t_l**4 - T0_K**4) * amp
    q_flame = point_source_flux(zones["q"], spec["flame_r"]) * amp if spec.get("flame_r") and \
        zones["fire_in"] == spec["zone"] else 0.0
    res["flux"] = lag(np.vstack([q_layer + q_flame]), spec.get("tau", 0.0))[0]
    return res


# location id -> column prefix and the connection to each scenario's zones (assumed).
# z: the height [m, absolute] that the interface must pass (head height, or a door
# head for rooms behind doors); f: share of the layer excess; tau: lag [s];
# view: view factor to the layer for the radiant flux; flame_r: distance to the fire [m].
def atrium_connections() -> dict:
    """Location connections when the fire is on the atrium floor (scenarios a, b)."""
    l2, l3 = LEVEL_FLOOR[2], LEVEL_FLOOR[3]
    return {
        "reading-area": {"zone": "atrium", "z": HEAD_HEIGHT_M, "view": 0.35, "flame_r": 7.0},
        "reading-soffit": {"zone": "atrium", "z": SOFFIT_HEIGHT_M},
        "atrium-l2": {"zone": "atrium", "z": l2 + HEAD_HEIGHT_M, "view": 0.6, "flame_r": 10.5},
        "atrium-l3": {"zone": "atrium", "z": l3 + HEAD_HEIGHT_M, "view": 0.8, "flame_r": 14.0},
        "atrium-roof": {"zone": "atrium", "z": ATRIUM["ceiling"] - 1.0},
        "corridor-l3-east": {"zone": "atrium", "z": l3 + HEAD_HEIGHT_M, "f": 0.7, "tau": 30.0},
        "lobby-east-l3": {"zone": "atrium", "z": l3 + 2.1, "f": 0.35, "tau": 60.0},
        "stair-east": {"zone": "atrium", "z": l3 + 2.1, "f": 0.15, "tau": 120.0},
        "exit-east": {"zone": "atrium", "z": l3 + 2.1, "f": 0.03, "tau": 180.0},
        "lobby-west-l2": {"zone": "atrium", "z": l2 + 2.1, "f": 0.35, "tau": 60.0},
        "stair-west": {"zone": "atrium", "z": l2 + 2.1, "f": 0.08, "tau": 120.0},
        "lobby-west-l1": {"zone": "atrium", "z": 2.1, "f": 0.2, "tau": 90.0, "view": 0.1},
        "corridor-west-l1": {"zone": "atrium", "z": HEAD_HEIGHT_M, "f": 0.6, "tau": 20.0, "view": 0.1},
        "exit-main": {"zone": "atrium", "z": HEAD_HEIGHT_M, "f": 0.5, "tau": 20.0},
    }


def lobby_connections() -> dict:
    """Location connections when the fire is in the west stair lobby (scenario c)."""
    c = atrium_connections()
    c.update({
        "reading-area": {"zone": "atrium", "z": HEAD_HEIGHT_M, "view": 0.35},
        "atrium-l2": {"zone": "atrium", "z": LEVEL_FLOOR[2] + HEAD_HEIGHT_M, "view": 0.6},
        "atrium-l3": {"zone": "atrium", "z": LEVEL_FLOOR[3] + HEAD_HEIGHT_M, "view": 0.8},
        "lobby-west-l1": {"zone": "lobby", "z": HEAD_HEIGHT_M, "view": 0.9, "flame_r": 2.0},
        "corridor-west-l1": {"zone": "corridor", "z": HEAD_HEIGHT_M, "view": 0.8},
        "stair-west": {"zone": "lobby", "z": 2.1, "f": 0.06, "tau": 90.0},
        "lobby-west-l2": {"zone": "lobby", "z": 2.1, "f": 0.03, "tau": 150.0},
        "exit-main": {"zone": "corridor", "z": HEAD_HEIGHT_M, "f": 0.15, "tau": 40.0},
    })
    return c


# --------------------------------------------------------------------------------------
# Columns of the CSV files
# --------------------------------------------------------------------------------------

#: Sign constant used for the one location written as visibility (light-emitting
#: signs, C = 8; Jin, SFPE Handbook "Visibility and human behavior in fire smoke").
VISIBILITY_SIGN_CONSTANT = 8.0
#: Visibility written is capped at this distance [m] (common practice for plots).
VISIBILITY_CAP_M = 30.0

#: Heat detector under the level-2 gallery soffit: soffit 4.2 m above the atrium floor,
#: 3 m horizontally from the fire axis (assumed). Alpert's correlation is applied with
#: the soffit as the ceiling (an approximation for this illustration).
SOFFIT_HEIGHT_M, SOFFIT_RADIUS_M = 4.2, 3.0

#: Thermocouple trees: heights above the local floor [m] and the ceiling above it [m].
TREE_L3 = {"heights": (0.5, 1.5, 2.5, 3.5, 5.0, 7.2), "ceiling": ATRIUM["ceiling"] - LEVEL_FLOOR[3]}
TREE_W1 = {"heights": (0.5, 1.0, 1.5, 2.0, 2.5, 2.9), "ceiling": LOBBY["ceiling"]}

#: Location id -> (column stem, series written). Series codes: T temperature [degC],
#: TK temperature [K], CO [ppm], CO2 [percent], XCO2 [mol/mol, unit given in the
#: study], O2 [percent], HCN [ppm], EXT extinction [1/m], OD optical density [1/m],
#: SOOT [mg/m^3], VIS visibility [m], FLUX [kW/m^2], ZL layer height [m], U [m/s],
#: TREE thermocouple tree [degC, unit given in the study].
LOCATIONS = {
    "reading-area": ("reading", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "reading-soffit": ("soffit_det", ("T", "U")),
    "atrium-l2": ("atrium_L2", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "atrium-l3": ("atrium_L3", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "TREE")),
    "atrium-roof": ("roof_beam", ("T", "OD")),
    "corridor-l3-east": ("corr_L3E", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "lobby-east-l3": ("lobby_E3", ("T", "CO", "XCO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "stair-east": ("stair_E", ("TK", "CO", "CO2", "O2", "HCN", "HCL", "VIS", "FLUX", "ZL")),
    "exit-east": ("exit_E", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "lobby-west-l2": ("lobby_W2", ("T", "CO", "CO2", "O2", "HCN", "HCL", "SOOT", "FLUX", "ZL")),
    "stair-west": ("stair_W", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "lobby-west-l1": ("lobby_W1", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "TREE")),
    "corridor-west-l1": ("corr_W1", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
    "exit-main": ("exit_main", ("T", "CO", "CO2", "O2", "HCN", "HCL", "EXT", "FLUX", "ZL")),
}

#: Floor level [m, absolute] of each location, for its layer height above the local floor.
LOCATION_FLOOR_M = {
    "reading-area": 0.0, "atrium-l2": LEVEL_FLOOR[2], "corridor-l3-east": LEVEL_FLOOR[3],
    "lobby-east-l3": LEVEL_FLOOR[3], "stair-east": LEVEL_FLOOR[2], "exit-east": 0.0,
    "lobby-west-l2": LEVEL_FLOOR[2], "stair-west": 0.0, "corridor-west-l1": 0.0, "exit-main": 0.0,
}
#: Ceiling height above the local floor [m] of the spaces behind doors (assumed).
LOCAL_CEILING_M = 3.0
#: A space behind a door fills with the smoke it receives: its interface falls from the
#: ceiling by this multiple of the received share of the layer excess (assumed).
LOCAL_FILL_FACTOR = 1.5
#: Smallest layer excess temperature [K] a share of the layer is taken against, for the growth-rate
#: members of the fire-a ensemble: a slow fire's layer is exhausted by the fans, and without the
#: floor the share (a 0/0) fills the spaces behind doors. The original scenarios keep 1e-9 so
#: that their files stay byte for byte as published (assumed; illustrative).
LAYER_EXCESS_FLOOR_K = 2.0
#: View factor to the local hot layer for the radiant flux in a space behind a door (assumed).
LOCAL_VIEW = 0.5


#: Header prefix and unit, and the number of decimals written, per series code.
COLUMN_FORMAT = {
    "T": ("T_{} [degC]", 2), "TK": ("T_{} [K]", 2), "CO": ("CO_{} [ppm]", 1),
    "CO2": ("CO2_{} [percent]", 4), "XCO2": ("X_CO2_{}", 6), "O2": ("O2_{} [percent]", 3),
    "HCN": ("HCN_{} [ppm]", 2), "HCL": ("HCl_{} [ppm]", 2), "EXT": ("Ext_{} [1/m]", 4), "OD": ("OD_{} [1/m]", 5),
    "SOOT": ("Soot_{} [mg/m^3]", 3), "VIS": ("Vis_{} [m]", 2), "FLUX": ("Flux_{} [kW/m^2]", 3),
    "ZL": ("Zlayer_{} [m]", 3), "U": ("U_{} [m/s]", 3),
}


def tree_columns(stem: str, heights) -> list[str]:
    """Column names of a thermocouple tree (no unit in the header: the study gives it)."""
    return [f"Tree_{stem}_z{round(h * 100):03d}" for h in heights]


def location_columns(zones: dict, t: np.ndarray, connections: dict, amp: float = 1.0) -> dict:
    """All CSV columns (header -> (values on the fine grid, decimals)) of one scenario."""
    cols: dict[str, tuple[np.ndarray, int]] = {}
    for k, (lid, (stem, codes)) in enumerate(LOCATIONS.items()):
        spec = connections[lid]
        ex = exposure(zones, t, spec, k, amp)
        values = {
            "T": ex["dT"] + (T0_K - 273.15),
            "TK": ex["dT"] + T0_K,
            "CO": ex["co"] * 1e6,
            "CO2": (X_CO2_AMBIENT + ex["co2"]) * 100.0,
            "XCO2": X_CO2_AMBIENT + ex["co2"],
            "O2": (X_O2_AMBIENT - ex["o2def"]) * 100.0,
            "HCN": ex["hcn"] * 1e6,
            "HCL": ex["hcn"] * HCL_PER_HCN * 1e6,
            "EXT": ex["K"],
            "OD": ex["K"] / math.log(10.0),
            "SOOT": ex["K"] / K_M_M2_KG * 1e6,
            "VIS": np.minimum(VISIBILITY_SIGN_CONSTANT / np.maximum(ex["K"], 1e-9), VISIBILITY_CAP_M),
            "FLUX": ex["flux"],
            "ZL": local_layer_height(zones, spec, ex, LOCATION_FLOOR_M.get(lid, 0.0)),
        }
        if "view" not in spec and "f" in spec:
            values["FLUX"] = local_layer_flux(ex, values["ZL"])
        if "U" in codes or lid == "reading-soffit":
            values["T"], values["U"] = soffit_detector(zones, t, spec, amp)
        for code in codes:
            if code == "TREE":
                tree, floor = (TREE_L3, LEVEL_FLOOR[3]) if lid == "atrium-l3" else (TREE_W1, 0.0)
                layer = zones[spec["zone"]]
                for name, h in zip(tree_columns(stem, tree["heights"]), tree["heights"]):
                    cols[name] = (tree_temperature(layer, floor + h, t, k, amp), 2)
                continue
            template, decimals = COLUMN_FORMAT[code]
            cols[template.format(stem)] = (values[code], decimals)
    return cols


def local_layer_height(zones: dict, spec: dict, ex: dict, floor_m: float) -> np.ndarray:
    """Smoke layer interface above the local floor [m].

    In the space of the zone itself (no connection share ``f``), the zone's interface above
    the floor. In a space behind a door, the interface falls from the local ceiling as the
    space receives smoke: ``H (1 - min(1, LOCAL_FILL_FACTOR w))`` with w the received share
    of the layer excess (lagged like the other series); an assumed illustration, not a
    filling calculation.
    """
    if "f" not in spec:
        return np.clip(zones[spec["zone"]]["z_int"] - floor_m, 0.0, None)
    layer = zones[spec["zone"]]
    share = ex["dT"] / np.maximum(layer["dT"], zones.get("layer_floor_k", 1e-9))
    share = np.clip(lag(np.vstack([share]), spec.get("tau", 0.0))[0], 0.0, 1.0)
    return LOCAL_CEILING_M * (1.0 - np.minimum(1.0, LOCAL_FILL_FACTOR * share))


def local_layer_flux(ex: dict, z_local_m: np.ndarray) -> np.ndarray:
    """Radiant flux [kW/m^2] from the local hot layer of a space behind a door: grey
    emission eps sigma (T^4 - T0^4) times LOCAL_VIEW, eps from the extinction over the
    local layer depth (the extinction standing in for the absorption coefficient; assumed)."""
    eps = 1.0 - np.exp(-ex["K"] * np.maximum(LOCAL_CEILING_M - z_local_m, 0.0))
    t_k = T0_K + ex["dT"]
    return LOCAL_VIEW * eps * SIGMA_KW * (t_k**4 - T0_K**4)


def soffit_detector(zones: dict, t: np.ndarray, spec: dict, amp: float):
    """Gas temperature [degC] and velocity [m/s] at the heat detector under the soffit."""
    layer = zones["atrium"]
    w = transition(SOFFIT_HEIGHT_M, layer["z_int"])
    rise = w * layer["dT"] * amp
    speed = 0.05 + 0.1 * w                      # room air movement (assumed)
    if zones["fire_in"] == "atrium":
        dt_jet, u = alpert_ceiling_jet(zones["q"], SOFFIT_HEIGHT_M - ATRIUM_FIRE["fuel_height"],
                                       SOFFIT_RADIUS_M)
        rise = rise + amp * dt_jet * wobble(t, 99, 0.03)
        speed = np.maximum(speed, u * np.sqrt(amp))
    return rise + (T0_K - 273.15), speed


def tree_temperature(layer: dict, z_abs: float, t: np.ndarray, k: int, amp: float) -> np.ndarray:
    """Thermocouple reading [degC] at absolute height ``z_abs``: the layer rise with a
    sharper transition than at head height and a mild rise towards the ceiling (assumed)."""
    s = transition(z_abs, layer["z_int"], 0.2)
    depth = np.maximum(layer["depth"], 0.3)
    grad = 1.0 + 0.15 * np.clip((z_abs - layer["z_int"]) / depth, 0.0, 1.0)
    return (T0_K - 273.15) + amp * s * grad * layer["dT"] * wobble(t, k + 40, 0.02)


# --------------------------------------------------------------------------------------
# Scenarios and the grid-sensitivity variants
# --------------------------------------------------------------------------------------

#: Scenario id -> (end time [s], builder of the zones, connections).
SCENARIOS = {
    "fire-a": (900.0, lambda t: atrium_fire_zones(t, fans=2), atrium_connections),
    "fire-b": (900.0, lambda t: atrium_fire_zones(t, fans=1), atrium_connections),
    "fire-c": (1200.0, lobby_fire_zones, lobby_connections),
    # growth-rate members of the fire-a ensemble (fire-a.csv itself is the fast member)
    "fire-a-growth-medium": (900.0, lambda t: atrium_fire_zones(t, fans=2, growth="medium"), atrium_connections),
    "fire-a-growth-ultrafast": (900.0, lambda t: atrium_fire_zones(t, fans=2, growth="ultrafast"),
                                atrium_connections),
}

#: Cell sizes [m] of the illustrative grid-sensitivity set of scenario a; the finest is
#: the assessed histories (fire-a.csv).
GRID_CELLS_M = {"fire-a-coarse.csv": 0.20, "fire-a-medium.csv": 0.10, "fire-a.csv": 0.05}
#: Invented discretisation error: times stretch by s(h) = 1 + C_T (h^2 - h_f^2) and the
#: rises shrink by a(h) = 1 - C_A (h^2 - h_f^2), so results converge at second order
#: towards the finest grid (illustrative; real grid studies are not this tidy).
GRID_TIME_COEFF_M2, GRID_AMPLITUDE_COEFF_M2 = 2.0, 1.0


def grid_factors(cell_m: float, finest_m: float = 0.05) -> tuple[float, float]:
    """(time stretch s, amplitude a) of the invented grid error for cell size h [m]."""
    d = cell_m**2 - finest_m**2
    return 1.0 + GRID_TIME_COEFF_M2 * d, 1.0 - GRID_AMPLITUDE_COEFF_M2 * d


def scenario_table(sid: str, stretch: float = 1.0, amp: float = 1.0) -> tuple[np.ndarray, dict]:
    """Output times [s] and columns of one scenario (optionally a coarser-grid variant)."""
    end_s, build, connections = SCENARIOS[sid]
    t_fine = np.arange(0.0, end_s + DT_S / 2, DT_S)
    zones = build(t_fine)
    cols = location_columns(zones, t_fine, connections(), amp)
    # the design fire's heat-release rate (the study's design_fire: {hrr: {column: HRR}})
    cols["HRR [kW]"] = (zones["q"], 1)
    t_out = np.arange(0.0, end_s + OUTPUT_STEP_S / 2, OUTPUT_STEP_S)
    sampled = {name: (np.interp(t_out / stretch, t_fine, v), d) for name, (v, d) in cols.items()}
    return t_out, sampled


def format_value(x: float, decimals: int) -> str:
    """Fixed-point text without a negative zero."""
    text = f"{x:.{decimals}f}"
    return text[1:] if text.startswith("-") and float(text) == 0.0 else text


def write_csv(path: Path, t_out: np.ndarray, cols: dict) -> None:
    """Write one header row (``name [unit]``) and the rows, LF line endings."""
    names = ["Time [s]"] + list(cols)
    lines = [",".join(names)]
    for i, t in enumerate(t_out):
        row = [format_value(t, 0)] + [format_value(v[i], d) for v, d in cols.values()]
        lines.append(",".join(row))
    path.write_bytes(("\n".join(lines) + "\n").encode("ascii"))


def generate(out_dir: Path) -> list[Path]:
    """Write every demo CSV into ``out_dir``; return the paths written."""
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for sid in ("fire-a", "fire-b", "fire-c", "fire-a-growth-medium", "fire-a-growth-ultrafast"):
        t_out, cols = scenario_table(sid)
        path = out_dir / f"{sid}.csv"
        write_csv(path, t_out, cols)
        written.append(path)
    for name, cell in GRID_CELLS_M.items():
        if name == "fire-a.csv":
            continue
        stretch, amp = grid_factors(cell)
        t_out, cols = scenario_table("fire-a", stretch, amp)
        path = out_dir / name
        write_csv(path, t_out, cols)
        written.append(path)
    return written


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Regenerate the illustrative demo histories (invented data).")
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "data",
                        help="folder for the CSV files (default: demo/data next to this script)")
    args = parser.parse_args(argv)
    for path in generate(args.out):
        print(f"wrote {path} ({path.stat().st_size} bytes)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
