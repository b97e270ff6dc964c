"""Fit a model-uncertainty table from paired measured and predicted values.

For each quantity (temperature rise, CO concentration, extinction coefficient, ...) a
validation data set gives pairs (E_i, M_i): a measurement and the model's prediction of
the same thing. Following McGrattan & Toman (2011) the ratio M/E is taken to be
lognormal; its log mean and variance give the model's bias factor delta and relative
standard deviation sigma_M once the experiments' own relative standard deviation
sigma_E is taken out. The result is written in the project's model-uncertainty file
format (see the outside contract, "Model-uncertainty file").

Layout: :func:`fit_quantity` is the pure numeric core and :func:`fit_checks` tests its
two assumptions (lognormal scatter, no trend of bias with size); :func:`read_pairs` reads
and checks a CSV file, puts temperature and O2 pairs on the basis the run applies them
on (rise and depletion against an ambient) and reports every problem at once;
:func:`fit_table` and :func:`write_table` assemble and write the YAML table;
:func:`output_problems` checks the files to be written before anything is computed. The
figure is drawn by :mod:`egressmargin.uncertainty_plot`.

References
----------
McGrattan, K. and Toman, B. (2011). Quantifying the predictive uncertainty of complex
numerical models. Metrologia 48(3), 173-180.
"""

from __future__ import annotations

import csv
import difflib
import math
import os
import tempfile
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from egressmargin.errors import Problem, raise_if_any
from egressmargin.study import did_you_mean
from egressmargin.uncertainty import APPLIED_BASIS, BASES, SIGMA_PERCENT_SUSPECT, applied_basis
from egressmargin.units import check_unit

__all__ = [
    "FLOOR_FRACTION",
    "CHECK_ALPHA",
    "METHOD",
    "MIN_PAIRS",
    "MIN_PAIRS_ADVISED",
    "PLOT_SUFFIXES",
    "QUANTITIES",
    "check_warnings",
    "fit_checks",
    "fit_quantity",
    "fit_table",
    "output_problems",
    "write_atomically",
    "read_pairs",
    "write_table",
]

#: Quantity names accepted in a pairs file (the location series keys, plus velocity).
QUANTITIES: tuple[str, ...] = (
    "temperature",
    "co",
    "co2",
    "o2",
    "hcn",
    "extinction",
    "optical_density",
    "soot",
    "visibility",
    "heat_flux",
    "layer_height",
    "velocity",
)

#: Method string written into a fitted table.
METHOD: str = "McGrattan & Toman (2011), Metrologia 48"

#: Floor on the model's relative standard deviation as a fraction of the experiments':
#: sigma_M >= sigma_E / 2. From memory: the literature that applies McGrattan & Toman
#: (2011) limits sigma_M this way because a model cannot be shown to be more accurate
#: than the measurements it is compared with; not verified against a source here.
FLOOR_FRACTION: float = 0.5

#: Fewest pairs for which a variance exists at all.
MIN_PAIRS: int = 2

#: Fewer pairs than this give a warning: a sensible minimum, common practice.
MIN_PAIRS_ADVISED: int = 10

_REQUIRED = ("quantity", "measured", "predicted")
_OPTIONAL = ("sigma_exp", "ambient", "basis", "unit")
_SIG_DIGITS = 4


def _as_positive_array(values: Any, name: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float).ravel()
    if arr.size and not np.all(np.isfinite(arr) & (arr > 0)):
        raise ValueError(f"{name} must be positive finite numbers")
    return arr


