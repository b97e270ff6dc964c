"""Report figures: matplotlib drawings returned as PNG bytes.

Each public function draws one figure from plain numbers. By default it returns PNG
bytes at :data:`FIG_DPI`, which the report inlines as a data URI: the PDF engine draws a
raster image in a fraction of the time an SVG with hundreds of elements takes
(measured: shared/report-performance.md).

matplotlib is imported inside the functions (Agg backend) so that importing
:mod:`egressmargin` stays quick.

Greyscale rule (common practice for printed submittals): every distinction drawn in
colour is also drawn with a line style, a marker, a grey value or a written label, and
pass/fail is written in words next to the figure, never shown by colour alone. No hatch
patterns: they cost more to draw than the rest of a figure and add nothing to a label.
"""

from __future__ import annotations

import io
import math
import textwrap
from typing import Any, Mapping, Sequence

import numpy as np

from .format import fmt_num, fmt_prob, fmt_prob_ci, fmt_time, fmt_unit, fmt_verdict

# The report's own palette (chosen for this project; reads in greyscale because each
# colour pairs with a distinct line style, marker or grey value).
INK = "#1f2a36"
GRID = "#d5dbe1"
BAND = "#4f8aa6"
BAND_FILL = "#d6e5ec"
LIMIT = "#a3392a"
ASET = "#5c7a2e"
ASET_FILL = "#e9f0de"
PASS = "#2e6b4f"
FAIL = "#a3392a"
PASS_FILL = "#cfe2d7"
SEGMENTS = {  # RSET components: colour (adjacent ones differ in grey value), label
    "detection": ("#29536b", "Detection"),
    "alarm": ("#c4d8e2", "Alarm"),
    "premovement": ("#c9893a", "Pre-movement"),
    "movement": ("#5a3826", "Movement"),
}
SERIES_STYLES = [  # (colour, line style, marker) for several lines on one axis
    (INK, "-", "o"),
    ("#4f8aa6", "--", "s"),
    ("#a3392a", "-.", "^"),
    ("#5c7a2e", ":", "D"),
    ("#7d4f35", (0, (5, 1, 1, 1)), "v"),
    ("#6b5b95", (0, (1, 1)), "P"),
]

FIG_WIDTH_IN = 6.7  # fits the A4 and Letter text width of the report CSS (project choice)
#: Left edge of the route figure's panels (fraction of its width): room for the tick
#: labels of the sensitivity panel, wrapped to two lines of TICK_LABEL_CHARS characters
#: (both project choices, fitted to the 7 pt tick labels).
AXES_LEFT = 0.27
TICK_LABEL_CHARS = 26
FIG_DPI = 130  # PNG resolution: sharp at the printed size, small files (project choice)
MAX_POINTS = 240  # points kept per plotted curve (min/max per bucket; project choice)

_RC = {
    "font.family": "DejaVu Sans",
    "font.size": 7.5,
    "axes.titlesize": 8,
    "axes.labelsize": 7.5,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.7,
    "axes.grid": True,
    "grid.color": GRID,
    "grid.linewidth": 0.5,
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.labelsize": 7,
    "ytick.labelsize": 7,
    "legend.fontsize": 7,
    "legend.frameon": False,
}


def _plain(text: Any) -> str:
    """User text for a matplotlib label: ``$`` escaped so it is never read as math."""
    return str(text).replace("$", r"\$")


class _NoPyplot:
    """The three pyplot calls the figures use, on bare Agg figures: no pyplot import (it
    costs about as much as drawing several figures) and no global figure registry."""

    @staticmethod
    def figure(figsize=None, **kwargs):
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure

        fig = Figure(figsize=figsize, **kwargs)
        FigureCanvasAgg(fig)
        return fig

    @classmethod
    def subplots(cls, nrows=1, ncols=1, figsize=None, squeeze=True, **kwargs):
        fig = cls.figure(figsize=figsize)
        return fig, fig.subplots(nrows, ncols, squeeze=squeeze, **kwargs)

    @staticmethod
    def close(fig) -> None:
        """Nothing to release: the figure is in no registry."""


def _plt():
    import matplotlib

    return matplotlib, _NoPyplot


def preload() -> None:
    """Import what drawing needs, so that forked drawing processes share one import."""
    import matplotlib.backends.backend_agg  # noqa: F401
    import matplotlib.figure  # noqa: F401


def finish(fig: Any) -> bytes:
    """The figure as an opaque RGB PNG (no alpha channel); closes it.

    The figures are opaque (white background), so the alpha channel carries nothing; the
    PDF engine re-encodes every PNG, and an RGBA one twice (colour and a separate alpha
    mask), which cost about a tenth of the PDF step on the demo. compress_level 1: a little
    larger PNGs in report.html, written faster (project choice, measured on the demo). No
    metadata: the same numbers give the same bytes.
    """
    from PIL import Image

    _, plt = _plt()
    buf = io.BytesIO()
    try:
        fig.set_dpi(FIG_DPI)
        fig.canvas.draw()
        w, h = fig.canvas.get_width_height(physical=True)
        rgba = Image.frombuffer("RGBA", (w, h), fig.canvas.buffer_rgba(), "raw", "RGBA", 0, 1)
        background = Image.new("RGB", (w, h), (255, 255, 255))
        background.paste(rgba, mask=rgba.getchannel("A"))
        background.save(buf, format="PNG", compress_level=1, dpi=(FIG_DPI, FIG_DPI))
    finally:
        plt.close(fig)
    return buf.getvalue()


