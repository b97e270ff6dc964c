"""Shortcuts of the engine that must not change a result: checked against the full evaluation.

* ``aset.evaluate(..., only=mask)`` evaluates a few locations (the Sobol' design reads the
  routes' locations only): their times equal those of the evaluation of every location.
* A grid cached for more locations is cut to fewer (the locations' curves on a grid do not
  depend on each other): the times equal those of a fresh grid over the same nodes.
* A handful of draws with no grid to reuse (an ensemble member's share) is integrated
  exactly: every draw equals a per-draw loop (trapezoidal rule, first crossing), bound 0.
"""

from __future__ import annotations

import numpy as np

from egressmargin import aset
from egressmargin.criteria import CriteriaSet, Criterion
from egressmargin.histories import ScenarioData
from egressmargin.tenability.crossing import first_crossing


def _data(L: int = 6, N: int = 601, seed: int = 3):
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, 1200.0, N)
    grow = (t / t[-1])[None, :] ** rng.uniform(1.0, 2.5, (L, 1))
    series = {"temperature": 20.0 + rng.uniform(60, 220, (L, 1)) * grow,
              "co": rng.uniform(800, 5000, (L, 1)) * 1e-6 * grow}
    return ScenarioData("s", t, [f"l{i}" for i in range(L)], series, {k: np.ones(L, bool) for k in series})


def _crit() -> CriteriaSet:
    return CriteriaSet("t", "", ["t"], {
        "temperature": Criterion("temperature", 60.0, "60 degC", "degC"),
        "fed_toxic": Criterion("fed_toxic", 0.3, "0.3", "-", {"method": "iso13571"}),
        "fed_heat": Criterion("fed_heat", 0.3, "0.3", "-", {"radiant_threshold": 2.5})})


def _factors(S: int, seed: int = 5) -> dict:
    rng = np.random.default_rng(seed)
    return {"temperature": np.exp(0.15 * rng.standard_normal(S)), "co": np.exp(0.3 * rng.standard_normal(S))}


def test_only_some_locations_gives_their_times_unchanged():
    crit, S = _crit(), 300
    full = aset.evaluate(aset.prepare(_data(), crit), crit, _factors(S), S, with_bound=False)
    mask = np.array([False, True, False, False, True, False])
    part = aset.evaluate(aset.prepare(_data(), crit), crit, _factors(S), S, with_bound=False, only=mask)
    for cid in crit.items:
        np.testing.assert_array_equal(part[cid].times[mask], full[cid].times[mask])
        assert np.all(np.isnan(part[cid].times[~mask]))
        assert not part[cid].assessed[~mask].any()


def test_grid_cut_from_more_locations_equals_a_fresh_grid():
    crit, S = _crit(), 300
    f = _factors(S)
    fresh = aset.prepare(_data(), crit)
    mask = np.array([True, False, False, True, True, False])
    want = aset.evaluate(fresh, crit, f, S, with_bound=False, only=mask)      # grids over 3 rows
    cached = aset.prepare(_data(), crit)
    aset.evaluate(cached, crit, f, S)                                          # grids over all 6 rows
    n_grids = len(cached.dose_grids)
    got = aset.evaluate(cached, crit, f, S, with_bound=False, only=mask)      # cut from them
    assert len(cached.dose_grids) == n_grids                                   # nothing rebuilt
    for cid in crit.items:
        np.testing.assert_array_equal(got[cid].times, want[cid].times)


def test_few_draws_without_a_grid_are_integrated_exactly():
    crit = _crit()
    prep = aset.prepare(_data(), crit)
    S = 7                                            # fewer draws than the 41 grid nodes
    f = {"temperature": _factors(S)["temperature"]}  # one varying factor: the grid path otherwise
    res = aset.evaluate(prep, crit, f, S)["fed_heat"]
    assert not any(k[0] == "fed_heat" for k in prep.dose_grids)   # no heat grid was built
    np.testing.assert_array_equal(res.grid_bound_s, np.zeros(prep.n_loc))
    c = crit.items["fed_heat"]
    for s in range(S):                               # per-draw loop: trapezoidal rule, first crossing
        inputs = aset.corrected_inputs(prep, ["temperature"], {"temperature": float(f["temperature"][s])})
        dose = aset.cumulative_dose(c, prep.t_s, inputs, (prep.n_loc, len(prep.t_s)))
        np.testing.assert_allclose(res.times[:, s], first_crossing(prep.t_s, dose, c.limit), rtol=0, atol=1e-9)


