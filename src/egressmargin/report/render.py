"""Render the submittal report: results + plot data -> self-contained HTML -> PDF.

The HTML is built with jinja2 (autoescaping on: location, route and study names come
from users) from ``report_templates/report.html.j2``; figures are inlined as PNG data
URIs and the CSS is inlined, so ``report.html`` opens anywhere with no other file.
WeasyPrint renders the same HTML to ``report.pdf`` with the print rules of
``report.css`` (page size, running header, "page N of M" footer, contents with page
numbers).

The report is ordered for review: (1) summary, (2) basis of design, (3) results per
route, (4) location detail for the locations the routes use, (5) simulation
credibility, (6) inputs, assumptions and cautions, then an appendix. Each margin is
defined once, in the summary, and every table uses that definition.

This module only arranges numbers that the pipeline computed; it computes no result.
Figures are drawn in a process pool when there are enough of them to pay for it.
"""

from __future__ import annotations

import base64
import multiprocessing as mp
import os
from pathlib import Path
from typing import Any, Mapping, Sequence

from . import plots
from .format import FILTERS, fmt_num, fmt_time, fmt_unit, fmt_value

#: Printed names of the criterion ids of the contract (more ids print as themselves).
CRITERION_LABELS: dict[str, str] = {
    "temperature": "Gas temperature",
    "visibility": "Visibility",
    "heat_flux": "Radiant heat flux",
    "fed_toxic": "FED, asphyxiant gases",
    "fed_heat": "FED, heat",
    "fed_hypoxia": "FED, hypoxia (low oxygen)",
    "fec_irritant": "FEC, irritant gases",
    "layer_height": "Smoke layer height",
    "aset": "ASET (earliest criterion)",
}

#: Short column heads for the location matrix.
CRITERION_SHORT: dict[str, str] = {
    "temperature": "Temp.", "visibility": "Visib.", "heat_flux": "Rad. flux",
    "fed_toxic": "FED tox.", "fed_heat": "FED heat", "fed_hypoxia": "FED hyp.", "fec_irritant": "FEC irr.",
    "layer_height": "Layer",
}

#: Printed names of the location series (uncertainty quantities).
QUANTITY_LABELS: dict[str, str] = {
    "temperature": "Temperature",
    "co": "Carbon monoxide",
    "co2": "Carbon dioxide",
    "o2": "Oxygen",
    "hcn": "Hydrogen cyanide",
    "hcl": "Hydrogen chloride",
    "hbr": "Hydrogen bromide",
    "hf": "Hydrogen fluoride",
    "so2": "Sulphur dioxide",
    "no2": "Nitrogen dioxide",
    "acrolein": "Acrolein",
    "formaldehyde": "Formaldehyde",
    "extinction": "Extinction coefficient",
    "optical_density": "Optical density",
    "soot": "Soot concentration",
    "visibility": "Visibility (through the extinction coefficient)",
    "heat_flux": "Radiant heat flux",
    "layer_height": "Layer height",
    "velocity": "Gas velocity",
}

#: How the run applies a quantity's row (results.json ``uncertainty.quantities.*.basis``).
BASIS_LABELS: dict[str, str] = {"rise": "rise above ambient", "depletion": "depletion below ambient",
                                "as-given": "as given"}

COMPONENT_LABELS = {"detection": "Detection", "alarm": "Alarm",
                    "premovement": "Pre-movement", "movement": "Movement"}

#: Printed names of the optional design-fire keys of a scenario, in print order.
DESIGN_FIRE_LABELS: dict[str, str] = {
    "growth": "Growth", "peak_hrr": "Peak heat release rate", "sprinklers": "Sprinklers",
    "ventilation": "Ventilation", "yields": "Yields", "notes": "Notes",
}

#: The cautions printed on the title page and in full at the end.
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
    "A limit not reached by the end of the histories is written \u201c> end\u201d; the "
    "true time may be any later time, and conditions after the end are unknown.",
    "Percentiles and p_fail are Monte Carlo estimates and carry sampling error; the "
    "verdict takes it into account through the sampling interval on p_fail, widened for "
    "the number of looks where more draws were taken (section 2.5).",
    "The design fires, scenarios and egress inputs are the engineer's choice; the tool "
    "checks their form, not their suitability.",
)

UNCERTAINTY_METHOD_REFERENCE = (
    # Citation from memory (author, year, title, journal, volume, pages).
    "McGrattan, K. and Toman, B. (2011). Quantifying the predictive uncertainty of "
    "complex numerical models. Metrologia 48(3), 173\u2013180."
)

#: Below this many figures one process draws them about as fast as a pool: a figure costs
#: about 0.2 s of CPU and starting the fork pool about as much (rough figures from the
#: 2-core reference machine; project choice).
POOL_MIN_FIGURES = 6

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

def _label(cid: str) -> str:
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


def _location_aware_view(v: Any) -> dict | None:
    """The location-aware comparison's verdict, for the line beside the governing one."""
    if not isinstance(v, Mapping):
        return None
    return {"verdict": _verdict_word(v.get("verdict")) or "n/a", "p_fail": v.get("p_fail"),
            "p_fail_ci95": v.get("p_fail_ci95"), "reason": _sentence(v.get("verdict_reason"))}


