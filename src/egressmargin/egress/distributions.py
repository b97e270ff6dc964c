"""Distributions of egress phase durations, sampled by inverse transform.

A duration (detection, alarm, pre-movement) is either fixed or drawn from one of a few
named distributions. A specification is a plain dict already in seconds:

=================  ===============================================  ================
kind               specification                                    parameters
=================  ===============================================  ================
fixed              ``{"fixed": v}`` (a bare number is taken too)     v >= 0
lognormal          ``{"lognormal": {"median": m, "p95": p}}``        0 < m <= p
normal             ``{"normal": {"mean": mu, "sd": s}}``             mu >= 0, s >= 0,
                                                                    truncated at 0
uniform            ``{"uniform": {"low": a, "high": b}}``            0 <= a <= b
triangular         ``{"triangular": {"low": a, "mode": c,            0 <= a <= c <= b
                   "high": b}}``
=================  ===============================================  ================

The normal is truncated at zero (contract: a duration cannot be negative): draws come
from the normal's part above zero, renormalised, never from clipping. Truncation moves
the distribution up; :func:`truncation_note` says by how much the median moves, and the
study loader warns when it moves more than :data:`TRUNCATION_WARN` (2 %) from the
stated mean (e.g. mean 30 s, sd 60 s: median 53.8 s).

Every draw goes through the inverse cumulative distribution function :func:`ppf`
evaluated at uniform numbers, so the same uniforms can be reused across design
variants (common random numbers) and a sensitivity study can ask for an exact
quantile with :func:`quantile`.
"""

from __future__ import annotations

import difflib
import math
from typing import Any

import numpy as np
from statistics import NormalDist

__all__ = [
    "BOUNDED_KINDS",
    "PARAMETERS",
    "Z_95",
    "check_nested_spec",
    "check_spec",
    "is_fixed",
    "median",
    "parameter_specs",
    "ppf",
    "ppf_varying",
    "quantile",
    "sample",
    "with_parameters",
    "truncation_note",
]

#: Parameter names of each distribution kind, in the order they are written.
PARAMETERS: dict[str, tuple[str, ...]] = {
    "fixed": (),
    "lognormal": ("median", "p95"),
    "normal": ("mean", "sd"),
    "uniform": ("low", "high"),
    "triangular": ("low", "mode", "high"),
}

#: Standard normal quantile at 0.95, z = Phi^-1(0.95) = 1.6448536...
#: (computed with the standard library's NormalDist, not typed in; scipy.stats.norm.ppf
#: gives the same value — checked in the tests). scipy is imported only when sampling.
Z_95: float = NormalDist().inv_cdf(0.95)

#: Relative move of a truncated normal's median from the stated mean above which the
#: study loader warns (project choice: a few percent, issue 17).
TRUNCATION_WARN = 0.02


def _fmt(value: float) -> str:
    return f"{value:g} s"


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
        value, (bool, np.bool_)
    )


def _parse(spec: Any) -> tuple[str, dict[str, float], list[str]]:
    """Split a specification into its kind and float parameters, with any problems."""
    kinds = ", ".join(PARAMETERS)
    if _is_number(spec):
        return "fixed", {"value": float(spec)}, []
    if not isinstance(spec, dict):
        return "", {}, [
            f"expected a duration in seconds or a mapping with one of: {kinds}; "
            f"got {type(spec).__name__} {spec!r}"
        ]
    if len(spec) != 1:
        return "", {}, [
            f"expected exactly one distribution name (one of: {kinds}); "
            f"got {sorted(map(str, spec)) or 'none'}"
        ]
    ((kind, body),) = spec.items()
    if kind not in PARAMETERS:
        hint = difflib.get_close_matches(str(kind), list(PARAMETERS), n=1)
        tail = f"; did you mean '{hint[0]}'?" if hint else ""
        return "", {}, [f"unknown distribution '{kind}'; expected one of: {kinds}{tail}"]
    if kind == "fixed":
        if not _is_number(body) or not math.isfinite(float(body)):
            return kind, {}, [f"fixed needs a finite number of seconds, got {body!r}"]
        return kind, {"value": float(body)}, []
    names = PARAMETERS[kind]
    if not isinstance(body, dict):
        return kind, {}, [
            f"{kind} needs a mapping with keys {', '.join(names)}; got {body!r}"
        ]
    problems = []
    params: dict[str, float] = {}
    for key in body:
        if key not in names:
            hint = difflib.get_close_matches(str(key), names, n=1)
            tail = f"; did you mean '{hint[0]}'?" if hint else ""
            problems.append(
                f"{kind} has unknown parameter '{key}'; expected {', '.join(names)}{tail}"
            )
    for name in names:
        if name not in body:
            problems.append(f"{kind} is missing '{name}'; expected {', '.join(names)}")
            continue
        value = body[name]
        if not _is_number(value) or not math.isfinite(float(value)):
            problems.append(f"{kind} {name} must be a finite number of seconds, got {value!r}")
            continue
        params[name] = float(value)
    return kind, params, problems


