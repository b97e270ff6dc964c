"""Typed records of how each route's occupants flow through its elements, and the one
function that turns them into results.json keys.

The records hold per-draw arrays (shape (S,)); :func:`to_json` reduces them to
percentiles (:func:`egressmargin.stats.summarise`) and rounds. The flow itself is
computed in :mod:`egressmargin.egress.flow`; the hand-method values a reviewer checks
before a run come from :func:`explain_route`.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, is_dataclass

import numpy as np

from ..stats import summarise
from .movement import element_properties, hand_speeds
from .placement import element_places

__all__ = ["ElementExplain", "ElementRecord", "LocationRecord", "SharedElementRecord", "explain_route",
           "explain_text", "hand_movement",
           "premovement_meaning", "route_keys", "shared_keys", "to_json"]


@dataclass
class ElementRecord:
    """One path element of one route: geometry, capacity, speed, clearing and queue.

    ``at`` is where people walk it (``at_source``: "given" or "assigned"), ``queue_at``
    where they wait to enter it (:func:`egressmargin.egress.placement.element_places`).

    ``capacity_p_s`` and ``speed_m_s`` are per draw (the route's flow and speed
    factors, crowd speed), serialised as medians; ``clearing_s`` (the last occupant
    leaves the element) and ``queue_s`` (longest wait of the route's occupants at its
    entry) as percentiles.
    """

    index: int
    type: str
    id: str | None
    at: str
    at_source: str
    queue_at: str
    length_m: float
    length_basis: str | None
    effective_width_m: float
    capacity_p_s: np.ndarray
    speed_m_s: np.ndarray
    clearing_s: np.ndarray
    queue_s: np.ndarray
    shared_with: list[str]


@dataclass
class SharedElementRecord:
    """A named element that several routes use in a scenario: their merged flow."""

    id: str
    routes: list[str]
    merge_rule: str
    combined_clearing_s: np.ndarray
    combined_occupants: np.ndarray


@dataclass
class LocationRecord:
    """A location of the last occupant's history: its ASET and when they leave it."""

    id: str
    aset_s: np.ndarray
    last_occupant_leaves_s: np.ndarray


@dataclass
class RouteEgressRecord:
    elements: list[ElementRecord]
    premovement_meaning: str
    start_at: str | None
    occupants_drawn: np.ndarray
    location_aware: list[LocationRecord]
    location_aware_margin_s: np.ndarray
    location_aware_binding: str | None


def premovement_meaning(route) -> str:
    """The meaning of the route's pre-movement, in words for the results and report."""
    if route.premovement_across:
        return ("across occupants: start times spread over the occupants, person i of N at quantile "
                "(i - 1/2)/N, queued by the flow model")
    return "one time for everyone: a single uncertain pre-movement time shared by all occupants of a draw"


def route_record(route, egress, nodes: dict, location_aware) -> RouteEgressRecord:
    """Build the record of one route from :class:`egressmargin.assess.RouteEgress`."""
    places = element_places(route)
    elements = []
    for i, (e, p, ep, pl) in enumerate(zip(route.path, egress.properties, egress.flow.elements, places)):
        node = nodes.get(e.get("id")) if e.get("id") else None
        elements.append(ElementRecord(
            index=i + 1, type=e["type"], id=e.get("id"), at=pl.walk, at_source="given" if pl.given else "assigned",
            queue_at=pl.queue,
            length_m=p["length_m"], length_basis=e.get("length_basis") if e["type"] == "stair" else None,
            effective_width_m=p["effective_width_m"], capacity_p_s=ep.capacity_p_s, speed_m_s=ep.speed_m_s,
            clearing_s=ep.leave_s, queue_s=ep.queue_s,
            shared_with=[r for r in node.routes if r != route.id] if node else []))
    la = location_aware
    binding = np.bincount(la.binding, minlength=len(la.locations))
    return RouteEgressRecord(
        elements=elements, premovement_meaning=premovement_meaning(route), start_at=route.start_at,
        occupants_drawn=egress.inputs.counts.astype(float),
        location_aware=[LocationRecord(loc, la.aset_s[j], la.leave_s[j]) for j, loc in enumerate(la.locations)],
        location_aware_margin_s=la.margin_s,
        location_aware_binding=la.locations[int(np.argmax(binding))] if la.locations else None)


def shared_records(nodes: dict, named: dict | None = None) -> list[SharedElementRecord]:
    """Records of the shared elements of a scenario (:class:`egressmargin.egress.flow.NodeFlow`)."""
    named = named or {}
    out = []
    for nid, node in nodes.items():
        first = named[nid].upstream if nid in named else []
        rule = (f"routes {', '.join(first)} keep their flow; the others receive the capacity left over "
                "(SFPE Handbook ch. 59, merging at stair landings; from memory)") if first else \
            "first come, first served"
        out.append(SharedElementRecord(nid, list(node.routes), rule, node.clearing_s,
                                       node.occupants.astype(float)))
    return out