def _decimate(t: np.ndarray, ys: Sequence[np.ndarray], max_points: int = MAX_POINTS):
    """Indices that keep each bucket's minimum and maximum of every curve.

    Keeps the envelope (peaks, crossings) of long histories while bounding the SVG
    size; the first and last samples are always kept.
    """
    n = t.size
    if n <= max_points:
        return np.arange(n)
    buckets = max(1, max_points // (2 * max(1, len(ys))))
    edges = np.linspace(0, n, buckets + 1).astype(int)
    keep = {0, n - 1}
    for a, b in zip(edges[:-1], edges[1:]):
        if b <= a:
            continue
        for y in ys:
            seg = y[a:b]
            if not np.any(np.isfinite(seg)):
                continue
            keep.add(a + int(np.nanargmin(seg)))
            keep.add(a + int(np.nanargmax(seg)))
    return np.array(sorted(keep))


def _grid_shape(n_panels: int, max_cols: int = 3) -> tuple[int, int]:
    """(rows, columns) of a small-multiples grid for ``n_panels`` panels."""
    n = max(n_panels, 1)
    ncols = min(n, max_cols)
    return math.ceil(n / ncols), ncols


def location_figure(t_s: np.ndarray, specs: Mapping[str, Mapping[str, Any]],
                    raw_times_s: Mapping[str, Any] | None = None,
                    end_s: float | None = None, uid: str = "loc"):
    """Small multiples: each given quantity at one location against time.

    Parameters
    ----------
    t_s : ndarray, shape (N,)
        Time [s].
    specs : mapping
        criterion id -> ``{"label", "unit", "raw": ndarray (N,), "band": (p05, p95)
        or None, "limit": float, "direction": "above"|"below", "log": bool}``. The
        band is the corrected p05-p95 of the quantity at each time. The caller passes
        only the quantities worth a panel (the report: those whose limit is reached).
    raw_times_s : mapping, optional
        criterion id -> raw time to limit [s] (``None`` when not reached), drawn as a
        dotted vertical line.
    end_s : float, optional
        Last time of the histories [s]; the time axis ends there.
    uid : str
        The figure's name in the report (identifies the job; not drawn).
    """
    matplotlib, plt = _plt()
    t = np.asarray(t_s, dtype=float)
    keys = list(specs)
    # a lone panel keeps the size it has among others (half the width), not the whole row
    nrows, ncols = _grid_shape(len(keys)) if len(keys) > 1 else (1, 2)
    height = 1.75 * nrows + 0.45
    with matplotlib.rc_context(_RC):
        fig, axes = plt.subplots(nrows, ncols, figsize=(FIG_WIDTH_IN, height), squeeze=False)
        handles = {}
        for i, ax in enumerate(axes.flat):
            if i >= len(keys):
                ax.set_visible(False)
                continue
            cid = keys[i]
            spec = specs[cid]
            raw = np.asarray(spec["raw"], dtype=float)
            band = spec.get("band")
            curves = [raw] + ([np.asarray(band[0], float), np.asarray(band[1], float)]
                              if band is not None else [])
            idx = _decimate(t, curves)
            tt = t[idx]
            if band is not None:
                lo, hi = (np.asarray(band[0], float)[idx], np.asarray(band[1], float)[idx])
                h = ax.fill_between(tt, lo, hi, facecolor=BAND_FILL, edgecolor=BAND,
                                    linewidth=0.5, zorder=1.5)
                handles.setdefault("band", (h, "Corrected p05–p95"))
            (h,) = ax.plot(tt, raw[idx], color=INK, lw=1.2, zorder=3)
            handles.setdefault("raw", (h, "Raw prediction"))
            limit = spec.get("limit")
            if limit is not None and np.isfinite(limit):
                h = ax.axhline(float(limit), color=LIMIT, lw=1.1, ls=(0, (5, 2)))
                handles.setdefault("limit", (h, "Limit"))
            rt = (raw_times_s or {}).get(cid)
            if rt is not None and np.isfinite(rt):
                h = ax.axvline(float(rt), color=INK, lw=0.9, ls=(0, (1, 1.5)))
                handles.setdefault("cross", (h, "Raw time to limit"))
            if spec.get("log"):
                ax.set_yscale("log")
            unit = fmt_unit(spec.get("unit"))
            sign = "≤" if spec.get("direction", "above") == "below" else "≥"
            ax.set_title(_plain(spec.get("label", cid)), loc="left", fontweight="bold",
                         color=INK, fontsize=7.5, pad=10)
            if limit is not None:
                ax.text(0.0, 1.015, f"untenable {sign} {fmt_num(limit)}"
                        f"{(' ' + unit) if unit else ''}", transform=ax.transAxes,
                        ha="left", va="bottom", color=LIMIT, fontsize=6.3)
            if unit:
                ax.set_ylabel(f"[{unit}]")
            if end_s is not None:
                ax.set_xlim(float(t[0]) if t.size else 0.0, float(end_s))
            if i // ncols == nrows - 1 or i + ncols >= len(keys):
                ax.set_xlabel("Time [s]")
        order = [handles[k] for k in ("raw", "band", "limit", "cross") if k in handles]
        if order:
            fig.legend([h for h, _ in order], [lab for _, lab in order], loc="upper center",
                       ncol=len(order), bbox_to_anchor=(0.5, 1.0))
        # Fixed margins in inches instead of tight_layout, which costs about half of
        # the plotting time; sizes fit the 7.5 pt labels used here.
        fig.subplots_adjust(left=0.085, right=0.985, bottom=0.40 / height, top=1 - 0.62 / height,
                            wspace=0.42, hspace=0.70)
        return finish(fig)


def _val(d, k):
    v = (d or {}).get(k)
    return None if v is None or not np.isfinite(v) else float(v)


def _timeline(ax, components_s, rset_s, aset_s, aset_raw_s, end_s) -> list:
    """RSET components stacked at their medians, the RSET and ASET p05-p95 intervals.

    Returns the legend entries ``[(handle, label), ...]`` for the caller to place."""
    left = 0.0
    handles = []
    for key, (colour, label) in SEGMENTS.items():
        d = _val(components_s.get(key, {}), "p50") if components_s else None
        if d is None:
            continue
        h = ax.barh(2, d, left=left, height=0.5, color=colour, edgecolor="white", linewidth=0.8)
        handles.append((h, f"{label} {fmt_time(d)}"))
        left += d
    r05, r50, r95 = (_val(rset_s, k) for k in ("p05", "p50", "p95"))
    a05, a50, a95 = (_val(aset_s, k) for k in ("p05", "p50", "p95"))
    open_ended = a95 is None or a50 is None or a05 is None
    finite = [x for x in (left, r95, a05, a50, a95, aset_raw_s) if x is not None]
    if open_ended and end_s is not None:
        finite.append(float(end_s))
    xmax = max(finite) * 1.12 if finite else 1.0
    lo = a05 if a05 is not None else (float(end_s) if end_s is not None else xmax)
    hi = a95 if a95 is not None else xmax
    band = ax.axvspan(lo, hi, facecolor=ASET_FILL, edgecolor=ASET, linewidth=0.5, zorder=0)
    handles.append((band, "ASET p05–p95"))
    if a50 is not None:
        ln = ax.axvline(a50, color=ASET, lw=1.4)
        handles.append((ln, f"ASET p50 {fmt_time(a50)}"))
    else:
        (ln,) = ax.plot([], [], color=ASET, lw=1.4)
        handles.append((ln, f"ASET p50 {fmt_time(None, end_s)}"))
    if aset_raw_s is not None and np.isfinite(aset_raw_s):
        ln = ax.axvline(float(aset_raw_s), color=INK, lw=0.9, ls=(0, (1, 1.5)))
        handles.append((ln, f"ASET raw {fmt_time(aset_raw_s)}"))
    if end_s is not None and float(end_s) <= xmax:
        ax.axvline(float(end_s), color="#777777", lw=0.8, ls=(0, (6, 3)))
        ax.text(float(end_s), 2.45, "end of histories ", fontsize=6.3, color="#555555",
                va="bottom", ha="right")

    def interval(y, p05, p50, p95, colour, marker):
        a = p05 if p05 is not None else xmax
        b = p95 if p95 is not None else xmax
        ax.plot([a, b], [y, y], color=colour, lw=2.2, solid_capstyle="butt")
        ax.plot([a, a], [y - 0.15, y + 0.15], color=colour, lw=1.2)
        if p95 is not None:
            ax.plot([b, b], [y - 0.15, y + 0.15], color=colour, lw=1.2)
        else:
            ax.annotate("", xy=(xmax, y), xytext=(xmax * 0.97, y),
                        arrowprops=dict(arrowstyle="-|>", color=colour, lw=1.2))
        if p50 is not None:
            ax.plot([p50], [y], marker=marker, color=colour, ms=6, mfc="white", mew=1.4)

    interval(1, r05, r50, r95, INK, "D")
    interval(0, a05, a50, a95, ASET, "o")
    ax.set_yticks([0, 1, 2], ["ASET p05–p95", "RSET p05–p95", "RSET components\n(medians)"])
    ax.set_ylim(-0.6, 2.8)
    ax.set_xlim(0, xmax)
    ax.set_xlabel("Time from ignition [s]")
    ax.grid(axis="y", visible=False)
    return handles


def histogram_title(p_fail: Any, max_p_fail: Any = None, verdict: Any = None,
                    n_open: int = 0, n_draws: int = 0, p_fail_ci95: Any = None) -> str:
    """The histogram's title: p_fail, the acceptance limit, the verdict word, open draws.

    The limit is named as a limit (never "acceptable" beside a failing value) and the
    verdict is printed as its word, so the line cannot be misread.
    """
    txt = f"P(ASET < RSET) = {fmt_prob_ci(p_fail, p_fail_ci95, max_p_fail)}"
    if max_p_fail is not None:
        txt += f"; acceptance limit {fmt_prob(max_p_fail)}"
    if verdict is not None:
        txt += f"; verdict {fmt_verdict(verdict)}"
    if n_open:   # on a line of its own: the whole would run past the panel
        txt += f";\n{n_open} of {n_draws} draws reach no limit (not drawn)"
    return txt


def wrap_label(text: Any, width: int = TICK_LABEL_CHARS) -> str:
    """A tick label wrapped to at most two lines of ``width`` characters (then cut with …)."""
    lines = textwrap.wrap(_plain(text), width) or [""]
    if len(lines) > 2:
        lines = [lines[0], textwrap.shorten(" ".join(lines[1:]), width, placeholder="…")]
    return "\n".join(lines)


def _histogram(ax, margin_samples_s, p_fail, max_p_fail, margin_p05, verdict=None, p_fail_ci95=None) -> list:
    m = np.asarray(margin_samples_s, dtype=float).ravel()
    fin = m[np.isfinite(m)]
    n_open = int(m.size - fin.size)
    lo, hi = float(fin.min()), float(fin.max())
    edges = np.linspace(lo, hi, 41)
    if lo < 0.0 < hi:   # put a bin edge on zero so no bar straddles it
        w = (hi - lo) / 40.0
        edges = np.arange(np.floor(lo / w) * w, hi + w * 1.001, w)
    counts, edges = np.histogram(fin, bins=edges)
    neg = edges[1:] <= 0
    width = np.diff(edges)
    from matplotlib.patches import Patch
    # The legend keys are drawn as patches of the bars' own colours: a bar set with no bar
    # in it (no failing draw) would otherwise get matplotlib's default colour in the key.
    ax.bar(edges[:-1][neg], counts[neg], width=width[neg], align="edge", color=FAIL,
           edgecolor="white", linewidth=0.3)
    ax.bar(edges[:-1][~neg], counts[~neg], width=width[~neg], align="edge", color=PASS_FILL,
           edgecolor=PASS, linewidth=0.3)
    keys = [(Patch(facecolor=FAIL, edgecolor="white"), "ASET < RSET (fails)"),
            (Patch(facecolor=PASS_FILL, edgecolor=PASS), "ASET ≥ RSET")]
    ax.axvline(0.0, color=INK, lw=1.5, label="zero margin")
    if margin_p05 is not None and np.isfinite(margin_p05):
        ax.axvline(float(margin_p05), color=INK, lw=1.0, ls=(0, (4, 2)),
                   label=f"margin p05 {fmt_time(margin_p05, signed=True)}")
    txt = histogram_title(p_fail, max_p_fail, verdict, n_open, m.size, p_fail_ci95)
    ax.set_title(txt, loc="left", fontsize=6.8, pad=4)
    ax.set_xlabel("Margin ASET − RSET per draw [s]")
    ax.set_ylabel("Draws")
    return list(zip(*ax.get_legend_handles_labels())) + keys


def _tornado(ax, rows, base_margin_s) -> list:
    """Swing bars: filled for a distribution's p05-p95, open and dashed for a what-if range."""
    from matplotlib.patches import Patch

    n = len(rows)
    what_if = spread = False
    for i, r in enumerate(rows):
        y = n - 1 - i
        a, b = _val(r, "margin_low_s"), _val(r, "margin_high_s")
        if a is None or b is None:
            continue
        if r.get("kind") == "what-if":     # a declared range on a fixed value: open bar, dashed edge
            ax.barh(y, abs(b - a), left=min(a, b), height=0.55, color="white", edgecolor=BAND,
                    linewidth=0.8, linestyle=(0, (3, 1.5)))
            what_if = True
        else:
            ax.barh(y, abs(b - a), left=min(a, b), height=0.55, color=BAND_FILL, edgecolor=BAND,
                    linewidth=0.6)
            spread = True
        ax.plot([a], [y], marker="o", color=INK, ms=4.5, ls="none")
        ax.plot([b], [y], marker="s", color=INK, ms=4.5, mfc="white", ls="none")
    ax.plot([], [], marker="o", color=INK, ls="none", label="input at low value")
    ax.plot([], [], marker="s", color=INK, mfc="white", ls="none", label="input at high value")
    ax.axvline(0.0, color=LIMIT, lw=1.3, ls=(0, (5, 2)), label="zero margin")
    if base_margin_s is not None and np.isfinite(base_margin_s):
        ax.axvline(float(base_margin_s), color=INK, lw=0.9, ls=(0, (1, 1.5)),
                   label=f"median-input margin {fmt_time(base_margin_s, signed=True)}")
    ax.set_yticks(range(n), [wrap_label(r.get("input", "?")) for r in reversed(rows)],
                  fontsize=6.5, linespacing=0.95)
    xs = [0.0] + [v for r in rows for v in (_val(r, "margin_low_s"), _val(r, "margin_high_s"))
                  if v is not None]
    if base_margin_s is not None and np.isfinite(base_margin_s):
        xs.append(float(base_margin_s))
    pad = 0.06 * (max(xs) - min(xs) or 1.0)
    ax.set_xlim(min(xs) - pad, max(xs) + pad)
    ax.set_ylim(-0.7, n - 0.3)
    ax.set_xlabel("Margin ASET − RSET [s], one input at a time")
    ax.grid(axis="y", visible=False)
    keys = []
    if spread:
        keys.append((Patch(facecolor=BAND_FILL, edgecolor=BAND), "p05–p95 of a declared distribution"))
    if what_if:
        keys.append((Patch(facecolor="white", edgecolor=BAND, linestyle=(0, (3, 1.5))),
                     "what-if ±20 % or ±10 % (a fixed\nvalue, not a measured spread)"))
    return list(zip(*ax.get_legend_handles_labels())) + keys


#: Sobol' indices below this total index are not drawn (named in the caption instead;
#: project choice: one hundredth of the margin's variance).
INDEX_SHOWN_MIN = 0.01


def _indices(ax, rows) -> list:
    """First-order and total Sobol' indices per input, largest total on top, with their intervals."""
    from matplotlib.patches import Patch

    n = len(rows)
    for i, r in enumerate(rows):
        y = n - 1 - i
        for dy, key, face, edge in ((0.17, "total", BAND_FILL, BAND), (-0.17, "first_order", BAND, INK)):
            v = _val(r, key)
            if v is None:
                continue
            ax.barh(y + dy, max(v, 0.0), height=0.32, color=face, edgecolor=edge, linewidth=0.6)
            ci = r.get(f"{key}_ci95")
            if isinstance(ci, (list, tuple)) and len(ci) == 2 and None not in ci:
                ax.plot([max(ci[0], -0.04), min(ci[1], 1.14)], [y + dy, y + dy], color=INK, lw=0.9)
    ax.set_yticks(range(n), [wrap_label(r.get("input", "?")) for r in reversed(rows)],
                  fontsize=6.5, linespacing=0.95)
    ax.set_xlim(-0.04, 1.15)
    ax.set_ylim(-0.6, n - 0.4)
    ax.set_xlabel("Sobol' index of the margin: share of its variance (Saltelli design, SALib)")
    ax.grid(axis="y", visible=False)
    (ci,) = ax.plot([], [], color=INK, lw=0.9)
    return [(Patch(facecolor=BAND_FILL, edgecolor=BAND), "total index"),
            (Patch(facecolor=BAND, edgecolor=INK), "first-order index"), (ci, "bootstrap 95 % interval")]


def shown_indices(indices: Sequence[Mapping[str, Any]] | None, limit: int = 8) -> list:
    """The index rows drawn: total at least :data:`INDEX_SHOWN_MIN`, largest first, at most ``limit``."""
    rows = [r for r in indices or [] if (_val(r, "total") or 0.0) >= INDEX_SHOWN_MIN]
    return sorted(rows, key=lambda r: -(_val(r, "total") or 0.0))[:limit]


def route_panels(margin_samples_s: np.ndarray | None = None,
                 sensitivity: Sequence[Mapping[str, Any]] = (),
                 indices: Sequence[Mapping[str, Any]] | None = None) -> list[str]:
    """The panels :func:`route_figure` draws, top to bottom.

    ``"timeline"`` always; ``"histogram"`` when the finite margins per draw differ (a
    single value shows nothing); ``"tornado"`` when any sensitivity swing is non-zero;
    ``"indices"`` when any Sobol' index row is drawn (:func:`shown_indices`).
    """
    m = None if margin_samples_s is None else np.asarray(margin_samples_s, float).ravel()
    kinds = ["timeline"]
    if m is not None and np.isfinite(m).any() and np.ptp(m[np.isfinite(m)]) > 0:
        kinds.append("histogram")
    if any(abs(float(r.get("swing_s") or 0.0)) > 0 for r in sensitivity or []):
        kinds.append("tornado")
    if shown_indices(indices):
        kinds.append("indices")
    return kinds


def route_figure(components_s: Mapping[str, Mapping[str, Any]], rset_s: Mapping[str, Any],
                 aset_s: Mapping[str, Any], aset_raw_s: Any = None, end_s: float | None = None,
                 margin_samples_s: np.ndarray | None = None, p_fail: Any = None,
                 max_p_fail: Any = None, margin_p05_s: Any = None,
                 sensitivity: Sequence[Mapping[str, Any]] = (), base_margin_s: Any = None,
                 uid: str = "rt", verdict: Any = None,
                 panels: Sequence[str] | None = None, p_fail_ci95: Any = None,
                 indices: Sequence[Mapping[str, Any]] | None = None):
    """One route in one scenario: timeline, margin histogram and sensitivity, stacked.

    Parameters
    ----------
    components_s : mapping
        RSET component -> ``{"p05", "p50", "p95"}`` [s], stacked at their medians.
    rset_s, aset_s : mapping
        ``{"p05", "p50", "p95"}`` [s]; an ASET percentile of ``None`` is "not reached
        by ``end_s``" and is drawn as an arrow past the end.
    aset_raw_s : float, optional
        ASET on the raw predictions [s].
    end_s : float, optional
        Last time of the histories [s].
    margin_samples_s : ndarray, optional
        Margin per draw [s]; non-finite where no limit is reached. The histogram is
        drawn only when the finite margins differ (a single value shows nothing).
    p_fail, max_p_fail : float, optional
        Printed on the histogram.
    margin_p05_s : float, optional
        The margin's 5th percentile [s], drawn dashed.
    sensitivity : sequence of mapping
        ``{"input", "margin_low_s", "margin_high_s", "swing_s"}``; drawn as a tornado,
        widest swing on top, when any swing is non-zero.
    base_margin_s : float, optional
        The margin with every input at its median [s] (the centre of the sweep).
    uid : str
        As for :func:`location_figure`.
    verdict : str, optional
        The route's verdict, printed as its word on the histogram.
    panels : sequence of str, optional
        Draw only these of :func:`route_panels` (e.g. ``["histogram"]``, one image a
        panel, so that a page may break between panels); default all of them.
    indices : sequence of mapping, optional
        Sobol' indices of the margin, ``{"input", "first_order", "first_order_ci95",
        "total", "total_ci95"}``; those of :func:`shown_indices` are drawn as paired
        bars with their intervals.
    """
    matplotlib, plt = _plt()
    m = None if margin_samples_s is None else np.asarray(margin_samples_s, float).ravel()
    rows = sorted(sensitivity or [], key=lambda r: -abs(float(r.get("swing_s") or 0.0)))
    shown = route_panels(m, rows, indices)
    idx = shown_indices(indices)
    wanted = [k for k in shown if panels is None or k in panels]
    # Heights in inches: room for a title above each panel, the panel, then below it its
    # x label (0.32) and its legend.
    sizes = {"timeline": (0.0, 1.45, 0.62),
             "histogram": (0.28, 1.3, 0.34),   # room for a two-line title
             "tornado": (0.0, 0.24 * len(rows) + 0.3, 0.5),
             "indices": (0.0, 0.26 * len(idx) + 0.25, 0.2)}
    layout = [(kind, *sizes[kind]) for kind in wanted]
    total = 0.1 + sum(pre + h + 0.32 + leg for _, pre, h, leg in layout)
    with matplotlib.rc_context(_RC):
        fig = plt.figure(figsize=(FIG_WIDTH_IN, total))
        top = 1.0 - 0.1 / total
        for kind, pre, h, leg in layout:
            bottom = top - (pre + h) / total
            ax = fig.add_axes((AXES_LEFT, bottom, 0.97 - AXES_LEFT, h / total))
            if kind == "timeline":
                entries = _timeline(ax, components_s, rset_s, aset_s, aset_raw_s, end_s)
            elif kind == "histogram":
                entries = _histogram(ax, m, p_fail, max_p_fail, margin_p05_s, verdict, p_fail_ci95)
            elif kind == "tornado":
                entries = _tornado(ax, rows, base_margin_s)
            else:
                entries = _indices(ax, idx)
            if entries:
                fig.legend([e[0] for e in entries], [e[1] for e in entries], loc="upper center",
                           bbox_to_anchor=(0.55, bottom - 0.30 / total), ncol=4 if len(entries) <= 4 else 3,
                           fontsize=6.5)
            top = bottom - (0.32 + leg) / total
        return finish(fig)


def occupant_dose_figure(doses: Mapping[str, Mapping[str, Any]], labels: Mapping[str, str] | None = None,
                         uid: str = "occ"):
    """Each occupant's dose against their place in the start order, one panel per dose.

    Parameters
    ----------
    doses : mapping
        criterion id -> ``{"p05", "p50", "p95"}`` arrays (N,) of each occupant's dose over
        the draws (+inf: undetermined, not drawn), ``"limit"`` and ``"draws"`` (how many
        draws the percentiles are over).
    labels : mapping, optional
        Printed names of the criteria.
    uid : str
        As for :func:`location_figure`.
    """
    matplotlib, plt = _plt()
    keys = list(doses)
    n = max(1, len(keys))
    height = 2.0
    with matplotlib.rc_context(_RC):
        fig, axes = plt.subplots(1, n, figsize=(FIG_WIDTH_IN, height), squeeze=False)
        handles = {}
        for ax, cid in zip(axes.flat, keys):
            d = doses[cid]
            p05, p50, p95 = (np.asarray(d[k], float) for k in ("p05", "p50", "p95"))
            x = np.arange(1, p50.size + 1)
            show = lambda y: np.where(np.isfinite(y), y, np.nan)   # noqa: E731 - undetermined not drawn
            h = ax.fill_between(x, show(p05), show(p95), facecolor=BAND_FILL, edgecolor=BAND, linewidth=0.5,
                                step="mid")
            handles.setdefault("band", (h, "p05–p95 over the draws"))
            (h,) = ax.plot(x, show(p50), color=INK, lw=1.1, drawstyle="steps-mid")
            handles.setdefault("p50", (h, "p50 (each occupant)"))
            limit = d.get("limit")
            finite = np.concatenate([v[np.isfinite(v)] for v in (p05, p50, p95)])
            top = 1.15 * float(finite.max()) if finite.size and finite.max() > 0 else None
            if limit is not None and np.isfinite(limit) and (top is None or limit <= 5 * top):
                h = ax.axhline(float(limit), color=LIMIT, lw=1.1, ls=(0, (5, 2)))
                handles.setdefault("limit", (h, "Limit"))
                top = max(top or 0.0, 1.1 * float(limit))
            elif limit is not None and np.isfinite(limit):
                # doses far below the limit: scaled to the doses, the limit written, not drawn
                ax.text(0.99, 0.95, f"limit {fmt_num(limit)} (far above the doses shown)", transform=ax.transAxes,
                        ha="right", va="top", color=LIMIT, fontsize=6.3)
            ax.set_title(_plain((labels or {}).get(cid, cid)), loc="left", fontweight="bold", fontsize=7.5, pad=4)
            ax.set_xlabel("Place in the start order (1 = first)")
            ax.set_ylabel("Dose [-]")
            ax.set_xlim(0.5, max(1.5, x.size + 0.5))
            ax.set_ylim(0.0, top if top else None)
        order = [handles[k] for k in ("p50", "band", "limit") if k in handles]
        if order:
            fig.legend([h for h, _ in order], [lab for _, lab in order], loc="upper center", ncol=len(order),
                       bbox_to_anchor=(0.5, 1.0))
        fig.subplots_adjust(left=0.09, right=0.985, bottom=0.45 / height, top=1 - 0.55 / height, wspace=0.35)
        return finish(fig)


def credibility_figure(cred: Mapping[str, Mapping[str, Mapping[str, Any]]],
                       labels: Mapping[str, str] | None = None,
                       location_titles: Mapping[str, str] | None = None,
                       uid: str = "cred"):
    """Time to limit against cell size, one panel per location (at most 3 x 3).

    Parameters
    ----------
    cred : mapping
        location id -> criterion id (or ``"aset"``) -> ``{"cells": [m],
        "values_s": [s or None], "extrapolated_s": s or None}``. ``None`` values
        (not reached) are left out; a criterion reached on no grid, and a location
        with no such criterion, draws no line and no panel. The caller passes at most
        nine locations (one figure of a page).
    labels : mapping, optional
        criterion id -> printed name.
    location_titles : mapping, optional
        location id -> printed title.
    uid : str
        As for :func:`location_figure`.

    Notes
    -----
    The extrapolated value (zero cell size) is drawn as a hollow marker at x = 0
    joined by a dotted line to the finest grid.
    """
    matplotlib, plt = _plt()
    labels = labels or {}
    location_titles = location_titles or {}

    def reached(d):
        return any(v is not None for v in d.get("values_s", []))

    panels = [(loc, {cid: d for cid, d in crits.items() if reached(d)}) for loc, crits in cred.items()]
    panels = [(loc, c) for loc, c in panels if c][:9]
    nrows, ncols = _grid_shape(len(panels))
    height = 1.85 * nrows + 0.55
    with matplotlib.rc_context(_RC):
        fig, axes = plt.subplots(nrows, ncols, figsize=(FIG_WIDTH_IN, height), squeeze=False)
        legend = {}
        for i, ax in enumerate(axes.flat):
            if i >= len(panels):
                ax.set_visible(False)
                continue
            loc, crits = panels[i]
            for cid, d in crits.items():
                j = list(labels).index(cid) if cid in labels else len(labels)
                colour, ls, marker = SERIES_STYLES[j % len(SERIES_STYLES)]
                cells = np.asarray(d.get("cells", []), dtype=float)
                vals = np.array([np.nan if v is None else float(v)
                                 for v in d.get("values_s", [])], dtype=float)
                ok = np.isfinite(vals) & np.isfinite(cells[: vals.size])
                label = _plain(labels.get(cid, "ASET" if cid == "aset" else cid))
                (h,) = ax.plot(cells[: vals.size][ok], vals[ok], color=colour, ls=ls,
                               marker=marker, ms=4, lw=1.1)
                legend.setdefault(label, h)
                ex = d.get("extrapolated_s")
                if ex is not None and np.isfinite(ex) and ok.any():
                    finest = int(np.argmin(np.where(ok, cells[: vals.size], np.inf)))
                    ax.plot([0.0, cells[finest]], [ex, vals[finest]], color=colour,
                            ls=(0, (1, 1.5)), lw=0.9)
                    ax.plot([0.0], [ex], marker=marker, color=colour, mfc="white", ms=5,
                            ls="none")
            ax.set_xlim(left=0.0)
            title = str(location_titles.get(loc, loc))
            ax.set_title(_plain(title if len(title) <= 34 else title[:33] + "…"), loc="left",
                         fontweight="bold", fontsize=7)
            if i // ncols == nrows - 1 or i + ncols >= len(panels):
                ax.set_xlabel("Cell size [m]")
            if i % ncols == 0:
                ax.set_ylabel("Time to limit [s]")
        if panels:
            (hx,) = axes.flat[0].plot([], [], marker="o", color=INK, mfc="white", ls=(0, (1, 1.5)))
            handles = list(legend.values()) + [hx]
            names = list(legend.keys()) + ["extrapolated (zero cell size)"]
            fig.legend(handles, names, loc="upper center", ncol=min(len(handles), 4),
                       bbox_to_anchor=(0.5, 1.0))
        fig.subplots_adjust(left=0.09, right=0.985, bottom=0.42 / height, top=1 - 0.62 / height,
                            wspace=0.30, hspace=0.62)
        return finish(fig)


# ------------------------------------------------------------ weighted design fires

#: Fill greys for the scenarios' stacked contributions (distinct in greyscale; project choice).
CONTRIBUTION_FILLS = ["#29536b", "#c9893a", "#c4d8e2", "#5a3826", "#5c7a2e", "#d5dbe1", "#6b5b95"]


def design_contributions_figure(routes: Sequence[Mapping[str, Any]], scenarios: Sequence[str],
                                max_p_fail: float | None = None, uid: str = "design"):
    """Stacked bars: each weighted scenario's contribution w_s x p_s to a route's design-level p_fail.

    Parameters
    ----------
    routes : sequence of mapping
        ``{"id", "p_fail", "p_fail_ci95", "contributions": {scenario: w x p_fail}}`` per route
        (results.json ``design.routes``).
    scenarios : sequence of str
        Scenario ids in the order to stack them.
    max_p_fail : float, optional
        The acceptance limit, drawn as a vertical line.
    uid : str
        Unused in the drawing; keeps figure jobs distinct.

    Notes
    -----
    Horizontal bars, one per route; each segment is labelled in the legend and differs in
    grey value from its neighbours; the 95 % interval on the total is a whisker.
    """
    matplotlib, plt = _plt()
    n = max(1, len(routes))
    height = 0.9 + 0.32 * n
    with matplotlib.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(FIG_WIDTH_IN, height))
        y = np.arange(n)[::-1]
        left = np.zeros(n)
        for k, sid in enumerate(scenarios):
            vals = np.array([float((rt.get("contributions") or {}).get(sid, 0.0) or 0.0) for rt in routes])
            ax.barh(y, vals, left=left, height=0.6, color=CONTRIBUTION_FILLS[k % len(CONTRIBUTION_FILLS)],
                    edgecolor=INK, linewidth=0.4, label=_plain(sid))
            left += vals
        for yi, rt in zip(y, routes):
            ci = rt.get("p_fail_ci95")
            if ci:
                ax.plot([ci[0], ci[1]], [yi, yi], color=INK, lw=0.9)
                ax.plot([ci[0], ci[1]], [yi, yi], color=INK, lw=0, marker="|", ms=6)
        if max_p_fail is not None:
            ax.axvline(max_p_fail, color=LIMIT, ls="--", lw=0.9, label="acceptance limit")
        ax.set_yticks(y)
        ax.set_yticklabels([_plain(rt.get("id")) for rt in routes])
        ax.set_xlabel("Design-level probability of failure (contribution of each design fire)")
        ax.set_xlim(left=0.0)
        from matplotlib.ticker import FuncFormatter
        ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _: f"{100 * x:g} %"))   # as the text writes it
        ax.grid(axis="y", visible=False)
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, 1.0 + 0.55 / height), ncol=min(len(scenarios) + 1, 5))
        fig.subplots_adjust(left=0.2, right=0.98, bottom=0.42 / height, top=1 - 0.5 / height)
        return finish(fig)