def _given(value: Any) -> str:
    """A value from the study as given: mappings as ``key: value; ...``, lists joined."""
    if isinstance(value, Mapping):
        return "; ".join(f"{k}: {_given(v)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        return ", ".join(_given(v) for v in value)
    return fmt_value(value)


def _sentence(text: Any) -> str:
    """Text ending with exactly one full stop (no "counted.." or a bare fragment)."""
    t = str(text or "").strip()
    if not t:
        return ""
    return t if t[-1] in ".!?" else t + "."


def is_detector(loc: Mapping[str, Any]) -> bool:
    """A detection point (``role: detector``): not assessed for tenability."""
    return str(loc.get("role") or "").lower() == "detector"


class _Figures:
    """Numbers figures in reading order and records what to draw for each.

    A figure is one image, or with ``panels`` one image a panel (``fn`` drawn with
    ``panels=[name]``): the parts of one numbered figure, so that a page may break
    between panels but never inside one (the caption stays with the last part).
    """

    def __init__(self) -> None:
        self.items: list[dict[str, Any]] = []

    def add(self, fn: str, caption: str, panels: Sequence[str] = (), **kwargs: Any
            ) -> dict[str, Any]:
        number = len(self.items) + 1
        if len(panels) > 1:
            parts = [{"job": (fn, {**kwargs, "panels": [name], "uid": f"{kwargs.get('uid', 'f')}-{k}"}),
                      "suffix": f"-{chr(ord('a') + k)}", "src": None}
                     for k, name in enumerate(panels)]
        else:
            parts = [{"job": (fn, kwargs), "suffix": "", "src": None}]
        fig = {"number": number, "caption": caption, "job": parts[0]["job"], "parts": parts,
               "src": None}
        self.items.append(fig)
        return fig


def route_margin(rt: Mapping[str, Any], key: str = "p05") -> dict[str, Any]:
    """The route's margin percentile as the report prints it, in one place.

    Where the percentile is not reached by the end of the histories (enough draws reach
    no limit), the useful statement is the lower bound computed with ASET set to the end
    of the histories in those draws (``margin_at_least_s``), printed ``≥ …``.
    """
    exact = (rt.get("margin_s") or {}).get(key)
    if exact is not None:
        return {"value": exact, "at_least": False}
    bound = (rt.get("margin_at_least_s") or {}).get(key)
    return {"value": bound, "at_least": bound is not None}


def _verdict_word(v: Any) -> str:
    return str(v or "").strip().lower()


# ------------------------------------------------------------------------ view model

def build_context(results: Mapping[str, Any], plotdata: Mapping[str, Any] | None,
                  paper: str = "A4", generated: str | None = None) -> dict[str, Any]:
    """Arrange ``results`` into the dict the template reads, with the figures to draw.

    Parameters
    ----------
    results : mapping
        The results dict (``results.json`` content, contract keys plus extensions).
        Keys that other parts of the tool add in turn (``verdict_reason``,
        ``p_fail_bounds``, ``p_fail_ci95``, ``samples_used``, ``elements``,
        ``shared_elements``, ``design_fire``, a location's ``role``) are read when
        present and left out when not.
    plotdata : mapping or None
        Per-scenario arrays for the figures; missing entries leave their figure out.
    paper : str
        ``A4`` or ``Letter``.
    generated : str, optional
        The date printed as the date of the run (results.json carries none).

    Returns
    -------
    dict
        The template context; ``ctx["figures"]`` lists every figure with the job that
        draws it (see :func:`draw_figures`).
    """
    size = page_size(paper)  # check the paper name before any work
    plotdata = plotdata or {}
    figs = _Figures()
    design = _design_view(results.get("design"), figs)   # weighted design fires: figure 1 when given
    study_in = results.get("study") or {}
    study = {k: study_in.get(k) for k in ("title", "reference", "prepared_by", "prepared_for",
                                          "paper", "path", "sha256")}
    title = study.get("title") or "Egress margin assessment"
    # the study's `report: {unused_locations: omit}` leaves out locations no route uses
    # (named in one line); anything else, or none given, keeps them in the appendix
    report_options = study_in.get("report") if isinstance(study_in.get("report"), Mapping) else {}
    omit_unused = report_options.get("unused_locations") == "omit"
    acceptance_in = results.get("acceptance") or {}
    acceptance = acceptance_in.get("max_p_fail")
    criteria = results.get("criteria") or {}
    applied = criteria.get("applied") or {}
    uncertainty = results.get("uncertainty")
    raw_only = bool(results.get("raw_only") or (results.get("options") or {}).get("raw_only"))
    scenarios_in = list(results.get("scenarios") or [])
    criterion_ids = list(applied) or sorted({cid for sc in scenarios_in
                                             for loc in sc.get("locations") or []
                                             for cid in loc.get("criteria") or {}})

    scenarios, summary_rows, conclusions = [], [], []
    na_groups: dict[tuple, dict[str, Any]] = {}
    route_inputs: dict[str, dict[str, Any]] = {}
    detectors: dict[str, str] = {}
    for i, sc in enumerate(scenarios_in):
        sid = str(sc.get("id", f"scenario-{i + 1}"))
        end_s = sc.get("end_s")
        pd_sc = plotdata.get(sid) or {}
        locs = list(sc.get("locations") or [])
        loc_by_id = {str(loc.get("id")): loc for loc in locs}
        loc_titles = {lid: _named(loc) for lid, loc in loc_by_id.items()}
        for lid, loc in loc_by_id.items():
            if is_detector(loc):
                detectors[lid] = loc_titles[lid]
        routes_in = list(sc.get("routes") or [])
        used: list[str] = []
        exposed_by: dict[str, list[str]] = {}
        for rt in routes_in:
            for lid in list(rt.get("exposed_at") or []) + [n.get("location") for n in
                                                           rt.get("not_assessed") or []] + \
                    [rt.get("governing_location")]:
                if lid and str(lid) in loc_by_id and not is_detector(loc_by_id[str(lid)]):
                    lid = str(lid)
                    if lid not in used:
                        used.append(lid)
                    exposed_by.setdefault(lid, [])
                    if str(rt.get("id")) not in exposed_by[lid]:
                        exposed_by[lid].append(str(rt.get("id")))
        # keep the study's order of locations
        used = [lid for lid in loc_by_id if lid in used]
        unused = [lid for lid in loc_by_id if lid not in used and not is_detector(loc_by_id[lid])]

        routes = []
        for k, rt in enumerate(routes_in):
            route = _route_view(rt, sid, f"sc{i + 1}-rt{k + 1}", end_s, loc_titles, acceptance,
                                (pd_sc.get("routes") or {}).get(str(rt.get("id"))) or {}, figs)
            routes.append(route)
            summary_rows.append(route)
            conclusions.append(route)
            route_inputs.setdefault(route["id"], {"route": route, "scenarios": []})
            route_inputs[route["id"]]["scenarios"].append(sid)

        ensemble_view = _ensemble_view(sc, routes_in, figs)      # an ensemble of fire runs, or None
        matrix = [_matrix_row(loc_by_id[lid], loc_titles[lid], criterion_ids, exposed_by.get(lid, []))
                  for lid in used]
        omitted = [loc_titles[lid] for lid in unused] if omit_unused else []
        if omit_unused:
            unused = []
        matrix_unused = [_matrix_row(loc_by_id[lid], loc_titles[lid], criterion_ids, [])
                         for lid in unused]
        for lid in used + unused:
            _collect_not_supplied(na_groups, sid, lid, loc_by_id[lid], loc_titles[lid],
                                  exposed_by.get(lid, []))
        loc_figures = []
        for lid in used:
            fig = _location_figure(figs, sid, loc_by_id[lid], loc_titles[lid], end_s,
                                   pd_sc.get("t_s"), (pd_sc.get("locations") or {}).get(lid) or {})
            if fig:
                loc_figures.append(fig)
        hrr_view = _hrr_view(sc, pd_sc.get("hrr"), end_s, figs)
        scenarios.append({
            "hrr": hrr_view,
            "anchor": f"sc{i + 1}", "id": sid, "name": _named(sc), "title": sc.get("title"),
            "end_s": end_s, "histories": sc.get("histories"), "ignition_s": sc.get("ignition_s"),
            "members": [{"member": m.get("member"), "histories": m.get("histories"),
                         "probability": m.get("probability")} for m in sc.get("ensemble") or []],
            "design_fire": [(DESIGN_FIRE_LABELS.get(k, str(k)), _given(v))
                            for k, v in _ordered_design_fire(sc.get("design_fire"))],
            "routes": routes, "matrix": matrix, "matrix_unused": matrix_unused,
            "omitted_locations": omitted,
            "location_figures": loc_figures, "shared_elements": _shared_rows(sc),
            "ensemble": ensemble_view,
        })

    credibility = _credibility(scenarios_in, plotdata, figs)
    not_supplied = _not_supplied_rows(na_groups)
    verdicts = [_verdict_word(r["verdict"]) for r in summary_rows]
    corrected = isinstance(uncertainty, Mapping)

    ctx = {
        "title": title,
        "study": study,
        "version": results.get("version"),
        "generated": generated or results.get("generated"),
        "seed": results.get("seed"),
        "samples": results.get("samples"),
        "page_size": size,
        "acceptance": acceptance,
        "acceptance_method": acceptance_in.get("interval_method") or acceptance_in.get("ci_method"),
        "corrected": corrected,
        "raw_only": raw_only,
        "criteria": {"name": criteria.get("name"), "description": criteria.get("description"),
                     "sources": list(criteria.get("sources") or []),
                     "rows": _criteria_rows(applied),
                     "not_applicable": [{"label": _label(str(cid)), "reason": str(why)} for cid, why in
                                        (criteria.get("not_applicable") or {}).items()]
                     if isinstance(criteria.get("not_applicable"), Mapping) else [],
                     "signs": criteria.get("visibility_signs")
                     if isinstance(criteria.get("visibility_signs"), Mapping) else None},
        "criterion_ids": criterion_ids,
        "criterion_heads": [CRITERION_SHORT.get(c, c) for c in criterion_ids],
        "uncertainty": _uncertainty_view(uncertainty) if corrected else None,
        "uncertainty_reference": UNCERTAINTY_METHOD_REFERENCE,
        "egress": _egress_view(results.get("egress_method") or {}),
        "route_inputs": list(route_inputs.values()),
        "assumptions": [_sentence(a) for a in results.get("assumptions") or []],
        "warnings": [_sentence(w) for w in results.get("warnings") or []],
        "limitations": list(STANDING_LIMITATIONS),
        "cautions": list(CAUTIONS),
        "scenarios": scenarios,
        "summary_rows": summary_rows,
        "conclusions": [r for r in conclusions if r["verdict"] != "pass"],
        "clear_passes": [r for r in conclusions if r["verdict"] == "pass" and not r["not_assessed"]],
        "partial_passes": [r for r in conclusions if r["verdict"] == "pass" and r["not_assessed"]],
        "basis": acceptance_in.get("basis") or "route-aset",
        "occupant_warnings": [r for r in summary_rows if r.get("occupant_warning")],
        "any_occupant_verdict": any(r.get("occupant") for r in summary_rows),
        "n_fail": verdicts.count("fail"),
        "n_pass": verdicts.count("pass"),
        "n_indeterminate": verdicts.count("indeterminate"),
        "n_other": sum(1 for v in verdicts if v not in ("pass", "fail", "indeterminate")),
        "not_supplied": not_supplied,
        # distinct (scenario, location, criterion): a location several routes pass counts once
        "n_not_assessed_on_routes": len({(r["scenario"], n["location"], n["criterion"]) for r in summary_rows
                                         for n in r["not_assessed"]}),
        "detectors": sorted(detectors.values()),
        "credibility": credibility,
        "inputs": _inputs_view(results.get("inputs") or []),
        "column_maps": _column_maps(results.get("inputs") or []),
        "figures": figs.items,
        "n_figures": len(figs.items),
        "design": design,
    }
    ctx.update(_submittal_view(results, scenarios, generated))
    ctx.update(_plausibility_view(results))
    return ctx


# ------------------------------------------------------------ ensembles of fire runs

def _ensemble_view(sc: Mapping[str, Any], routes_in: Sequence[Mapping[str, Any]], figs: "_Figures"
                   ) -> dict[str, Any] | None:
    """The members of an ensemble scenario (table rows) and the margin-by-member figure, or None."""
    members = list(sc.get("ensemble") or [])
    if not members:
        return None
    rows = []
    for m in members:
        p_by_route = [(rt.get("id"), next((b.get("p_fail") for b in rt.get("by_member") or []
                                            if b.get("member") == m.get("member")), None)) for rt in routes_in]
        rows.append({"member": m.get("member"), "histories": m.get("histories"),
                     "parameters": ", ".join(f"{k} = {v}" for k, v in (m.get("parameters") or {}).items()),
                     "probability": m.get("probability"), "share": m.get("share_of_draws"),
                     "end_s": m.get("end_s"), "p_fail": p_by_route})
    fig = None
    routes = [{"id": rt.get("id"), "by_member": list(rt.get("by_member") or [])}
              for rt in routes_in if rt.get("by_member")]
    if routes:
        fig = figs.add("ensemble_figure",
                       f"Scenario {sc.get('id')}: margin (ASET - RSET) by ensemble member, p50 with the p05-p95 range "
                       "over the member's draws, against the member's parameters. Below the dashed line the "
                       "member's median draw fails. Where no limit is reached within the member's data the margin "
                       "is only bounded below: an open marker with a caret up is that bound (the end of the data "
                       "standing for ASET; dotted bar: its p05-p95).",
                       members=[{"member": m.get("member"), "parameters": dict(m.get("parameters") or {}),
                                 "share_of_draws": m.get("share_of_draws")} for m in members],
                       routes=routes, uid=f"ens-{sc.get('id')}")
    return {"rows": rows, "route_ids": [rt.get("id") for rt in routes_in], "figure": fig}


# ------------------------------------------------------------ weighted design fires

def _design_view(design: Any, figs: "_Figures") -> dict[str, Any] | None:
    """The design-level table and the contributions figure (results.json ``design``), or None."""
    if not isinstance(design, Mapping) or not design.get("routes"):
        return None
    weights = dict(design.get("weights") or {})
    routes = list(design["routes"])
    rows = [{"id": rt.get("id"), "p_fail": rt.get("p_fail"), "p_fail_ci95": rt.get("p_fail_ci95"),
             "p_fail_bounds": rt.get("p_fail_bounds"), "verdict": rt.get("verdict"),
             "reason": rt.get("verdict_reason"), "note": rt.get("note"),
             "contributions": [(sid, (rt.get("contributions") or {}).get(sid)) for sid in weights]}
            for rt in routes]
    fig = figs.add("design_contributions_figure",
                   "Design-level probability of failure per route: each design fire's contribution (its weight "
                   "times its p_fail, undecided draws counted as failures), stacked; the whisker is the 95 % "
                   "interval on the total and the dashed line the acceptance limit.",
                   routes=[{"id": rt.get("id"), "p_fail_ci95": rt.get("p_fail_ci95"),
                            "contributions": dict(rt.get("contributions") or {})} for rt in routes],
                   scenarios=list(weights), max_p_fail=design.get("max_p_fail"), uid="design")
    return {"weights": list(weights.items()), "source": design.get("weights_source") or "",
            "max_p_fail": design.get("max_p_fail"), "method": design.get("interval_method"),
            "rows": rows, "figure": fig}


# ------------------------------------------------- basis of design, sign-off, heights, HRR

#: Printed names of the study's `basis:` items, in print order (each printed "not stated"
#: when absent, never left out).
STUDY_BASIS_LABELS: dict[str, str] = {
    "building": "Building", "occupant_load": "Occupant load (how derived, source)",
    "fire_model": "Fire model", "premovement_source": "Source of pre-movement and alarm times",
    "acceptance_source": "Source of the acceptance limit",
}
FIRE_MODEL_LABELS: dict[str, str] = {"name": "name", "version": "version", "grid": "grid"}
NOT_STATED = "not stated"


def _plausibility_view(results: Mapping[str, Any]) -> dict[str, Any]:
    """The plausibility screen's findings (results.json ``plausibility``) as the report shows them.

    ``plausibility_bearing``: findings not acknowledged at a location some route of the
    scenario passes (``exposed_at`` or ``start_at``), or about the whole scenario, each with the
    routes concerned, for the summary (they bear on a verdict); ``plausibility_acknowledged``:
    findings the study acknowledged (``accept_warnings``), printed with the inputs so that a
    reader sees what was accepted.
    """
    found = [f for f in results.get("plausibility") or [] if isinstance(f, Mapping)]
    routes_at: dict[tuple, list[str]] = {}
    for sc in results.get("scenarios") or []:
        for rt in sc.get("routes") or []:
            places = list(rt.get("exposed_at") or [])
            start = (rt.get("inputs") or {}).get("start_at")
            if start and start != "-":
                places.append(start)
            for loc in places:
                routes_at.setdefault((sc.get("id"), loc), [])
                if rt.get("id") not in routes_at[(sc.get("id"), loc)]:
                    routes_at[(sc.get("id"), loc)].append(rt.get("id"))
            routes_at.setdefault((sc.get("id"), None), []).append(rt.get("id"))
    bearing = []
    for f in found:
        if f.get("acknowledged"):
            continue
        routes = routes_at.get((f.get("scenario"), f.get("location")), [])
        if routes:
            bearing.append({**f, "routes": routes})
    return {"plausibility_bearing": bearing,
            "plausibility_acknowledged": [f for f in found if f.get("acknowledged")]}


def _submittal_view(results: Mapping[str, Any], scenarios: list, generated: Any) -> dict[str, Any]:
    """Basis of design and sign-off as given (absent items "not stated"), the locations'
    heights against the criteria set's stated height, and the range-warning tables."""
    study = results.get("study") or {}
    basis = study.get("basis") if isinstance(study.get("basis"), Mapping) else {}
    rows = []
    for key, label in STUDY_BASIS_LABELS.items():
        v = basis.get(key)
        if key == "fire_model":
            fm = v if isinstance(v, Mapping) else {}
            parts = [f"{FIRE_MODEL_LABELS[k]}: {fm.get(k) or NOT_STATED}" for k in FIRE_MODEL_LABELS]
            rows.append({"label": label, "value": "; ".join(parts), "stated": bool(fm)})
        else:
            rows.append({"label": label, "value": str(v) if v not in (None, "") else NOT_STATED,
                         "stated": v not in (None, "")})
    so = study.get("sign_off") if isinstance(study.get("sign_off"), Mapping) else None
    sign_off = None
    if so:
        sign_off = {k: so.get(k) or NOT_STATED for k in ("engineer", "licence", "organisation")}
        sign_off["date"] = so.get("date") or (str(generated)[:10] if generated else NOT_STATED)
        sign_off["date_given"] = bool(so.get("date"))
    crit = results.get("criteria") or {}
    stated_h = crit.get("height_m")
    heights = {"stated_m": stated_h, "stated_text": crit.get("height_text") or "", "differs": [],
               "missing": 0}
    missing: set[str] = set()       # location ids, each counted once over the scenarios
    for sc in scenarios:
        for row in list(sc.get("matrix") or []) + list(sc.get("matrix_unused") or []):
            h = row.get("height_m")
            if h is None:
                missing.add(row["id"])
                row["height_note"] = False
            else:
                # a difference of more than 0.25 m from the stated height is noted (project choice)
                row["height_note"] = stated_h is not None and abs(float(h) - float(stated_h)) > 0.25
                if row["height_note"] and row["id"] not in heights["differs"]:
                    heights["differs"].append(row["id"])
    heights["missing"] = len(missing)
    scenario_warnings = {w for sc in results.get("scenarios") or [] for w in sc.get("warnings") or []}
    general = [_sentence(w) for w in results.get("warnings") or [] if w not in scenario_warnings]
    return {"basis_rows": rows, "sign_off": sign_off, "heights": heights,
            "range_tables": _range_tables(results), "general_warnings": general}


def _hrr_view(sc: Mapping[str, Any], pd_hrr: Any, end_s: Any, figs: "_Figures") -> dict[str, Any] | None:
    """The scenario's design-fire heat-release rate: its growth numbers and one figure."""
    g = sc.get("hrr") if isinstance(sc.get("hrr"), Mapping) else None
    if g is None:
        return None
    sid = str(sc.get("id"))
    words = _growth_words(g)
    fig = None
    if isinstance(pd_hrr, Mapping) and pd_hrr.get("t_s") is not None:
        fig = figs.add("hrr_figure", f"Design fire of scenario {sid}: heat-release rate as given "
                       f"({'column ' + str(g.get('column')) + ' of the histories' if g.get('source') == 'histories' else str(g.get('source')) + ', column ' + str(g.get('column'))}); {words}.",
                       t_s=pd_hrr["t_s"], q_kw=pd_hrr["q_kw"], growth=dict(g), end_s=end_s, uid=f"fig-hrr-{sid}")
    return {"figure": fig, "words": words, **g}


def _growth_words(g: Mapping[str, Any]) -> str:
    """Peak and fitted t-squared growth of a heat-release-rate curve, in words."""
    peak = g.get("peak_kw")
    text = (f"peak {fmt_num(peak / 1000.0) + ' MW' if peak and peak >= 2000 else fmt_num(peak) + ' kW'} "
            f"first at {fmt_time(g.get('peak_s'))}")
    if g.get("alpha_kw_s2"):
        text += (f"; fitted t-squared growth α = {g['alpha_kw_s2']:.4g} kW/s² up to "
                 f"{fmt_time(g.get('growth_end_s'))} (1055 kW at {fmt_num(g.get('t_g_s'))} s), nearest the "
                 f"{g.get('nearest_class')} class of NFPA 72 Annex B ({fmt_num(g.get('class_ratio'))} × its α)")
    return text


def _range_tables(results: Mapping[str, Any]) -> dict[str, Any]:
    """Validated-range excursions: the appendix table (one row per quantity and location, the
    largest excursion) and the summary's list (those that bear on a route's verdict)."""
    rows: dict[tuple, dict[str, Any]] = {}
    bearing = []
    for sc in results.get("scenarios") or []:
        for w in sc.get("range_warnings") or []:
            if not isinstance(w, Mapping):
                continue
            key = (str(w.get("quantity")), str(w.get("location")))
            size = float(w.get("excursion_rel") or 0.0)
            row = rows.get(key)
            if row is None or size > row["excursion_rel"]:
                rows[key] = {**w, "scenario": sc.get("id"), "excursion_rel": size,
                             "scenarios": (row or {}).get("scenarios", []), "criteria": (row or {}).get("criteria", [])}
            r = rows[key]
            if sc.get("id") not in r["scenarios"]:
                r["scenarios"].append(sc.get("id"))
            if w.get("criterion") not in r["criteria"]:
                r["criteria"].append(w.get("criterion"))
            if w.get("bears_on_verdict"):
                bearing.append({**w, "scenario": sc.get("id")})
    table = sorted(rows.values(), key=lambda r: (-r["excursion_rel"], r["quantity"], r["location"]))
    return {"rows": table, "bearing": bearing}


def _ordered_design_fire(df: Any) -> list[tuple[str, Any]]:
    if not isinstance(df, Mapping):
        return []
    keys = [k for k in DESIGN_FIRE_LABELS if k in df] + [k for k in df if k not in DESIGN_FIRE_LABELS]
    return [(k, df[k]) for k in keys if df[k] not in (None, "", [], {})]


def _route_view(rt, sid, anchor, end_s, loc_titles, acceptance, samples, figs) -> dict[str, Any]:
    rid = str(rt.get("id", "?"))
    comps = rt.get("rset_components_s") or {}
    sens_all = sorted(rt.get("sensitivity") or [], key=lambda r: -abs(float(r.get("swing_s") or 0.0)))
    base_margin = next((r.get("base_margin_s") for r in sens_all if r.get("base_margin_s") is not None),
                       None)
    # Inputs that do not move the margin by a whole second are named in one line, not drawn.
    sens = [r for r in sens_all if abs(float(r.get("swing_s") or 0.0)) >= 0.5]
    no_effect = [str(r.get("input")) for r in sens_all if r not in sens]
    m05, m50 = route_margin(rt, "p05"), route_margin(rt, "p50")
    idx_all = [r for r in rt.get("sensitivity_indices") or [] if isinstance(r, Mapping)]
    idx_shown = plots.shown_indices(idx_all)
    idx_method = rt.get("sensitivity_indices_method") if isinstance(rt.get("sensitivity_indices_method"),
                                                                    Mapping) else {}
    gl = rt.get("governing_location")
    figure = None
    if comps or rt.get("rset_s"):
        figure = figs.add(
            "route_figure",
            f"Route {_named(rt)} in scenario {sid}: RSET components at their medians (their sum "
            "need not equal the RSET median), the RSET and ASET p05\u2013p95 intervals"
            + ("; the margin per Monte Carlo draw" if samples.get("margin_samples") is not None else "")
            + ("; the margin with one input at a time at its low and high value" if sens else "")
            + (f"; the first-order and total Sobol\u2019 indices of the margin (its share of variance due to "
               f"each uncertain input alone, and with its interactions; ASET beyond the end taken as the end "
               f"time), from N\u00a0=\u00a0{idx_method.get('base_samples')} base samples "
               f"({idx_method.get('evaluations')} evaluations, apart from the verdict\u2019s draws), "
               f"Saltelli (2010) and Jansen (1999) estimators via SALib, lines their bootstrap 95\u00a0% "
               f"intervals; inputs whose total index is below {plots.INDEX_SHOWN_MIN:g} are not drawn"
               if idx_shown else "")
            + ".",
            components_s=comps, rset_s=_trio(rt.get("rset_s")), aset_s=_trio(rt.get("aset_s")),
            aset_raw_s=rt.get("aset_raw_s"), end_s=end_s,
            margin_samples_s=samples.get("margin_samples"), p_fail=rt.get("p_fail"),
            max_p_fail=acceptance, margin_p05_s=m05["value"] if not m05["at_least"] else None,
            sensitivity=sens[:10], base_margin_s=base_margin, uid=f"fig-{anchor}",
            verdict=rt.get("verdict"), p_fail_ci95=rt.get("p_fail_ci95"),
            panels=plots.route_panels(samples.get("margin_samples"), sens[:10], idx_all), indices=idx_all)
    along = rt.get("along_route") if isinstance(rt.get("along_route"), Mapping) else {}
    occupant = _occupant_view(rt, along)
    if occupant and samples.get("occupant_dose"):
        dose = samples["occupant_dose"]
        n_draws = max((int(d.get("draws") or 0) for d in dose.values()), default=0)
        occupant["figure"] = figs.add(
            "occupant_dose_figure",
            f"Route {_named(rt)} in scenario {sid}: each occupant's own dose against their place in the start "
            f"order, the median over {n_draws} draws with the p05\u2013p95 band, and the limit (a dose not "
            "determined by the end of the histories is not drawn).",
            doses=dose, labels={cid: _label(cid) for cid in dose}, uid=f"occ-{anchor}")
    mv = rt.get("movement") or {}
    ci = rt.get("p_fail_ci95")
    bounds = rt.get("p_fail_bounds") if isinstance(rt.get("p_fail_bounds"), Mapping) else None
    na = [{"location": loc_titles.get(str(n.get("location")), n.get("location")),
           "criterion": _label(str(n.get("criterion")))} for n in rt.get("not_assessed") or []]
    view = {
        "anchor": anchor, "id": rid, "name": _named(rt), "scenario": sid, "end_s": end_s,
        "title": str(rt["title"]) if rt.get("title") and str(rt["title"]) != rid else None,
        "occupants": rt.get("occupants"),
        "rset_s": _trio(rt.get("rset_s")), "aset_s": _trio(rt.get("aset_s")),
        "aset_raw_s": rt.get("aset_raw_s"), "margin_p05": m05, "margin_p50": m50,
        "p_fail": rt.get("p_fail"),
        "p_fail_ci95": list(ci) if isinstance(ci, (list, tuple)) and len(ci) == 2 else None,
        "p_fail_bounds": bounds, "samples_used": rt.get("samples_used"),
        "verdict": _verdict_word(rt.get("verdict")) or "n/a",
        "verdict_reason": _sentence(rt.get("verdict_reason")),
        "verdict_text": _sentence(rt.get("verdict_text")),
        "verdict_basis": _sentence(rt.get("verdict_basis")),
        "location_aware": _location_aware_view(rt.get("location_aware_verdict")),
        "governing_location": loc_titles.get(str(gl), gl) if gl else None,
        "governing_location_id": str(gl) if gl else None,
        "governing_criterion": _label(rt["governing_criterion"]) if rt.get("governing_criterion") else None,
        "not_assessed": na,
        "share_aset_beyond_end": rt.get("share_aset_beyond_end"),
        "share_not_detected": rt.get("share_not_detected"),
        "components": [{"label": COMPONENT_LABELS.get(c, c), **_trio(v)} for c, v in comps.items()],
        "movement": {k: mv.get(k) for k in ("travel_s", "flow_s", "controlling_element",
                                             "controlling_type", "capacity_p_s", "hand")} if mv else None,
        "movement_notes": [_sentence(n) for n in _grouped_movement_notes(mv.get("notes") or [])],
        "elements": _element_rows(rt.get("elements")),
        "inputs": [(str(k), _given(v)) for k, v in (rt.get("inputs") or {}).items()]
        if isinstance(rt.get("inputs"), Mapping) else [],
        "figure": figure,
        "sensitivity": sens,
        "no_effect": no_effect,
        "indices_fail": [r for r in rt.get("sensitivity_indices_fail") or []
                         if isinstance(r, Mapping) and float(r.get("total") or 0.0) >= plots.INDEX_SHOWN_MIN][:3],
        "sensitivity_bound": any(r.get("lower_bound") for r in sens),
        "base_margin_s": base_margin,
        "along_rows": [{"label": _label(cid), **_trio(a), "limit": a.get("limit"),
                        "exceeds_p": a.get("exceeds_p")}
                       for cid, a in (along.get("criteria") or {}).items()],
        "along_assumptions": [_sentence(a) for a in along.get("assumptions") or []],
        "occupant": occupant,
        "basis": str(rt.get("acceptance_basis") or "route-aset"),
        "aset_verdict": _verdict_word((rt.get("route_aset_verdict") or {}).get("verdict") or rt.get("verdict")) or "n/a",
    }
    view["occupant_warning"] = bool(occupant) and view["aset_verdict"] == "pass" and occupant["verdict"] == "fail"
    view["change"] = _what_would_change(view, acceptance)
    return view


def _occupant_view(rt: Mapping[str, Any], along: Mapping[str, Any]) -> dict[str, Any] | None:
    """The occupant-exposure verdict and, per criterion, the most exposed occupant (words)."""
    v = rt.get("occupant_verdict")
    if not isinstance(v, Mapping):
        return None
    rows = []
    groups = [(along.get("criteria") or {}, "dose"), (along.get("instantaneous") or {}, "instant")]
    for group, kind in groups:
        for cid, a in group.items():
            occ = a.get("occupants") if isinstance(a, Mapping) else None
            if not isinstance(occ, Mapping):
                continue
            me = occ.get("most_exposed") if isinstance(occ.get("most_exposed"), Mapping) else {}
            ci = occ.get("p_any_exceeds_ci95")
            rows.append({"label": _label(cid), "kind": kind, "max": _trio(occ.get("max")), "limit": a.get("limit"),
                         "p_any": occ.get("p_any_exceeds"),
                         "ci": list(ci) if isinstance(ci, (list, tuple)) and len(ci) == 2 else None,
                         "share_mean": (occ.get("share_exceeding") or {}).get("mean"),
                         "who": me.get("words")})
    ci = v.get("p_fail_ci95")
    return {"verdict": _verdict_word(v.get("verdict")) or "n/a", "p_fail": v.get("p_fail"),
            "ci": list(ci) if isinstance(ci, (list, tuple)) and len(ci) == 2 else None,
            "reason": _sentence(v.get("verdict_reason")), "rows": rows, "figure": None,
            "note": _sentence(along.get("occupants_note"))}


def _grouped_movement_notes(notes) -> list[str]:
    """Route movement notes with a note shared by several path elements (``path element N:
    text``) said once for all of them."""
    import re

    from ..egress.summary import grouped_notes

    pairs, other = [], []
    for n in notes:
        m = re.match(r"path element (\d+): (.*)$", str(n), flags=re.S)
        if m:
            pairs.append((int(m.group(1)), m.group(2)))
        else:
            other.append(str(n))
    return ["path " + g for g in grouped_notes(pairs)] + other


def _what_would_change(rt: Mapping[str, Any], acceptance: Any) -> str:
    """One sentence: what would change a failing or indeterminate verdict (from the numbers)."""
    v = rt["verdict"]
    if v == "pass":
        if rt["not_assessed"]:
            return ("The verdict covers only the criteria assessed; supply the missing series "
                    "to complete it.")
        return ""
    words = []
    m05 = rt["margin_p05"]
    if v == "fail" and m05["value"] is not None and not m05["at_least"] and m05["value"] < 0:
        words.append(f"To pass, the margin p05 must rise by at least "
                     f"{fmt_time(-float(m05['value']))}, by a later ASET or a shorter RSET")
    sens = [s for s in rt["sensitivity"] if float(s.get("swing_s") or 0.0) > 0]
    if sens and v in ("fail", "indeterminate"):
        s = sens[0]
        what_if = " (a what-if range on a fixed value, not a measured spread)" if s.get("kind") == "what-if" else ""
        words.append(f"the input with the largest effect is {s.get('input')} (margin "
                     f"{fmt_time(s.get('margin_low_s'), signed=True)} at {fmt_value(s.get('low'))}, "
                     f"{fmt_time(s.get('margin_high_s'), signed=True)} at {fmt_value(s.get('high'))}){what_if}")
    text = "; ".join(words)
    if v == "indeterminate" and not rt["verdict_reason"]:
        text = "The evidence does not settle the verdict" + (f"; {text}" if text else "")
    return _sentence(text[:1].upper() + text[1:]) if text else ""


def _element_rows(elements: Any) -> list[dict[str, Any]]:
    rows = []
    for j, e in enumerate(elements or []):
        if not isinstance(e, Mapping):
            continue
        shared = e.get("shared_with") or []
        rows.append({"n": j + 1, "type": e.get("type"), "id": e.get("id") or e.get("element"),
                     "effective_width_m": e.get("effective_width_m"),
                     "capacity_p_s": e.get("capacity_p_s"), "speed_m_s": e.get("speed_m_s"),
                     "clearing_s": e.get("clearing_s"), "queue_s": e.get("queue_s"),
                     "shared_with": ", ".join(map(str, shared)) if isinstance(shared, (list, tuple))
                     else str(shared)})
    return rows


#: Unit suffixes of results keys -> printed unit.
_KEY_UNITS = (("_p_s", "persons/s"), ("_m_s", "m/s"), ("_s", "s"), ("_m", "m"))


def _key_words(key: str) -> str:
    """A results key in words with its unit: ``combined_flow_p_s`` -> ``combined flow [persons/s]``."""
    for suffix, unit in _KEY_UNITS:
        if key.endswith(suffix):
            return f"{key[: -len(suffix)].replace('_', ' ')} [{unit}]"
    return key.replace("_", " ")


def _shared_rows(sc: Mapping[str, Any]) -> list[dict[str, Any]]:
    rows = []
    for e in sc.get("shared_elements") or []:
        if not isinstance(e, Mapping):
            continue
        rows.append({"id": e.get("id") or e.get("element"),
                     "text": "; ".join(f"{_key_words(k)}: {_given(v)}" for k, v in e.items()
                                       if k not in ("id", "element"))})
    return rows


def _matrix_row(loc, name, criterion_ids, routes) -> dict[str, Any]:
    """One location: per criterion the raw and corrected-median times to limit."""
    cells = []
    crit = loc.get("criteria") or {}
    for cid in criterion_ids:
        c = crit.get(cid)
        if c is None:
            cells.append({"kind": "absent"})
        elif str(c.get("status")) == "not assessed":
            cells.append({"kind": "na"})
        else:
            cells.append({"kind": "ok", "raw_s": c.get("raw_s"),
                          "p50": (c.get("corrected_s") or {}).get("p50"),
                          "partial": bool(c.get("missing_series")),
                          "outside": bool(c.get("outside_validated_range"))})
    return {"id": str(loc.get("id")), "name": name, "cells": cells, "routes": routes,
            "height_m": loc.get("height_m"),
            "aset_raw_s": loc.get("aset_raw_s"), "aset_s": _trio(loc.get("aset_s")),
            "governing": _label(loc["governing"]) if loc.get("governing") else None}


def _collect_not_supplied(groups, sid, lid, loc, name, routes) -> None:
    """Group what locations lack (criteria not assessed, doses without a gas): one row per
    distinct pattern, with every location and scenario that shows it."""
    crit = loc.get("criteria") or {}
    na = [(cid, tuple(c.get("missing_series") or [])) for cid, c in crit.items()
          if str(c.get("status")) == "not assessed"]
    partial = [(cid, tuple(c.get("missing_series") or [])) for cid, c in crit.items()
               if str(c.get("status")) != "not assessed" and c.get("missing_series")]
    if not na and not partial:
        return
    row = groups.setdefault((tuple(na), tuple(partial)), {
        "locations": [], "names": {},
        "not_assessed": [f"{_label(cid)} (needs {', '.join(ms) or 'its series'})" for cid, ms in na],
        "partial": [f"{_label(cid)} without {', '.join(ms)}" for cid, ms in partial],
        "scenarios": [], "routes": []})
    if lid not in row["locations"]:
        row["locations"].append(lid)
        row["names"][lid] = name
    for key, values in (("scenarios", [sid]), ("routes", routes)):
        for v in values:
            if v not in row[key]:
                row[key].append(v)


def _not_supplied_rows(groups) -> list[dict[str, Any]]:
    rows = []
    for row in groups.values():
        locs = row["locations"]
        row["location"] = row["names"][locs[0]] if len(locs) == 1 else \
            f"{len(locs)} locations: " + ", ".join(locs)
        rows.append(row)
    return sorted(rows, key=lambda r: (not r["routes"], -len(r["locations"])))


def _location_figure(figs, sid, loc, name, end_s, t_s, specs) -> dict[str, Any] | None:
    """The location's quantities whose limit is reached (raw or in some draw), or none."""
    if t_s is None:
        return None
    crit = loc.get("criteria") or {}
    show = {}
    for cid, spec in specs.items():
        c = crit.get(cid) or {}
        if spec.get("raw") is None or str(c.get("status")) == "not assessed":
            continue
        if c.get("raw_s") is not None or (c.get("p_reached") or 0) > 0:
            show[cid] = dict(spec, label=spec.get("label") or _label(cid))
    if not show:
        return None
    band = any(s.get("band") is not None for s in show.values())
    quiet = [_label(cid) for cid, c in crit.items()
             if cid not in show and str(c.get("status")) != "not assessed"]
    caption = (f"{name}, scenario {sid}: raw prediction"
               + (" with the corrected p05\u2013p95 band" if band else "") + " and the limit of "
               + "; ".join(f"{_lower(spec['label'])} ({_reached_words(crit.get(cid) or {}, band)})"
                           for cid, spec in show.items())
               + "."
               + (f" Not drawn (limit reached neither raw nor in any draw by the end): "
                  f"{'; '.join(_lower(q) for q in quiet)}." if quiet else ""))
    return figs.add("location_figure", caption, t_s=t_s, specs=show,
                    raw_times_s={cid: crit.get(cid, {}).get("raw_s") for cid in show},
                    end_s=end_s, uid=f"fig-{sid}-{loc.get('id')}")


def _lower(label: str) -> str:
    """A criterion's label inside a sentence: lower case, except an abbreviation (FED, FEC)."""
    return label if label[:3].isupper() else label[:1].lower() + label[1:]


def _reached_words(c: Mapping[str, Any], band: bool) -> str:
    """What the figure shows of one criterion's limit: reached by the raw curve (when), by
    the band, or only in a few draws (then neither curve nor band reaches it)."""
    raw, p = c.get("raw_s"), float(c.get("p_reached") or 0.0)
    share = f"{100 * p:.0f}\u00a0%" if p >= 0.01 else "under 1\u00a0%"
    if raw is not None:
        return f"the raw curve reaches it at {fmt_time(raw)}; reached in {share} of the draws"
    if band and p >= 0.05:
        return f"the raw curve does not reach it; the band does (reached in {share} of the draws)"
    return (f"reached only in {share} of the draws: neither the raw curve nor the "
            + ("band" if band else "drawn curve") + " reaches it")


def _credibility(scenarios_in, plotdata, figs) -> list[dict[str, Any]]:
    out = []
    for i, sc in enumerate(scenarios_in):
        cred = sc.get("credibility")
        if not isinstance(cred, Mapping):
            continue
        sid = str(sc.get("id"))
        locs = {str(loc.get("id")): loc for loc in sc.get("locations") or []}
        skip = {lid for lid, loc in locs.items() if is_detector(loc)}
        titles = {lid: _named(loc) for lid, loc in locs.items()}
        resolutions = list(cred.get("resolutions") or [])
        rows, not_reached = [], 0
        for cl in cred.get("locations") or []:
            lid = str(cl.get("id"))
            if lid in skip:
                continue
            entries = list((cl.get("criteria") or {}).items())
            if isinstance(cl.get("aset"), Mapping):
                entries.append(("aset", cl["aset"]))
            for cid, c in entries:
                values = _by_resolution(resolutions, c.get("cells_m"), c.get("values_s"))
                reached = any(v is not None for v in values)
                if not reached:
                    not_reached += 1
                    continue
                rows.append({
                    "location": lid, "criterion": "ASET" if cid == "aset" else _label(cid),
                    "values_s": values, "relative_change": c.get("relative_change"),
                    "flagged": bool(c.get("flagged")), "convergence": c.get("convergence"),
                    "order": c.get("order"), "extrapolated_s": c.get("extrapolated_s"),
                    "gci": c.get("gci"), "note": _sentence(c.get("note")),
                    "flag_reason": c.get("flag_reason")})
        pd_cred = {lid: v for lid, v in ((plotdata.get(sid) or {}).get("credibility") or {}).items()
                   if lid not in skip}
        figures = []
        panels = [lid for lid, crits in pd_cred.items()
                  if any(any(v is not None for v in d.get("values_s", [])) for d in crits.values())]
        for start in range(0, len(panels), 9):
            chunk = {lid: pd_cred[lid] for lid in panels[start:start + 9]}
            figures.append(figs.add(
                "credibility_figure",
                f"Scenario {sid}: time to limit against cell size"
                + (f" (locations {start + 1}\u2013{start + len(chunk)} of {len(panels)})"
                   if len(panels) > 9 else "")
                + ", with the value extrapolated to zero cell size where one was estimated; "
                "criteria reached on no grid are not drawn.",
                cred=chunk, labels={cid: _label(cid) for cid in CRITERION_LABELS},
                location_titles={lid: titles.get(lid, lid) for lid in chunk},
                uid=f"fig-cred-{sid}-{start}"))
        out.append({"scenario": sid, "name": _named(sc), "end_s": sc.get("end_s"),
                    "resolutions": resolutions, "threshold": cred.get("threshold"),
                    "max_gci": cred.get("max_gci"),
                    "method": cred.get("method"), "rows": rows, "not_reached": not_reached,
                    "n_flagged": sum(1 for r in rows if r["flagged"]),
                    "figures": figures, "anchor": f"cred{i + 1}"})
    return out


def _by_resolution(resolutions, cells, values) -> list[Any]:
    """Values in the order of the table's columns (the study's resolutions).

    The grid study returns its values sorted fine to coarse with their cell sizes
    (``cells_m``); the columns follow the order the study lists the resolutions in.
    """
    values = list(values or [])
    if not cells or len(cells) != len(values):
        return values + [None] * (len(resolutions) - len(values))
    by_cell = {round(float(h), 9): v for h, v in zip(cells, values)}
    return [by_cell.get(round(float(h), 9)) for h in resolutions]


def _criteria_rows(applied: Mapping[str, Any]) -> list[dict[str, Any]]:
    rows = []
    for cid, c in applied.items():
        c = c if isinstance(c, Mapping) else {"limit": c}
        extra = [(k, v) for k, v in c.items()
                 if k not in ("limit", "unit", "source", "sources", "method", "limit_text")]
        src = c.get("source") or c.get("sources")
        rows.append({"id": cid, "label": _label(cid), "limit": c.get("limit"), "unit": c.get("unit"),
                     "method": c.get("method"), "extra": extra,
                     "source": src if isinstance(src, str) or not src else "; ".join(map(str, src))})
    return rows


def _uncertainty_view(uncertainty: Mapping[str, Any]) -> dict[str, Any]:
    qrows = []
    for q, s in (uncertainty.get("quantities") or {}).items():
        rng = s.get("range") if isinstance(s, Mapping) else None
        if isinstance(rng, Mapping):
            rng = (f"{fmt_num(rng.get('min'))}\u2013{fmt_num(rng.get('max'))}"
                   + (f" {fmt_unit(rng.get('unit'))}" if rng.get("unit") else ""))
        qrows.append({"id": q, "label": QUANTITY_LABELS.get(q, q), "bias": s.get("bias"),
                      "sigma_model": s.get("sigma_model"), "sigma_exp": s.get("sigma_exp"),
                      "basis": s.get("basis"),
                      "applied": BASIS_LABELS.get(s.get("basis"), s.get("basis") or "as given"),
                      "range": rng or None})
    return {"source": uncertainty.get("source"),
            "distribution": uncertainty.get("distribution") or "lognormal",
            "path": uncertainty.get("path"), "sha256": uncertainty.get("sha256"),
            "quantities": qrows}


def _egress_view(egress: Mapping[str, Any]) -> dict[str, Any]:
    name = str(egress.get("name") or "").strip().rstrip(".")
    return {"name": name[:1].upper() + name[1:] if name else "",
            "text": _sentence(egress.get("text")),
            "constants": list(egress.get("constants") or [])}


def _inputs_view(inputs) -> list[dict[str, Any]]:
    return [{"path": f.get("path"), "sha256": f.get("sha256"), "role": f.get("role"),
             "rows": f.get("rows"), "t_start_s": f.get("t_start_s"), "t_end_s": f.get("t_end_s")}
            for f in inputs]


def _column_maps(inputs) -> list[dict[str, Any]]:
    """The histories' column maps, one paragraph per distinct map (grid variants and
    scenarios that share a header are listed together), grouped by location."""
    maps: dict[str, list[str]] = {}
    for f in inputs:
        cols = [c for c in f.get("columns") or [] if c.get("series") not in (None, "time")]
        if not cols:
            continue
        by_loc: dict[str, list[str]] = {}
        for c in cols:
            unit = fmt_unit(c.get("unit_as_read"))
            # a header written `name [unit]` carries its unit: print the unit once, as read
            name = str(c.get("column"))
            if name.endswith("]") and " [" in name:
                name = name[:name.rindex(" [")]
            by_loc.setdefault(str(c.get("location") or "\u2014"), []).append(
                f"{c.get('series')} {name}" + (f" [{unit}]" if unit else ""))
        text = "; ".join(f"{loc}: {', '.join(items)}" for loc, items in by_loc.items())
        maps.setdefault(text, []).append(str(f.get("path")))
    return [{"files": files, "text": text} for text, files in maps.items()]


# ----------------------------------------------------------------------------- figures

def _draw(job: tuple[str, dict[str, Any]]) -> bytes:
    fn, kwargs = job
    return getattr(plots, fn)(**kwargs)


def _pool_size(n_figures: int) -> int:
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    if n_figures < POOL_MIN_FIGURES or cores < 2 or "fork" not in mp.get_all_start_methods():
        return 1
    return min(cores, 4)


def draw_figures(figures: list[dict[str, Any]], progress: Any = None) -> None:
    """Draw every figure (PNG) and set its ``src`` data URI; in a process pool when it pays.

    The figures are independent, so the order they are drawn in does not change a byte.
    """
    parts = [part for f in figures for part in f["parts"]]
    if progress is not None:
        progress.stage("figures", total=len(parts))
    jobs = [part["job"] for part in parts]
    workers = _pool_size(len(jobs))
    if workers > 1:
        from concurrent.futures import ProcessPoolExecutor, as_completed

        plots.preload()      # imported once here, not once per forked process
        with ProcessPoolExecutor(workers, mp_context=mp.get_context("fork")) as pool:
            futures = {pool.submit(_draw, job): k for k, job in enumerate(jobs)}
            images: list[bytes | None] = [None] * len(jobs)
            for fut in as_completed(futures):
                images[futures[fut]] = fut.result()
                if progress is not None:
                    progress.step()
    else:
        images = []
        for job in jobs:
            images.append(_draw(job))
            if progress is not None:
                progress.step()
    for part, png in zip(parts, images):
        part["png"] = png
        part["src"] = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
    for fig in figures:
        fig["png"], fig["src"] = fig["parts"][0]["png"], fig["parts"][0]["src"]


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
                paper: str = "A4", generated: str | None = None) -> str:
    """The report as one self-contained HTML string (inline CSS and PNG figures)."""
    return _render(results, plotdata, paper, generated)[0]