def fit_quantity(
    measured: Sequence[float] | np.ndarray,
    predicted: Sequence[float] | np.ndarray,
    sigma_exp: float,
) -> dict[str, Any]:
    """Bias factor and relative standard deviation of a model for one quantity.

    Parameters
    ----------
    measured : array_like
        Measured values E_i [any unit, positive; same unit as ``predicted``].
    predicted : array_like
        Predicted values M_i of the same quantities [same unit, positive].
    sigma_exp : float
        Relative standard deviation of the measurements, sigma_E [-] (0.07 = 7 %).

    Returns
    -------
    dict
        ``bias`` delta [-], ``sigma_model`` sigma_M [-], ``sigma_exp`` sigma_E [-],
        ``n_pairs`` [-], ``floored`` (True when the floor on sigma_M applied),
        ``warnings`` (list of str), ``mean_ln`` m [-] and ``var_ln`` s^2 [-].

    Notes
    -----
    McGrattan & Toman (2011) model E and M as lognormal about the true value, so that
    ln(M/E) is normal with variance sigma_M^2 + sigma_E^2. With

        m   = (1/n) sum ln(M_i/E_i)
        s^2 = 1/(n-1) sum (ln(M_i/E_i) - m)^2      (sample variance)

    the estimates are

        sigma_M^2 = s^2 - sigma_E^2
        delta     = exp(m + sigma_M^2/2 - sigma_E^2/2).

    Floor (from memory, see :data:`FLOOR_FRACTION`): sigma_M is not taken below
    sigma_E/2; when s^2 - sigma_E^2 is negative or smaller than (sigma_E/2)^2 the floor
    is used, in delta as well, and a warning says so. Fewer than 10 pairs give a
    warning (a sensible minimum, common practice). The formulas were written from the
    paper as remembered; the search tool did not retrieve its text.

    References
    ----------
    McGrattan, K. and Toman, B. (2011). Quantifying the predictive uncertainty of
    complex numerical models. Metrologia 48(3), 173-180.

    Examples
    --------
    Ratios M/E with logs 0.0, 0.1, 0.2, 0.3, 0.4 and sigma_E = 0.1: m = 0.2,
    s^2 = 0.025, sigma_M = sqrt(0.015) = 0.1225, delta = exp(0.2025) = 1.2245.

    >>> import numpy as np
    >>> fit = fit_quantity([1.0] * 5, np.exp([0.0, 0.1, 0.2, 0.3, 0.4]), 0.1)
    >>> round(fit["sigma_model"], 4), round(fit["bias"], 4)
    (0.1225, 1.2245)
    """
    e = _as_positive_array(measured, "measured")
    m_arr = _as_positive_array(predicted, "predicted")
    if e.shape != m_arr.shape:
        raise ValueError(
            f"measured and predicted must have the same length; got {e.size} and {m_arr.size}"
        )
    n = int(e.size)
    if n < MIN_PAIRS:
        raise ValueError(f"at least {MIN_PAIRS} pairs are needed for a variance; got {n}")
    sigma_e = float(sigma_exp)
    if not math.isfinite(sigma_e) or sigma_e < 0:
        raise ValueError(f"sigma_exp must be a non-negative number; got {sigma_exp!r}")

    ln_ratio = np.log(m_arr) - np.log(e)
    mean_ln = float(np.mean(ln_ratio))
    var_ln = float(np.var(ln_ratio, ddof=1))

    warnings: list[str] = []
    if n < MIN_PAIRS_ADVISED:
        warnings.append(
            f"only {n} pairs; at least {MIN_PAIRS_ADVISED} are advised for a stable "
            f"estimate (a sensible minimum, common practice)"
        )
    var_model = var_ln - sigma_e**2
    floor = FLOOR_FRACTION * sigma_e
    floored = var_model < floor**2
    if floored:
        if var_model <= 0:
            why = (
                f"the scatter of ln(M/E) (s^2 = {var_ln:.4g}) is no larger than the "
                f"experiments' own (sigma_E^2 = {sigma_e**2:.4g})"
            )
        else:
            why = f"s^2 - sigma_E^2 gives sigma_M = {math.sqrt(var_model):.4g}"
        warnings.append(
            f"{why}; sigma_M is set to the floor sigma_E/2 = {floor:.4g} (a model cannot "
            f"be shown to be more accurate than the measurements)"
        )
        var_model = floor**2
    sigma_model = math.sqrt(var_model)
    bias = math.exp(mean_ln + var_model / 2.0 - sigma_e**2 / 2.0)
    return {
        "bias": bias,
        "sigma_model": sigma_model,
        "sigma_exp": sigma_e,
        "n_pairs": n,
        "floored": bool(floored),
        "warnings": warnings,
        "mean_ln": mean_ln,
        "var_ln": var_ln,
    }


def _parse_positive(text: str) -> float | None:
    try:
        value = float(text)
    except ValueError:
        return None
    if not math.isfinite(value) or value <= 0:
        return None
    return value