# ------------------------------------------------------------ ensembles of fire runs

def ensemble_figure(members: Sequence[Mapping[str, Any]], routes: Sequence[Mapping[str, Any]],
                    uid: str = "ensemble"):
    """Margin by ensemble member: p50 with the p05-p95 range per route, members labelled by parameters.

    Parameters
    ----------
    members : sequence of mapping
        ``{"member", "parameters", "share_of_draws"}`` per member (results.json ``scenario.ensemble``).
    routes : sequence of mapping
        ``{"id", "by_member": [{"member", "margin_s": {p05, p50, p95}, "p_fail"}]}`` per route.
    uid : str
        Unused in the drawing; keeps figure jobs distinct.

    Notes
    -----
    A margin percentile not reached within the member's data (no limit reached) is drawn
    from ``margin_at_least_s``: the lower bound (the member's end of data standing for
    ASET) as an open marker with a caret up, and a dotted bar: "at least this".
    """
    matplotlib, plt = _plt()
    names = [str(m.get("member")) for m in members]
    labels = []
    for m in members:
        par = m.get("parameters") or {}
        text = "\n".join(f"{k} = {fmt_num(v) if isinstance(v, (int, float)) else v}" for k, v in par.items())
        labels.append(_plain(wrap_label(str(m.get("member")), 18) + ("\n" + text if text else "")))
    x = np.arange(len(names), dtype=float)
    height = 2.9
    with matplotlib.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(FIG_WIDTH_IN, height))
        nr = max(1, len(routes))
        width = min(0.6 / nr, 0.2)
        vals = []
        for k, rt in enumerate(routes):
            colour, _, marker = SERIES_STYLES[k % len(SERIES_STYLES)]
            by = {str(b.get("member")): b for b in rt.get("by_member") or []}
            xs = x + (k - (nr - 1) / 2) * width
            def pct(key, q):
                return np.array([_val((by.get(n) or {}).get(key) or {}, q) for n in names], float)

            p05, p50, p95 = (pct("margin_s", q) for q in ("p05", "p50", "p95"))
            # where no limit is reached within the member's data the margin is only bounded below:
            # the lower bound (the member's end standing for ASET) is drawn open, with an arrow up
            b05, b50, b95 = (pct("margin_at_least_s", q) for q in ("p05", "p50", "p95"))
            lo_all = np.where(np.isfinite(p05), p05, b05)
            hi_all = np.where(np.isfinite(p95), p95, b95)
            vals += [v for v in np.concatenate([lo_all, p50, b50, hi_all]) if np.isfinite(v)]
            for xi, lo, hi, bounded in zip(xs, lo_all, hi_all, ~np.isfinite(p95)):
                if np.isfinite(lo) and np.isfinite(hi):
                    ax.plot([xi, xi], [lo, hi], color=colour, lw=1.0, ls=":" if bounded else "-")
            ax.plot(xs, p50, ls="none", marker=marker, color=colour, ms=5, label=_plain(f"route {rt.get('id')}"))
            open_ = ~np.isfinite(p50) & np.isfinite(b50)
            if open_.any():
                ax.plot(xs[open_], b50[open_], ls="none", marker=marker, mfc="white", mec=colour, ms=5)
                ax.plot(xs[open_], b50[open_], ls="none", marker=6, color=colour, ms=7)   # a caret up: "at least"
        ax.axhline(0.0, color=LIMIT, ls="--", lw=0.9, label="margin 0 (ASET = RSET)")
        ax.set_xticks(x)
        ax.set_xticklabels(labels, fontsize=6.5)
        ax.set_xlim(-0.6, len(names) - 0.4)
        ax.set_ylabel("Margin ASET - RSET [s]\n(p50, bar p05-p95)")
        if vals:
            lo, hi = min(vals + [0.0]), max(vals + [0.0])
            pad = 0.08 * (hi - lo or 1.0)
            ax.set_ylim(lo - pad, hi + pad)
        ax.grid(axis="x", visible=False)
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, 1.16), ncol=min(nr + 1, 4))
        fig.subplots_adjust(left=0.12, right=0.98, bottom=0.24, top=0.86)
        return finish(fig)