def _value_problems(kind: str, p: dict[str, float]) -> list[str]:
    """Impossible parameter values for a well-formed specification."""
    problems = []

    def negative(name: str) -> None:
        if p[name] < 0:
            problems.append(
                f"{kind} {name} ({_fmt(p[name])}) is negative; a duration cannot be negative"
            )

    if kind == "fixed":
        if p["value"] < 0:
            problems.append(
                f"fixed duration ({_fmt(p['value'])}) is negative; "
                "a duration cannot be negative"
            )
    elif kind == "lognormal":
        if p["median"] <= 0:
            problems.append(
                f"lognormal median ({_fmt(p['median'])}) must be positive; "
                "expected median > 0"
            )
        if p["p95"] < p["median"]:
            problems.append(
                f"p95 ({_fmt(p['p95'])}) is below the median ({_fmt(p['median'])}); "
                "expected p95 >= median"
            )
    elif kind == "normal":
        negative("mean")
        if p["sd"] < 0:
            problems.append(f"normal sd ({_fmt(p['sd'])}) is negative; expected sd >= 0")
    elif kind == "uniform":
        negative("low")
        if p["low"] > p["high"]:
            problems.append(
                f"uniform low ({_fmt(p['low'])}) is above high ({_fmt(p['high'])}); "
                "expected low <= high"
            )
    elif kind == "triangular":
        negative("low")
        if p["low"] > p["high"]:
            problems.append(
                f"triangular low ({_fmt(p['low'])}) is above high ({_fmt(p['high'])}); "
                "expected low <= high"
            )
        elif not p["low"] <= p["mode"] <= p["high"]:
            problems.append(
                f"triangular mode ({_fmt(p['mode'])}) is outside "
                f"[{_fmt(p['low'])}, {_fmt(p['high'])}]; expected low <= mode <= high"
            )
    return problems


def check_spec(spec: Any) -> list[str]:
    """List what is impossible in a duration specification.

    Parameters
    ----------
    spec : dict or float
        A specification as described in the module docstring, in seconds [s].

    Returns
    -------
    list of str
        One human-readable message per problem; empty when the specification is usable.
        The caller adds where in the study the specification sits.

    Examples
    --------
    >>> check_spec({"lognormal": {"median": 90.0, "p95": 240.0}})
    []
    >>> check_spec({"lognormal": {"median": 90.0, "p95": 30.0}})
    ['p95 (30 s) is below the median (90 s); expected p95 >= median']
    """
    kind, params, problems = _parse(spec)
    if problems:
        return problems
    return _value_problems(kind, params)


def _checked(spec: Any) -> tuple[str, dict[str, float]]:
    kind, params, problems = _parse(spec)
    problems = problems or _value_problems(kind, params)
    if problems:
        raise ValueError("invalid duration specification: " + "; ".join(problems))
    return kind, params


