"""Every occupant's exposure on the way out: each person's own doses and limits met.

The flow model gives, for every occupant of a route and every Monte Carlo draw, when
they reach each path element, pass its bottleneck and leave it
(:class:`egressmargin.egress.flow.ElementPass` ``arrive_each_s``, ``pass_each_s``,
``leave_each_s``, shape (S, N), the route's person order). A person's path visits, in
order:

* the route's ``start_at`` location from ignition until they start to move (none
  without ``start_at``: no dose is counted before moving);
* for each element, its *queue location* from reaching its entry until passing its
  bottleneck, then its *walk location* until leaving it
  (:func:`_queue_and_walk_locations`).

Doses (``fed_toxic``, ``fed_hypoxia``, ``fed_heat``) are each person's own: for every
component of a criterion, the person's dose at a location is the increase of the
location's cumulative dose (trapezoidal rule on the histories' grid, linearly
interpolated between samples, held at its last value after the end) from arriving to
leaving, summed over their stays. Purser's "or" (asphyxiant FED_IN or CO2 narcosis
F_CO2; Purser, SFPE Handbook 5th ed., 2016) is applied to the person's own two
accumulated doses: FED = max(FED_IN, F_CO2), each summed over the person's stays
separately, never to a location's running dose.

Limits that are not doses (temperature, visibility, radiant flux, layer height,
``fec_irritant``) are met by a person when any part of their stay at a location, of
positive length, overlaps a time when that location's corrected series is beyond the
limit (series linear between samples). Per location the time spent beyond the limit is
accumulated exactly (the part of each sample interval beyond the limit), so a person's
time beyond the limit is the difference at leaving and arriving, and they meet the limit
where it is > 0.

A person still inside when the histories end who has not yet reached the limit has an
undetermined exposure (conditions after the end are unknown): counted as exceeding
(the conservative reading), and the draw's maximum is then not given (NaN).

Model-uncertainty factors: each draw's corrected series are rebuilt with
:func:`egressmargin.aset.corrected_inputs` and :func:`egressmargin.aset.dose_rates`
(the same corrections as the ASET engine), once per distinct combination of factors in
a block of draws (one combination when nothing is uncertain), and integrated exactly.

Memory
------
Draws are processed in blocks: a block holds at most :data:`BLOCK_ELEMENTS` values per
(draws x locations x times) array and :data:`PERSON_BLOCK_ELEMENTS` per (draws x persons)
array, so the working memory does not grow with the number of draws: at most about
20 arrays of 16 MB (curves) plus 4 MB per (draws x persons) array, measured at about
0.3 GB peak for 1000 occupants x 16000 draws on a 1801-sample, 8-location history
(``tests/test_exposure.py`` checks that the peak does not grow with the draws). What is
kept per draw is a few (S,) arrays per criterion, plus each person's value in the first
:data:`FIGURE_DRAWS` draws for the dose-by-occupant figure. The flow model's per-person
arrays themselves take S x N x 8 bytes each (128 MB for 1000 x 16000), two or three per
path element; :func:`egressmargin.sizing.kept_bytes` counts them and the blocks before a run.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import aset
from .criteria import CriteriaSet, Criterion
from .tenability import irritants, visibility
from .tenability.crossing import cumulative_trapezoid
from .tenability.irritants import IRRITANT_GASES
from .verdict import FAIL, PASS, UNKNOWN

__all__ = ["Stay", "CriterionExposure", "OccupantExposure", "occupant_stays", "occupant_exposure",
           "assemble_exposures", "INSTANT_CRITERIA", "BLOCK_ELEMENTS", "PERSON_BLOCK_ELEMENTS", "FIGURE_DRAWS"]

#: Criteria met at an instant (a limit on a value, not a dose).
INSTANT_CRITERIA = ("temperature", "visibility", "heat_flux", "layer_height", "fec_irritant")
#: Largest (draws x locations x times) array of one block (project choice: 16 MB of float64).
BLOCK_ELEMENTS = 2_000_000
#: Largest (draws x persons) array of one block (project choice: 4 MB of float64).
PERSON_BLOCK_ELEMENTS = 500_000
#: Draws whose per-person values are kept for the dose-by-occupant figure (project choice:
#: percentiles over 1000 draws are steady to about 1 % of the band).
FIGURE_DRAWS = 1000
#: A time beyond a limit shorter than this is round-off, not an exceedance [s] (project choice).
TIME_TOLERANCE_S = 1e-9


@dataclass
class Stay:
    """A stay at ``location`` from ``t_in`` to ``t_out`` [s]: arrays (S, N) of every occupant
    here, (S,) of the last occupant in :func:`egressmargin.assess.location_history`."""

    location: str
    what: str
    t_in: np.ndarray
    t_out: np.ndarray


def _queue_and_walk_locations(route) -> list[tuple[str, str]]:
    """(queue location, walk location) of each path element, in path order.

    From :func:`egressmargin.egress.placement.element_places`: people walk an element at its
    location (its ``at``, else its nearest placed neighbour in path order) and wait for it in
    the location before it (the previous element's, or ``start_at`` for the first).
    """
    from .egress.placement import element_places

    return [(p.queue, p.walk) for p in element_places(route)]


def occupant_stays(route, egress) -> list[Stay]:
    """Every occupant's stays, in path order (see the module docstring).

    ``egress`` is an :class:`egressmargin.assess.RouteEgress` (``inputs.starts_s`` and
    ``flow.elements`` with the per-person arrays).
    """
    starts = egress.inputs.starts_s
    out = []
    if route.start_at:
        out.append(Stay(route.start_at, f"before moving, in {route.start_at}",
                        np.broadcast_to(np.zeros(1), starts.shape), starts))
    for i, ((q_loc, w_loc), ep) in enumerate(zip(_queue_and_walk_locations(route), egress.flow.elements)):
        kind = route.path[i]["type"]
        if ep.arrive_each_s is None:
            raise ValueError("the flow record holds no per-person times (ElementPass.arrive_each_s)")
        waiting = f"waiting at the {kind}" if kind == "door" else f"waiting to enter the {kind}"
        out.append(Stay(q_loc, f"{waiting} (path element {i + 1}), in {q_loc}",
                        ep.arrive_each_s, ep.pass_each_s))
        out.append(Stay(w_loc, f"walking the {kind} (path element {i + 1}), in {w_loc}",
                        ep.pass_each_s, ep.leave_each_s))
    return out


@dataclass
class CriterionExposure:
    """One criterion's exposure of a route's occupants, per draw.

    Attributes
    ----------
    cid : str
        Criterion id.
    kind : str
        "dose" (value: FED [-]) or "instant" (value: time spent where the limit is
        exceeded [s]).
    limit : float
        The criterion's limit (for "instant", the limit of the series; a person meets
        it when their value is > 0).
    assessed : bool
        False where no location the occupants visit can be assessed.
    worst : numpy.ndarray
        (S,) the most exposed occupant's value; NaN where some occupant's exposure is
        undetermined (the maximum is then not known).
    any_exceeds, any_undetermined : numpy.ndarray
        (S,) some occupant exceeds the limit; some occupant's exposure is undetermined.
    share_exceeding : numpy.ndarray
        (S,) share of the draw's occupants exceeding (undetermined counted as exceeding).
    worst_order : numpy.ndarray
        (S,) the most exposed occupant's place in the start order (1 = first).
    worst_stay : numpy.ndarray
        (S,) index (into the stays) where that occupant gained most of it.
    last, last_undetermined : numpy.ndarray
        (S,) the last occupant's value and whether it is undetermined.
    persons : numpy.ndarray
        (min(S, FIGURE_DRAWS), N) each person's value in the first draws; NaN absent,
        +inf undetermined.
    """

    cid: str
    kind: str
    limit: float
    assessed: bool
    worst: np.ndarray
    any_exceeds: np.ndarray
    any_undetermined: np.ndarray
    share_exceeding: np.ndarray
    worst_order: np.ndarray
    worst_stay: np.ndarray
    last: np.ndarray
    last_undetermined: np.ndarray
    persons: np.ndarray


@dataclass
class OccupantExposure:
    """Every criterion's :class:`CriterionExposure` and the stays they refer to."""

    criteria: dict[str, CriterionExposure]
    stays: list[Stay]
    counts: np.ndarray
    exit_s: np.ndarray
    end_s: float
    outcomes: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int8))
    #: (S,) end of each draw's data where draws end at different times (an ensemble); else None
    end_each_s: np.ndarray | None = None

    @property
    def assessed(self) -> bool:
        return any(c.assessed for c in self.criteria.values())


