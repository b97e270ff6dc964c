"""One way to write a probability: a percentage with enough significant figures, its interval beside it.

Used by the verdict's reason sentences (:mod:`egressmargin.verdict`), the report's tables
and figures (:mod:`egressmargin.report.format`, ``prob`` and ``prob_ci`` filters) and the
command line's summary (:mod:`egressmargin.cli`), so a probability reads the same
everywhere.

Rules (project choice, written for issue-free reading of small risks):

* a percentage with at least two significant figures, not fixed decimals, so 0.0015 is
  "0.15 %", never "0.002" or "0.1 %";
* as many more figures as it takes for the estimate to read differently from each end of
  its interval, and from the acceptance limit, whenever the numbers differ (0.0498 beside a
  limit of 0.05 is "4.98 %", not "5.0 %");
* exactly 0 is "0 %" and exactly 1 is "100 %"; a value strictly between never reads as
  "0 %" or "100 %" (0.999996 is "99.9996 %", not "100 %");
* the interval is always beside the estimate when there is one, written as a range;
  no "at most" or "at least" wording is produced here.

Pure functions of floats.
"""

from __future__ import annotations

import math
from typing import Iterable, Sequence

__all__ = ["percent", "probability", "MAX_SIG"]

#: Most significant figures ever written (project choice: beyond six the digits say more
#: about floating point than about the Monte Carlo estimate).
MAX_SIG = 6

_NOT_AVAILABLE = "n/a"


def _digits(x: float, sig: int) -> str:
    """``100 x`` in percent with ``sig`` significant figures, fixed-point (no exponent)."""
    v = 100.0 * x
    if v == 0.0:
        return "0"
    decimals = max(sig - 1 - math.floor(math.log10(abs(v))), 0)
    return f"{v:.{decimals}f}"


def _ok(x: float, text: str) -> bool:
    """A value strictly inside (0, 1) must not read as 0 % or 100 %."""
    if 0.0 < x < 1.0:
        return float(text) not in (0.0, 100.0)
    return True


def _common_sig(values: Sequence[float], sig: int) -> int:
    """Fewest figures (>= sig) at which every pair of different values reads differently."""
    for s in range(sig, MAX_SIG + 1):
        texts = [_digits(v, s) for v in values]
        clash = any(values[i] != values[j] and texts[i] == texts[j]
                    for i in range(len(values)) for j in range(i + 1, len(values)))
        if not clash and all(_ok(v, t) for v, t in zip(values, texts)):
            return s
    return MAX_SIG


def _bad(x) -> bool:
    try:
        return x is None or not math.isfinite(float(x))
    except (TypeError, ValueError):
        return True


def percent(x, *, distinct_from: Iterable[float] = (), sig: int = 2, space: str = " ") -> str:
    """A probability as a percentage with at least ``sig`` significant figures.

    Parameters
    ----------
    x : float
        The probability, a fraction in [0, 1].
    distinct_from : iterable of float
        Other probabilities (fractions) the text must not be confused with: figures are
        added until ``x`` reads differently from each of them that differs from it.
    sig : int
        Fewest significant figures.
    space : str
        Between the number and "%" (a no-break space in the report).

    Examples
    --------
    >>> percent(0.0015), percent(0.05), percent(0.0), percent(1.0), percent(0.999996)
    ('0.15 %', '5.0 %', '0 %', '100 %', '99.9996 %')
    >>> percent(0.0498, distinct_from=[0.05])
    '4.98 %'
    """
    if _bad(x):
        return _NOT_AVAILABLE
    x = float(x)
    if x < 0.0 or x > 1.0:
        raise ValueError(f"probability out of [0, 1]: {x!r}")
    others = [float(o) for o in distinct_from if not _bad(o)]
    s = _common_sig([x, *others], sig)
    return f"{_digits(x, s)}{space}%"


def probability(p, interval: Sequence[float] | None = None, *, level: float | None = None,
                draws: int | None = None, limit: float | None = None, space: str = " ",
                dash: str = "\u2013") -> str:
    """A probability with its interval beside it, all at enough figures to be told apart.

    Parameters
    ----------
    p : float
        The estimate, a fraction in [0, 1].
    interval : (low, high), optional
        Its interval; omitted from the text when None or a point equal to ``p``.
    level : float, optional
        The interval's two-sided level (0.9875), named before the range when given.
    draws : int, optional
        Draws behind the estimate, named after the range when given.
    limit : float, optional
        An acceptance limit printed nearby: the numbers get figures enough to read
        differently from it where they differ.
    space, dash : str
        Between number and "%", and between the ends of the range.

    Returns
    -------
    str
        ``"0.15 % (0.020–0.52 %)"``; with ``level``: ``"0.15 % (98.75 % interval 0.020–0.52 %)"``.

    Examples
    --------
    >>> probability(0.0015, (0.0002, 0.0052))
    '0.15 % (0.020–0.52 %)'
    >>> probability(0.05, (0.0497, 0.0503), level=0.95, draws=2000)
    '5.00 % (95 % interval 4.97–5.03 %, 2000 draws)'
    >>> probability(1.0, (0.998, 1.0)), probability(0.0, (0.0, 0.0))
    ('100 % (99.8–100 %)', '0 %')
    """
    if _bad(p):
        return _NOT_AVAILABLE
    p = float(p)
    ci = None
    if interval is not None and len(interval) == 2 and not any(_bad(v) for v in interval):
        ci = (float(interval[0]), float(interval[1]))
        if ci[0] == ci[1] == p:
            ci = None
    values = [p] + (list(ci) if ci else []) + ([float(limit)] if not _bad(limit) else [])
    for v in values:
        if v < 0.0 or v > 1.0:
            raise ValueError(f"probability out of [0, 1]: {v!r}")
    s = _common_sig(values, 2)
    head = f"{_digits(p, s)}{space}%"
    if ci is None:
        return head
    lo, hi = _digits(ci[0], s), _digits(ci[1], s)
    inner = f"{lo}{dash}{hi}{space}%"
    if level is not None:
        inner = f"{100 * float(level):.4g}{space}% interval {inner}"
    if draws is not None:
        inner += f", {int(draws)} draws"
    return f"{head} ({inner})"
