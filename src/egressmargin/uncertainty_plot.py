"""The figure of a model-uncertainty fit: ratio against size, and normal quantiles.

Drawn from the pairs and the table that :mod:`egressmargin.uncertainty_fit` produces; see
:func:`plot_fit`. Nothing here computes a statistic that goes into the table.

References
----------
McGrattan, K. and Toman, B. (2011). Quantifying the predictive uncertainty of complex
numerical models. Metrologia 48(3), 173-180.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from egressmargin.uncertainty_fit import PLOT_SUFFIXES, fit_checks, write_atomically

__all__ = ["plot_fit"]

# Drawing style of this project's fit figure: muted, readable in greyscale (each element
# differs in lightness as well as hue), filled and open markers told apart by shape.
_INK = "#2b3640"        # text, axes and ratio points
_BIAS = "#8a5a2b"       # bias line: muted umber, mid lightness
_BAND = "#dfe5e1"       # scatter band: pale grey-green
_TREND = "#5b7f95"      # fitted trend of the ratios: muted slate blue, lighter than the ink
_REF = "#b8b8b8"        # ratio 1 (no bias): thin light solid line
_DISPLAY = {"co": "CO", "co2": "CO2", "o2": "O2", "hcn": "HCN"}
_BASIS_LABEL = {"rise": "rise", "depletion": "depletion", "as-given": "", None: ""}


def _display(quantity: str, basis: str | None) -> str:
    label = _DISPLAY.get(quantity, quantity.replace("_", " "))
    label = label[0].upper() + label[1:]
    extra = _BASIS_LABEL.get(basis, "")
    return f"{label} {extra}".strip()


def plot_fit(
    pairs: Mapping[str, Mapping[str, Any]],
    table: Mapping[str, Any],
    path: str | Path,
) -> None:
    """The fit figure: ratio against size, and a normal-quantile plot, per quantity.

    Parameters
    ----------
    pairs : mapping
        As returned by :func:`read_pairs` (values on the fitted basis).
    table : mapping
        As returned by :func:`fit_table` (bias per quantity; ``fitted.checks``).
    path : str or Path
        Output file; the format follows the extension: ``.svg``, ``.png`` or ``.pdf``.
        Written atomically (temporary file, then renamed).

    Notes
    -----
    One row per quantity. Left: the ratio M/E (log scale) against the measured value E
    (log scale), with the fitted bias factor delta as a horizontal line, the band
    exp(m +/- 2 s) in which about 95 % of the ratios should lie if ln(M/E) is normal
    (m, s the mean and standard deviation of ln(M/E)), a thin line at M/E = 1 and the
    least-squares trend of ln(M/E) on ln(E) with its p-value: a bias that changes with
    size shows as a sloping trend. Right: ordered ln(M/E) against standard normal
    quantiles (scipy.stats.probplot), with the line m + s z and the Shapiro-Wilk
    p-value; points off the line question the lognormal assumption of McGrattan &
    Toman (2011). Drawn with the Agg backend; no window is opened.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, MaxNLocator, NullFormatter
    from scipy import stats

    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if path.suffix.lower() not in PLOT_SUFFIXES:
        raise ValueError(f"plot file must end in .svg, .png or .pdf; got '{path.name}'")
    names = [q for q in pairs if q in table.get("quantities", {})]
    if not names:
        raise ValueError("no quantity appears in both the pairs and the table")
    checks = (table.get("fitted") or {}).get("checks") or {}

    fig, axes = plt.subplots(len(names), 2, figsize=(8.2, 3.3 * len(names)), squeeze=False,
                             layout="constrained", gridspec_kw={"width_ratios": [1.5, 1.0]})
    for (ax, qq), quantity in zip(axes, names):
        e = np.asarray(pairs[quantity]["measured"], dtype=float)
        m = np.asarray(pairs[quantity]["predicted"], dtype=float)
        row = table["quantities"][quantity]
        delta = float(row["bias"])
        ratio = m / e
        ln_r = np.log(ratio)
        mean_ln = float(np.mean(ln_r))
        sd_ln = float(np.std(ln_r, ddof=1)) if ln_r.size > 1 else 0.0
        check = checks.get(quantity) or fit_checks(e, m)
        label = _display(quantity, row.get("basis") or pairs[quantity].get("basis"))
        unit = pairs[quantity].get("unit")

        x_lo, x_hi = float(e.min()) / 1.3, float(e.max()) * 1.3
        x = np.geomspace(x_lo, x_hi, 60)
        ax.axhspan(math.exp(mean_ln - 2 * sd_ln), math.exp(mean_ln + 2 * sd_ln), color=_BAND, linewidth=0,
                   label="where 95 % of ratios fall if ln(M/E) is normal")
        ax.axhline(1.0, color=_REF, linewidth=0.8, label="M = E")
        ax.axhline(delta, color=_BIAS, linewidth=1.6, label="fitted bias factor")
        ax.annotate(f"{delta:.3g}", (1.0, delta), xycoords=("axes fraction", "data"), xytext=(3, 0),
                    textcoords="offset points", va="center", fontsize=8, color=_BIAS)
        tr = check["trend"]
        trend_words = "trend not computed"
        if tr["slope"] is not None:
            fit = stats.linregress(np.log(e), ln_r)
            ax.plot(x, np.exp(fit.intercept + fit.slope * np.log(x)), color=_TREND, linewidth=1.1,
                    label="least-squares trend of ln(M/E) on ln(E)")
            trend_words = f"trend with size p = {tr['p_value']:.2g}" + (" (significant)" if tr["passed"] is False
                                                                        else "")
        ax.plot(e, ratio, linestyle="none", marker="o", markersize=4.2, markerfacecolor=_INK,
                markeredgecolor="white", markeredgewidth=0.6, label="pairs")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlim(x_lo, x_hi)
        name_in_text = label if quantity in _DISPLAY else label.lower()
        ax.set_xlabel(f"Measured {name_in_text}" + (f" [{unit}]" if unit else ""), color=_INK)
        ax.set_ylabel("Predicted / measured", color=_INK)
        ax.set_title(f"{label}, {e.size} pairs: {trend_words}", fontsize=9, color=_INK, loc="left")

        (osm, osr), _ = stats.probplot(ln_r, dist="norm")
        z = np.array([osm.min(), osm.max()]) if osm.size else np.array([-1.0, 1.0])
        qq.plot(z, mean_ln + sd_ln * z, color=_TREND, linewidth=1.2, label="normal line, sample mean and sd")
        qq.plot(osm, osr, linestyle="none", marker="s", markersize=4.0, markerfacecolor="white",
                markeredgecolor=_INK, markeredgewidth=0.9, label="ordered ln(M/E)")
        nt = check["normality"]
        words = (f"Shapiro-Wilk W = {nt['statistic']:.3f}, p = {nt['p_value']:.2g}" if nt["p_value"] is not None
                 else f"Shapiro-Wilk {nt.get('note', 'not computed')}")
        qq.set_title(words + (" (not normal)" if nt["passed"] is False else ""), fontsize=9, color=_INK,
                     loc="left")
        qq.set_xlabel("Standard normal quantile", color=_INK)
        qq.set_ylabel("ln(M/E)", color=_INK)
        for a in (ax, qq):
            a.tick_params(which="both", colors=_INK, labelsize=8)
            for spine in ("top", "right"):
                a.spines[spine].set_visible(False)
            a.grid(True, which="major", color="#ececec", linewidth=0.6)
        y_lo = min(float(ratio.min()), math.exp(mean_ln - 2 * sd_ln), delta, 1.0) / 1.1
        y_hi = max(float(ratio.max()), math.exp(mean_ln + 2 * sd_ln), delta, 1.0) * 1.1
        ax.set_ylim(y_lo, y_hi)
        for axis, lo, hi in ((ax.xaxis, x_lo, x_hi), (ax.yaxis, y_lo, y_hi)):
            if hi / lo < 8.0:   # less than a decade: plain ticks read better than powers of ten
                ticks = [v for v in MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
                         if lo <= v <= hi]
                axis.set_major_locator(FixedLocator(ticks))
            elif hi / lo < 1000.0:
                axis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0)))
            axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
            axis.set_minor_formatter(NullFormatter())
    handles = {}
    for a in axes[0]:
        for h, lab in zip(*a.get_legend_handles_labels()):
            handles.setdefault(lab, h)
    fig.legend(list(handles.values()), list(handles), loc="outside upper center", ncols=3, fontsize=7,
               frameon=False)

    write_atomically(path, lambda tmp: fig.savefig(tmp, format=fmt, dpi=150))
    plt.close(fig)