def read_pairs(
    path: str | Path,
    default_sigma_exp: float | None = None,
    basis: Mapping[str, str] | None = None,
) -> dict[str, dict[str, Any]]:
    """Read paired measured/predicted values from a CSV file, checking everything.

    Parameters
    ----------
    path : str or Path
        CSV file with a header row and columns ``quantity``, ``measured``,
        ``predicted``, and optionally ``sigma_exp``, ``ambient``, ``basis`` and ``unit``
        (header names are matched without regard to case or surrounding spaces; other
        columns are ignored).
    default_sigma_exp : float, optional
        Experimental relative standard deviation sigma_E [-] for rows without one
        (no ``sigma_exp`` column, or an empty cell).
    basis : mapping, optional
        ``{quantity: basis}`` for quantities whose rows do not say: what the values in
        the file are, one of ``rise``, ``depletion``, ``as-given`` (see Notes).

    Returns
    -------
    dict
        ``{quantity: {"measured": ndarray, "predicted": ndarray, "sigma_exp": float,
        "lines": list[int], "file": str, "warnings": list[str], "basis": str or None,
        "unit": str or None, "range": {min, max, unit} or None}}``, quantities in the
        order they first appear. ``measured`` and ``predicted`` are on the fitted basis
        (rises or depletions when an ambient was given); ``range`` is the span of the
        measured values as written in the file, in their ``unit``. ``lines`` are the
        file's line numbers (header = 1).

    Raises
    ------
    egressmargin.errors.InputError
        With every problem found: missing columns; values that are not numbers (file,
        line, column, value found); values, rises or depletions that are not positive;
        unknown quantity names or basis words (with a did-you-mean); units that are not
        units of the quantity or differ between its rows; an ambient or basis that does
        not fit the quantity; a row without sigma_E and no default; a quantity with
        fewer than 2 pairs.

    Notes
    -----
    The run applies the temperature row to the rise above ambient and the O2 row to the
    depletion below ambient (contract, "Model-uncertainty file"), so the pairs must be
    fitted on that basis: for absolute values with an ambient A per row, the fit uses
    E - A and M - A for temperature, A - E and A - M for O2, and the table records
    ``basis: rise`` / ``basis: depletion``. Without an ambient, the ``basis`` column
    (or the ``basis`` argument) says what the values already are; ``as-given``
    temperature or O2 values are fitted as they are and recorded as such (the run will
    refuse that table, and a warning says so). Temperature or O2 rows with neither an
    ambient nor a basis get a warning and no recorded basis (the run reads such a table
    with the contract's convention and warns again). Other quantities are applied as
    given; an ambient or another basis for them is an error.

    sigma_E may differ between rows of one quantity (several test series). Then the
    value used is the root mean square, sqrt(mean(sigma_E,i^2)): sigma_E enters the fit
    as a variance subtracted from the variance of ln(M/E), so the variances are
    averaged. A warning names the spread. A sigma_E above 1 gets a warning, since it
    is probably a percentage.
    """
    path = Path(path)
    name = str(path)
    problems: list[Problem] = []
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise_if_any([Problem(name, "file not found")])
        raise AssertionError("unreachable")  # pragma: no cover
    except UnicodeDecodeError as exc:
        raise_if_any([Problem(name, f"not a UTF-8 text file ({exc.reason})")])
        raise AssertionError("unreachable")  # pragma: no cover

    if default_sigma_exp is not None:
        d = float(default_sigma_exp)
        if not math.isfinite(d) or d < 0:
            problems.append(
                Problem(
                    "default sigma_exp",
                    f"found {default_sigma_exp!r}, expected a number of 0 or more "
                    f"(a relative standard deviation, e.g. 0.07)",
                )
            )
            default_sigma_exp = None
    stated = {}
    for quantity, word in (basis or {}).items():
        problems.extend(_basis_problems("--basis", quantity, word))
        stated[quantity] = word

    reader = csv.reader(text.splitlines())
    header: list[str] | None = None
    header_line = 0
    for row in reader:
        if any(cell.strip() for cell in row):
            header = row
            header_line = reader.line_num
            break
    if header is None:
        raise_if_any(
            problems
            + [
                Problem(
                    name,
                    f"the file is empty; expected a header with columns {', '.join(_REQUIRED)}",
                )
            ]
        )
        raise AssertionError("unreachable")  # pragma: no cover

    normal = [h.strip().lower() for h in header]
    columns: dict[str, int] = {}
    for k, h in enumerate(normal):
        if h in _REQUIRED + _OPTIONAL and h not in columns:
            columns[h] = k
    missing = [c for c in _REQUIRED if c not in columns]
    if missing:
        found = ", ".join(repr(h.strip()) for h in header) or "nothing"
        hints = []
        for c in missing:
            close = difflib.get_close_matches(c, normal, n=1, cutoff=0.6)
            if close:
                hints.append(f"'{close[0]}' for '{c}'?")
        hint = f"; did you mean {' '.join(hints)}" if hints else ""
        problems.append(
            Problem(
                f"{name}:{header_line}",
                f"missing column{'s' if len(missing) > 1 else ''} "
                f"{', '.join(repr(c) for c in missing)}; the header has {found}; expected "
                f"columns 'quantity', 'measured', 'predicted' and optionally "
                f"{', '.join(repr(c) for c in _OPTIONAL)}{hint}",
            )
        )
        raise_if_any(problems)

    has_sigma = "sigma_exp" in columns
    file_warnings: list[str] = []
    if not has_sigma and default_sigma_exp is None and not problems:
        # The contract makes sigma_exp optional. Without it every bit of scatter is
        # charged to the model (sigma_E = 0): the conservative reading. Say so.
        default_sigma_exp = 0.0
        file_warnings.append("no sigma_exp given: taken as 0, all scatter attributed to the model "
                             "(conservative)")
        problems.append(
            Problem(
                f"{name}:{header_line}",
                "no 'sigma_exp' column and no default given: the experiments' uncertainty is "
                "taken as 0, so all scatter is attributed to the model (conservative); add a "
                "'sigma_exp' column (e.g. 0.07) or pass --sigma-exp to change this",
                warning=True,
            )
        )

    collected: dict[str, dict[str, list[Any]]] = {}
    unknown: dict[str, list[int]] = {}  # unknown quantity name -> lines, one message each
    for row in reader:
        line = reader.line_num
        if not any(cell.strip() for cell in row):
            continue

        def cell(col: str) -> str:
            k = columns.get(col)
            return row[k].strip() if k is not None and k < len(row) else ""

        row_ok = True
        quantity = cell("quantity").lower()
        if not quantity:
            problems.append(
                Problem(f"{name}:{line} column 'quantity'", "empty; expected a quantity name")
            )
            row_ok = False
        elif quantity not in QUANTITIES:
            unknown.setdefault(quantity, []).append(line)
            row_ok = False

        ambient: float | None = None
        raw_ambient = cell("ambient")
        if raw_ambient:
            ambient = _parse_finite(raw_ambient)
            if ambient is None:
                problems.append(Problem(f"{name}:{line} column 'ambient'",
                                        f"found '{raw_ambient}', expected a number (the ambient value "
                                        f"in the row's unit) or an empty cell"))
                row_ok = False
        numbers: dict[str, float] = {}
        for col in ("measured", "predicted"):
            raw = cell(col)
            value = _parse_finite(raw) if raw_ambient else _parse_positive(raw)
            if value is None:
                problems.append(
                    Problem(
                        f"{name}:{line} column '{col}'",
                        f"found '{raw}', expected a {'' if raw_ambient else 'positive '}number",
                    )
                )
                row_ok = False
            else:
                numbers[col] = value
        row_basis = cell("basis").lower() or None
        if row_basis is not None:
            found = _basis_problems(f"{name}:{line} column 'basis'", quantity, row_basis) if row_ok else []
            problems.extend(found)
            row_ok = row_ok and not found

        sigma: float | None = None
        raw_sigma = cell("sigma_exp") if has_sigma else ""
        if raw_sigma:
            sigma = 0.0 if _parse_zero(raw_sigma) else _parse_positive(raw_sigma)
            if sigma is None:
                problems.append(
                    Problem(
                        f"{name}:{line} column 'sigma_exp'",
                        f"found '{raw_sigma}', expected a number of 0 or more "
                        f"(a relative standard deviation, e.g. 0.07)",
                    )
                )
                row_ok = False
            elif sigma > SIGMA_PERCENT_SUSPECT:
                problems.append(
                    Problem(
                        f"{name}:{line} column 'sigma_exp'",
                        f"found {raw_sigma}: a relative standard deviation above 1 is "
                        f"unusual; is it a percentage? (7 % is written 0.07)",
                        warning=True,
                    )
                )
        elif default_sigma_exp is not None:
            sigma = float(default_sigma_exp)
        elif has_sigma:
            problems.append(
                Problem(
                    f"{name}:{line} column 'sigma_exp'",
                    "empty and no default sigma_exp given; expected a positive number",
                )
            )
            row_ok = False

        if row_ok:
            entry = collected.setdefault(
                quantity, {"measured": [], "predicted": [], "sigma": [], "lines": [],
                           "ambient": [], "basis": [], "unit": []}
            )
            entry["measured"].append(numbers["measured"])
            entry["predicted"].append(numbers["predicted"])
            entry["sigma"].append(sigma)
            entry["lines"].append(line)
            entry["ambient"].append(ambient)
            entry["basis"].append(row_basis)
            entry["unit"].append(cell("unit") or None)

    for quantity, lines in unknown.items():
        hint = did_you_mean(quantity, QUANTITIES)
        where_lines = ", ".join(str(k) for k in lines[:10]) + (", ..." if len(lines) > 10 else "")
        problems.append(
            Problem(
                f"{name}:{lines[0]} column 'quantity'",
                f"unknown quantity '{quantity}' (line{'s' if len(lines) > 1 else ''} "
                f"{where_lines}); expected one of {', '.join(QUANTITIES)}{hint}",
            )
        )

    result: dict[str, dict[str, Any]] = {}
    for quantity, entry in collected.items():
        n = len(entry["lines"])
        if n < MIN_PAIRS:
            problems.append(
                Problem(
                    f"{name}:{entry['lines'][0]} quantity '{quantity}'",
                    f"only {n} valid pair; at least {MIN_PAIRS} are needed to estimate a "
                    f"spread",
                )
            )
            continue
        warnings: list[str] = list(file_warnings)
        sigmas = np.array([s for s in entry["sigma"] if s is not None], dtype=float)
        sigma_used = float("nan")
        if sigmas.size:
            sigma_used = float(np.sqrt(np.mean(sigmas**2)))
            if np.ptp(sigmas) > 1e-12 * np.max(sigmas):
                message = (
                    f"sigma_exp differs between rows ({sigmas.min():.4g} to "
                    f"{sigmas.max():.4g}); the root mean square {sigma_used:.4g} is used"
                )
                warnings.append(message)
                problems.append(
                    Problem(f"{name} quantity '{quantity}'", message, warning=True)
                )
        where = f"{name} quantity '{quantity}'"
        unit, unit_problems = _one_unit(where, quantity, entry)
        on_basis = _on_basis(name, quantity, entry, stated.get(quantity))
        problems.extend(unit_problems + on_basis["problems"])
        if unit_problems or any(not p.warning for p in on_basis["problems"]):
            continue
        warnings.extend(p.message for p in on_basis["problems"])
        measured_given = np.asarray(entry["measured"], dtype=float)
        span = None
        given_as = {b for b in entry["basis"] if b} | ({stated[quantity]} if quantity in stated else set())
        if given_as & {"rise", "depletion"}:
            message = (f"the pairs are {next(iter(given_as))}s, not the {quantity} itself, so the measured range "
                       f"is not written (the run compares it with the {quantity} series); give absolute values "
                       f"with an 'ambient' column to have it written")
            warnings.append(message)
            problems.append(Problem(where, message, warning=True))
        elif unit is not None:
            span = {"min": float(measured_given.min()), "max": float(measured_given.max()), "unit": unit}
        else:
            message = ("no 'unit' column: the measured range is not written into the table, so the run "
                       "cannot warn when predictions leave it; add a 'unit' column (e.g. degC, ppm)")
            warnings.append(message)
            problems.append(Problem(where, message, warning=True))
        result[quantity] = {
            "measured": on_basis["measured"],
            "predicted": on_basis["predicted"],
            "sigma_exp": sigma_used,
            "lines": list(entry["lines"]),
            "file": name,
            "warnings": warnings,
            "basis": on_basis["basis"],
            "unit": unit,
            "range": span,
        }

    if not collected and not any(not p.warning for p in problems):
        problems.append(Problem(name, "no data rows under the header"))
    raise_if_any(problems)
    return result


