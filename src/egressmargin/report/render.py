"""Render the submittal report: results + plot data -> self-contained HTML -> PDF.

The HTML is built with jinja2 (autoescaping on: location, route and study names come
from users) from ``report_templates/report.html.j2``; plots are inlined as SVG and the
CSS is inlined, so ``report.html`` opens anywhere with no other file. WeasyPrint renders
the same HTML to ``report.pdf`` with the print rules of ``report.css`` (page size, running
header, "page N of M" footer, table of contents with page numbers).

This module only arranges numbers that the pipeline computed; it computes no result.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Iterable, Mapping

from . import plots
from .format import FILTERS, fmt_num, fmt_unit

#: Printed names of the criterion ids of the contract (more ids print as themselves).
CRITERION_LABELS: dict[str, str] = {
    "temperature": "Gas temperature",
    "visibility": "Visibility",
    "heat_flux": "Radiant heat flux",
    "fed_toxic": "FED, asphyxiant gases",
    "fed_heat": "FED, heat",
    "layer_height": "Smoke layer height",
    "aset": "ASET (earliest criterion)",
}

#: Printed names of the location series (uncertainty quantities).
QUANTITY_LABELS: dict[str, str] = {
    "temperature": "Temperature (rise above ambient)",
    "co": "Carbon monoxide",
    "co2": "Carbon dioxide",
    "o2": "Oxygen (depletion below ambient)",
    "hcn": "Hydrogen cyanide",
    "extinction": "Extinction coefficient",
    "optical_density": "Optical density",
    "soot": "Soot concentration",
    "visibility": "Visibility",
    "heat_flux": "Radiant heat flux",
    "layer_height": "Layer height",
}

COMPONENT_LABELS = {"detection": "Detection", "alarm": "Alarm",
                    "premovement": "Pre-movement", "movement": "Movement"}

#: The cautions printed on the title page (short), in the summary and in full at the end.
CAUTIONS: tuple[str, ...] = (
    "This analysis supports, and does not replace, the judgment of a qualified fire "
    "engineer.",
    "Local codes, the approving authority and licensed practice govern; nothing in this "
    "report overrides them.",
    "The model-uncertainty statistics apply only within the range of their validation "
    "data; outside that range the corrected values are extrapolations.",
    "The results are only as good as the simulations they read: geometry, fire, "
    "ventilation and measurement locations are the engineer's inputs and are not checked "
    "by this tool.",
)

#: Limitations that hold for every study (common practice for ASET/RSET reports).
STANDING_LIMITATIONS: tuple[str, ...] = (
    "A time to limit is the first crossing of the limit, linearly interpolated between "
    "the two bracketing samples of the histories; nothing finer than the output interval "
    "of the simulations is resolved.",
    "Criteria are evaluated only at the locations, and at the heights, where the "
    "simulations recorded series; conditions elsewhere are not assessed.",
    "A criterion whose series is missing at a location is reported as not assessed. It "
    "is not counted in ASET there and is never treated as passed.",
    "A limit not reached by the end of the histories is written as \u201c> end\u201d; "
    "the true time may be any later time, and conditions after the end are unknown.",
    "Percentiles and p_fail are Monte Carlo estimates and carry sampling error; a p_fail "
    "close to the acceptance limit should be read with that in mind.",
    "The design fires, scenarios and egress inputs are the engineer's choice; the tool "
    "checks their form, not their suitability.",
)

UNCERTAINTY_METHOD_REFERENCE = (
    # Citation from memory (author, year, title, journal, volume, pages).
    "McGrattan, K. and Toman, B. (2011). Quantifying the predictive uncertainty of "
    "complex numerical models. Metrologia 48(3), 173\u2013180."
)

_PAPERS = {"a4": "A4", "letter": "letter"}


def templates_dir() -> Path:
    """Folder holding ``report.html.j2`` and ``report.css``.

    Looks first at the installed package data (``egressmargin/report_templates``), then
    at the repository's top-level ``report_templates/`` (for a source checkout).
    """
    import egressmargin

    installed = Path(egressmargin.__file__).resolve().parent / "report_templates"
    if (installed / "report.html.j2").is_file():
        return installed
    repo = Path(egressmargin.__file__).resolve().parents[2] / "report_templates"
    if (repo / "report.html.j2").is_file():
        return repo
    raise FileNotFoundError(
        f"report templates not found in {installed} or {repo}; the package data "
        "'report_templates' is missing from the installation")


def page_size(paper: str) -> str:
    """CSS ``@page`` size for a paper name (``A4`` or ``Letter``, any case).

    Raises
    ------
    egressmargin.errors.InputError
        For any other paper name; the message lists the valid names.
    """
    key = str(paper).strip().lower()
    if key not in _PAPERS:
        from egressmargin.errors import InputError, Problem

        raise InputError([Problem("study paper", f"unknown paper size {paper!r}; expected "
                                                 "one of: A4, Letter")])
    return _PAPERS[key]


# ----------------------------------------------------------------------------- helpers

def _label(cid: str, plot_labels: Mapping[str, str] | None = None) -> str:
    if plot_labels and cid in plot_labels:
        return str(plot_labels[cid])
    return CRITERION_LABELS.get(cid, str(cid))


def _named(obj: Mapping[str, Any]) -> str:
    """``Title (id)``, or the id alone when there is no distinct title."""
    ident = str(obj.get("id", "?"))
    title = obj.get("title")
    if title and str(title) != ident:
        return f"{title} ({ident})"
    return ident


def _trio(d: Any) -> dict[str, Any]:
    d = d if isinstance(d, Mapping) else {}
    return {k: d.get(k) for k in ("p05", "p50", "p95")}


class _Counter:
    def __init__(self) -> None:
        self.n = 0

    def next(self) -> int:
        self.n += 1
        return self.n


# ------------------------------------------------------------------------ view model

def build_context(results: Mapping[str, Any], plotdata: Mapping[str, Any] | None,
                  paper: str = "A4") -> dict[str, Any]:
    """Arrange ``results`` (and draw the plots) into the dict the template reads.

    Parameters
    ----------
    results : mapping
        The results dict (``results.json`` content, contract keys plus extensions).
    plotdata : mapping or None
        Per-scenario arrays for the figures (see the module docs); missing entries
        simply leave their figure out.
    paper : str
        ``A4`` or ``Letter``.
    """
    size = page_size(paper)  # check the paper name before any work
    plotdata = plotdata or {}
    figs = _Counter()
    tabs = _Counter()
    study_in = results.get("study") or {}
    study = {k: study_in.get(k) for k in ("title", "reference", "prepared_by", "prepared_for",
                                          "paper", "path", "sha256")}
    title = study.get("title") or "Egress margin assessment"
    acceptance = (results.get("acceptance") or {}).get("max_p_fail")
    criteria = results.get("criteria") or {}
    applied = criteria.get("applied") or {}
    uncertainty = results.get("uncertainty")
    scenarios_in = list(results.get("scenarios") or [])

    toc: list[dict[str, Any]] = []
    sec = _Counter()

    def add_toc(anchor: str, text: str, level: int = 1) -> str:
        number = str(sec.next()) if level == 1 else ""
        toc.append({"anchor": anchor, "text": text, "level": level, "number": number})
        return number

    numbers = {"summary": add_toc("summary", "Summary"),
               "method": add_toc("method", "Method")}

    # --- scenarios
    scenarios = []
    not_assessed: list[dict[str, Any]] = []
    seen_na: set[tuple[str, str, str]] = set()
    summary_rows = []
    numbers["results"] = add_toc("results", "Results")
    for i, sc in enumerate(scenarios_in):
        sid = str(sc.get("id", f"scenario-{i + 1}"))
        sanchor = f"sc{i + 1}"
        end_s = sc.get("end_s")
        pd_sc = plotdata.get(sid) or {}
        t_s = pd_sc.get("t_s")
        pd_locs = pd_sc.get("locations") or {}
        pd_routes = pd_sc.get("routes") or {}
        add_toc(sanchor, f"Scenario {_named(sc)}", level=2)
        loc_titles = {str(loc.get("id")): _named(loc) for loc in sc.get("locations") or []}

        locations = []
        for j, loc in enumerate(sc.get("locations") or []):
            lid = str(loc.get("id", f"location-{j + 1}"))
            specs = pd_locs.get(lid) or {}
            plot_labels = {cid: s.get("label") for cid, s in specs.items() if s.get("label")}
            rows = []
            for cid, c in (loc.get("criteria") or {}).items():
                status = str(c.get("status") or "assessed")
                row = {
                    "id": cid, "label": _label(cid, plot_labels),
                    "limit": c.get("limit"), "unit": c.get("unit"), "status": status,
                    "assessed": status != "not assessed",
                    "raw_s": c.get("raw_s"), "corrected_s": _trio(c.get("corrected_s")),
                    "p_reached": c.get("p_reached"),
                    "missing_series": list(c.get("missing_series") or []),
                    "note": c.get("note") or "",
                    "outside": bool(c.get("outside_validated_range")),
                }
                rows.append(row)
                if not row["assessed"]:
                    key = (sid, lid, cid)
                    if key not in seen_na:
                        seen_na.add(key)
                        not_assessed.append({
                            "scenario": sid, "location": _named(loc), "location_id": lid,
                            "criterion": row["label"], "criterion_id": cid,
                            "missing_series": row["missing_series"], "note": row["note"],
                            "routes": []})
            for cid in loc.get("not_assessed") or []:
                key = (sid, lid, str(cid))
                if key not in seen_na:
                    seen_na.add(key)
                    not_assessed.append({
                        "scenario": sid, "location": _named(loc), "location_id": lid,
                        "criterion": _label(str(cid)), "criterion_id": str(cid),
                        "missing_series": [], "note": "", "routes": []})
            figure = None
            plot_specs = {cid: s for cid, s in specs.items() if s.get("raw") is not None}
            missing_plots = [r["label"] for r in rows if r["id"] not in plot_specs]
            if t_s is not None and plot_specs:
                n = figs.next()
                raw_times = {r["id"]: r["raw_s"] for r in rows}
                figure = {
                    "number": n,
                    "svg": plots.location_figure(t_s, plot_specs, raw_times, end_s,
                                                 uid=f"fig{n}"),
                    "caption": (f"{_named(loc)}: assessed quantities against time, "
                                "raw prediction with the limit"
                                + (" and the corrected p05–p95 band"
                                   if any(s.get("band") is not None
                                          for s in plot_specs.values()) else "")
                                + f" (scenario {sid})."
                                + ("" if not missing_plots else
                                   " Not plotted (not assessed or no series): "
                                   + ", ".join(missing_plots) + ".")),
                }
            governing = loc.get("governing")
            governing_raw = loc.get("governing_raw")
            locations.append({
                "anchor": f"{sanchor}-loc{j + 1}", "id": lid, "name": _named(loc),
                "rows": rows, "table_number": tabs.next(), "figure": figure,
                "aset_raw_s": loc.get("aset_raw_s"), "aset_s": _trio(loc.get("aset_s")),
                "governing": _label(governing, plot_labels) if governing else None,
                "governing_raw": _label(governing_raw, plot_labels) if governing_raw else None,
                "any_outside": any(r["outside"] for r in rows),
            })

        routes = []
        for k, rt in enumerate(sc.get("routes") or []):
            rid = str(rt.get("id", f"route-{k + 1}"))
            for na in rt.get("not_assessed") or []:
                lid_na, cid_na = str(na.get("location")), str(na.get("criterion"))
                key = (sid, lid_na, cid_na)
                if key not in seen_na:
                    seen_na.add(key)
                    not_assessed.append({
                        "scenario": sid, "location": loc_titles.get(lid_na, lid_na),
                        "location_id": lid_na, "criterion": _label(cid_na),
                        "criterion_id": cid_na, "missing_series": [], "note": "",
                        "routes": []})
                for entry in not_assessed:
                    if (entry["scenario"], entry["location_id"], entry["criterion_id"]) == key \
                            and rid not in entry["routes"]:
                        entry["routes"].append(rid)
            comps = rt.get("rset_components_s") or {}
            samples = pd_routes.get(rid) or {}
            timeline = hist = tornado = None
            if comps or rt.get("rset_s"):
                n = figs.next()
                timeline = {"number": n, "svg": plots.timeline_figure(
                    comps, _trio(rt.get("rset_s")), _trio(rt.get("aset_s")),
                    rt.get("aset_raw_s"), end_s, uid=f"fig{n}"),
                    "caption": (f"Route {_named(rt)}: RSET components at their medians "
                                "(their sum need not equal the RSET median), the RSET and "
                                f"ASET p05–p95 intervals and the ASET band (scenario {sid}).")}
            if samples.get("margin_samples") is not None:
                n = figs.next()
                hist = {"number": n, "svg": plots.margin_histogram(
                    samples["margin_samples"], rt.get("p_fail"), acceptance,
                    _trio(rt.get("margin_s")), uid=f"fig{n}"),
                    "caption": (f"Route {_named(rt)}: distribution of the margin ASET − RSET "
                                f"over the Monte Carlo samples (scenario {sid}).")}
            sens = list(rt.get("sensitivity") or [])
            if sens:
                n = figs.next()
                tornado = {"number": n, "svg": plots.tornado_figure(
                    sens, (rt.get("margin_s") or {}).get("p50"), uid=f"fig{n}"),
                    "caption": (f"Route {_named(rt)}: change of the margin when one input "
                                f"at a time is set to its low and high value (scenario {sid}).")}
            along = rt.get("along_route")
            along_rows = []
            if isinstance(along, Mapping):
                for cid, a in (along.get("criteria") or {}).items():
                    along_rows.append({"label": _label(cid), **_trio(a),
                                       "limit": a.get("limit"), "exceeds_p": a.get("exceeds_p")})
            mv = rt.get("movement") or {}
            gl = rt.get("governing_location")
            route = {
                "anchor": f"{sanchor}-rt{k + 1}", "id": rid, "name": _named(rt),
                "occupants": rt.get("occupants"),
                "rset_s": _trio(rt.get("rset_s")), "aset_s": _trio(rt.get("aset_s")),
                "aset_raw_s": rt.get("aset_raw_s"), "margin_s": _trio(rt.get("margin_s")),
                "margin_raw_s": rt.get("margin_raw_s"), "p_fail": rt.get("p_fail"),
                "verdict": rt.get("verdict"), "verdict_text": rt.get("verdict_text") or "",
                "governing_location": loc_titles.get(str(gl), gl) if gl else None,
                "governing_location_id": str(gl) if gl else None,
                "governing_criterion": (_label(rt["governing_criterion"])
                                        if rt.get("governing_criterion") else None),
                "not_assessed": [{"location": loc_titles.get(str(na.get("location")),
                                                             na.get("location")),
                                  "criterion": _label(str(na.get("criterion")))}
                                 for na in rt.get("not_assessed") or []],
                "components": [{"label": COMPONENT_LABELS.get(c, c), **_trio(v)}
                               for c, v in comps.items()],
                "movement": {"travel_s": mv.get("travel_s"), "flow_s": mv.get("flow_s"),
                             "controlling_element": mv.get("controlling_element"),
                             "mode": mv.get("mode")} if mv else None,
                "timeline": timeline, "histogram": hist, "tornado": tornado,
                "sensitivity": sens,
                "along_rows": along_rows,
                "along_assumptions": list((along or {}).get("assumptions") or [])
                if isinstance(along, Mapping) else [],
                "table_number": tabs.next(),
            }
            routes.append(route)
            summary_rows.append({
                "scenario": sid, "route": route, "end_s": end_s,
            })
        scenarios.append({
            "anchor": sanchor, "id": sid, "name": _named(sc), "title": sc.get("title"),
            "end_s": end_s, "histories": sc.get("histories"),
            "locations": locations, "routes": routes,
        })

    # --- credibility
    credibility = []
    for i, sc in enumerate(scenarios_in):
        cred = sc.get("credibility")
        if not isinstance(cred, Mapping):
            continue
        sid = str(sc.get("id"))
        loc_titles = {str(loc.get("id")): _named(loc) for loc in sc.get("locations") or []}
        resolutions = list(cred.get("resolutions") or [])
        rows = []
        for cl in cred.get("locations") or []:
            lid = str(cl.get("id"))
            entries = list((cl.get("criteria") or {}).items())
            if isinstance(cl.get("aset"), Mapping):
                entries.append(("aset", cl["aset"]))
            for cid, c in entries:
                rows.append({
                    "location": lid, "criterion": "ASET" if cid == "aset" else _label(cid),
                    "values_s": list(c.get("values_s") or []),
                    "relative_change": c.get("relative_change"),
                    "flagged": c.get("flagged"), "convergence": c.get("convergence"),
                    "order": c.get("order"), "extrapolated_s": c.get("extrapolated_s"),
                    "gci": c.get("gci"), "note": c.get("note") or "",
                })
        figure = None
        pd_cred = (plotdata.get(sid) or {}).get("credibility") or {}
        if pd_cred:
            n = figs.next()
            figure = {"number": n, "svg": plots.credibility_figure(
                pd_cred, {cid: _label(cid) for cid in CRITERION_LABELS}, loc_titles,
                uid=f"fig{n}"),
                "caption": (f"Scenario {sid}: time to limit against cell size, with the "
                            "value extrapolated to zero cell size where one was estimated.")}
        credibility.append({"scenario": sid, "name": _named(sc), "end_s": sc.get("end_s"),
                            "resolutions": resolutions, "threshold": cred.get("threshold"),
                            "rows": rows, "figure": figure, "table_number": tabs.next(),
                            "anchor": f"cred{i + 1}"})
    if credibility:
        numbers["credibility"] = add_toc("credibility", "Simulation credibility")
    numbers["assumptions"] = add_toc("assumptions", "Assumptions and limitations")
    numbers["inputs"] = add_toc("inputs", "Inputs")
    numbers["appendix"] = add_toc("appendix", "Appendix: criteria and constants")
    numbers["cautions"] = add_toc("cautions", "Cautions")

    # --- criteria, uncertainty, egress, inputs
    criteria_rows = []
    for cid, c in applied.items():
        c = c if isinstance(c, Mapping) else {"limit": c}
        extra = [(k, v) for k, v in c.items()
                 if k not in ("limit", "unit", "source", "sources", "method")]
        src = c.get("source") or c.get("sources")
        criteria_rows.append({"id": cid, "label": _label(cid), "limit": c.get("limit"),
                              "unit": c.get("unit"), "method": c.get("method"),
                              "source": src, "extra": extra})
    unc = None
    if isinstance(uncertainty, Mapping):
        qrows = []
        for q, s in (uncertainty.get("quantities") or {}).items():
            rng = s.get("range") if isinstance(s, Mapping) else None
            qrows.append({"id": q, "label": QUANTITY_LABELS.get(q, q),
                          "bias": s.get("bias"), "sigma_model": s.get("sigma_model"),
                          "sigma_exp": s.get("sigma_exp"),
                          "range": (f"{fmt_num(rng.get('min'))}–{fmt_num(rng.get('max'))}"
                                    + (f" {fmt_unit(rng.get('unit'))}"
                                       if rng.get("unit") else ""))
                          if isinstance(rng, Mapping) else None})
        unc = {"source": uncertainty.get("source"),
               "distribution": uncertainty.get("distribution") or "lognormal",
               "path": uncertainty.get("path"), "sha256": uncertainty.get("sha256"),
               "quantities": qrows}
    egress = results.get("egress_method") or {}
    inputs = []
    for f in results.get("inputs") or []:
        inputs.append({"path": f.get("path"), "sha256": f.get("sha256"),
                       "rows": f.get("rows"), "t_start_s": f.get("t_start_s"),
                       "t_end_s": f.get("t_end_s"),
                       "columns": list(f.get("columns") or [])})

    verdicts = [r["route"]["verdict"] for r in summary_rows]
    ctx = {
        "title": title,
        "study": study,
        "version": results.get("version"),
        "generated": results.get("generated"),
        "seed": results.get("seed"),
        "samples": results.get("samples"),
        "page_size": size,
        "acceptance": acceptance,
        "criteria": {"name": criteria.get("name"), "description": criteria.get("description"),
                     "sources": list(criteria.get("sources") or []), "rows": criteria_rows},
        "uncertainty": unc,
        "uncertainty_reference": UNCERTAINTY_METHOD_REFERENCE,
        "egress": {"name": egress.get("name"), "text": egress.get("text"),
                   "constants": list(egress.get("constants") or [])},
        "assumptions": list(results.get("assumptions") or []),
        "warnings": list(results.get("warnings") or []),
        "limitations": list(STANDING_LIMITATIONS),
        "cautions": list(CAUTIONS),
        "scenarios": scenarios,
        "summary_rows": summary_rows,
        "n_fail": sum(1 for v in verdicts if str(v).lower() == "fail"),
        "n_pass": sum(1 for v in verdicts if str(v).lower() == "pass"),
        "not_assessed": not_assessed,
        "credibility": credibility,
        "inputs": inputs,
        "toc": toc,
        "numbers": numbers,
        "n_figures": figs.n,
    }
    return ctx


# ----------------------------------------------------------------------------- render

def _environment():
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        autoescape=True,  # every template is HTML; user names must be escaped
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters.update(FILTERS)
    return env


def render_html(results: Mapping[str, Any], plotdata: Mapping[str, Any] | None = None,
                paper: str = "A4") -> str:
    """The report as one self-contained HTML string (inline CSS and SVG plots)."""
    return _render(results, plotdata, paper)[0]


def _render(results: Mapping[str, Any], plotdata: Mapping[str, Any] | None,
            paper: str) -> tuple[str, list[dict[str, Any]]]:
    """The HTML and the figures in it (number, svg, caption)."""
    from markupsafe import Markup

    ctx = build_context(results, plotdata, paper)
    css = (templates_dir() / "report.css").read_text(encoding="utf-8")
    env = _environment()
    # The stylesheet and the SVG plots are ours (not user text): mark them safe.
    ctx["css"] = Markup(css)
    figures = list(_iter_figures(ctx))
    for fig in figures:
        fig["svg"] = Markup(fig["svg"])
    return env.get_template("report.html.j2").render(**ctx), figures


def _iter_figures(ctx: Mapping[str, Any]) -> Iterable[dict[str, Any]]:
    for sc in ctx["scenarios"]:
        for loc in sc["locations"]:
            if loc["figure"]:
                yield loc["figure"]
        for rt in sc["routes"]:
            for key in ("timeline", "histogram", "tornado"):
                if rt[key]:
                    yield rt[key]
    for cr in ctx["credibility"]:
        if cr["figure"]:
            yield cr["figure"]


def _refuse_fetch(url: str, *args: Any, **kwargs: Any) -> dict:
    """WeasyPrint URL fetcher that loads nothing: the report is self-contained."""
    raise ValueError(f"report.html must be self-contained; refused to fetch {url!r}")


def write_pdf(html: str, path: Path) -> Path:
    """Render ``html`` to a PDF at ``path`` with WeasyPrint (no external fetches)."""
    import logging

    import weasyprint

    # WeasyPrint reads the inline SVG style attributes as CSS and warns once per SVG
    # property (fill, stroke ...) it does not know as CSS, although its SVG renderer
    # draws them. Quieten its logger for this call only.
    logger = logging.getLogger("weasyprint")
    level = logger.level
    logger.setLevel(logging.ERROR)
    try:
        weasyprint.HTML(string=html, url_fetcher=_refuse_fetch,
                        base_url=str(path.parent)).write_pdf(str(path))
    finally:
        logger.setLevel(level)
    return path


def render_report(results: dict, plotdata: dict, out_dir: Path, paper: str = "A4",
                  pdf: bool = True, progress=None, generated: str | None = None) -> dict[str, Path]:
    """Write ``report.html`` (and ``report.pdf``) into ``out_dir``.

    Parameters
    ----------
    results : dict
        The results dict (contract keys of ``results.json`` plus the extensions).
    plotdata : dict
        Arrays for the figures, keyed by scenario id (may be empty).
    out_dir : pathlib.Path
        Output folder; created if missing.
    paper : str
        ``A4`` (default) or ``Letter``.
    pdf : bool
        Also render ``report.pdf`` with WeasyPrint.
    progress : object, optional
        ``stage(name, total)``, ``step(n)``, ``done()`` (see :mod:`egressmargin.progress`).
    generated : str, optional
        The run's date-time the report prints (ISO 8601); results.json carries none.

    Returns
    -------
    dict of str to Path
        ``{"html": .../report.html}``, ``"plots": .../plots`` (one SVG file a figure, numbered
        as in the report) and, with ``pdf``, ``"pdf": .../report.pdf``.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    results = results if generated is None else {**results, "generated": generated}
    html, figures = _render(results, plotdata, paper)
    paths = {"html": out_dir / "report.html"}
    paths["html"].write_text(html, encoding="utf-8")
    if figures:
        # Each figure also as its own SVG file, numbered as in the report.
        plot_dir = out_dir / "plots"
        plot_dir.mkdir(exist_ok=True)
        for fig in figures:
            (plot_dir / f"figure-{int(fig['number']):03d}.svg").write_text(
                '<?xml version="1.0" encoding="utf-8"?>\n' + str(fig["svg"]), encoding="utf-8")
        paths["plots"] = plot_dir
    if pdf:
        paths["pdf"] = write_pdf(html, out_dir / "report.pdf")
    return paths


__all__ = ["render_report", "render_html", "build_context", "templates_dir", "page_size",
           "write_pdf", "CAUTIONS", "STANDING_LIMITATIONS", "CRITERION_LABELS"]
