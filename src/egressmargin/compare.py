"""Several runs side by side: read their results.json, check they compare, build the record.

A what-if (corrected against raw predictions, one validation table against another, one
criteria set against another) is two or more runs of one study. This module reads their
``results.json`` files (:func:`read_runs`, the only function here that touches a file),
checks that they can be compared (:func:`comparability_problems`) and builds the
comparison record (:func:`build_comparison`) that ``comparison.json`` holds and the
comparison page shows. The first file is the baseline; every other run is compared with
it.

When files compare
------------------
- at least two files, each a JSON object with the contract keys of results.json
  (``version``, ``inputs``, ``criteria``, ``scenarios`` with ids);
- a ``version`` of this tool written as dotted whole numbers with the same major number
  as this tool (the contract only ever adds keys within a major version);
- the same study title in every file (titles compared after folding case and runs of
  white space; ``allow_different_titles`` accepts different titles, e.g. two design
  options written as two study files);
- at least one scenario and route (or, in a study without routes, one scenario and
  location) present in every file. Items missing from some files are listed as not
  compared, never dropped silently.

What counts as a change
-----------------------
A time or margin that moves by at least :data:`TIME_STEP_S` (the report prints whole
seconds), a probability that moves by at least :data:`P_STEP` (printed to three
decimals), or a different word (verdict, governing criterion). A time that is not
reached by the end of the histories (``null``) counts as later than any reached time.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from . import __version__
from .errors import InputError, Problem, raise_if_any

#: Identifies comparison.json (and tells it apart from a results.json given by mistake).
KIND = "egressmargin comparison"

#: The smallest shift of a time that counts as a change [s] (times print in whole seconds).
TIME_STEP_S = 0.5
#: The smallest shift of a probability that counts as a change (printed to 3 decimals).
P_STEP = 0.0005

#: Keys every results.json has (contract); a file without them is not a results.json.
REQUIRED_KEYS = ("version", "inputs", "criteria", "scenarios")

#: Route values compared, in the order shown: key in the record -> (path in results.json, kind).
#: kind "time": later is better; "margin": larger is better; "p": lower is better; "word".
ROUTE_VALUES: dict[str, tuple[tuple[str, ...], str]] = {
    "aset_raw_s": (("aset_raw_s",), "time"),
    "aset_p50_s": (("aset_s", "p50"), "time"),
    "rset_p50_s": (("rset_s", "p50"), "rset"),
    "margin_p05_s": (("margin_s", "p05"), "margin"),
    "margin_p50_s": (("margin_s", "p50"), "margin"),
    "p_fail": (("p_fail",), "p"),
    "verdict": (("verdict",), "word"),
}

#: Route values shown where a file has them (older files may not), never compared for change.
ROUTE_EXTRAS = ("p_fail_bounds", "p_fail_ci95", "samples_used", "verdict_reason", "margin_at_least_s",
                "governing_location", "governing_criterion", "criteria_assessed")

#: Location values compared.
LOCATION_VALUES: dict[str, tuple[tuple[str, ...], str]] = {
    "aset_raw_s": (("aset_raw_s",), "time"),
    "aset_p50_s": (("aset_s", "p50"), "time"),
    "governing": (("governing",), "word"),
}

#: Uncertainty-table fields compared per quantity.
TABLE_FIELDS = ("bias", "sigma_model", "sigma_exp", "range")


@dataclass(frozen=True)
class Run:
    """One results.json as read: its label in the comparison, where it is, and its content."""

    label: str
    path: Path
    sha256: str
    data: dict


def labels(n: int) -> list[str]:
    """Run labels ``A``, ``B``, ... ``Z``, ``AA``, ``AB`` ...

    >>> labels(3), labels(28)[-2:]
    (['A', 'B', 'C'], ['AA', 'AB'])
    """
    out = []
    for i in range(n):
        text, k = "", i
        while True:
            text = chr(ord("A") + k % 26) + text
            k = k // 26 - 1
            if k < 0:
                break
        out.append(text)
    return out


def read_runs(paths: list[Path]) -> tuple[list[Run], list[Problem]]:
    """Read each results.json; return the runs that could be read and the problems of the others."""
    runs, problems = [], []
    for label, path in zip(labels(len(paths)), paths):
        path = Path(path)
        try:
            raw = path.read_bytes()
        except OSError as exc:
            problems.append(Problem(str(path), f"cannot be read ({exc.strerror or exc}); expected a results.json "
                                    "written by 'egressmargin run'"))
            continue
        try:
            data = json.loads(raw.decode("utf-8"))
        except UnicodeDecodeError:
            problems.append(Problem(str(path), "is not text (UTF-8); expected a results.json"))
            continue
        except json.JSONDecodeError as exc:
            problems.append(Problem(f"{path}:{exc.lineno}", f"is not JSON ({exc.msg}, column {exc.colno}); "
                                    "expected a results.json"))
            continue
        runs.append(Run(label, path, hashlib.sha256(raw).hexdigest(), data))
    return runs, problems


def read_comparable(paths: list[Path], allow_different_titles: bool = False) -> list[Run]:
    """Read the results files and check they compare; raise InputError with every reason they do not."""
    problems = []
    if len(paths) < 2:
        problems.append(Problem("compare", f"found {len(paths)} results file{'s' if len(paths) != 1 else ''}; "
                                "expected at least two to compare"))
    runs, read_problems = read_runs(paths)
    problems += read_problems + comparability_problems(runs, allow_different_titles)
    raise_if_any(problems)
    return runs


def _version_problem(run: Run) -> str | None:
    version = run.data.get("version")
    m = re.fullmatch(r"(\d+)\.(\d+)(?:\.(\d+))?\S*", version) if isinstance(version, str) else None
    if m is None:
        return f"version {version!r} cannot be read; expected a version such as '{__version__}'"
    ours = int(__version__.split(".")[0])
    if int(m.group(1)) != ours:
        return (f"written by egressmargin {version}; this is {__version__}, which reads results of "
                f"version {ours}.x only (rerun the study with this version)")
    return None


def _shape_problems(run: Run) -> list[str]:
    """What keeps a JSON object from being a results.json (contract keys, ids)."""
    d = run.data
    if not isinstance(d, dict):
        return [f"found a JSON {type(d).__name__}; expected the object of a results.json"]
    if d.get("kind") == KIND:
        return ["is a comparison written by 'egressmargin compare', not a results.json"]
    missing = [k for k in REQUIRED_KEYS if k not in d]
    if missing:
        return [f"not a results.json: missing key{'s' if len(missing) > 1 else ''} {', '.join(missing)}"]
    out = []
    if not isinstance(d["scenarios"], list) or not all(isinstance(s, dict) and isinstance(s.get("id"), str)
                                                       for s in d["scenarios"]):
        out.append("not a results.json: 'scenarios' is not a list of scenarios with ids")
        return out
    for i, sc in enumerate(d["scenarios"]):
        for key in ("locations", "routes"):
            items = sc.get(key, [])
            if not isinstance(items, list) or not all(isinstance(x, dict) and isinstance(x.get("id"), str)
                                                      for x in items):
                out.append(f"not a results.json: scenarios[{i}].{key} is not a list of items with ids")
    if not isinstance(d["inputs"], list):
        out.append("not a results.json: 'inputs' is not a list")
    if not isinstance(d["criteria"], dict):
        out.append("not a results.json: 'criteria' is not a mapping")
    if out:
        return out
    return field_problems(d)


#: The verdict words of results.json (contract).
VERDICTS = ("pass", "fail", "indeterminate")


def _is_num(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _found(x: Any) -> str:
    """A value as the message quotes it (JSON spelling, shortened)."""
    try:
        text = json.dumps(x, allow_nan=True)
    except (TypeError, ValueError):
        text = repr(x)
    return text if len(text) <= 40 else text[:37] + "..."


def _check(out: list[str], where: str, value: Any, ok: bool, expected: str) -> None:
    if not ok:
        out.append(f"{where}: found {_found(value)}; expected {expected}")


def _time_or_null(out, where, x) -> None:
    _check(out, where, x, x is None or _is_num(x), "a time in seconds (a number) or null (not reached)")


def _percentiles(out, where, x, keys=("p05", "p50", "p95"), required=True) -> None:
    if x is None and not required:
        return
    if not isinstance(x, dict):
        _check(out, where, x, False, "a mapping {" + ", ".join(keys) + "} of times in seconds or null")
        return
    for k in keys:
        _time_or_null(out, f"{where}.{k}", x.get(k))


def _probability(out, where, x, nullable=False) -> None:
    _check(out, where, x, (nullable and x is None) or (_is_num(x) and 0.0 <= x <= 1.0),
           "a probability (a number from 0 to 1)" + (" or null" if nullable else ""))


def _route_field_problems(out: list[str], where: str, rt: dict) -> None:
    """The route values compare reads (:data:`ROUTE_VALUES`, :data:`ROUTE_EXTRAS`)."""
    _time_or_null(out, f"{where}.aset_raw_s", rt.get("aset_raw_s"))
    for key in ("aset_s", "rset_s", "margin_s"):
        _percentiles(out, f"{where}.{key}", rt.get(key))
    _probability(out, f"{where}.p_fail", rt.get("p_fail"))
    _check(out, f"{where}.verdict", rt.get("verdict"), rt.get("verdict") in VERDICTS,
           "one of " + ", ".join(VERDICTS))
    if "p_fail_bounds" in rt:
        b = rt["p_fail_bounds"]
        if not isinstance(b, dict):
            _check(out, f"{where}.p_fail_bounds", b, False, "a mapping {low, high} of probabilities")
        else:
            for k in ("low", "high"):
                _probability(out, f"{where}.p_fail_bounds.{k}", b.get(k))
    if "p_fail_ci95" in rt:
        ci = rt["p_fail_ci95"]
        ok = isinstance(ci, list) and len(ci) == 2 and all(_is_num(v) and 0 <= v <= 1 for v in ci) and ci[0] <= ci[1]
        _check(out, f"{where}.p_fail_ci95", ci, ok, "[low, high], two probabilities with low <= high")
    if "samples_used" in rt:
        n = rt["samples_used"]
        _check(out, f"{where}.samples_used", n, isinstance(n, int) and not isinstance(n, bool) and n > 0,
               "a whole number of samples above 0")
    if "verdict_reason" in rt:
        _check(out, f"{where}.verdict_reason", rt["verdict_reason"], isinstance(rt["verdict_reason"], str), "text")
    if "margin_at_least_s" in rt:
        _percentiles(out, f"{where}.margin_at_least_s", rt["margin_at_least_s"])
    for key in ("governing_location", "governing_criterion"):
        if key in rt:
            _check(out, f"{where}.{key}", rt[key], rt[key] is None or isinstance(rt[key], str), "text or null")
    if "criteria_assessed" in rt:
        _check(out, f"{where}.criteria_assessed", rt["criteria_assessed"], isinstance(rt["criteria_assessed"], bool),
               "true or false")


def _location_field_problems(out: list[str], where: str, loc: dict) -> None:
    """The location values compare reads (:data:`LOCATION_VALUES`); detector points have none."""
    if loc.get("role") == "detector":
        return
    _time_or_null(out, f"{where}.aset_raw_s", loc.get("aset_raw_s"))
    _percentiles(out, f"{where}.aset_s", loc.get("aset_s"), keys=("p50",))
    g = loc.get("governing")
    _check(out, f"{where}.governing", g, g is None or isinstance(g, str), "a criterion id or null")


def field_problems(d: dict) -> list[str]:
    """Every field compare reads, checked against the results.json schema (contract).

    A hand-edited or damaged file is refused with the field's path and what was found,
    instead of being shown as if it were a result.

    Examples
    --------
    >>> for msg in field_problems({"inputs": [], "criteria": {}, "uncertainty": "abc", "scenarios": [
    ...         {"id": "a", "end_s": 600, "locations": [], "routes": [{"id": "r", "p_fail": "abc",
    ...          "aset_s": {"p05": 1, "p50": 2, "p95": 3}, "rset_s": {"p05": 1, "p50": 2, "p95": 3},
    ...          "margin_s": {"p05": 1, "p50": 2, "p95": "x"}, "verdict": 42}]}]}):
    ...     print(msg)
    uncertainty: found "abc"; expected a mapping (the table as applied) or null
    scenarios[0].routes[0].margin_s.p95: found "x"; expected a time in seconds (a number) or null (not reached)
    scenarios[0].routes[0].p_fail: found "abc"; expected a probability (a number from 0 to 1)
    scenarios[0].routes[0].verdict: found 42; expected one of pass, fail, indeterminate
    """
    out: list[str] = []
    unc = d.get("uncertainty")
    _check(out, "uncertainty", unc, unc is None or isinstance(unc, dict), "a mapping (the table as applied) or null")
    study = d.get("study")
    if study is not None:
        _check(out, "study", study, isinstance(study, dict), "a mapping with the study's title")
        if isinstance(study, dict) and "title" in study:
            _check(out, "study.title", study["title"], study["title"] is None or isinstance(study["title"], str),
                   "text")
    for i, entry in enumerate(d.get("inputs") or []):
        ok = isinstance(entry, dict) and isinstance(entry.get("path"), str) and isinstance(entry.get("sha256"), str)
        _check(out, f"inputs[{i}]", entry, ok, "a mapping {path, sha256} of text")
    if "applied" in d["criteria"]:
        _check(out, "criteria.applied", d["criteria"]["applied"], isinstance(d["criteria"]["applied"], dict),
               "a mapping of criteria")
    acc = d.get("acceptance")
    if isinstance(acc, dict) and "max_p_fail" in acc:
        _probability(out, "acceptance.max_p_fail", acc["max_p_fail"])
    for i, sc in enumerate(d["scenarios"]):
        where = f"scenarios[{i}]"
        if "locations" not in sc:
            out.append(f"{where} ({sc['id']}): has no 'locations'; expected the list of its locations")
        end = sc.get("end_s")
        _check(out, f"{where}.end_s", end, _is_num(end), "the end of the histories in seconds (a number)")
        for j, loc in enumerate(sc.get("locations") or []):
            _location_field_problems(out, f"{where}.locations[{j}]", loc)
        for j, rt in enumerate(sc.get("routes") or []):
            _route_field_problems(out, f"{where}.routes[{j}]", rt)
    return out


def _title(run: Run) -> str:
    study = run.data.get("study")
    title = study.get("title") if isinstance(study, dict) else None
    return str(title) if title is not None else ""


def _fold(text: str) -> str:
    return " ".join(text.split()).casefold()


def _items(run: Run, key: str) -> list[tuple[str, str]]:
    return [(sc["id"], x["id"]) for sc in run.data["scenarios"] for x in sc.get(key, [])]


def comparability_problems(runs: list[Run], allow_different_titles: bool = False) -> list[Problem]:
    """Every reason the runs cannot be compared (empty when they can)."""
    problems = []
    good = []
    for run in runs:
        found = _shape_problems(run)
        if not found:
            v = _version_problem(run)
            found = [v] if v else []
        problems.extend(Problem(str(run.path), msg) for msg in found)
        if not found:
            good.append(run)
    if len(good) < 2:
        return problems
    titles = {_fold(_title(r)) for r in good}
    if len(titles) > 1 and not allow_different_titles:
        listing = "; ".join(f"{r.label} ({r.path}): '{_title(r)}'" for r in good)
        problems.append(Problem("compare", f"the files are from different studies (study titles differ: {listing}); "
                                "expected runs of one study, or --allow-different-titles to compare them anyway"))
    routes = set.intersection(*(set(_items(r, "routes")) for r in good))
    locations = set.intersection(*(set(_items(r, "locations")) for r in good))
    if not routes and not locations:
        problems.append(Problem("compare", "the files have no scenario and route (nor scenario and location) in "
                                "common; expected runs of one study"))
    return problems


def _get(d: Any, path: tuple[str, ...]) -> Any:
    for key in path:
        if not isinstance(d, dict):
            return None
        d = d.get(key)
    return d


def _number(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)) or math.isnan(x):
        return None
    return float(x)


def change(base: Any, other: Any, kind: str) -> dict:
    """How ``other`` differs from ``base`` for one value.

    Returns ``{"changed": bool, "delta": float | None, "direction": str}``; ``delta`` is
    other minus base where both are numbers. ``direction`` is "same", "earlier"/"later"
    (times; ``None`` is "not reached by the end", later than any time), "smaller"/"larger"
    (margins; ``None`` is unbounded above), "higher"/"lower" (probabilities), "differs"
    (words), or "missing" when a file lacks the value.

    >>> change(300.0, 250.0, "time")
    {'changed': True, 'delta': -50.0, 'direction': 'earlier'}
    >>> change(None, 410.2, "time")["direction"], change(None, None, "time")["direction"]
    ('earlier', 'same')
    >>> change(0.0312, 0.0314, "p")["changed"]
    False
    """
    if kind == "word":
        same = base == other
        return {"changed": not same, "delta": None, "direction": "same" if same else "differs"}
    if kind == "p":
        b, o = _number(base), _number(other)
        if b is None or o is None:
            same = b is None and o is None
            return {"changed": not same, "delta": None, "direction": "same" if same else "missing"}
        d = round(o - b, 6)
        if abs(d) < P_STEP:
            return {"changed": False, "delta": d, "direction": "same"}
        return {"changed": True, "delta": d, "direction": "higher" if d > 0 else "lower"}
    b = math.inf if base is None else _number(base)
    o = math.inf if other is None else _number(other)
    if b is None or o is None:
        return {"changed": True, "delta": None, "direction": "missing"}
    d = round(o - b, 3) if math.isfinite(o) and math.isfinite(b) else None
    if (b == o) or (d is not None and abs(d) < TIME_STEP_S):
        return {"changed": False, "delta": d, "direction": "same"}
    up, down = ("larger", "smaller") if kind == "margin" else ("later", "earlier")
    return {"changed": True, "delta": d, "direction": up if o > b else down}


def _values(item: dict, spec: dict[str, tuple[tuple[str, ...], str]]) -> dict:
    return {key: _get(item, path) for key, (path, _) in spec.items()}


def _side_by_side(runs: list[Run], items: dict[str, dict], spec) -> dict:
    """Values of one route or location per run, with each run's changes against the baseline."""
    base = runs[0].label
    values = {label: _values(item, spec) for label, item in items.items()}
    changes = {}
    for label in values:
        if label == base:
            continue
        changes[label] = {key: change(values[base][key], values[label][key], kind)
                          for key, (_, kind) in spec.items()}
    changed = sorted({k for c in changes.values() for k, v in c.items() if v["changed"]}, key=list(spec).index)
    return {"values": values, "changes": changes, "changed": changed}