def test_identical_series_prefilter_keeps_the_pairwise_findings():
    """The screen's sampled prefilter must find exactly what numpy.allclose pair by pair finds."""
    from egressmargin import plausibility

    rng = np.random.default_rng(11)
    base = rng.uniform(20.0, 300.0, 1801)
    twin = base.copy()                               # identical
    near = base.copy()
    near[1] += 50.0                                  # equal at most samples, differs between probes
    inf_a = base.copy()
    inf_a[5] = np.inf                                # equal infinities count as close (numpy.isclose)
    series = {"a": {"temperature": base}, "b": {"temperature": twin}, "c": {"temperature": near},
              "d": {"temperature": inf_a}, "e": {"temperature": inf_a.copy()},
              "f": {"temperature": np.full(1801, np.nan)}, "g": {"temperature": np.full(1801, np.nan)},
              "h": {"temperature": base[:900]}}
    got = sorted((f.location, f.message.split("location '")[1][0])
                 for f in plausibility.duplicate_checks("s", {}, series) if f.code == "identical-series")
    want = sorted((b, a) for i, a in enumerate(series) for b in list(series)[i + 1:]
                  if series[a]["temperature"].shape == series[b]["temperature"].shape
                  and np.allclose(series[a]["temperature"], series[b]["temperature"],
                                  rtol=plausibility.IDENTICAL_RTOL, atol=0.0))
    assert got == want
    assert ("b", "a") in got and ("e", "d") in got and not any("c" in p for p in got)


def test_sobol_design_rsets_on_distinct_rows_equal_one_run_over_every_row():
    """The bundled demo (shared named elements, an occupant-count distribution, detector rules):
    each group of routes run on its distinct design rows gives the RSETs of one flow run over
    every row of the Saltelli design."""
    from egressmargin import assess, pipeline, sensitivity_indices as si
    from egressmargin.resources import resource_dir

    opts = pipeline.RunOptions(pdf=False, html=False, workers=1)
    loaded = pipeline.load(resource_dir("demo") / "study.yaml", opts)
    study = loaded.study
    spec = next(s for s in study.scenarios if not getattr(s, "ensemble", None))
    prep = aset.prepare(loaded.data[spec.id], study.criteria, spec.ambient_temperature_c, spec.ambient_o2)
    routes = [r for r in study.routes if r.scenarios is None or spec.id in r.scenarios]
    ppfs = pipeline.factor_ppfs(loaded.table, prep)
    inputs = si.uncertain_inputs(routes, ppfs, {})
    U = si.saltelli_uniforms(len(inputs), 64, [1, 2])
    factors = {}
    for row, (f, keys) in ppfs.items():
        col = next((j for j, x in enumerate(inputs) if x.kind == "factor" and x.key == row), None)
        vals = np.asarray(f(U[:, col]), float) if col is not None else np.full(len(U), float(f(0.5)))
        for k in keys:
            factors[k] = vals
    draws = [assess.EgressDraws.median(len(U)) for _ in routes]
    for j, x in enumerate(inputs):
        if x.kind == "egress":
            d = draws[x.route]
            if x.key.startswith("premovement."):
                d.parameters = {**d.parameters, x.key.split(".", 1)[1]: U[:, j]}
            else:
                setattr(d, x.key, U[:, j])
    groups = si._sharing_groups(routes)
    assert any(len(g) > 1 for g in groups)                       # the demo shares elements
    full = assess.scenario_egress(routes, prep, factors, draws, study.elements)
    for keys in (None, {row: k for row, (_, k) in ppfs.items()}):   # every factor; the detectors' own
        got = si._design_rsets(routes, groups, inputs, U, prep, factors, draws, study.elements, keys)
        for r in routes:
            np.testing.assert_array_equal(got[r.id], full.routes[r.id].rset)
