"""The three-valued verdict: no false pass when the data, the detector or the statistics run out.

Histories are synthetic ramps written in each test (invented numbers with closed-form
crossing times, not measurements). The interval on p_fail is checked against
scipy.stats.binomtest(...).proportion_ci(method="exact"), an implementation outside
the project of Clopper & Pearson (1934).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from egressmargin.verdict import (FAIL, PASS, UNKNOWN, Z_95, decide, draw_outcomes, look_level, needs_more_samples,
                                  planned_looks)
from engine_helpers import results_for, write_study


def _route(**kw):
    r = {"id": "r", "occupants": 10, "detection": "10 s", "alarm": "5 s", "premovement": "10 s",
         "path": [{"door": {"width": "1 m"}}], "exposed_at": ["a"]}
    r.update(kw)
    return r


def test_draw_outcomes_follow_the_contract():
    end = 300.0
    aset = np.array([100.0, np.inf, np.inf, 100.0, 200.0, np.inf, 250.0])
    rset = np.array([150.0, 250.0, 400.0, np.inf, 200.0, np.inf, 350.0])
    assert draw_outcomes(aset, rset, end).tolist() == [FAIL, PASS, UNKNOWN, FAIL, PASS, UNKNOWN, FAIL]


def test_z_95_is_the_two_sided_normal_quantile():
    # Phi^-1(0.975), scipy.stats.norm.ppf: the z of a two-sided 95 % interval
    assert Z_95 == pytest.approx(stats.norm.ppf(0.975), rel=1e-15)


def test_histories_ending_before_rset_are_not_a_pass(tmp_path):
    """Issue case: T = 20 + 0.1 t degC to 300 s (60 degC only at 400 s), premovement 400 s."""
    t = np.arange(0.0, 301.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + 0.1 * t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route(premovement="400 s")], criteria={"base": "general-2m", "only": ["temperature"]})
    res, _ = results_for(path)
    r = res["scenarios"][0]["routes"][0]
    assert r["verdict"] == "indeterminate"
    assert r["p_fail"] == 1.0 and r["p_fail_bounds"] == {"low": 0.0, "high": 1.0}
    assert "histories end at 300 s" in r["verdict_reason"]


def test_lognormal_premovement_past_the_data_is_counted_against_the_route(tmp_path):
    t = np.arange(0.0, 301.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + 0.1 * t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route(premovement={"lognormal": {"median": "200 s", "p95": "400 s"}})],
                       criteria={"base": "general-2m", "only": ["temperature"]})
    r = results_for(path)[0]["scenarios"][0]["routes"][0]
    assert r["p_fail_bounds"]["low"] == 0.0 and r["p_fail"] > 0.05
    assert r["verdict"] == "indeterminate"


def test_detector_that_never_responds_is_not_a_pass(tmp_path):
    t = np.arange(0.0, 301.0, 10.0)
    cols = {"T": ("degC", 20 + 0.01 * t), "K": ("1/m", 0.0 * t)}
    locs = [{"id": "a", "temperature": "T", "extinction": "K"}]
    rule = {"smoke": {"location": "a", "extinction": "0.1 1/m"}}
    path = write_study(tmp_path, t, cols, locs, routes=[_route(detection=rule)])
    r = results_for(path)[0]["scenarios"][0]["routes"][0]
    assert r["share_not_detected"] == 1.0
    assert r["verdict"] == "indeterminate" and r["p_fail"] == 1.0
    assert "not detected" in r["verdict_reason"] and "detector does not respond" in r["verdict_text"]


def test_detector_that_never_responds_fails_where_a_limit_is_reached(tmp_path):
    t = np.arange(0.0, 301.0, 10.0)
    cols = {"T": ("degC", 20 + 0.5 * t), "K": ("1/m", 0.0 * t)}     # 60 degC at 80 s
    locs = [{"id": "a", "temperature": "T", "extinction": "K"}]
    rule = {"smoke": {"location": "a", "extinction": "0.1 1/m"}}
    path = write_study(tmp_path, t, cols, locs, routes=[_route(detection=rule)])
    r = results_for(path)[0]["scenarios"][0]["routes"][0]
    assert r["verdict"] == "fail" and r["p_fail_bounds"]["low"] == 1.0


@pytest.mark.parametrize("offset", [0.0, 1000.0])
def test_time_column_on_another_clock_gives_the_same_verdict(tmp_path, offset):
    """A file whose clock starts at 1000 s: times count from its first time (ignition)."""
    t = np.arange(0.0, 601.0, 10.0)
    path = write_study(tmp_path, t + offset, {"T": ("degC", 20 + 0.5 * t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route(premovement="100 s")], criteria={"base": "general-2m", "only": ["temperature"]})
    res = results_for(path)[0]
    sc = res["scenarios"][0]
    r = sc["routes"][0]
    assert sc["end_s"] == 600.0 and sc["ignition_s"] == offset
    assert r["aset_raw_s"] == pytest.approx(80.0) and r["verdict"] == "fail"


def test_ignition_key_aligns_the_clock(tmp_path):
    """ignition: 100 s on a file starting at 0 s: the limit at file time 180 s is at 80 s from ignition."""
    import yaml

    t = np.arange(0.0, 601.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + np.maximum(t - 100.0, 0) * 0.5)},
                       [{"id": "a", "temperature": "T"}], criteria={"base": "general-2m", "only": ["temperature"]})
    doc = yaml.safe_load(path.read_text())
    doc["scenarios"][0]["ignition"] = "105 s"       # between rows: a row is interpolated
    path.write_text(yaml.safe_dump(doc))
    sc = results_for(path)[0]["scenarios"][0]
    loc = sc["locations"][0]
    assert loc["criteria"]["temperature"]["raw_s"] == pytest.approx(75.0)
    assert sc["end_s"] == pytest.approx(495.0) and "105 s" in sc["clock"]


def test_ignition_outside_the_data_is_an_input_error(tmp_path, capsys):
    import yaml

    from egressmargin.cli import main

    t = np.arange(0.0, 61.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + t)}, [{"id": "a", "temperature": "T"}])
    doc = yaml.safe_load(path.read_text())
    doc["scenarios"][0]["ignition"] = "90 s"
    path.write_text(yaml.safe_dump(doc))
    assert main(["validate", str(path)]) == 2
    err = capsys.readouterr().err
    assert "ignition" in err and "outside the histories" in err


def test_sampling_error_is_reported_and_more_draws_settle_it():
    """p_fail near the limit: the interval straddles it, so more draws are asked for."""
    rng = np.random.default_rng(0)
    n = 2000
    aset = np.full(n, 200.0)
    rset = np.where(rng.random(n) < 0.048, 250.0, 150.0)
    assert needs_more_samples(aset, rset, 600.0, 0.05)
    v = decide(aset, rset, 600.0, 0.05, max_samples=n)
    assert v.verdict == "indeterminate" and "raise max_samples" in v.reason
    # one look: the Clopper-Pearson 95 % interval (scipy's "exact", Clopper & Pearson 1934)
    ref = stats.binomtest(int((rset > aset).sum()), n).proportion_ci(method="exact")
    assert v.ci95 == pytest.approx((ref.low, ref.high))
    # four planned looks: each at 1 - 0.05/4 = 98.75 % (Bonferroni over the looks)
    v4 = decide(aset, rset, 600.0, 0.05, looks=4)
    ref4 = stats.binomtest(int((rset > aset).sum()), n).proportion_ci(confidence_level=0.9875, method="exact")
    assert v4.ci95 == pytest.approx((ref4.low, ref4.high)) and "98.75 % interval" in v4.reason


def test_pipeline_draws_more_samples_where_the_interval_straddles(tmp_path):
    """A route near the acceptance limit uses more draws than 'samples' (up to max_samples)."""
    import yaml

    t = np.arange(0.0, 601.0, 10.0)
    # ASET 200 s (60 degC); RSET = 10 + 5 + premovement + movement: premovement uniform so that
    # P(RSET > 200 s) = P(pre > 174 s) = 3.9/77.9 = 5.0 % (door: 10 people / 0.91 p/s = 11 s).
    path = write_study(tmp_path, t, {"T": ("degC", 20 + 0.2 * t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route(premovement={"uniform": {"low": "100 s", "high": "177.9 s"}})],
                       criteria={"base": "general-2m", "only": ["temperature"]}, samples=500)
    doc = yaml.safe_load(path.read_text())
    doc["max_samples"] = 4000
    path.write_text(yaml.safe_dump(doc))
    r = results_for(path)[0]["scenarios"][0]["routes"][0]
    assert r["samples_used"] > 500
    n = r["samples_used"]
    # uniform premovement above 200 - 10 - 5 - 10/0.91 s (closed form), within 4 binomial sd
    p = (177.9 - (200.0 - 10.0 - 5.0 - 10 / 0.91)) / 77.9
    assert r["p_fail"] == pytest.approx(p, abs=4 * np.sqrt(p * (1 - p) / n))
    looks = planned_looks(500, 4000)                  # 500, 1000, 2000, 4000: four planned looks
    assert n in looks and look_level(len(looks)) == pytest.approx(1 - 0.05 / 4)
    ref = stats.binomtest(round(r["p_fail"] * n), n).proportion_ci(confidence_level=1 - 0.05 / 4, method="exact")
    assert r["p_fail_ci95"] == pytest.approx([ref.low, ref.high], abs=1e-4)   # scipy's Clopper-Pearson interval
    assert "4 planned looks" in r["p_fail_method"] and "Clopper-Pearson" in r["p_fail_method"]


def test_fixed_inputs_give_a_point_interval(tmp_path):
    t = np.arange(0.0, 601.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + 0.1 * t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route()], criteria={"base": "general-2m", "only": ["temperature"]})
    r = results_for(path)[0]["scenarios"][0]["routes"][0]
    assert r["verdict"] == "pass" and r["p_fail_ci95"] == [0.0, 0.0] and r["samples_used"] == 400


def test_along_route_dose_is_not_determined_for_occupants_still_inside_at_the_end(tmp_path):
    """A detector that never responds: the occupants are still inside when the histories end,
    so their dose is unknown; it must not read as a dose within the limit (a new user's find)."""
    t = np.arange(0.0, 301.0, 10.0)
    cols = {"T": ("degC", 20 + 0.01 * t), "CO": ("ppm", 100 + 0 * t), "K": ("1/m", 0.0 * t)}
    locs = [{"id": "a", "temperature": "T", "co": "CO", "extinction": "K"}]
    rule = {"smoke": {"location": "a", "extinction": "0.1 1/m"}}
    path = write_study(tmp_path, t, cols, locs, routes=[_route(detection=rule, exposure="along-route",
                                                               start_at="a")])
    r = results_for(path)[0]["scenarios"][0]["routes"][0]
    tox = r["along_route"]["criteria"]["fed_toxic"]
    # 100 ppm CO for the whole 300 s is 100 * 5 / 35000 = 0.014 (ISO 13571), far below 0.3,
    # yet the dose after 300 s is unknown: not determined, counted as exceeding.
    assert tox["p50"] is None and tox["share_undetermined"] == 1.0 and tox["exceeds_p"] == 1.0
    assert tox["exceeds_p_bounds"] == {"low": 0.0, "high": 1.0}
    assert tox["within_limit_at_p95"] is False


def test_an_implausibly_narrow_element_is_flagged(tmp_path, capsys):
    """width: 1.8 ft (0.55 m) is accepted by pint but is almost surely a unit slip: a warning."""
    from egressmargin.cli import main

    t = np.arange(0.0, 61.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route(path=[{"corridor": {"length": "10 m", "width": "1.8 ft"}}])])
    assert main(["validate", str(path)]) == 0
    err = capsys.readouterr().err
    assert "narrower than any escape corridor" in err and "check the unit" in err


def test_max_samples_that_would_not_fit_is_refused_before_computing(tmp_path, monkeypatch):
    """The extra draws of a straddling verdict are made for one scenario at a time: only that
    scenario's need at max_samples is compared with the memory (project estimate, sizing.py)."""
    import yaml

    from egressmargin import sizing
    from egressmargin.errors import InputError
    from egressmargin.pipeline import load

    t = np.arange(0.0, 61.0, 10.0)
    path = write_study(tmp_path, t, {"T": ("degC", 20 + t)}, [{"id": "a", "temperature": "T"}],
                       routes=[_route()])
    monkeypatch.setattr(sizing, "available_memory", lambda: (100e6, 200e6))
    load(path)                                   # 400 samples and the default max_samples fit
    doc = yaml.safe_load(path.read_text())
    doc["max_samples"] = 10**6                   # 1e6 x (256 + 512) B = 768 MB > 100 MB
    path.write_text(yaml.safe_dump(doc))
    with pytest.raises(InputError) as exc:
        load(path)
    assert "max_samples" in str(exc.value) and "samples need about" in str(exc.value)