def _parse_finite(text: str) -> float | None:
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


def _basis_problems(where: str, quantity: str, word: str) -> list[Problem]:
    if word not in BASES:
        return [Problem(where, f"found '{word}', expected one of {', '.join(BASES)}"
                               f"{did_you_mean(word, BASES)}")]
    # what its values may be: the basis the run applies (rise, depletion) or as given
    allowed = tuple(dict.fromkeys((applied_basis(quantity), "as-given")))
    if quantity in QUANTITIES and word not in allowed:
        return [Problem(where, f"basis '{word}' does not apply to {quantity}; expected "
                               f"{' or '.join(allowed)}")]
    return []


def _one_unit(where: str, quantity: str, entry: Mapping[str, list[Any]]) -> tuple[str | None, list[Problem]]:
    """The one unit of a quantity's rows (None when no row gives one), and its problems."""
    units = entry["unit"]
    given = sorted({u for u in units if u is not None})
    if not given:
        return None, []
    if len(given) > 1 or None in units:
        lines = ", ".join(str(k) for k, u in zip(entry["lines"], units) if u is None)
        found = ", ".join(repr(u) for u in given) + (f" and empty on line(s) {lines}" if lines else "")
        return None, [Problem(f"{where} column 'unit'", f"found {found}; expected one unit for all of "
                                                        f"its rows")]
    message = check_unit(given[0], quantity)
    if message:
        return None, [Problem(f"{where} column 'unit'", f"'{given[0]}': {message}")]
    return given[0], []