def _by_id(xs: list[dict]) -> dict[str, dict]:
    return {x["id"]: x for x in xs}


def _scenario_record(runs: list[Run], sid: str) -> dict:
    scs = {r.label: _by_id(r.data["scenarios"])[sid] for r in runs}
    rec = {"id": sid, "title": next((s.get("title") for s in scs.values() if s.get("title")), None),
           "end_s": {label: _number(s.get("end_s")) for label, s in scs.items()}, "routes": [], "locations": [],
           "not_compared": []}
    for key, spec in (("routes", ROUTE_VALUES), ("locations", LOCATION_VALUES)):
        # detection points (role: detector) are not occupied: they have no ASET to compare
        per_run = {label: _by_id([x for x in s.get(key, []) if x.get("role") != "detector"])
                   for label, s in scs.items()}
        ids = list(dict.fromkeys(i for label in per_run for i in per_run[label]))
        for iid in ids:
            present = [label for label in per_run if iid in per_run[label]]
            if len(present) < len(runs):
                rec["not_compared"].append({"kind": key[:-1], "id": iid, "only_in": present})
                continue
            items = {label: per_run[label][iid] for label in per_run}
            entry = {"id": iid, "title": next((x.get("title") for x in items.values() if x.get("title")), None),
                     **_side_by_side(runs, items, spec)}
            if key == "routes":
                entry["verdict_changed"] = "verdict" in entry["changed"]
                entry["extras"] = {label: {k: x[k] for k in ROUTE_EXTRAS if k in x} for label, x in items.items()}
            rec[key].append(entry)
    return rec


