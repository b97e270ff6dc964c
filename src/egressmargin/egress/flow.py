"""Movement as a flow of discrete persons through the elements of a building.

The occupants of a route are N persons in order of their start times. Each path element
passes people at its flow capacity (a first-in, first-out bottleneck at its entry, where
they queue) and then takes its length to walk. Routes that use the same named element
share its capacity draw by draw: their streams are merged at the element. Everything is
vectorised over the Monte Carlo draws (axis 0) and over the persons (axis 1); the only
Python loops are over routes and elements.

Rules of the hydraulic hand method (Gwynne & Rosenbaum 2016, SFPE Handbook 5th ed.
ch. 59; from memory, the handbook text was not at hand) and how the model keeps them:

* **N/Fc through the controlling element.** A person is one unit of a fluid stream:
  passing a point takes them a *span* of time (the span is this model's device for
  keeping the hand method's rules with discrete persons: project choice; for one route
  it reproduces the fluid model of Newell 1982 ch. 2 exactly). People who start
  together are a point (span 0) and a bottleneck of capacity c gives each a span of at
  least 1/c, so N persons who arrive together pass in N/c (:func:`fifo_departures`).
* **Transitions: flow in = flow out.** An element with spare capacity passes a stream
  as it arrives and adds no time: a person whose span is at least 1/c is not delayed
  (:func:`fifo_departures` with ``spans_s``). A route on which everyone starts together
  therefore takes its walking time plus N/Fc of the controlling element, exactly the
  hand form :func:`egressmargin.egress.movement.movement_time`.
* **Speed from density.** Upstream of a route's controlling element people walk at the
  unimpeded speed (its queue absorbs the crowd); at and after it, at the speed of the
  density with which the element carries the flow measured through it
  (:func:`transferred_flow`, :func:`egressmargin.egress.movement.crowd_density`): an
  element discharging at capacity has the density of maximum flow, 1/(2a) = 1.88
  persons/m^2 (speed k/2); a group too small to reach 0.54 persons/m^2 (one person, a
  few people on a long corridor) walks unimpeded.
* **Merging at landings** (:func:`merge_priority`): the stream already in the element
  keeps its flow, the joining stream gets what capacity is left (from memory).

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

from collections.abc import Collection
from dataclasses import dataclass, field

import numpy as np

from .movement import A_DENSITY_M2, DENSITY_UNIMPEDED_P_M2, crowd_density, density_at_flow, speed

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
    "passing_spans",
    "quantile_positions",
    "simulate",
    "transferred_flow",
]


def fifo_departures(arrivals_s, capacity_p_s, spans_s=None) -> np.ndarray:
    """Times at which persons pass a first-in, first-out bottleneck.

    Parameters
    ----------
    arrivals_s : array_like
        Arrival times [s], shape (S, N), ascending along axis 1 (+inf last: absent).
    capacity_p_s : float or array_like
        Flow capacity [persons/s], > 0; scalar or shape (S,).
    spans_s : array_like, optional
        Each person's passing span [s], shape (S, N): the time their passage past a
        point took upstream (:func:`passing_spans`). None: 0 for everyone (people who
        start together, a point in the stream).

    Returns
    -------
    numpy.ndarray
        Pass times [s], shape (S, N): when each person has passed.

    Notes
    -----
    A person is a unit of a fluid stream whose passage arrives spread evenly over
    [a_k - s_k, a_k] (span s_k). The bottleneck passes at most c persons per second,
    first in first out, so person k has passed at

        d_k = max(a_k, a_k - s_k + 1/c, d_(k-1) + 1/c),   d_(-1) = -inf:

    not before they have arrived, not faster than the capacity allows, and not before
    the person ahead has passed plus 1/c. With b_k = a_k + max(0, 1/c - s_k) the
    recursion is d_k = max(b_k, d_(k-1) + 1/c), whose closed form (unrolling it,
    Newell 1982 ch. 2) is

        d_k = k/c + max_(j <= k) (b_j - j/c),

    a running maximum (``numpy.maximum.accumulate``) over the persons.

    * N persons who arrive together (span 0) pass at (k + 1)/c: the last at N/c, the
      hand method's flow time t = N/Fc. Without spans this is the recursion
      d_k = max(a_k, d_(k-1)) + 1/c.
    * A stream that left a narrower element has spans >= 1/c' >= 1/c: it passes as it
      arrives (d_k = a_k), the transition rule "flow in = flow out" (SFPE Handbook
      ch. 59, from memory): an element with spare capacity adds no time.

    Examples
    --------
    Three persons at t = 0 through a door of 1 person/s pass at 1, 2 and 3 s; that
    stream (spans 1 s) then passes a door of 2 persons/s without delay:

    >>> fifo_departures([[0.0, 0.0, 0.0]], 1.0).tolist()
    [[1.0, 2.0, 3.0]]
    >>> fifo_departures([[1.0, 2.0, 3.0]], 2.0, [[1.0, 1.0, 1.0]]).tolist()
    [[1.0, 2.0, 3.0]]
    """
    a = np.asarray(arrivals_s, dtype=float)
    c = np.asarray(capacity_p_s, dtype=float)
    if c.ndim == 1 and c.size and np.all(c == c[0]):
        c = c[:1]                            # one capacity in every draw: j/c once, not per draw
    c = c[:, None] if c.ndim == 1 else c
    j = np.arange(a.shape[1], dtype=float)[None, :]
    if spans_s is None:
        d = a - j / c
        np.maximum.accumulate(d, axis=1, out=d)
        d += (j + 1.0) / c
        return d
    d = np.subtract(1.0 / c, np.asarray(spans_s, dtype=float))     # one (S, N) array, worked in place
    np.maximum(d, 0.0, out=d)
    d += a
    jc = j / c
    d -= jc
    np.maximum.accumulate(d, axis=1, out=d)
    d += jc
    return d


def passing_spans(arrivals_s, spans_s, departures_s) -> np.ndarray:
    """Passing span of each person leaving a first-in, first-out bottleneck.

    Parameters
    ----------
    arrivals_s, spans_s, departures_s : numpy.ndarray
        Arrival times [s], spans on arrival [s] (None: 0) and pass times [s], shape
        (S, N), in the order in which the persons pass (ascending ``departures_s``).

    Returns
    -------
    numpy.ndarray
        Span [s] of each person's passage out of the bottleneck, shape (S, N); 0 for
        absent persons.

    Notes
    -----
    The bottleneck starts on person k when both their passage has begun to arrive
    and the person ahead has passed, t0 = max(a_k - s_k, d_(k-1)), and finishes at
    d_k: the span out is d_k - t0 (1/c for a queue discharging at capacity; the span
    on arrival for a stream passing freely). Walking at one speed keeps the spans.
    For the stream of a single route whose persons start as points this is exact for
    the fluid model (the bottleneck passes each person at a constant rate); where
    streams merge, spreading the passage evenly over the span is an approximation
    (project choice).

    Examples
    --------
    >>> passing_spans(np.array([[0.0, 0.0]]), None, np.array([[1.0, 2.0]])).tolist()
    [[1.0, 1.0]]
    """
    a = np.asarray(arrivals_s, dtype=float)
    d = np.asarray(departures_s, dtype=float)
    out = a.copy() if spans_s is None else np.subtract(a, np.asarray(spans_s, dtype=float))   # begin
    np.maximum(out[:, 1:], d[:, :-1], out=out[:, 1:])          # t0 = max(begin, pass of the one ahead)
    with np.errstate(invalid="ignore"):
        np.subtract(d, out, out=out)
    out[~np.isfinite(out)] = 0.0
    return out


def _merged(streams: list[np.ndarray], spans: list[np.ndarray] | None = None
            ) -> tuple[np.ndarray, np.ndarray | None, np.ndarray, list[int]]:
    """Concatenate streams and sort each draw's arrivals; return sorted, spans, order, sizes.

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
    spans = _joined_spans(streams, spans)
    sp = None if spans is None else np.take_along_axis(spans, order, axis=1)
    return np.take_along_axis(joined, order, axis=1), sp, order, [s.shape[1] for s in streams]


