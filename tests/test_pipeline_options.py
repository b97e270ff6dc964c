"""Pipeline options and checks end to end: raw-only and table override, a fitted table the
run accepts, grid sensitivity through the study file, and the validated-range flag."""

from __future__ import annotations

import numpy as np
import pytest
import yaml

from egressmargin.cli import main
from engine_helpers import location, results_for, write_study

ONLY_T = {"base": "general-2m", "only": ["temperature"]}
UNC = {"source": "synthetic test values", "distribution": "lognormal",
       "quantities": {"temperature": {"bias": 1.25, "sigma_model": 0.1, "sigma_exp": 0.05,
                                      "range": {"min": 15, "max": 50, "unit": "degC"}}}}


def _ramp(tmp_path, unc=UNC):
    t = np.arange(0.0, 1201.0, 5.0)
    return write_study(tmp_path, t, {"T1": ("degC", 20 + 0.2 * t)}, [{"id": "a", "temperature": "T1"}],
                       criteria=ONLY_T, uncertainty=unc, samples=2000)


def test_raw_only_ignores_the_table(tmp_path):
    res, _ = results_for(_ramp(tmp_path), raw_only=True)
    c = location(res, "a")["criteria"]["temperature"]
    assert res["uncertainty"] is None
    assert c["corrected_s"] == {"p05": 200.0, "p50": 200.0, "p95": 200.0}


def test_uncertainty_override_replaces_the_studys_table(tmp_path):
    path = _ramp(tmp_path)
    other = tmp_path / "other.yaml"
    other.write_text(yaml.safe_dump({"source": "other synthetic table", "distribution": "lognormal",
                                     "quantities": {"temperature": {"bias": 0.8, "sigma_model": 0.0}}}))
    res, _ = results_for(path, uncertainty=other)
    c = location(res, "a")["criteria"]["temperature"]
    # sigma 0: corrected time = t_raw * delta exactly (rise / delta reaches the limit later/earlier)
    assert c["corrected_s"]["p50"] == pytest.approx(200.0 * 0.8, abs=1e-6)
    assert res["uncertainty"]["source"] == "other synthetic table"


def test_prediction_outside_the_validated_range_is_flagged(tmp_path):
    res, _ = results_for(_ramp(tmp_path))
    c = location(res, "a")["criteria"]["temperature"]
    # the series passes 50 degC (the top of the validated range) before the 60 degC crossing
    assert c["outside_validated_range"] is True
    assert "outside the validated range" in c["range_note"]
    unc = {**UNC, "quantities": {"temperature": {**UNC["quantities"]["temperature"],
                                                 "range": {"min": 15, "max": 400, "unit": "degC"}}}}
    res2, _ = results_for(_ramp(tmp_path, unc))
    assert location(res2, "a")["criteria"]["temperature"]["outside_validated_range"] is False


def test_fitted_table_is_accepted_by_a_run(tmp_path, capsys):
    rng = np.random.default_rng(5)
    measured = rng.uniform(50, 300, 40)
    predicted = measured * 1.2 * np.exp(0.1 * rng.standard_normal(40))
    rows = ["quantity,measured,predicted,sigma_exp"] + [f"temperature,{m},{p},0.05"
                                                        for m, p in zip(measured, predicted)]
    (tmp_path / "pairs.csv").write_text("\n".join(rows) + "\n")
    table = tmp_path / "fitted.yaml"
    assert main(["fit-uncertainty", str(tmp_path / "pairs.csv"), "--out", str(table)]) == 0
    path = _ramp(tmp_path)
    res, _ = results_for(path, uncertainty=table)
    fitted = yaml.safe_load(table.read_text())
    assert res["uncertainty"]["quantities"]["temperature"]["bias"] == pytest.approx(
        fitted["quantities"]["temperature"]["bias"])
    assert 1.1 < fitted["quantities"]["temperature"]["bias"] < 1.3


def _grids(tmp_path, cells, order=2.0, c=4000.0):
    """Three CSVs of the same fire whose 60 degC crossing is t0 + c h^p (t0 = 200 s)."""
    t = np.arange(0.0, 1201.0, 1.0)
    files = []
    for h in cells:
        t_cross = 200.0 + c * h ** order
        rate = 40.0 / t_cross
        name = f"grid-{h:g}.csv"
        rows = ["Time [s],T1 [degC]"] + [f"{x},{float(20 + rate * x)!r}" for x in t]
        (tmp_path / name).write_text("\n".join(rows) + "\n")
        files.append(name)
    return files


