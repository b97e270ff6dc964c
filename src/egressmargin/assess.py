"""ASET against RSET per escape route: margins, probability of failure, verdict,
dose along the route, and one-at-a-time sensitivity.

Pure computation on arrays prepared by :mod:`egressmargin.aset` and the egress
package; the pipeline decides what to run and writes the results.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import aset
from .criteria import CriteriaSet
from .egress import distributions as dist
from .egress.detection import rti_response
from .egress.movement import movement_time
from .egress.rset import compose_rset
from .stats import share, summarise
from .study import DetectorRule, RouteSpec
from .tenability.crossing import crossing_times_for_levels

#: Occupant count and walking speed are swept by +/-10 % in the sensitivity study
#: (the issue's choice; common practice for a one-at-a-time screen).
SWEEP_FRACTION = 0.10
#: Percentiles between which each uncertain input is swept (5th and 95th).
SWEEP_LOW, SWEEP_HIGH = 0.05, 0.95


@dataclass
class EgressDraws:
    """Uniform numbers for a route's uncertain egress inputs (common random numbers)."""

    detection: np.ndarray
    alarm: np.ndarray
    premovement: np.ndarray


def egress_uniforms(seed: int, route_index: int, S: int) -> EgressDraws:
    """Per-route uniform streams, independent of the scenario so every scenario sees the same people."""
    rng = np.random.default_rng([seed, 7919, route_index])
    return EgressDraws(rng.random(S), rng.random(S), rng.random(S))


def detection_times(rule, prep: aset.Prepared, factors: dict[str, np.ndarray], u: np.ndarray) -> np.ndarray:
    """Detection time [s] per sample: fixed, a distribution, or a rule on a location's series.

    A rule uses the same temperature or smoke factor of the sample as the ASET, since the
    detector sees the same (corrected) fire. Not activated by the end: +inf.
    """
    S = len(u)
    if not isinstance(rule, DetectorRule):
        return dist.ppf(rule, u)
    li = prep.ids.index(rule.location)
    with np.errstate(divide="ignore", invalid="ignore"):
        if rule.kind == "heat":
            has_series = prep.velocity is not None and bool(prep.present["velocity"][li])
            vel = prep.velocity[li] if has_series else rule.velocity_m_s   # the series wins
            link = rti_response(prep.t_s, prep.rise[li], vel, rule.rti)
            levels = (rule.activation_c - prep.amb_c[li]) / factors.get("temperature", np.ones(S))
            t = crossing_times_for_levels(prep.t_s, link, levels, "above")
        else:
            key = aset.smoke_factor_key(prep.smoke_kind[li])
            levels = rule.extinction_per_m / factors.get(key, np.ones(S))
            t = crossing_times_for_levels(prep.t_s, prep.extinction[li], levels, "above")
    return np.where(np.isnan(t), np.inf, t)


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
    p_fail: float
    verdict: str
    extras: dict = field(default_factory=dict)


def route_rset(route: RouteSpec, prep, factors, draws: EgressDraws, occupants_factor=1.0, speed_factor=1.0,
               quantiles: dict | None = None):
    """RSET samples and components for a route. ``quantiles`` overrides uniforms per input."""
    q = quantiles or {}
    u_det = np.full_like(draws.detection, q["detection"]) if "detection" in q else draws.detection
    u_al = np.full_like(draws.alarm, q["alarm"]) if "alarm" in q else draws.alarm
    u_pre = np.full_like(draws.premovement, q["premovement"]) if "premovement" in q else draws.premovement
    det = detection_times(route.detection, prep, factors, u_det)
    alarm = dist.ppf(route.alarm, u_al)
    pre = dist.ppf(route.premovement, u_pre)
    mv = movement_time(route.path, route.occupants * occupants_factor, route.movement_mode,
                       speed_factor=speed_factor)
    total, parts = compose_rset(det, alarm, pre, mv.total_s)
    return total, {"detection": parts["detection_s"], "alarm": parts["alarm_s"],
                   "premovement": parts["premovement_s"], "movement": parts["movement_s"]}, mv


