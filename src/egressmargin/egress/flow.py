"""Movement as a flow of discrete persons through the elements of a building.

The occupants of a route are N persons in order of their start times. Each path element
passes people at its flow capacity (a first-in, first-out bottleneck at its entry, where
they queue) and then takes its length to walk. Routes that use the same named element
share its capacity draw by draw: their streams are merged at the element. Everything is
vectorised over the Monte Carlo draws (axis 0) and over the persons (axis 1); the only
Python loops are over routes and elements.

Time reference: seconds from ignition. A person who never starts (a fire never
detected, or a person beyond the draw's occupant count) has start time +inf and stays at
+inf through every element, after everyone else.

References
----------
Gwynne, S. M. V., Rosenbaum, E. R. (2016). Employing the hydraulic model in assessing
emergency movement. In: SFPE Handbook of Fire Protection Engineering, 5th ed.,
Springer, ch. 59: speed-density relation, specific flow, transitions (flow in = flow
out), and merging flows at stair landings (all from memory).
Newell, G. F. (1982). Applications of Queueing Theory, 2nd ed., Chapman and Hall,
ch. 2 (the deterministic fluid queue: departures = arrivals delayed by the backlog).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .movement import A_DENSITY_M2, DENSITY_UNIMPEDED_P_M2, speed

__all__ = [
    "ElementPass",
    "NetElement",
    "NetRoute",
    "NodeFlow",
    "RouteFlow",
    "crowd_speed",
    "density_for_flow",
    "fifo_departures",
    "merge_fifo",
    "merge_priority",
    "quantile_positions",
    "simulate",
    "transferred_flow",
]


def fifo_departures(arrivals_s, capacity_p_s) -> np.ndarray:
    """Times at which persons pass a first-in, first-out bottleneck.

    Parameters
    ----------
    arrivals_s : array_like
        Arrival times [s], shape (S, N), ascending along axis 1 (+inf last: absent).
    capacity_p_s : float or array_like
        Flow capacity [persons/s], > 0; scalar or shape (S,).

    Returns
    -------
    numpy.ndarray
        Pass times [s], shape (S, N).

    Notes
    -----
    Each person occupies the bottleneck for 1/c, so N persons who arrive together take
    N/c (the hand method's flow time t = N/Fc). With persons k = 0..N-1:

        d_k = max(a_k, d_(k-1)) + 1/c,   d_(-1) = -inf

    whose closed form (unrolling the recursion, Newell 1982 ch. 2) is

        d_k = (k + 1)/c + max_(j <= k) (a_j - j/c),

    a running maximum (``numpy.maximum.accumulate``) over the persons. The last
    person passes at max_j [a_j + (N - j)/c]: the fluid-queue clearing time
    max over s of [s + (N - A(s))/c] for the arrival count A.

    Examples
    --------
    Three persons at t = 0 through a door of 1 person/s pass at 1, 2 and 3 s:

    >>> fifo_departures([[0.0, 0.0, 0.0]], 1.0).tolist()
    [[1.0, 2.0, 3.0]]
    """
    a = np.asarray(arrivals_s, dtype=float)
    c = np.asarray(capacity_p_s, dtype=float)
    if c.ndim == 1 and c.size and np.all(c == c[0]):
        c = c[:1]                            # one capacity in every draw: j/c once, not per draw
    c = c[:, None] if c.ndim == 1 else c
    j = np.arange(a.shape[1], dtype=float)[None, :]
    d = a - j / c
    np.maximum.accumulate(d, axis=1, out=d)
    d += (j + 1.0) / c
    return d


def _merged(streams: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray, list[int]]:
    """Concatenate streams and sort each draw's arrivals; return sorted, order, sizes.

    Arrivals at the same instant from different streams are interleaved in proportion
    to the streams' sizes (person j of N_r ranks by (j + 1/2)/N_r), so that two groups
    reaching a shared element together share it, and the order the routes are listed in
    the study does not decide who goes first (project choice: first come, first served
    has no rule for a tie).
    """
    joined = np.concatenate(streams, axis=1)
    rank = np.concatenate([np.broadcast_to((np.arange(s.shape[1]) + 0.5) / max(s.shape[1], 1), s.shape)
                           for s in streams], axis=1)
    order = np.lexsort((rank, joined), axis=1)
    return np.take_along_axis(joined, order, axis=1), order, [s.shape[1] for s in streams]


def _unmerged(departures: np.ndarray, order: np.ndarray, sizes: list[int]) -> list[np.ndarray]:
    back = np.empty_like(departures)
    np.put_along_axis(back, order, departures, axis=1)
    return np.split(back, np.cumsum(sizes)[:-1], axis=1)


def merge_fifo(streams: list[np.ndarray], capacity_p_s) -> list[np.ndarray]:
    """Pass several arrival streams through one bottleneck, first come first served.

    Parameters
    ----------
    streams : list of numpy.ndarray
        Arrival times [s] of each stream, shape (S, N_r), each ascending along axis 1.
    capacity_p_s : float or array_like
        Capacity of the shared bottleneck [persons/s]; scalar or (S,).

    Returns
    -------
    list of numpy.ndarray
        Pass times [s] of each stream, the shapes of ``streams``.

    Notes
    -----
    The streams are merged in order of arrival (per draw) and passed by
    :func:`fifo_departures`; each person keeps its stream.
    """
    joined, order, sizes = _merged(streams)
    return _unmerged(fifo_departures(joined, capacity_p_s), order, sizes)


def merge_priority(priority: list[np.ndarray], others: list[np.ndarray], capacity_p_s,
                   chunk_elements: int = 20_000_000) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Merge streams where one is already in the element and keeps its flow.

    Parameters
    ----------
    priority : list of numpy.ndarray
        Arrival times [s] of the streams already in the element (e.g. the stair flow
        from the floors above), shape (S, N_r), ascending.
    others : list of numpy.ndarray
        Arrival times [s] of the joining streams (e.g. the floor entering at a
        landing), shape (S, N_r), ascending.
    capacity_p_s : float or array_like
        Capacity of the element [persons/s]; scalar or (S,).
    chunk_elements : int
        Largest number of (draw x person x person) comparisons held at once.

    Returns
    -------
    (list, list)
        Pass times [s] of the priority streams and of the joining streams.

    Notes
    -----
    Merge rule: the stream already in the element passes as if alone, and the joining
    stream receives only the capacity it leaves unused ("a stair landing receives
    the floor's flow only as the stair's remaining capacity allows", SFPE Handbook
    5th ed. ch. 59, merging flows at transitions -- from memory).

    The priority persons pass at p_i (:func:`fifo_departures`), each occupying the
    slot [p_i - 1/c, p_i]. Free time phi(t) = t - (time in slots before t) is
    nondecreasing; in free time the joining stream meets a plain FIFO bottleneck of
    capacity c: f_k = (k + 1)/c + max_(j <= k) (phi(a_j) - j/c). Its pass time is the
    clock time at which free time f_k is reached: t = f_k + n(f_k)/c, where n(f) is
    the number of slots whose start lies at free time below f (slot i starts at
    free time g_i = p_i - (i + 1)/c). The rule is preemptive, as in the fluid
    model: a joining person whose passage is interrupted by the stream already in
    the element finishes after it. Total work never exceeds the capacity, so the
    element clears at the same time as under first come, first served.
    """
    p_sorted, p_order, p_sizes = _merged(priority)
    o_sorted, o_order, o_sizes = _merged(others)
    S, n_p = p_sorted.shape
    n_o = o_sorted.shape[1]
    c = np.broadcast_to(np.asarray(capacity_p_s, dtype=float), (S,))
    p = fifo_departures(p_sorted, c)
    slot = (1.0 / c)[:, None]                                   # (S, 1)
    with np.errstate(invalid="ignore"):
        slot_start = p - slot
        g = slot_start - np.arange(n_p, dtype=float)[None, :] * slot   # free time at slot starts
    phi = np.empty_like(o_sorted)
    step = max(1, chunk_elements // max(1, n_p * n_o))
    for lo in range(0, S, step):            # chunks of draws bound the memory; not a per-draw loop
        sl = slice(lo, lo + step)
        a = o_sorted[sl][:, :, None]
        w = slot[sl][:, :, None]
        with np.errstate(invalid="ignore"):
            done = (p[sl][:, None, :] <= a).sum(axis=2)
            inside = np.where(p[sl][:, None, :] > a,
                              np.clip(a - slot_start[sl][:, None, :], 0.0, w), 0.0).sum(axis=2)
            phi[sl] = o_sorted[sl] - done * slot[sl] - inside
    f = fifo_departures(phi, c)
    out = np.empty_like(o_sorted)
    for lo in range(0, S, step):
        sl = slice(lo, lo + step)
        n = (g[sl][:, None, :] < f[sl][:, :, None]).sum(axis=2)
        out[sl] = f[sl] + n * slot[sl]
    out = np.where(np.isfinite(o_sorted), out, np.inf)
    return _unmerged(p, p_order, p_sizes), _unmerged(out, o_order, o_sizes)


def density_for_flow(k, specific_flow_p_s_m) -> np.ndarray:
    """Crowd density that carries a given specific flow, on the uncongested branch.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s].
    specific_flow_p_s_m : float or array_like
        Specific flow Fs [persons/(s m) of effective width], >= 0.

    Returns
    -------
    numpy.ndarray
        Density D [persons/m^2], between 0 and 1/(2a) = 1.88.

    Notes
    -----
    The inverse of :func:`egressmargin.egress.movement.specific_flow` on its crowded
    branch: Fs = (1 - a D) k D (SFPE Handbook ch. 59, from memory) solved for the
    smaller root, the branch on which density rises with flow:

        D = (1 - sqrt(1 - 4 a Fs / k)) / (2 a),   a = 0.266 m^2/person.

    A flow above the element's peak k/(4a) (a tabulated maximum that rounds up, e.g.
    1.16 for k = 1.23) is held at the peak: D = 1/(2a).

    Examples
    --------
    >>> round(float(density_for_flow(1.08, 1.01)), 3)
    1.747
    """
    k = np.asarray(k, dtype=float)
    fs = np.asarray(specific_flow_p_s_m, dtype=float)
    disc = np.clip(1.0 - 4.0 * A_DENSITY_M2 * fs / k, 0.0, 1.0)
    return (1.0 - np.sqrt(disc)) / (2.0 * A_DENSITY_M2)


def crowd_speed(k, specific_flow_p_s_m) -> np.ndarray:
    """Walking speed in the crowd that carries a given specific flow.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s].
    specific_flow_p_s_m : float or array_like
        Specific flow Fs [persons/(s m)].

    Returns
    -------
    numpy.ndarray
        Speed [m/s]: S = k (1 - a D) with D from :func:`density_for_flow`; the
        unimpeded speed 0.85 k where D < 0.54 persons/m^2 (SFPE Handbook ch. 59,
        from memory; see :func:`egressmargin.egress.movement.speed`).

    Examples
    --------
    A stair of 178/279 mm (k = 1.08 m/s) at its maximum specific flow 1.01:

    >>> round(float(crowd_speed(1.08, 1.01)), 3)
    0.578
    """
    return np.asarray(speed(k, density_for_flow(k, specific_flow_p_s_m)), dtype=float)


def transferred_flow(pass_s: np.ndarray, capacity_p_s) -> np.ndarray:
    """Mean flow through an element over the time its persons pass [persons/s].

    Parameters
    ----------
    pass_s : numpy.ndarray
        Pass times [s], shape (S, M) (any order; +inf: absent).
    capacity_p_s : float or array_like
        Capacity of the element [persons/s]; scalar or (S,).

    Returns
    -------
    numpy.ndarray
        F = (n - 1) / (last - first pass), at most the capacity; the capacity where
        fewer than two persons pass.

    Notes
    -----
    A queue discharging at capacity c gives exactly F = c; people who arrive spread
    out give less, hence a lower density downstream (transition rule of the hydraulic
    method: the flow leaving an element enters the next, SFPE Handbook ch. 59).
    """
    c = np.broadcast_to(np.asarray(capacity_p_s, dtype=float), (pass_s.shape[0],))
    finite = np.isfinite(pass_s)
    n = finite.sum(axis=1)
    first = pass_s.min(axis=1)               # the least finite time, unless NaN or -inf are present
    if np.isnan(first).any() or np.isneginf(first).any():
        first = np.where(finite, pass_s, np.inf).min(axis=1)
    last = np.max(pass_s, axis=1, where=finite, initial=-np.inf)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = (n - 1) / (last - first)
    return np.where((n >= 2) & (last > first), np.minimum(f, c), c)


def quantile_positions(counts) -> np.ndarray:
    """Quantile (i - 1/2)/N of each person i = 1..N of a draw; NaN beyond N.

    Parameters
    ----------
    counts : array_like of int
        Occupants per draw, shape (S,), >= 1.

    Returns
    -------
    numpy.ndarray
        Shape (S, max N): probabilities in (0, 1), ascending; NaN for absent persons.

    Notes
    -----
    Person i of N starts at the (i - 1/2)/N quantile of the across-occupant start-time
    distribution (the midpoint plotting position, Hazen 1914): the first and the last
    occupant sit half a person inside the distribution's tails.

    Examples
    --------
    >>> quantile_positions([2]).tolist()
    [[0.25, 0.75]]
    """
    n = np.asarray(counts, dtype=int)
    i = np.arange(int(n.max()), dtype=float)[None, :]
    q = (i + 0.5) / n[:, None]
    return np.where(i < n[:, None], q, np.nan)


@dataclass(frozen=True)
class NetElement:
    """One path element of one route, as the flow model sees it.

    Attributes
    ----------
    node : str
        Element identity: a shared element's id, or a name private to the route.
    length_m : float
        Walking length [m].
    k : float
        Speed constant [m/s].
    effective_width_m : float or numpy.ndarray
        Effective width [m]; scalar or shape (S,) (a width that differs by draw, as in
        a sensitivity sweep).
    capacity_p_s : float or numpy.ndarray
        Flow capacity before any flow factor [persons/s]; scalar or shape (S,).
    """

    node: str
    length_m: float
    k: float
    effective_width_m: float | np.ndarray
    capacity_p_s: float | np.ndarray


@dataclass(frozen=True)
class NetRoute:
    """A route's occupants and path for :func:`simulate`.

    Attributes
    ----------
    id : str
        Route id.
    starts_s : numpy.ndarray
        Start times [s], shape (S, N), ascending along axis 1 (+inf: absent person).
    counts : numpy.ndarray
        Occupants per draw, shape (S,), >= 1 (the last occupant is person counts - 1).
    elements : tuple of NetElement
        The path in order.
    flow_factor, speed_factor : numpy.ndarray
        Multipliers on capacity and walking speed [-], shape (S,).
    """

    id: str
    starts_s: np.ndarray
    counts: np.ndarray
    elements: tuple[NetElement, ...]
    flow_factor: np.ndarray
    speed_factor: np.ndarray

    @property
    def controlling(self) -> int | np.ndarray:
        """Index of the element of least nominal capacity (the first if tied).

        An int; shape (S,), draw by draw, where some capacity differs by draw.
        """
        caps = [np.asarray(e.capacity_p_s, dtype=float) for e in self.elements]
        if all(c.ndim == 0 for c in caps):
            return int(np.argmin(caps))
        S = self.starts_s.shape[0]
        return np.argmin(np.stack([np.broadcast_to(c, (S,)) for c in caps]), axis=0)


@dataclass
class ElementPass:
    """How a route's occupants pass one element, per draw (arrays of shape (S,)).

    Attributes
    ----------
    arrive_s, pass_s, leave_s : numpy.ndarray
        The last occupant reaches the element's entry, passes its bottleneck, and
        leaves it after walking its length [s from ignition].
    queue_s : numpy.ndarray
        Longest wait of any of the route's occupants at the element's entry [s].
    speed_m_s : numpy.ndarray
        Walking speed on the element [m/s] (crowd speed at and after the route's
        controlling element, unimpeded before it; times the speed factor).
    capacity_p_s : numpy.ndarray
        Capacity used [persons/s] (times the flow factor).
    density_p_m2 : numpy.ndarray
        Crowd density used for the speed [persons/m^2] (0 where unimpeded).
    arrive_each_s, pass_each_s, leave_each_s : numpy.ndarray or None
        Every occupant's arrival at the entry, pass of the bottleneck and leaving
        [s from ignition], shape (S, N) in the route's person order (+inf: absent
        person); what :mod:`egressmargin.exposure` follows. None where not kept.
    """

    arrive_s: np.ndarray
    pass_s: np.ndarray
    leave_s: np.ndarray
    queue_s: np.ndarray
    speed_m_s: np.ndarray
    capacity_p_s: np.ndarray
    density_p_m2: np.ndarray
    arrive_each_s: np.ndarray | None = None
    pass_each_s: np.ndarray | None = None
    leave_each_s: np.ndarray | None = None


@dataclass
class RouteFlow:
    """Flow result of one route: its elements in order and its clearing time."""

    id: str
    elements: list[ElementPass]
    exit_s: np.ndarray
    controlling: int | np.ndarray


@dataclass
class NodeFlow:
    """A shared element: the routes through it, their combined clearing and count."""

    id: str
    routes: list[str]
    clearing_s: np.ndarray
    occupants: np.ndarray
    capacity_p_s: np.ndarray = field(default_factory=lambda: np.zeros(0))


def _last(x: np.ndarray, counts: np.ndarray) -> np.ndarray:
    return x[np.arange(x.shape[0]), counts - 1]


def simulate(routes: list[NetRoute], priority: dict[str, list[str]] | None = None
             ) -> tuple[dict[str, RouteFlow], dict[str, NodeFlow]]:
    """Pass every route's occupants through its path, sharing named elements.

    Parameters
    ----------
    routes : list of NetRoute
        The routes of one scenario.
    priority : dict of str to list of str, optional
        For a shared element id, the routes whose stream is already in it (merge rule
        of :func:`merge_priority`); other shared elements merge first come, first
        served (:func:`merge_fifo`).

    Returns
    -------
    (dict, dict)
        :class:`RouteFlow` by route id; :class:`NodeFlow` by shared element id.

    Raises
    ------
    ValueError
        A route uses an element twice, or routes use shared elements in orders that
        cannot be resolved (A before B on one route, B before A on another).

    Notes
    -----
    At each element the persons queue at its entry and pass at its capacity (times
    the route's flow factor; for a shared element the least flow factor of its
    routes), then walk its length. The walking speed is the unimpeded speed upstream
    of the route's controlling element (where the queue absorbs the crowding, as in the
    hand method) and, at and after it, the crowd speed that carries the flow measured
    through the element (:func:`transferred_flow`, :func:`crowd_speed`). A shared
    element's capacity is shared by the routes that reach it, draw by draw.
    """
    priority = priority or {}
    users: dict[str, list[tuple[int, int]]] = {}
    for r, route in enumerate(routes):
        for i, el in enumerate(route.elements):
            users.setdefault(el.node, []).append((r, i))
    for node, us in users.items():
        if len({r for r, _ in us}) != len(us):
            raise ValueError(f"element '{node}' appears twice on route '{routes[us[0][0]].id}'")
    pos = [0] * len(routes)
    ctrls = [route.controlling for route in routes]
    arrivals = [route.starts_s for route in routes]
    passes: list[list[ElementPass]] = [[] for _ in routes]
    nodes: dict[str, NodeFlow] = {}
    while any(pos[r] < len(route.elements) for r, route in enumerate(routes)):
        progressed = False
        for r, route in enumerate(routes):
            if pos[r] >= len(route.elements):
                continue
            node = route.elements[pos[r]].node
            us = users[node]
            if not all(pos[u] == i for u, i in us):
                continue
            _pass_node(node, us, routes, ctrls, arrivals, passes, nodes, priority.get(node, []))
            for u, _ in us:
                pos[u] += 1
            progressed = True
        if not progressed:
            stuck = sorted({routes[r].elements[pos[r]].node for r in range(len(routes))
                            if pos[r] < len(routes[r].elements)})
            raise ValueError("routes use the shared elements " + ", ".join(stuck) +
                             " in orders that contradict each other")
    flows = {route.id: RouteFlow(route.id, passes[r], passes[r][-1].leave_s, ctrls[r])
             for r, route in enumerate(routes)}
    return flows, nodes


def _pass_node(node, us, routes, ctrls, arrivals, passes, nodes, first_ids):
    S = routes[us[0][0]].starts_s.shape[0]
    el = routes[us[0][0]].elements[us[0][1]]
    factor = np.min(np.stack([np.broadcast_to(routes[u].flow_factor, (S,)) for u, _ in us]), axis=0)
    cap = el.capacity_p_s * factor
    streams = [arrivals[u] for u, _ in us]
    ahead = [k for k, (u, _) in enumerate(us) if routes[u].id in first_ids]
    if ahead and len(ahead) < len(us):
        behind = [k for k in range(len(us)) if k not in ahead]
        d_ahead, d_behind = merge_priority([streams[k] for k in ahead], [streams[k] for k in behind], cap)
        deps = [None] * len(us)
        for k, d in zip(ahead, d_ahead):
            deps[k] = d
        for k, d in zip(behind, d_behind):
            deps[k] = d
    else:
        deps = merge_fifo(streams, cap) if len(us) > 1 else [fifo_departures(streams[0], cap)]
    flow = transferred_flow(deps[0] if len(deps) == 1 else np.concatenate(deps, axis=1), cap)
    fs = flow / el.effective_width_m
    density = density_for_flow(el.k, fs)
    crowded = np.where(density < DENSITY_UNIMPEDED_P_M2, 0.0, density)
    leaves = []
    for (u, i), a, d in zip(us, streams, deps):
        route = routes[u]
        dens = np.where(i >= ctrls[u], crowded, 0.0)     # crowd speed at and after the controlling element
        v = np.broadcast_to(np.asarray(speed(el.k, dens), dtype=float), (S,)) * route.speed_factor
        leave = d + (el.length_m / v)[:, None] if el.length_m > 0 else d
        # wait at the entry: pass - 1/c - arrival; an absent person (a = d = +inf) gives NaN,
        # which fmax skips, so the queue is the longest wait of the persons present (or 0)
        with np.errstate(invalid="ignore"):
            wait = d - (1.0 / cap)[:, None]
            wait -= a
        passes[u].append(ElementPass(
            arrive_s=_last(a, route.counts), pass_s=_last(d, route.counts), leave_s=_last(leave, route.counts),
            queue_s=np.fmax(np.fmax.reduce(wait, axis=1), 0.0), speed_m_s=v, capacity_p_s=cap,
            density_p_m2=np.broadcast_to(dens, (S,)).copy(), arrive_each_s=a, pass_each_s=d, leave_each_s=leave))
        arrivals[u] = leave
        leaves.append(_last(leave, route.counts))
    if len(us) > 1:
        nodes[node] = NodeFlow(node, [routes[u].id for u, _ in us], np.max(np.stack(leaves), axis=0),
                               np.sum([routes[u].counts for u, _ in us], axis=0), cap)
