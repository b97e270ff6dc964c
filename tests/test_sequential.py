"""Operating characteristic of the verdict's sequential rule (issue 21): honest error over all looks.

The requirement: over all planned looks together, P(pass | p_fail >= limit) <= 2.5 % and
P(fail | p_fail <= limit) <= 2.5 %; and at 0.6 x and 1.6 x the limit at least 95 % of runs
decide correctly with the default samples (2000) and max_samples (16000).

Checked three ways:

* exactly: the chance of a pass at each look at p = limit is a binomial tail,
  scipy.stats.binom.cdf(k*, n, limit) with k* the largest count whose interval passes; the
  sum over the looks (the union bound) must be <= 2.5 %, and likewise for fail;
* by simulation: the procedure run many times with independent streams (binomial counts
  per look, bench/operating_characteristic.py), counting verdicts, with a tolerance of
  3 binomial standard deviations of the Monte Carlo share;
* end to end: :func:`egressmargin.verdict.sequential` with :func:`decide` on synthetic
  ASET/RSET arrays whose P(fail) is known exactly (ASET ~ uniform(0, 1) s, RSET fixed at
  c s, so P(ASET < RSET) = c: closed form) gives the same verdicts as the count-level rule.

The interval is checked against scipy's Clopper-Pearson ("exact") interval (Clopper &
Pearson 1934, Biometrika 26, 404-413), an implementation outside the project.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from egressmargin.study import DEFAULT_MAX_SAMPLES, DEFAULT_SAMPLES
from egressmargin.verdict import (FAIL, PASS, UNKNOWN, clopper_pearson, decide, draw_outcomes, look_level,
                                  planned_looks, sequential, settle)

BENCH = Path(__file__).resolve().parents[1] / "bench" / "operating_characteristic.py"
LIMIT = 0.05
REPS = 20000


@pytest.fixture(scope="module")
def oc():
    spec = importlib.util.spec_from_file_location("operating_characteristic", BENCH)
    mod = importlib.util.module_from_spec(spec)
    sys.modules["operating_characteristic"] = mod
    spec.loader.exec_module(mod)
    return mod


def _tol(p: float, reps: int) -> float:
    """3 binomial standard deviations of a Monte Carlo share (normal approximation)."""
    return 3.0 * np.sqrt(p * (1 - p) / reps)


def test_defaults_plan_four_looks():
    assert (DEFAULT_SAMPLES, DEFAULT_MAX_SAMPLES) == (2000, 16000)
    assert planned_looks(DEFAULT_SAMPLES, DEFAULT_MAX_SAMPLES) == [2000, 4000, 8000, 16000]
    assert look_level(4) == pytest.approx(0.9875)


@pytest.mark.parametrize("k,n,level", [(0, 2000, 0.95), (3, 2000, 0.9875), (100, 2000, 0.9875),
                                       (2000, 2000, 0.95), (7, 50, 0.99)])
def test_clopper_pearson_matches_scipy(k, n, level):
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=level, method="exact")
    lo, hi = clopper_pearson(k, n, level)
    assert lo == pytest.approx(ref.low, abs=1e-12) and hi == pytest.approx(ref.high, abs=1e-12)


@pytest.mark.parametrize("samples,max_samples", [(2000, 16000), (500, 4000), (400, 1000), (2000, 2000)])
def test_union_bound_holds_exactly_at_the_limit(samples, max_samples):
    """Sum over looks of P(pass at that look | p = limit) <= 2.5 %, binomial tails by scipy.stats.binom."""
    looks = planned_looks(samples, max_samples)
    p_pass = p_fail = 0.0
    for n in looks:
        k = np.arange(n + 1)
        d = settle(k, np.zeros_like(k), n, LIMIT, looks=len(looks))
        p_pass += stats.binom.pmf(k[d == PASS], n, LIMIT).sum()
        p_fail += stats.binom.pmf(k[d == FAIL], n, LIMIT).sum()
    assert p_pass <= 0.025 and p_fail <= 0.025


def test_error_rates_at_the_limit_by_simulation(oc):
    looks = planned_looks(DEFAULT_SAMPLES, DEFAULT_MAX_SAMPLES)
    r = oc.simulate(LIMIT, looks, LIMIT, REPS, seed=11)
    assert r["pass"] <= 0.025 + _tol(0.025, REPS)
    assert r["fail"] <= 0.025 + _tol(0.025, REPS)


def test_the_old_rule_fails_the_same_check(oc):
    """The check can fail: a 95 % interval re-tested at each look errs more than 2.5 % a side."""
    looks = planned_looks(DEFAULT_SAMPLES, DEFAULT_MAX_SAMPLES)
    r = oc.simulate(LIMIT, looks, LIMIT, REPS, seed=12, naive=True)
    assert r["pass"] > 0.025 + _tol(0.025, REPS) or r["fail"] > 0.025 + _tol(0.025, REPS)


@pytest.mark.parametrize("factor,correct", [(0.6, "pass"), (1.6, "fail")])
def test_power_at_the_defaults(oc, factor, correct):
    looks = planned_looks(DEFAULT_SAMPLES, DEFAULT_MAX_SAMPLES)
    r = oc.simulate(factor * LIMIT, looks, LIMIT, REPS, seed=13)
    assert r[correct] >= 0.95


def test_error_rates_at_smaller_settings(oc):
    """samples 500, max_samples 4000 (four looks too): the bound does not depend on the defaults."""
    looks = planned_looks(500, 4000)
    r = oc.simulate(LIMIT, looks, LIMIT, REPS, seed=14)
    assert r["pass"] <= 0.025 + _tol(0.025, REPS) and r["fail"] <= 0.025 + _tol(0.025, REPS)


def test_decide_on_synthetic_draws_matches_the_count_rule():
    """End to end: sequential() + decide() on ASET ~ U(0, 1) s and RSET = c s, P(fail) = c exactly."""
    looks = planned_looks(500, 4000)
    K = len(looks)
    rng = np.random.default_rng(21)
    seen = {PASS: 0, FAIL: 0, UNKNOWN: 0}
    for c in (0.03, 0.05, 0.05, 0.05, 0.08):
        for _ in range(12):
            counts = {}

            def draw_at(n, c=c, counts=counts):
                aset = rng.random(n)                      # a fresh stream per look
                rset = np.full(n, c)
                counts[n] = int(np.count_nonzero(draw_outcomes(aset, rset, 10.0) == FAIL))
                return aset, rset, None

            n_used, (aset, rset, _) = sequential(looks, draw_at, 10.0, LIMIT)
            v = decide(aset, rset, 10.0, LIMIT, looks=K, schedule=looks)
            code = int(settle(counts[n_used], 0, n_used, LIMIT, looks=K))
            assert {"pass": PASS, "fail": FAIL, "indeterminate": UNKNOWN}[v.verdict] == code
            # stopped early only when settled; the last look taken is the decision's
            assert v.samples_used == n_used and (code != UNKNOWN or n_used == looks[-1])
            ref = stats.binomtest(counts[n_used], n_used).proportion_ci(confidence_level=look_level(K),
                                                                        method="exact")
            assert v.ci95 == pytest.approx((ref.low, ref.high), abs=1e-12)
            seen[code] += 1
    assert seen[PASS] and seen[FAIL]


def test_deterministic_draws_keep_a_point_interval():
    v = decide(np.full(100, 5.0), np.full(100, 3.0), 10.0, LIMIT, looks=4)
    assert v.verdict == "pass" and v.ci95 == (0.0, 0.0)
