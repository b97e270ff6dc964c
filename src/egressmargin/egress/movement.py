"""Movement time along an egress route by the hydraulic hand method.

The occupants of a route walk its elements (corridors, doors, stairs, ramps) in order.
Each element has a walking speed and a flow capacity from the hydraulic model of the
SFPE Handbook egress chapter; the movement time is the travel time of the whole path
plus the time for everyone to pass the element of least capacity, N/Fc.

Rules of the hand method used here (SFPE Handbook 5th ed. ch. 59, from memory unless
said otherwise):

* speed S = k (1 - a D) for D >= 0.54 persons/m^2; below it the unimpeded speed
  0.85 k (:func:`speed`);
* flow capacity Fc = Fsm We; the element of least capacity controls and everyone
  passes it in N/Fc;
* transitions: the flow leaving an element enters the next (flow in = flow out), so
  an element with spare capacity adds no time, and its crowd carries the
  controlling flow at the density of the uncongested branch (:func:`density_at_flow`);
* an element that discharges at capacity has the density of maximum flow,
  D = 1/(2a) = 1.88 persons/m^2, and speed k/2 (the tabulated Fsm is the rounded peak
  of Fs = (1 - aD) k D; scaling the curve to it is a project choice);
* density is persons per area, so a group too small to fill an element stays below
  0.54 persons/m^2 and walks unimpeded (:func:`crowd_density`; the area bound is a
  project choice that follows from the definition);
* upstream of the controlling element people walk unimpeded: its queue absorbs the
  crowd (hand-method practice, from memory).

Tabulated values (k, a, maximum specific flows, boundary layers) are quoted from the
SFPE Handbook egress chapter **from memory**; the table numbers are also from memory.
The tests check the tables for internal consistency (maximum specific flow = k/(4a)),
which the values recalled here pass to the printed rounding.

References
----------
Gwynne, S. M. V., Rosenbaum, E. R. (2016). Employing the hydraulic model in assessing
emergency movement. In: SFPE Handbook of Fire Protection Engineering, 5th ed.,
Springer, ch. 59 (earlier editions: Nelson, H. E., Mowrer, F. W., "Emergency
movement", 3rd ed. 2002, sec. 3 ch. 14).
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = [
    "A_DENSITY_M2",
    "BOUNDARY_LAYER_M",
    "DEFAULT_BOUNDARY_M",
    "DENSITY_MAX_FLOW_P_M2",
    "DENSITY_UNIMPEDED_P_M2",
    "ELEMENT_TYPES",
    "FSM_LEVEL_P_S_M",
    "K_LEVEL_M_S",
    "STAIR_ROWS",
    "UNIMPEDED_FRACTION",
    "MovementTime",
    "crowd_density",
    "density_at_flow",
    "effective_width",
    "hand_speeds",
    "element_properties",
    "movement_time",
    "select_stair_row",
    "specific_flow",
    "speed",
    "unimpeded_speed",
]

#: Element types a route path may contain.
ELEMENT_TYPES: tuple[str, ...] = ("corridor", "door", "stair", "ramp")

#: Speed constant k [m/s] of S = k - a k D for level elements and doors
#: (SFPE Handbook 5th ed., ch. 59, table of constants for the speed equation,
#: Table 59.2 -- from memory).
K_LEVEL_M_S: dict[str, float] = {"corridor": 1.40, "aisle": 1.40, "ramp": 1.40, "door": 1.40}

#: Stair rows of the same table: riser and tread [m], k [m/s], and maximum specific
#: flow Fsm [persons/(s m) of effective width] (Fsm from the table of maximum
#: specific flows, Table 59.3) -- from memory. Ordered steepest first.
STAIR_ROWS: tuple[dict[str, float], ...] = (
    {"riser_m": 0.191, "tread_m": 0.254, "k": 1.00, "fsm": 0.94},  # 7.5 in / 10 in
    {"riser_m": 0.178, "tread_m": 0.279, "k": 1.08, "fsm": 1.01},  # 7 in / 11 in
    {"riser_m": 0.165, "tread_m": 0.305, "k": 1.16, "fsm": 1.09},  # 6.5 in / 12 in
    {"riser_m": 0.165, "tread_m": 0.330, "k": 1.23, "fsm": 1.16},  # 6.5 in / 13 in
)

#: Constant a [m^2/person] of S = k - a k D (SFPE Handbook ch. 59 -- from memory).
A_DENSITY_M2: float = 0.266

#: Maximum specific flow of corridors, aisles, ramps and doors [persons/(s m)]
#: (SFPE Handbook ch. 59, Table 59.3 -- from memory).
FSM_LEVEL_P_S_M: float = 1.3

#: Density [persons/m^2] at or below which people walk at their unimpeded speed
#: (SFPE Handbook ch. 59 -- from memory).
DENSITY_UNIMPEDED_P_M2: float = 0.54

#: Density of maximum flow [persons/m^2]: Fs = (1 - a D) k D peaks at D = 1/(2a) = 1.88
#: (follows from the speed equation of SFPE Handbook ch. 59; the handbook states the
#: peak near 1.9 persons/m^2 -- from memory).
DENSITY_MAX_FLOW_P_M2: float = 1.0 / (2.0 * A_DENSITY_M2)

#: Unimpeded (maximum) speed as a fraction of k (SFPE Handbook ch. 59, table of
#: maximum unimpeded travel speeds: 1.19 m/s for corridors = 0.85 x 1.40 -- from
#: memory). See :func:`unimpeded_speed`.
UNIMPEDED_FRACTION: float = 0.85

#: Boundary layer per side [m] by the feature that bounds the element (SFPE Handbook
#: ch. 59, table of boundary layer widths, Table 59.1 -- from memory).
BOUNDARY_LAYER_M: dict[str, float] = {
    "stair_wall": 0.15,
    "handrail": 0.09,
    "corridor_wall": 0.20,
    "ramp_wall": 0.20,
    "door": 0.15,
    "obstacle": 0.10,
}

#: Boundary layer per side [m] assumed for each element type unless the element
#: gives its own: walls for corridors, ramps and stairs, the frame for doors.
DEFAULT_BOUNDARY_M: dict[str, float] = {
    "corridor": BOUNDARY_LAYER_M["corridor_wall"],
    "ramp": BOUNDARY_LAYER_M["ramp_wall"],
    "stair": BOUNDARY_LAYER_M["stair_wall"],
    "door": BOUNDARY_LAYER_M["door"],
}

# Tolerance for treating a stair as a table row: covers rounding of the inch
# dimensions to millimetres (e.g. 7.5 in = 190.5 mm, 13 in = 330.2 mm).
_ROW_TOLERANCE_M = 0.001


def speed(k, density_p_m2) -> np.ndarray:
    """Walking speed in a crowd of given density.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s] (:data:`K_LEVEL_M_S`, :data:`STAIR_ROWS`).
    density_p_m2 : float or array_like
        Crowd density D [persons/m^2], >= 0.

    Returns
    -------
    numpy.ndarray or float
        Speed S [m/s] along the line of travel.

    Notes
    -----
    Hydraulic model speed-density relation (SFPE Handbook ch. 59):

        S = k - a k D,    a = 0.266 m^2/person,   for D >= 0.54 persons/m^2

    Below D = 0.54 persons/m^2 people are unimpeded and walk at
    :func:`unimpeded_speed` (0.85 k). The formula reaches zero at D = 1/a = 3.76
    persons/m^2; higher densities give 0 (no movement).

    References
    ----------
    Gwynne, S. M. V., Rosenbaum, E. R. (2016). Employing the hydraulic model in
    assessing emergency movement. SFPE Handbook of Fire Protection Engineering,
    5th ed., ch. 59, speed equation (constants from memory).

    Examples
    --------
    >>> round(float(speed(1.40, 1.88)), 3)
    0.7
    """
    k = np.asarray(k, dtype=float)
    d = np.asarray(density_p_m2, dtype=float)
    if np.any(d < 0):
        raise ValueError("density must be >= 0 persons/m^2")
    crowded = np.maximum(k - A_DENSITY_M2 * k * d, 0.0)
    s = np.where(d < DENSITY_UNIMPEDED_P_M2, unimpeded_speed(k), crowded)
    return s if s.ndim else float(s)


def unimpeded_speed(k) -> np.ndarray:
    """Speed of people who are not slowed by the crowd.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s].

    Returns
    -------
    numpy.ndarray or float
        Unimpeded speed [m/s] = 0.85 k.

    Notes
    -----
    The speed equation at its lower limit of validity gives
    k (1 - 0.266 x 0.54) = 0.856 k. The handbook's table of maximum unimpeded
    speeds uses 0.85 k (1.19 m/s for corridors; 0.85 to 1.05 m/s for the four
    stair rows), which is also the slightly slower, conservative value; 0.85 k is
    used here. :func:`speed` therefore steps down by 0.7 % just below
    D = 0.54 persons/m^2.

    References
    ----------
    Gwynne, S. M. V., Rosenbaum, E. R. (2016). SFPE Handbook of Fire Protection
    Engineering, 5th ed., ch. 59, table of maximum unimpeded travel speeds (from
    memory).

    Examples
    --------
    >>> round(float(unimpeded_speed(1.40)), 3)
    1.19
    """
    s = UNIMPEDED_FRACTION * np.asarray(k, dtype=float)
    return s if s.ndim else float(s)


def specific_flow(k, density_p_m2) -> np.ndarray:
    """Specific flow: persons passing per second per metre of effective width.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s].
    density_p_m2 : float or array_like
        Crowd density D [persons/m^2].

    Returns
    -------
    numpy.ndarray or float
        Specific flow Fs [persons/(s m)].

    Notes
    -----
    Fs = S D = (1 - a D) k D (with S from :func:`speed`). Its maximum over D lies at
    D = 1/(2a) = 1.88 persons/m^2 and is k/(4a): 1.316 for k = 1.40, tabulated as
    1.3 persons/(s m) for corridors and doors.

    References
    ----------
    Gwynne, S. M. V., Rosenbaum, E. R. (2016). SFPE Handbook of Fire Protection
    Engineering, 5th ed., ch. 59, specific flow equation (from memory).

    Examples
    --------
    >>> round(float(specific_flow(1.40, 1.88)), 2)
    1.32
    """
    f = np.asarray(speed(k, density_p_m2)) * np.asarray(density_p_m2, dtype=float)
    return f if f.ndim else float(f)


def density_at_flow(flow_ratio) -> np.ndarray:
    """Crowd density at which an element carries a given share of its capacity.

    Parameters
    ----------
    flow_ratio : float or array_like
        Flow through the element over its capacity, F / Fc [-]; clipped to [0, 1].

    Returns
    -------
    numpy.ndarray or float
        Density D [persons/m^2] on the uncongested branch, between 0 and
        1/(2a) = 1.88 (:data:`DENSITY_MAX_FLOW_P_M2`).

    Notes
    -----
    The specific flow Fs = (1 - a D) k D (SFPE Handbook ch. 59, from memory) peaks at
    D = 1/(2a) with the value k/(4a); the tabulated maximum specific flow Fsm is that
    peak rounded (1.3 for k/(4a) = 1.316 on level ground; 0.94, 1.01, 1.09, 1.16 for
    the stair rows' 0.940, 1.015, 1.090, 1.156). The capacity Fc = Fsm We is thus the
    flow at the density of maximum flow. Written relative to its peak the curve is
    F/Fc = 4 a D (1 - a D), and on its uncongested branch

        D = (1 - sqrt(1 - F/Fc)) / (2a).

    An element that discharges at capacity (F = Fc) has D = 1/(2a) and speed
    k (1 - a D) = k/2: 0.70 m/s on level ground, 0.54 m/s on a 178/279 mm stair.
    (Inverting the rounded Fsm on the unscaled curve instead puts a corridor at
    capacity at D = 1.675 and 0.777 m/s, faster than the speed at maximum flow.)
    Scaling the curve to its tabulated peak is a project choice; it changes other
    densities by at most the tabulated rounding (1.2 %).

    Examples
    --------
    >>> round(float(density_at_flow(1.0)), 3), round(float(density_at_flow(0.75)), 3)
    (1.88, 0.94)
    """
    r = np.clip(np.asarray(flow_ratio, dtype=float), 0.0, 1.0)
    d = (1.0 - np.sqrt(1.0 - r)) * DENSITY_MAX_FLOW_P_M2
    return d if d.ndim else float(d)


def crowd_density(flow_ratio, persons, length_m, effective_width_m) -> np.ndarray:
    """Density of the crowd walking an element, for its speed.

    Parameters
    ----------
    flow_ratio : float or array_like
        Flow through the element over its capacity, F / Fc [-].
    persons : float or array_like
        Number of persons who use the element [persons].
    length_m : float or array_like
        Walking length of the element [m] (0 for a door).
    effective_width_m : float or array_like
        Effective width [m].

    Returns
    -------
    numpy.ndarray or float
        D = min(:func:`density_at_flow` (F/Fc), n / (L We)) [persons/m^2]; 0 for fewer
        than two persons (one person makes no crowd).

    Notes
    -----
    Density is persons per unit area (SFPE Handbook ch. 59, from memory): a group of n
    persons cannot be denser on average than all of them spread over the element's
    area L We. A small group that leaves a door at capacity is therefore not slowed on
    a long corridor: below 0.54 persons/m^2 people walk at their unimpeded speed
    (:func:`speed`). The area bound is a project choice that follows from the
    definition; a door (L = 0) has none.

    Examples
    --------
    Five persons leaving at capacity along a 60 m corridor of 1.6 m effective width:
    5 / 96 = 0.052 persons/m^2, unimpeded.

    >>> round(float(crowd_density(1.0, 5, 60.0, 1.6)), 3)
    0.052
    """
    n = np.asarray(persons, dtype=float)
    length = np.asarray(length_m, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        area_bound = np.where(length > 0, n / (length * np.asarray(effective_width_m, dtype=float)), np.inf)
    d = np.where(n >= 2, np.minimum(density_at_flow(flow_ratio), area_bound), 0.0)
    return d if d.ndim else float(d)


def hand_speeds(props: list[dict[str, Any]], occupants) -> tuple[np.ndarray, np.ndarray]:
    """Walking speed and crowd density on each element, everyone starting together.

    Parameters
    ----------
    props : list of dict
        :func:`element_properties` of each element, in path order.
    occupants : float or array_like
        Number of persons [persons]; scalar or shape (S,).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Speeds [m/s] and densities [persons/m^2], shape (E,) + the shape of
        ``occupants``, before any speed factor. The density is NaN upstream of the
        controlling element (unimpeded: the queue there absorbs the crowd).

    Notes
    -----
    The controlling element c is the one of least capacity (the first if tied). It
    discharges at its capacity Fc_c, and by the transition rule (flow in = flow out,
    SFPE Handbook ch. 59, from memory) so does every element after it: element i >= c
    carries F = Fc_c, at density :func:`crowd_density` (Fc_c / Fc_i, N, L_i, We_i) and
    speed :func:`speed` at that density. Before the controlling element people walk at
    the unimpeded speed 0.85 k.
    """
    occ = np.asarray(occupants, dtype=float)
    caps = np.array([p["capacity_p_s"] for p in props])
    ctrl = int(np.argmin(caps))
    speeds, dens = [], []
    for i, p in enumerate(props):
        if i < ctrl:
            speeds.append(np.full(occ.shape, p["unimpeded_speed_m_s"]))
            dens.append(np.full(occ.shape, np.nan))
        else:
            d = np.asarray(crowd_density(caps[ctrl] / caps[i], occ, p["length_m"], p["effective_width_m"]))
            speeds.append(np.asarray(speed(p["k"], d), dtype=float) * np.ones(occ.shape))
            dens.append(d * np.ones(occ.shape))
    return np.array(speeds), np.array(dens)


def effective_width(width_m: float, element_type: str, boundary_m: float | None = None) -> float:
    """Clear width less a boundary layer on each side.

    Parameters
    ----------
    width_m : float
        Clear width [m]: wall to wall for corridors and ramps, tread width for
        stairs, passage width of the open door.
    element_type : str
        One of :data:`ELEMENT_TYPES`; sets the default boundary layer.
    boundary_m : float, optional
        Boundary layer per side [m] to use instead of the default
        (:data:`DEFAULT_BOUNDARY_M`), e.g. 0.09 m measured from handrails.

    Returns
    -------
    float
        Effective width We = width - 2 x boundary [m], > 0.

    Raises
    ------
    ValueError
        Unknown element type, or no effective width left.

    References
    ----------
    Gwynne, S. M. V., Rosenbaum, E. R. (2016). SFPE Handbook of Fire Protection
    Engineering, 5th ed., ch. 59, boundary layer table (from memory).

    Examples
    --------
    >>> round(effective_width(1.0, "door"), 3)
    0.7
    """
    _check_type(element_type)
    b = DEFAULT_BOUNDARY_M[element_type] if boundary_m is None else float(boundary_m)
    if not math.isfinite(b) or b < 0:
        raise ValueError(f"boundary layer must be a number >= 0 m, got {boundary_m!r}")
    w = float(width_m)
    if not math.isfinite(w) or w <= 0:
        raise ValueError(f"{element_type} width must be positive, got {width_m!r} m")
    we = w - 2.0 * b
    if we <= 0:
        raise ValueError(
            f"width {w:g} m leaves no effective width after 2 x {b:g} m boundary layers"
        )
    return we


def select_stair_row(riser_m: float, tread_m: float) -> dict[str, Any]:
    """Choose the row of the stair table to use for a stair's riser and tread.

    Parameters
    ----------
    riser_m, tread_m : float
        Riser height and tread depth [m], > 0.

    Returns
    -------
    dict
        The row's ``riser_m``, ``tread_m``, ``k`` [m/s] and ``fsm``
        [persons/(s m)], plus ``exact`` (bool) and ``notes`` (list of str, empty for
        an exact match).

    Notes
    -----
    Rule, conservative by steepness (steeper stairs are slower and carry less):

    1. A stair whose riser and tread are each within 1 mm of a row (the inch
       dimensions rounded to millimetres) uses that row.
    2. Otherwise, with steepness r = riser/tread, use the least steep row whose
       r is >= the stair's r: the nearest row that is no less steep.
    3. A stair steeper than every row uses the steepest row (191/254 mm), with a
       note that the stair lies outside the table.

    Examples
    --------
    >>> select_stair_row(0.170, 0.290)["riser_m"], select_stair_row(0.170, 0.290)["k"]
    (0.178, 1.08)
    """
    riser, tread = float(riser_m), float(tread_m)
    if not (math.isfinite(riser) and math.isfinite(tread) and riser > 0 and tread > 0):
        raise ValueError(
            f"stair riser and tread must be positive, got {riser_m!r} m and {tread_m!r} m"
        )
    for row in STAIR_ROWS:
        if (
            abs(row["riser_m"] - riser) <= _ROW_TOLERANCE_M
            and abs(row["tread_m"] - tread) <= _ROW_TOLERANCE_M
        ):
            return {**row, "exact": True, "notes": []}
    ratio = riser / tread
    given = f"stair {riser * 1000:.0f}/{tread * 1000:.0f} mm (riser/tread {ratio:.3f})"
    steeper = [row for row in STAIR_ROWS if row["riser_m"] / row["tread_m"] >= ratio]
    if steeper:
        row = min(steeper, key=lambda r: r["riser_m"] / r["tread_m"])
        note = (
            f"{given} is not a row of the stair table; using the nearest row that is "
            f"no less steep, {_row_name(row)}"
        )
    else:
        row = max(STAIR_ROWS, key=lambda r: r["riser_m"] / r["tread_m"])
        note = (
            f"{given} is steeper than every row of the stair table; using the steepest "
            f"row, {_row_name(row)}, which may overstate speed and flow"
        )
    return {**row, "exact": False, "notes": [note]}


def _row_name(row: dict[str, float]) -> str:
    return (
        f"{row['riser_m'] * 1000:.0f}/{row['tread_m'] * 1000:.0f} mm "
        f"(riser/tread {row['riser_m'] / row['tread_m']:.3f}, k = {row['k']:.2f} m/s, "
        f"Fsm = {row['fsm']:.2f} persons/(s m))"
    )


def _check_type(element_type: Any) -> None:
    if element_type not in ELEMENT_TYPES:
        hint = difflib.get_close_matches(str(element_type), ELEMENT_TYPES, n=1)
        tail = f"; did you mean '{hint[0]}'?" if hint else ""
        raise ValueError(
            f"unknown path element type '{element_type}'; expected one of: "
            f"{', '.join(ELEMENT_TYPES)}{tail}"
        )


def element_properties(element: dict[str, Any]) -> dict[str, Any]:
    """Speed, effective width and flow capacity of one path element.

    Parameters
    ----------
    element : dict
        ``{"type": "corridor" | "door" | "stair" | "ramp", "length_m": float,
        "width_m": float, "riser_m": float, "tread_m": float,
        "boundary_m": float | None}``. ``length_m`` [m] is the travel distance along
        the line of travel (for a stair, along its slope including landings; 0 or
        absent for a door); ``riser_m`` and ``tread_m`` [m] are required for stairs
        only; ``boundary_m`` [m] overrides the default boundary layer per side.

    Returns
    -------
    dict
        ``type``; ``length_m`` [m]; ``k`` [m/s]; ``unimpeded_speed_m_s`` [m/s];
        ``boundary_m`` [m]; ``effective_width_m`` [m]; ``max_specific_flow``
        [persons/(s m)]; ``capacity_p_s`` [persons/s] = Fsm x We;
        ``stair_row`` ((riser_m, tread_m) of the table row used, or None);
        ``notes`` (list of str for the report).

    Notes
    -----
    Flow capacity Fc = Fsm We (SFPE Handbook ch. 59, calculated flow equation, from
    memory), with Fsm = 1.3 persons/(s m) for corridors, ramps and doors and the
    stair row's value for stairs.

    Examples
    --------
    >>> p = element_properties({"type": "door", "width_m": 1.0})
    >>> round(p["capacity_p_s"], 3)
    0.91
    """
    if not isinstance(element, dict):
        raise ValueError(f"a path element must be a mapping, got {element!r}")
    kind = element.get("type")
    _check_type(kind)
    length = element.get("length_m", 0.0)
    length = 0.0 if length is None else float(length)
    if not math.isfinite(length) or length < 0:
        raise ValueError(f"{kind} length must be >= 0 m, got {element.get('length_m')!r}")
    if "width_m" not in element or element["width_m"] is None:
        raise ValueError(f"{kind} needs a width")
    boundary = element.get("boundary_m")
    we = effective_width(element["width_m"], kind, boundary)
    notes: list[str] = []
    stair_row = None
    if kind == "stair":
        missing = [key for key in ("riser_m", "tread_m") if element.get(key) is None]
        if missing:
            raise ValueError(
                f"stair needs {' and '.join(key.replace('_m', '') for key in missing)} "
                "to choose its speed and flow (e.g. riser 178 mm, tread 279 mm)"
            )
        row = select_stair_row(element["riser_m"], element["tread_m"])
        k, fsm = row["k"], row["fsm"]
        stair_row = (row["riser_m"], row["tread_m"])
        notes.extend(row["notes"])
    else:
        k, fsm = K_LEVEL_M_S[kind], FSM_LEVEL_P_S_M
    return {
        "type": kind,
        "length_m": length,
        "k": k,
        "unimpeded_speed_m_s": unimpeded_speed(k),
        "boundary_m": DEFAULT_BOUNDARY_M[kind] if boundary is None else float(boundary),
        "effective_width_m": we,
        "max_specific_flow": fsm,
        "capacity_p_s": fsm * we,
        "stair_row": stair_row,
        "notes": notes,
    }


@dataclass(frozen=True)
class MovementTime:
    """Result of :func:`movement_time`.

    Times are floats when every input was a scalar, else arrays of the broadcast
    shape of ``occupants``, ``speed_factor`` and ``flow_factor``.

    Attributes
    ----------
    travel_s : float or numpy.ndarray
        Walking time of the whole path at the hand method's speeds [s]
        (:func:`hand_speeds`).
    flow_s : float or numpy.ndarray
        Time for all occupants to pass the controlling element [s].
    total_s : float or numpy.ndarray
        Movement time [s]: travel + flow.
    controlling : int
        Index of the element of least flow capacity (the first if tied).
    capacities_p_s : numpy.ndarray
        Flow capacity of each element [persons/s], shape (E,), before flow_factor.
    speeds_m_s : numpy.ndarray
        Speed on each element [m/s] (:func:`hand_speeds`), shape (E,) + the
        broadcast shape of the inputs, before speed_factor.
    elements : list of dict
        :func:`element_properties` of each element.
    notes : list of str
        Notes for the report (e.g. a stair that is not a table row).
    """

    travel_s: Any
    flow_s: Any
    total_s: Any
    controlling: int
    capacities_p_s: np.ndarray
    speeds_m_s: np.ndarray
    elements: list[dict[str, Any]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def _scalar_or_array(x: np.ndarray) -> Any:
    return float(x) if x.ndim == 0 else x


def movement_time(
    elements: list[dict[str, Any]],
    occupants,
    speed_factor=1.0,
    flow_factor=1.0,
) -> MovementTime:
    """Time for a route's occupants to walk its path and pass its narrowest element.

    Parameters
    ----------
    elements : list of dict
        Path elements in order, each as in :func:`element_properties`.
    occupants : float or array_like
        Number of people using the route [persons], > 0; scalar or shape (S,).
    speed_factor : float or array_like
        Multiplier on every element's unimpeded speed [-], > 0; scalar or (S,).
    flow_factor : float or array_like
        Multiplier on every element's flow capacity [-], > 0; scalar or (S,).
        Default 1 (the handbook capacities).

    Returns
    -------
    MovementTime
        Travel, flow and total times [s] and the per-element values.

    Notes
    -----
    With elements i of length L_i, flow capacity Fc_i = Fsm_i We_i and the controlling
    element c of least capacity:

        t_travel = sum_(i < c) L_i / (f_speed v0_i) + sum_(i >= c) L_i / (f_speed v_i)
        t_flow   = N / (f_flow Fc_c)
        t_move   = t_travel + t_flow

    v0_i = 0.85 k_i is the unimpeded speed (upstream of the controlling element, where
    its queue absorbs the crowd); v_i is the speed at the density with which element
    i carries the controlling flow (:func:`hand_speeds`: transitions pass the flow
    on, an element at capacity has D = 1/(2a), a group too small to reach 0.54
    persons/m^2 walks unimpeded). This is the hand form of the hydraulic model; the
    run computes movement with the flow model (:mod:`egressmargin.egress.flow`), which
    gives exactly this sum for one route when everyone starts together (tested in
    ``tests/test_hand_vs_flow.py``).

    References
    ----------
    Gwynne, S. M. V., Rosenbaum, E. R. (2016). Employing the hydraulic model in
    assessing emergency movement. SFPE Handbook of Fire Protection Engineering,
    5th ed., ch. 59 (constants from memory).

    Examples
    --------
    200 people, a 30 m corridor 2.0 m wide, then a 0.9 m door: the door carries
    1.3 x (0.9 - 0.3) = 0.78 persons/s, flow 256.4 s; travel 30/1.19 = 25.2 s
    (the corridor is upstream of the door, which controls).

    >>> path = [{"type": "corridor", "length_m": 30.0, "width_m": 2.0},
    ...         {"type": "door", "width_m": 0.9}]
    >>> round(movement_time(path, 200).total_s, 1)
    281.6
    """
    if not elements:
        raise ValueError("a route needs at least one path element")
    props = []
    for i, element in enumerate(elements):
        try:
            props.append(element_properties(element))
        except ValueError as exc:
            raise ValueError(f"path element {i + 1}: {exc}") from None
    occ = np.asarray(occupants, dtype=float)
    if np.any(~(occ > 0)) or np.any(~np.isfinite(occ)):
        raise ValueError(f"occupants must be a positive number of persons, got {occupants!r}")
    f_speed = np.asarray(speed_factor, dtype=float)
    f_flow = np.asarray(flow_factor, dtype=float)
    if np.any(~(f_speed > 0)) or np.any(~np.isfinite(f_speed)):
        raise ValueError("speed_factor must be positive")
    if np.any(~(f_flow > 0)) or np.any(~np.isfinite(f_flow)):
        raise ValueError("flow_factor must be positive")

    lengths = np.array([p["length_m"] for p in props])
    capacities = np.array([p["capacity_p_s"] for p in props])
    controlling = int(np.argmin(capacities))

    occ, f_speed, f_flow = np.broadcast_arrays(occ, f_speed, f_flow)
    speeds, _ = hand_speeds(props, occ)
    travel = np.sum(lengths.reshape((-1,) + (1,) * occ.ndim) / speeds, axis=0) / f_speed
    flow = occ / (f_flow * capacities[controlling])
    total = travel + flow
    notes = [f"path element {i + 1}: {n}" for i, p in enumerate(props) for n in p["notes"]]
    return MovementTime(
        travel_s=_scalar_or_array(np.asarray(travel)),
        flow_s=_scalar_or_array(np.asarray(flow)),
        total_s=_scalar_or_array(np.asarray(total)),
        controlling=controlling,
        capacities_p_s=capacities,
        speeds_m_s=speeds,
        elements=props,
        notes=notes,
    )
