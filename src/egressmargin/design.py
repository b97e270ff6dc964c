"""Design-level probability of failure over weighted design fires (pure functions).

A study may weight its design fires (``scenario_weights``: conditional probabilities
of each design fire given a fire, from an event tree or fire statistics; ISO 16732-1
fire risk assessment, PD 7974-7 probabilistic risk assessment). For a route, the
design-level probability of failure is the total-probability sum

.. math:: p = \\sum_s w_s\\, p_s

over the weighted scenarios the route appears in, where ``p_s`` is the scenario's
share of failing draws. As in :mod:`egressmargin.verdict`, a draw the data cannot
decide counts as a failure for ``p_fail`` (the conservative figure) and as a pass for
the lower bound. A route absent from a weighted scenario contributes nothing from it
(its occupants are not there in that fire); the result names such scenarios.

The sampling interval on the weighted sum of independent binomial proportions is the
adjusted Wald interval of Price & Bonett (2004): add 2/k successes and 4/k trials to
each of the k stochastic scenarios, then a normal interval on the weighted sum of the
adjusted proportions. For k = 1 it is the Agresti-Coull "add two successes and two
failures" interval (Agresti & Coull 1998), for a difference of two (k = 2) the
Agresti-Caffo interval (Agresti & Caffo 2000). A scenario whose draws are all the same
(no uncertain input) is a known point, not a sample: it adds its exact weighted share
and no variance. That interval is close to nominal but not guaranteed: in simulated
cases a one-sided error reached 3.8 % (nominal 2.5 %). So the interval used is the union
of it and a guaranteed one (:func:`guaranteed_interval`: per sampled scenario a
Clopper-Pearson interval at 1 - 0.05/k, Bonferroni over the k scenarios, weighted sums
of the ends; coverage at least 95 % and each one-sided error at most 2.5 % whatever the
true shares). Both are checked by simulation in the tests.

The acceptance rule is the verdict's: pass when the upper end of the interval on the
conservative figure is within the limit, fail when the lower end of the interval on the
optimistic figure exceeds it, indeterminate otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .verdict import FAIL, UNKNOWN, Z_95, clopper_pearson

__all__ = ["WEIGHT_SUM_TOLERANCE", "CI_METHOD", "Counts", "counts_from_outcomes", "weighted_interval",
           "guaranteed_interval", "design_interval", "route_design", "design_results"]

#: How far the weights may sum from 1 (round-off in a hand-written event tree; project choice).
WEIGHT_SUM_TOLERANCE = 1e-6

CI_METHOD = ("95 % interval on the weighted sum: the union of the adjusted Wald interval for a linear function "
             "of independent binomial proportions (Price & Bonett 2004, Comput. Stat. Data Anal. 45, 449-456; "
             "from memory: 2/k successes and 4/k trials added to each of the k sampled scenarios) and the "
             "weighted sum of per-scenario Clopper-Pearson intervals at 1 - 0.05/k (Bonferroni over the "
             "scenarios: coverage at least 95 %, each one-sided error at most 2.5 %); scenarios without "
             "uncertain input count as exact")


@dataclass(frozen=True)
class Counts:
    """Draw outcomes of one route in one scenario."""

    n: int                  # draws
    fail: int               # a limit reached before the occupants are out
    unknown: int            # undecided by the data
    deterministic: bool = False   # every draw the same: the share is exact, not sampled
    assessed: bool = True         # False: no criterion could be assessed on the route

    @property
    def p_high(self) -> float:
        return (self.fail + self.unknown) / self.n if self.n else 1.0

    @property
    def p_low(self) -> float:
        return self.fail / self.n if self.n else 0.0

    def as_results(self) -> dict:
        return {"draws": self.n, "fail": self.fail, "pass": self.n - self.fail - self.unknown,
                "undecided": self.unknown, "deterministic": self.deterministic}


def counts_from_outcomes(outcomes, deterministic: bool = False, assessed: bool = True) -> Counts:
    """Count FAIL and UNKNOWN among per-draw outcomes (:func:`egressmargin.verdict.draw_outcomes`)."""
    o = np.asarray(outcomes)
    return Counts(int(o.size), int(np.count_nonzero(o == FAIL)), int(np.count_nonzero(o == UNKNOWN)),
                  bool(deterministic), bool(assessed))


def _split(k, n, w, exact):
    """Arrays of the counts, the sampled scenarios (mask and number) and the exact ones' weighted share."""
    k, n, w = np.asarray(k, float), np.asarray(n, float), np.asarray(w, float)
    exact = np.zeros(w.shape, bool) if exact is None else np.asarray(exact, bool)
    point_exact = np.sum(np.where(exact, w * k / np.where(n > 0, n, 1.0), 0.0), axis=-1)
    return k, n, w, ~exact, int(np.count_nonzero(~exact)), point_exact


