"""Every RSET phase is in the one-at-a-time sensitivity table (issue 21).

Synthetic studies invented for the tests. Closed forms: with everyone starting
together the RSET is detection + alarm + pre-movement + a movement time that does not
depend on when they start, so a pre-movement swing passes one to one into the margin;
with start times spread across the occupants and no queue, the last occupant's start
is detection + alarm + F^-1((N - 1/2)/N) (quantile positions, contract turn 2).
"""

from __future__ import annotations

import numpy as np
import pytest

from engine_helpers import results_for, write_study
from egressmargin import assess
from egressmargin.report import render

ONLY_T = {"base": "general-2m", "only": ["temperature"]}


def _route(premovement, occupants=10):
    return {"id": "r", "occupants": occupants, "detection": "30 s", "alarm": "0 s", "premovement": premovement,
            "path": [{"door": {"width": "2.0 m"}}], "exposed_at": ["a"]}


def _run(tmp_path, route, unc=None):
    t = np.arange(0.0, 1201.0, 5.0)
    cols = {"T": ("degC", 20 + 0.16 * t)}          # 60 degC (the criterion) at 250 s on the raw series
    path = write_study(tmp_path, t, cols, [{"id": "a", "temperature": "T"}], routes=[route], criteria=ONLY_T,
                       uncertainty=unc, samples=200)
    res, _ = results_for(path)
    return res["scenarios"][0]["routes"][0]


def test_uniform_premovement_45_to_90_s_swings_by_its_p05_p95_range(tmp_path):
    """Pre-movement uniform 45-90 s for everyone: p05 = 47.25 s, p95 = 87.75 s, so the
    margin swings by 40.5 s (uniform quantile low + u (high - low))."""
    r = _run(tmp_path, _route({"uniform": {"low": "45 s", "high": "90 s"}}, occupants=40))
    sens = {s["input"]: s for s in r["sensitivity"]}
    row = sens["premovement time"]
    assert row["kind"] == "distribution" and (row["low"], row["high"]) == ("p05", "p95")
    assert row["swing_s"] == pytest.approx(0.9 * 45.0, abs=0.02)
    assert row["margin_low_s"] - row["margin_high_s"] == pytest.approx(40.5, abs=0.02)


def test_last_occupants_premovement_dominates_and_is_named_the_largest_effect(tmp_path):
    """10 occupants, pre-movement spread across them, uniform 30-300 s with fixed
    parameters: the last person starts at 30 + 30 + 0.95 x 270 = 316.5 s, most of the
    RSET. The what-if range scales the whole distribution by +/-20 %, so the last
    person's pre-movement (286.5 s) moves by 0.4 x 286.5 = 114.6 s (a 2 m door passes
    10 people spread over 270 s without a queue). The temperature model error
    (lognormal, sigma 0.05, bias 1; McGrattan & Toman 2011 factor exp(sigma z -
    sigma^2/2)) moves the 250 s crossing to 250 / f: a swing of
    250 (1/f05 - 1/f95) = 41.2 s. The largest effect is the pre-movement, and the
    report's sentence on what would change the verdict names it."""
    from scipy import stats

    unc = {"source": "synthetic, invented for the test", "distribution": "lognormal",
           "quantities": {"temperature": {"bias": 1.0, "sigma_model": 0.05}}}
    route = _route({"across_occupants": {"uniform": {"low": "30 s", "high": "300 s"}}})
    route["alarm"] = "30 s"
    r = _run(tmp_path, route, unc)
    rows = r["sensitivity"]
    sens = {s["input"]: s for s in rows}
    pre = sens["premovement across occupants (scaled)"]
    assert pre["kind"] == "what-if" and (pre["low"], pre["high"]) == ("-20 %", "+20 %")
    assert pre["swing_s"] == pytest.approx(0.4 * (30 + 0.95 * 270), abs=0.05)
    sigma = 0.05
    f05, f95 = (np.exp(sigma * stats.norm.ppf(q) - sigma ** 2 / 2) for q in (0.05, 0.95))
    me = sens["model error: temperature"]
    assert me["kind"] == "distribution"
    assert me["swing_s"] == pytest.approx(250 * (1 / f05 - 1 / f95), abs=0.5)
    assert rows[0]["input"] == "premovement across occupants (scaled)"        # largest over all rows
    assert {"detection time", "alarm time"} <= set(sens)
    assert r["verdict"] == "fail"            # RSET about 317 s + walk against ASET about 250 s
    view = {"verdict": "fail", "not_assessed": [], "verdict_reason": "", "sensitivity": rows,
            "margin_p05": {"value": -80.0, "at_least": False}}
    words = render._what_would_change(view, 0.05)
    assert "largest effect is premovement across occupants (scaled)" in words
    assert "a what-if range on a fixed value, not a measured spread" in words


def test_detector_rule_threshold_is_swept_as_a_what_if():
    """A smoke detector rule's threshold is scaled, not its time: the setting names it."""
    from egressmargin.study import DetectorRule, RouteSpec

    rule = DetectorRule("smoke", "a", extinction_per_m=0.1)
    spec = RouteSpec("r", "r", None, 10, rule, {"fixed": 0.0}, {"fixed": 60.0},
                     [{"type": "door", "length_m": 0.0, "width_m": 1.0}], ["a"])
    try:
        settings = assess.sweep_settings(spec)
    except (KeyError, TypeError):
        pytest.skip("element_properties needs a parsed element")
    st = {s.label: s for s in settings}
    det = st["smoke detector threshold (extinction coefficient)"]
    assert (det.kind, det.key, det.low, det.high, det.basis) == ("scale", "detection", 0.8, 1.2, "what-if")
