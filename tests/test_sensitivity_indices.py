"""Sobol' indices (egressmargin.sensitivity_indices) against published and closed-form values."""

from __future__ import annotations

import numpy as np
import pytest

from engine_helpers import results_for, write_study
from egressmargin import sensitivity_indices as si

#: The Ishigami function's indices for a = 7, b = 0.1 (Ishigami & Homma 1990; as
#: tabulated in Saltelli et al. 2008, "Global Sensitivity Analysis: The Primer", and in
#: the SALib documentation): S1, S2, S3 and ST1, ST2, ST3.
ISHIGAMI_S1 = (0.3139, 0.4424, 0.0)
ISHIGAMI_ST = (0.5576, 0.4424, 0.2437)


def _ishigami(u):
    x = -np.pi + 2 * np.pi * u                         # X_i uniform on [-pi, pi]
    return np.sin(x[:, 0]) + 7.0 * np.sin(x[:, 1]) ** 2 + 0.1 * x[:, 2] ** 4 * np.sin(x[:, 0])


def test_ishigami_indices_match_the_published_values():
    """Through the module's own design and estimator wrapper, N = 4096 (57 344 runs)."""
    U = si.saltelli_uniforms(3, 4096, seed=[5, 1])
    assert U.shape == (4096 * 5, 3) and U.min() > 0 and U.max() < 1
    rows = {r["input"]: r for r in si.sobol_indices(_ishigami(U), ["x1", "x2", "x3"], seed=3)}
    for j, name in enumerate(("x1", "x2", "x3")):
        r = rows[name]
        assert r["first_order"] == pytest.approx(ISHIGAMI_S1[j], abs=0.03), name
        assert r["total"] == pytest.approx(ISHIGAMI_ST[j], abs=0.03), name
        # the bootstrap intervals cover the published values (with a little slack for rounding)
        lo, hi = r["first_order_ci95"]
        assert lo - 0.01 <= ISHIGAMI_S1[j] <= hi + 0.01, name
        lo, hi = r["total_ci95"]
        assert lo - 0.01 <= ISHIGAMI_ST[j] <= hi + 0.01, name
    assert [r["input"] for r in si.sobol_indices(_ishigami(U), ["x1", "x2", "x3"], seed=3)] == ["x1", "x2", "x3"]


def test_an_output_that_does_not_vary_has_no_indices():
    U = si.saltelli_uniforms(2, 64, seed=1)
    assert si.sobol_indices(np.full(len(U), 3.0), ["a", "b"], seed=1) == []


def test_base_samples_are_halved_to_bound_the_cost():
    assert si.base_samples(6) == 512                       # 512 x 8 = 4096 evaluations
    assert si.base_samples(40) == 256                      # 512 x 42 > 16384; 256 x 42 = 10752
    assert si.base_samples(10_000) == si.MIN_BASE_SAMPLES
    assert si.base_samples(6, samples=300) == 256          # not more base samples than the verdict's draws
    assert si.base_samples(6, samples=10) == si.MIN_BASE_SAMPLES