def _on_basis(name: str, quantity: str, entry: Mapping[str, list[Any]], stated: str | None) -> dict[str, Any]:
    """Measured and predicted values on the basis the run applies, with the basis to record.

    Rises T - A for temperature and depletions A - X for O2 when an ambient A is given
    (see :func:`read_pairs`, Notes); the values as they are otherwise.
    """
    where = f"{name} quantity '{quantity}'"
    e = np.asarray(entry["measured"], dtype=float)
    m = np.asarray(entry["predicted"], dtype=float)
    ambient = entry["ambient"]
    bases = {b for b in entry["basis"] if b is not None}
    problems: list[Problem] = []
    if stated is not None:
        bases.add(stated)
    if len(bases) > 1:
        problems.append(Problem(f"{where} column 'basis'", f"found {', '.join(sorted(bases))} (the column and "
                                                           f"--basis together); expected one basis per quantity"))
        return {"problems": problems}
    word = next(iter(bases), None)
    with_ambient = [a is not None for a in ambient]
    if any(with_ambient):
        lines = [k for k, a in zip(entry["lines"], ambient) if a is None]
        if lines:
            problems.append(Problem(f"{where} column 'ambient'", f"empty on line(s) {', '.join(map(str, lines))} "
                                                                 f"while other rows give one; expected an ambient "
                                                                 f"on every row of {quantity} or on none"))
        if quantity not in _AMBIENT_SIGN:
            problems.append(Problem(f"{where} column 'ambient'", f"an ambient is given, but the run applies {quantity} "
                                                                 f"as given; leave 'ambient' empty for {quantity}"))
        if word not in (None, "as-given"):
            problems.append(Problem(f"{where} column 'basis'", f"basis '{word}' says the values are already "
                                                               f"{word}s, yet an ambient is given; give absolute "
                                                               f"values with their ambient, or {word}s without one"))
        if problems:
            return {"problems": problems}
        a = np.asarray(ambient, dtype=float)
        sign = _AMBIENT_SIGN[quantity]
        e, m = sign * (e - a), sign * (m - a)
        bad = [(k, col, v) for k, ei, mi in zip(entry["lines"], e, m)
               for col, v in (("measured", ei), ("predicted", mi)) if not v > 0]
        for line, col, value in bad:
            kind = applied_basis(quantity)
            problems.append(Problem(f"{name}:{line} column '{col}'",
                                    f"the {kind} against the ambient is {value:.4g}; expected a positive {kind} "
                                    f"(ln(M/E) needs positive values)"))
        return {"problems": problems, "measured": e, "predicted": m, "basis": applied_basis(quantity)}
    if word is None and quantity in APPLIED_BASIS:
        problems.append(Problem(where, f"neither an 'ambient' nor a 'basis' says what these values are; the run "
                                       f"applies {quantity} as the {applied_basis(quantity)} against ambient, so "
                                       f"they are taken as {applied_basis(quantity)}s and no basis is recorded; add "
                                       f"an 'ambient' column (absolute values) or 'basis: "
                                       f"{applied_basis(quantity)}'", warning=True))
    elif word is not None and word != applied_basis(quantity):
        problems.append(Problem(where, f"fitted on the values as given (basis '{word}'), but the run applies "
                                       f"{quantity} as the {applied_basis(quantity)} against ambient and will "
                                       f"refuse this table; add an 'ambient' column to fit the "
                                       f"{applied_basis(quantity)}", warning=True))
    if word is None and quantity not in APPLIED_BASIS:
        word = "as-given"
    return {"problems": problems, "measured": e, "predicted": m, "basis": word}


