"""Operating characteristic of the verdict's sequential rule, measured by simulation.

For a true p_fail, run the verdict procedure many times with independent random streams
and count how often it passes, fails or stays indeterminate, and how many draws it uses.
The procedure is the project's own: the planned looks of
:func:`egressmargin.verdict.planned_looks` and, at each look, the decision of
:func:`egressmargin.verdict.settle` with the number of looks the rule plans for (that is
what :func:`egressmargin.verdict.sequential` and :func:`egressmargin.verdict.decide` do
per route). The draws at each look are simulated directly as binomial counts of failing
draws, fresh at every look (as if the design's P(ASET < RSET) were known exactly: a
closed-form design, no undecided draws). Fresh draws per look are the case in which a
union bound over the looks is tightest; in the pipeline the larger look reuses parts of
the same seeded streams, which the bound covers as well.

``--naive`` also runs the rule the project used before: every look re-tests the same 95 %
interval (Wilson score), which does not hold its error over repeated looks.

Run from the repository root::

    python bench/operating_characteristic.py            # default samples 2000, max_samples 16000
    python bench/operating_characteristic.py --reps 20000 --naive
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

try:
    import egressmargin  # noqa: F401
except ImportError:                      # run from a checkout without the package installed
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

from egressmargin.verdict import FAIL, PASS, UNKNOWN, Z_95, planned_looks, settle  # noqa: E402


def _naive_settle(k, n, limit):
    """The old rule: pass / fail on the same 95 % Wilson score interval at every look."""
    k = np.asarray(k, float)
    p = k / n
    z2 = Z_95 ** 2
    centre = (p + z2 / (2 * n)) / (1 + z2 / n)
    half = Z_95 * np.sqrt(p * (1 - p) / n + z2 / (4 * n * n)) / (1 + z2 / n)
    out = np.full(k.shape, UNKNOWN, np.int8)
    out[centre + half <= limit] = PASS
    out[centre - half > limit] = FAIL
    return out


def simulate(p_fail: float, schedule: list[int], max_p_fail: float, reps: int, seed: int = 0,
             naive: bool = False) -> dict:
    """Verdict shares over ``reps`` independent runs of the sequential rule at a true ``p_fail``.

    Parameters
    ----------
    p_fail : float
        True probability of failure of the simulated design.
    schedule : list of int
        Planned looks (draws at each).
    max_p_fail : float
        Acceptance limit.
    reps : int
        Independent runs.
    seed : int
        Seed of the simulation's own generator.
    naive : bool
        Use the old rule (95 % interval at every look) instead of the project's.

    Returns
    -------
    dict
        ``pass``, ``fail``, ``indeterminate`` (shares of runs), ``mean_draws``, ``reps``.
    """
    rng = np.random.default_rng(seed)
    verdict = np.full(reps, UNKNOWN, np.int8)
    draws = np.zeros(reps)
    open_ = np.ones(reps, bool)
    K = len(schedule)
    for j, n in enumerate(schedule):
        idx = np.flatnonzero(open_)
        if idx.size == 0:
            break
        k = rng.binomial(n, p_fail, idx.size)           # a fresh look of n draws for each open run
        d = _naive_settle(k, n, max_p_fail) if naive else settle(k, np.zeros_like(k), n, max_p_fail, looks=K)
        draws[idx] = n
        done = (d != UNKNOWN) | (j == K - 1)
        verdict[idx[done]] = d[done]
        open_[idx[done]] = False
    return {"pass": float(np.mean(verdict == PASS)), "fail": float(np.mean(verdict == FAIL)),
            "indeterminate": float(np.mean(verdict == UNKNOWN)), "mean_draws": float(np.mean(draws)),
            "reps": reps}


def table(samples: int = 2000, max_samples: int = 16000, max_p_fail: float = 0.05, reps: int = 20000,
          factors=(0.0, 0.2, 0.6, 0.8, 0.9, 1.0, 1.1, 1.2, 1.6, 2.0), naive: bool = False, seed: int = 1):
    """Rows (p_fail, share pass, share fail, share indeterminate, mean draws)."""
    schedule = planned_looks(samples, max_samples)
    rows = []
    for i, f in enumerate(factors):
        r = simulate(f * max_p_fail, schedule, max_p_fail, reps, seed + i, naive)
        rows.append((f * max_p_fail, r["pass"], r["fail"], r["indeterminate"], r["mean_draws"]))
    return schedule, rows


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=2000)
    ap.add_argument("--max-samples", type=int, default=16000)
    ap.add_argument("--limit", type=float, default=0.05, help="max_p_fail")
    ap.add_argument("--reps", type=int, default=20000)
    ap.add_argument("--naive", action="store_true", help="also show the old rule (95 %% interval at every look)")
    a = ap.parse_args(argv)
    rules = [("sequential rule (Clopper-Pearson, Bonferroni over the looks)", False)]
    if a.naive:
        rules.append(("old rule (95 % Wilson interval re-tested at every look)", True))
    for title, naive in rules:
        schedule, rows = table(a.samples, a.max_samples, a.limit, a.reps, naive=naive)
        print(f"{title}; looks {schedule}; limit {a.limit}; {a.reps} runs each")
        print("| p_fail | P(pass) | P(fail) | P(indeterminate) | mean draws |")
        print("|---:|---:|---:|---:|---:|")
        for p, ps, fl, ind, md in rows:
            print(f"| {p:.3f} | {100 * ps:.2f} % | {100 * fl:.2f} % | {100 * ind:.2f} % | {md:.0f} |")
        print()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
