"""Fit a model-uncertainty table from paired measured and predicted values.

For each quantity (temperature rise, CO concentration, extinction coefficient, ...) a
validation data set gives pairs (E_i, M_i): a measurement and the model's prediction of
the same thing. Following McGrattan & Toman (2011) the ratio M/E is taken to be
lognormal; its log mean and variance give the model's bias factor delta and relative
standard deviation sigma_M once the experiments' own relative standard deviation
sigma_E is taken out. The result is written in the project's model-uncertainty file
format (see the outside contract, "Model-uncertainty file").

Layout: :func:`fit_quantity` is the pure numeric core; :func:`read_pairs` reads and
checks a CSV file and reports every problem at once; :func:`fit_table` and
:func:`write_table` assemble and write the YAML table; :func:`plot_fit` draws the
comparison.

References
----------
McGrattan, K. and Toman, B. (2011). Quantifying the predictive uncertainty of complex
numerical models. Metrologia 48(3), 173-180.
"""

from __future__ import annotations

import csv
import difflib
import math
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from egressmargin.errors import Problem, raise_if_any

__all__ = [
    "FLOOR_FRACTION",
    "METHOD",
    "MIN_PAIRS",
    "MIN_PAIRS_ADVISED",
    "QUANTITIES",
    "fit_quantity",
    "fit_table",
    "plot_fit",
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
_OPTIONAL = ("sigma_exp",)
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
    path: str | Path, default_sigma_exp: float | None = None
) -> dict[str, dict[str, Any]]:
    """Read paired measured/predicted values from a CSV file, checking everything.

    Parameters
    ----------
    path : str or Path
        CSV file with a header row and columns ``quantity``, ``measured``,
        ``predicted`` and optionally ``sigma_exp`` (header names are matched without
        regard to case or surrounding spaces; other columns are ignored).
    default_sigma_exp : float, optional
        Experimental relative standard deviation sigma_E [-] for rows without one
        (no ``sigma_exp`` column, or an empty cell).

    Returns
    -------
    dict
        ``{quantity: {"measured": ndarray, "predicted": ndarray, "sigma_exp": float,
        "lines": list[int], "file": str, "warnings": list[str]}}``, quantities in the
        order they first appear. ``lines`` are the file's line numbers (header = 1).

    Raises
    ------
    egressmargin.errors.InputError
        With every problem found: missing columns; values that are not positive
        numbers (file, line, column, value found); unknown quantity names (with a
        did-you-mean); a row without sigma_E and no default; a quantity with fewer than
        2 pairs.

    Notes
    -----
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
                f"columns 'quantity', 'measured', 'predicted' and optionally 'sigma_exp'"
                f"{hint}",
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
            k = columns[col]
            return row[k].strip() if k < len(row) else ""

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

        numbers: dict[str, float] = {}
        for col in ("measured", "predicted"):
            raw = cell(col)
            value = _parse_positive(raw)
            if value is None:
                problems.append(
                    Problem(
                        f"{name}:{line} column '{col}'",
                        f"found '{raw}', expected a positive number",
                    )
                )
                row_ok = False
            else:
                numbers[col] = value

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
            elif sigma > 1:
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
                quantity, {"measured": [], "predicted": [], "sigma": [], "lines": []}
            )
            entry["measured"].append(numbers["measured"])
            entry["predicted"].append(numbers["predicted"])
            entry["sigma"].append(sigma)
            entry["lines"].append(line)

    for quantity, lines in unknown.items():
        close = difflib.get_close_matches(quantity, QUANTITIES, n=1, cutoff=0.6)
        hint = f"; did you mean '{close[0]}'?" if close else ""
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
        result[quantity] = {
            "measured": np.asarray(entry["measured"], dtype=float),
            "predicted": np.asarray(entry["predicted"], dtype=float),
            "sigma_exp": sigma_used,
            "lines": list(entry["lines"]),
            "file": name,
            "warnings": warnings,
        }

    if not collected and not any(not p.warning for p in problems):
        problems.append(Problem(name, "no data rows under the header"))
    raise_if_any(problems)
    return result


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
            quantities: {q: {bias, sigma_model, sigma_exp, n_pairs}}
            fitted: {date, method, pairs_file, warnings (only if any)}

        ``bias``, ``sigma_model`` and ``sigma_exp`` are rounded to 4 significant
        digits. ``fitted.warnings`` maps a quantity to its warnings (few pairs, floor
        applied, sigma_exp differing between rows).

    References
    ----------
    McGrattan & Toman (2011), Metrologia 48(3), 173-180.
    """
    quantities: dict[str, dict[str, Any]] = {}
    warnings: dict[str, list[str]] = {}
    files: list[str] = []
    for quantity, entry in pairs.items():
        fit = fit_quantity(entry["measured"], entry["predicted"], entry["sigma_exp"])
        quantities[str(quantity)] = {
            "bias": _round_sig(fit["bias"]),
            "sigma_model": _round_sig(fit["sigma_model"]),
            "sigma_exp": _round_sig(fit["sigma_exp"]),
            "n_pairs": int(fit["n_pairs"]),
        }
        notes = list(entry.get("warnings", [])) + fit["warnings"]
        if notes:
            warnings[str(quantity)] = notes
        if entry.get("file") and entry["file"] not in files:
            files.append(str(entry["file"]))
    if pairs_file is None and files:
        pairs_file = files[0] if len(files) == 1 else ", ".join(files)
    fitted: dict[str, Any] = {"date": str(today), "method": METHOD, "pairs_file": pairs_file}
    if warnings:
        fitted["warnings"] = warnings
    return {
        "source": str(source),
        "distribution": "lognormal",
        "quantities": quantities,
        "fitted": fitted,
    }