def weighted_interval(k, n, w, exact=None, z: float = Z_95):
    """95 % interval on sum_s w_s k_s/n_s for independent binomial counts.

    Parameters
    ----------
    k, n : array_like, shape (..., m)
        Successes (here: failing draws) and trials per scenario; scenarios on the last axis.
    w : array_like, shape (m,)
        Weights (probabilities) of the scenarios.
    exact : array_like of bool, shape (m,), optional
        Scenarios whose share is exact (every draw the same): no adjustment, no variance.
    z : float
        Normal quantile (two-sided 95 %: 1.959964).

    Returns
    -------
    (low, high) : arrays of shape (...), clipped to [0, 1]

    Notes
    -----
    Price & Bonett (2004), Comput. Stat. Data Anal. 45, 449-456 (from memory): with k the
    number of sampled scenarios, p~_s = (k_s + 2/k)/(n_s + 4/k) and

    .. math:: \\sum w_s \\tilde p_s \\pm z \\sqrt{\\sum w_s^2 \\tilde p_s (1 - \\tilde p_s)/(n_s + 4/k)}

    Examples
    --------
    One scenario (k = 1): the Agresti-Coull interval, 0 of 2000 draws failing:

    >>> [round(float(x), 5) for x in weighted_interval([0], [2000], [1.0])]
    [0.0, 0.00238]
    """
    k, n, w, sampled, m, point_exact = _split(k, n, w, exact)
    if m == 0:
        return point_exact, point_exact
    add_k, add_n = 2.0 / m, 4.0 / m
    nt = n + add_n
    pt = (k + add_k) / nt
    centre = point_exact + np.sum(np.where(sampled, w * pt, 0.0), axis=-1)
    var = np.sum(np.where(sampled, w * w * pt * (1 - pt) / nt, 0.0), axis=-1)
    half = z * np.sqrt(var)
    return np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)


def guaranteed_interval(k, n, w, exact=None, alpha: float = 0.05):
    """Interval on sum_s w_s k_s/n_s whose coverage is at least 1 - alpha for any true shares.

    Parameters
    ----------
    k, n, w, exact :
        As for :func:`weighted_interval` (scenarios on the last axis).
    alpha : float
        Total error, split equally over the m sampled scenarios and the two sides.

    Notes
    -----
    Each sampled scenario gets a Clopper-Pearson interval [l_s, u_s] at level 1 - alpha/m
    (Clopper & Pearson 1934; each side errs with probability at most alpha/(2m)). By the
    union bound (Bonferroni), with probability at least 1 - alpha every one of them holds
    its p_s, and then, the weights being non-negative, sum w_s l_s <= sum w_s p_s <=
    sum w_s u_s; each one-sided error is at most alpha/2. Exact scenarios add w_s p_s.

    Examples
    --------
    One scenario, 0 of 2000 failing: the Clopper-Pearson 95 % interval.

    >>> [round(float(x), 5) for x in guaranteed_interval([0], [2000], [1.0])]
    [0.0, 0.00184]
    """
    k, n, w, sampled, m, point_exact = _split(k, n, w, exact)
    if m == 0:
        return point_exact, point_exact
    nn = np.where(n > 0, n, 1.0)
    lo, hi = clopper_pearson(k, nn, level=1.0 - alpha / m)
    return (np.clip(point_exact + np.sum(np.where(sampled, w * lo, 0.0), axis=-1), 0.0, 1.0),
            np.clip(point_exact + np.sum(np.where(sampled, w * hi, 0.0), axis=-1), 0.0, 1.0))


def design_interval(k, n, w, exact=None):
    """The design-level 95 % interval: the union of :func:`weighted_interval` (close to
    nominal) and :func:`guaranteed_interval` (never below nominal), so that neither side of
    the verdict errs more often than 2.5 % (module docstring)."""
    lo1, hi1 = weighted_interval(k, n, w, exact)
    lo2, hi2 = guaranteed_interval(k, n, w, exact)
    return np.minimum(lo1, lo2), np.maximum(hi1, hi2)


def _est(p: float, ci, limit: float) -> str:
    """The estimate with its interval beside it (probability_text: one way to write a probability)."""
    from .probability_text import probability

    return probability(p, ci, level=0.95, limit=limit)