def _input_key_rows(run: Run) -> dict[tuple[str, int], dict]:
    """Inputs keyed by (role, how many of that role came before): resolutions keep their order."""
    out, seen = {}, {}
    for entry in run.data["inputs"]:
        if not isinstance(entry, dict):
            continue
        role = str(entry.get("role", "input"))
        n = seen.get(role, 0)
        seen[role] = n + 1
        out[(role, n)] = {"path": entry.get("path"), "sha256": entry.get("sha256")}
    return out


def input_differences(runs: list[Run]) -> list[dict]:
    """Every input file with its path and SHA-256 per run, and whether its content differs."""
    keyed = {r.label: _input_key_rows(r) for r in runs}
    keys = list(dict.fromkeys(k for rows in keyed.values() for k in rows))
    out = []
    for role, n in keys:
        files = {label: rows.get((role, n)) for label, rows in keyed.items()}
        hashes = {None if f is None else f.get("sha256") for f in files.values()}
        out.append({"role": role, "files": files, "differs": len(hashes) > 1})
    return out


def _applied(run: Run) -> dict[str, dict]:
    """Criteria as applied: ``criteria.applied`` where present, else the contract's {cid: {limit, unit}}."""
    crit = run.data["criteria"]
    applied = crit.get("applied")
    if isinstance(applied, dict):
        return {cid: dict(v) for cid, v in applied.items() if isinstance(v, dict)}
    return {cid: dict(v) for cid, v in crit.items() if isinstance(v, dict) and "limit" in v}