def write_table(table: Mapping[str, Any], path: str | Path) -> None:
    """Write a model-uncertainty table as YAML (keys in the table's order).

    Parameters
    ----------
    table : mapping
        As returned by :func:`fit_table` (plain Python types only).
    path : str or Path
        Output file.
    """
    import yaml

    text = yaml.safe_dump(dict(table), sort_keys=False, allow_unicode=True)
    Path(path).write_text(text, encoding="utf-8")


# Muted, greyscale-safe drawing style of this project.
_INK = "#2f3b45"  # points and text
_BIAS = "#3f6f8f"  # bias line: muted steel blue, dark enough to read as grey
_BAND = "#c9d3db"  # +/- 2 sigma band fill
_UNITY = "#7a7a7a"  # unity line
_DISPLAY = {"co": "CO", "co2": "CO2", "o2": "O2", "hcn": "HCN"}


def plot_fit(
    pairs: Mapping[str, Mapping[str, Any]],
    table: Mapping[str, Any],
    path: str | Path,
) -> None:
    """Predicted against measured values, one panel per quantity, saved to a file.

    Parameters
    ----------
    pairs : mapping
        As returned by :func:`read_pairs`.
    table : mapping
        As returned by :func:`fit_table` (bias and sigma_model per quantity).
    path : str or Path
        Output file; the format follows the extension: ``.svg``, ``.png`` or ``.pdf``.

    Notes
    -----
    Each panel has log-log axes, the measured/predicted points, the unity line
    M = E (thin, grey, dotted), the bias line M = delta E (dashed) and a band
    M = delta E exp(+/- 2 sigma_M) around it (light fill), per McGrattan & Toman
    (2011). Drawn with the Agg backend; no window is opened.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import NullFormatter

    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in ("svg", "png", "pdf"):
        raise ValueError(f"plot file must end in .svg, .png or .pdf; got '{path.name}'")
    names = [q for q in pairs if q in table.get("quantities", {})]
    if not names:
        raise ValueError("no quantity appears in both the pairs and the table")

    ncols = min(3, len(names))
    nrows = math.ceil(len(names) / ncols)
    fig, axes = plt.subplots(
        nrows, ncols, figsize=(3.6 * ncols, 3.5 * nrows), squeeze=False, layout="constrained"
    )
    for ax in axes.flat[len(names):]:
        ax.set_visible(False)

    for ax, quantity in zip(axes.flat, names):
        e = np.asarray(pairs[quantity]["measured"], dtype=float)
        m = np.asarray(pairs[quantity]["predicted"], dtype=float)
        row = table["quantities"][quantity]
        delta = float(row["bias"])
        sigma_m = float(row["sigma_model"])
        band = math.exp(2.0 * sigma_m)

        lo = float(min(e.min(), m.min())) / 1.5
        hi = float(max(e.max(), m.max())) * 1.5
        x = np.geomspace(lo, hi, 50)
        ax.fill_between(
            x, delta * x / band, delta * x * band, color=_BAND, linewidth=0,
            label=r"$\pm 2\,\tilde\sigma_M$ about bias",
        )
        ax.plot(x, x, color=_UNITY, linestyle=":", linewidth=1.0, label="M = E")
        ax.plot(x, delta * x, color=_BIAS, linestyle="--", linewidth=1.4,
                label=rf"M = {delta:.3g} E")
        ax.plot(e, m, linestyle="none", marker="o", markersize=4.5, markerfacecolor="white",
                markeredgecolor=_INK, markeredgewidth=1.0, label=f"pairs (n = {e.size})")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.set_aspect("equal", adjustable="box")
        label = _DISPLAY.get(quantity, quantity.replace("_", " "))
        ax.set_xlabel(f"Measured {label}", color=_INK)
        ax.set_ylabel(f"Predicted {label}", color=_INK)
        ax.set_title(
            rf"{label}: $\delta$ = {delta:.3g}, $\tilde\sigma_M$ = {sigma_m:.3g}",
            fontsize=10, color=_INK, loc="left",
        )
        ax.xaxis.set_minor_formatter(NullFormatter())  # decade labels only
        ax.yaxis.set_minor_formatter(NullFormatter())
        ax.tick_params(which="both", colors=_INK, labelsize=8)
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
        ax.grid(True, which="major", color="#e4e4e4", linewidth=0.6)
        ax.legend(fontsize=7, frameon=False, loc="upper left")

    fig.savefig(path, format=fmt, dpi=150)
    plt.close(fig)