def _joined_spans(streams, spans) -> np.ndarray | None:
    """The streams' spans side by side (None: every span 0; a None stream's spans are 0)."""
    if spans is None or all(x is None for x in spans):
        return None
    return np.concatenate([np.zeros(st.shape) if x is None else x for st, x in zip(streams, spans)], axis=1)


def _unmerged(departures: np.ndarray, order: np.ndarray, sizes: list[int]) -> list[np.ndarray]:
    back = np.empty_like(departures)
    np.put_along_axis(back, order, departures, axis=1)
    return np.split(back, np.cumsum(sizes)[:-1], axis=1)


def _fifo_merge(streams, spans, capacity_p_s):
    """:func:`merge_fifo` that also returns each stream's spans out."""
    joined, sp, order, sizes = _merged(streams, spans)
    d = fifo_departures(joined, capacity_p_s, sp)
    return _unmerged(d, order, sizes), _unmerged(passing_spans(joined, sp, d), order, sizes)


def merge_fifo(streams: list[np.ndarray], capacity_p_s, spans: list[np.ndarray] | None = None
               ) -> list[np.ndarray]:
    """Pass several arrival streams through one bottleneck, first come first served.

    Parameters
    ----------
    streams : list of numpy.ndarray
        Arrival times [s] of each stream, shape (S, N_r), each ascending along axis 1.
    capacity_p_s : float or array_like
        Capacity of the shared bottleneck [persons/s]; scalar or (S,).
    spans : list of numpy.ndarray, optional
        Passing spans [s] of each stream's persons (:func:`fifo_departures`); None: 0.

    Returns
    -------
    list of numpy.ndarray
        Pass times [s] of each stream, the shapes of ``streams``.

    Notes
    -----
    The streams are merged in order of arrival (per draw) and passed by
    :func:`fifo_departures`; each person keeps its stream.
    """
    return _fifo_merge(streams, spans, capacity_p_s)[0]