# ----------------------------------------------------------------------------------------
# per-location curves: cumulative dose per component, or time beyond the limit
# ----------------------------------------------------------------------------------------

def _factor_keys(prep: aset.Prepared, c: Criterion, rows: np.ndarray) -> list[str]:
    """The factor keys that correct the series of criterion ``c`` at ``rows``."""
    if c.id in aset.DOSE_CRITERIA:
        return aset.dose_names(prep, c)
    if c.id == "visibility":
        return sorted({aset.smoke_factor_key(prep.smoke_kind[r]) for r in rows if prep.smoke_kind[r]})
    if c.id == "fec_irritant":
        return [g for g in IRRITANT_GASES if g in prep.gases]
    return [c.id]


def _dose_curves(prep, c, f: dict[str, np.ndarray], rows) -> list[np.ndarray]:
    """Cumulative dose of each component (endpoint) of ``c``, (U, Lr, T), for U factor sets."""
    names = aset.dose_names(prep, c)
    U = next(iter(f.values())).shape[0] if f else 1
    inputs = aset.corrected_inputs(prep, names, {q: f[q][:, None, None] for q in names}, rows)
    shape = (U, rows.size, prep.t_s.size)
    return [cumulative_trapezoid(prep.t_s, np.broadcast_to(r, shape)) for r in aset.dose_rates(c, inputs)]