def _render(results, plotdata, paper, generated=None, progress=None):
    """The HTML and the figures in it (number, caption, png, src)."""
    from markupsafe import Markup

    ctx = build_context(results, plotdata, paper, generated)
    draw_figures(ctx["figures"], progress)
    css = (templates_dir() / "report.css").read_text(encoding="utf-8")
    ctx["css"] = Markup(css)  # the stylesheet is ours, not user text
    for k, fig in enumerate(ctx["figures"]):
        fig["number"] = _FIG_TOKEN.format(k)
    html = _environment().get_template("report.html.j2").render(**ctx)
    return _number_in_reading_order(html, ctx["figures"]), ctx["figures"]


#: Stand-in for a figure's number while the template is rendered (see _number_in_reading_order).
_FIG_TOKEN = "@@fig{:05d}@@"


def _number_in_reading_order(html: str, figures: list[dict[str, Any]]) -> str:
    """Number the figures in the order they first appear in ``html`` (reading order), so a
    section's place in the template, not the order figures were added, decides their
    numbers; figures the page does not show are numbered after the rest."""
    import re

    order: list[int] = []
    for m in re.finditer(r"@@fig(\d{5})@@", html):
        k = int(m.group(1))
        if k not in order:
            order.append(k)
    order += [k for k in range(len(figures)) if k not in order]
    numbers = {k: n + 1 for n, k in enumerate(order)}
    for k, fig in enumerate(figures):
        fig["number"] = numbers[k]
    return re.sub(r"@@fig(\d{5})@@", lambda m: str(numbers[int(m.group(1))]), html)


