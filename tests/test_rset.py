"""Tests of egressmargin.egress.rset.

Percentiles are checked against numpy.percentile (method "linear", Hyndman & Fan
1996 definition 7); the phase sum RSET = t_det + t_alarm + t_pre + t_move is common
practice (ISO/TR 16738:2009).
"""

from __future__ import annotations

import numpy as np
import pytest

from egressmargin.egress.rset import compose_rset, summarise


def test_fixed_inputs_give_equal_percentiles():
    total, _ = compose_rset(60.0, 30.0, 90.0, 281.62)
    s = summarise(np.full(1000, total))
    assert s["p05"] == s["p50"] == s["p95"] == pytest.approx(461.62)
    assert summarise(461.62) == {"p05": 461.62, "p50": 461.62, "p95": 461.62}


def test_composition_sums_and_broadcasts():
    pre = np.array([60.0, 90.0, 240.0])
    total, parts = compose_rset(60.0, 30.0, pre, np.array([[280.0], [300.0]]))
    assert total.shape == (2, 3)
    np.testing.assert_allclose(total[0], [430.0, 460.0, 610.0])
    np.testing.assert_allclose(total[1], [450.0, 480.0, 630.0])
    assert set(parts) == {"detection_s", "alarm_s", "premovement_s", "movement_s"}
    assert all(p.shape == (2, 3) for p in parts.values())
    np.testing.assert_allclose(sum(parts.values()), total)
    # a fire never detected leaves RSET undefined
    assert np.isnan(compose_rset(np.nan, 30.0, 90.0, 100.0)[0])


def test_summarise_matches_numpy_linear_percentiles():
    x = np.random.default_rng(0).lognormal(5.0, 0.5, size=777)
    s = summarise(x)
    for key, q in (("p05", 5), ("p50", 50), ("p95", 95)):
        assert s[key] == pytest.approx(np.percentile(x, q, method="linear"), rel=1e-12)


def test_summarise_nan_orders_last_and_gives_none():
    # 1..9 and one NaN: sorted n = 10; h = 9 q.
    # p05: h = 0.45 -> 1.45; p50: h = 4.5 -> 5.5; p95: h = 8.55 -> between 9 and NaN -> None
    s = summarise([5.0, np.nan, 1.0, 2.0, 3.0, 4.0, 6.0, 7.0, 8.0, 9.0])
    assert s["p05"] == pytest.approx(1.45)
    assert s["p50"] == pytest.approx(5.5)
    assert s["p95"] is None
    assert summarise([np.nan, np.nan]) == {"p05": None, "p50": None, "p95": None}
    assert summarise([]) == {"p05": None, "p50": None, "p95": None}
    assert summarise([1.0, 2.0, np.inf])["p95"] is None  # +inf is "not reached" too
