"""The ASET engine and the pipeline against closed forms and reference libraries.

Outside references named beside each check: scipy.stats (lognorm, truncnorm, norm) and
ISO 13571:2012 (CO term phi/35000 per minute).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

from engine_helpers import location, results_for, write_study

ONLY_T = {"base": "general-2m", "only": ["temperature"]}


def _ramp_study(tmp_path, dist="lognormal", bias=1.2, sigma=0.15, samples=20000, end=2000.0):
    # Temperature rise 0.2 K/s from 20 degC: reaches 60 degC (rise 40 K) at t_raw = 200 s.
    t = np.arange(0.0, end + 1.0, 1.0)
    temp = 20.0 + 0.2 * t
    unc = {"source": "synthetic test values", "distribution": dist,
           "quantities": {"temperature": {"bias": bias, "sigma_model": sigma, "sigma_exp": 0.0}}}
    return write_study(tmp_path, t, {"T1": ("degC", temp)}, [{"id": "a", "temperature": "T1"}],
                       criteria=ONLY_T, uncertainty=unc, samples=samples)


def test_lognormal_band_of_a_linear_ramp_matches_scipy_lognorm(tmp_path):
    """Corrected time t = t_raw * delta / f with ln f ~ N(-ln delta - sigma^2/2, sigma) (mean of
    f is 1/delta, McGrattan & Toman 2011): t is lognormal with median t_raw*delta*exp(sigma^2/2)
    and shape sigma (closed form; quantiles from scipy.stats.lognorm)."""
    res, _ = results_for(_ramp_study(tmp_path))
    c = location(res, "a")["criteria"]["temperature"]
    assert c["raw_s"] == pytest.approx(200.0, abs=1e-9)
    ref = stats.lognorm(s=0.15, scale=200.0 * 1.2 * np.exp(0.5 * 0.15**2))
    # 20000 samples: the sample 5 % quantile of a lognormal with s = 0.15 has a standard
    # error of about 0.3 %; 1.5 % is a safe bound.
    for key, q in (("p05", 0.05), ("p50", 0.5), ("p95", 0.95)):
        assert c["corrected_s"][key] == pytest.approx(ref.ppf(q), rel=0.015)
    assert c["p_reached"] == 1.0


def test_normal_option_matches_scipy_truncnorm(tmp_path):
    """Normal model error: f ~ N(1/delta, sigma/delta) truncated at 0 (contract), t = t_raw / f;
    the p05 of t is t_raw / f_p95 (scipy.stats.truncnorm)."""
    bias, sigma = 0.9, 0.2
    res, _ = results_for(_ramp_study(tmp_path, "normal", bias, sigma))
    c = location(res, "a")["criteria"]["temperature"]
    mean, sd = 1 / bias, sigma / bias
    f = stats.truncnorm(a=-mean / sd, b=np.inf, loc=mean, scale=sd)
    for key, q in (("p05", 0.95), ("p50", 0.5), ("p95", 0.05)):
        assert c["corrected_s"][key] == pytest.approx(200.0 / f.ppf(q), rel=0.015)


def test_no_uncertainty_gives_equal_percentiles(tmp_path):
    t = np.arange(0.0, 601.0, 5.0)
    path = write_study(tmp_path, t, {"T1": ("degC", 20 + 0.2 * t)}, [{"id": "a", "temperature": "T1"}],
                       criteria=ONLY_T)
    res, _ = results_for(path)
    c = location(res, "a")["criteria"]["temperature"]
    assert c["corrected_s"] == {"p05": 200.0, "p50": 200.0, "p95": 200.0}
    assert location(res, "a")["aset_s"]["p50"] == 200.0


def test_constant_co_reaches_iso_fed_03_at_630_s(tmp_path):
    """ISO 13571:2012: FED rate phi_CO/35000 per minute; 1000 ppm constant -> 0.3 at 10.5 min."""
    t = np.arange(0.0, 1201.0, 10.0)
    path = write_study(tmp_path, t, {"CO": ("ppm", np.full_like(t, 1000.0))}, [{"id": "a", "co": "CO"}],
                       criteria={"base": "general-2m", "only": ["fed_toxic"]})
    res, _ = results_for(path)
    c = location(res, "a")["criteria"]["fed_toxic"]
    assert c["raw_s"] == pytest.approx(630.0, abs=1e-6)
    assert set(c["missing_series"]) >= {"hcn", "co2"}


def test_co_linear_scaling_is_exact_through_the_dose_grid(tmp_path):
    """ISO CO dose is linear in the CO factor, so corrected time = 630 s * delta / f exactly and the
    percentiles follow scipy.stats.lognorm (closed form; median of 1/f is delta exp(sigma^2/2),
    as f has mean 1/delta)."""
    t = np.arange(0.0, 3001.0, 10.0)
    unc = {"source": "synthetic", "distribution": "lognormal",
           "quantities": {"co": {"bias": 1.25, "sigma_model": 0.2}}}
    path = write_study(tmp_path, t, {"CO": ("ppm", np.full_like(t, 1000.0))}, [{"id": "a", "co": "CO"}],
                       criteria={"base": "general-2m", "only": ["fed_toxic"]}, uncertainty=unc, samples=20000)
    res, _ = results_for(path)
    c = location(res, "a")["criteria"]["fed_toxic"]
    ref = stats.lognorm(s=0.2, scale=630.0 * 1.25 * np.exp(0.5 * 0.2**2))
    for key, q in (("p05", 0.05), ("p50", 0.5), ("p95", 0.95)):
        assert c["corrected_s"][key] == pytest.approx(ref.ppf(q), rel=0.02)


def test_percentile_beyond_end_is_null_not_clipped(tmp_path):
    res, _ = results_for(_ramp_study(tmp_path, bias=1.0, sigma=0.9, samples=4000, end=600.0))
    t = np.arange(0.0, 601.0, 1.0)
    # 200 s * exp(0.9 * 1.645) = 880 s > 600 s (end): p95 must be None, p_reached about 0.89
    c = location(res, "a")["criteria"]["temperature"]
    assert c["corrected_s"]["p95"] is None
    assert c["p_reached"] < 1.0
    assert c["corrected_s"]["p05"] < t[-1]


def test_p_fail_matches_difference_of_normals(tmp_path):
    """ASET normal and RSET normal: p_fail = Phi((mu_R - mu_A) / sqrt(sd_A^2 + sd_R^2))
    (scipy.stats.norm). A rise c/(T0 - t) crosses level L at t = T0 - c f / L: linear in a
    normally distributed factor f, so the ASET is normal."""
    T0, c_, L = 1000.0, 20000.0, 40.0          # raw crossing at 1000 - 20000/40 = 500 s
    t = np.linspace(0.0, 990.0, 19801)
    rise = c_ / (T0 - t)
    unc = {"source": "synthetic", "distribution": "normal",
           "quantities": {"temperature": {"bias": 1.0, "sigma_model": 0.1}}}
    route = {"id": "r", "occupants": 50, "detection": "0 s", "alarm": "0 s",
             "premovement": {"normal": {"mean": "400 s", "sd": "40 s"}},
             "path": [{"door": {"width": "1.3 m"}}], "exposed_at": ["a"]}
    path = write_study(tmp_path, t, {"T": ("degC", 20.0 + rise - rise[0])}, [{"id": "a", "temperature": "T"}],
                       routes=[route], criteria=ONLY_T, uncertainty=unc, samples=40000,
                       extra={"scenarios": [{"id": "s1", "histories": "data.csv", "time": "Time",
                                             "ambient": {"temperature": "20 degC"},
                                             "locations": [{"id": "a", "temperature": "T"}]}]})
    res, _ = results_for(path)
    r = res["scenarios"][0]["routes"][0]
    move = 50 / (1.3 * (1.3 - 0.3))            # door: Fsm 1.3 p/(s m), 0.15 m boundary a side
    rise0 = c_ / T0
    # crossing of (rise - rise0) * f... the study subtracts rise0 so ambient is 20 degC:
    # rise_eff(t) = c/(T0-t) - rise0 reaches 40 at t where c/(T0-t) = 40 + rise0, scaled by f:
    mu_a = T0 - c_ / (L + rise0)               # f = 1 median, only approximately linear in f
    f = np.random.default_rng(3).normal(1.0, 0.1, 400000)
    aset = T0 - c_ * f / (L + rise0 * f)       # exact crossing time of (rise - rise0) * f = 40
    mu_a, sd_a = aset.mean(), aset.std()
    mu_r, sd_r = 400.0 + move, 40.0
    expected = stats.norm.cdf((mu_r - mu_a) / np.hypot(sd_a, sd_r))
    assert r["p_fail"] == pytest.approx(expected, abs=0.012)
    assert r["verdict"] == ("pass" if r["p_fail"] <= 0.05 else "fail")


def test_same_seed_gives_byte_identical_results(tmp_path):
    path = _ramp_study(tmp_path, samples=500)
    a, _ = results_for(path)
    b, _ = results_for(path)
    assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)
    c, _ = results_for(path, seed=99)
    assert json.dumps(a, sort_keys=True) != json.dumps(c, sort_keys=True)


def test_along_route_dose_of_constant_co_equals_closed_form(tmp_path):
    """One location, constant 1000 ppm CO: the last occupant's dose is stay[min] * 1000/35000
    (ISO 13571:2012 CO term). Stay by hand with the flow model (SFPE Handbook ch. 59
    constants, from memory): everyone starts at 120 s; they walk the corridor
    unimpeded, 20/1.19 = 16.81 s, and the door (1.3 x 0.7 = 0.91 persons/s) controls,
    so the last occupant leaves at 120 + 16.81 + 100/0.91 s: travel + N/Fc, stay =
    16.81 + 109.89 = 126.70 s (the corridor's entry, with spare capacity, adds nothing:
    flow in = flow out)."""
    t = np.arange(0.0, 3601.0, 5.0)
    route = {"id": "r", "occupants": 100, "detection": "30 s", "alarm": "30 s", "premovement": "60 s",
             "path": [{"corridor": {"length": "20 m", "width": "2 m"}}, {"door": {"width": "1.0 m"}}],
             "exposed_at": ["a"], "exposure": "along-route"}
    path = write_study(tmp_path, t, {"CO": ("ppm", np.full_like(t, 1000.0))}, [{"id": "a", "co": "CO"}],
                       routes=[route], criteria={"base": "general-2m", "only": ["fed_toxic"]})
    res, _ = results_for(path)
    r = res["scenarios"][0]["routes"][0]
    stay = 20 / (0.85 * 1.40) + 100 / (1.3 * 0.7)
    assert r["along_route"]["last_occupant_exit_s"]["p50"] == pytest.approx(120 + stay, abs=0.05)
    expected = stay / 60.0 * 1000.0 / 35000.0
    got = r["along_route"]["criteria"]["fed_toxic"]
    assert got["p50"] == pytest.approx(expected, rel=1e-3)
    assert got["p05"] == got["p95"] == got["p50"]


def test_sensitivity_puts_all_distribution_swing_on_the_one_uncertain_input(tmp_path):
    t = np.arange(0.0, 2001.0, 5.0)
    route = {"id": "r", "occupants": 40, "detection": "30 s", "alarm": "10 s",
             "premovement": {"lognormal": {"median": "60 s", "p95": "180 s"}},
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a"]}
    path = write_study(tmp_path, t, {"T1": ("degC", 20 + 0.05 * t)}, [{"id": "a", "temperature": "T1"}],
                       routes=[route], criteria=ONLY_T)
    res, _ = results_for(path)
    sens = {s["input"]: s for s in res["scenarios"][0]["routes"][0]["sensitivity"]}
    sigma = np.log(3.0) / stats.norm.ppf(0.95)
    pre = stats.lognorm(s=sigma, scale=60.0)
    assert sens["premovement time"]["swing_s"] == pytest.approx(pre.ppf(0.95) - pre.ppf(0.05), abs=0.02)
    assert not any(k.startswith("model error") for k in sens)     # no model uncertainty given
    assert sens["premovement time"]["kind"] == "distribution"
    # fixed detection (30 s) and alarm (10 s): a what-if range of +/-20 %, swings 0.4 x value
    assert sens["detection time"]["kind"] == sens["alarm time"]["kind"] == "what-if"
    assert sens["detection time"]["swing_s"] == pytest.approx(12.0, abs=0.02)
    assert sens["alarm time"]["swing_s"] == pytest.approx(4.0, abs=0.02)
    ranked = [s["input"] for s in res["scenarios"][0]["routes"][0]["sensitivity"]]
    assert ranked[0] == "premovement time"


def test_truncated_normal_quantile_matches_scipy_truncnorm():
    """stats.truncated_normal_ppf against scipy.stats.truncnorm (the reference library)."""
    from egressmargin.stats import truncated_normal_ppf

    u = np.linspace(0.001, 0.999, 57)
    for mean, sd in ((100.0, 10.0), (5.0, 10.0), (0.0, 3.0), (1.0 / 1.1, 0.2 / 1.1)):
        ref = stats.truncnorm.ppf(u, -mean / sd, np.inf, loc=mean, scale=sd)
        np.testing.assert_allclose(truncated_normal_ppf(u, mean, sd), ref, rtol=1e-9, atol=1e-12)


def test_process_pool_over_scenarios_gives_the_serial_results(tmp_path):
    """Several scenarios run in a process pool give byte-identical results to a serial run."""
    t = np.arange(0.0, 601.0, 5.0)
    cols = {"T1": ("degC", 20 + 0.2 * t), "CO": ("ppm", np.minimum(5 * t, 2000.0))}
    locs = [{"id": "a", "temperature": "T1", "co": "CO"}]
    unc = {"source": "synthetic", "distribution": "lognormal",
           "quantities": {"temperature": {"bias": 1.1, "sigma_model": 0.1}, "co": {"bias": 1.2, "sigma_model": 0.2}}}
    route = {"id": "r", "occupants": 30, "detection": "20 s", "alarm": "10 s",
             "premovement": {"lognormal": {"median": "60 s", "p95": "150 s"}},
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a"]}
    scen = [{"id": f"s{i}", "histories": "data.csv", "time": "Time", "locations": locs} for i in range(3)]
    path = write_study(tmp_path, t, cols, locs, routes=[route], uncertainty=unc, samples=300,
                       extra={"scenarios": scen})
    serial, _ = results_for(path, workers=1)
    parallel, _ = results_for(path, workers=3)
    assert json.dumps(serial, sort_keys=True) == json.dumps(parallel, sort_keys=True)
    # the scenarios draw their own model-error factors: same histories, different bands
    a, b = (location(serial, "a", i)["criteria"]["temperature"]["corrected_s"] for i in (0, 1))
    assert a != b


def _detector_study(tmp_path, detection, unc=None, samples=200):
    # gas at 120 degC from t = 0 (step from 20 degC ambient), 1.5 m/s; extinction ramp 0.001 1/m per s
    t = np.arange(0.0, 1201.0, 1.0)
    temp = np.where(t > 0, 120.0, 20.0)
    cols = {"T": ("degC", temp), "U": ("m/s", np.full_like(t, 1.5)), "K": ("1/m", 0.001 * t)}
    route = {"id": "r", "occupants": 10, "detection": detection, "alarm": "0 s", "premovement": "0 s",
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a"]}
    return write_study(tmp_path, t, cols, [{"id": "a", "temperature": "T", "velocity": "U", "extinction": "K"}],
                       routes=[route], criteria=ONLY_T, uncertainty=unc, samples=samples,
                       extra={"scenarios": [{"id": "s1", "histories": "data.csv", "time": "Time",
                                             "ambient": {"temperature": "20 degC"},
                                             "locations": [{"id": "a", "temperature": "T", "velocity": "U",
                                                            "extinction": "K"}]}]})


def test_heat_detector_rule_matches_the_rti_step_response(tmp_path):
    """Heskestad & Bill (1988) RTI model, step in gas temperature: activation at
    t = (RTI / sqrt(u)) ln((Tg - Ta) / (Tg - Tact)). RTI 100, u 1.5 m/s, 120 degC gas, 68 degC link."""
    path = _detector_study(tmp_path, {"heat": {"location": "a", "rti": 100, "activation": "68 degC"}})
    res, _ = results_for(path)
    det = res["scenarios"][0]["routes"][0]["rset_components_s"]["detection"]
    expected = 100 / np.sqrt(1.5) * np.log((120 - 20) / (120 - 68))
    assert det["p50"] == pytest.approx(expected, abs=0.6)   # 1 s steps, step applied over the first second


def test_heat_detector_uses_the_same_temperature_factor_as_the_aset(tmp_path):
    """With a temperature model-error factor f, the gas rise is f*100 K and the link activates at
    t = tau ln(f*100 / (f*100 - 48)); its median follows the median factor 1/delta (closed form)."""
    unc = {"source": "synthetic", "distribution": "lognormal",
           "quantities": {"temperature": {"bias": 1.25, "sigma_model": 0.05}}}
    path = _detector_study(tmp_path, {"heat": {"location": "a", "rti": 100, "activation": "68 degC"}}, unc, 2001)
    res, _ = results_for(path)
    det = res["scenarios"][0]["routes"][0]["rset_components_s"]["detection"]
    tau, rise = 100 / np.sqrt(1.5), 100 / 1.25
    assert det["p50"] == pytest.approx(tau * np.log(rise / (rise - 48)), abs=0.8)
    assert det["p05"] < det["p50"] < det["p95"]


def test_smoke_detector_rule_on_an_extinction_ramp(tmp_path):
    """K = 0.001 t reaches a 0.15 1/m threshold at 150 s; given as optical density 0.15/ln 10 1/m
    (K = ln(10) D) the answer is the same."""
    res, _ = results_for(_detector_study(tmp_path, {"smoke": {"location": "a", "extinction": "0.15 1/m"}}))
    assert res["scenarios"][0]["routes"][0]["rset_components_s"]["detection"]["p50"] == pytest.approx(150.0)
    d = float(0.15 / np.log(10))
    res, _ = results_for(_detector_study(tmp_path, {"smoke": {"location": "a", "optical_density": f"{d!r} 1/m"}}))
    assert res["scenarios"][0]["routes"][0]["rset_components_s"]["detection"]["p50"] == pytest.approx(150.0)


def test_visibility_series_is_searched_as_given(tmp_path):
    """A visibility series falling linearly from 30 m to 0 over 300 s reaches 10 m at 200 s,
    interpolated on the series as given (not on C/V); with sigma 0 and bias delta on K the
    corrected visibility is V*delta, reaching 10 m where V = 10/delta."""
    t = np.arange(0.0, 301.0, 30.0)          # 30 s steps: 10 m is reached between 180 s and 210 s
    vis = 30.0 - 0.1 * t
    unc = {"source": "synthetic", "distribution": "lognormal",
           "quantities": {"extinction": {"bias": 0.8, "sigma_model": 0.0}}}
    path = write_study(tmp_path, t, {"V": ("m", vis)}, [{"id": "a", "visibility": "V"}],
                       criteria={"base": "general-2m", "only": ["visibility"]}, uncertainty=unc)
    res, _ = results_for(path)
    c = location(res, "a")["criteria"]["visibility"]
    assert c["raw_s"] == pytest.approx(200.0)
    # K/delta: visibility V*delta = 0.8 V reaches 10 m where V = 12.5 m: t = (30 - 12.5)/0.1
    assert c["corrected_s"]["p50"] == pytest.approx(175.0)


def test_smoke_kinds_corrected_by_one_table_row_are_swept_together(tmp_path):
    """Two locations give smoke as extinction and as optical density; the table has one
    extinction row, so both share one draw and the sensitivity sweeps them as one input."""
    t = np.arange(0.0, 601.0, 5.0)
    cols = {"K": ("1/m", 0.002 * t), "D": ("1/m", 0.002 * t / np.log(10))}
    locs = [{"id": "a", "extinction": "K"}, {"id": "b", "optical_density": "D"}]
    unc = {"source": "synthetic", "distribution": "lognormal",
           "quantities": {"extinction": {"bias": 1.2, "sigma_model": 0.2}}}
    route = {"id": "r", "occupants": 20, "detection": "10 s", "alarm": "0 s", "premovement": "30 s",
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a", "b"]}
    path = write_study(tmp_path, t, cols, locs, routes=[route], uncertainty=unc, samples=500,
                       criteria={"base": "general-2m", "only": ["visibility"]})
    res, _ = results_for(path)
    a, b = (location(res, x)["criteria"]["visibility"]["corrected_s"] for x in ("a", "b"))
    assert a == b                                     # same series, same draw
    names = [s["input"] for s in res["scenarios"][0]["routes"][0]["sensitivity"]]
    assert names.count("model error: smoke (extinction)") == 1
    assert not any("optical" in n for n in names)