def route_aset(loc_aset: np.ndarray, ids: list[str], exposed: list[str]) -> np.ndarray:
    """(S,) route ASET: the earliest of its exposed locations, sample by sample."""
    rows = [ids.index(x) for x in exposed]
    return loc_aset[rows].min(axis=0)


def outcome(route: RouteSpec, prep, factors, loc_aset, loc_aset_raw, governing_raw, draws,
            max_p_fail) -> RouteOutcome:
    rset, comps, mv = route_rset(route, prep, factors, draws)
    a = route_aset(loc_aset, prep.ids, route.exposed_at)
    rows = [prep.ids.index(x) for x in route.exposed_at]
    raw_vals = loc_aset_raw[rows]
    j = int(np.argmin(raw_vals))
    aset_raw = float(raw_vals[j])
    with np.errstate(invalid="ignore"):
        margin = a - rset
    fail = a < rset
    p_fail = share(fail)
    # governing location: the exposed location with the earliest median ASET
    med = [np.median(np.where(np.isfinite(loc_aset[r]), loc_aset[r], np.inf)) for r in rows]
    g = int(np.argmin(med))
    return RouteOutcome(rset, comps, mv, a, aset_raw, route.exposed_at[g] if np.isfinite(med[g]) else None,
                        governing_raw[rows[g]] if np.isfinite(med[g]) else None, margin, p_fail,
                        "pass" if p_fail <= max_p_fail else "fail")


# ----------------------------------------------------------------------------------------
# dose along the route
# ----------------------------------------------------------------------------------------

def exposure_windows(route: RouteSpec, mv, start_s: np.ndarray):
    """Time windows the last occupant spends on each path element, and the location of each.

    Assumptions (documented in the results): the last occupant leaves when everyone has
    finished pre-movement (``start_s``); walks each element at its unimpeded speed; waits the
    whole flow time (occupants / capacity of the controlling element) in the queue just
    before the controlling element; path elements are assigned to the ``exposed_at``
    locations in order, in proportion to distance along the path (a zero-length door takes
    the location at its position).
    """
    lengths = np.array([e["length_m"] for e in route.path], float)
    speeds = np.asarray(mv.speeds_m_s, float)
    walk = np.where(lengths > 0, lengths / speeds, 0.0)
    total_len = lengths.sum()
    n_loc = len(route.exposed_at)
    starts = np.concatenate([[0.0], np.cumsum(lengths)[:-1]])
    mids = starts + lengths / 2
    loc_index = np.minimum((mids / total_len * n_loc).astype(int) if total_len > 0 else
                           np.zeros(len(lengths), int), n_loc - 1)
    flow = np.broadcast_to(np.asarray(mv.flow_s, float), start_s.shape)
    windows = []
    t = start_s.copy()
    for e in range(len(route.path)):
        stay = walk[e] + (flow if e == mv.controlling else 0.0)
        windows.append((int(loc_index[e]), t.copy(), t + stay))
        t = t + stay
    return windows, t


