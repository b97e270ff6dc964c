"""One way to write a probability (issue 21): text, tables, figures and the CLI agree.

The intervals beside the estimates are scipy's Clopper-Pearson intervals
(scipy.stats.binomtest(...).proportion_ci(method="exact")), computed outside the project.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from egressmargin.probability_text import percent, probability
from egressmargin.report import format as fmt
from egressmargin.verdict import decide


def _ci(k, n, level=0.95):
    r = stats.binomtest(k, n).proportion_ci(confidence_level=level, method="exact")
    return r.low, r.high


def test_small_probability_is_distinct_from_its_interval():
    lo, hi = _ci(3, 2000)                       # p = 0.0015
    text = probability(0.0015, (lo, hi))
    assert text.startswith("0.15 % (")
    assert "0.002" not in text and "0.1 %" not in text
    head, rest = text.split(" (")
    bounds = rest.rstrip(" %)").split("\u2013")
    assert len(set([head.rstrip(" %"), *bounds])) == 3


def test_estimate_beside_a_close_limit_gets_more_figures():
    assert percent(0.0498, distinct_from=[0.05]) == "4.98 %"
    assert probability(0.05, (0.0497, 0.0503)) == "5.00 % (4.97\u20135.03 %)"


def test_one_and_zero_read_sensibly():
    assert percent(1.0) == "100 %" and percent(0.0) == "0 %"
    assert percent(0.999996) != "100 %" and percent(1e-7) != "0 %"
    assert probability(0.0, (0.0, 0.0)) == "0 %"
    lo, hi = _ci(2000, 2000)
    assert probability(1.0, (lo, hi)).startswith("100 % (99.8")


def test_reasons_never_say_at_most_below_the_estimate_or_at_least_100():
    rng = np.random.default_rng(3)
    n = 2000
    aset = np.full(n, 200.0)
    rset = np.full(n, 150.0)
    rset[rng.choice(n, 3, replace=False)] = 250.0          # 3 failing draws: p_fail = 0.0015
    v = decide(aset, rset, 600.0, 0.05)
    assert v.verdict == "pass" and "0.15 %" in v.reason and "at most" not in v.reason
    lo, hi = _ci(3, n)
    assert probability(0.0015, (lo, hi), level=0.95, draws=n) in v.reason
    # every draw fails: 100 % with no "at least"
    v = decide(aset, np.full(n, 250.0), 600.0, 0.05)
    assert v.verdict == "fail" and "100 %" in v.reason and "at least" not in v.reason
    # uncertain and failing
    rset = np.where(rng.random(n) < 0.5, 250.0, 150.0)
    v = decide(aset, rset, 600.0, 0.05)
    assert v.verdict == "fail" and "at least" not in v.reason and "whose lower end is above" in v.reason


def test_report_and_cli_use_the_same_function(tmp_path, capsys):
    from egressmargin.cli import _summary

    assert fmt.fmt_prob(0.0015) == "0.15\u00a0%"
    assert fmt.fmt_prob_ci(0.0015, [0.0002, 0.0052]) == probability(0.0015, (0.0002, 0.0052), space="\u00a0")
    trio = {"p05": 100.0, "p50": 110.0, "p95": 120.0}
    route = {"id": "r1", "margin_s": trio, "rset_s": trio, "aset_s": trio, "p_fail": 0.0015,
             "p_fail_ci95": [0.0002, 0.0052], "verdict": "pass"}
    _summary(tmp_path, {"scenarios": [{"id": "s1", "routes": [route], "locations": []}]})
    out = capsys.readouterr().out
    assert probability(0.0015, (0.0002, 0.0052)) in out and "0.002" not in out


def test_report_histogram_title_writes_a_percentage():
    from egressmargin.report.plots import histogram_title

    assert "P(ASET < RSET) = 0.15\u00a0%" in histogram_title(0.0015, 0.05, "pass")