__all__ = [
    "finish",
    "location_figure",
    "route_figure",
    "route_panels",
    "shown_indices",
    "credibility_figure",
    "design_contributions_figure",
    "ensemble_figure",
]


# ----------------------------------------------------------------- design-fire heat release

def hrr_figure(t_s: np.ndarray, q_kw: np.ndarray, growth: Mapping[str, Any],
               end_s: float | None = None, uid: str = "hrr") -> bytes:
    """The design fire's heat-release rate against time, with its peak and t-squared fit.

    Parameters
    ----------
    t_s, q_kw : ndarray
        Time from ignition [s] and heat-release rate [kW].
    growth : mapping
        :func:`egressmargin.hrr.describe_growth` of the curve: the peak is marked; the
        fitted Q = alpha t^2 is drawn dashed over its growth phase and labelled with
        alpha and its nearest t-squared class.
    end_s : float, optional
        Last time of the scenario's histories [s]; the axis ends there (or at the
        curve's end when later).
    uid : str
        The figure's name in the report (not drawn).
    """
    matplotlib, plt = _plt()
    t = np.asarray(t_s, dtype=float)
    q = np.asarray(q_kw, dtype=float)
    idx = _decimate(t, [q])
    mw = float(np.nanmax(q)) >= 2000.0
    scale, unit = (1e-3, "MW") if mw else (1.0, "kW")
    with matplotlib.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(FIG_WIDTH_IN, 1.75))   # printed at the full text width
        ax.plot(t[idx], q[idx] * scale, color=INK, lw=1.3, label="Heat-release rate, as given")
        alpha = growth.get("alpha_kw_s2")
        if alpha:
            tg = np.linspace(0.0, float(growth.get("growth_end_s") or t[-1]), 60)
            ax.plot(tg, alpha * tg ** 2 * scale, color=BAND, lw=1.0, ls=(0, (4, 2)),
                    label=f"Fitted αt², α = {alpha:.4g} kW/s² (nearest: {growth.get('nearest_class')})")
        peak, tp = growth.get("peak_kw"), growth.get("peak_s")
        if peak:
            ax.plot([tp], [peak * scale], marker="o", ms=4, color=LIMIT, ls="none",
                    label=f"Peak {fmt_num(peak * scale)} {unit} at {fmt_time(tp)}")
        ax.set_xlabel("Time from ignition [s]")
        ax.set_ylabel(f"Heat-release rate [{unit}]")
        right = max(float(end_s or 0.0), float(t[-1]) if t.size else 0.0)
        ax.set_xlim(0.0, right or None)
        ax.set_ylim(bottom=0.0)
        ax.legend(loc="lower right", fontsize=6.3)
        fig.subplots_adjust(left=0.085, right=0.985, bottom=0.23, top=0.95)
        return finish(fig)