def test_additive_margin_through_the_route_machinery(tmp_path):
    """Closed form: no limit is reached (margin = end - RSET), everyone starts together, so
    RSET = detection + alarm + pre-movement + a fixed movement time. With detection
    uniform 30-60 s and alarm uniform 0-60 s (independent) the margin is -X1 - X2 + c and
    S_i = ST_i = var_i / (var_1 + var_2): 30^2/(30^2 + 60^2) = 0.2 and 0.8 (the variance
    of a uniform of width w is w^2/12). Fixed inputs are not listed."""
    t = np.arange(0.0, 1201.0, 5.0)
    route = {"id": "r", "occupants": 20, "detection": {"uniform": {"low": "30 s", "high": "60 s"}},
             "alarm": {"uniform": {"low": "0 s", "high": "60 s"}}, "premovement": "60 s",
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a"]}
    path = write_study(tmp_path, t, {"T": ("degC", np.full_like(t, 25.0))}, [{"id": "a", "temperature": "T"}],
                       routes=[route], criteria={"base": "general-2m", "only": ["temperature"]}, samples=512)
    res, _ = results_for(path)
    r = res["scenarios"][0]["routes"][0]
    rows = {x["input"]: x for x in r["sensitivity_indices"]}
    assert set(rows) == {"detection time", "alarm time"}
    for name, want in (("detection time", 0.2), ("alarm time", 0.8)):
        assert rows[name]["first_order"] == pytest.approx(want, abs=0.04), name
        assert rows[name]["total"] == pytest.approx(want, abs=0.04), name
        lo, hi = rows[name]["total_ci95"]
        assert lo <= want <= hi, name
    assert r["sensitivity_indices"][0]["input"] == "alarm time"       # ranked by total index
    assert r["sensitivity_indices_fail"] == []                        # every draw passes
    m = r["sensitivity_indices_method"]
    assert m["base_samples"] == 512 and m["evaluations"] == 512 * 4 and m["inputs"] == 2


def test_failure_indicator_indices_name_the_input_that_decides(tmp_path):
    """ASET 250 s (temperature 20 + 0.16 t reaches 60 degC) against RSET = 30 + pre-movement
    + movement, pre-movement uniform 100-300 s: the route fails where pre-movement is late,
    so the failure indicator depends on pre-movement alone (its S1 = ST = 1; the
    uncertain occupant count moves RSET by a few seconds only)."""
    t = np.arange(0.0, 1201.0, 5.0)
    route = {"id": "r", "occupants": {"uniform": {"low": 9, "high": 11}}, "detection": "30 s", "alarm": "0 s",
             "premovement": {"uniform": {"low": "100 s", "high": "300 s"}},
             "path": [{"door": {"width": "2.0 m"}}], "exposed_at": ["a"]}
    path = write_study(tmp_path, t, {"T": ("degC", 20 + 0.16 * t)}, [{"id": "a", "temperature": "T"}],
                       routes=[route], criteria={"base": "general-2m", "only": ["temperature"]}, samples=200)
    res, _ = results_for(path)
    r = res["scenarios"][0]["routes"][0]
    fail = {x["input"]: x for x in r["sensitivity_indices_fail"]}
    assert fail["premovement time"]["total"] == pytest.approx(1.0, abs=0.1)
    assert fail["occupant count"]["total"] < 0.05
    assert r["sensitivity_indices"][0]["input"] == "premovement time"


def test_rows_location_aset_equals_the_full_evaluation_at_the_needed_locations():
    """The Sobol' rows' shortcut (exact dose only where a route passes, only up to the other
    criteria's earliest crossing) gives the numbers aset.evaluate gives, bit for bit, with
    three varying factors (the dose integrated exactly for every row) and with one (grid)."""
    from test_engine_bruteforce import _criteria, _data

    from egressmargin import aset
    from egressmargin.sensitivity_indices import rows_location_aset

    for seed, names in ((3, ("temperature", "co", "co2", "o2", "heat_flux")), (4, ("co",))):
        data = _data(seed, L=4)
        for q, x in data.series.items():          # location 0 quiet: no dose reaches its limit there
            x[0] = 20.0 + 0.02 * (x[0] - 20.0) if q == "temperature" else (
                0.209 - 0.02 * (0.209 - x[0]) if q == "o2" else 0.02 * x[0])
        crit = _criteria("purser")
        prep = aset.prepare(data, crit)
        rng = np.random.default_rng(seed)
        S = 200
        factors = {q: np.exp(0.3 * rng.standard_normal(S)) for q in names}
        full = aset.location_aset(aset.evaluate(prep, crit, factors, S, with_bound=False))
        got = rows_location_aset(prep, crit, factors, S, [0, 2])
        assert np.array_equal(got[[0, 2]], full[[0, 2]])
        assert np.all(np.isinf(got[[1, 3]]))
        if len(names) > 1:      # the shortcut rules the quiet location out, and only it
            fac = {q: np.broadcast_to(factors.get(q, 1.0), (S,)) for q in aset.dose_names(prep, crit.items["fed_toxic"])}
            assert si._never_reached(prep, crit.items["fed_toxic"], fac, np.array([0, 2])).tolist() == [True, False]


def test_every_random_stream_has_its_own_entropy_word():
    """The model-error streams are seeded (seed, scenario index); every other stream adds a word
    of its own. Two streams with the same word would draw the same numbers (the Sobol' design
    and the ensemble's member assignment once did)."""
    from egressmargin.assess import EGRESS_STREAM_TAG
    from egressmargin.ensemble import ENSEMBLE_STREAM_TAG
    from egressmargin.sensitivity_indices import SOBOL_STREAM_TAG

    words = [EGRESS_STREAM_TAG, ENSEMBLE_STREAM_TAG, SOBOL_STREAM_TAG]
    assert len(set(words)) == len(words)
