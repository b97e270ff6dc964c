"""Smoke test of bench/bench.py: the fast ASET engine against a brute-force reference.

A correctness test, not a timing test: nothing here asserts on a time. The benchmark's
functions are run in-process on tiny SYNTHETIC studies (invented curves and an invented
uncertainty table; see bench/bench.py).

The reference (``bench.brute_force_times``) loops over the Monte Carlo samples in
Python, rebuilds each corrected series and applies the egressmargin.tenability
functions directly, with no dose grid. The rules it applies are the project's outside contract
(section "results.json": first crossing linearly interpolated between the bracketing
samples; doses by the trapezoidal rule). The engine must agree
within its own reported ``grid_bound_s`` plus, for visibility, the interpolation-rule
gap derived in ``brute_force_times`` (engine interpolates extinction, reference
visibility), plus the 0.001 s rounding of results.json.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

BENCH = Path(__file__).resolve().parents[1] / "bench" / "bench.py"


@pytest.fixture(scope="module")
def bench():
    spec = importlib.util.spec_from_file_location("egressmargin_bench", BENCH)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod
    spec.loader.exec_module(mod)
    return mod


#: results.json rounds times and bounds to 0.001 s (pipeline._t, stats.summarise).
ROUNDING_S = 1e-3


@pytest.fixture(scope="module")
def accuracy(bench, tmp_path_factory):
    size = bench.Size(scenarios=1, locations=4, rows=241, samples=80)
    return bench.accuracy_check(tmp_path_factory.mktemp("bench-ref"), size)


def test_every_criterion_compared(accuracy, bench):
    assert sorted(accuracy["criteria"]) == sorted(bench.CRITERIA)


def test_engine_within_its_bound_sample_by_sample(accuracy):
    # per sample: |engine - reference| <= grid_bound_s(location) + rule gap(sample)
    for cid, row in accuracy["criteria"].items():
        assert row["excess_s"] <= 1e-6, (cid, row)
        assert row["sample_mismatch"] == 0, (cid, row)


def test_percentiles_within_bound(accuracy):
    # a percentile moves no more than the largest per-sample difference
    for cid, row in accuracy["criteria"].items():
        allowed = row["grid_bound_s"] + row["rule_gap_s"] + 2 * ROUNDING_S
        assert row["max_pct_diff_s"] <= allowed, (cid, row)
        assert row["pct_mismatch"] == 0, (cid, row)


def test_single_series_criteria_are_exact(accuracy):
    # temperature is a single scaled series: the engine's level search is exact, so the
    # reference's first_crossing must give the same times to round-off.
    row = accuracy["criteria"]["temperature"]
    assert row["exact"] and row["grid_bound_s"] == 0.0
    assert row["max_sample_diff_s"] <= 1e-9
    # visibility: exact up to the interpolation-variable gap only
    vis = accuracy["criteria"]["visibility"]
    assert vis["exact"]
    assert vis["max_sample_diff_s"] <= vis["rule_gap_s"] + 1e-9


def test_the_study_crosses_limits(bench, accuracy, tmp_path):
    # The comparison would be empty if no limit were reached: the synthetic curves must
    # cross the limits at some locations and not at others (censoring is exercised too).
    folder = tmp_path / "s"
    loaded = bench.load_quiet(bench.write_study(folder, bench.Size(1, 4, 241, 80), routes=1))
    results, _ = bench.pipeline.build_results(loaded, bench.options(pdf=False, html=False))
    p50 = [loc["criteria"][cid]["corrected_s"]["p50"] for loc in results["scenarios"][0]["locations"]
           for cid in bench.CRITERIA]
    assert any(v is not None for v in p50)
    assert results["samples"] == 80


def test_brute_force_reproduces_a_closed_form_case(bench, tmp_path):
    # Closed form: a location whose temperature rises linearly 20 -> 200 degC over 0-1800 s
    # crosses 60 degC at t = 40/180 * 1800 = 400 s (contract: linear interpolation).
    study = bench.write_study(tmp_path / "c", bench.Size(1, 1, 181, 4), routes=1)
    loaded = bench.load_quiet(study)
    sid = loaded.study.scenarios[0].id
    data = loaded.data[sid]
    data.series["temperature"][0] = np.linspace(20.0, 200.0, data.t_s.size)
    times, _ = bench.brute_force_times(loaded, {"temperature": np.ones(4)}, 4)
    assert times["temperature"][0] == pytest.approx(np.full(4, 400.0))



def test_hard_dose_cases_within_one_second_and_their_bound(bench):
    """Radiant threshold with flux and temperature uncertain; ISO 13571 CO, HCN, CO2 uncertain."""
    hard = bench.hard_cases_check(samples=60, locations=2, rows=301)
    for name, row in hard.items():
        assert row["within_bound"], name
        assert row["max_sample_diff_s"] <= 1.0 and row["grid_bound_s"] <= 1.0, name
        assert row["reached_mismatch"] == 0, name