def _value(name: str, v):
    if isinstance(v, np.ndarray):
        if name in ("capacity_p_s", "speed_m_s"):
            finite = v[np.isfinite(v)]
            return round(float(np.median(finite)), 4) if finite.size else None
        return summarise(v, 1 if name.endswith("_s") else 2)
    if isinstance(v, float):
        return round(v, 4)
    return v


def to_json(record) -> dict:
    """The results.json form of a record: arrays to percentiles (or medians), floats rounded."""
    out = {}
    for f in fields(record):
        v = getattr(record, f.name)
        if isinstance(v, list) and v and is_dataclass(v[0]):
            out[f.name] = [to_json(x) for x in v]
        else:
            out[f.name] = _value(f.name, v)
    return out


def route_keys(route, egress, nodes: dict, location_aware) -> dict:
    """The keys a route adds to results.json (none of today's keys renamed)."""
    return to_json(route_record(route, egress, nodes, location_aware))


def shared_keys(nodes: dict, named: dict | None = None) -> list[dict]:
    """The ``shared_elements`` list of a scenario in results.json."""
    return [to_json(r) for r in shared_records(nodes, named)]


@dataclass
class ElementExplain:
    """Hand-method values of one element from the study alone (no fire data, no draws)."""

    index: int
    type: str
    id: str | None
    length_m: float
    length_basis: str | None
    effective_width_m: float
    k_m_s: float
    max_specific_flow: float
    capacity_p_s: float
    flow_p_s: float
    specific_flow_p_s_m: float
    density_p_m2: float | None
    speed_m_s: float
    controlling: bool
    notes: list[str]
    at: str = ""
    at_how: str = ""
    queue_at: str = ""


def explain_route(route) -> list[ElementExplain]:
    """Effective width, density, speed, specific flow, capacity and place of each element.

    Notes
    -----
    Capacity Fc = Fsm We. The controlling element is the one of least capacity; it
    and every element after it carry its flow F = Fc_min (transition rule: the flow
    leaving an element enters the next), at specific flow Fs = F / We, density and
    speed of :func:`egressmargin.egress.movement.hand_speeds` (the density of maximum
    flow 1/(2a) at capacity, D = (1 - sqrt(1 - F/Fc)) / (2a) below it, at most the
    route's nominal occupants over the element's area; unimpeded 0.85 k below 0.54
    persons/m^2). Before it people walk unimpeded (the queue at the controlling
    element absorbs the crowd), shown with density None. SFPE Handbook 5th ed. ch. 59
    (from memory). These are the speeds of the flow model when everyone starts
    together. Routes sharing a named element share its capacity; this per-route view
    does not include the other routes' flow. Each element's walking and queuing
    location come from :func:`egressmargin.egress.placement.element_places`.
    """
    props = [element_properties(e) for e in route.path]
    ctrl = int(np.argmin([p["capacity_p_s"] for p in props]))
    flow = props[ctrl]["capacity_p_s"]
    speeds, densities = hand_speeds(props, route.occupants)
    places = element_places(route)
    out = []
    for i, (e, p, pl) in enumerate(zip(route.path, props, places)):
        if i >= ctrl:
            fs, density = flow / p["effective_width_m"], float(densities[i])
        else:
            fs, density = float("nan"), None
        out.append(ElementExplain(i + 1, e["type"], e.get("id"), p["length_m"], e.get("length_basis"),
                                  p["effective_width_m"], p["k"], p["max_specific_flow"], p["capacity_p_s"],
                                  flow if i >= ctrl else float("nan"), fs, density, float(speeds[i]), i == ctrl,
                                  p["notes"], pl.walk, pl.how, pl.queue))
    return out


def _num(x, fmt: str) -> str:
    return "-" if x is None or (isinstance(x, float) and not np.isfinite(x)) else format(x, fmt)


def grouped_notes(pairs) -> list[str]:
    """Notes on path elements, each distinct note once with the elements it applies to.

    >>> grouped_notes([(4, "not a row"), (5, "not a row"), (6, "other")])
    ['elements 4, 5: not a row', 'element 6: other']
    """
    by_note: dict[str, list[int]] = {}
    for index, note in pairs:
        by_note.setdefault(str(note), [])
        if index not in by_note[str(note)]:
            by_note[str(note)].append(index)
    return [f"element{'s' if len(ix) > 1 else ''} {', '.join(str(i) for i in ix)}: {note}"
            for note, ix in by_note.items()]