def route_design(route_id: str, weights: dict[str, float], counts: dict[str, Counts], max_p_fail: float) -> dict:
    """Design-level p_fail, interval, verdict and contributions of one route.

    Parameters
    ----------
    route_id : str
    weights : {scenario id: probability}
        Every weighted scenario (the weights sum to 1).
    counts : {scenario id: Counts}
        The route's draw outcomes in the weighted scenarios it appears in.
    max_p_fail : float
        Acceptance limit on the design-level probability of failure.

    Returns
    -------
    dict: ``id, p_fail, p_fail_bounds, p_fail_ci95, verdict, verdict_reason, contributions,
    absent_from, note``
    """
    present = [s for s in weights if s in counts]
    absent = [s for s in weights if s not in counts]
    w = np.array([weights[s] for s in present], float)
    n = np.array([counts[s].n for s in present], float)
    k_high = np.array([counts[s].fail + counts[s].unknown for s in present], float)
    k_low = np.array([counts[s].fail for s in present], float)
    exact = np.array([counts[s].deterministic for s in present], bool)
    p_high = float(np.sum(w * k_high / n)) if present else 0.0
    p_low = float(np.sum(w * k_low / n)) if present else 0.0
    ci = design_interval(k_high, n, w, exact) if present else (0.0, 0.0)
    ci_low = design_interval(k_low, n, w, exact) if present else (0.0, 0.0)
    ci, ci_low = (float(ci[0]), float(ci[1])), (float(ci_low[0]), float(ci_low[1]))
    from .probability_text import probability

    lim = probability(max_p_fail)
    unassessed = [s for s in present if not counts[s].assessed]
    if unassessed:
        verdict = "indeterminate"
        reason = ("Indeterminate: no criterion could be assessed on this route in " + ", ".join(unassessed) +
                  ", so those draws carry no evidence; supply the series.")
    elif ci[1] <= max_p_fail:
        verdict = "pass"
        reason = (f"Passes: the design-level probability of failure is estimated at {_est(p_high, ci, max_p_fail)}, "
                  f"whose upper end is within the acceptance limit of {lim}.")
    elif ci_low[0] > max_p_fail:
        verdict = "fail"
        reason = (f"Fails: the design-level probability of failure, counting draws the data cannot decide as passes, "
                  f"is estimated at {_est(p_low, ci_low, max_p_fail)}, whose lower end is above the acceptance limit "
                  f"of {lim}.")
    elif p_low <= max_p_fail < p_high:
        verdict = "indeterminate"
        reason = (f"Indeterminate: the design-level p_fail lies between {probability(p_low)} and "
                  f"{probability(p_high)} depending "
                  "on draws the data cannot decide; extend the simulations of the scenarios with undecided draws.")
    else:
        verdict = "indeterminate"
        reason = (f"Indeterminate: the design-level p_fail is estimated at {_est(p_high, ci, max_p_fail)}, an "
                  f"interval that straddles the acceptance limit of {lim}; more draws per scenario would settle it.")
    contributions = {s: round(weights[s] * counts[s].p_high, 6) for s in present}
    note = ("absent from " + ", ".join(absent) + ": contributes nothing from " +
            ("that scenario" if len(absent) == 1 else "those scenarios")) if absent else None
    return {"id": route_id, "p_fail": round(p_high, 6),
            "p_fail_bounds": {"low": round(p_low, 6), "high": round(p_high, 6)},
            "p_fail_ci95": [round(ci[0], 6), round(ci[1], 6)], "verdict": verdict, "verdict_reason": reason,
            "contributions": contributions,
            "contributions_low": {s: round(weights[s] * counts[s].p_low, 6) for s in present},
            "absent_from": absent, "note": note}


def design_results(scenarios: list[dict], weights: dict[str, float], max_p_fail: float,
                   source: str = "") -> dict:
    """The results.json ``design`` block from the scenarios' results (each route's ``draw_counts``).

    Every route that appears in at least one weighted scenario gets an entry, in the order
    routes first appear.
    """
    order: list[str] = []
    per_route: dict[str, dict[str, Counts]] = {}
    for sc in scenarios:
        if sc["id"] not in weights:
            continue
        for rt in sc.get("routes", []):
            dc = rt["draw_counts"]
            if rt["id"] not in per_route:
                order.append(rt["id"])
                per_route[rt["id"]] = {}
            per_route[rt["id"]][sc["id"]] = Counts(dc["draws"], dc["fail"], dc["undecided"],
                                                    dc["deterministic"], rt.get("criteria_assessed", True))
    return {"weights": dict(weights), "weights_source": source, "max_p_fail": max_p_fail,
            "interval_method": CI_METHOD,
            "routes": [route_design(r, weights, per_route[r], max_p_fail) for r in order]}
