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
``p_fail_bounds`` gives both readings, and ``p_fail_ci95`` is the Wilson score interval
on the conservative figure. The route passes only when the conservative interval lies
within the acceptance limit, fails only when even the optimistic bound's interval lies
above it, and is indeterminate otherwise.

Pure functions of arrays; the pipeline calls :func:`decide` and serialises the record.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["FAIL", "PASS", "UNKNOWN", "Z_95", "Verdict", "draw_outcomes", "wilson_interval",
           "decide", "needs_more_samples"]

FAIL, PASS, UNKNOWN = 0, 1, 2

#: Two-sided 95 % standard normal quantile, Phi^-1(0.975) = 1.959964: the value of
#: scipy.stats.norm.ppf(0.975), typed in (the tests check it against scipy). Not
#: :data:`egressmargin.egress.distributions.Z_95`, which is the one-sided Phi^-1(0.95).
Z_95: float = 1.959963984540054

#: How the interval on p_fail is computed (printed in the report and results).
CI_METHOD = "Wilson score interval, 95 % (Wilson 1927, J. Am. Stat. Assoc. 22, 209-212)"


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


def wilson_interval(k: int, n: int, z: float = Z_95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion k/n.

    Notes
    -----
    With p = k/n,

    .. math:: \\frac{p + z^2/(2n) \\pm z\\sqrt{p(1-p)/n + z^2/(4n^2)}}{1 + z^2/n}

    (Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
    inference. J. Am. Stat. Assoc. 22(158), 209-212; Brown, Cai & DasGupta (2001),
    Statist. Sci. 16, 101-133, eq. 4). Unlike the normal approximation it stays inside
    [0, 1] and does not collapse to a point at p = 0 or 1.

    Examples
    --------
    Brown, Cai & DasGupta's recommendation in numbers: 0 failures in 2000 draws still
    leaves an upper bound of about 0.19 %:

    >>> [round(x, 5) for x in wilson_interval(0, 2000)]
    [0.0, 0.00192]
    """
    if n <= 0:
        return 0.0, 1.0
    p = k / n
    z2 = z * z
    centre = (p + z2 / (2 * n)) / (1 + z2 / n)
    half = z * math.sqrt(p * (1 - p) / n + z2 / (4 * n * n)) / (1 + z2 / n)
    return max(0.0, centre - half), min(1.0, centre + half)


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

    def as_results(self) -> dict:
        return {"p_fail": round(self.p_fail, 4),
                "p_fail_bounds": {"low": round(self.p_fail_low, 4), "high": round(self.p_fail, 4)},
                "p_fail_ci95": [round(self.ci95[0], 4), round(self.ci95[1], 4)],
                "samples_used": int(self.samples_used), "verdict": self.verdict,
                "verdict_reason": self.reason}


def _intervals(outcomes: np.ndarray, deterministic: bool):
    n = int(outcomes.size)
    k_fail = int(np.count_nonzero(outcomes == FAIL))
    k_unknown = int(np.count_nonzero(outcomes == UNKNOWN))
    p_high = (k_fail + k_unknown) / n if n else 1.0
    p_low = k_fail / n if n else 0.0
    if deterministic:
        return n, p_low, p_high, (p_high, p_high), (p_low, p_low), k_unknown / max(n, 1)
    return (n, p_low, p_high, wilson_interval(k_fail + k_unknown, n), wilson_interval(k_fail, n),
            k_unknown / max(n, 1))


def _is_deterministic(aset_s, rset_s) -> bool:
    """True when every draw has the same ASET and RSET (no uncertain input at all).

    Draws lie on the last axis: for (L, S) arrays, every place the same in every draw.
    """
    a = np.where(np.isfinite(aset_s), aset_s, np.inf)
    r = np.where(np.isfinite(rset_s), rset_s, np.inf)
    return bool(np.all(a == a[..., :1]) and np.all(r == r[..., :1]))


def needs_more_samples(aset_s, rset_s, end_s: float, max_p_fail: float) -> bool:
    """True when a sampling interval straddles the acceptance limit (more draws can settle it)."""
    if _is_deterministic(aset_s, rset_s):
        return False
    out = draw_outcomes(aset_s, rset_s, end_s)
    _, p_low, p_high, ci, ci_low, _ = _intervals(out, False)
    if p_low <= max_p_fail < p_high:      # the undecided draws decide: more draws cannot settle it
        return False
    if ci[1] <= max_p_fail or ci_low[0] > max_p_fail:   # already settled
        return False
    return True


def _pct(x: float) -> str:
    return f"{100 * x:.1f} %" if x >= 0.001 or x == 0 else f"{100 * x:.2f} %"


def decide(aset_s, rset_s, end_s: float, max_p_fail: float, *, assessed: bool = True,
           max_samples: int | None = None, outcomes=None) -> Verdict:
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

    Returns
    -------
    Verdict

    Notes
    -----
    pass: upper end of the 95 % interval on p_fail (unknown counted as fail) <= limit;
    fail: lower end of the 95 % interval on p_fail_low (unknown counted as pass) > limit;
    indeterminate otherwise. Where every draw is the same (no uncertain input) the
    interval is the point itself.
    """
    a = np.asarray(aset_s, float)
    r = np.asarray(rset_s, float)
    det = _is_deterministic(a, r)
    out = draw_outcomes(a, r, end_s) if outcomes is None else np.asarray(outcomes)
    end_s = float(np.max(end_s))      # per-draw ends (an ensemble): the wording names the latest
    n, p_low, p_high, ci, ci_low, share_unknown = _intervals(out, det)
    lim = _pct(max_p_fail)
    base = dict(p_fail=p_high, p_fail_low=p_low, ci95=ci, ci95_low=ci_low, samples_used=n,
                share_unknown=share_unknown, deterministic=det)
    interval = "" if det else f" (95 % interval {_pct(ci[0])} to {_pct(ci[1])}, {n} draws)"
    if not assessed:
        return Verdict("indeterminate", "None of the criteria could be assessed at the locations this route "
                       "passes (their series are missing), so the draws carry no evidence: supply the series.",
                       **base)
    if ci[1] <= max_p_fail:
        reason = (f"Passes: the probability that the route becomes untenable before its occupants are out is "
                  f"at most {_pct(p_high)}{interval}, within the acceptance limit of {lim}.")
        return Verdict("pass", reason, **base)
    if ci_low[0] > max_p_fail:
        low_interval = "" if det else f" (95 % interval {_pct(ci_low[0])} to {_pct(ci_low[1])}, {n} draws)"
        reason = (f"Fails: the probability that the route becomes untenable before its occupants are out is "
                  f"at least {_pct(p_low)}{low_interval}, above the acceptance limit of {lim}.")
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
        reason = (f"Indeterminate: p_fail lies between {_pct(p_low)} and {_pct(p_high)} depending on draws the "
                  "data cannot decide; " + "; ".join(parts) + ".")
        return Verdict("indeterminate", reason, **base)
    cap = f" (max_samples {max_samples})" if max_samples else ""
    reason = (f"Indeterminate: p_fail = {_pct(p_high)}{interval} straddles the acceptance limit of {lim} after "
              f"the most draws allowed{cap}; raise max_samples to settle it.")
    return Verdict("indeterminate", reason, **base)