def _fetcher():
    """WeasyPrint URL fetcher that loads inline ``data:`` URIs only: the report is
    self-contained, so any other fetch is refused and stops the rendering."""
    try:
        from weasyprint.urls import URLFetcher
    except ImportError:          # WeasyPrint before 68: a plain function is the fetcher
        import weasyprint

        def fetch(url: str, *args: Any, **kwargs: Any) -> dict:
            if url.startswith("data:"):
                return weasyprint.default_url_fetcher(url, *args, **kwargs)
            raise ValueError(f"report.html must be self-contained; refused to fetch {url!r}")
        return fetch
    return URLFetcher(allowed_protocols={"data"}, fail_on_errors=True)


def write_pdf(html: str, path: Path, progress: Any = None) -> Path:
    """Render ``html`` to a PDF at ``path`` with WeasyPrint (no external fetches)."""
    import logging

    import weasyprint

    logger = logging.getLogger("weasyprint")
    level = logger.level
    logger.setLevel(logging.ERROR)
    try:
        if progress is not None:
            progress.stage("PDF layout")
        try:
            document = weasyprint.HTML(string=html, url_fetcher=_fetcher(),
                                       base_url=str(path.parent)).render()
        except BaseException as exc:
            # WeasyPrint's fatal fetch error is a BaseException; a refused fetch is our bug
            # (the report is self-contained), so say so as an ordinary error.
            if type(exc).__name__ != "FatalURLFetchingError":
                raise
            raise RuntimeError(f"report.html must be self-contained; {exc} "
                               f"({exc.__cause__})") from exc
        if progress is not None:
            progress.stage("PDF writing")
        # (full_fonts=True would save about a tenth of this step, but its PDF text cannot be
        # extracted or searched: measured on the demo, so the fonts stay subset)
        document.write_pdf(str(path))
    finally:
        logger.setLevel(level)
    return path