def _limit_text(entry: dict | None) -> str:
    if entry is None:
        return "not applied"
    limit, unit = entry.get("limit"), entry.get("unit")
    num = f"{limit:g}" if _number(limit) is not None else str(limit)
    return num if unit in (None, "", "-") else f"{num} {unit}"


def criteria_differences(runs: list[Run]) -> dict:
    """The criteria sets' names and every limit or parameter that differs between the runs.

    Each difference is ``{"criterion", "field", "values": {label: text}}``; ``field`` is
    "limit" (also when a criterion is applied in some runs only) or a parameter name.
    Sources and descriptions are text and not compared.
    """
    names = {r.label: r.data["criteria"].get("name") for r in runs}
    overrides = {r.label: r.data["criteria"].get("override") for r in runs}
    applied = {r.label: _applied(r) for r in runs}
    cids = list(dict.fromkeys(c for a in applied.values() for c in a))
    diffs = []
    for cid in cids:
        entries = {label: a.get(cid) for label, a in applied.items()}
        limits = {label: (None if e is None else (_number(e.get("limit")), e.get("unit"))) for label, e in entries.items()}
        if len(set(limits.values())) > 1:
            diffs.append({"criterion": cid, "field": "limit",
                          "values": {label: _limit_text(e) for label, e in entries.items()}})
        params = [k for k in dict.fromkeys(k for e in entries.values() if e for k in e)
                  if k not in ("limit", "unit", "limit_text", "source")]
        for key in params:
            vals = {label: (None if e is None else e.get(key)) for label, e in entries.items()}
            if any(e is None for e in entries.values()):
                continue                      # already listed as applied in some runs only
            if len({json.dumps(v, sort_keys=True) for v in vals.values()}) > 1:
                diffs.append({"criterion": cid, "field": key,
                              "values": {label: "not set" if v is None else str(v) for label, v in vals.items()}})
    return {"names": names, "overrides": overrides, "name_differs": len(set(map(str, names.values()))) > 1,
            "differences": diffs}