def lognormal_sigma(median_s: float, p95_s: float) -> float:
    """Log standard deviation of a lognormal given its median and 95th percentile.

    Parameters
    ----------
    median_s : float
        Median [s], > 0.
    p95_s : float
        95th percentile [s], >= median.

    Returns
    -------
    float
        sigma, the standard deviation of ln(T) [-].

    Notes
    -----
    For ln T ~ N(mu, sigma^2) the median is exp(mu) and the p-quantile is
    exp(mu + sigma z_p), so

        sigma = ln(p95 / median) / z_0.95,   z_0.95 = Phi^-1(0.95) = 1.6449.

    References
    ----------
    Johnson, N. L., Kotz, S., Balakrishnan, N. (1994). Continuous Univariate
    Distributions, Vol. 1, 2nd ed., Wiley, ch. 14 (lognormal distributions).

    Examples
    --------
    >>> round(lognormal_sigma(90.0, 240.0), 4)
    0.5963
    """
    return math.log(p95_s / median_s) / Z_95


def ppf(spec: Any, u: Any) -> np.ndarray:
    """Inverse cumulative distribution function of a duration at uniform numbers.

    Parameters
    ----------
    spec : dict or float
        Duration specification in seconds (see module docstring).
    u : array_like
        Probabilities in [0, 1] [-], any shape.

    Returns
    -------
    numpy.ndarray
        Durations [s], same shape as ``u``.

    Notes
    -----
    - fixed: ``v`` everywhere.
    - lognormal: ``median * exp(sigma * Phi^-1(u))`` with
      ``sigma = ln(p95/median) / Phi^-1(0.95)``; p95 == median is a constant.
    - normal truncated at zero: quantile of ``scipy.stats.truncnorm`` with
      ``a = -mean/sd``, ``b = inf``, ``loc = mean``, ``scale = sd``; sd == 0 is a
      constant.
    - uniform: ``low + u (high - low)``.
    - triangular (low a, mode c, high b), with F_c = (c - a)/(b - a):

        x = a + sqrt(u (b - a)(c - a))            for u <= F_c
        x = b - sqrt((1 - u)(b - a)(b - c))       for u >  F_c

    References
    ----------
    Johnson, N. L., Kotz, S., Balakrishnan, N. (1994, 1995). Continuous Univariate
    Distributions, Vols. 1 and 2, 2nd ed., Wiley (lognormal ch. 14; truncated normal
    ch. 13 sec. 10; uniform ch. 26; triangular ch. 26 sec. 9).

    Examples
    --------
    >>> ppf({"uniform": {"low": 30.0, "high": 90.0}}, [0.0, 0.5, 1.0]).tolist()
    [30.0, 60.0, 90.0]
    >>> round(float(ppf({"lognormal": {"median": 90.0, "p95": 240.0}}, 0.95)), 6)
    240.0
    """
    kind, p = _checked(spec)
    u = np.asarray(u, dtype=float)
    if np.any(~((u >= 0.0) & (u <= 1.0))):
        raise ValueError("ppf needs probabilities u in [0, 1]")
    return _ppf_math(kind, p, u)


def _ppf_math(kind: str, p: dict, u: np.ndarray) -> np.ndarray:
    """The inverse CDFs of :func:`ppf`; parameters may be arrays broadcasting with ``u``."""
    p = {k: np.asarray(v, dtype=float) for k, v in p.items()}
    shape = np.broadcast_shapes(u.shape, *(v.shape for v in p.values()))
    u = np.broadcast_to(u, shape)
    if kind == "fixed":
        return np.broadcast_to(p["value"], shape).astype(float)
    if kind == "lognormal":
        from scipy import special

        sigma = np.log(p["p95"] / p["median"]) / Z_95
        return np.where(sigma == 0.0, p["median"], p["median"] * np.exp(sigma * special.ndtri(u)))
    if kind == "normal":
        from ..stats import truncated_normal_ppf  # = scipy.stats.truncnorm.ppf(u, -mean/sd, inf, mean, sd)

        sd = np.where(p["sd"] == 0.0, 1.0, p["sd"])
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            x = truncated_normal_ppf(u, p["mean"], sd)
        return np.where(p["sd"] == 0.0, p["mean"], x)
    if kind == "uniform":
        return p["low"] + u * (p["high"] - p["low"])
    # triangular
    a, c, b = p["low"], p["mode"], p["high"]
    width = np.where(b == a, 1.0, b - a)
    f_c = (c - a) / width
    left = a + np.sqrt(u * (b - a) * (c - a))
    right = b - np.sqrt((1.0 - u) * (b - a) * (b - c))
    return np.where(b == a, a, np.where(u <= f_c, left, right))