#: Sign s of the ambient conversion x -> s (x - A): rise above ambient for temperature,
#: depletion below ambient for O2 (the contract's basis of those rows).
_AMBIENT_SIGN = {"temperature": 1.0, "o2": -1.0}


def _parse_zero(text: str) -> bool:
    """True when ``text`` is the number zero (an experiment taken as exact)."""
    try:
        return float(text) == 0.0
    except ValueError:
        return False


def _round_sig(value: float, digits: int = _SIG_DIGITS) -> float:
    """Round to ``digits`` significant digits, as a plain float."""
    if value == 0 or not math.isfinite(value):
        return float(value)
    return float(f"{value:.{digits}g}")


#: Significance level of the fit checks: a p-value below it is reported as a failure
#: (5 %, common practice for goodness-of-fit and trend tests).
CHECK_ALPHA: float = 0.05

#: Fewest pairs for which the checks are computed (Shapiro-Wilk needs 3).
MIN_PAIRS_CHECKS: int = 3


def fit_checks(
    measured: Sequence[float] | np.ndarray,
    predicted: Sequence[float] | np.ndarray,
    alpha: float = CHECK_ALPHA,
) -> dict[str, Any]:
    """Check the two assumptions behind the fit: lognormal scatter, bias independent of size.

    Parameters
    ----------
    measured : array_like
        Measured values E_i on the fitted basis [any unit, positive].
    predicted : array_like
        Predicted values M_i [same unit, positive].
    alpha : float, optional
        Significance level [-]; default 0.05.

    Returns
    -------
    dict
        ``{"alpha", "normality": {...}, "trend": {...}}``. ``normality``: ``test``
        (its name), ``statistic`` W, ``p_value``, ``passed``; ``trend``: ``test``,
        ``slope`` b [-], ``p_value``, ``passed``. ``passed`` is None (and ``note``
        says why) when a test cannot be computed: fewer than 3 pairs, all ratios
        equal, or all measured values equal.

    Notes
    -----
    McGrattan & Toman (2011) take ln(M/E) as normal with a mean that does not depend
    on the size of E. Two tests, each at level ``alpha``:

    - normality of ln(M_i/E_i): Shapiro-Wilk, ``scipy.stats.shapiro`` (Shapiro, S. S.
      and Wilk, M. B. (1965), Biometrika 52, 591-611); fails when p < alpha;
    - trend: least-squares line ln(M_i/E_i) = a + b ln(E_i), ``scipy.stats.linregress``;
      the two-sided p-value of the t-test of b = 0 (n - 2 degrees of freedom). A
      significant slope (p < alpha) means the bias grows or shrinks with the size of
      the quantity, so one bias factor misrepresents part of the range.

    References
    ----------
    McGrattan & Toman (2011), Metrologia 48(3), 173-180.
    Shapiro & Wilk (1965), Biometrika 52(3/4), 591-611.
    """
    from scipy import stats

    e = _as_positive_array(measured, "measured")
    m = _as_positive_array(predicted, "predicted")
    ln_ratio = np.log(m) - np.log(e)
    ln_e = np.log(e)
    normality: dict[str, Any] = {"test": "Shapiro-Wilk (scipy.stats.shapiro) on ln(M/E)",
                                 "statistic": None, "p_value": None, "passed": None}
    trend: dict[str, Any] = {"test": "slope of ln(M/E) against ln(E), t-test (scipy.stats.linregress)",
                             "slope": None, "p_value": None, "passed": None}
    n = int(e.size)
    if n < MIN_PAIRS_CHECKS:
        note = f"not computed: {n} pairs, at least {MIN_PAIRS_CHECKS} needed"
        normality["note"] = trend["note"] = note
    else:
        if np.ptp(ln_ratio) <= 1e-12 * max(1.0, float(np.max(np.abs(ln_ratio)))):
            normality["note"] = "not computed: every ratio M/E is the same"
        else:
            w, p = stats.shapiro(ln_ratio)
            normality.update(statistic=_round_sig(float(w)), p_value=_round_sig(float(p)),
                             passed=bool(p >= alpha))
        if np.ptp(ln_e) <= 1e-12 * max(1.0, float(np.max(np.abs(ln_e)))):
            trend["note"] = "not computed: every measured value is the same"
        else:
            fit = stats.linregress(ln_e, ln_ratio)
            p = float(fit.pvalue) if math.isfinite(fit.pvalue) else 1.0   # exact line of zero slope
            trend.update(slope=_round_sig(float(fit.slope)), p_value=_round_sig(p), passed=bool(p >= alpha))
    return {"alpha": float(alpha), "normality": normality, "trend": trend}