def _excess(prep, c, f: dict[str, np.ndarray], rows) -> np.ndarray:
    """(U, Lr, T) a series that is >= 0 exactly where the corrected series is beyond the limit."""
    lim = c.limit
    if c.id == "temperature":
        return prep.amb_c[rows, None][None] + prep.rise[rows][None] * f["temperature"][:, None, None] - lim
    if c.id == "heat_flux":
        return prep.flux[rows][None] * f["heat_flux"][:, None, None] - lim
    if c.id == "layer_height":
        return lim - prep.layer[rows][None] * f["layer_height"][:, None, None]
    if c.id == "visibility":
        # as in aset.single_series_times: a visibility series as given is checked as V / f,
        # any other smoke series as the extinction coefficient K f
        k_lim = visibility.extinction_limit(lim, c.params.get("sign_constant", 8.0))
        U = next(iter(f.values())).shape[0] if f else 1
        out = np.empty((U, rows.size, prep.t_s.size))
        for j, r in enumerate(rows):
            kind = prep.smoke_kind[r]
            fr = f.get(aset.smoke_factor_key(kind), np.ones(U))[:, None]
            if kind == "visibility":
                out[:, j] = lim - prep.visibility_given[r][None] / fr
            else:
                out[:, j] = prep.extinction[r][None] * fr - k_lim
        return out
    if c.id == "fec_irritant":
        gases = {g: prep.gases[g][rows][None] * f[g][:, None, None] for g in IRRITANT_GASES if g in prep.gases}
        return irritants.fec_irritant(**gases) - lim
    raise ValueError(f"not an instantaneous criterion: {c.id}")


