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

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError, Problem
from .study import SERIES_KEYS, did_you_mean
from .units import UnitProblem, parse_quantity
from .yamlfile import load_located

QUANTITY_KEYS = SERIES_KEYS
DISTRIBUTIONS = ("lognormal", "normal")

#: What a table row's statistics were fitted on: ``rise`` above ambient, ``depletion``
#: below ambient, or the quantity ``as-given``.
#: A relative standard deviation above this is refused in a table, and warned of in
#: fit-uncertainty's sigma_exp column, as a likely percentage (0.07 written as 7): a
#: lognormal factor with sigma 1 already spans exp(+/-1.96) = x/7 either way at 95 %,
#: beyond what a validation study of a fire model reports (project choice).
SIGMA_PERCENT_SUSPECT = 1.0
#: Above this a table's sigma is accepted with a warning: the 95 % band of a corrected
#: value spans more than a factor exp(2 x 1.96 x 0.5) = 7, so the run's times are set
#: more by the table than by the simulation (project choice).
SIGMA_WIDE = 0.5

BASES = ("rise", "depletion", "as-given")

#: The basis on which the run applies each quantity's row (the contract: temperature as
#: the rise above ambient, O2 as the depletion below ambient, the others as given).
#: A table that states another basis for a row is refused.
APPLIED_BASIS = {"temperature": "rise", "o2": "depletion"}


def applied_basis(quantity: str) -> str:
    """The basis on which the run applies the row of ``quantity`` (see :data:`APPLIED_BASIS`)."""
    return APPLIED_BASIS.get(quantity, "as-given")


@dataclass(frozen=True)
class QuantityStats:
    bias: float
    sigma_model: float
    sigma_exp: float = 0.0
    range_min: float | None = None   # internal unit of the quantity
    range_max: float | None = None
    range_text: str = ""
    n_pairs: int | None = None
    basis: str | None = None         # as the table states it; None when the table does not say
    range_unit: str | None = None    # the unit the table gives its range in (for messages)


@dataclass
class UncertaintyTable:
    source: str
    distribution: str
    quantities: dict[str, QuantityStats]
    path: Path | None = None
    parameters: dict = field(default_factory=dict)
    warnings: list[Problem] = field(default_factory=list)   # for results.json ``warnings``

    def as_results(self) -> dict:
        q = {}
        for k, s in self.quantities.items():
            e = {"bias": s.bias, "sigma_model": s.sigma_model, "sigma_exp": s.sigma_exp}
            if s.range_text:
                e["range"] = s.range_text
            e["basis"] = s.basis or applied_basis(k)
            q[k] = e
        return {"source": self.source, "distribution": self.distribution, "path": str(self.path or ""),
                "quantities": q, "parameters": self.parameters}


def load_table(path: Path) -> UncertaintyTable:
    """Read and check a model-uncertainty file; raise InputError with every problem.

    Besides the contract's keys, a row may state ``basis`` (one of :data:`BASES`): the
    form of the quantity its statistics were fitted on. A row whose basis differs from
    the one the run applies it on (:func:`applied_basis`) is an input error; a
    temperature or O2 row that does not state its basis is read with the contract's
    convention and a warning (``UncertaintyTable.warnings``). Non-finite numbers
    (``.nan``, ``.inf``) in ``bias``, ``sigma_model``, ``sigma_exp`` and ``range`` are
    input errors.
    """
    doc = load_located(path)
    problems: list[Problem] = []
    unstated: list[str] = []
    wide: list[Problem] = []
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
        ok_keys = {"bias", "sigma_model", "sigma_exp", "range", "n_pairs", "basis"}
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
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or \
                    (v <= low if strict else v < low):
                finite = "finite " if _is_non_finite(v) else ""
                problems.append(Problem(doc.where(kp + (key,)), f"found {v!r}; expected a {finite}number "
                                        f"{'above' if strict else 'of at least'} {low:g}"))
                continue
            if key != "bias" and v > SIGMA_PERCENT_SUSPECT:
                problems.append(Problem(doc.where(kp + (key,)), f"found {v!r}: a relative standard deviation above "
                                        f"{SIGMA_PERCENT_SUSPECT:g} is beyond any validated model; is it a "
                                        "percentage? expected a fraction (7 % is written 0.07)"))
                continue
            if key == "sigma_model" and v > SIGMA_WIDE:
                wide.append(Problem(doc.where(kp + (key,)), f"found {v!r}: with sigma_model above {SIGMA_WIDE:g} the "
                                    f"95 % band of corrected {q} spans more than a factor of 7, so the table rather "
                                    "than the simulation sets the times; check that it is a fraction, not a "
                                    "percentage", warning=True))
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
                    if not (math.isfinite(rmin) and math.isfinite(rmax)):
                        raise UnitProblem(f"found min {r['min']!r}, max {r['max']!r}; expected finite numbers")
                    if rmax < rmin:
                        raise UnitProblem("max is below min; expected min <= max")
                    rtext = f"{r['min']} to {r['max']}{' ' + unit if unit else ''}"
                except UnitProblem as exc:
                    problems.append(Problem(doc.where(kp + ("range",)), str(exc)))
                    rmin = rmax = None
        basis = spec.get("basis")
        if basis is None:
            if q in APPLIED_BASIS:
                unstated.append(q)
        elif basis not in BASES:
            problems.append(Problem(doc.where(kp + ("basis",)), f"found {basis!r}; expected one of "
                                    f"{', '.join(BASES)}{did_you_mean(str(basis), BASES)}"))
        elif basis != applied_basis(q):
            problems.append(Problem(doc.where(kp + ("basis",)), _basis_mismatch(q, basis)))
        if len(vals) == 3:
            quantities[q] = QuantityStats(vals["bias"], vals["sigma_model"], vals["sigma_exp"], rmin, rmax, rtext,
                                          spec.get("n_pairs"), basis, unit if rmin is not None else None)
    if problems:
        raise InputError(problems)
    params = data.get("parameters") or {}
    warnings = [Problem(doc.where(("quantities", q)), f"no 'basis' stated for {q}: read as fitted on the "
                        f"{_BASIS_WORDS[applied_basis(q)]}, as the run applies it; add 'basis: "
                        f"{applied_basis(q)}' to say so (egressmargin fit-uncertainty writes it)", warning=True)
                for q in unstated]
    warnings += wide + _failed_checks(doc, data.get("fitted"), quantities)
    return UncertaintyTable(source.strip(), dist, quantities, Path(path), params if isinstance(params, dict) else {},
                            warnings)


