"""The comparison page: ``comparison.json``, ``comparison.html`` and ``comparison.pdf``.

Renders the record built by :func:`egressmargin.compare.build_comparison` with the
``compare.html.j2`` template and the report's stylesheet, and writes the three files
into an output folder with :mod:`egressmargin.outputs`, as the run does: locked,
assembled in a staging folder beside it, and swapped into place only when everything is
written. The folder must be new, empty or an earlier egressmargin output other than a
run's (recognised by :data:`egressmargin.outputs.MANIFEST_NAME`); anything else is
refused untouched.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Mapping

from .. import outputs
from ..errors import InputError, Problem
from .format import MINUS, NBSP, fmt_prob, fmt_prob_ci, fmt_time, fmt_verdict
from .render import CRITERION_LABELS, _environment, page_size, templates_dir, write_pdf

#: Column heads of the route table, in the order of ``compare.ROUTE_VALUES``.
ROUTE_HEADS = {"aset_raw_s": "ASET raw", "aset_p50_s": "ASET p50", "rset_p50_s": "RSET p50",
               "margin_p05_s": "Margin p05", "margin_p50_s": "Margin p50", "p_fail": "p_fail",
               "verdict": "Verdict"}

#: Symbols doubling the highlight of a changed value (so it survives greyscale printing).
MARKS = {"later": "\u25b2", "larger": "\u25b2", "higher": "\u25b2", "earlier": "\u25bc", "smaller": "\u25bc",
         "lower": "\u25bc", "differs": "\u25c6", "missing": "?"}

#: Directions that make a design look worse (ASET earlier, RSET later, margin smaller, p_fail higher).
WORSE = {"aset_raw_s": "earlier", "aset_p50_s": "earlier", "rset_p50_s": "later", "margin_p05_s": "smaller",
         "margin_p50_s": "smaller", "p_fail": "higher"}

COMPARE_CAUTION = ("The comparison shows how the results of the listed runs differ; it does not say which "
                   "inputs are right. It supports, and does not replace, the judgment of a qualified fire "
                   "engineer; local codes and the approving authority govern.")


def _signed(delta: float) -> str:
    """A change of a probability in percentage points, signed, as the page writes probabilities
    in percent (a time's change is :func:`fmt_time` with ``signed``).

    >>> _signed(0.0123), _signed(-0.0005)
    ('+1.23\xa0pp', '−0.05\xa0pp')
    """
    return f"{'+' if delta > 0 else MINUS}{100 * abs(delta):.3g}{NBSP}pp"


def _show(key: str, value: Any, end_s: Any, extras: Mapping[str, Any]) -> str:
    if key == "p_fail":
        return fmt_prob(value)
    if key == "verdict":
        return fmt_verdict(value)
    if key == "governing":
        return "none reached" if value is None else CRITERION_LABELS.get(value, str(value))
    if key.startswith("margin") and value is None:
        at_least = (extras.get("margin_at_least_s") or {}).get(key[len("margin_"):-2])
        if isinstance(at_least, (int, float)):
            return f"\u2265{NBSP}{fmt_time(at_least)}"
        return f"ASET{NBSP}{fmt_time(None, end_s)}"
    return fmt_time(value, end_s, signed=key.startswith("margin"))


def _cell(key: str, value: Any, end_s: Any, change: Mapping[str, Any] | None, extras: Mapping[str, Any],
          baseline_value: Any = None) -> dict:
    cell = {"key": key, "text": _show(key, value, end_s, extras), "changed": False, "mark": "", "note": "",
            "worse": False, "raw": value}
    if change and change["changed"]:
        d, direction = change.get("delta"), change["direction"]
        cell.update(changed=True, mark=MARKS.get(direction, ""), worse=WORSE.get(key) == direction)
        if key == "verdict":
            cell["note"] = f"was {fmt_verdict(baseline_value)}"
        elif d is not None:
            cell["note"] = _signed(d) if key == "p_fail" else fmt_time(d, signed=True)
        else:
            cell["note"] = direction
    return cell


def _row(kind: str, first: bool, head: dict, label_cell: dict | None, cells: list[dict] | None = None,
         note: str | None = None, width: int = 0) -> dict:
    """One table row of the route or location table: every row spans every column.

    The row model is the only place the table's shape is decided: a row is the item's
    cell (its id on the item's first row, empty on the others), then either the run's
    label and one cell per value column, or a note spanning those columns. No cell spans
    rows, so a row can never lose a cell to a span from above.
    """
    row_cells = [{"kind": "item", "colspan": 1, **(head if first else {"text": "", "tag": None, "continued": True})}]
    if note is not None:
        row_cells.append({"kind": "note", "colspan": width, "text": note})
    else:
        row_cells.append({"kind": "label", "colspan": 1, "nothing_assessed": False, **(label_cell or {})})
        row_cells.extend({"kind": "value", "colspan": 1, **c} for c in cells or [])
    return {"kind": kind, "first": first, "cells": row_cells}


def _run_note(r: Mapping[str, Any]) -> str | None:
    """The words under a run's row: p_fail bounds, interval, samples and the verdict reason."""
    parts = []
    if r.get("bounds"):
        parts.append(f"p_fail bounds {fmt_prob(r['bounds'].get('low'))}\u2013{fmt_prob(r['bounds'].get('high'))}.")
    if r.get("ci95"):
        used = f" ({r['samples_used']} samples)" if r.get("samples_used") else ""
        parts.append(f"p_fail {fmt_prob_ci(r.get('p_fail'), r['ci95'])}{used}.")
    if r.get("reason"):
        parts.append(str(r["reason"]))
    return f"{r['label']}: " + " ".join(parts) if parts else None


def _route_rows(comparison: Mapping[str, Any], sc: Mapping[str, Any]) -> list[dict]:
    base = comparison["baseline"]
    order = sorted(sc["routes"], key=lambda r: (not r["verdict_changed"], not r["changed"]))
    out = []
    for rt in order:
        runs = []
        for label, values in rt["values"].items():
            extras = rt.get("extras", {}).get(label, {})
            change = rt["changes"].get(label, {})
            runs.append({"label": label, "extras": extras,
                         "cells": [_cell(k, values[k], sc["end_s"].get(label), change.get(k), extras,
                                         rt["values"][base][k]) for k in ROUTE_HEADS],
                         "bounds": extras.get("p_fail_bounds"), "ci95": extras.get("p_fail_ci95"),
                         "p_fail": values.get("p_fail"),
                         "samples_used": extras.get("samples_used"), "reason": extras.get("verdict_reason")})
        if not rt["changed"]:            # one row for all runs keeps the page short
            runs = [{**runs[0], "label": "all"}]
        tag = "verdict" if rt["verdict_changed"] else "changed" if rt["changed"] else None
        head = {"text": rt["id"], "tag": tag}
        rows = []
        for r in runs:
            nothing = r["extras"].get("criteria_assessed") is False
            rows.append(_row("run", not rows, head, {"text": r["label"], "nothing_assessed": nothing}, r["cells"]))
            note = _run_note(r)
            if note:
                rows.append(_row("note", False, head, None, note=note, width=1 + len(ROUTE_HEADS)))
        out.append({"id": rt["id"], "title": rt.get("title"), "changed": bool(rt["changed"]),
                    "verdict_changed": rt["verdict_changed"], "runs": runs, "rows": rows})
    return out


#: Column heads of the location table.
LOCATION_HEADS = {"aset_raw_s": "ASET raw", "aset_p50_s": "ASET p50", "governing": "Governing"}


def _location_rows(comparison: Mapping[str, Any], sc: Mapping[str, Any]) -> tuple[list[dict], int]:
    """Locations whose ASET or governing criterion changed (the others are only counted)."""
    base = comparison["baseline"]
    rows, same = [], 0
    for loc in sc["locations"]:
        if not loc["changed"]:
            same += 1
            continue
        table_rows = []
        for label, values in loc["values"].items():
            change = loc["changes"].get(label, {})
            cells = [_cell(k, values[k], sc["end_s"].get(label), change.get(k), {}, loc["values"][base][k])
                     for k in LOCATION_HEADS]
            table_rows.append(_row("run", not table_rows, {"text": loc["id"], "tag": None}, {"text": label}, cells))
        rows.append({"id": loc["id"], "title": loc.get("title"), "rows": table_rows})
    return rows, same


def _file_cell(entry: Mapping[str, Any] | None) -> dict | None:
    """An input file as shown: its name and the first 12 characters of its SHA-256."""
    if entry is None:
        return None
    path = str(entry.get("path") or "")
    return {"name": path.replace("\\", "/").rsplit("/", 1)[-1] or "n/a", "sha": str(entry.get("sha256") or "")[:12]}


def _ends(end_s: Mapping[str, Any]) -> str:
    """The histories' end per run, once when every run has the same."""
    if len(set(end_s.values())) == 1:
        return fmt_time(next(iter(end_s.values())))
    return ", ".join(f"{k} {fmt_time(v)}" for k, v in end_s.items())


def build_compare_context(comparison: Mapping[str, Any], generated: str | None = None) -> dict:
    """Everything the template prints, formatted (the template only lays it out)."""
    scenarios = []
    for sc in comparison["scenarios"]:
        locations, unchanged = _location_rows(comparison, sc)
        scenarios.append({"id": sc["id"], "title": sc.get("title"), "routes": _route_rows(comparison, sc),
                          "locations": locations, "locations_unchanged": unchanged,
                          "end": _ends(sc["end_s"])})
    diffs = comparison["differences"]
    changes = comparison["changes"]
    return {
        "title": comparison["study"]["title"] or "(untitled study)",
        "reference": comparison["study"].get("reference"),
        "version": comparison["version"],
        "generated": generated,
        "page_size": page_size(comparison["study"].get("paper") or "A4"),
        "baseline": comparison["baseline"],
        "runs": comparison["runs"],
        "labels": [r["label"] for r in comparison["runs"]],
        "input_files": [{"role": f["role"], "files": {label: _file_cell(x) for label, x in f["files"].items()}}
                        for f in diffs["inputs"]],
        "criteria_diffs": [{**d, "label": CRITERION_LABELS.get(d["criterion"], d["criterion"])}
                           for d in diffs["criteria"]["differences"]],
        "criteria_names": diffs["criteria"]["names"] if diffs["criteria"]["name_differs"] else None,
        "table_diffs": diffs["uncertainty"],
        "settings_diffs": diffs["settings"],
        "same_inputs": not diffs["summary"],
        "verdict_changes": [c for c in changes if c["verdict_changed"]],
        "n_changed_routes": len(changes),
        "n_routes": sum(len(sc["routes"]) for sc in comparison["scenarios"]),
        "scenarios": scenarios,
        "not_compared": comparison["not_compared"],
        "heads": ROUTE_HEADS,
        "location_heads": LOCATION_HEADS,
        "rule": comparison["rules"]["text"],
        "caution": COMPARE_CAUTION,
    }


def render_compare_html(comparison: Mapping[str, Any], generated: str | None = None) -> str:
    """The comparison as one self-contained HTML page (the report's stylesheet inline)."""
    from markupsafe import Markup

    ctx = build_compare_context(comparison, generated)
    ctx["css"] = Markup((templates_dir() / "report.css").read_text(encoding="utf-8"))
    return _environment().get_template("compare.html.j2").render(**ctx)


def _refuse_run_output(out: Path) -> None:
    """A run's output (its manifest lists results.json) is not replaced by a comparison."""
    manifest, _ = outputs.read_manifest(out) if Path(out).is_dir() else (None, None)
    if manifest is not None and "results.json" in manifest["written"]:
        raise InputError([Problem(str(out), "is the output of an 'egressmargin run' (it holds results.json); "
                                  "nothing was written: choose a new or empty folder, or an earlier comparison, "
                                  "with --out")])


def write_comparison(comparison: Mapping[str, Any], out_dir: Path, pdf: bool = True,
                     generated: str | None = None, command: str | None = None,
                     notices: list | None = None) -> dict[str, Path]:
    """Write ``comparison.json``, ``comparison.html`` (and ``comparison.pdf``) into ``out_dir``.

    Parameters
    ----------
    comparison : mapping
        The record of :func:`egressmargin.compare.build_comparison`.
    out_dir : pathlib.Path
        Output folder: new, empty, or an earlier comparison (replaced as a whole, the way
        :mod:`egressmargin.outputs` replaces a run's output: locked, staged, swapped).
    pdf : bool
        Also render ``comparison.pdf`` with WeasyPrint.
    generated : str, optional
        Date printed on the page (the JSON carries none, so reruns are byte-identical).
    command : str, optional
        The command line recorded in the output's manifest (default: this process's).
    notices : list, optional
        Receives what could not be tidied beside the output (a set-aside earlier output
        that could not be removed), for the command line to print.

    Returns
    -------
    dict of str to Path
        ``json``, ``html`` and, with ``pdf``, ``pdf``: the files' final paths.

    Raises
    ------
    egressmargin.errors.InputError
        When ``out_dir`` may not be written (see :func:`egressmargin.outputs.inspect_target`; a
        run's output is refused too); nothing is touched.
    """
    out = Path(out_dir)
    _refuse_run_output(out)
    html = render_compare_html(comparison, generated)
    inputs = [Path(r["path"]) for r in comparison["runs"]]
    files = {"json": "comparison.json", "html": "comparison.html"} | ({"pdf": "comparison.pdf"} if pdf else {})
    try:
        with outputs.claim(out, inputs) as target:
            tmp = target.staging
            (tmp / files["json"]).write_text(json.dumps(comparison, indent=2, allow_nan=False) + "\n",
                                             encoding="utf-8")
            (tmp / files["html"]).write_text(html, encoding="utf-8")
            if pdf:
                write_pdf(html, tmp / files["pdf"])
            target.commit(comparison["version"], command)
        if notices is not None:
            notices.extend(target.leftover_warnings())
    except OSError as exc:
        problem = outputs.user_os_error(exc, out)
        if problem is None:
            raise
        raise problem from None
    return {k: out / v for k, v in files.items()}