def along_route_dose(route: RouteSpec, prep, criteria: CriteriaSet, factors, S: int, comps, mv) -> dict | None:
    """Dose received by the last occupant on the way out, per FED criterion."""
    start = comps["detection"] + comps["alarm"] + comps["premovement"]
    finite = np.isfinite(start)
    start = np.where(finite, start, prep.t_s[-1])
    windows, exit_t = exposure_windows(route, mv, start)
    rows = np.array([prep.ids.index(x) for x in route.exposed_at])
    out = {}
    for cid in ("fed_toxic", "fed_heat"):
        c = criteria.items.get(cid)
        if c is None:
            continue
        ok, _ = aset.status(prep, c)
        if not ok[rows].any():
            out[cid] = {"status": "not assessed", "limit": c.limit}
            continue
        fld = aset.dose_field(prep, c, factors, S, rows)
        dose = np.zeros(S)
        for j, t_in, t_out in windows:
            times = np.zeros((S, len(rows)))
            times_in, times_out = times.copy(), times.copy()
            times_in[:, j], times_out[:, j] = t_in, t_out
            d = fld.at_times(times_out) - fld.at_times(times_in)
            dose += np.where(ok[rows][j], d[:, j], 0.0)
        summary = summarise(dose, 4)
        out[cid] = {"status": "assessed", "limit": c.limit, **summary,
                    "exceeds_p": share(dose >= c.limit),
                    "within_limit_at_p95": summary["p95"] is not None and summary["p95"] < c.limit}
    beyond = share(exit_t > prep.t_s[-1])
    return {"criteria": out, "last_occupant_exit_s": summarise(exit_t, 1),
            "share_beyond_end": beyond,
            "assumptions": [
                "The last occupant starts moving when pre-movement ends (detection + alarm + pre-movement).",
                "Each path element is walked at its unimpeded speed; the whole flow time is spent queuing "
                "just before the controlling (least-capacity) element.",
                "Path elements are assigned to the exposed locations in order, in proportion to distance "
                "along the path; a door takes the location at its position.",
                "Doses accrue only while the occupant is at a location; after the end of the histories no "
                "further dose is counted" + (f" (this affects {beyond:.0%} of draws)" if beyond > 0 else "") + ".",
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


def sensitivity(route: RouteSpec, prep, sweep_factors, sweep_index, sweep_loc_aset, labels: dict) -> list[dict]:
    """One-at-a-time swing of the route's margin (at median inputs) for each uncertain input."""
    R = len(next(iter(sweep_factors.values()))) if sweep_factors else 1
    draws = EgressDraws(np.full(R, 0.5), np.full(R, 0.5), np.full(R, 0.5))
    a = route_aset(sweep_loc_aset, prep.ids, route.exposed_at)
    # Where no limit is reached before the histories end, the margin is at least the
    # time left: use the end time, and say that these margins are lower bounds.
    censored = ~np.isfinite(a)
    a = np.where(censored, prep.t_s[-1], a)
    rset, _, _ = route_rset(route, prep, sweep_factors, draws)
    margin = a - rset
    base = float(margin[0])
    rows = []
    for key, lo, hi in sweep_index:
        rows.append(_swing(labels.get(key, key), "p05", "p95", margin[lo], margin[hi]))
    base_f = {k: v[:1] for k, v in sweep_factors.items()}
    a0 = a[:1]
    one = EgressDraws(np.full(1, 0.5), np.full(1, 0.5), np.full(1, 0.5))
    for name, spec in (("detection", route.detection), ("alarm", route.alarm), ("premovement", route.premovement)):
        if isinstance(spec, DetectorRule) or dist.is_fixed(spec):
            continue
        m = []
        for qv in (SWEEP_LOW, SWEEP_HIGH):
            r, _, _ = route_rset(route, prep, base_f, one, quantiles={name: qv})
            m.append(float((a0 - r)[0]))
        rows.append(_swing(f"{name} time", "p05", "p95", *m))
    for label, kw in (("occupant count", "occupants_factor"), ("walking speed", "speed_factor")):
        m = []
        for f in (1 - SWEEP_FRACTION, 1 + SWEEP_FRACTION):
            r, _, _ = route_rset(route, prep, base_f, one, **{kw: f})
            m.append(float((a0 - r)[0]))
        rows.append(_swing(label, "-10 %", "+10 %", *m))
    rows.sort(key=lambda r: -(r["swing_s"] if r["swing_s"] is not None else np.inf))
    return [dict(r, base_margin_s=_finite(base), lower_bound=bool(censored.any())) for r in rows]


def _finite(x) -> float | None:
    x = float(x)
    return round(x, 2) if np.isfinite(x) else None


def _swing(name, low, high, m_low, m_high) -> dict:
    lo, hi = _finite(m_low), _finite(m_high)
    swing = None if lo is None or hi is None else round(abs(hi - lo), 2)
    return {"input": name, "low": low, "high": high, "margin_low_s": lo, "margin_high_s": hi, "swing_s": swing}