def _table_text(v: Any) -> str:
    if isinstance(v, dict):
        return ", ".join(f"{k} {v[k]}" for k in v)
    return "not set" if v is None else str(v)


def uncertainty_differences(runs: list[Run]) -> dict:
    """The model-uncertainty tables as applied: which run has one, and every row field that differs."""
    tables = {r.label: r.data.get("uncertainty") if isinstance(r.data.get("uncertainty"), dict) else None
              for r in runs}
    sources = {label: (t.get("source") if t else None) for label, t in tables.items()}
    diffs = []
    if len({t is None for t in tables.values()}) > 1:
        diffs.append({"quantity": None, "field": "table",
                      "values": {label: "none (raw predictions only)" if t is None else str(t.get("source", "a table"))
                                 for label, t in tables.items()}})
    present = {label: t for label, t in tables.items() if t is not None}
    if len(present) > 1:
        dists = {label: t.get("distribution") for label, t in present.items()}
        if len(set(map(str, dists.values()))) > 1:
            diffs.append({"quantity": None, "field": "distribution",
                          "values": {label: str(v) for label, v in dists.items()}})
        quantities = {label: t.get("quantities") or {} for label, t in present.items()}
        for q in dict.fromkeys(q for qs in quantities.values() for q in qs):
            rows = {label: qs.get(q) for label, qs in quantities.items()}
            if any(r is None for r in rows.values()):
                diffs.append({"quantity": q, "field": "row",
                              "values": {label: "no row" if r is None else "corrected" for label, r in rows.items()}})
                continue
            for f in TABLE_FIELDS:
                vals = {label: r.get(f) for label, r in rows.items()}
                if len({json.dumps(v, sort_keys=True) for v in vals.values()}) > 1:
                    diffs.append({"quantity": q, "field": f,
                                  "values": {label: _table_text(v) for label, v in vals.items()}})
    return {"sources": sources, "differences": diffs}


