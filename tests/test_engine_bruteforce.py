"""The fast Monte Carlo engine against a brute-force per-sample loop.

For each sample the brute force rebuilds every corrected series, integrates the dose with
the trapezoidal rule and searches the first crossing; the engine must agree within the
interpolation bracket it reports (``grid_bound_s``), exactly for single-series criteria.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from egressmargin import aset
from egressmargin.criteria import CriteriaSet, Criterion
from egressmargin.histories import ScenarioData
from egressmargin.tenability.crossing import cumulative_trapezoid, first_crossing


def _data(seed: int, L: int = 3, N: int = 241):
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, 1200.0, N)
    grow = (t / t[-1])[None, :] ** rng.uniform(1.0, 2.5, (L, 1))
    temp = 20.0 + rng.uniform(40, 200, (L, 1)) * grow
    co = rng.uniform(500, 4000, (L, 1)) * 1e-6 * grow
    co2 = rng.uniform(0.01, 0.06, (L, 1)) * grow
    o2 = 0.209 - rng.uniform(0.01, 0.08, (L, 1)) * grow
    flux = rng.uniform(0.5, 6.0, (L, 1)) * grow
    series = {"temperature": temp, "co": co, "co2": co2, "o2": o2, "heat_flux": flux}
    present = {k: np.ones(L, bool) for k in series}
    return ScenarioData("s", t, [f"l{i}" for i in range(L)], series, present)


def _criteria(method: str) -> CriteriaSet:
    items = {
        "temperature": Criterion("temperature", 60.0, "60 degC", "degC"),
        "heat_flux": Criterion("heat_flux", 2.5, "2.5 kW/m^2", "kW/m^2"),
        "fed_toxic": Criterion("fed_toxic", 0.3, "0.3", "-", {"method": method}),
        "fed_heat": Criterion("fed_heat", 0.3, "0.3", "-", {"radiant_threshold": 2.5}),
    }
    return CriteriaSet("test", "", ["test"], items)


def _brute(prep, crit, factors, S):
    out = {cid: np.full((prep.n_loc, S), np.nan) for cid in crit.items}
    for s in range(S):
        f = {k: float(v[s]) for k, v in factors.items()}
        for cid, c in crit.items.items():
            if cid == "temperature":
                vals = prep.amb_c[:, None] + prep.rise * f.get("temperature", 1.0)
                out[cid][:, s] = first_crossing(prep.t_s, vals, c.limit)
            elif cid == "heat_flux":
                out[cid][:, s] = first_crossing(prep.t_s, prep.flux * f.get("heat_flux", 1.0), c.limit)
            else:
                names = aset.dose_quantities(c)
                inputs = aset.corrected_inputs(prep, names, f)
                dose = aset.cumulative_dose(c, prep.t_s, inputs, (prep.n_loc, len(prep.t_s)))
                out[cid][:, s] = first_crossing(prep.t_s, dose, c.limit)
    return out


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), method=st.sampled_from(["iso13571", "purser"]),
       sigma=st.floats(0.05, 0.4))
def test_fast_engine_matches_brute_force_within_reported_bound(seed, method, sigma):
    data = _data(seed)
    crit = _criteria(method)
    prep = aset.prepare(data, crit)
    rng = np.random.default_rng(seed + 1)
    S = 60
    factors = {q: np.exp(sigma * rng.standard_normal(S)) / rng.uniform(0.8, 1.3)
               for q in ("temperature", "co", "co2", "o2", "heat_flux")}
    fast = aset.evaluate(prep, crit, factors, S)
    slow = _brute(prep, crit, factors, S)
    for cid in crit.items:
        a, b = fast[cid].times, slow[cid]
        assert np.array_equal(np.isnan(a), np.isnan(b)) or fast[cid].grid_bound_s is not None
        both = np.isfinite(a) & np.isfinite(b)
        if fast[cid].grid_bound_s is None:
            np.testing.assert_allclose(a[both], b[both], atol=1e-6)
        else:
            bound = np.nan_to_num(fast[cid].grid_bound_s, nan=0.0)[:, None]
            assert np.all(np.abs(a - b)[both] <= (bound + 1e-6 + 0 * a)[both])


def test_dose_crossings_are_monotone_in_each_factor():
    """Raising any factor (more CO, more O2 depletion, hotter) never delays a dose crossing."""
    data = _data(7)
    crit = _criteria("purser")
    prep = aset.prepare(data, crit)
    base = np.linspace(0.7, 1.4, 15)
    for q in ("co", "co2", "o2"):
        factors = {q: base}
        t = aset.evaluate(prep, CriteriaSet("x", "", ["x"], {"fed_toxic": crit.items["fed_toxic"]}),
                          factors, len(base))["fed_toxic"].times
        t = np.where(np.isnan(t), np.inf, t)
        assert np.all(t[:, 1:] <= t[:, :-1] + 1e-9), q