#: Distributions allowed for an uncertain parameter: bounded, so that every draw of the
#: parameters can be checked to give a valid distribution.
BOUNDED_KINDS: tuple[str, ...] = ("fixed", "uniform", "triangular")


def parameter_specs(spec: Any) -> dict[str, Any]:
    """The uncertain parameters of a specification: name -> its own distribution.

    A parameter may itself be a distribution (a distribution over a distribution's
    parameters, e.g. an uncertain median): ``{"lognormal": {"median": {"uniform":
    {"low": 60, "high": 120}}, "p95": 240}}``. Plain numbers are not listed.

    Examples
    --------
    >>> parameter_specs({"lognormal": {"median": {"uniform": {"low": 60, "high": 120}}, "p95": 240}})
    {'median': {'uniform': {'low': 60, 'high': 120}}}
    """
    if not isinstance(spec, dict) or len(spec) != 1:
        return {}
    ((_, body),) = spec.items()
    if not isinstance(body, dict):
        return {}
    return {k: v for k, v in body.items() if isinstance(v, dict)}


def with_parameters(spec: Any, values: dict[str, float]) -> Any:
    """The specification with its uncertain parameters replaced by numbers."""
    if not parameter_specs(spec):
        return spec
    ((kind, body),) = spec.items()
    return {kind: {k: float(values[k]) if isinstance(v, dict) else v for k, v in body.items()}}


def check_nested_spec(spec: Any) -> list[str]:
    """Problems of a specification whose parameters may be distributions.

    Each uncertain parameter must be a bounded distribution (:data:`BOUNDED_KINDS`)
    and valid itself; the specification must then be valid at every corner of the
    box of parameter bounds. The constraints (p95 >= median > 0, low <= mode <= high,
    values >= 0) are linear in the parameters, so holding at every corner means
    holding for every draw.
    """
    params = parameter_specs(spec)
    if not params:
        return check_spec(spec)
    problems = []
    bounds = {}
    for name, sub in params.items():
        kind = next(iter(sub)) if isinstance(sub, dict) and sub else ""
        if kind not in BOUNDED_KINDS:
            problems.append(f"uncertain parameter '{name}' must have a bounded distribution "
                            f"({', '.join(BOUNDED_KINDS)}), got '{kind}'")
            continue
        sub_problems = check_spec(sub)
        problems += [f"parameter '{name}': {m}" for m in sub_problems]
        if not sub_problems:
            bounds[name] = (quantile(sub, 0.0), quantile(sub, 1.0))
    if problems:
        return problems
    from itertools import product

    names = list(bounds)
    for corner in product(*(bounds[n] for n in names)):
        values = dict(zip(names, corner))
        for m in check_spec(with_parameters(spec, values)):
            at = ", ".join(f"{n} = {_fmt(v)}" for n, v in values.items())
            problems.append(f"with {at} (a bound of its range): {m}")
    return list(dict.fromkeys(problems))