def _beyond_curves(t_s: np.ndarray, excess: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Time spent beyond the limit, exactly, for a series linear between samples.

    Returns the cumulative time beyond the limit at each sample M (U, Lr, T) and, per
    sample interval, the start and end of its part beyond the limit s0, s1 (U, Lr, T-1)
    [s] (s0 = s1 where none; a series crosses the limit at most once in an interval).
    The time beyond up to x in interval k is M_k + clip(x - s0_k, 0, s1_k - s0_k).
    Only the curves that reach the limit somewhere are worked out.
    """
    shape = excess.shape
    T = shape[-1]
    flat = excess.reshape(-1, T)
    hit = np.flatnonzero(np.any(flat >= 0, axis=-1))          # NaN compares False: never beyond
    t0, t1 = t_s[:-1], t_s[1:]
    m = np.zeros(flat.shape)
    s0 = np.broadcast_to(t0, (flat.shape[0], T - 1)).copy()
    s1 = s0.copy()
    if hit.size:
        a, b = flat[hit, :-1], flat[hit, 1:]
        a = np.where(np.isnan(a), -np.inf, a)
        b = np.where(np.isnan(b), -np.inf, b)
        with np.errstate(invalid="ignore", divide="ignore"):
            frac = np.where(a != b, a / (a - b), 0.0)      # where the line crosses zero, in (0, 1)
        tc = t0 + np.nan_to_num(np.clip(frac, 0.0, 1.0)) * (t1 - t0)
        a_in, b_in = a >= 0, b >= 0
        lo = np.where(a_in, t0, np.where(b_in, tc, t0))
        hi = np.where(a_in, np.where(b_in, t1, tc), np.where(b_in, t1, t0))
        s0[hit], s1[hit] = lo, hi
        m[hit, 1:] = np.cumsum(hi - lo, axis=-1)
    return m.reshape(shape), s0.reshape(shape[:-1] + (T - 1,)), s1.reshape(shape[:-1] + (T - 1,))


# ----------------------------------------------------------------------------------------
# the computation
# ----------------------------------------------------------------------------------------

def _block_size(S: int, N: int, Lr: int, T: int) -> int:
    return int(max(1, min(S, BLOCK_ELEMENTS // max(1, Lr * T), PERSON_BLOCK_ELEMENTS // max(1, N))))


class _Times:
    """Index into the histories' grid and the clipped time, for one block's stay ends (cached)."""

    def __init__(self, t_s: np.ndarray, sl: slice):
        self.t, self.sl, self.cache = t_s, sl, {}

    def __call__(self, x: np.ndarray):
        key = id(x)
        if key not in self.cache:
            t = self.t
            xb = np.clip(x[self.sl], t[0], t[-1])
            i = np.clip(np.searchsorted(t, xb, side="right") - 1, 0, t.size - 2)
            self.cache[key] = (xb, i, (xb - t[i]) / (t[i + 1] - t[i]))
        return self.cache[key]


class _Running:
    """One criterion's per-draw results, filled block by block."""

    def __init__(self, c: Criterion, kind: str, ok: np.ndarray, fac: dict, S: int, N: int, F: int):
        self.c, self.kind, self.ok, self.fac = c, kind, ok, fac
        self.col = {int(j): k for k, j in enumerate(np.flatnonzero(ok))}      # route location -> curve row
        self.worst = np.full(S, np.nan)
        self.any_ex = np.zeros(S, bool)
        self.any_und = np.zeros(S, bool)
        self.share = np.zeros(S)
        self.order = np.zeros(S, int)
        self.stay = np.zeros(S, int)
        self.last = np.full(S, np.nan)
        self.last_und = np.zeros(S, bool)
        self.persons = np.full((F, N), np.nan)

    def result(self) -> CriterionExposure:
        return CriterionExposure(self.c.id, self.kind, self.c.limit, True, self.worst, self.any_ex, self.any_und,
                                 self.share, self.order, self.stay, self.last, self.last_und, self.persons)


def occupant_exposure(route, prep: aset.Prepared, criteria: CriteriaSet, factors: dict, S: int,
                      egress) -> OccupantExposure:
    """Every occupant's exposure for every criterion of the set, per draw.

    Parameters
    ----------
    route : RouteSpec
        The route (``start_at``, ``path``, ``exposed_at``).
    prep : aset.Prepared
        The scenario's series (internal units).
    criteria : CriteriaSet
        Every criterion of the set is followed: doses as each person's own dose,
        the others as a limit met while present.
    factors : dict
        Model-error factors by key, each (S,) (missing: 1).
    S : int
        Draws.
    egress : assess.RouteEgress
        The route's egress: ``inputs.starts_s`` and ``inputs.counts``, and
        ``flow.elements`` with the per-person arrays.

    Returns
    -------
    OccupantExposure
        With ``outcomes`` (S,): FAIL where some occupant exceeds some limit, UNKNOWN
        where none does but some occupant's exposure is undetermined, PASS otherwise.
    """
    stays = occupant_stays(route, egress)
    counts = np.asarray(egress.inputs.counts)
    N = egress.inputs.starts_s.shape[1]
    t = prep.t_s
    end = float(t[-1])
    exit_each = egress.flow.elements[-1].leave_each_s
    locs = list(dict.fromkeys(s.location for s in stays))
    rows = np.array([prep.ids.index(x) for x in locs])
    where = [locs.index(s.location) for s in stays]
    B = _block_size(S, N, len(locs), t.size)
    F = min(S, FIGURE_DRAWS)
    results: dict[str, CriterionExposure | _Running] = {}
    for cid, c in criteria.items.items():
        kind = "dose" if cid in aset.DOSE_CRITERIA else "instant" if cid in INSTANT_CRITERIA else None
        if kind is None:
            continue
        ok_all, _ = aset.status(prep, c)
        ok = ok_all[rows]
        if not ok.any():
            results[cid] = _not_assessed(cid, kind, c.limit, S, N, F)
            continue
        keys = _factor_keys(prep, c, rows[ok])
        fac = {k: np.broadcast_to(np.asarray(factors.get(k, 1.0), float), (S,)) for k in keys}
        results[cid] = _Running(c, kind, ok, fac, S, N, F)
    running = [r for r in results.values() if isinstance(r, _Running)]
    for lo in range(0, S, B):
        sl = slice(lo, min(S, lo + B))
        times = _Times(t, sl)                 # shared by every criterion of the block
        present = np.arange(N)[None, :] < counts[sl, None]
        inside = present & ~(exit_each[sl] <= end)
        for run in running:
            _block(run, prep, rows, stays, where, times, sl, present, inside, counts)
    results = {cid: (r.result() if isinstance(r, _Running) else r) for cid, r in results.items()}
    ex = OccupantExposure(results, stays, counts, exit_each[np.arange(S), counts - 1], end)
    ex.outcomes = occupant_outcomes(ex, S)
    return ex


#: The per-draw (S,) arrays of a :class:`CriterionExposure`, in draw order.
_PER_DRAW = ("worst", "any_exceeds", "any_undetermined", "share_exceeding", "worst_order", "worst_stay", "last",
             "last_undetermined")


def assemble_exposures(parts, S: int, stays: list[Stay], counts, exit_s, end_s: float,
                       end_each_s=None) -> OccupantExposure:
    """One exposure record over S draws from records on disjoint subsets of them.

    Parameters
    ----------
    parts : list of (numpy.ndarray, OccupantExposure)
        Draw indices (ascending, disjoint, together every draw) and the record evaluated
        on those draws, in that order (an ensemble: each member's draws on its own
        histories, :meth:`egressmargin.ensemble.Ensemble.occupant_exposure`).
    S : int
        Draws.
    stays, counts, exit_s
        Of the whole set of draws: every occupant's stays, the occupant count (S,) and
        the last occupant's exit (S,) [s].
    end_s : float
        The latest end of data [s] (the wording of the verdict).
    end_each_s : numpy.ndarray, optional
        (S,) each draw's own end of data [s].

    Returns
    -------
    OccupantExposure
        Every per-draw array placed at its draws; each person's values for the figure
        (the first :data:`FIGURE_DRAWS` draws) likewise; a criterion is assessed where
        some part assesses it (draws of a part that does not are PASS for it); the
        outcomes follow per draw (:func:`occupant_outcomes`).
    """
    F = min(S, FIGURE_DRAWS)
    crits = {}
    for cid, ce0 in parts[0][1].criteria.items():
        N = ce0.persons.shape[1]
        arrays = {name: np.zeros(S, getattr(ce0, name).dtype) for name in _PER_DRAW}
        persons = np.full((F, N), np.nan)
        for idx, ex in parts:
            ce = ex.criteria[cid]
            for name in _PER_DRAW:
                arrays[name][idx] = getattr(ce, name)
            k = int(np.count_nonzero(idx < F))        # ascending: the part's first k draws are below F
            persons[idx[:k]] = ce.persons[:k]
        assessed = any(ex.criteria[cid].assessed for _, ex in parts)
        crits[cid] = CriterionExposure(cid, ce0.kind, ce0.limit, assessed, persons=persons, **arrays)
    ex = OccupantExposure(crits, stays, np.asarray(counts), np.asarray(exit_s, float), float(end_s),
                          end_each_s=None if end_each_s is None else np.asarray(end_each_s, float))
    ex.outcomes = occupant_outcomes(ex, S)
    return ex


def occupant_outcomes(ex: OccupantExposure, S: int) -> np.ndarray:
    """(S,) FAIL, UNKNOWN or PASS per draw over every assessed criterion (see :func:`occupant_exposure`)."""
    out = np.full(S, PASS, np.int8)
    assessed = [c for c in ex.criteria.values() if c.assessed]
    if assessed:
        out[np.any([c.any_undetermined for c in assessed], axis=0)] = UNKNOWN
        out[np.any([c.any_exceeds for c in assessed], axis=0)] = FAIL
    return out


def _not_assessed(cid, kind, limit, S, N, F) -> CriterionExposure:
    nan = np.full(S, np.nan)
    no = np.zeros(S, bool)
    return CriterionExposure(cid, kind, limit, False, nan, no, no, np.zeros(S), np.zeros(S, int),
                             np.zeros(S, int), nan, no, np.full((F, N), np.nan))


def _block(run: _Running, prep, rows, stays, where, times: _Times, sl: slice, present, inside, counts) -> None:
    """One block of draws of one criterion: every person's value, then the per-draw results."""
    c, kind, t = run.c, run.kind, prep.t_s
    nb, N = present.shape
    keys = list(run.fac)
    if keys:
        combos, inverse = np.unique(np.stack([run.fac[k][sl] for k in keys], axis=1), axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
    else:
        combos, inverse = np.ones((1, 0)), np.zeros(nb, int)
    f = {k: combos[:, j] for j, k in enumerate(keys)}
    rows_ok = rows[run.ok]
    Lr = rows_ok.size
    if kind == "dose":
        curves = _dose_curves(prep, c, f, rows_ok)
        live = np.any([np.any(cur[:, :, -1] > 0, axis=0) for cur in curves], axis=0)       # (Lr,)
    else:
        curves = [_beyond_curves(t, _excess(prep, c, f, rows_ok))]
        live = np.any(curves[0][0][:, :, -1] > 0, axis=0)
    base = inverse[:, None] * Lr                                          # (nb, 1)
    totals = [np.zeros((nb, N)) for _ in curves]
    best = np.full((nb, N), -np.inf)
    best_k = np.zeros((nb, N), int)
    seen: dict = {}          # a stay's end is often the next stay's start at the same location

    def at(x, j, m):
        key = (id(x), j, m)
        if key not in seen:
            xb, i, w = times(x)
            if kind == "dose":
                flat = curves[m].reshape(-1)
                idx = (base + j) * t.size + i
                seen[key] = flat[idx] * (1 - w) + flat[idx + 1] * w
            else:
                mm, s0, s1 = curves[m]
                idx = (base + j) * t.size + i
                idx1 = (base + j) * (t.size - 1) + i
                a0, a1 = s0.reshape(-1)[idx1], s1.reshape(-1)[idx1]
                seen[key] = mm.reshape(-1)[idx] + np.clip(xb - a0, 0.0, a1 - a0)
        return seen[key]

    for k, stay in enumerate(stays):
        j = run.col.get(where[k])
        if j is None or not live[j]:
            continue                                                      # nothing to gain there
        gained = np.zeros((nb, N))
        for m in range(len(curves)):
            d = at(stay.t_out, j, m) - at(stay.t_in, j, m)
            totals[m] += d
            np.maximum(gained, d, out=gained)
        better = gained > best
        best = np.where(better, gained, best)
        best_k = np.where(better, k, best_k)
    value = np.maximum.reduce(totals) if len(totals) > 1 else totals[0]   # Purser's "or": the person's own
    exceeds = present & ((value >= c.limit) if kind == "dose" else (value > TIME_TOLERANCE_S))
    undetermined = inside & ~exceeds
    key = np.where(present, np.where(undetermined, np.inf, value), -np.inf)
    arg = np.argmax(key, axis=1)
    rr = np.arange(nb)
    run.any_ex[sl] = exceeds.any(axis=1)
    run.any_und[sl] = undetermined.any(axis=1)
    top = np.max(np.where(present, value, -np.inf), axis=1)
    run.worst[sl] = np.where(run.any_und[sl], np.nan, top)
    run.share[sl] = (exceeds | undetermined).sum(axis=1) / counts[sl]
    run.order[sl] = arg + 1
    run.stay[sl] = best_k[rr, arg]
    li = counts[sl] - 1
    run.last[sl] = value[rr, li]
    run.last_und[sl] = undetermined[rr, li]
    F = run.persons.shape[0]
    if sl.start < F:
        n = min(F, sl.stop) - sl.start
        run.persons[sl.start:sl.start + n] = np.where(present, np.where(undetermined, np.inf, value), np.nan)[:n]


# ----------------------------------------------------------------------------------------
# results: the occupants block, the occupant-exposure verdict
# ----------------------------------------------------------------------------------------

def ordinal(n: int) -> str:
    """``1st``, ``2nd``, ``3rd``, ``4th``, ``11th``, ``21st`` ...

    >>> [ordinal(k) for k in (1, 2, 3, 4, 11, 12, 13, 21, 102, 214)]
    ['1st', '2nd', '3rd', '4th', '11th', '12th', '13th', '21st', '102nd', '214th']
    """
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def criterion_outcomes(ce: CriterionExposure) -> np.ndarray:
    """(S,) FAIL where some occupant exceeds, UNKNOWN where none does but some is undetermined."""
    out = np.full(ce.any_exceeds.shape, PASS, np.int8)
    out[ce.any_undetermined] = UNKNOWN
    out[ce.any_exceeds] = FAIL
    return out


def _signature(values: list[np.ndarray]) -> np.ndarray:
    """Per-draw numbers that differ between draws whenever the draws differ (determinism test)."""
    return np.vstack([np.where(np.isfinite(v), v, np.inf) for v in values])


def _decide(outcomes, signature, exit_s, end_s, max_p_fail, assessed=True, max_samples=None, schedule=None):
    from .verdict import decide

    looks = len(schedule) if schedule else 1
    return decide(signature, np.broadcast_to(exit_s, signature.shape), end_s, max_p_fail, assessed=assessed,
                  max_samples=max_samples, outcomes=outcomes, looks=looks, schedule=schedule)


def most_exposed(ce: CriterionExposure, stays: list[Stay], counts: np.ndarray) -> dict | None:
    """Where and who: the most exposed occupant's median place in the start order and the stay
    where that occupant gained most of it (the most frequent over the draws); None where no
    occupant is exposed at all (an instantaneous limit met by nobody in any draw)."""
    if not ce.assessed:
        return None
    exposed = np.nan_to_num(ce.worst, nan=np.inf) > 0
    if not exposed.any():
        return None
    order = int(np.rint(np.median(ce.worst_order[exposed])))
    k = int(np.argmax(np.bincount(ce.worst_stay[exposed], minlength=len(stays))))
    n = int(np.rint(np.median(counts)))
    stay = stays[k]
    return {"order_p50": order, "location": stay.location, "what": stay.what, "occupants_p50": n,
            "share_of_draws": round(float(np.mean(ce.worst_stay[exposed] == k)), 4),
            "words": f"the {ordinal(order)} of {n} to start, {stay.what}"}


def occupants_json(ce: CriterionExposure, ex: OccupantExposure, rset_s: np.ndarray) -> dict:
    """The ``occupants`` block of one criterion (results.json, contract "Added in turn 3")."""
    from .stats import summarise

    out = criterion_outcomes(ce)
    # only p_fail and its interval are read here (a descriptive 95 % interval on P(any occupant
    # exceeds), one look); the acceptance limit decide() needs plays no part in them
    v = _decide(out, _signature([ce.worst, ce.share_exceeding, ce.worst_order.astype(float)]), rset_s, ex.end_s,
                max_p_fail=1.0)
    share = ce.share_exceeding
    block = {
        "max": summarise(ce.worst, 4 if ce.kind == "dose" else 1),
        "p_any_exceeds": round(v.p_fail, 4),
        "p_any_exceeds_ci95": [round(v.ci95[0], 4), round(v.ci95[1], 4)],
        "p_any_exceeds_bounds": {"low": round(v.p_fail_low, 4), "high": round(v.p_fail, 4)},
        "share_exceeding": {"mean": round(float(np.mean(share)), 4),
                            "p95": round(float(np.percentile(share, 95)), 4)},
        "most_exposed": most_exposed(ce, ex.stays, ex.counts),
    }
    if ce.kind == "instant":
        block["max_is"] = "the longest time [s] an occupant spends where the limit is exceeded"
    return block


def occupant_verdict(ex: OccupantExposure, rset_s: np.ndarray, max_p_fail: float, max_samples: int | None = None,
                     schedule: list[int] | None = None):
    """The occupant-exposure verdict: P(any occupant exceeds a limit while present) against
    ``max_p_fail``, by :func:`egressmargin.verdict.decide` on the per-draw outcomes (same
    three-valued rule and interval as the route verdict, corrected for the planned looks
    ``schedule`` of the sequential rule), with its reason in these words."""
    from dataclasses import replace

    from .probability_text import probability
    from .verdict import look_level

    values = []
    for ce in ex.criteria.values():
        values += [ce.worst, ce.share_exceeding]
    sig = _signature(values or [np.zeros(ex.outcomes.size)])
    v = _decide(ex.outcomes, sig, rset_s, ex.end_s, max_p_fail, assessed=ex.assessed, max_samples=max_samples,
                schedule=schedule)
    if not ex.assessed:
        return v
    lvl = look_level(v.looks)

    def est(x, interval):
        if v.deterministic:
            return f"is {probability(x, limit=max_p_fail)} (every draw is the same: no input is uncertain)"
        return f"is estimated at {probability(x, interval, level=lvl, draws=v.samples_used, limit=max_p_fail)}"

    lim = probability(max_p_fail)
    what = "the probability that any occupant exceeds a limit while present"
    worst = _worst_words(ex)
    if v.verdict == "pass":
        reason = (f"Passes on occupant exposure: {what} {est(v.p_fail, v.ci95)}, whose upper end is within the "
                  f"acceptance limit of {lim}.")
    elif v.verdict == "fail":
        reason = (f"Fails on occupant exposure: {what}, counting draws the data cannot decide as passes, "
                  f"{est(v.p_fail_low, v.ci95_low)}, whose lower end is above the acceptance limit of {lim}.")
    elif v.share_unknown > 0 and v.p_fail_low <= max_p_fail < v.p_fail:
        reason = (f"Indeterminate on occupant exposure: {what} lies between {probability(v.p_fail_low)} and "
                  f"{probability(v.p_fail)}; in {probability(v.share_unknown)} of draws some occupant is still inside "
                  f"when the histories end at {ex.end_s:.0f} s without having reached a limit: extend the simulations.")
    else:
        reason = (f"Indeterminate on occupant exposure: {what} {est(v.p_fail, v.ci95)}, an interval that straddles "
                  f"the acceptance limit of {lim}; more draws (max_samples) would settle it.")
    if worst:
        reason += " " + worst
    return replace(v, reason=reason)


def _worst_words(ex: OccupantExposure) -> str:
    """One sentence naming the criterion most often exceeded and its most exposed occupant."""
    cands = [(float(np.mean(ce.any_exceeds | ce.any_undetermined)), cid, ce) for cid, ce in ex.criteria.items()
             if ce.assessed]
    cands = [c for c in cands if c[0] > 0]
    if not cands:
        return ""
    p, cid, ce = max(cands, key=lambda c: c[0])
    me = most_exposed(ce, ex.stays, ex.counts)
    if me is None:
        return ""
    from .probability_text import percent

    return f"Most often exceeded: {cid} (in {percent(p)} of draws); most exposed: {me['words']}."


_RANK = {"fail": 2, "indeterminate": 1, "pass": 0}


def governing(basis: str, route_v, occupant_v):
    """The verdict that governs a route under ``basis`` (both: the worse of the two; a tie: route ASET)."""
    if basis == "route-aset" or occupant_v is None:
        return route_v
    if basis == "occupants":
        return occupant_v
    return occupant_v if _RANK.get(occupant_v.verdict, 1) > _RANK.get(route_v.verdict, 1) else route_v


def person_bands(ex: OccupantExposure) -> dict:
    """Per dose criterion, each occupant's dose over the first draws: p05, p50, p95 (N,) and the limit.

    For the dose-by-occupant figure. A person absent in a draw (fewer occupants drawn) is
    left out of that draw; an undetermined dose counts as above every value, so a
    percentile it reaches is +inf (not drawn).
    """
    out = {}
    for cid, ce in ex.criteria.items():
        if ce.kind != "dose" or not ce.assessed:
            continue
        x = ce.persons
        keep = ~np.all(np.isnan(x), axis=0)
        x = x[:, keep]
        with np.errstate(invalid="ignore"):
            q = np.nanpercentile(np.where(np.isinf(x), np.finfo(float).max, x), [5, 50, 95], axis=0)
        q = np.where(q >= np.finfo(float).max / 2, np.inf, q)
        out[cid] = {"p05": q[0], "p50": q[1], "p95": q[2], "limit": ce.limit, "draws": int(x.shape[0])}
    return out
