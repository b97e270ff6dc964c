"""Model-uncertainty tables: loading, checking, and drawing the error factors.

A table gives, per quantity, the model's bias factor delta (prediction over truth) and
relative standard deviation sigma_M (McGrattan & Toman 2011, Metrologia 48, 173-180).
The correction applies to the quantity as validated (contract): temperature as the rise
above ambient, O2 as the depletion below ambient, visibility through the extinction
coefficient, the others as given. For a prediction M the corrected value is
``M * f`` with the error factor

* lognormal: ``f = exp(sigma_M * Z - sigma_M^2 / 2) / delta``, Z standard normal, so
  M f has mean M / delta (as McGrattan & Toman define delta: the mean of the corrected
  value is M / delta), median (M / delta) exp(-sigma_M^2 / 2), and ln(M f) has standard
  deviation sigma_M;
* normal: ``f ~ Normal(1/delta, sigma_M/delta)`` truncated at zero, so M f has mean M/delta
  and standard deviation sigma_M M / delta before truncation.

One factor per quantity per Monte Carlo sample, shared by every location and time of a
scenario (a systematic model error); quantities are independent.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError, Problem
from .study import SERIES_KEYS, did_you_mean
from .units import UnitProblem, parse_quantity
from .yamlfile import load_located

QUANTITY_KEYS = SERIES_KEYS
DISTRIBUTIONS = ("lognormal", "normal")


@dataclass(frozen=True)
class QuantityStats:
    bias: float
    sigma_model: float
    sigma_exp: float = 0.0
    range_min: float | None = None   # internal unit of the quantity
    range_max: float | None = None
    range_text: str = ""
    n_pairs: int | None = None


@dataclass
class UncertaintyTable:
    source: str
    distribution: str
    quantities: dict[str, QuantityStats]
    path: Path | None = None
    parameters: dict = field(default_factory=dict)

    def as_results(self) -> dict:
        q = {}
        for k, s in self.quantities.items():
            e = {"bias": s.bias, "sigma_model": s.sigma_model, "sigma_exp": s.sigma_exp}
            if s.range_text:
                e["range"] = s.range_text
            q[k] = e
        return {"source": self.source, "distribution": self.distribution, "path": str(self.path or ""),
                "quantities": q, "parameters": self.parameters}


def load_table(path: Path) -> UncertaintyTable:
    """Read and check a model-uncertainty file; raise InputError with every problem."""
    doc = load_located(path)
    problems: list[Problem] = []
    data = doc.data
    allowed = {"source", "distribution", "quantities", "fitted", "parameters"}
    if not isinstance(data, dict):
        raise InputError([Problem(doc.where(()), "expected a mapping with source, distribution, quantities")])
    for key in data:
        if key not in allowed:
            problems.append(Problem(doc.where((key,)), f"unknown key '{key}'; expected one of "
                                    f"{', '.join(sorted(allowed))}{did_you_mean(key, allowed)}"))
    source = data.get("source")
    if not isinstance(source, str) or not source.strip():
        problems.append(Problem(doc.where(("source",)), "missing 'source'; expected a line saying where the "
                                "statistics come from (a validation guide, your own experiments)"))
    dist = data.get("distribution", "lognormal")
    if dist not in DISTRIBUTIONS:
        problems.append(Problem(doc.where(("distribution",)), f"found {dist!r}; expected lognormal or normal"))
    quantities = {}
    qs = data.get("quantities")
    if not isinstance(qs, dict) or not qs:
        problems.append(Problem(doc.where(("quantities",)), "expected a mapping of quantity keys to "
                                "{bias, sigma_model, sigma_exp}"))
        qs = {}
    for q, spec in qs.items():
        kp = ("quantities", q)
        if q not in QUANTITY_KEYS:
            problems.append(Problem(doc.where(kp), f"unknown quantity '{q}'; expected one of "
                                    f"{', '.join(QUANTITY_KEYS)}{did_you_mean(q, QUANTITY_KEYS)}"))
            continue
        if not isinstance(spec, dict):
            problems.append(Problem(doc.where(kp), f"found {spec!r}; expected {{bias, sigma_model, sigma_exp}}"))
            continue
        ok_keys = {"bias", "sigma_model", "sigma_exp", "range", "n_pairs"}
        for key in spec:
            if key not in ok_keys:
                problems.append(Problem(doc.where(kp + (key,)), f"unknown key '{key}'; expected one of "
                                        f"{', '.join(sorted(ok_keys))}{did_you_mean(key, ok_keys)}"))
        vals = {}
        for key, low, strict in (("bias", 0.0, True), ("sigma_model", 0.0, False), ("sigma_exp", 0.0, False)):
            if key not in spec:
                if key == "sigma_exp":
                    vals[key] = 0.0
                    continue
                problems.append(Problem(doc.where(kp), f"missing '{key}' for {q}"))
                continue
            v = spec[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or (v <= low if strict else v < low):
                problems.append(Problem(doc.where(kp + (key,)), f"found {v!r}; expected a number "
                                        f"{'above' if strict else 'of at least'} {low:g}"))
                continue
            vals[key] = float(v)
        rmin = rmax = None
        rtext = ""
        if "range" in spec:
            r = spec["range"]
            unit = r.get("unit") if isinstance(r, dict) else None
            if not isinstance(r, dict) or not {"min", "max"} <= set(r):
                problems.append(Problem(doc.where(kp + ("range",)), f"found {r!r}; expected {{min, max, unit}}"))
            else:
                try:
                    rmin = _range_value(r["min"], unit, q)
                    rmax = _range_value(r["max"], unit, q)
                    if rmax < rmin:
                        raise UnitProblem("max is below min; expected min <= max")
                    rtext = f"{r['min']} to {r['max']}{' ' + unit if unit else ''}"
                except UnitProblem as exc:
                    problems.append(Problem(doc.where(kp + ("range",)), str(exc)))
                    rmin = rmax = None
        if len(vals) == 3:
            quantities[q] = QuantityStats(vals["bias"], vals["sigma_model"], vals["sigma_exp"], rmin, rmax, rtext,
                                          spec.get("n_pairs"))
    if problems:
        raise InputError(problems)
    params = data.get("parameters") or {}
    return UncertaintyTable(source.strip(), dist, quantities, Path(path), params if isinstance(params, dict) else {})


def _range_value(v, unit, q):
    if unit is not None and isinstance(v, (int, float)) and not isinstance(v, bool):
        return parse_quantity(f"{v} {unit}", q)
    return parse_quantity(v, q)


def draw_factors(table: UncertaintyTable | None, quantities, n: int, rng: np.random.Generator) -> dict:
    """Draw ``n`` error factors for each quantity in ``quantities`` (internal keys).

    Quantities are drawn in the fixed order given, one uniform stream each, by inverse
    transform so that results do not depend on which other quantities are present.
    Quantities without statistics get factor 1 (uncorrected).
    """
    out = {}
    for q in quantities:
        u = rng.random(n)
        out[q] = factor_ppf(table, q, u)
    return out


def factor_ppf(table: UncertaintyTable | None, q: str, u) -> np.ndarray:
    """Error factor of quantity ``q`` at cumulative probability ``u`` (array).

    Parameters
    ----------
    table : UncertaintyTable or None
        The model-uncertainty table; None or no row for ``q``: factor 1.
    q : str
        Table row (quantity key).
    u : array_like
        Cumulative probabilities in (0, 1).

    Returns
    -------
    numpy.ndarray
        Factors [-] that multiply the prediction M (in its validated form).

    Notes
    -----
    McGrattan & Toman (2011) define the bias delta through the mean: the true value
    given a prediction M is distributed with mean M/delta. So both distributions have
    mean 1/delta:

    * lognormal, ln-sd sigma: :math:`f = \\exp(\\sigma z - \\sigma^2/2)/\\delta`, median
      :math:`\\exp(-\\sigma^2/2)/\\delta` (scipy.stats.lognorm with s = sigma,
      scale = exp(-sigma^2/2)/delta);
    * normal: mean 1/delta, sd sigma/delta, truncated at zero (the truncation raises the
      mean a little where sigma is large).

    References
    ----------
    McGrattan, K., and Toman, B. (2011), Quantifying the predictive uncertainty of
    complex numerical models, Metrologia 48, 173-180.
    """
    u = np.asarray(u, float)
    stats = table.quantities.get(q) if table else None
    if stats is None:
        return np.ones_like(u)
    if stats.sigma_model == 0:
        return np.full_like(u, 1.0 / stats.bias)
    if table.distribution == "lognormal":
        from scipy.special import ndtri  # the standard normal quantile, as scipy.stats.norm.ppf

        sigma = stats.sigma_model
        return np.exp(sigma * ndtri(u) - 0.5 * sigma * sigma) / stats.bias
    from .stats import truncated_normal_ppf  # = scipy.stats.truncnorm.ppf(u, -mean/sd, inf, mean, sd)

    return truncated_normal_ppf(u, 1.0 / stats.bias, stats.sigma_model / stats.bias)


def median_factor(table: UncertaintyTable | None, q: str) -> float:
    """The median error factor of row ``q`` (lognormal: exp(-sigma^2/2)/delta) [-]."""
    return float(factor_ppf(table, q, np.array([0.5]))[0])