def ppf_varying(spec: Any, u: Any, parameter_u: dict[str, np.ndarray] | None = None) -> np.ndarray:
    """Inverse CDF where the parameters themselves are drawn, draw by draw.

    Parameters
    ----------
    spec : dict
        Specification whose parameters may be distributions (:func:`parameter_specs`).
    u : array_like
        Probabilities [-], shape (S,) or (S, N): the S draws along axis 0.
    parameter_u : dict of str to numpy.ndarray, optional
        For each uncertain parameter, its uniform numbers of shape (S,); missing: its
        median (0.5).

    Returns
    -------
    numpy.ndarray
        Values, the shape of ``u``. Where u is NaN (an absent person), NaN.

    Notes
    -----
    Draw s uses the parameters theta_s = F_theta^-1(v_s) and returns
    F^-1(u_s; theta_s): a two-stage (hierarchical) draw by inverse transform.
    """
    u = np.asarray(u, dtype=float)
    params = parameter_specs(spec)
    if not params:
        ok = np.where(np.isnan(u), 0.5, u)
        return np.where(np.isnan(u), np.nan, ppf(spec, ok))
    parameter_u = parameter_u or {}
    ((kind, body),) = spec.items()
    values = {}
    for name, value in body.items():
        if name in params:
            v = parameter_u.get(name, np.full(u.shape[0], 0.5))
            values[name] = ppf(params[name], v).reshape((-1,) + (1,) * (u.ndim - 1))
        else:
            values[name] = float(value)
    safe = np.where(np.isnan(u), 0.5, u)
    return np.where(np.isnan(u), np.nan, _ppf_math(kind, values, safe))


def sample(spec: Any, n: int, rng: np.random.Generator) -> np.ndarray:
    """Draw ``n`` durations by inverse transform.

    Parameters
    ----------
    spec : dict or float
        Duration specification in seconds.
    n : int
        Number of draws.
    rng : numpy.random.Generator
        Source of uniform numbers; exactly ``n`` uniforms are consumed, whatever the
        kind, so streams stay aligned across specifications.

    Returns
    -------
    numpy.ndarray
        Shape (n,) durations [s], equal to ``ppf(spec, rng.random(n))``.
    """
    return ppf(spec, rng.random(n))


def quantile(spec: Any, q: float) -> float:
    """The ``q`` quantile of a duration [s] (``q`` in [0, 1])."""
    return float(ppf(spec, q))


def median(spec: Any) -> float:
    """The median of a duration [s]."""
    return quantile(spec, 0.5)


def is_fixed(spec: Any) -> bool:
    """True when the duration has no spread (fixed, or a degenerate distribution).

    Degenerate cases: lognormal with p95 == median, normal with sd == 0, uniform or
    triangular with low == high.
    """
    kind, p = _checked(spec)
    if kind == "fixed":
        return True
    if kind == "lognormal":
        return p["p95"] == p["median"]
    if kind == "normal":
        return p["sd"] == 0.0
    return p["low"] == p["high"]


def truncation_note(spec: Any) -> str | None:
    """Say how far truncation at zero moves a normal distribution's median, when more than
    :data:`TRUNCATION_WARN` of the stated mean; None otherwise (and for other kinds).

    Parameters
    ----------
    spec : dict
        A specification in seconds [s], e.g. ``{"normal": {"mean": 30.0, "sd": 60.0}}``.

    Notes
    -----
    The median of a normal(mu, s) truncated below at zero is
    mu + s * Phi^-1(F0 + 0.5 (1 - F0)) with F0 = Phi(-mu / s) (Johnson, Kotz &
    Balakrishnan, Continuous Univariate Distributions, vol. 1, 2nd ed., Wiley, ch. 13);
    the same as ``scipy.stats.truncnorm(-mu / s, inf, mu, s).median()``.

    Examples
    --------
    >>> truncation_note({"normal": {"mean": 30.0, "sd": 60.0}})
    'truncated at zero, this normal distribution has its median at 53.8 s, 79 % above the stated mean 30 s; expected an sd small against the mean (or a lognormal distribution)'
    >>> truncation_note({"normal": {"mean": 120.0, "sd": 30.0}}) is None
    True
    """
    kind, p = _checked(spec)
    if kind != "normal" or p["sd"] <= 0:
        return None
    mid = median(spec)
    shift = abs(mid - p["mean"]) / p["mean"] if p["mean"] > 0 else math.inf
    if shift <= TRUNCATION_WARN:
        return None
    how = f"{shift:.0%}".replace("%", " %") if math.isfinite(shift) else "far"
    return (f"truncated at zero, this normal distribution has its median at {mid:.1f} s, {how} above the stated "
            f"mean {_fmt(p['mean'])}; expected an sd small against the mean (or a lognormal distribution)")
