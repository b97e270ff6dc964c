"""The model-error correction against McGrattan & Toman (2011) and per table row.

McGrattan, K., and Toman, B. (2011), Quantifying the predictive uncertainty of complex
numerical models, Metrologia 48, 173-180: the corrected value's mean is M/delta.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from egressmargin.uncertainty import QuantityStats, UncertaintyTable, factor_ppf, median_factor


def _table(dist, bias, sigma, q="temperature"):
    return UncertaintyTable("test", dist, {q: QuantityStats(bias, sigma, 0.0)})


@pytest.mark.parametrize("sigma", [0.15, 0.35])
def test_lognormal_factor_has_mean_one_over_delta(sigma):
    delta = 1.25
    table = _table("lognormal", delta, sigma)
    u = (np.arange(200_000) + 0.5) / 200_000
    f = factor_ppf(table, "temperature", u)
    # closed form: lognormal with ln-sd sigma and median exp(-sigma^2/2)/delta (scipy.stats.lognorm)
    ref = stats.lognorm(s=sigma, scale=np.exp(-0.5 * sigma**2) / delta)
    assert ref.mean() == pytest.approx(1.0 / delta, rel=1e-12)
    assert f.mean() == pytest.approx(1.0 / delta, rel=2e-4)
    for p in (0.05, 0.5, 0.95):
        assert float(factor_ppf(table, "temperature", np.array([p]))[0]) == pytest.approx(ref.ppf(p), rel=1e-10)
    assert median_factor(table, "temperature") == pytest.approx(np.exp(-0.5 * sigma**2) / delta, rel=1e-12)


def test_normal_factor_mean_one_over_delta_sd_sigma_over_delta():
    delta, sigma = 1.1, 0.1
    table = _table("normal", delta, sigma)
    u = (np.arange(100_000) + 0.5) / 100_000
    f = factor_ppf(table, "temperature", u)
    # truncation at zero is 10 standard deviations away here: a plain normal (scipy.stats.norm)
    ref = stats.norm(loc=1.0 / delta, scale=sigma / delta)
    assert f.mean() == pytest.approx(ref.mean(), rel=1e-4)
    assert f.std() == pytest.approx(ref.std(), rel=1e-3)
    assert float(factor_ppf(table, "temperature", np.array([0.95]))[0]) == pytest.approx(ref.ppf(0.95), rel=1e-9)
