"""Number, time and unit formatting for the report.

Every number the report prints passes through one of these functions, so the tests
can format a value from ``results`` the same way and look for it in the PDF text.

Conventions (common practice in engineering reports):

- a number and its unit are joined by a no-break space (U+00A0) so they never part
  across a line;
- negative numbers use the true minus sign (U+2212);
- a time that is ``None`` means "not reached by the end of the histories" and is
  written ``> 1200 s`` (the end time with a "greater than" sign), never as the end
  time itself;
- probabilities (shares of Monte Carlo samples) are printed to three decimals, with
  ``< 0.001`` / ``> 0.999`` for shares that would otherwise round to 0 or 1.
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Any, Mapping

from ..probability_text import percent, probability

NBSP = "\u00a0"
MINUS = "\u2212"
DASH = "\u2013"
NOT_AVAILABLE = "n/a"

# Unit strings as users write them (pint spelling) -> as printed.
_UNIT_WORDS: dict[str, str] = {
    "degC": "°C",
    "degF": "°F",
    "delta_degC": "°C",
    "kelvin": "K",
    "percent": "%",
    "dimensionless": "",
    "-": "",
    "1": "",
    "s": "s",
    "second": "s",
    "meter": "m",
    "1/m": "1/m",
    "1/meter": "1/m",
    "kW/m^2": "kW/m²",
    "kW/m**2": "kW/m²",
    "mg/m^3": "mg/m³",
    "mg/m**3": "mg/m³",
    "g/m^3": "g/m³",
    "m^2": "m²",
    "m^3": "m³",
}


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return math.isnan(float(value))
    except (TypeError, ValueError):
        return False


def _minus(text: str) -> str:
    return text.replace("-", MINUS) if text.startswith("-") else text


def fmt_num(value: Any, sig: int = 3) -> str:
    """Format a number to ``sig`` significant figures without a trailing exponent.

    Parameters
    ----------
    value : float or None
        The number; ``None`` or NaN gives ``"n/a"``.
    sig : int
        Significant figures kept (at least 1). Integers of more digits keep all
        their digits (``1200`` stays ``1200``, never ``1.2e+03``).

    Returns
    -------
    str
        Plain decimal text; very small or very large magnitudes (below 1e-4 or from
        1e7) use ``a × 10^n`` written with superscript digits.

    Examples
    --------
    >>> fmt_num(1200), fmt_num(0.30), fmt_num(1.0312), fmt_num(-2.5)
    ('1200', '0.3', '1.03', '−2.5')
    """
    if _is_missing(value):
        return NOT_AVAILABLE
    if isinstance(value, bool):
        return "yes" if value else "no"
    x = float(value)
    if math.isinf(x):
        return "∞" if x > 0 else MINUS + "∞"
    if x == 0:
        return "0"
    sig = max(1, int(sig))
    mag = math.floor(math.log10(abs(x)))
    if mag < -4 or mag >= 7:
        mant = x / 10.0**mag
        mant_txt = _minus(f"{mant:.{max(sig - 1, 0)}f}".rstrip("0").rstrip("."))
        return f"{mant_txt}{NBSP}×{NBSP}10{_superscript(mag)}"
    decimals = max(sig - 1 - mag, 0)
    rounded = round(x, decimals)
    text = f"{rounded:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    if text in ("-0", "-0.0"):
        text = "0"
    return _minus(text)


def _superscript(n: int) -> str:
    table = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")
    return str(n).translate(table)


def fmt_unit(unit: Any) -> str:
    """Printable form of a unit string as the study or criteria file wrote it.

    >>> fmt_unit("degC"), fmt_unit("kW/m^2"), fmt_unit("percent"), fmt_unit(None)
    ('°C', 'kW/m²', '%', '')
    """
    if unit is None:
        return ""
    text = str(unit).strip()
    if text in _UNIT_WORDS:
        return _UNIT_WORDS[text]
    return text.replace("**2", "²").replace("^2", "²").replace("**3", "³").replace("^3", "³")


def fmt_quantity(value: Any, unit: Any = None, sig: int = 3) -> str:
    """A number with its unit, e.g. ``60 °C``; dimensionless values print bare.

    >>> fmt_quantity(60, "degC"), fmt_quantity(0.3, None), fmt_quantity(2.5, "kW/m^2")
    ('60\\xa0°C', '0.3', '2.5\\xa0kW/m²')
    """
    num = fmt_num(value, sig)
    u = fmt_unit(unit)
    if not u or num == NOT_AVAILABLE:
        return num
    return f"{num}{NBSP}{u}"


def fmt_time(value_s: Any, end_s: Any = None, signed: bool = False) -> str:
    """A time in whole seconds; ``None`` is written ``> end`` as ``> 1200 s``.

    Parameters
    ----------
    value_s : float or None
        Time [s]. ``None`` (or NaN, or +inf) means "not reached by the end of the
        histories".
    end_s : float, optional
        Last time in the histories [s], used for the ``> end`` wording. Without it
        the text is ``> end``.
    signed : bool
        Prefix positive values with ``+`` (used for margins).

    Examples
    --------
    >>> fmt_time(245.4), fmt_time(None, 1200), fmt_time(-12.6, signed=True)
    ('245\\xa0s', '>\\xa01200\\xa0s', '−13\\xa0s')
    """
    if _is_missing(value_s) or (isinstance(value_s, (int, float)) and math.isinf(value_s)
                                and value_s > 0):
        if _is_missing(end_s):
            return f">{NBSP}end"
        return f">{NBSP}{fmt_num(round(float(end_s)), 12)}{NBSP}s"
    x = float(value_s)
    if math.isinf(x):
        return f"{MINUS}∞{NBSP}s"
    r = int(round(x))
    text = f"{abs(r)}"
    if r < 0:
        text = MINUS + text
    elif signed and r > 0:
        text = "+" + text
    return f"{text}{NBSP}s"


def fmt_time_cell(value_s: Any) -> str:
    """A time in a table whose header gives the unit: whole seconds, ``—`` not reached.

    >>> fmt_time_cell(215.4), fmt_time_cell(None), fmt_time_cell(-3)
    ('215', '—', '−3')
    """
    if _is_missing(value_s) or (isinstance(value_s, (int, float)) and math.isinf(value_s)):
        return "\u2014"
    return _minus(str(int(round(float(value_s)))))


def fmt_margin(value_s: Any, end_s: Any = None) -> str:
    """A safety margin (ASET minus RSET) in seconds, signed; ``None`` when ASET was
    not reached by the end of the histories, so the margin is unbounded above.

    >>> fmt_margin(-12.4), fmt_margin(30), fmt_margin(None, 1200)
    ('−12\\xa0s', '+30\\xa0s', 'ASET\\xa0>\\xa01200\\xa0s')
    """
    if _is_missing(value_s):
        return f"ASET{NBSP}{fmt_time(None, end_s)}"
    return fmt_time(value_s, end_s, signed=True)


def fmt_route_margin(margin: Any) -> str:
    """A route's margin as :func:`egressmargin.report.render.route_margin` returns it:
    ``{"value": s, "at_least": bool}``; a lower bound is written ``≥ +484 s``.

    >>> fmt_route_margin({"value": 484.2, "at_least": True}), fmt_route_margin({"value": -12})
    ('≥\xa0+484\xa0s', '−12\xa0s')
    """
    if not isinstance(margin, Mapping) or _is_missing(margin.get("value")):
        return NOT_AVAILABLE
    text = fmt_time(margin["value"], signed=True)
    return f"≥{NBSP}{text}" if margin.get("at_least") else text


def fmt_trio(trio: Any, end_s: Any = None, keys: tuple[str, ...] = ("p05", "p50", "p95"),
             margin: bool = False) -> str:
    """Percentiles of a time joined by slashes, e.g. ``201 / 245 / 318 s``.

    Each value is formatted by :func:`fmt_time` (or :func:`fmt_margin`).
    """
    if not isinstance(trio, Mapping):
        return NOT_AVAILABLE
    f = fmt_margin if margin else fmt_time
    return " / ".join(f(trio.get(k), end_s) for k in keys)


def fmt_prob(p: Any, distinct_from: Any = None) -> str:
    """A probability as the project writes one everywhere: a percentage, significant figures.

    :func:`egressmargin.probability_text.percent` with a no-break space: at least two
    significant figures (0.0015 is "0.15 %", never "0.002"), exactly 0 and 1 as "0 %" and
    "100 %", anything strictly between never as either. ``distinct_from`` (a number or a
    list) adds figures until the text reads differently from those probabilities.

    >>> fmt_prob(0.0312), fmt_prob(0), fmt_prob(0.0004), fmt_prob(1.0), fmt_prob(0.9996)
    ('3.1\xa0%', '0\xa0%', '0.040\xa0%', '100\xa0%', '99.96\xa0%')
    """
    if _is_missing(p):
        return NOT_AVAILABLE
    others = [] if distinct_from is None else (
        list(distinct_from) if isinstance(distinct_from, (list, tuple)) else [distinct_from])
    return percent(float(p), distinct_from=[o for o in others if not _is_missing(o)], space=NBSP)


def fmt_prob_ci(p: Any, interval: Any = None, limit: Any = None) -> str:
    """A probability with its interval beside it (:func:`egressmargin.probability_text.probability`).

    >>> fmt_prob_ci(0.0015, [0.0002, 0.0052])
    '0.15\xa0% (0.020–0.52\xa0%)'
    """
    if _is_missing(p):
        return NOT_AVAILABLE
    ci = interval if isinstance(interval, (list, tuple)) and len(interval) == 2 else None
    return probability(float(p), ci, limit=None if _is_missing(limit) else float(limit), space=NBSP, dash=DASH)


def fmt_pct(fraction: Any, sig: int = 2) -> str:
    """A fraction as a percentage, e.g. ``0.052 -> 5.2 %``.

    >>> fmt_pct(0.052), fmt_pct(None)
    ('5.2\\xa0%', 'n/a')
    """
    if _is_missing(fraction):
        return NOT_AVAILABLE
    return f"{fmt_num(100.0 * float(fraction), sig)}{NBSP}%"


def fmt_span(t_start_s: Any, t_end_s: Any) -> str:
    """A time span ``0–1200 s``."""
    if _is_missing(t_start_s) or _is_missing(t_end_s):
        return NOT_AVAILABLE
    return f"{fmt_num(t_start_s, 6)}{DASH}{fmt_num(t_end_s, 6)}{NBSP}s"


def fmt_verdict(verdict: Any) -> str:
    """``pass`` -> ``PASS``, ``fail`` -> ``FAIL``; anything else upper-cased or ``n/a``.

    Verdicts are always printed as words so they survive greyscale printing.
    """
    if verdict is None or str(verdict).strip() == "":
        return NOT_AVAILABLE
    return str(verdict).strip().upper()


def fmt_status(status: Any) -> str:
    """Criterion status as printed: ``assessed`` or ``NOT ASSESSED``."""
    if status is None:
        return NOT_AVAILABLE
    s = str(status).strip().lower()
    if s == "not assessed":
        return "NOT ASSESSED"
    return s


def fmt_bool(value: Any) -> str:
    """``True`` -> ``yes``, ``False`` -> ``no``, ``None`` -> ``n/a``."""
    if value is None:
        return NOT_AVAILABLE
    return "yes" if bool(value) else "no"


def fmt_date(iso: Any) -> str:
    """An ISO date or date-time as ``YYYY-MM-DD`` or ``YYYY-MM-DD HH:MM``.

    >>> fmt_date("2024-05-03T10:22:11"), fmt_date("2024-05-03")
    ('2024-05-03 10:22', '2024-05-03')
    """
    if iso is None or str(iso).strip() == "":
        return NOT_AVAILABLE
    text = str(iso).strip()
    try:
        dt = datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        return text
    if len(text) <= 10:
        return dt.strftime("%Y-%m-%d")
    return dt.strftime("%Y-%m-%d %H:%M")


def fmt_value(value: Any) -> str:
    """Any scalar from a criteria or constants table: numbers via :func:`fmt_num`,
    booleans as yes/no, everything else as text."""
    if value is None:
        return NOT_AVAILABLE
    if isinstance(value, bool):
        return fmt_bool(value)
    if isinstance(value, (int, float)):
        return fmt_num(value, 4)
    if isinstance(value, (list, tuple)):
        return ", ".join(fmt_value(v) for v in value)
    return str(value)


FILTERS = {
    "num": fmt_num,
    "unit": fmt_unit,
    "qty": fmt_quantity,
    "time": fmt_time,
    "tnum": fmt_time_cell,
    "margin": fmt_margin,
    "route_margin": fmt_route_margin,
    "trio": fmt_trio,
    "prob": fmt_prob,
    "prob_ci": fmt_prob_ci,
    "pct": fmt_pct,
    "span": fmt_span,
    "verdict": fmt_verdict,
    "status": fmt_status,
    "yesno": fmt_bool,
    "date": fmt_date,
    "value": fmt_value,
}
"""Jinja2 filter names -> functions, registered by :mod:`egressmargin.report.render`."""