def hand_movement(route, rows: list[ElementExplain] | None = None) -> dict:
    """The hand-form movement time of a route alone, everyone together: the one hand
    calculation that ``validate --explain`` and the report (section 2.2) both print.

    travel = sum of length / speed over the elements (:func:`explain_route`), flow = N /
    least capacity; the movement time is their sum (SFPE Handbook 5th ed. ch. 59, hand
    method; from memory).

    Returns
    -------
    dict
        ``travel_s``, ``occupants``, ``capacity_p_s``, ``flow_s``, ``total_s``,
        ``controlling`` (index, type and id of the least-capacity element) and ``text``.
    """
    rows = explain_route(route) if rows is None else rows
    ctrl = next(r for r in rows if r.controlling)
    travel = sum(r.length_m / r.speed_m_s for r in rows if r.length_m > 0)
    flow_t = route.occupants / ctrl.capacity_p_s
    text = (f"hand movement time (route alone, everyone together): travel {travel:.1f} s + "
            f"{route.occupants} / {ctrl.capacity_p_s:.3f} = {flow_t:.1f} s -> {travel + flow_t:.1f} s")
    return {"travel_s": round(travel, 3), "occupants": route.occupants, "capacity_p_s": round(ctrl.capacity_p_s, 6),
            "flow_s": round(flow_t, 3), "total_s": round(travel + flow_t, 3),
            "controlling": {"index": ctrl.index, "type": ctrl.type, "id": ctrl.id}, "text": text}


def explain_text(study) -> str:
    """The hand calculation of every route, as text for ``egressmargin validate --explain``.

    Per route: each element's length (and how a stair's length was found), effective
    width, speed constant, maximum specific flow, capacity, the flow it carries, its
    specific flow, density and speed (:func:`explain_route`); where its people walk
    and wait (given by ``at`` or assigned); then the hand-form movement time of the
    route alone (travel at those speeds + N / least capacity, which the flow model
    gives when everyone starts together), and for each shared element the combined
    count over its capacity.
    """
    lines = []
    head = ("#", "type", "id", "length m", "We m", "k m/s", "Fsm p/(s m)", "Fc p/s", "F p/s", "Fs p/(s m)",
            "D p/m2", "S m/s", "")
    for route in study.routes:
        rows = explain_route(route)
        meaning = premovement_meaning(route)
        lines.append(f"route {route.id}: {route.occupants} occupants"
                     f"{' (nominal: the median of its distribution)' if route.occupants_dist and 'fixed' not in route.occupants_dist else ''}"
                     f"; pre-movement {meaning}"
                     f"{'; before moving at ' + route.start_at if route.start_at else ''}")
        table = [head]
        for r in rows:
            table.append((str(r.index), r.type, r.id or "", _num(r.length_m, ".2f"), _num(r.effective_width_m, ".3f"),
                          _num(r.k_m_s, ".2f"), _num(r.max_specific_flow, ".2f"), _num(r.capacity_p_s, ".3f"),
                          _num(r.flow_p_s, ".3f"), _num(r.specific_flow_p_s_m, ".3f"),
                          _num(r.density_p_m2, ".3f") if r.density_p_m2 is not None else "unimpeded",
                          _num(r.speed_m_s, ".3f"), "controlling" if r.controlling else ""))
        widths = [max(len(row[i]) for row in table) for i in range(len(head))]
        lines += ["  " + "  ".join(c.ljust(w) for c, w in zip(row, widths)).rstrip() for row in table]
        for r in rows:
            if r.length_basis and r.type == "stair":
                lines.append(f"  element {r.index} stair length: {r.length_basis}")
        lines += [f"  {n}" for n in grouped_notes([(r.index, note) for r in rows for note in r.notes])]
        for r in rows:
            lines.append(f"  element {r.index} ({r.type}) at {r.at}: "
                         f"{'given' if r.at_how == 'given' else 'assigned ' + r.at_how}; "
                         f"waiting to enter it at {r.queue_at}")
        lines.append(f"  {hand_movement(route, rows)['text']}")
        lines.append("")
    for eid, el in study.elements.items():
        users = [r for r in study.routes if any(e.get("id") == eid for e in r.path)]
        if len(users) < 2:
            continue
        cap = element_properties(el.element)["capacity_p_s"]
        n = sum(r.occupants for r in users)
        rule = f"{', '.join(el.upstream)} keep their flow" if el.upstream else "first come, first served"
        lines.append(f"shared element {eid}: routes {', '.join(r.id for r in users)} ({rule}); "
                     f"{n} occupants / {cap:.3f} persons/s = {n / cap:.1f} s through it (in scenarios where "
                     "all of them run)")
    lines.append("Hydraulic method constants: SFPE Handbook 5th ed. ch. 59 (from memory). F: flow carried from the "
                 "controlling element on (flow in = flow out); Fs = F / We; D = (1 - sqrt(1 - F/Fc)) / (2a) on the "
                 "uncongested branch (1/(2a) = 1.88 at capacity), at most the occupants over the element's area; "
                 "S = k (1 - a D), or 0.85 k where D < 0.54 or upstream of the controlling element.")
    return "\n".join(lines)