def _spans_any_order(streams, spans, deps):
    """:func:`passing_spans` of several streams through one element, in pass order."""
    a = np.concatenate(streams, axis=1)
    d = np.concatenate(deps, axis=1)
    order = np.argsort(d, axis=1, kind="stable")
    spans = _joined_spans(streams, spans)
    sp = None if spans is None else np.take_along_axis(spans, order, axis=1)
    out = passing_spans(np.take_along_axis(a, order, axis=1), sp, np.take_along_axis(d, order, axis=1))
    return _unmerged(out, order, [x.shape[1] for x in streams])


def merge_priority(priority: list[np.ndarray], others: list[np.ndarray], capacity_p_s,
                   chunk_elements: int = 20_000_000, spans_priority: list[np.ndarray] | None = None,
                   spans_others: list[np.ndarray] | None = None) -> tuple[list[np.ndarray], list[np.ndarray]]:
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
    spans_priority, spans_others : list of numpy.ndarray, optional
        Passing spans [s] of the persons of each stream (:func:`fifo_departures`);
        None: 0.

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
    capacity c: f_k = (k + 1)/c + max_(j <= k) (phi(a_j) - j/c) (with spans, the
    rule of :func:`fifo_departures` with each span measured in free time,
    phi(a_j) - phi(a_j - s_j)). Its pass time is the clock time at which free
    time f_k is reached: t = f_k + n(f_k)/c, where n(f) is the number of slots whose
    start lies at free time below f (slot i starts at free time g_i = p_i - (i +
    1)/c). The rule is preemptive, as in the fluid model: a joining person whose
    passage is interrupted by the stream already in the element finishes after it.
    Total work never exceeds the capacity, so the element clears at the same time as
    under first come, first served.
    """
    p_sorted, p_spans, p_order, p_sizes = _merged(priority, spans_priority)
    o_sorted, o_spans, o_order, o_sizes = _merged(others, spans_others)
    S, n_p = p_sorted.shape
    n_o = o_sorted.shape[1]
    c = np.broadcast_to(np.asarray(capacity_p_s, dtype=float), (S,))
    p = fifo_departures(p_sorted, c, p_spans)
    slot = (1.0 / c)[:, None]                                   # (S, 1)
    with np.errstate(invalid="ignore"):
        slot_start = p - slot
        g = slot_start - np.arange(n_p, dtype=float)[None, :] * slot   # free time at slot starts
    phi = _free_time(o_sorted, p, slot, slot_start, chunk_elements)
    if o_spans is None:
        f = fifo_departures(phi, c)
    else:                                   # a joining person's span measured in free time
        with np.errstate(invalid="ignore"):
            free_span = phi - _free_time(o_sorted - o_spans, p, slot, slot_start, chunk_elements)
        f = fifo_departures(phi, c, np.where(np.isfinite(free_span), free_span, 0.0))
    out = f + _count_before(g, f, strict=True) * slot        # n(f): slots starting at free time below f
    out = np.where(np.isfinite(o_sorted), out, np.inf)
    return _unmerged(p, p_order, p_sizes), _unmerged(out, o_order, o_sizes)


def _count_before(ref: np.ndarray, x: np.ndarray, strict: bool) -> np.ndarray:
    """Per draw, how many of ``ref`` lie below each ``x``: #(ref < x) if ``strict``, else #(ref <= x).

    ``ref`` (S, M) and ``x`` (S, K) in any order along axis 1; one stable sort of each
    draw's M + K values, O((M + K) log(M + K)) per draw instead of the M K comparisons.
    A NaN ``x`` gets some count (the callers' results are NaN there whatever it is).
    """
    S, m = ref.shape
    k = x.shape[1]
    # ties: the value placed first in the concatenation sorts first (stable sort)
    joined = np.concatenate((x, ref) if strict else (ref, x), axis=1)
    order = np.argsort(joined, axis=1, kind="stable")
    is_ref = (order >= k) if strict else (order < m)
    below = np.cumsum(is_ref, axis=1)                  # refs at or before each sorted position
    out = np.empty((S, k), dtype=below.dtype)
    pos_x = ~is_ref
    cols = order[pos_x].reshape(S, k) - (0 if strict else m)
    np.put_along_axis(out, cols, below[pos_x].reshape(S, k), axis=1)
    return out


def _free_time(x, p, slot, slot_start, chunk_elements):
    """Free time phi(x) = x - (time in the slots [p_i - 1/c, p_i] before x), per draw.

    Parameters
    ----------
    x : numpy.ndarray
        Clock times [s], shape (S, K).
    p, slot_start : numpy.ndarray
        Ends and starts [s] of the priority persons' slots, shape (S, M), ascending.
    slot : numpy.ndarray
        Slot length 1/c [s], shape (S, 1).

    Notes
    -----
    phi = x - done/c - inside, with done = #(p_i <= x) and inside the part of the
    slots not yet ended that lies before x, sum over p_i > x of clip(x - start_i, 0,
    1/c). The slots follow one another (p_i - p_(i-1) >= 1/c), so only the first one
    or two not ended (i = done, done + 1, the second by rounding) can hold a part of
    it: those two are summed; draws where a later slot starts before x as well are
    summed over all slots (the general rule). The result is bit for bit that of the
    sum over all slots (a sum of zeros and at most two terms).
    """
    S, M = p.shape
    if M == 0 or x.shape[1] == 0:
        return _free_time_all(x, p, slot, slot_start, chunk_elements)
    with np.errstate(invalid="ignore"):
        done = _count_before(p, x, strict=False)
        rows = np.arange(S)[:, None]
        inside = np.zeros(x.shape)
        for off in (0, 1):
            i = done + off
            ok = i < M
            st = slot_start[rows, np.minimum(i, M - 1)]
            part = np.clip(x - st, 0.0, slot)
            inside = inside + np.where(ok & (p[rows, np.minimum(i, M - 1)] > x), part, 0.0)
        i = done + 2                                 # a third slot starting before x: general rule
        late = (i < M) & (slot_start[rows, np.minimum(i, M - 1)] < x)
        bad = np.flatnonzero(late.any(axis=1) | ~np.isfinite(slot[:, 0]))
        phi = x - done * slot - inside
    if bad.size:
        phi[bad] = _free_time_all(x[bad], p[bad], slot[bad], slot_start[bad], chunk_elements)
    return phi


def _free_time_all(x, p, slot, slot_start, chunk_elements):
    """:func:`_free_time` summed over every slot (chunks of draws bound the memory)."""
    S = x.shape[0]
    step = max(1, chunk_elements // max(1, p.shape[1] * x.shape[1]))
    phi = np.empty_like(x)
    for lo in range(0, S, step):        # chunks of draws bound the memory; not a per-draw loop
        sl = slice(lo, lo + step)
        a = x[sl][:, :, None]
        w = slot[sl][:, :, None]
        with np.errstate(invalid="ignore"):
            done = (p[sl][:, None, :] <= a).sum(axis=2)
            inside = np.where(p[sl][:, None, :] > a,
                              np.clip(a - slot_start[sl][:, None, :], 0.0, w), 0.0).sum(axis=2)
            phi[sl] = x[sl] - done * slot[sl] - inside
    return phi


def density_for_flow(k, specific_flow_p_s_m, max_specific_flow=None) -> np.ndarray:
    """Crowd density that carries a given specific flow, on the uncongested branch.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s].
    specific_flow_p_s_m : float or array_like
        Specific flow Fs [persons/(s m) of effective width], >= 0.
    max_specific_flow : float or array_like, optional
        The element's tabulated maximum specific flow Fsm [persons/(s m)]. Given, the
        curve is scaled so that Fsm falls at the density of maximum flow
        (:func:`egressmargin.egress.movement.density_at_flow` of Fs/Fsm, the rule
        the flow model uses); None: the unscaled curve, whose peak is k/(4a).

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

    A flow above the peak is held at the peak: D = 1/(2a).

    Examples
    --------
    A 178/279 mm stair (k = 1.08 m/s) at its tabulated maximum 1.01 persons/(s m):
    on the unscaled curve 1.747; at the density of maximum flow with the scaled one.

    >>> round(float(density_for_flow(1.08, 1.01)), 3)
    1.747
    >>> round(float(density_for_flow(1.08, 1.01, 1.01)), 3)
    1.88
    """
    k = np.asarray(k, dtype=float)
    fs = np.asarray(specific_flow_p_s_m, dtype=float)
    if max_specific_flow is not None:
        return np.asarray(density_at_flow(fs / np.asarray(max_specific_flow, dtype=float)), dtype=float)
    disc = np.clip(1.0 - 4.0 * A_DENSITY_M2 * fs / k, 0.0, 1.0)
    return (1.0 - np.sqrt(disc)) / (2.0 * A_DENSITY_M2)


def crowd_speed(k, specific_flow_p_s_m, max_specific_flow=None) -> np.ndarray:
    """Walking speed in the crowd that carries a given specific flow.

    Parameters
    ----------
    k : float or array_like
        Speed constant of the element [m/s].
    specific_flow_p_s_m : float or array_like
        Specific flow Fs [persons/(s m)].
    max_specific_flow : float or array_like, optional
        Tabulated maximum specific flow Fsm (see :func:`density_for_flow`).

    Returns
    -------
    numpy.ndarray
        Speed [m/s]: S = k (1 - a D) with D from :func:`density_for_flow`; the
        unimpeded speed 0.85 k where D < 0.54 persons/m^2 (SFPE Handbook ch. 59,
        from memory; see :func:`egressmargin.egress.movement.speed`).

    Examples
    --------
    A stair of 178/279 mm (k = 1.08 m/s) discharging at capacity walks at k/2:

    >>> round(float(crowd_speed(1.08, 1.01, 1.01)), 3)
    0.54
    """
    return np.asarray(speed(k, density_for_flow(k, specific_flow_p_s_m, max_specific_flow)), dtype=float)


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
        F = (n - 1) / (last - first pass), at most the capacity; 0 where fewer than
        two persons pass (one person makes no crowd).

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
    return np.where(n < 2, 0.0, np.where(last > first, np.minimum(f, c), c))


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
    """How a route's occupants pass one element, per draw.

    Attributes
    ----------
    arrive_s, pass_s, leave_s : numpy.ndarray
        The last occupant reaches the element's entry, passes its bottleneck, and
        leaves it after walking its length [s from ignition], shape (S,).
    queue_s : numpy.ndarray
        Longest wait of any of the route's occupants at the element's entry [s], (S,).
    speed_m_s : numpy.ndarray
        Walking speed on the element [m/s], (S,) (crowd speed at and after the route's
        controlling element, unimpeded before it; times the speed factor).
    capacity_p_s : numpy.ndarray
        Capacity used [persons/s], (S,) (times the flow factor).
    density_p_m2 : numpy.ndarray
        Crowd density used for the speed [persons/m^2], (S,) (0 where unimpeded).
    arrive_each_s, pass_each_s, leave_each_s : numpy.ndarray or None
        The same three times for every occupant, shape (S, N), in the route's person
        order (column j: the (j + 1)-th to start in the draw), +inf for a person
        absent from the draw (beyond its occupant count, or never starting). From
        ``arrive_each_s`` to ``pass_each_s`` the person waits at the entry and passes
        it; from ``pass_each_s`` to ``leave_each_s`` they walk the element. None when
        :func:`simulate` was asked not to keep them.

    Notes
    -----
    Memory: three (S, N) float64 arrays, S x N x 8 x 3 bytes per element if counted
    separately (1000 occupants x 16000 draws: 384 MB). ``arrive_each_s`` is the same
    array object as the previous element's ``leave_each_s`` (the route's start times
    for the first element), and for a zero-length element (a door)
    ``leave_each_s`` is ``pass_each_s``, so an element adds at most S x N x 16
    bytes (256 MB in that example; 128 MB for a door).
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


