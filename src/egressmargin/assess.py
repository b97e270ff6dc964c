"""ASET against RSET per escape route: per-draw ASET, RSET and margin (the verdict is
:mod:`egressmargin.verdict`'s), dose along the route, and one-at-a-time sensitivity.

Pure computation on arrays prepared by :mod:`egressmargin.aset` and the egress
package; the pipeline decides what to run and writes the results.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from . import aset
from .criteria import CriteriaSet
from .egress import distributions as dist
from .egress.detection import rti_response
from .egress.flow import NetElement, NetRoute, NodeFlow, RouteFlow, quantile_positions, simulate
from .egress.movement import element_properties, movement_time
from .egress.placement import element_places
from .egress.rset import compose_rset
from .exposure import Stay, occupants_json     # a Stay of the last occupant: arrays (S,)
from .stats import rounded, share, summarise
from .study import DetectorRule, RouteSpec
from .tenability.crossing import crossing_times_for_levels

#: Occupant count and walking speed are swept by +/-10 % in the sensitivity study
#: (the issue's choice; common practice for a one-at-a-time screen).
SWEEP_FRACTION = 0.10
#: Percentiles between which each uncertain input is swept (5th and 95th).
SWEEP_LOW, SWEEP_HIGH = 0.05, 0.95
#: Detection, alarm and pre-movement given as fixed values are swept by +/-20 % of their
#: value (a detector rule: its threshold, see :func:`sweep_settings`) as a declared
#: what-if range, not a measured spread (project choice, issue 21: the RSET phases that
#: carry the largest assumptions are never left out of the one-at-a-time chart).
WHAT_IF_FRACTION = 0.20
#: The ``kind`` of a sensitivity row: a declared distribution (or model-error table row)
#: swept between its p05 and p95, or a what-if range on a fixed value.
DISTRIBUTION, WHAT_IF = "distribution", "what-if"


#: Uncertain parameters of a distribution that can have their own draws (each a stream).
_PARAMETER_NAMES = ("median", "p95", "mean", "sd", "low", "mode", "high")


@dataclass
class EgressDraws:
    """Uniform numbers for a route's uncertain egress inputs (common random numbers).

    ``detection``, ``alarm`` and ``premovement`` are the original streams (unchanged so
    that earlier studies draw the same times); the movement inputs and uncertain
    distribution parameters have streams of their own. None: the median (0.5).
    """

    detection: np.ndarray
    alarm: np.ndarray
    premovement: np.ndarray
    occupants: np.ndarray | None = None
    flow_factor: np.ndarray | None = None
    speed_factor: np.ndarray | None = None
    parameters: dict = field(default_factory=dict)

    @classmethod
    def median(cls, S: int = 1) -> "EgressDraws":
        half = np.full(S, 0.5)
        return cls(half, half, half)


#: Entropy word that keeps the egress streams apart from the model-error streams, which
#: are seeded with (seed, scenario index) (project choice: any fixed number not used as a
#: scenario index; changing it changes every egress draw).
EGRESS_STREAM_TAG = 7919


def egress_uniforms(seed: int, route_index: int, S: int) -> EgressDraws:
    """Per-route uniform streams, independent of the scenario so every scenario sees the same people."""
    rng = np.random.default_rng([seed, EGRESS_STREAM_TAG, route_index])
    base = (rng.random(S), rng.random(S), rng.random(S))
    more = [np.random.default_rng([seed, EGRESS_STREAM_TAG, route_index, k]).random(S) for k in (1, 2, 3)]
    params = {name: np.random.default_rng([seed, EGRESS_STREAM_TAG, route_index, 10 + j]).random(S)
              for j, name in enumerate(_PARAMETER_NAMES)}
    return EgressDraws(*base, *more, parameters=params)


def detection_times(rule, prep: aset.Prepared, factors: dict[str, np.ndarray], u: np.ndarray,
                    scale=1.0) -> np.ndarray:
    """Detection time [s] per sample: fixed, a distribution, or a rule on a location's series.

    A rule uses the same temperature or smoke factor of the sample as the ASET, since the
    detector sees the same (corrected) fire. Not activated by the end: +inf. ``scale``
    (a number or one per sample) multiplies a time, or a rule's threshold: the heat
    detector's activation temperature rise above ambient, the smoke detector's
    extinction coefficient (a what-if sweep).
    """
    S = len(u)
    if not isinstance(rule, DetectorRule):
        return dist.ppf(rule, u) * scale
    if hasattr(prep, "member_detection"):        # an ensemble: each draw's detector sees its own member
        return prep.member_detection(rule, factors, u, scale)
    li = prep.ids.index(rule.location)
    with np.errstate(divide="ignore", invalid="ignore"):
        if rule.kind == "heat":
            has_series = prep.velocity is not None and bool(prep.present["velocity"][li])
            vel = prep.velocity[li] if has_series else rule.velocity_m_s   # the series wins
            link = rti_response(prep.t_s, prep.rise[li], vel, rule.rti)
            levels = (rule.activation_c - prep.amb_c[li]) * scale / factors.get("temperature", np.ones(S))
            t = crossing_times_for_levels(prep.t_s, link, levels, "above")
        else:
            key = aset.smoke_factor_key(prep.smoke_kind[li])
            levels = rule.extinction_per_m * scale / factors.get(key, np.ones(S))
            t = crossing_times_for_levels(prep.t_s, prep.extinction[li], levels, "above")
    return np.where(np.isnan(t), np.inf, t)


@dataclass
class RouteInputs:
    """A route's egress inputs for S draws.

    Attributes
    ----------
    detection_s, alarm_s : numpy.ndarray
        (S,) [s]; detection +inf where the fire is never detected.
    premovement_s : numpy.ndarray
        (S, N) pre-movement of each person [s] (NaN beyond the draw's count).
    starts_s : numpy.ndarray
        (S, N) start of movement [s from ignition], ascending; +inf: absent or undetected.
    counts : numpy.ndarray
        (S,) occupants per draw (whole persons, >= 1).
    flow_factor, speed_factor : numpy.ndarray
        (S,) multipliers [-].
    """

    detection_s: np.ndarray
    alarm_s: np.ndarray
    premovement_s: np.ndarray
    starts_s: np.ndarray
    counts: np.ndarray
    flow_factor: np.ndarray
    speed_factor: np.ndarray

    @property
    def last_premovement_s(self) -> np.ndarray:
        return np.take_along_axis(self.premovement_s, (self.counts - 1)[:, None], axis=1)[:, 0]


def _u(stream, S):
    return np.full(S, 0.5) if stream is None else stream


def route_inputs(route: RouteSpec, prep, factors, draws: EgressDraws, scale: dict | None = None) -> RouteInputs:
    """Detection, alarm, occupants, start times and movement factors of a route, per draw.

    An input set by the uniform of its stream in ``draws`` (None: the median); ``scale``
    multiplies ``occupants``, ``flow_factor`` or ``speed_factor`` (a +/-10 % sweep), or
    ``detection`` (a time, or a detector rule's threshold), ``alarm`` or ``premovement``
    (every person's pre-movement: the whole distribution scaled) (a what-if sweep), by a
    number or by one per draw (shape (S,)).

    Notes
    -----
    Occupants from a distribution are rounded to whole persons, at least 1. With
    ``premovement: {across_occupants: F}`` person i of N starts at detection + alarm +
    F^-1((i - 1/2)/N) (:func:`egressmargin.egress.flow.quantile_positions`); with
    ``premovement: F`` everyone starts at detection + alarm + one draw of F.
    """
    sc = scale or {}
    S = len(draws.detection)
    det = detection_times(route.detection, prep, factors, _u(draws.detection, S), sc.get("detection", 1.0))
    alarm = dist.ppf(route.alarm, _u(draws.alarm, S)) * sc.get("alarm", 1.0)
    pre_scale = np.asarray(sc.get("premovement", 1.0), float)
    occ_spec = route.occupants_dist or {"fixed": float(route.occupants)}
    occ = dist.ppf(occ_spec, _u(draws.occupants, S)) * sc.get("occupants", 1.0)
    counts = np.maximum(np.rint(occ), 1).astype(int)
    flow_f = dist.ppf(route.flow_factor, _u(draws.flow_factor, S)) * sc.get("flow_factor", 1.0)
    speed_f = dist.ppf(route.speed_factor, _u(draws.speed_factor, S)) \
        * sc.get("speed_factor", 1.0)
    params = {name: _u(draws.parameters.get(name), S)
              for name in dist.parameter_specs(route.premovement)}
    if route.premovement_across:
        pre = dist.ppf_varying(route.premovement, quantile_positions(counts), params) \
            * (pre_scale[:, None] if pre_scale.ndim else pre_scale)
        with np.errstate(invalid="ignore"):
            starts = (det + alarm)[:, None] + pre
        starts = np.where(np.isnan(starts), np.inf, starts)
    else:
        one = dist.ppf_varying(route.premovement, _u(draws.premovement, S), params) * pre_scale
        present = np.arange(counts.max())[None, :] < counts[:, None]
        pre = np.where(present, one[:, None], np.nan)
        with np.errstate(invalid="ignore"):
            start = (det + alarm) + one             # everyone of a draw starts together
        starts = np.where(present & ~np.isnan(start)[:, None], start[:, None], np.inf)
    return RouteInputs(det, alarm, pre, starts, counts, flow_f, speed_f)


@dataclass
class RouteEgress:
    """Egress of one route in one scenario, per draw: RSET, its parts, and the flow."""

    rset: np.ndarray
    components: dict[str, np.ndarray]
    flow: RouteFlow
    inputs: RouteInputs
    properties: list[dict]
    movement: object


@dataclass
class ScenarioEgress:
    routes: dict[str, RouteEgress]
    nodes: dict[str, NodeFlow]


def _node(route: RouteSpec, i: int, element: dict) -> str:
    return element.get("id") or f"{route.id}#{i + 1}"


def scenario_egress(routes: list[RouteSpec], prep, factors, draws: list[EgressDraws], named: dict | None = None,
                    scale: list[dict] | None = None,
                    width_scale: dict[str, float] | None = None,
                    per_person: bool | None = None) -> ScenarioEgress:
    """RSET of every route of a scenario, routes that share named elements merged.

    ``scale`` is per route (see :func:`route_inputs`); ``width_scale``
    multiplies the effective width (hence capacity) of the named nodes given, by a
    number or by one per draw (shape (S,)). ``per_person``: keep every occupant's
    times in the flow's :class:`egressmargin.egress.flow.ElementPass` (True: every
    route; False: none; None: the routes with ``exposure: along-route``); they cost
    up to S x N x 16 bytes per element (see ElementPass).

    Notes
    -----
    RSET = detection + alarm + pre-movement of the last occupant + movement of the
    last occupant (the phase sum, ISO/TR 16738:2009 -- common practice), where the
    movement comes from the flow model :func:`egressmargin.egress.flow.simulate`.
    """
    named = named or {}
    width_scale = width_scale or {}
    nets, inputs, props = [], [], []
    for k, route in enumerate(routes):
        inp = route_inputs(route, prep, factors, draws[k], (scale or [None] * len(routes))[k])
        pr = [element_properties(e) for e in route.path]
        elements = []
        for i, (e, p) in enumerate(zip(route.path, pr)):
            node = _node(route, i, e)
            f = width_scale.get(node, 1.0)
            elements.append(NetElement(node, p["length_m"], p["k"], p["effective_width_m"] * f,
                                       p["capacity_p_s"] * f))
        nets.append(NetRoute(route.id, inp.starts_s, inp.counts, tuple(elements), inp.flow_factor,
                             inp.speed_factor))
        inputs.append(inp)
        props.append(pr)
    keep = {r.id for r in routes if r.along_route} if per_person is None else per_person
    flows, nodes = simulate(nets, {eid: el.upstream for eid, el in named.items()}, per_person=keep)
    out = {}
    for route, inp, pr in zip(routes, inputs, props):
        fl = flows[route.id]
        pre_last = inp.last_premovement_s
        start_last = inp.detection_s + inp.alarm_s + pre_last
        with np.errstate(invalid="ignore"):
            move = np.where(np.isfinite(start_last), fl.exit_s - start_last, np.nan)
        move = np.where(np.isfinite(start_last), move, np.inf)
        total, parts = compose_rset(inp.detection_s, inp.alarm_s, pre_last, move)
        mv = movement_time(route.path, route.occupants)
        mv = replace(mv, notes=[*mv.notes, "travel and flow times here are the hand form for checking (travel at "
                                "the hand method's speeds + nominal occupants / least capacity), which the flow "
                                "model gives when everyone starts together; the RSET uses the flow model (queues, "
                                "shared elements, start times across occupants)"])
        out[route.id] = RouteEgress(total, {"detection": parts["detection_s"], "alarm": parts["alarm_s"],
                                            "premovement": parts["premovement_s"],
                                            "movement": parts["movement_s"]}, fl, inp, pr, mv)
    return ScenarioEgress(out, nodes)


@dataclass
class RouteOutcome:
    rset: np.ndarray
    components: dict[str, np.ndarray]
    movement: object
    aset: np.ndarray
    aset_raw: float
    governing_location: str | None
    governing_criterion: str | None
    margin: np.ndarray
    extras: dict = field(default_factory=dict)


def route_aset(loc_aset: np.ndarray, ids: list[str], exposed: list[str]) -> np.ndarray:
    """(S,) route ASET: the earliest of its exposed locations, sample by sample."""
    rows = [ids.index(x) for x in exposed]
    return loc_aset[rows].min(axis=0)


def outcome(route: RouteSpec, prep, loc_aset, loc_aset_raw, governing_raw, egress: RouteEgress) -> RouteOutcome:
    rset, comps, mv = egress.rset, egress.components, egress.movement
    a = route_aset(loc_aset, prep.ids, route.exposed_at)
    rows = [prep.ids.index(x) for x in route.exposed_at]
    raw_vals = loc_aset_raw[rows]
    j = int(np.argmin(raw_vals))
    aset_raw = float(raw_vals[j])
    with np.errstate(invalid="ignore"):
        margin = a - rset
    # governing location: the exposed location with the earliest median ASET
    med = [np.median(np.where(np.isfinite(loc_aset[r]), loc_aset[r], np.inf)) for r in rows]
    g = int(np.argmin(med))
    return RouteOutcome(rset, comps, mv, a, aset_raw, route.exposed_at[g] if np.isfinite(med[g]) else None,
                        governing_raw[rows[g]] if np.isfinite(med[g]) else None, margin,
                        {"location_aware": location_aware(route, egress, loc_aset, prep.ids)})


#: How the occupants block is computed, in words (results.json ``along_route.occupants_note``).
OCCUPANTS_NOTE = (
    "Every occupant is followed through the locations their path visits (start_at until they start, then at each "
    "element its queue location from reaching it to passing it and its walk location until leaving it), with the "
    "times of the flow model; each person's own dose is accumulated per component (Purser's 'or' on the person's "
    "own FED_IN and CO2-narcosis doses). Limits that are not doses count where any part of a person's stay overlaps "
    "a time the location is beyond the limit. An occupant still inside when the histories end who has not reached "
    "the limit counts as exceeding it (conditions after the end are unknown), and that draw's maximum is not given.")


# ----------------------------------------------------------------------------------------
# where the occupants are: location history, location-aware comparison, dose along the route
# ----------------------------------------------------------------------------------------

def element_locations(route: RouteSpec) -> list[tuple[str, str]]:
    """Location of each path element and how it was found ("at" or "assigned").

    The walking location of :func:`egressmargin.egress.placement.element_places`
    (given by the element's ``at``, else its nearest placed neighbour in path order,
    else by distance along ``exposed_at``).
    """
    return [(p.walk, "at" if p.given else "assigned") for p in element_places(route)]


def location_history(route: RouteSpec, egress: RouteEgress) -> list[Stay]:
    """The last occupant's location-time history: start_at, then each element.

    At ``start_at`` (if given) from ignition until the last occupant starts to move;
    then, for each element, waiting at its entry in the location before it (from
    reaching the entry to passing it) and walking it at its own location (from
    passing the entry to leaving the element), as placed by
    :func:`egressmargin.egress.placement.element_places`; where both locations are
    the same, one stay from reaching the entry to leaving
    (:class:`egressmargin.egress.flow.ElementPass`).
    """
    S = egress.rset.shape[0]
    out = []
    start = egress.inputs.detection_s + egress.inputs.alarm_s + egress.inputs.last_premovement_s
    if route.start_at:
        out.append(Stay(route.start_at, "before moving", np.zeros(S), start))
    for i, (place, ep) in enumerate(zip(element_places(route), egress.flow.elements)):
        what = f"path element {i + 1} ({route.path[i]['type']})"
        if place.queue == place.walk:
            out.append(Stay(place.walk, what, ep.arrive_s, ep.leave_s))
        else:
            out.append(Stay(place.queue, f"waiting to enter {what}", ep.arrive_s, ep.pass_s))
            out.append(Stay(place.walk, what, ep.pass_s, ep.leave_s))
    return out


@dataclass
class LocationAware:
    """Per-draw comparison of each location's ASET with when the last occupant leaves it.

    Attributes
    ----------
    locations : list of str
        Locations of the history, in order of first visit.
    aset_s, leave_s : numpy.ndarray
        (L, S) location ASET and the time the last occupant leaves it [s].
    binding : numpy.ndarray
        (S,) index of the binding location: least ASET - leave (where no location's
        ASET is reached, the one left last).
    aset_binding_s, leave_binding_s : numpy.ndarray
        (S,) ASET and leaving time at the binding location: the pair the verdict
        compares (fail where ASET < leave).
    margin_s : numpy.ndarray
        (S,) min over locations of ASET - leave (inf: no limit reached anywhere).
    """

    locations: list[str]
    aset_s: np.ndarray
    leave_s: np.ndarray
    binding: np.ndarray
    aset_binding_s: np.ndarray
    leave_binding_s: np.ndarray
    margin_s: np.ndarray


def location_aware(route: RouteSpec, egress: RouteEgress, loc_aset: np.ndarray, ids: list[str]) -> LocationAware:
    """The route fails for its occupants only where and while they are there.

    For each location l of the last occupant's history, with T_l the time the last
    occupant leaves it, a draw fails at l when ASET_l < T_l (the limit is reached
    before the last person has left, including before they arrive). The route's
    margin in a draw is min_l (ASET_l - T_l).
    """
    history = location_history(route, egress)
    locs = list(dict.fromkeys(h.location for h in history))
    leave = np.stack([np.max(np.stack([h.t_out for h in history if h.location == loc]), axis=0) for loc in locs])
    a = np.stack([loc_aset[ids.index(loc)] for loc in locs])
    with np.errstate(invalid="ignore"):
        m = a - leave
    key = np.where(np.isnan(m), np.inf, m)
    none_reached = np.all(np.isinf(key) & (key > 0), axis=0)
    binding = np.where(none_reached, np.argmax(leave, axis=0), np.argmin(key, axis=0))
    cols = np.arange(a.shape[1])
    return LocationAware(locs, a, leave, binding, a[binding, cols], leave[binding, cols], np.min(key, axis=0))


def along_route_dose(route: RouteSpec, prep, criteria: CriteriaSet, factors, S: int, egress: RouteEgress,
                     exposure) -> dict:
    """Dose received on the way out, per dose criterion: the last occupant's and every occupant's.

    The last occupant's stays follow :func:`location_history`: at ``start_at`` during
    detection, alarm and pre-movement, then at each element's locations while waiting to
    enter it and walking it. The doses come from ``exposure``
    (:class:`egressmargin.exposure.OccupantExposure`, every person's own doses: Purser's
    "or" on the person's own two doses): every dose criterion of the set is listed
    (hypoxia included), each with the last occupant's percentiles and the ``occupants``
    block; the instantaneous limits met while present are listed under ``instantaneous``.
    ``factors`` and ``S`` are the draws the exposure was computed on.

    Where the last occupant is still inside when the histories end and the limit is not yet
    reached, the dose is not determined (conditions after the end are unknown): such draws
    count as exceeding in ``exceeds_p`` (the conservative reading) and make the percentiles
    they touch null, never a dose that looks within the limit.
    """
    history = location_history(route, egress)
    exit_t = egress.flow.exit_s
    locs = list(dict.fromkeys(h.location for h in history))
    rows = np.array([prep.ids.index(x) for x in locs])
    end = prep.t_s[-1]
    out = {}
    for cid in aset.DOSE_CRITERIA:
        c = criteria.items.get(cid)
        if c is None:
            continue
        ok, _ = aset.status(prep, c)
        if not ok[rows].any():
            out[cid] = {"status": "not assessed", "limit": c.limit}
            continue
        ce = exposure.criteria[cid]
        dose, undetermined = ce.last, ce.last_undetermined
        summary = summarise(np.where(undetermined, np.nan, dose), 4)
        exceeds = dose >= c.limit
        out[cid] = {"status": "assessed", "limit": c.limit, **summary,
                    "exceeds_p": share(exceeds | undetermined),
                    "exceeds_p_bounds": {"low": share(exceeds), "high": share(exceeds | undetermined)},
                    "share_undetermined": share(undetermined),
                    "within_limit_at_p95": summary["p95"] is not None and summary["p95"] < c.limit,
                    "occupants": occupants_json(ce, exposure, egress.rset)}
    if exposure.end_each_s is not None:
        end = exposure.end_each_s            # an ensemble: each draw's own member's end
    beyond = share(exit_t > end)
    placed = element_places(route)
    extra = {"instantaneous": {
        cid: ({"status": "assessed", "limit": ce.limit, "occupants": occupants_json(ce, exposure, egress.rset)}
              if ce.assessed else {"status": "not assessed", "limit": ce.limit})
        for cid, ce in exposure.criteria.items() if ce.kind == "instant"}, "occupants_note": OCCUPANTS_NOTE}
    return {"criteria": out, **extra, "last_occupant_exit_s": summarise(exit_t, 1),
            "share_beyond_end": beyond,
            "history": [{"location": h.location, "what": h.what, "from_s": summarise(h.t_in, 1),
                         "to_s": summarise(h.t_out, 1)} for h in history],
            "assumptions": [
                ("The last occupant is at " + f"'{route.start_at}'" + " from ignition until they start moving "
                 "(detection + alarm + their pre-movement).") if route.start_at else
                "No start_at location: no dose is counted before the last occupant starts moving.",
                "At each path element the last occupant queues at its entry and then walks it, at the speed of the "
                "flow model (crowd speed from the controlling element on); the queue is charged to the location "
                "before the element (start_at for the first), the walk to the element's own location.",
                "Element locations: " + "; ".join(
                    f"{i + 1} {route.path[i]['type']} at '{p.walk}' ({p.how}), queue at '{p.queue}'"
                    for i, p in enumerate(placed)) + ".",
                "Doses accrue only while the occupant is at a location. Where the last occupant is still inside "
                "when the histories end and the limit has not been reached, the dose is not determined: such "
                "draws count as exceeding the limit and their percentiles are not given"
                + (f" (this affects {beyond:.0%} of draws)" if beyond > 0 else "") + ".",
            ]}


# ----------------------------------------------------------------------------------------
# sensitivity
# ----------------------------------------------------------------------------------------

def factor_sweep_rows(factor_ppfs: dict) -> tuple[dict[str, np.ndarray], list[tuple[str, int, int]]]:
    """Factor rows: row 0 all medians; then for each uncertain input a low and a high row.

    ``factor_ppfs`` maps an input name (a table row) to ``(inverse CDF, factor keys)``; the
    factor keys of one input move together, as they share one draw in the Monte Carlo.
    Returns the factor arrays by factor key and (input name, low row, high row) per input.
    """
    names = [n for n, (f, _) in factor_ppfs.items() if abs(float(f(SWEEP_HIGH)) - float(f(SWEEP_LOW))) > 0]
    R = 1 + 2 * len(names)
    rows = {k: np.full(R, float(f(0.5))) for f, keys in factor_ppfs.values() for k in keys}
    index = []
    for i, n in enumerate(names):
        f, keys = factor_ppfs[n]
        for k in keys:
            rows[k][1 + 2 * i] = float(f(SWEEP_LOW))
            rows[k][2 + 2 * i] = float(f(SWEEP_HIGH))
        index.append((n, 1 + 2 * i, 2 + 2 * i))
    return rows, index


@dataclass(frozen=True)
class SweepSetting:
    """One row of a route's sensitivity table: an egress input at its low and its high value.

    Attributes
    ----------
    label, low_name, high_name : str
        The input's name in the table and the names of its two settings.
    kind : str
        "quantile": ``key`` is an input of :func:`route_inputs` (or
        ``premovement.<parameter>``) and ``low``/``high`` its uniforms [-]; "scale":
        ``key`` is occupants, flow_factor, speed_factor, detection, alarm or premovement
        and ``low``/``high`` multipliers [-]; "width": ``key`` is a path node and
        ``low``/``high`` multipliers of its effective width [-].
    basis : str
        :data:`DISTRIBUTION` (a declared distribution swept p05-p95) or :data:`WHAT_IF`
        (a fixed value swept by a declared what-if range: not a measured spread).
    """

    label: str
    low_name: str
    high_name: str
    kind: str
    key: str
    low: float
    high: float
    basis: str = DISTRIBUTION


def _what_if(label: str, key: str, fraction: float, kind: str = "scale") -> SweepSetting:
    pct = f"{fraction * 100:.0f} %"
    return SweepSetting(label, f"-{pct}", f"+{pct}", kind, key, 1 - fraction, 1 + fraction, WHAT_IF)


def _movement_inputs(route: RouteSpec) -> list[tuple[str, str, object]]:
    """(label, stream key, specification) of the movement inputs: occupant count, walking speed, flow."""
    return [("occupant count", "occupants", route.occupants_dist or {"fixed": 1.0}),
            ("walking speed", "speed_factor", route.speed_factor),
            ("flow capacity", "flow_factor", route.flow_factor)]


def uncertain_egress_inputs(route: RouteSpec) -> list[tuple[str, str]]:
    """(label, stream key) of each of the route's egress inputs given as a distribution, in a
    fixed order: detection and alarm times (a detector rule is not one), pre-movement (one time
    for everyone) and each uncertain parameter of it (``premovement.<parameter>``), occupant
    count, walking speed, flow capacity. The inputs the one-at-a-time sweep moves p05-p95
    (:func:`sweep_settings`) and the Sobol' design's egress columns
    (:func:`egressmargin.sensitivity_indices.uncertain_inputs`)."""
    out = []
    for name, spec in (("detection", route.detection), ("alarm", route.alarm)):
        if not isinstance(spec, DetectorRule) and not dist.is_fixed(spec):
            out.append((f"{name} time", name))
    params = dist.parameter_specs(route.premovement)
    plain = dist.with_parameters(route.premovement, {p: dist.median(sub) for p, sub in params.items()})
    if not route.premovement_across and not dist.is_fixed(plain):
        out.append(("premovement time", "premovement"))
    out += [(f"premovement {p}", f"premovement.{p}") for p, sub in params.items() if not dist.is_fixed(sub)]
    out += [(label, key) for label, key, spec in _movement_inputs(route) if not dist.is_fixed(spec)]
    return out


def sweep_settings(route: RouteSpec) -> list[SweepSetting]:
    """The route's egress inputs swept one at a time, in the table's order before sorting.

    Every RSET phase is swept, whether uncertain or not. Uncertain inputs (a declared
    distribution, or an uncertain parameter of one) are swept between their 5th and
    95th percentiles. Fixed values are swept by a what-if range: detection, alarm and
    pre-movement by +/-20 % (:data:`WHAT_IF_FRACTION`; a smoke detector rule by its
    extinction-coefficient threshold, a heat detector rule by its activation
    temperature rise above ambient; pre-movement spread across the occupants with fixed
    parameters by the whole distribution scaled); occupant count, walking speed and flow
    capacity, and the effective width of the route's controlling element, by +/-10 %
    (:data:`SWEEP_FRACTION`).
    """
    swept = uncertain_egress_inputs(route)
    keys = {key for _, key in swept}
    what_if = []
    for name, spec in (("detection", route.detection), ("alarm", route.alarm)):
        if isinstance(spec, DetectorRule):
            what_if.append(_what_if("smoke detector threshold (extinction coefficient)" if spec.kind == "smoke"
                                    else "heat detector activation (temperature rise above ambient)",
                                    name, WHAT_IF_FRACTION))
        elif name not in keys:
            what_if.append(_what_if(f"{name} time", name, WHAT_IF_FRACTION))
    if not any(key == "premovement" or key.startswith("premovement.") for key in keys):
        what_if.append(_what_if("premovement across occupants (scaled)" if route.premovement_across   # fixed
                                else "premovement time", "premovement", WHAT_IF_FRACTION))
    scaled = [_what_if(label, key, SWEEP_FRACTION) for label, key, spec in _movement_inputs(route)
              if dist.is_fixed(spec)]
    ctrl = int(np.argmin([element_properties(e)["capacity_p_s"] for e in route.path]))
    width = _what_if(f"effective width of element {ctrl + 1} ({route.path[ctrl]['type']})",
                     _node(route, ctrl, route.path[ctrl]), SWEEP_FRACTION, "width")
    return [*scaled, *what_if, *(SweepSetting(label, "p05", "p95", "quantile", key, SWEEP_LOW, SWEEP_HIGH)
                                 for label, key in swept), width]


#: The uniform streams of :class:`EgressDraws` a sweep can set (besides the parameters).
_STREAMS = ("detection", "alarm", "premovement", "occupants", "flow_factor", "speed_factor")
#: The inputs of :func:`route_inputs` a sweep can multiply.
_SCALED = ("occupants", "flow_factor", "speed_factor", "detection", "alarm", "premovement")


def scenario_sensitivity(routes: list[RouteSpec], prep, sweep_factors, sweep_index, sweep_loc_aset, labels: dict,
                         named: dict | None = None) -> dict[str, list[dict]]:
    """One-at-a-time swing of each route's margin (at median inputs) for each uncertain input.

    Parameters
    ----------
    routes : list of RouteSpec
        Every route of the scenario: they are evaluated together (they may share
        elements).
    sweep_factors, sweep_index, sweep_loc_aset
        Model-error factor rows of :func:`factor_sweep_rows` (row 0 all medians) and
        the location ASETs [s] they give, shape (locations, rows).
    labels : dict
        Table words for the factor rows.
    named : dict, optional
        The study's named (shared) elements.

    Returns
    -------
    dict
        Route id -> the rows of its sensitivity table, largest swing first.

    Notes
    -----
    Every setting is a row (a draw) of one flow run of the whole scenario: the factor
    rows with all egress inputs at their medians, then two rows per
    :func:`sweep_settings` entry of each route, in which only that route's input
    moves (everything else at the median factors and medians). The flow model treats
    draws independently, so this equals running the settings one at a time. Where no
    limit is reached before the histories end, the margin is at least the time left:
    the end time stands for the ASET, and the margins are flagged as lower bounds.
    """
    R0 = len(next(iter(sweep_factors.values()))) if sweep_factors else 1
    settings = {k: sweep_settings(route) for k, route in enumerate(routes)}
    R = R0 + 2 * sum(len(v) for v in settings.values())
    factors = {key: np.concatenate([v, np.full(R - R0, v[0])]) for key, v in sweep_factors.items()}
    streams = [{name: np.full(R, 0.5) for name in (*_STREAMS, *(f"premovement.{p}" for p in _PARAMETER_NAMES))}
               for _ in routes]
    scales = [{key: np.ones(R) for key in _SCALED} for _ in routes]
    widths: dict[str, np.ndarray] = {}
    first_row: dict[int, list[int]] = {}
    row = R0
    for k, ss in settings.items():
        first_row[k] = []
        for st in ss:
            target = (streams[k][st.key] if st.kind == "quantile" else scales[k][st.key] if st.kind == "scale"
                      else widths.setdefault(st.key, np.ones(R)))
            target[row], target[row + 1] = st.low, st.high
            first_row[k].append(row)
            row += 2
    draws = [EgressDraws(*(st[name] for name in _STREAMS),
                         parameters={p: st[f"premovement.{p}"] for p in _PARAMETER_NAMES}) for st in streams]
    eg = scenario_egress(routes, prep, factors, draws, named, scale=scales, width_scale=widths, per_person=False)
    out = {}
    for k in settings:
        route = routes[k]
        rset = eg.routes[route.id].rset
        a = route_aset(sweep_loc_aset, prep.ids, route.exposed_at)
        censored = ~np.isfinite(a)
        a = np.where(censored, prep.t_s[-1], a)
        margin = a - rset[:R0]
        rows = [_swing(labels.get(key, key), "p05", "p95", margin[lo], margin[hi]) for key, lo, hi in sweep_index]
        a0 = float(a[0])
        rows += [_swing(st.label, st.low_name, st.high_name, a0 - float(rset[r]), a0 - float(rset[r + 1]), st.basis)
                 for st, r in zip(settings[k], first_row[k])]
        rows.sort(key=lambda r: -(r["swing_s"] if r["swing_s"] is not None else np.inf))
        out[route.id] = [dict(r, base_margin_s=rounded(margin[0], 2), lower_bound=bool(censored.any())) for r in rows]
    return out


def _swing(name, low, high, m_low, m_high, kind: str = DISTRIBUTION) -> dict:
    """A row of the sensitivity table; ``kind`` :data:`DISTRIBUTION` or :data:`WHAT_IF`."""
    lo, hi = rounded(m_low, 2), rounded(m_high, 2)
    swing = None if lo is None or hi is None else round(abs(hi - lo), 2)
    return {"input": name, "low": low, "high": high, "margin_low_s": lo, "margin_high_s": hi, "swing_s": swing,
            "kind": kind}