def check_warnings(check: Mapping[str, Any]) -> list[str]:
    """Warnings, in words, for the checks of :func:`fit_checks` that failed."""
    out = []
    alpha = check["alpha"]
    nt = check["normality"]
    if nt["passed"] is False:
        out.append(f"ln(M/E) does not look normal (Shapiro-Wilk W = {nt['statistic']:.3g}, p = "
                   f"{nt['p_value']:.3g} < {alpha:g}): the lognormal correction may misstate the scatter")
    tr = check["trend"]
    if tr["passed"] is False:
        out.append(f"the bias changes with the size of the quantity (slope of ln(M/E) on ln(E) "
                   f"{tr['slope']:.3g}, p = {tr['p_value']:.3g} < {alpha:g}): one bias factor misrepresents "
                   f"part of the range; fit the range that matters separately")
    return out


def fit_table(
    pairs: Mapping[str, Mapping[str, Any]],
    source: str,
    today: str,
    pairs_file: str | None = None,
) -> dict[str, Any]:
    """Fit every quantity and assemble a model-uncertainty table.

    Parameters
    ----------
    pairs : mapping
        As returned by :func:`read_pairs`: ``{quantity: {"measured", "predicted",
        "sigma_exp", ...}}``.
    source : str
        Where the pairs come from, written as the table's ``source``.
    today : str
        Date of the fit (ISO 8601, e.g. ``"2024-05-01"``); passed in to keep this pure.
    pairs_file : str, optional
        Name of the pairs file; by default the ``file`` recorded by :func:`read_pairs`.

    Returns
    -------
    dict
        In the contract's model-uncertainty file format::

            source: ...
            distribution: lognormal
            quantities: {q: {bias, sigma_model, sigma_exp, n_pairs, basis, range}}
            fitted: {date, method, pairs_file, checks, warnings (only if any)}

        ``bias``, ``sigma_model`` and ``sigma_exp`` are rounded to 4 significant
        digits. ``basis`` (when the pairs say it) is the form the statistics were
        fitted on; ``range`` ``{min, max, unit}`` the span of the measured values (when
        the pairs give a unit). ``fitted.checks`` holds :func:`fit_checks` per quantity;
        ``fitted.warnings`` maps a quantity to its warnings (few pairs, floor applied,
        sigma_exp differing between rows, basis or range unknown, a failed check).

    References
    ----------
    McGrattan & Toman (2011), Metrologia 48(3), 173-180.
    """
    quantities: dict[str, dict[str, Any]] = {}
    warnings: dict[str, list[str]] = {}
    checks: dict[str, dict[str, Any]] = {}
    files: list[str] = []
    for quantity, entry in pairs.items():
        fit = fit_quantity(entry["measured"], entry["predicted"], entry["sigma_exp"])
        row = {
            "bias": _round_sig(fit["bias"]),
            "sigma_model": _round_sig(fit["sigma_model"]),
            "sigma_exp": _round_sig(fit["sigma_exp"]),
            "n_pairs": int(fit["n_pairs"]),
        }
        if entry.get("basis"):
            row["basis"] = str(entry["basis"])
        if entry.get("range"):
            row["range"] = {k: entry["range"][k] for k in ("min", "max", "unit")}
        quantities[str(quantity)] = row
        check = fit_checks(entry["measured"], entry["predicted"])
        checks[str(quantity)] = check
        notes = list(entry.get("warnings", [])) + fit["warnings"] + check_warnings(check)
        if notes:
            warnings[str(quantity)] = notes
        if entry.get("file") and entry["file"] not in files:
            files.append(str(entry["file"]))
    if pairs_file is None and files:
        pairs_file = files[0] if len(files) == 1 else ", ".join(files)
    fitted: dict[str, Any] = {"date": str(today), "method": METHOD, "pairs_file": pairs_file,
                              "checks": checks}
    if warnings:
        fitted["warnings"] = warnings
    return {
        "source": str(source),
        "distribution": "lognormal",
        "quantities": quantities,
        "fitted": fitted,
    }


