"""The verdict of a route: three outcomes per draw, an interval on p_fail, a decision.

Per Monte Carlo draw the comparison of ASET and RSET has three outcomes, because the
histories end at ``end_s`` and nothing is known after that:

* **fail**: a limit is reached within the data before the occupants are out
  (ASET <= end_s and ASET < RSET; RSET may lie beyond the data or be infinite when the
  fire is never detected);
* **pass**: the occupants are out within the data no later than the limit is reached
  (RSET <= end_s and RSET <= ASET; ASET may lie beyond the data);
* **unknown**: neither is known: no limit is reached within the data and the occupants
  are not out within it (ASET and RSET both beyond end_s, including a detector that
  never responds while no limit is reached).

From the counts, ``p_fail`` counts unknown draws as failures (the conservative figure),
``p_fail_bounds`` gives both readings, and ``p_fail_ci95`` is the sampling interval
on the conservative figure. The route passes only when the conservative interval lies
within the acceptance limit, fails only when even the optimistic bound's interval lies
above it, and is indeterminate otherwise.

**Sequential rule.** Where an interval straddles the limit the pipeline draws again with
2x, 4x, ... the draws, up to ``max_samples``: the planned looks
(:func:`planned_looks`) are known before any draw is made. Re-testing a 95 % interval
at every look would not hold its error (repeated significance tests: at a true p_fail
equal to the limit, four looks pass about 7 % of runs, not 2.5 %). So the error is
spent across the K planned looks by the Bonferroni (union) bound: each look uses a
two-sided 1 - 0.05/K interval, i.e. 0.025/K per side, and the whole procedure, all
looks together, then holds P(pass | p_fail >= limit) <= 2.5 % and
P(fail | p_fail <= limit) <= 2.5 %. The interval at each look is the Clopper-Pearson
exact interval, whose one-sided error is at most its nominal level for every n and p
(unlike Wilson's, which is only approximately so); with the union bound this makes the
guarantee hold exactly, not asymptotically. The union bound needs no independence
between looks. In this project the draws of a larger look are neither independent of
nor an extension of the smaller one: :func:`egressmargin.pipeline.draw_scenario_factors`
and :func:`egressmargin.assess.egress_uniforms` draw fresh arrays of the larger size from
the same seeded generators, so an array drawn first from its generator is a prefix of the
larger look's, while one drawn after another array of the same generator is a shifted
part of its stream (the looks are partly nested, partly overlapping, neither independent
nor a plain extension); the union bound holds whatever the dependence.
Stopping early is only ever to pass or fail with the look's own corrected interval, or
to say "indeterminate" (never an error). The operating characteristic is measured in
``bench/operating_characteristic.py`` and checked in ``tests/test_sequential.py``.

Pure functions of arrays; the pipeline calls :func:`decide` and serialises the record.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .probability_text import percent
from .probability_text import probability as prob

__all__ = ["FAIL", "PASS", "UNKNOWN", "Z_95", "ALPHA", "Verdict", "draw_outcomes",
           "clopper_pearson", "planned_looks", "look_level", "ci_method", "settle", "sequential",
           "decide", "needs_more_samples", "could_settle"]

FAIL, PASS, UNKNOWN = 0, 1, 2

#: Two-sided 95 % standard normal quantile, Phi^-1(0.975) = 1.959964: the value of
#: scipy.stats.norm.ppf(0.975), typed in (the tests check it against scipy). Not
#: :data:`egressmargin.egress.distributions.Z_95`, which is the one-sided Phi^-1(0.95).
Z_95: float = 1.959963984540054

#: Two-sided error of the whole verdict procedure, all looks together: 5 %, i.e. at most
#: 2.5 % false passes and 2.5 % false fails (project choice: the usual 95 % of the trade's
#: "95 % interval", now held by the procedure rather than by one look).
ALPHA: float = 0.05


def planned_looks(samples: int, max_samples: int | None = None) -> list[int]:
    """The draws at each planned look: samples, 2 samples, 4 samples, ... capped at max_samples.

    Parameters
    ----------
    samples : int
        Draws at the first look.
    max_samples : int, optional
        The most draws; None or anything not above ``samples`` means one look.

    Examples
    --------
    >>> planned_looks(2000, 16000), planned_looks(500, 4000), planned_looks(400, 1000), planned_looks(50, 10)
    ([2000, 4000, 8000, 16000], [500, 1000, 2000, 4000], [400, 800, 1000], [50])
    """
    looks = [int(samples)]
    top = int(max_samples or 0)
    while looks[-1] < top:
        looks.append(min(2 * looks[-1], top))
    return looks


def look_level(looks: int = 1) -> float:
    """Two-sided confidence level of the interval at each of ``looks`` planned looks: 1 - ALPHA/looks.

    Bonferroni over the looks (the union bound: P(any of K events) <= sum of their
    probabilities; applied to repeated looks at accumulating data e.g. in Jennison &
    Turnbull (2000), Group Sequential Methods with Applications to Clinical Trials,
    Chapman & Hall/CRC, ch. 1 -- chapter from memory).

    >>> look_level(1), look_level(4)
    (0.95, 0.9875)
    """
    return 1.0 - ALPHA / max(int(looks), 1)


def _level_text(level: float) -> str:
    return f"{100 * level:.4g} %"


def ci_method(looks: int = 1, schedule: list[int] | None = None) -> str:
    """How the interval on p_fail is computed and the decision made, in words (results and report).

    >>> ci_method(1)[:60]
    'Clopper-Pearson exact binomial interval, 95 % two-sided (Clo'
    """
    k = max(int(looks), 1)
    cp = (f"Clopper-Pearson exact binomial interval, {_level_text(look_level(k))} two-sided "
          "(Clopper & Pearson 1934, Biometrika 26, 404-413)")
    if k == 1:
        return (cp + "; one look, so P(pass | p_fail >= limit) and P(fail | p_fail <= limit) are each "
                "at most 2.5 %; p_fail_ci95 is the interval used for the decision")
    at = "" if not schedule else f" ({', '.join(str(n) for n in schedule)} draws)"
    return (cp + f" at each of {k} planned looks{at}: sequential rule with the 5 % error spent equally "
            f"over the looks (Bonferroni union bound, 2.5 %/{k} per side per look), so over all looks "
            "together P(pass | p_fail >= limit) <= 2.5 % and P(fail | p_fail <= limit) <= 2.5 %; "
            "p_fail_ci95 is the interval used for the decision at the last look taken")


#: How the interval on p_fail is computed with a single look (kept for callers that make one).
CI_METHOD = ci_method(1)


def draw_outcomes(aset_s, rset_s, end_s: float) -> np.ndarray:
    """Outcome of each draw: FAIL, PASS or UNKNOWN (see the module docstring).

    Parameters
    ----------
    aset_s : array_like, shape (S,)
        ASET per draw [s]; +inf or NaN where no limit is reached by ``end_s``.
    rset_s : array_like, shape (S,)
        RSET per draw [s]; +inf where the fire is never detected.
    end_s : float or array_like, shape (S,)
        Last time of the histories [s], counted from ignition; per draw for an ensemble.

    Returns
    -------
    numpy.ndarray of int8, shape (S,)

    Examples
    --------
    >>> draw_outcomes([100.0, float("inf"), float("inf"), 50.0], [200.0, 250.0, 400.0, float("inf")], 300.0).tolist()
    [0, 1, 2, 0]
    """
    a = np.asarray(aset_s, float)
    r = np.asarray(rset_s, float)
    a = np.where(np.isnan(a), np.inf, a)
    r = np.where(np.isnan(r), np.inf, r)
    eps = 1e-9 * np.maximum(1.0, np.abs(end_s))   # float round-off at the end time (project choice)
    a_in = a <= end_s + eps
    r_in = r <= end_s + eps
    out = np.full(a.shape, UNKNOWN, np.int8)
    out[a_in & (a < r)] = FAIL
    out[r_in & (r <= a)] = PASS
    return out


def worst_outcome(outcomes) -> np.ndarray:
    """Combine outcomes of several places per draw: any fail fails; else any undecided is undecided.

    Parameters
    ----------
    outcomes : array_like, shape (L, S)

    Examples
    --------
    >>> worst_outcome([[PASS, PASS, FAIL], [UNKNOWN, PASS, PASS]]).tolist()
    [2, 1, 0]
    """
    o = np.asarray(outcomes)
    out = np.full(o.shape[1:], PASS, np.int8)
    out[(o == UNKNOWN).any(axis=0)] = UNKNOWN
    out[(o == FAIL).any(axis=0)] = FAIL
    return out


def clopper_pearson(k, n, level: float = 0.95):
    """Clopper-Pearson exact interval for a binomial proportion k/n (vectorised).

    Parameters
    ----------
    k, n : array_like of int
        Successes and trials; n >= 1.
    level : float
        Two-sided confidence level, e.g. 0.95.

    Returns
    -------
    (low, high) : numpy.ndarray or float
        low = B(a/2; k, n-k+1) (0 when k = 0), high = B(1-a/2; k+1, n-k) (1 when k = n),
        B the beta quantile, a = 1 - level.

    Notes
    -----
    Clopper, C. J. and Pearson, E. S. (1934). The use of confidence or fiducial limits
    illustrated in the case of the binomial. Biometrika 26(4), 404-413; beta-quantile
    form as in Brown, Cai & DasGupta (2001), Statist. Sci. 16, 101-133, section 2.1.
    Each one-sided error is at most a/2 for every n and true p.

    Examples
    --------
    >>> [round(float(x), 6) for x in clopper_pearson(0, 2000)]
    [0.0, 0.001843]
    """
    from scipy.stats import beta     # scipy is a dependency; imported here to keep import light

    k = np.asarray(k, float)
    n = np.asarray(n, float)
    a = 1.0 - float(level)
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = np.where(k > 0, beta.ppf(a / 2, np.maximum(k, 1e-300), n - k + 1), 0.0)
        hi = np.where(k < n, beta.ppf(1 - a / 2, k + 1, np.maximum(n - k, 1e-300)), 1.0)
    if lo.ndim == 0:
        return float(lo), float(hi)
    return lo, hi


def settle(k_fail, k_unknown, n, max_p_fail: float, looks: int = 1):
    """The decision at one look from counts (vectorised): PASS, FAIL, or UNKNOWN (not settled).

    Parameters
    ----------
    k_fail, k_unknown, n : array_like of int
        Draws that fail, draws the data cannot decide, and all draws, at this look.
    max_p_fail : float
        Acceptance limit.
    looks : int
        Planned looks K of the sequential rule; the interval is at level 1 - ALPHA/K.

    Returns
    -------
    numpy.ndarray of int8
        PASS where the upper end of the interval on (k_fail + k_unknown)/n is <= the limit;
        FAIL where the lower end of the interval on k_fail/n is > the limit; UNKNOWN otherwise.

    Examples
    --------
    >>> settle([10, 200, 100], [0, 0, 0], [2000, 2000, 2000], 0.05, looks=4).tolist()
    [1, 0, 2]
    """
    lvl = look_level(looks)
    k_fail = np.asarray(k_fail)
    k_unknown = np.asarray(k_unknown)
    n = np.asarray(n)
    _, hi = clopper_pearson(k_fail + k_unknown, n, lvl)
    lo, _ = clopper_pearson(k_fail, n, lvl)
    out = np.full(np.broadcast(k_fail, k_unknown, n).shape, UNKNOWN, np.int8)
    out[np.asarray(hi) <= max_p_fail] = PASS
    out[np.asarray(lo) > max_p_fail] = FAIL
    return out


@dataclass(frozen=True)
class Verdict:
    """What the draws say about one route (the contract's route keys)."""

    verdict: str                      # "pass" | "fail" | "indeterminate"
    reason: str
    p_fail: float                     # unknown counted as fail
    p_fail_low: float                 # unknown counted as pass
    ci95: tuple[float, float]         # interval on p_fail
    ci95_low: tuple[float, float]     # interval on p_fail_low (used for "fail")
    samples_used: int
    share_unknown: float
    deterministic: bool
    looks: int = 1                    # planned looks of the sequential rule
    method: str = CI_METHOD           # how ci95 was computed, in words (results' p_fail_method)

    def as_results(self) -> dict:
        # Six decimals (project choice): p_fail = k/n with n up to 16000 draws is a multiple of
        # 1/16000 = 0.0000625, and the report writes these numbers with as many significant
        # figures as it takes to tell them apart, so four decimals would blur both. The
        # interval's ends are rounded outward, never narrowing it.
        return {"p_fail": round(self.p_fail, 6),
                "p_fail_bounds": {"low": round(self.p_fail_low, 6), "high": round(self.p_fail, 6)},
                "p_fail_ci95": [math.floor(self.ci95[0] * 1e6) / 1e6, math.ceil(self.ci95[1] * 1e6) / 1e6],
                "samples_used": int(self.samples_used), "verdict": self.verdict,
                "verdict_reason": self.reason}


def _intervals(outcomes: np.ndarray, deterministic: bool, looks: int = 1):
    n = int(outcomes.size)
    k_fail = int(np.count_nonzero(outcomes == FAIL))
    k_unknown = int(np.count_nonzero(outcomes == UNKNOWN))
    p_high = (k_fail + k_unknown) / n if n else 1.0
    p_low = k_fail / n if n else 0.0
    if deterministic:
        return n, p_low, p_high, (p_high, p_high), (p_low, p_low), k_unknown / max(n, 1)
    if n == 0:
        return 0, p_low, p_high, (0.0, 1.0), (0.0, 1.0), 0.0
    lvl = look_level(looks)
    return (n, p_low, p_high, clopper_pearson(k_fail + k_unknown, n, lvl), clopper_pearson(k_fail, n, lvl),
            k_unknown / max(n, 1))


def _is_deterministic(aset_s, rset_s) -> bool:
    """True when every draw has the same ASET and RSET (no uncertain input at all).

    Draws lie on the last axis: for (L, S) arrays, every place the same in every draw.
    """
    a = np.where(np.isfinite(aset_s), aset_s, np.inf)
    r = np.where(np.isfinite(rset_s), rset_s, np.inf)
    return bool(np.all(a == a[..., :1]) and np.all(r == r[..., :1]))


def needs_more_samples(aset_s, rset_s, end_s: float, max_p_fail: float, *, looks: int = 1,
                       outcomes=None) -> bool:
    """True when a sampling interval straddles the acceptance limit (more draws can settle it).

    ``looks`` is the number of planned looks K of the sequential rule: the interval tested
    is the one :func:`decide` uses with the same ``looks`` (level 1 - ALPHA/K).
    """
    if _is_deterministic(aset_s, rset_s):
        return False
    out = draw_outcomes(aset_s, rset_s, end_s) if outcomes is None else np.asarray(outcomes)
    _, p_low, p_high, ci, ci_low, _ = _intervals(out, False, looks)
    return _sampling_could_settle(p_low, p_high, ci, ci_low, max_p_fail)


def could_settle(v: "Verdict", max_p_fail: float) -> bool:
    """True when more draws could settle the verdict ``v`` (decided by :func:`decide`): the
    same test as :func:`needs_more_samples`, read off the verdict's own numbers."""
    return not v.deterministic and _sampling_could_settle(v.p_fail_low, v.p_fail, v.ci95, v.ci95_low, max_p_fail)


def _sampling_could_settle(p_low, p_high, ci, ci_low, max_p_fail: float) -> bool:
    if p_low <= max_p_fail < p_high:      # the undecided draws decide: more draws cannot settle it
        return False
    return not (ci[1] <= max_p_fail or ci_low[0] > max_p_fail)   # not already settled


def sequential(schedule, draw_at, end_s, max_p_fail: float, more=None):
    """Run the sequential rule: draw at each planned look until the interval settles.

    Parameters
    ----------
    schedule : list of int
        The planned looks (:func:`planned_looks`).
    draw_at : callable
        ``draw_at(n) -> (aset_s, rset_s, outcomes or None, ...)`` for ``n`` draws.
    end_s : float or callable
        As for :func:`decide`; or ``end_s(got)``, the end of data of what ``draw_at``
        returned (per draw for an ensemble, whose members are assigned again at each look).
    max_p_fail : float
        As for :func:`decide`.
    more : callable, optional
        ``more(got) -> bool``: another verdict on the same draws that more draws could
        settle (an occupant-exposure verdict that takes part in the route's), checked at
        the same looks.

    Returns
    -------
    (n, draws)
        The draws used and what ``draw_at`` returned for them (the last look taken).
    """
    looks = len(schedule)
    for j, n in enumerate(schedule):
        got = draw_at(n)
        end = end_s(got) if callable(end_s) else end_s
        if j == looks - 1 or not (needs_more_samples(got[0], got[1], end, max_p_fail, looks=looks, outcomes=got[2])
                                  or (more is not None and more(got))):
            return n, got
    raise ValueError("no planned look")   # schedule was empty


def _pct(x: float) -> str:
    return percent(x)


def decide(aset_s, rset_s, end_s: float, max_p_fail: float, *, assessed: bool = True,
           max_samples: int | None = None, outcomes=None, looks: int = 1,
           schedule: list[int] | None = None) -> Verdict:
    """Three-valued verdict of one route from its ASET and RSET draws.

    Parameters
    ----------
    aset_s, rset_s : array_like, shape (S,)
        Per draw [s]; +inf (or NaN) where no limit is reached / the fire is never detected.
    end_s : float
        End of the histories [s from ignition].
    max_p_fail : float
        Acceptance limit on the probability of failure.
    assessed : bool
        False when no criterion could be assessed at any location of the route: the
        draws then carry no evidence and the verdict is "indeterminate".
    max_samples : int, optional
        The cap on extra draws, named in the reason when sampling could not settle it.
    outcomes : array_like, optional
        Per-draw outcomes computed by the caller (e.g. :func:`worst_outcome` over the
        locations of a location-aware comparison); then ``aset_s`` and ``rset_s`` may be
        (L, S) and serve only the determinism test and the wording.
    looks : int
        Planned looks K of the sequential rule under which these draws were taken (1: a
        single look). The interval is at level 1 - ALPHA/K (see the module docstring).
    schedule : list of int, optional
        The planned looks' draws, named in the method text.

    Returns
    -------
    Verdict

    Notes
    -----
    pass: upper end of the interval on p_fail (unknown counted as fail) <= limit;
    fail: lower end of the interval on p_fail_low (unknown counted as pass) > limit;
    the interval is the Clopper-Pearson interval at level 1 - ALPHA/looks;
    indeterminate otherwise. Where every draw is the same (no uncertain input) the
    interval is the point itself.
    """
    a = np.asarray(aset_s, float)
    r = np.asarray(rset_s, float)
    det = _is_deterministic(a, r)
    out = draw_outcomes(a, r, end_s) if outcomes is None else np.asarray(outcomes)
    looks = max(int(looks), 1)
    end_s = float(np.max(end_s))      # per-draw ends (an ensemble): the wording names the latest
    n, p_low, p_high, ci, ci_low, share_unknown = _intervals(out, det, looks)
    base = dict(p_fail=p_high, p_fail_low=p_low, ci95=ci, ci95_low=ci_low, samples_used=n,
                share_unknown=share_unknown, deterministic=det, looks=looks,
                method=ci_method(looks, schedule))
    lvl = look_level(looks)

    def est(x, interval_x):
        """The estimate with its interval beside it (a point when every draw is the same)."""
        if det:
            return f"is {prob(x, limit=max_p_fail)} (every draw is the same: no input is uncertain),"
        return f"is estimated at {prob(x, interval_x, level=lvl, draws=n, limit=max_p_fail)},"

    lim = prob(max_p_fail)
    if not assessed:
        return Verdict("indeterminate", "None of the criteria could be assessed at the locations this route "
                       "passes (their series are missing), so the draws carry no evidence: supply the series.",
                       **base)
    what = "the probability that the route becomes untenable before its occupants are out"
    if ci[1] <= max_p_fail:
        end = "" if det else " whose upper end is"
        reason = f"Passes: {what} {est(p_high, ci)}{end} within the acceptance limit of {lim}."
        return Verdict("pass", reason, **base)
    if ci_low[0] > max_p_fail:
        end = "" if det else " whose lower end is"
        counted = ", counting undecided draws as passes," if share_unknown > 0 else ""
        reason = f"Fails: {what}{counted} {est(p_low, ci_low)}{end} above the acceptance limit of {lim}."
        return Verdict("fail", reason, **base)
    # Indeterminate: say what would settle it. The unknown draws decide when the limit
    # lies between the two readings; otherwise only the sampling error is in the way.
    if share_unknown > 0 and p_low <= max_p_fail < p_high:
        parts = [f"the histories end at {end_s:.0f} s, and in {_pct(share_unknown)} of draws neither is a limit "
                 "reached nor are the occupants out by then"]
        undetected = float(np.mean(~np.isfinite(r)))
        if undetected > 0:
            parts.append(f"in {_pct(undetected)} of draws the fire is not detected before the histories end")
        finite = r[np.isfinite(r)]
        p99 = float(np.quantile(finite, 0.99)) if finite.size else float("nan")
        parts.append(f"extend the simulations to at least {p99:.0f} s (the 99th percentile of RSET)"
                     if np.isfinite(p99) and p99 > end_s else "extend the simulations")
        reason = (f"Indeterminate: p_fail lies between {prob(p_low)} and {prob(p_high)} depending on draws the "
                  "data cannot decide; " + "; ".join(parts) + ".")
        return Verdict("indeterminate", reason, **base)
    cap = f" (max_samples {max_samples})" if max_samples else ""
    reason = (f"Indeterminate: p_fail {est(p_high, ci)} whose interval straddles the acceptance limit "
              f"of {lim} after "
              f"the most draws allowed{cap}; raise max_samples to settle it.")
    return Verdict("indeterminate", reason, **base)
