"""Heat-release rate of a design fire: reading the curve and describing its growth.

A scenario's ``design_fire: {hrr: ...}`` names a column of its histories or of a CSV of
its own (:class:`egressmargin.study.HrrRef`). The curve is read with its unit (pint at
the edge: a column without a unit is an input error, as everywhere) into kW, and
described for the report by its peak and a fitted t-squared growth coefficient.

t-squared fires (NFPA 72 (2019), Annex B, "fire growth"; the same classes in NFPA 204
and NFPA 92; SFPE Handbook of Fire Protection Engineering, 5th ed., design fire chapters;
clause and chapter numbers from memory): Q = alpha t^2, alpha = 1055 kW / t_g^2, where
t_g, the growth time to 1055 kW (1000 Btu/s), is 600 s (slow), 300 s (medium), 150 s
(fast) or 75 s (ultra-fast).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .errors import InputError, Problem

#: Q_g of the t-squared classes: 1055 kW (1000 Btu/s); NFPA 72 (2019) Annex B (from memory).
GROWTH_Q_KW = 1055.0
#: Growth times t_g [s] of the t-squared classes, NFPA 72 (2019) Annex B (from memory);
#: the same four classes are common practice in SFPE Handbook design-fire chapters.
GROWTH_CLASSES_S: dict[str, float] = {"slow": 600.0, "medium": 300.0, "fast": 150.0, "ultra-fast": 75.0}
#: The growth phase ends where the curve first reaches this share of its peak (project choice:
#: a capped or sprinkler-held fire levels off there; the fit ignores the plateau).
GROWTH_END_SHARE = 0.95


def growth_alpha(t_g_s: float) -> float:
    """alpha = Q_g / t_g^2 [kW/s^2] of a t-squared class with growth time ``t_g_s``.

    >>> round(growth_alpha(150.0), 5)     # fast: 0.0469 kW/s^2 (NFPA 72 Annex B)
    0.04689
    """
    return GROWTH_Q_KW / t_g_s ** 2


def describe_growth(t_s, q_kw) -> dict:
    """Peak, and the t-squared fit of the growth phase, of a heat-release-rate curve.

    Parameters
    ----------
    t_s : array_like
        Times from ignition [s], increasing.
    q_kw : array_like
        Heat-release rate [kW].

    Returns
    -------
    dict
        ``peak_kw``, ``peak_s`` (first time at the peak), ``alpha_kw_s2`` (least-squares
        alpha of Q = alpha t^2 over 0 < t < the first time Q reaches
        :data:`GROWTH_END_SHARE` of its peak; None with fewer than two such points),
        ``growth_end_s``, ``t_g_s`` (time to 1055 kW on the fitted curve), ``nearest_class``
        (the NFPA 72 class whose alpha is nearest in log ratio) and ``class_ratio`` (fitted
        alpha over that class's alpha). ``growth_end_s`` is the last time fitted.

    Notes
    -----
    Least squares through the origin: alpha = sum(Q t^2) / sum(t^4), which minimises
    sum((Q - alpha t^2)^2); on an exact t-squared curve it returns its alpha.
    """
    t = np.asarray(t_s, dtype=float)
    q = np.asarray(q_kw, dtype=float)
    k = int(np.argmax(q))
    peak, t_peak = float(q[k]), float(t[k])
    out = {"peak_kw": round(peak, 3), "peak_s": round(t_peak, 3), "alpha_kw_s2": None, "growth_end_s": None,
           "t_g_s": None, "nearest_class": None, "class_ratio": None}
    if not peak > 0:
        return out
    end = int(np.argmax(q >= GROWTH_END_SHARE * peak))
    sel = (t > 0) & (np.arange(t.size) < end) & (q > 0)     # before it reaches that share
    if np.count_nonzero(sel) < 2:
        return out
    ts, qs = t[sel], q[sel]
    alpha = float(np.sum(qs * ts ** 2) / np.sum(ts ** 4))
    if not alpha > 0:
        return out
    name = min(GROWTH_CLASSES_S, key=lambda c: abs(math.log(alpha / growth_alpha(GROWTH_CLASSES_S[c]))))
    out.update(alpha_kw_s2=float(f"{alpha:.6g}"), growth_end_s=round(float(ts[-1]), 3),
               t_g_s=round(math.sqrt(GROWTH_Q_KW / alpha), 1), nearest_class=name,
               class_ratio=round(alpha / growth_alpha(GROWTH_CLASSES_S[name]), 3))
    return out


def _split(header: str) -> tuple[str, str | None]:
    h = header.strip()
    if h.endswith("]") and "[" in h:
        i = h.rindex("[")
        return h[:i].strip(), h[i + 1:-1].strip() or None
    return h, None


def read_curve(path: Path, time_col: str, time_unit: str | None, col: str, unit: str | None,
               where: str, delimiter: str = ",", decimal: str = ".", units_row: bool | str = False,
               shown: str | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Times [s] and heat-release rate [kW] from two columns of a CSV file.

    A column is named as written in the header, or by its name before a ``[unit]``; its
    unit comes from ``unit``/``time_unit``, else the header's ``[unit]``, else a units row
    (``units_row``); none of these is an input error. Raises InputError listing every
    problem (file:line, column, what was found, what was expected).
    """
    import csv

    from .units import UnitProblem, check_unit, to_internal

    name = shown or str(path)
    try:
        lines = path.read_text(encoding="utf-8-sig").splitlines()
    except OSError as exc:
        raise InputError([Problem(name, f"cannot read the file ({exc.strerror}); expected a CSV of the "
                                  f"heat-release rate ({where})")]) from None
    rows = list(csv.reader(lines, delimiter=delimiter, skipinitialspace=True))
    names_at = 1 if units_row == "above" else 0
    units_at = 0 if units_row == "above" else (1 if units_row in ("below", True) else None)
    if len(rows) <= names_at:
        raise InputError([Problem(name, f"no header row; expected the columns {time_col!r} and {col!r} ({where})")])
    header = rows[names_at]
    first_data = max(names_at, units_at if units_at is not None else -1) + 1
    problems: list[Problem] = []
    picked = []
    for want, given_unit, quantity in ((time_col, time_unit, "time"), (col, unit, "hrr")):
        idx = [i for i, h in enumerate(header) if h.strip() == want or _split(h)[0] == want]
        if not idx:
            problems.append(Problem(f"{name}:{names_at + 1}", f"column '{want}' not found ({where}); expected one "
                                    f"of {', '.join(repr(h) for h in header[:12])}"
                                    f"{' ...' if len(header) > 12 else ''}"))
            continue
        i = idx[0]
        u = given_unit or _split(header[i])[1]
        if u is None and units_at is not None and i < len(rows[units_at]):
            u = rows[units_at][i].strip() or None
        if u is None:
            if quantity == "time":
                problems.append(Problem(f"{name}:{names_at + 1}", f"column '{want}' has no unit ({where}); expected "
                                        "a header 'Time [s]' or time: {column: Time, unit: s}"))
            else:
                problems.append(Problem(f"{name}:{names_at + 1}", f"column '{want}' has no unit ({where}); expected "
                                        f"a header '{want} [kW]' or hrr: {{column: {want}, unit: kW}}"))
            continue
        msg = check_unit(u, quantity)
        if msg:
            problems.append(Problem(f"{name}:{names_at + 1}", f"column '{want}': {msg} ({where})"))
            continue
        picked.append((want, i, u, quantity))
    if problems:
        raise InputError(problems)
    values = {}
    for want, i, u, quantity in picked:
        vals = []
        for r, row in enumerate(rows[first_data:], start=first_data + 1):
            if not row or all(not c.strip() for c in row):
                continue
            cell = row[i].strip() if i < len(row) else ""
            try:
                v = float(cell.replace(decimal, ".") if decimal != "." else cell)
                if not math.isfinite(v):
                    raise ValueError
            except ValueError:
                problems.append(Problem(f"{name}:{r}", f"column '{want}', row {r}: found {cell!r}; expected a "
                                        f"finite number ({where})"))
                continue
            vals.append(v)
        try:
            values[quantity] = to_internal(np.array(vals), u, quantity)
        except UnitProblem as exc:
            problems.append(Problem(f"{name}:{names_at + 1}", f"column '{want}': {exc} ({where})"))
    if problems:
        raise InputError(problems)
    t, q = values["time"], values["hrr"]
    if t.size < 2 or t.size != q.size:
        raise InputError([Problem(name, f"found {t.size} usable rows; expected at least two rows of time and "
                                  f"heat-release rate ({where})")])
    if np.any(np.diff(t) <= 0):
        r = int(np.argmax(np.diff(t) <= 0)) + first_data + 2
        raise InputError([Problem(f"{name}:{r}", f"column '{time_col}': times do not increase; expected "
                                  f"increasing times ({where})")])
    if np.any(q < 0):
        r = int(np.argmax(q < 0)) + first_data + 1
        raise InputError([Problem(f"{name}:{r}", f"column '{col}': found a negative heat-release rate; "
                                  f"expected a value of zero or more ({where})")])
    return np.asarray(t, dtype=float), np.asarray(q, dtype=float)
