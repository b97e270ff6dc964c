"""Tests of egressmargin.egress.distributions.

Reference values come from scipy.stats (lognorm, truncnorm, uniform, triang, norm),
an independent implementation of the same textbook distributions (Johnson, Kotz and
Balakrishnan, Continuous Univariate Distributions, 2nd ed., 1994-1995).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from egressmargin.egress import distributions as dist

U = np.linspace(0.001, 0.999, 41)


def test_z95_is_the_standard_normal_95th_percentile():
    # Standard normal tables: z_0.95 = 1.6449 (e.g. Abramowitz & Stegun, 1964, table 26.5).
    assert dist.Z_95 == pytest.approx(1.6449, abs=5e-5)
    # and the reference library agrees to machine precision (scipy.stats.norm.ppf)
    assert dist.Z_95 == pytest.approx(stats.norm.ppf(0.95), rel=1e-12)


def test_lognormal_by_median_and_p95_matches_scipy_lognorm():
    # scipy.stats.lognorm(s=sigma, scale=median) with sigma = ln(p95/median)/z_0.95.
    median, p95 = 90.0, 240.0
    sigma = math.log(p95 / median) / stats.norm.ppf(0.95)
    expected = stats.lognorm(s=sigma, scale=median).ppf(U)
    got = dist.ppf({"lognormal": {"median": median, "p95": p95}}, U)
    np.testing.assert_allclose(got, expected, rtol=1e-12)


def test_lognormal_returns_its_defining_quantiles():
    spec = {"lognormal": {"median": 90.0, "p95": 240.0}}
    assert dist.median(spec) == pytest.approx(90.0, rel=1e-12)
    assert dist.quantile(spec, 0.95) == pytest.approx(240.0, rel=1e-12)
    # sigma = ln(240/90)/1.6449 = 0.5963 (hand calculation)
    assert dist.lognormal_sigma(90.0, 240.0) == pytest.approx(0.5963, abs=1e-4)


def test_truncated_normal_matches_scipy_truncnorm_and_closed_form():
    mean, sd = 60.0, 40.0
    a = (0.0 - mean) / sd
    expected = stats.truncnorm(a, np.inf, loc=mean, scale=sd).ppf(U)
    got = dist.ppf({"normal": {"mean": mean, "sd": sd}}, U)
    np.testing.assert_allclose(got, expected, rtol=1e-10)
    # Closed form of the lower-truncated normal (Johnson, Kotz & Balakrishnan 1994,
    # ch. 13 sec. 10): x = mu + s * Phi^-1(Phi(alpha) + u (1 - Phi(alpha))), alpha = -mu/s.
    phi_a = stats.norm.cdf(-mean / sd)
    closed = mean + sd * stats.norm.ppf(phi_a + U * (1.0 - phi_a))
    np.testing.assert_allclose(got, closed, rtol=1e-9)
    assert np.all(got >= 0.0)


def test_uniform_matches_scipy_uniform():
    expected = stats.uniform(loc=30.0, scale=90.0).ppf(U)
    got = dist.ppf({"uniform": {"low": 30.0, "high": 120.0}}, U)
    np.testing.assert_allclose(got, expected, rtol=1e-12)


@pytest.mark.parametrize(
    "low, mode, high", [(30.0, 60.0, 180.0), (0.0, 0.0, 50.0), (10.0, 50.0, 50.0)]
)
def test_triangular_matches_scipy_triang(low, mode, high):
    c = (mode - low) / (high - low)
    expected = stats.triang(c, loc=low, scale=high - low).ppf(U)
    got = dist.ppf({"triangular": {"low": low, "mode": mode, "high": high}}, U)
    np.testing.assert_allclose(got, expected, rtol=1e-10, atol=1e-10)


def test_fixed_and_bare_number():
    np.testing.assert_array_equal(dist.ppf({"fixed": 60.0}, U), np.full(U.shape, 60.0))
    np.testing.assert_array_equal(dist.ppf(45, [0.1, 0.9]), [45.0, 45.0])
    assert dist.median(30.0) == 30.0


def test_sample_statistics_with_fixed_seed():
    # Large-sample statistics against scipy.stats moments/quantiles, fixed seed.
    rng = np.random.default_rng(12345)
    n = 200_000
    logn = dist.sample({"lognormal": {"median": 90.0, "p95": 240.0}}, n, rng)
    assert np.median(logn) == pytest.approx(90.0, rel=0.01)
    assert np.percentile(logn, 95) == pytest.approx(240.0, rel=0.02)
    tn = dist.sample({"normal": {"mean": 60.0, "sd": 40.0}}, n, rng)
    tn_mean = stats.truncnorm(-1.5, np.inf, loc=60.0, scale=40.0).mean()
    assert tn.mean() == pytest.approx(tn_mean, rel=0.01)
    tri = dist.sample({"triangular": {"low": 30.0, "mode": 60.0, "high": 180.0}}, n, rng)
    # triangular mean (a + c + b)/3 (Johnson, Kotz & Balakrishnan 1995, ch. 26 sec. 9)
    assert tri.mean() == pytest.approx((30.0 + 60.0 + 180.0) / 3.0, rel=0.01)


def test_sample_is_ppf_of_the_same_uniforms():
    # Common random numbers: sample(spec, n, rng) consumes exactly rng.random(n).
    spec = {"lognormal": {"median": 90.0, "p95": 240.0}}
    a = dist.sample(spec, 50, np.random.default_rng(7))
    b = dist.ppf(spec, np.random.default_rng(7).random(50))
    np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize(
    "spec",
    [
        {"fixed": 60.0},
        {"lognormal": {"median": 90.0, "p95": 90.0}},
        {"normal": {"mean": 45.0, "sd": 0.0}},
        {"uniform": {"low": 20.0, "high": 20.0}},
        {"triangular": {"low": 20.0, "mode": 20.0, "high": 20.0}},
    ],
)
def test_degenerate_specifications_are_constant(spec):
    assert dist.is_fixed(spec)
    values = dist.ppf(spec, U)
    assert np.all(values == values[0])
    assert values[0] == dist.median(spec)


def test_is_fixed_false_for_spread():
    assert not dist.is_fixed({"lognormal": {"median": 90.0, "p95": 240.0}})
    assert not dist.is_fixed({"uniform": {"low": 20.0, "high": 40.0}})


def test_check_spec_messages():
    assert dist.check_spec({"lognormal": {"median": 90.0, "p95": 240.0}}) == []
    assert dist.check_spec({"lognormal": {"median": 90.0, "p95": 30.0}}) == [
        "p95 (30 s) is below the median (90 s); expected p95 >= median"
    ]
    assert "must be positive" in dist.check_spec({"lognormal": {"median": 0.0, "p95": 30.0}})[0]
    assert "negative" in dist.check_spec({"fixed": -5.0})[0]
    assert "sd (-1 s) is negative" in dist.check_spec({"normal": {"mean": 10.0, "sd": -1.0}})[0]
    assert "mean (-10 s) is negative" in dist.check_spec({"normal": {"mean": -10.0, "sd": 1.0}})[0]
    assert "expected low <= high" in dist.check_spec({"uniform": {"low": 50.0, "high": 10.0}})[0]
    msg = dist.check_spec({"triangular": {"low": 10.0, "mode": 80.0, "high": 60.0}})[0]
    assert "mode (80 s) is outside [10 s, 60 s]" in msg


def test_check_spec_names_unknown_and_missing_keys():
    (msg,) = dist.check_spec({"lognorm": {"median": 90.0, "p95": 240.0}})
    assert "unknown distribution 'lognorm'" in msg
    assert "did you mean 'lognormal'" in msg
    assert "fixed, lognormal, normal, uniform, triangular" in msg
    msgs = dist.check_spec({"lognormal": {"median": 90.0, "p90": 240.0}})
    assert any("unknown parameter 'p90'" in m for m in msgs)
    assert any("missing 'p95'" in m for m in msgs)
    assert "finite number" in dist.check_spec({"uniform": {"low": "a", "high": 3.0}})[0]
    assert "exactly one" in dist.check_spec({"fixed": 1.0, "uniform": {}})[0]


def test_invalid_spec_raises_value_error_with_message():
    with pytest.raises(ValueError, match="expected p95 >= median"):
        dist.ppf({"lognormal": {"median": 90.0, "p95": 30.0}}, [0.5])
    with pytest.raises(ValueError, match=r"u in \[0, 1\]"):
        dist.ppf({"fixed": 1.0}, [1.5])


valid_specs = st.one_of(
    st.builds(
        lambda m, r: {"lognormal": {"median": m, "p95": m * r}},
        st.floats(1.0, 1e3),
        st.floats(1.0, 10.0),
    ),
    st.builds(
        lambda mu, s: {"normal": {"mean": mu, "sd": s}}, st.floats(0.0, 1e3), st.floats(0.0, 500.0)
    ),
    st.builds(
        lambda a, w: {"uniform": {"low": a, "high": a + w}},
        st.floats(0.0, 1e3),
        st.floats(0.0, 1e3),
    ),
    st.builds(
        lambda a, w, f: {"triangular": {"low": a, "mode": a + f * w, "high": a + w}},
        st.floats(0.0, 1e3),
        st.floats(0.0, 1e3),
        st.floats(0.0, 1.0),
    ),
)


@settings(max_examples=100, deadline=None)
@given(spec=valid_specs)
def test_ppf_is_nondecreasing_and_nonnegative(spec):
    # Property of any inverse CDF: monotone in u; durations are never negative.
    assert dist.check_spec(spec) == []
    x = dist.ppf(spec, U)
    assert np.all(np.diff(x) >= -1e-9 * np.maximum(1.0, np.abs(x[1:])))
    assert np.all(x >= 0.0)


def test_distribution_over_a_parameter_draws_the_parameter_first():
    """Two-stage inverse transform: draw s uses median m_s = 60 + 60 v_s (uniform) and
    returns the lognormal(median m_s, p95 240) quantile at u_s; checked against
    scipy.stats.lognorm(s = ln(240/m_s)/z95, scale = m_s).ppf(u_s)."""
    from scipy import stats as sps

    from egressmargin.egress import distributions as d

    spec = {"lognormal": {"median": {"uniform": {"low": 60.0, "high": 120.0}}, "p95": 240.0}}
    v = np.array([0.0, 0.5, 1.0, 0.25])
    u = np.array([0.5, 0.95, 0.1, 0.7])
    got = d.ppf_varying(spec, u, {"median": v})
    m = 60.0 + 60.0 * v
    ref = sps.lognorm(s=np.log(240.0 / m) / sps.norm.ppf(0.95), scale=m).ppf(u)
    np.testing.assert_allclose(got, ref, rtol=1e-9)
    # across occupants: (S, N) quantiles with NaN for absent persons stay NaN
    q = np.array([[0.25, 0.75], [0.5, np.nan]])
    out = d.ppf_varying(spec, q, {"median": np.array([0.5, 0.5])})
    assert np.isnan(out[1, 1]) and out[1, 0] == pytest.approx(90.0)


def test_nested_spec_is_checked_at_every_corner_of_its_parameter_box():
    from egressmargin.egress import distributions as d

    ok = {"lognormal": {"median": {"uniform": {"low": 60.0, "high": 120.0}}, "p95": 240.0}}
    assert d.check_nested_spec(ok) == []
    bad = {"lognormal": {"median": {"uniform": {"low": 60.0, "high": 300.0}}, "p95": 240.0}}
    assert any("median = 300 s" in m and "below the median" in m for m in d.check_nested_spec(bad))
    unbounded = {"lognormal": {"median": {"normal": {"mean": 60.0, "sd": 5.0}}, "p95": 240.0}}
    assert "bounded distribution" in d.check_nested_spec(unbounded)[0]
