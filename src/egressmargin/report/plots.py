"""Report figures: matplotlib drawings returned as inline SVG text.

Each public function draws one figure from plain numbers and returns the SVG markup
without its XML prolog, ready to paste into the HTML report. The SVG's element ids are
prefixed with a caller-given ``uid`` so that many figures can share one HTML page
without their clip paths and glyph definitions clashing.

matplotlib is imported inside the functions (Agg backend) so that importing
:mod:`egressmargin` stays quick.

Greyscale rule (common practice for printed submittals): every distinction drawn in
colour is also drawn with a line style, a marker or a hatch, and pass/fail is written
in words next to the figure, never shown by colour alone.
"""

from __future__ import annotations

import io
import math
import re
from typing import Any, Mapping, Sequence

import numpy as np

from .format import fmt_num, fmt_prob, fmt_time, fmt_unit

# The report's own palette (chosen for this project; reads in greyscale because each
# colour pairs with a distinct line style or hatch).
INK = "#1f2a36"
GRID = "#d5dbe1"
BAND = "#4f8aa6"
BAND_FILL = "#d6e5ec"
LIMIT = "#a3392a"
ASET = "#5c7a2e"
ASET_FILL = "#e9f0de"
ASET_HATCH = "#a9bf86"
PASS = "#2e6b4f"
FAIL = "#a3392a"
PASS_FILL = "#cfe2d7"
FAIL_FILL = "#f0d3cd"
SEGMENTS = {  # RSET components: colour, hatch, label
    "detection": ("#29536b", "", "Detection"),
    "alarm": ("#b9d0db", "....", "Alarm"),
    "premovement": ("#e6bd6a", "////", "Pre-movement"),
    "movement": ("#7d4f35", "xxx", "Movement"),
}
SEGMENT_HATCH_COLOUR = {"alarm": INK, "premovement": INK, "movement": "#f3e6dc"}
SERIES_STYLES = [  # (colour, line style, marker) for several lines on one axis
    (INK, "-", "o"),
    ("#4f8aa6", "--", "s"),
    ("#a3392a", "-.", "^"),
    ("#5c7a2e", ":", "D"),
    ("#7d4f35", (0, (5, 1, 1, 1)), "v"),
    ("#6b5b95", (0, (1, 1)), "P"),
]

FIG_WIDTH_IN = 6.7  # fits the A4 and Letter text width of the report CSS
MAX_POINTS = 300  # points kept per plotted curve (min/max per bucket)

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
    "hatch.linewidth": 0.6,
    "svg.fonttype": "none",
    "svg.hashsalt": "egressmargin",
}


def _plain(text: Any) -> str:
    """User text for a matplotlib label: ``$`` escaped so it is never read as math."""
    return str(text).replace("$", r"\$")


def _plt():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return matplotlib, plt


def svg_from_figure(fig: Any, uid: str = "f") -> str:
    """Serialise a matplotlib figure to inline SVG and close it.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure; it is closed before returning.
    uid : str
        Prefix added to every element id (and every reference to one) so that
        several SVGs can be inlined in one HTML document.

    Returns
    -------
    str
        ``<svg ...>...</svg>`` with no XML prolog, DOCTYPE or metadata block.
    """
    _, plt = _plt()
    buf = io.StringIO()
    try:
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None,
                                                 "Format": None, "Type": None})
    finally:
        plt.close(fig)
    return _clean_svg(buf.getvalue(), uid)