def _failed_checks(doc, fitted, quantities) -> list[Problem]:
    """Warnings for the fit checks a fitted table records as failed (``fitted.checks``)."""
    checks = fitted.get("checks") if isinstance(fitted, dict) else None
    out = []
    for q, check in (checks.items() if isinstance(checks, dict) else ()):
        if q not in quantities or not isinstance(check, dict):
            continue
        for name, words in (("normality", "ln(M/E) failed its normality test"),
                            ("trend", "the bias changes with the size of the quantity")):
            test = check.get(name)
            if isinstance(test, dict) and test.get("passed") is False:
                out.append(Problem(doc.where(("fitted", "checks", q, name)),
                                   f"{q}: {words} when the table was fitted ({test.get('test', name)}, "
                                   f"p = {test.get('p_value')}); its correction may misstate the model's error",
                                   warning=True))
    return out


_BASIS_WORDS = {"rise": "rise above ambient", "depletion": "depletion below ambient",
                "as-given": "quantity as given"}


def _basis_mismatch(q: str, basis: str) -> str:
    want = applied_basis(q)
    fix = {"rise": "refit with an 'ambient' column in the pairs file, so that the pairs become rises",
           "depletion": "refit with an 'ambient' column in the pairs file, so that the pairs become depletions",
           "as-given": "refit on the values as given"}[want]
    return (f"basis '{basis}': the statistics were fitted on the {_BASIS_WORDS[basis]}, but the run applies the "
            f"{q} row to the {_BASIS_WORDS[want]}, so it would correct the wrong quantity; {fix}")


def _is_non_finite(v) -> bool:
    """True for a float that is NaN or infinite (so a message can say "finite")."""
    return isinstance(v, (int, float)) and not isinstance(v, bool) and not math.isfinite(v)


def _range_value(v, unit, q):
    if unit is not None and isinstance(v, (int, float)) and not isinstance(v, bool):
        return parse_quantity(f"{v} {unit}", q)
    return parse_quantity(v, q)


#: Quantities whose series fall as a fire grows (the others rise): their ambient side of a
#: validated range is above it.
FALLING = frozenset({"o2", "visibility", "layer_height"})


def range_excursion(t_s, values, t_end: float, low: float, high: float, falling: bool = False) -> dict | None:
    """How far the predictions that matter leave a validated range, or None if they do not.

    Parameters
    ----------
    t_s : array_like
        Times [s].
    values : array_like
        The predicted series at those times [internal unit of the quantity].
    t_end : float
        Last time that matters [s]: the latest crossing, or the end of the data when the
        limit is not reached in every draw.
    low, high : float
        The validated range [same unit as ``values``].
    falling : bool, optional
        True for a quantity that falls as the fire grows (O2, visibility, layer height).

    Returns
    -------
    dict or None
        ``{"peak", "trough"}`` the largest and smallest counted values, ``"above_by"``
        and ``"below_by"`` how far they pass ``high`` and ``low`` (0 when they do not),
        ``"first_outside_s"`` the first time a counted value is outside, and
        ``"stays_outside"`` (True when the series never comes to the range from its
        ambient side); None when no counted value is outside.

    Notes
    -----
    Values up to ``t_end`` count, except the leading stretch on the ambient side before
    the series first reaches the range (for a rising quantity, values below ``low``
    until it first reaches ``low``; for a falling one, values above ``high`` until it
    first reaches ``high``): a start at 19.26 degC under a range of 20 to 200 degC is the
    ambient before the fire, not a prediction outside the range. A series that never
    reaches the range from its ambient side is reported (``stays_outside``). Bounds are
    compared with a relative tolerance of 1e-9.
    """
    t = np.asarray(t_s, float)
    v = np.asarray(values, float)
    keep = (t <= t_end + 1e-9) & np.isfinite(v)
    t, v = t[keep], v[keep]
    if v.size == 0:
        return None
    tol = 1e-9 * max(abs(low), abs(high), 1e-300)
    reached = (v <= high + tol) if falling else (v >= low - tol)
    stays = not reached.any()
    if not stays:
        start = int(np.argmax(reached))
        t, v = t[start:], v[start:]
    outside = (v > high + tol) | (v < low - tol)
    if not outside.any():
        return None
    peak, trough = float(v.max()), float(v.min())
    return {"peak": peak, "trough": trough, "above_by": max(peak - high, 0.0), "below_by": max(low - trough, 0.0),
            "first_outside_s": float(t[np.argmax(outside)]), "stays_outside": stays}


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