def test_grid_sensitivity_recovers_order_and_extrapolated_time(tmp_path):
    """Exactly second-order times t_h = t0 + c h^2 give order 2 and t0 (Celik et al. 2008 procedure)."""
    cells = [0.05, 0.1, 0.2]
    files = _grids(tmp_path, cells)
    study = {"title": "grid (synthetic)", "criteria": ONLY_T, "scenarios": [{
        "id": "s", "time": "Time", "resolutions": [{"cell": f"{h} m", "histories": f} for h, f in zip(cells, files)],
        "locations": [{"id": "a", "temperature": "T1"}]}]}
    (tmp_path / "study.yaml").write_text(yaml.safe_dump(study))
    res, _ = results_for(tmp_path / "study.yaml")
    cred = res["scenarios"][0]["credibility"]
    entry = cred["locations"][0]["criteria"]["temperature"]
    assert entry["convergence"] == "monotone"
    assert entry["order"] == pytest.approx(2.0, abs=0.01)
    assert entry["extrapolated_s"] == pytest.approx(200.0, abs=0.5)
    # change between the two finest: (210 - 240)/210... flagged above the default 10 %
    assert entry["relative_change"] == pytest.approx(abs(210.0 - 240.0) / 210.0, rel=1e-3)
    assert entry["flagged"] is True
    study["credibility"] = {"max_grid_change": "20 percent"}
    (tmp_path / "study.yaml").write_text(yaml.safe_dump(study))
    res, _ = results_for(tmp_path / "study.yaml")
    assert res["scenarios"][0]["credibility"]["locations"][0]["criteria"]["temperature"]["flagged"] is False


@pytest.mark.parametrize("cells,words", [([0.1, 0.105, 0.2], "1.1"), ([0.1, 0.1, 0.2], "more than once")])
def test_bad_resolutions_are_input_errors(tmp_path, capsys, cells, words):
    files = _grids(tmp_path, sorted(set(cells)))
    files = [files[sorted(set(cells)).index(h)] for h in cells]
    study = {"title": "grid (synthetic)", "criteria": ONLY_T, "scenarios": [{
        "id": "s", "time": "Time", "resolutions": [{"cell": f"{h} m", "histories": f} for h, f in zip(cells, files)],
        "locations": [{"id": "a", "temperature": "T1"}]}]}
    (tmp_path / "study.yaml").write_text(yaml.safe_dump(study))
    assert main(["validate", str(tmp_path / "study.yaml")]) == 2
    err = capsys.readouterr().err
    assert "resolutions" in err and words in err.lower()


def test_resolution_missing_a_column_names_the_file(tmp_path, capsys):
    cells = [0.05, 0.1]
    files = _grids(tmp_path, cells)
    (tmp_path / files[1]).write_text((tmp_path / files[1]).read_text().replace("T1 [degC]", "T9 [degC]"))
    study = {"title": "grid (synthetic)", "criteria": ONLY_T, "scenarios": [{
        "id": "s", "time": "Time", "resolutions": [{"cell": f"{h} m", "histories": f} for h, f in zip(cells, files)],
        "locations": [{"id": "a", "temperature": "T1"}]}]}
    (tmp_path / "study.yaml").write_text(yaml.safe_dump(study))
    assert main(["validate", str(tmp_path / "study.yaml")]) == 2
    err = capsys.readouterr().err
    assert files[1] in err and "T1" in err


def test_only_without_a_base_asks_for_one(tmp_path, capsys):
    t = np.arange(0.0, 61.0, 10.0)
    path = write_study(tmp_path, t, {"T1": ("degC", 20 + t)}, [{"id": "a", "temperature": "T1"}],
                       criteria={"only": ["temperature"]})
    assert main(["validate", str(path)]) == 2
    err = capsys.readouterr().err
    assert "criteria.only" in err and "base" in err


def test_route_with_nothing_assessed_says_so(tmp_path):
    """Criteria not assessed are never silently passed: a route none of whose criteria can be
    assessed is 'indeterminate' (the draws carry no evidence) and says so in words."""
    t = np.arange(0.0, 61.0, 10.0)
    route = {"id": "r", "occupants": 10, "detection": "10 s", "alarm": "5 s", "premovement": "10 s",
             "path": [{"door": {"width": "1 m"}}], "exposed_at": ["a"]}
    path = write_study(tmp_path, t, {"C": ("percent", t / 10)}, [{"id": "a", "co2": "C"}], routes=[route])
    res, _ = results_for(path)
    r = res["scenarios"][0]["routes"][0]
    assert r["criteria_assessed"] is False
    assert r["verdict"] == "indeterminate"
    assert r["verdict_text"].startswith("None of the criteria could be assessed")
    assert {x["criterion"] for x in r["not_assessed"]} >= {"temperature", "fed_toxic", "visibility"}