def _clean_svg(svg: str, uid: str) -> str:
    svg = re.sub(r"<\?xml[^>]*\?>\s*", "", svg)
    svg = re.sub(r"<!DOCTYPE[^>]*>\s*", "", svg, flags=re.S)
    svg = re.sub(r"<metadata>.*?</metadata>\s*", "", svg, flags=re.S)
    prefix = re.sub(r"[^A-Za-z0-9_-]", "-", uid) + "-"
    ids = set(re.findall(r'\bid="([^"]+)"', svg))
    svg = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{prefix}{m.group(1)}"', svg)
    svg = re.sub(r"url\(#([^)]+)\)",
                 lambda m: f"url(#{prefix}{m.group(1)})" if m.group(1) in ids else m.group(0),
                 svg)
    svg = re.sub(r'href="#([^"]+)"',
                 lambda m: f'href="#{prefix}{m.group(1)}"' if m.group(1) in ids else m.group(0),
                 svg)
    # Path coordinates are in points: 0.01 pt is far below what print or screen shows.
    svg = re.sub(r'\sd="([^"]*)"',
                 lambda m: ' d="' + re.sub(r"(\d+\.\d{2})\d+", r"\1", m.group(1)) + '"', svg)
    # Let CSS scale the drawing to the column width; the viewBox keeps the ratio.
    svg = re.sub(r'(<svg\b[^>]*?)\swidth="[^"]*"\sheight="[^"]*"', r'\1', svg, count=1)
    svg = svg.replace("<svg ", '<svg class="plot" role="img" ', 1)
    return svg.strip()


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
                    end_s: float | None = None, uid: str = "loc") -> str:
    """Small multiples: each assessed quantity at one location against time.

    Parameters
    ----------
    t_s : ndarray, shape (N,)
        Time [s].
    specs : mapping
        criterion id -> ``{"label", "unit", "raw": ndarray (N,), "band": (p05, p95)
        or None, "limit": float, "direction": "above"|"below", "log": bool}``. The
        band is the corrected p05-p95 of the quantity at each time.
    raw_times_s : mapping, optional
        criterion id -> raw time to limit [s] (``None`` when not reached), drawn as a
        dotted vertical line.
    end_s : float, optional
        Last time of the histories [s]; the time axis ends there.
    uid : str
        Id prefix for the SVG.

    Returns
    -------
    str
        Inline SVG.
    """
    matplotlib, plt = _plt()
    t = np.asarray(t_s, dtype=float)
    keys = list(specs)
    nrows, ncols = _grid_shape(len(keys))
    with matplotlib.rc_context(_RC):
        fig, axes = plt.subplots(nrows, ncols, figsize=(FIG_WIDTH_IN, 1.95 * nrows + 0.45),
                                 squeeze=False)
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
                                    hatch="///", linewidth=0.0, zorder=1.5)
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
            ax.set_ylabel(f"[{unit}]" if unit else "[–]")
            if end_s is not None:
                ax.set_xlim(float(t[0]) if t.size else 0.0, float(end_s))
            if i // ncols == nrows - 1 or i + ncols >= len(keys):
                ax.set_xlabel("Time [s]")
        order = [handles[k] for k in ("raw", "band", "limit", "cross") if k in handles]
        if order:
            fig.legend([h for h, _ in order], [lab for _, lab in order], loc="upper center",
                       ncol=len(order), bbox_to_anchor=(0.5, 1.0))
        # Fixed margins in inches instead of tight_layout, which costs about half of
        # the report's plotting time; sizes fit the 7.5 pt labels used here.
        height = 1.95 * nrows + 0.45
        fig.subplots_adjust(left=0.085, right=0.985, bottom=0.40 / height, top=1 - 0.66 / height,
                            wspace=0.42, hspace=0.62)
        return svg_from_figure(fig, uid)


def timeline_figure(components_s: Mapping[str, Mapping[str, Any]],
                    rset_s: Mapping[str, Any], aset_s: Mapping[str, Any],
                    aset_raw_s: Any = None, end_s: float | None = None,
                    uid: str = "tl") -> str:
    """ASET/RSET timeline of one route.

    The top row stacks the RSET components (detection, alarm, pre-movement,
    movement) at their medians; the middle row shows the RSET p05-p95 interval with
    its median; the bottom row the ASET p05-p95 interval with its median. The ASET
    band and median are also drawn across the whole chart.

    Parameters
    ----------
    components_s : mapping
        component -> ``{"p05", "p50", "p95"}`` [s].
    rset_s, aset_s : mapping
        ``{"p05", "p50", "p95"}`` [s]; an ASET percentile of ``None`` is "not
        reached by ``end_s``" and is drawn as an arrow past the end.
    aset_raw_s : float, optional
        ASET on the raw predictions [s].
    end_s : float, optional
        Last time of the histories [s].
    uid : str
        Id prefix for the SVG.
    """
    matplotlib, plt = _plt()

    def val(d, k):
        v = (d or {}).get(k)
        return None if v is None or not np.isfinite(v) else float(v)

    with matplotlib.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(FIG_WIDTH_IN, 2.25))
        left = 0.0
        seg_handles = []
        for key, (colour, hatch, label) in SEGMENTS.items():
            d = val(components_s.get(key, {}), "p50") if components_s else None
            if d is None:
                continue
            h = ax.barh(2, d, left=left, height=0.5, color=colour, hatch=hatch,
                        edgecolor=SEGMENT_HATCH_COLOUR.get(key, "white"), linewidth=0.5)
            seg_handles.append((h, f"{label} {fmt_time(d)}"))
            left += d
        r05, r50, r95 = (val(rset_s, k) for k in ("p05", "p50", "p95"))
        a05, a50, a95 = (val(aset_s, k) for k in ("p05", "p50", "p95"))
        open_ended = a95 is None or a50 is None or a05 is None
        finite = [x for x in (left, r95, a05, a50, a95, aset_raw_s) if x is not None]
        if open_ended and end_s is not None:
            finite.append(float(end_s))
        xmax = max(finite) * 1.12 if finite else 1.0
        # ASET band across the chart
        lo = a05 if a05 is not None else (float(end_s) if end_s is not None else xmax)
        hi = a95 if a95 is not None else xmax
        band = ax.axvspan(lo, hi, facecolor=ASET_FILL, hatch="\\\\", edgecolor=ASET_HATCH,
                          linewidth=0, zorder=0)
        handles = list(seg_handles)
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
        ax.set_yticks([0, 1, 2], ["ASET", "RSET p05–p95", "RSET components\n(medians)"])
        ax.set_ylim(-0.6, 2.8)
        ax.set_xlim(0, xmax)
        ax.set_xlabel("Time [s]")
        ax.grid(axis="y", visible=False)
        ax.legend([h for h, _ in handles], [lab for _, lab in handles], loc="upper center",
                  bbox_to_anchor=(0.5, -0.3), ncol=4)
        fig.tight_layout()
        return svg_from_figure(fig, uid)


