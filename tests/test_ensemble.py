"""Ensembles of fire runs: stratified member assignment, per-draw censoring, per-member results.

Outside references named beside each check: closed forms (a linear temperature rise
reaches the limit at a known time; the share of failing draws is the sum of the failing
members' weights) and systematic sampling (Cochran 1977, Sampling Techniques, 3rd ed.,
ch. 8: each stratum receives floor or ceil of S w draws).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import yaml

from egressmargin.ensemble import assign_members
from engine_helpers import results_for

ONLY_T = {"base": "general-2m", "only": ["temperature"]}


def _csv(path: Path, reach_s: float, end_s: float = 600.0, column: str = "T1") -> None:
    """A temperature rising linearly from 20 degC that reaches 60 degC at ``reach_s`` (inf: stays at 20)."""
    t = np.arange(0.0, end_s + 1.0, 1.0)
    temp = np.full(t.shape, 20.0) if not np.isfinite(reach_s) else 20.0 + 40.0 * t / reach_s
    lines = [f"Time [s],{column} [degC]"] + [f"{float(a)!r},{float(b)!r}" for a, b in zip(t, temp)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _study(tmp: Path, members: list[dict], samples: int = 400, uncertainty: bool = False, premovement="350 s"):
    sc = {"id": "fire-a", "time": "Time", "ensemble": members, "locations": [{"id": "a", "temperature": "T1"}]}
    route = {"id": "r", "occupants": 1, "detection": "0 s", "alarm": "0 s", "premovement": premovement,
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a"]}
    doc = {"title": "ensemble test (synthetic)", "criteria": ONLY_T, "samples": samples, "seed": 3,
           "scenarios": [sc], "egress": [route]}
    if uncertainty:
        (tmp / "unc.yaml").write_text(yaml.safe_dump(
            {"source": "synthetic test values", "distribution": "lognormal",
             "quantities": {"temperature": {"bias": 1.0, "sigma_model": 0.01, "sigma_exp": 0.0}}}))
        doc["uncertainty"] = "unc.yaml"
    path = tmp / "study.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
    return path


def _three(tmp, **kw):
    for name, reach in (("a-01", 200.0), ("a-02", 300.0), ("a-03", 400.0)):
        _csv(tmp / f"{name}.csv", reach)
    members = [{"histories": "a-01.csv", "weight": 1, "parameters": {"growth": "ultra-fast"}},
               {"histories": "a-02.csv", "weight": 1, "parameters": {"growth": "fast"}},
               {"histories": "a-03.csv", "weight": 2, "parameters": {"growth": "medium"}}]
    return _study(tmp, members, **kw)


@pytest.mark.parametrize("uncertainty", [False, True])
def test_members_at_200_300_400_s_weighted_1_1_2_against_rset_350_give_p_fail_one_half(tmp_path, uncertainty):
    """Closed form: the 200 s and 300 s members fail (ASET < RSET ~ 351 s), the 400 s member passes;
    their weights 1/4 + 1/4 = 1/2, and the stratified assignment makes the share exact. With a 1 %
    model error on the temperature rise the crossings move by about 1 %, not across the RSET."""
    res, _ = results_for(_three(tmp_path, uncertainty=uncertainty))
    sc = res["scenarios"][0]
    rt = sc["routes"][0]
    assert rt["p_fail"] == 0.5
    assert [m["share_of_draws"] for m in sc["ensemble"]] == [0.25, 0.25, 0.5]
    assert [m["parameters"]["growth"] for m in sc["ensemble"]] == ["ultra-fast", "fast", "medium"]
    by = {m["member"]: m for m in rt["by_member"]}
    assert [by[k]["p_fail"] for k in ("a-01", "a-02", "a-03")] == [1.0, 1.0, 0.0]
    tol = 10.0 if uncertainty else 1e-6
    assert [by[k]["aset_p50"] for k in ("a-01", "a-02", "a-03")] == [pytest.approx(x, abs=tol)
                                                                      for x in (200.0, 300.0, 400.0)]
    loc = sc["locations"][0]
    assert [m["aset_raw_s"] for m in loc["aset_by_member"]] == [pytest.approx(x) for x in (200.0, 300.0, 400.0)]
    assert rt["draw_counts"]["fail"] == 200 and rt["draw_counts"]["draws"] == 400


def test_assignment_share_is_exact_to_one_draw():
    """Systematic sampling: every member receives floor or ceil of S w_m draws (Cochran 1977, ch. 8)."""
    w = np.array([0.13, 2.0, 0.5, 1.37, 0.001])
    for S, seed in ((1000, 1), (997, 2), (37, 5)):
        counts = np.bincount(assign_members(w, S, seed, 0), minlength=len(w))
        expected = S * w / w.sum()
        assert counts.sum() == S
        assert np.all(np.abs(counts - expected) < 1.0)


def test_censoring_is_per_draw_member_end(tmp_path):
    """A member whose data end at 300 s and never reach the limit cannot decide a draw whose occupants
    leave at ~351 s (undecided, counted as fail); a member with data to 600 s passes the same draw."""
    _csv(tmp_path / "short.csv", float("inf"), end_s=300.0)
    _csv(tmp_path / "long.csv", float("inf"), end_s=600.0)
    members = [{"histories": "short.csv", "weight": 1}, {"histories": "long.csv", "weight": 1}]
    res, _ = results_for(_study(tmp_path, members, samples=100))
    rt = res["scenarios"][0]["routes"][0]
    assert rt["p_fail"] == 0.5 and rt["p_fail_bounds"]["low"] == 0.0
    assert {m["member"]: m["p_fail"] for m in rt["by_member"]} == {"short": 1.0, "long": 0.0}
    assert rt["draw_counts"]["undecided"] == 50
    assert res["scenarios"][0]["end_s"] == 600.0


def test_glob_with_side_table_gives_equal_weights_and_parameters(tmp_path):
    runs = tmp_path / "runs"
    runs.mkdir()
    for name, reach in (("a-1", 200.0), ("a-2", 500.0)):
        _csv(runs / f"{name}.csv", reach)
    (runs / "params.csv").write_text("file,name,value\na-1.csv,growth_kw_s2,0.047\na-2.csv,growth_kw_s2,0.012\n")
    path = _study(tmp_path, {"glob": "runs/a-*.csv", "parameters": "runs/params.csv"}, samples=10)
    res, _ = results_for(path)
    ens = res["scenarios"][0]["ensemble"]
    assert [(m["member"], m["weight"], m["parameters"]) for m in ens] == [
        ("a-1", 1.0, {"growth_kw_s2": 0.047}), ("a-2", 1.0, {"growth_kw_s2": 0.012})]
    assert res["scenarios"][0]["routes"][0]["p_fail"] == 0.5
    # the side table is a file read, so its SHA-256 is among the inputs (hashlib, independently)
    import hashlib
    [entry] = [i for i in res["inputs"] if i["role"].startswith("ensemble parameters")]
    assert entry["path"] == "runs/params.csv"
    assert entry["sha256"] == hashlib.sha256((runs / "params.csv").read_bytes()).hexdigest()


def test_validate_names_the_member_file_and_the_column_that_differs(tmp_path, cli):
    _csv(tmp_path / "a-01.csv", 200.0)
    _csv(tmp_path / "a-02.csv", 300.0, column="T_other")
    path = _study(tmp_path, [{"histories": "a-01.csv"}, {"histories": "a-02.csv"}])
    code, out, err = cli(["validate", str(path)])
    text = out + err
    assert code == 2
    assert "a-02.csv" in text and "T1" in text and "ensemble member 'a-02'" in text
    assert "a-01.csv" not in text.replace(str(tmp_path / "a-02.csv"), "")


def test_validate_catches_histories_and_ensemble_together_and_bad_weights(tmp_path, cli):
    _csv(tmp_path / "a-01.csv", 200.0)
    path = _study(tmp_path, [{"histories": "a-01.csv", "weight": -1}])
    doc = yaml.safe_load(path.read_text())
    doc["scenarios"][0]["histories"] = "a-01.csv"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = cli(["validate", str(path)])
    assert code == 2 and "both 'histories' and 'ensemble'" in out + err
    del doc["scenarios"][0]["histories"]
    path.write_text(yaml.safe_dump(doc))
    code, out, err = cli(["validate", str(path)])
    assert code == 2 and "expected a positive number" in out + err


def test_report_shows_the_members_and_a_margin_by_member_figure(tmp_path):
    from egressmargin.report import plots as report_plots
    from egressmargin.report.render import build_context, render_html

    res, pl = results_for(_three(tmp_path, samples=40))
    ctx = build_context(res, pl)
    view = ctx["scenarios"][0]["ensemble"]
    assert [r["member"] for r in view["rows"]] == ["a-01", "a-02", "a-03"]
    assert [r["p_fail"] for r in view["rows"]] == [[("r", 1.0)], [("r", 1.0)], [("r", 0.0)]]
    png = report_plots.ensemble_figure(**view["figure"]["job"][1])
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    html = render_html(res, pl)
    assert "Ensemble members of scenario fire-a" in html and "growth = medium" in html


def test_a_detector_rule_reads_each_draws_own_member(tmp_path):
    """Smoke detection at K = 0.1 1/m: member 'early' reaches it at 100 s, 'late' at 250 s (linear rise).
    With pre-movement 100 s the occupants leave at ~201 s and ~351 s; the limit (60 degC) is reached at
    300 s in both, so 'early' passes and 'late' fails: p_fail = 1/2 (closed form). Detection read on one
    member only would give 0 or 1."""
    t = np.arange(0.0, 601.0, 1.0)
    for name, t_det in (("early", 100.0), ("late", 250.0)):
        temp = 20.0 + 40.0 * t / 300.0
        k = 0.1 * t / t_det
        lines = ["Time [s],T1 [degC],K1 [1/m]"] + [f"{float(a)!r},{float(b)!r},{float(c)!r}"
                                                  for a, b, c in zip(t, temp, k)]
        (tmp_path / f"{name}.csv").write_text("\n".join(lines) + "\n")
    path = _study(tmp_path, [{"histories": "early.csv"}, {"histories": "late.csv"}], samples=100,
                  premovement="100 s")
    doc = yaml.safe_load(path.read_text())
    doc["scenarios"][0]["locations"].append({"id": "det", "role": "detector", "extinction": "K1"})
    doc["egress"][0]["detection"] = {"smoke": {"location": "det", "extinction": "0.1 1/m"}}
    path.write_text(yaml.safe_dump(doc))
    res, _ = results_for(path)
    rt = res["scenarios"][0]["routes"][0]
    assert rt["p_fail"] == 0.5
    assert {m["member"]: m["p_fail"] for m in rt["by_member"]} == {"early": 0.0, "late": 1.0}


def test_member_detection_for_other_streams_is_recomputed_per_member(tmp_path):
    """Detection asked for uniforms other than the run's (same count) is evaluated member by member
    again, not taken from the reference member: the early member detects at 100 s, the late at 250 s."""
    from egressmargin import aset
    from egressmargin.ensemble import MemberPrep, build
    from egressmargin.pipeline import load

    t = np.arange(0.0, 601.0, 1.0)
    for name, t_det in (("early", 100.0), ("late", 250.0)):
        lines = ["Time [s],T1 [degC],K1 [1/m]"] + [f"{float(a)!r},20.0,{float(0.1 * a / t_det)!r}" for a in t]
        (tmp_path / f"{name}.csv").write_text("\n".join(lines) + "\n")
    path = _study(tmp_path, [{"histories": "early.csv"}, {"histories": "late.csv"}], samples=10)
    doc = yaml.safe_load(path.read_text())
    doc["scenarios"][0]["locations"].append({"id": "det", "role": "detector", "extinction": "K1"})
    doc["egress"][0]["detection"] = {"smoke": {"location": "det", "extinction": "0.1 1/m"}}
    path.write_text(yaml.safe_dump(doc))
    loaded = load(path)
    spec, crit = loaded.study.scenarios[0], loaded.study.criteria
    ens = build(spec, loaded.members["fire-a"], crit, 10, 1, 0, loaded.study.routes)
    ens.evaluate(crit, {}, 10)
    prep = MemberPrep(ens, aset.prepare(loaded.data["fire-a"], crit, None, None))
    rule = loaded.study.routes[0].detection
    got = prep.member_detection(rule, {}, np.full(10, 0.123))
    expected = np.where(ens.member_of_draw == 0, 100.0, 250.0)
    assert got == pytest.approx(expected, abs=1e-6)


def test_process_pool_gives_the_same_results_as_a_serial_run(tmp_path):
    """Scenarios in forked workers see the ensemble members too: identical results.json content."""
    path = _three(tmp_path, samples=60, uncertainty=True)
    doc = yaml.safe_load(path.read_text())
    plain = dict(doc["scenarios"][0])
    plain.pop("ensemble")
    plain.update({"id": "fire-b", "histories": "a-02.csv"})
    doc["scenarios"].append(plain)
    path.write_text(yaml.safe_dump(doc))
    serial, _ = results_for(path, workers=1)
    pooled, _ = results_for(path, workers=2)
    assert pooled["scenarios"] == serial["scenarios"]
    assert serial["scenarios"][0]["routes"][0]["p_fail"] == 0.5


def test_a_borderline_ensemble_takes_the_planned_extra_draws(tmp_path):
    """Members weighted 1 : 19, the first failing for certain and the second passing (closed form:
    p_fail = 1/20 = 0.05, exactly the acceptance limit): the Clopper-Pearson interval straddles the
    limit at every look, so the route takes every planned look up to max_samples (100, 200, 400),
    the members assigned to the 400 draws again, stratified (Cochran 1977, ch. 8: 20 and 380 draws)."""
    _csv(tmp_path / "fast.csv", 200.0)
    _csv(tmp_path / "slow.csv", 500.0)
    members = [{"histories": "fast.csv", "weight": 1}, {"histories": "slow.csv", "weight": 19}]
    path = _study(tmp_path, members, samples=100, uncertainty=True)
    doc = yaml.safe_load(path.read_text())
    doc["acceptance"] = {"max_p_fail": 0.05}
    doc["max_samples"] = 400
    path.write_text(yaml.safe_dump(doc))
    res, _ = results_for(path)
    rt = res["scenarios"][0]["routes"][0]
    assert rt["samples_used"] == 400
    assert rt["p_fail"] == 0.05 and rt["verdict"] == "indeterminate"
    assert rt["draw_counts"] == {**rt["draw_counts"], "draws": 400, "fail": 20}
    assert {m["member"]: (m["draws"], m["p_fail"]) for m in rt["by_member"]} == {"fast": (20, 1.0),
                                                                                 "slow": (380, 0.0)}
    assert res["scenarios"][0]["ensemble"][0]["draws"] == 5       # the main draw keeps `samples`


def _co_pair(tmp_path, samples=40):
    """Two members on one column map: 'smoky' holds 4000 ppm CO throughout, 'clean' none; the
    temperature stays at 20 degC in both (weights 1 : 3)."""
    t = np.arange(0.0, 901.0, 5.0)
    for name, co in (("smoky", 4000.0), ("clean", 0.0)):
        lines = ["Time [s],T1 [degC],CO1 [ppm]"] + [f"{float(a)!r},20.0,{co!r}" for a in t]
        (tmp_path / f"{name}.csv").write_text("\n".join(lines) + "\n")
    members = [{"histories": "smoky.csv", "weight": 1}, {"histories": "clean.csv", "weight": 3}]
    path = _study(tmp_path, members, samples=samples)
    doc = yaml.safe_load(path.read_text())
    doc["criteria"] = {"base": "general-2m", "only": ["fed_toxic"],
                       "fed_toxic": {"limit": 0.3, "method": "iso13571"}}
    doc["scenarios"][0]["locations"] = [{"id": "a", "temperature": "T1", "co": "CO1"}]
    doc["egress"][0].update({"occupants": 3, "start_at": "a", "exposure": "along-route",
                             "path": [{"corridor": {"length": "10 m", "width": "2 m", "at": "a"}}]})
    path.write_text(yaml.safe_dump(doc))
    return path


def test_every_occupants_dose_is_evaluated_on_each_draws_own_member(tmp_path):
    """Only member 'smoky' has CO: every occupant's dose is > 0 exactly in its draws. The last
    occupant's dose there is the ISO 13571:2012 CO term, C t / 35000 ppm min, with C = 4000 ppm
    and t the time from ignition to leaving the corridor (every stay is in location 'a')."""
    from egressmargin import aset, assess
    from egressmargin.ensemble import MemberPrep, build
    from egressmargin.pipeline import load

    path = _co_pair(tmp_path)
    loaded = load(path)
    study = loaded.study
    spec, crit, route = study.scenarios[0], study.criteria, study.routes[0]
    ens = build(spec, loaded.members["fire-a"], crit, 40, study.seed, 0, study.routes)
    ens.evaluate(crit, {}, 40)
    prep = MemberPrep(ens, aset.prepare(loaded.data["fire-a"], crit, None, None))
    eg = assess.scenario_egress([route], prep, {}, [assess.egress_uniforms(study.seed, 0, 40)], study.elements,
                                per_person=True)
    ex = ens.occupant_exposure(route, crit, {}, eg.routes["r"])
    ce = ex.criteria["fed_toxic"]
    smoky = ens.member_of_draw == 0
    assert smoky.sum() == 10
    assert np.all(ce.worst[smoky] > 0) and np.all(ce.worst[~smoky] == 0)
    assert np.all(np.nan_to_num(ce.persons[smoky], nan=1.0) > 0) and np.all(np.nan_to_num(ce.persons[~smoky]) == 0)
    assert ce.last[smoky] == pytest.approx(4000.0 * ex.exit_s[smoky] / 60.0 / 35000.0, rel=1e-6)
    assert np.array_equal(ce.any_exceeds, smoky)                   # about 0.6 > 0.3 in 'smoky', 0 in 'clean'
    res, _ = results_for(path)
    ar = res["scenarios"][0]["routes"][0]["along_route"]
    assert ar["criteria"]["fed_toxic"]["occupants"]["p_any_exceeds"] == 0.25      # the smoky member's weight
    assert ar["criteria"]["fed_toxic"]["exceeds_p"] == 0.25
    assert "per member" in ar["ensemble_note"] and "reference" not in ar["ensemble_note"]


def test_sensitivity_covers_the_ensemble_member(tmp_path):
    """With the member the only uncertain input (fixed egress, no model-error table), all the margin's
    variance is the member's: first-order and total Sobol' indices 1 (Sobol' 2001, by definition with one
    input). The one-at-a-time row spans the members' margins at median inputs: ASET 200 s and 400 s
    (closed form: linear rise) against the same RSET, a swing of 200 s."""
    from egressmargin.ensemble import MEMBER_INPUT, MEMBER_ROW

    res, _ = results_for(_three(tmp_path, samples=64))
    rt = res["scenarios"][0]["routes"][0]
    idx = rt["sensitivity_indices"]
    assert [r["input"] for r in idx] == [MEMBER_INPUT]
    assert idx[0]["first_order"] == pytest.approx(1.0, abs=0.05) and idx[0]["total"] == pytest.approx(1.0, abs=0.05)
    row = next(r for r in rt["sensitivity"] if r["input"] == MEMBER_ROW)
    assert (row["low"], row["high"]) == ("member a-01", "member a-03")
    assert row["swing_s"] == pytest.approx(200.0, abs=1e-6) and row["kind"] == "ensemble"


def test_sensitivity_indices_with_a_model_error_put_the_member_first(tmp_path):
    """A 1 % model error on the temperature rise moves the crossings by about 1 % (2-4 s), the member by
    100-200 s: the member's total index is near 1 and the factor's near 0."""
    from egressmargin.ensemble import MEMBER_INPUT

    res, _ = results_for(_three(tmp_path, samples=64, uncertainty=True))
    idx = {r["input"]: r for r in res["scenarios"][0]["routes"][0]["sensitivity_indices"]}
    assert set(idx) == {MEMBER_INPUT, "model error: temperature"}
    assert idx[MEMBER_INPUT]["total"] > 0.95 and idx["model error: temperature"]["total"] < 0.05


def test_occupant_verdict_of_an_ensemble_settles_at_the_planned_looks_per_member(tmp_path):
    """The smoky member (weight 1/4) makes some occupant exceed in every one of its draws and the clean
    one in none (closed form: P = 1/4 exactly, stratified). Against max_p_fail 0.25 on the occupants'
    basis the interval straddles the limit at every look, so the route goes to max_samples (40, 80, 160
    draws), the exposure evaluated per member at each look: still exactly 40 of 160 draws."""
    path = _co_pair(tmp_path, samples=40)
    doc = yaml.safe_load(path.read_text())
    doc["acceptance"] = {"max_p_fail": 0.25, "basis": "occupants"}
    doc["max_samples"] = 160
    path.write_text(yaml.safe_dump(doc))
    res, _ = results_for(path)
    rt = res["scenarios"][0]["routes"][0]
    occ = rt["occupant_verdict"]
    assert occ["samples_used"] == 160 and occ["p_fail"] == 0.25 and occ["verdict"] == "indeterminate"
    assert rt["along_route"]["criteria"]["fed_toxic"]["occupants"]["p_any_exceeds"] == 0.25
    assert {m["member"]: m["draws"] for m in rt["by_member"]} == {"smoky": 40, "clean": 120}


def test_memory_estimate_counts_the_members_copy_of_the_kept_times(tmp_path):
    """An ensemble's exposure works on each member's copy of its draws' per-person times: the sizing
    counts the route's path elements twice (1 corridor -> 2; occupants 3, bounded x 1.1 -> 4)."""
    from egressmargin.pipeline import load
    from egressmargin.study import _kept_persons

    loaded = load(_co_pair(tmp_path))
    assert _kept_persons(loaded.study, "fire-a", 40) == ((4, 2),)