def settings_differences(runs: list[Run]) -> list[dict]:
    """Tool version, samples, seed and acceptance where they differ between the runs."""
    fields = {"version": ("version",), "samples": ("samples",), "seed": ("seed",),
              "max_p_fail": ("acceptance", "max_p_fail")}
    out = []
    for name, path in fields.items():
        vals = {r.label: _get(r.data, path) for r in runs}
        if len({json.dumps(v) for v in vals.values()}) > 1:
            out.append({"setting": name, "values": {label: "not recorded" if v is None else str(v)
                                                    for label, v in vals.items()}})
    return out


def _changes(scenarios: list[dict]) -> list[dict]:
    """Changed routes, verdict changes first, then by scenario and route order."""
    rows = []
    for sc in scenarios:
        for rt in sc["routes"]:
            if rt["changed"]:
                verdicts = {label: v["verdict"] for label, v in rt["values"].items()}
                rows.append({"scenario": sc["id"], "route": rt["id"], "verdict_changed": rt["verdict_changed"],
                             "verdicts": verdicts, "changed": rt["changed"]})
    return sorted(rows, key=lambda r: not r["verdict_changed"])


def build_comparison(runs: list[Run], allow_different_titles: bool = False) -> dict:
    """The comparison record of ``runs`` (the first is the baseline).

    Raises
    ------
    egressmargin.errors.InputError
        With every reason the runs cannot be compared (see the module docstring).
    """
    if len(runs) < 2:
        raise InputError([Problem("compare", f"found {len(runs)} results file{'s' if len(runs) != 1 else ''} "
                                  "that could be read; expected at least two to compare")])
    raise_if_any(comparability_problems(runs, allow_different_titles))
    base = runs[0]
    present = {r.label: _by_id(r.data["scenarios"]) for r in runs}
    sids = list(dict.fromkeys(s for by_id in present.values() for s in by_id))
    common = [s for s in sids if all(s in by_id for by_id in present.values())]
    scenarios = [_scenario_record(runs, sid) for sid in common]
    not_compared = [{"kind": "scenario", "id": s, "only_in": [label for label, by_id in present.items() if s in by_id]}
                    for s in sids if s not in common]
    for sc in scenarios:
        not_compared.extend({"scenario": sc["id"], **x} for x in sc.pop("not_compared"))
    inputs = input_differences(runs)
    criteria = criteria_differences(runs)
    table = uncertainty_differences(runs)
    settings = settings_differences(runs)
    study = base.data.get("study") if isinstance(base.data.get("study"), dict) else {}
    return {
        "kind": KIND,
        "version": __version__,
        "baseline": base.label,
        "study": {"title": _title(base), "reference": study.get("reference"), "paper": study.get("paper") or "A4"},
        "rules": {"time_step_s": TIME_STEP_S, "p_step": P_STEP,
                  "text": f"a change is a time or margin moved by at least {TIME_STEP_S} s, a probability moved "
                          f"by at least {P_STEP} ({100 * P_STEP:g} percentage points), or a different word; a time not reached by the end of the "
                          "histories counts as later than any reached time"},
        "runs": [{"label": r.label, "path": str(r.path), "sha256": r.sha256, "version": r.data.get("version"),
                  "study_title": _title(r), "criteria": r.data["criteria"].get("name"),
                  "criteria_override": r.data["criteria"].get("override"),
                  "uncertainty": table["sources"][r.label], "samples": r.data.get("samples"),
                  "seed": r.data.get("seed"), "max_p_fail": _get(r.data, ("acceptance", "max_p_fail"))}
                 for r in runs],
        "differences": {
            "inputs": [x for x in inputs if x["differs"]],
            "criteria": criteria,
            "uncertainty": table["differences"],
            "settings": settings,
            "summary": _difference_summary(inputs, criteria, table, settings),
        },
        "inputs": inputs,
        "changes": _changes(scenarios),
        "scenarios": scenarios,
        "not_compared": not_compared,
    }


def _difference_summary(inputs, criteria, table, settings) -> list[str]:
    """One sentence per kind of difference between the runs' inputs (empty: the same inputs)."""
    out = []
    differing = [x["role"] for x in inputs if x["differs"]]
    if differing:
        out.append("input files differ: " + ", ".join(dict.fromkeys(differing)))
    if criteria["name_differs"]:
        out.append("criteria sets differ: " + ", ".join(f"{k} {v}" for k, v in criteria["names"].items()))
    for d in criteria["differences"]:
        out.append(f"{d['criterion']} {d['field']}: " + " / ".join(f"{k} {v}" for k, v in d["values"].items()))
    for d in table["differences"]:
        what = f"{d['quantity']} {d['field']}" if d["quantity"] else f"model uncertainty {d['field']}"
        out.append(f"{what}: " + " / ".join(f"{k} {v}" for k, v in d["values"].items()))
    for d in settings:
        out.append(f"{d['setting']}: " + " / ".join(f"{k} {v}" for k, v in d["values"].items()))
    return out