def margin_histogram(margin_samples_s: np.ndarray, p_fail: Any, max_p_fail: Any = None,
                     margin_s: Mapping[str, Any] | None = None, uid: str = "mh") -> str:
    """Histogram of the Monte Carlo safety margin ASET − RSET with its zero line.

    Parameters
    ----------
    margin_samples_s : ndarray, shape (S,)
        Margin per sample [s]; +inf or NaN marks a sample whose ASET was not reached
        by the end of the histories (counted and stated, not drawn).
    p_fail : float
        Share of samples with ASET < RSET, printed on the chart.
    max_p_fail : float, optional
        Acceptance limit on ``p_fail``, printed with it.
    margin_s : mapping, optional
        ``{"p05", "p50", "p95"}`` [s]; p05 is drawn as a dashed line.
    uid : str
        Id prefix for the SVG.
    """
    matplotlib, plt = _plt()
    m = np.asarray(margin_samples_s, dtype=float).ravel()
    fin = m[np.isfinite(m)]
    n_open = int(m.size - fin.size)
    with matplotlib.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(FIG_WIDTH_IN, 2.5))
        if fin.size:
            lo, hi = float(fin.min()), float(fin.max())
            span = hi - lo
            w = span / 40.0 if span > 0 else max(1.0, abs(lo) * 0.05)
            start = math.floor(min(lo, 0.0 if lo < 0 < hi else lo) / w) * w
            edges = np.arange(start, hi + w * 1.001, w)
            if edges.size < 2:
                edges = np.array([start, start + w])
            counts, edges = np.histogram(fin, bins=edges)
            neg = edges[1:] <= 0
            ax.bar(edges[:-1][neg], counts[neg], width=np.diff(edges)[neg], align="edge",
                   color=FAIL_FILL, hatch="xxxx", edgecolor=FAIL, linewidth=0.4,
                   label="ASET < RSET (fails)")
            ax.bar(edges[:-1][~neg], counts[~neg], width=np.diff(edges)[~neg], align="edge",
                   color=PASS_FILL, edgecolor=PASS, linewidth=0.4,
                   label="ASET ≥ RSET")
        ax.axvline(0.0, color=INK, lw=1.5, label="Zero margin")
        p05 = (margin_s or {}).get("p05")
        if p05 is not None and np.isfinite(p05):
            ax.axvline(float(p05), color=INK, lw=1.0, ls=(0, (4, 2)),
                       label=f"Margin p05 {fmt_time(p05, signed=True)}")
        txt = f"P(ASET < RSET) = {fmt_prob(p_fail)}"
        if max_p_fail is not None:
            txt += f"\nacceptable if ≤ {fmt_prob(max_p_fail)}"
        if n_open:
            txt += f"\n{n_open} of {m.size} samples: ASET not reached"
        ax.text(0.015, 0.95, txt, transform=ax.transAxes, va="top", ha="left", fontsize=7,
                bbox=dict(boxstyle="square,pad=0.35", facecolor="white", edgecolor=INK,
                          linewidth=0.6))
        ax.set_xlabel("Margin ASET − RSET [s]")
        ax.set_ylabel("Samples [–]")
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.22), ncol=4)
        fig.tight_layout()
        return svg_from_figure(fig, uid)