def simulate(routes: list[NetRoute], priority: dict[str, list[str]] | None = None,
             per_person: bool | Collection[str] = True) -> tuple[dict[str, RouteFlow], dict[str, NodeFlow]]:
    """Pass every route's occupants through its path, sharing named elements.

    Parameters
    ----------
    routes : list of NetRoute
        The routes of one scenario.
    priority : dict of str to list of str, optional
        For a shared element id, the routes whose stream is already in it (merge rule
        of :func:`merge_priority`); other shared elements merge first come, first
        served (:func:`merge_fifo`).
    per_person : bool or collection of str
        Keep every occupant's times in :class:`ElementPass` (``arrive_each_s``,
        ``pass_each_s``, ``leave_each_s``; see its memory note): True for every
        route, or the ids of the routes to keep them for. False: only the last
        occupant's (S,) times.

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
    routes), then walk its length. Each person carries a passing span
    (:func:`fifo_departures`, :func:`passing_spans`): 0 at the start, so that N who
    start together pass the controlling element in N/Fc and elements with spare
    capacity add no time. The walking speed is the unimpeded speed upstream of the
    route's controlling element (where the queue absorbs the crowding, as in the hand
    method) and, at and after it, the speed at the crowd density with which the
    element carries the flow measured through it (:func:`transferred_flow`,
    :func:`egressmargin.egress.movement.crowd_density`: the density of maximum flow
    for an element discharging at capacity, unimpeded for a group too small to reach
    0.54 persons/m^2). A shared element's capacity is shared by the routes that reach
    it, draw by draw.
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
    spans: list[np.ndarray | None] = [None] * len(routes)         # None: 0, people start as points
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
            _pass_node(node, us, routes, ctrls, arrivals, spans, passes, nodes, priority.get(node, []),
                       per_person)
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


def _pass_node(node, us, routes, ctrls, arrivals, spans, passes, nodes, first_ids, per_person=True):
    S = routes[us[0][0]].starts_s.shape[0]
    el = routes[us[0][0]].elements[us[0][1]]
    factor = np.min(np.stack([np.broadcast_to(routes[u].flow_factor, (S,)) for u, _ in us]), axis=0)
    cap = el.capacity_p_s * factor
    streams = [arrivals[u] for u, _ in us]
    spans_in = [spans[u] for u, _ in us]
    ahead = [k for k, (u, _) in enumerate(us) if routes[u].id in first_ids]
    if ahead and len(ahead) < len(us):
        behind = [k for k in range(len(us)) if k not in ahead]
        d_ahead, d_behind = merge_priority([streams[k] for k in ahead], [streams[k] for k in behind], cap,
                                           spans_priority=[spans_in[k] for k in ahead],
                                           spans_others=[spans_in[k] for k in behind])
        deps = [None] * len(us)
        for k, d in zip(ahead, d_ahead):
            deps[k] = d
        for k, d in zip(behind, d_behind):
            deps[k] = d
        spans_out = _spans_any_order(streams, spans_in, deps)
    elif len(us) > 1:
        deps, spans_out = _fifo_merge(streams, spans_in, cap)
    else:
        deps = [fifo_departures(streams[0], cap, spans_in[0])]
        spans_out = [passing_spans(streams[0], spans_in[0], deps[0])]
    everyone = deps[0] if len(deps) == 1 else np.concatenate(deps, axis=1)
    flow = transferred_flow(everyone, cap)
    n_present = np.isfinite(everyone).sum(axis=1)
    density = np.asarray(crowd_density(flow / cap, n_present, el.length_m, el.effective_width_m), dtype=float)
    crowded = np.where(density < DENSITY_UNIMPEDED_P_M2, 0.0, density)
    leaves = []
    for (u, i), a, sp, d, sp_out in zip(us, streams, spans_in, deps, spans_out):
        route = routes[u]
        dens = np.where(i >= ctrls[u], crowded, 0.0)     # crowd speed at and after the controlling element
        v = np.broadcast_to(np.asarray(speed(el.k, dens), dtype=float), (S,)) * route.speed_factor
        leave = d + (el.length_m / v)[:, None] if el.length_m > 0 else d
        # wait at the entry: pass time less the pass time had the person been alone,
        # a + max(0, 1/c - span); an absent person (a = d = +inf) gives NaN, which fmax
        # skips, so the queue is the longest wait of the persons present (or 0)
        with np.errstate(invalid="ignore"):
            if sp is None:
                wait = d - a
                wait -= (1.0 / cap)[:, None]
            else:
                wait = np.subtract(sp, (1.0 / cap)[:, None])     # -max(0, 1/c - span), in place
                np.minimum(wait, 0.0, out=wait)
                wait += d
                wait -= a
        keep = per_person is True or (per_person is not False and route.id in per_person)
        passes[u].append(ElementPass(
            arrive_s=_last(a, route.counts), pass_s=_last(d, route.counts), leave_s=_last(leave, route.counts),
            queue_s=np.fmax(np.fmax.reduce(wait, axis=1), 0.0), speed_m_s=v, capacity_p_s=cap,
            density_p_m2=np.broadcast_to(dens, (S,)).copy(),
            arrive_each_s=a if keep else None, pass_each_s=d if keep else None,
            leave_each_s=leave if keep else None))
        arrivals[u] = leave
        spans[u] = sp_out
        leaves.append(_last(leave, route.counts))
    if len(us) > 1:
        nodes[node] = NodeFlow(node, [routes[u].id for u, _ in us], np.max(np.stack(leaves), axis=0),
                               np.sum([routes[u].counts for u, _ in us], axis=0), cap)