def render_report(results: dict, plotdata: dict, out_dir: Path, paper: str = "A4",
                  pdf: bool = True, progress: Any = None, generated: str | None = None
                  ) -> dict[str, Path]:
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
        Told of the stages: ``stage("figures", total=N)`` and ``step()`` per figure,
        ``stage("PDF layout")``, ``stage("PDF writing")``.
    generated : str, optional
        Date of the run as printed on the cover (results.json carries none).

    Returns
    -------
    dict of str to Path
        ``{"html": .../report.html}``, ``"plots": .../plots`` (one PNG file a figure,
        numbered as in the report; ``figure-NNN-a.png``, ``-b`` ... a panel of a figure
        drawn in parts) and, with ``pdf``, ``"pdf": .../report.pdf``.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    html, figures = _render(results, plotdata, paper, generated, progress)
    paths = {"html": out_dir / "report.html"}
    paths["html"].write_text(html, encoding="utf-8")
    if figures:
        plot_dir = out_dir / "plots"
        plot_dir.mkdir(exist_ok=True)
        for fig in figures:
            for part in fig["parts"]:
                name = f"figure-{int(fig['number']):03d}{part['suffix']}.png"
                (plot_dir / name).write_bytes(part["png"])
        paths["plots"] = plot_dir
    if pdf:
        paths["pdf"] = write_pdf(html, out_dir / "report.pdf", progress)
    return paths


__all__ = ["render_report", "render_html", "build_context", "draw_figures", "templates_dir",
           "page_size", "write_pdf", "route_margin", "CAUTIONS", "STANDING_LIMITATIONS",
           "CRITERION_LABELS"]