def write_table(table: Mapping[str, Any], path: str | Path) -> None:
    """Write a model-uncertainty table as YAML (keys in the table's order), atomically.

    Parameters
    ----------
    table : mapping
        As returned by :func:`fit_table` (plain Python types only).
    path : str or Path
        Output file. Written to a temporary file beside it and renamed into place, so
        an interrupted write leaves the old file (or none), never half a table.
    """
    import yaml

    text = yaml.safe_dump(dict(table), sort_keys=False, allow_unicode=True)
    write_atomically(Path(path), lambda tmp: tmp.write_text(text, encoding="utf-8"))


def write_atomically(path: Path, write) -> None:
    """Call ``write(temporary path)`` beside ``path``, then rename the result onto ``path``.

    The temporary file is hidden (``.NAME.XXXX``), in the same folder (so the rename is
    atomic on one file system) and removed if ``write`` fails.
    """
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=path.suffix, dir=path.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        write(tmp)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


#: File types ``--plot`` can write (matplotlib formats).
PLOT_SUFFIXES: tuple[str, ...] = (".svg", ".png", ".pdf")


def output_problems(
    pairs_path: str | Path,
    out: str | Path | None,
    plot: str | Path | None,
    force: bool = False,
) -> list[Problem]:
    """Problems with the files ``fit-uncertainty`` is asked to write, found before computing.

    Parameters
    ----------
    pairs_path : str or Path
        The pairs file being read (never to be overwritten).
    out : str or Path, optional
        The table to write (``--out``).
    plot : str or Path, optional
        The figure to write (``--plot``).
    force : bool, optional
        Allow ``out`` and ``plot`` to replace existing files (never the pairs file, never
        a folder).

    Returns
    -------
    list of Problem
        One per mistake, naming the path: a folder where a file is expected, a missing
        or unwritable parent folder, the pairs file itself (compared by resolved path,
        so links and ``..`` do not hide it), ``out`` and ``plot`` the same file, a plot
        type other than .svg/.png/.pdf, an existing file without ``force``.
    """
    problems: list[Problem] = []
    pairs_real = Path(pairs_path).resolve()
    seen: dict[Path, str] = {}
    for option, target in (("--out", out), ("--plot", plot)):
        if target is None:
            continue
        target = Path(target)
        where = f"{option} {target}"
        real = target.resolve()
        if option == "--plot" and target.suffix.lower() not in PLOT_SUFFIXES:
            problems.append(Problem(where, f"found the file type '{target.suffix or '(none)'}'; expected "
                                           f"{', '.join(PLOT_SUFFIXES)}"))
        if real == pairs_real:
            problems.append(Problem(where, f"this is the pairs file being read ({pairs_path}); choose another "
                                           f"file name, the input is never overwritten"))
            continue
        if real in seen:
            problems.append(Problem(where, f"the same file as {seen[real]}; choose two different files"))
            continue
        seen[real] = option
        if target.is_dir():
            problems.append(Problem(where, "is a folder; expected a file name (e.g. "
                                           f"{target / ('fit.svg' if option == '--plot' else 'uncertainty.yaml')})"))
            continue
        parent = real.parent
        if not parent.is_dir():
            problems.append(Problem(where, f"the folder {target.parent} does not exist; create it first"))
            continue
        if not os.access(parent, os.W_OK | os.X_OK):
            problems.append(Problem(where, f"the folder {target.parent} is not writable"))
            continue
        if (target.exists() or target.is_symlink()) and not force:
            problems.append(Problem(where, "the file exists; pass --force to replace it, or choose another name"))
    return problems