def tornado_figure(sensitivity: Sequence[Mapping[str, Any]], base_margin_s: Any = None,
                   uid: str = "tor") -> str:
    """One-at-a-time sensitivity of the margin, widest swing on top.

    Parameters
    ----------
    sensitivity : sequence of mapping
        ``{"input", "low", "high", "margin_low_s", "margin_high_s", "swing_s"}``;
        margins [s].
    base_margin_s : float, optional
        Margin with every input at its central value [s], drawn dotted.
    uid : str
        Id prefix for the SVG.
    """
    matplotlib, plt = _plt()
    rows = sorted(sensitivity, key=lambda r: -abs(float(r.get("swing_s") or 0.0)))
    n = len(rows)
    with matplotlib.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(FIG_WIDTH_IN, 0.42 * n + 1.1))
        for i, r in enumerate(rows):
            y = n - 1 - i
            a = r.get("margin_low_s")
            b = r.get("margin_high_s")
            a = np.nan if a is None else float(a)
            b = np.nan if b is None else float(b)
            if not (np.isfinite(a) and np.isfinite(b)):
                continue
            ax.barh(y, abs(b - a), left=min(a, b), height=0.55, color=BAND_FILL,
                    edgecolor=BAND, linewidth=0.6, hatch="///")
            ax.plot([a], [y], marker="o", color=INK, ms=5, ls="none")
            ax.plot([b], [y], marker="s", color=INK, ms=5, mfc="white", ls="none")
        ax.plot([], [], marker="o", color=INK, ls="none", label="input at low value")
        ax.plot([], [], marker="s", color=INK, mfc="white", ls="none",
                label="input at high value")
        ax.axvline(0.0, color=LIMIT, lw=1.3, ls=(0, (5, 2)), label="zero margin")
        if base_margin_s is not None and np.isfinite(base_margin_s):
            ax.axvline(float(base_margin_s), color=INK, lw=0.9, ls=(0, (1, 1.5)),
                       label=f"central margin {fmt_time(base_margin_s, signed=True)}")
        ax.set_yticks(range(n), [_plain(r.get("input", "?")) for r in reversed(rows)])
        xs = [0.0] + [float(v) for r in rows for v in (r.get("margin_low_s"),
                                                        r.get("margin_high_s"))
                      if v is not None and np.isfinite(v)]
        if base_margin_s is not None and np.isfinite(base_margin_s):
            xs.append(float(base_margin_s))
        pad = 0.06 * (max(xs) - min(xs) or 1.0)
        ax.set_xlim(min(xs) - pad, max(xs) + pad)
        ax.set_ylim(-0.7, n - 0.3)
        ax.set_xlabel("Margin ASET − RSET [s]")
        ax.grid(axis="y", visible=False)
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.18 - 0.2 / max(n, 1)), ncol=2)
        fig.tight_layout()
        return svg_from_figure(fig, uid)


def credibility_figure(cred: Mapping[str, Mapping[str, Mapping[str, Any]]],
                       labels: Mapping[str, str] | None = None,
                       location_titles: Mapping[str, str] | None = None,
                       uid: str = "cred") -> str:
    """Time to limit against cell size, one panel per location.

    Parameters
    ----------
    cred : mapping
        location id -> criterion id (or ``"aset"``) -> ``{"cells": [m],
        "values_s": [s or None], "extrapolated_s": s or None}``. ``None`` values
        (not reached) are left out of the line.
    labels : mapping, optional
        criterion id -> printed name.
    location_titles : mapping, optional
        location id -> printed title.
    uid : str
        Id prefix for the SVG.

    Notes
    -----
    The extrapolated value (zero cell size) is drawn as a hollow marker at x = 0
    joined by a dotted line to the finest grid.
    """
    matplotlib, plt = _plt()
    labels = labels or {}
    location_titles = location_titles or {}
    locs = list(cred)
    nrows, ncols = _grid_shape(len(locs))
    with matplotlib.rc_context(_RC):
        fig, axes = plt.subplots(nrows, ncols, figsize=(FIG_WIDTH_IN, 2.0 * nrows + 0.55),
                                 squeeze=False)
        legend = {}
        for i, ax in enumerate(axes.flat):
            if i >= len(locs):
                ax.set_visible(False)
                continue
            loc = locs[i]
            for j, (cid, d) in enumerate(cred[loc].items()):
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
            ax.set_title(_plain(location_titles.get(loc, loc)), loc="left", fontweight="bold")
            ax.set_xlabel("Cell size [m]")
            ax.set_ylabel("Time to limit [s]")
        (hx,) = axes.flat[0].plot([], [], marker="o", color=INK, mfc="white", ls=(0, (1, 1.5)))
        handles = list(legend.values()) + [hx]
        names = list(legend.keys()) + ["extrapolated (zero cell size)"]
        fig.legend(handles, names, loc="upper center", ncol=min(len(handles), 4),
                   bbox_to_anchor=(0.5, 1.0))
        fig.tight_layout(rect=(0, 0, 1, 1 - 0.4 / (2.0 * nrows + 0.55)))
        return svg_from_figure(fig, uid)


__all__ = [
    "svg_from_figure",
    "location_figure",
    "timeline_figure",
    "margin_histogram",
    "tornado_figure",
    "credibility_figure",
]
