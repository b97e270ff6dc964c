"""Percentile summaries of Monte Carlo samples, with 'not reached' kept as such."""

from __future__ import annotations

import numpy as np

PERCENTILES = (("p05", 5.0), ("p50", 50.0), ("p95", 95.0))


def _sorted(samples) -> np.ndarray:
    """Samples sorted, with NaN (not reached) as +inf."""
    x = np.asarray(samples, float).ravel()
    return np.sort(np.where(np.isnan(x), np.inf, x))


def _percentile_sorted(x: np.ndarray, q: float) -> float | None:
    if x.size == 0:
        return None
    pos = (x.size - 1) * q / 100.0
    lo, hi = int(np.floor(pos)), int(np.ceil(pos))
    if not (np.isfinite(x[lo]) and np.isfinite(x[hi])):
        return None
    return float(x[lo] + (x[hi] - x[lo]) * (pos - lo))


def percentile_or_none(samples, q: float) -> float | None:
    """The q-th percentile (linear interpolation, numpy's default) of ``samples``.

    NaN and +inf both mean "not reached by the end of the histories". A percentile whose
    interpolation touches such a sample is None ("> end"), never clipped to the end time.

    Examples
    --------
    >>> percentile_or_none([1.0, 2.0, 3.0, float("nan")], 50)
    2.5
    >>> percentile_or_none([1.0, float("nan")], 95) is None
    True
    """
    return _percentile_sorted(_sorted(samples), q)


def rounded(x, ndigits: int = 3) -> float | None:
    """``x`` as a float rounded to ``ndigits``, None where it is not finite ("not reached").

    >>> rounded(12.34567), rounded(float("inf")) is None
    (12.346, True)
    """
    x = float(x)
    return round(x, ndigits) if np.isfinite(x) else None


def summarise(samples, ndigits: int = 3) -> dict:
    """``{p05, p50, p95}`` of the samples, None where not reached."""
    x = _sorted(samples)
    out = {}
    for name, q in PERCENTILES:
        v = _percentile_sorted(x, q)
        out[name] = None if v is None else round(v, ndigits)
    return out


def truncated_normal_ppf(u, mean: float, sd: float) -> np.ndarray:
    """Quantile of a normal(mean, sd) truncated below at zero, at cumulative probability ``u``.

    Inverse transform of the truncated distribution: ``mean + sd * ndtri(F0 + u (1 - F0))``
    with ``F0 = ndtr(-mean / sd)``, the probability mass cut off below zero (see e.g.
    Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions, vol. 1, ch. 13).
    Checked against scipy.stats.truncnorm in the tests; written out here because importing
    scipy.stats costs more than a whole Monte Carlo run.

    Examples
    --------
    >>> round(float(truncated_normal_ppf(0.5, 100.0, 10.0)), 6)
    100.0
    """
    from scipy.special import ndtr, ndtri

    f0 = ndtr(-mean / sd)
    return np.maximum(mean + sd * ndtri(f0 + np.asarray(u, float) * (1.0 - f0)), 0.0)


def share(mask) -> float:
    """Fraction of True in ``mask``."""
    mask = np.asarray(mask, bool)
    return float(mask.mean()) if mask.size else 0.0
