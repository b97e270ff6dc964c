"""load -> assess -> report, in that order, nothing else.

The only module that knows the order of the steps. Outputs are assembled in a temporary
folder beside the destination and moved into place only when everything succeeded.
"""

from __future__ import annotations

import json
import multiprocessing as mp
import os
import shutil
import tempfile
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path

import numpy as np

from . import __version__, aset, assess
from .credibility import flag_change, grid_convergence
from .errors import InputError, Problem
from .histories import ScenarioData, read_scenario, sha256_of
from .stats import share, summarise
from .study import SERIES_KEYS, SMOKE_KEYS, Study, check_study
from .tenability.irritants import IRRITANT_GASES
from .uncertainty import UncertaintyTable, factor_ppf, load_table

#: Samples used to draw the corrected p05-p95 band on the report's time plots.
BAND_SAMPLES = 200


@dataclass
class RunOptions:
    out: Path | None = None
    samples: int | None = None
    seed: int | None = None
    pdf: bool = True
    html: bool = True
    uncertainty: Path | None = None       # override the study's table
    raw_only: bool = False                # ignore any table: uncorrected predictions
    progress: object = None               # callable(str) or None
    workers: int | None = None            # processes over scenarios; None: automatic


@dataclass
class Loaded:
    study: Study
    table: UncertaintyTable | None
    data: dict[str, ScenarioData]
    resolutions: dict[str, list[tuple[float, ScenarioData]]]
    warnings: list[Problem] = field(default_factory=list)


def load(study_path: Path, options: RunOptions | None = None) -> Loaded:
    """Read and check the study and every file it names; raise InputError with all problems."""
    options = options or RunOptions()
    study, specs, problems = check_study(study_path)
    if study is None:
        # Report the CSV problems of every scenario that could be read, too.
        for spec in specs:
            if spec.histories is not None and spec.histories.is_file() and spec.time is not None:
                try:
                    read_scenario(spec)
                except InputError as exc:
                    problems.extend(exc.problems)
        raise InputError(problems)
    problems = []
    warnings = list(study.warnings)
    table = None
    unc_path = options.uncertainty or study.uncertainty_path
    if unc_path is not None and not options.raw_only:
        try:
            table = load_table(Path(unc_path))
        except InputError as exc:
            problems.extend(exc.problems)
    data, res = {}, {}
    for spec in study.scenarios:
        try:
            d, w = read_scenario(spec)
            data[spec.id] = d
            warnings.extend(w)
        except InputError as exc:
            problems.extend(exc.problems)
            continue
        runs = []
        for r in spec.resolutions:
            if r.histories.resolve() == spec.histories.resolve():
                runs.append((r.cell_m, data[spec.id]))
                continue
            try:
                d2, w2 = read_scenario(spec, r.histories)
                warnings.extend(w2)
                runs.append((r.cell_m, d2))
            except InputError as exc:
                problems.extend(exc.problems)
        res[spec.id] = runs
    if any(not p.warning for p in problems):
        raise InputError(problems + [w for w in warnings if w.warning])
    return Loaded(study, table, data, res, warnings)


def _factor_keys(prep: aset.Prepared) -> list[str]:
    keys = ["temperature", "heat_flux", "co", "hcn", "co2", "o2", "layer_height", *IRRITANT_GASES]
    keys += sorted({aset.smoke_factor_key(k) for k in prep.smoke_kind if k})
    return keys


def _stats_key(table: UncertaintyTable | None, factor_key: str) -> str | None:
    """Which row of the table corrects a factor key (smoke kinds fall back to extinction).

    How each row is applied (the factor f has mean 1/delta, :func:`uncertainty.factor_ppf`):
    ``temperature`` multiplies the rise above ambient, ``o2`` the depletion below ambient;
    ``extinction``, ``optical_density`` and ``soot`` multiply the extinction coefficient K
    (so a visibility series becomes V/f); ``visibility`` multiplies the visibility (so K
    becomes K/f); every other row multiplies its series as given.
    """
    if table is None:
        return None
    if factor_key.startswith("smoke:"):
        kind = factor_key.split(":", 1)[1]
        for k in (kind, "extinction", *SMOKE_KEYS):
            if k in table.quantities:
                return k
        return None
    return factor_key if factor_key in table.quantities else None


def draw_scenario_factors(table, prep, S: int, seed: int, scenario_index: int) -> dict[str, np.ndarray]:
    """One error factor per quantity per sample, shared by all locations of the scenario.

    Every table key gets its own uniform stream in a fixed order (so adding a quantity to
    a study does not change the other draws); smoke series of any kind share the
    extinction draw unless the table has a row for their own kind.
    """
    rng = np.random.default_rng([seed, scenario_index])
    uniforms = {k: rng.random(S) for k in SERIES_KEYS}
    out = {}
    for fk in _factor_keys(prep):
        sk = _stats_key(table, fk)
        if sk is not None:
            out[fk] = _engine_factor(fk, sk, factor_ppf(table, sk, uniforms[sk]))
    return out


def _engine_factor(factor_key: str, row: str, f):
    """The engine's factor from a table row's factor: smoke keys are multipliers of K.

    A ``visibility`` row is a visibility bias (corrected V* = V f), so on K it acts as
    K / f; every other smoke row acts on K directly.
    """
    return 1.0 / f if factor_key.startswith("smoke:") and row == "visibility" else f


def factor_ppfs(table, prep) -> dict:
    """Inverse CDF of each table row in use, with the factor keys that share its draw.

    Smoke series of several kinds corrected by one row (extinction, say) share one draw in
    the Monte Carlo, so the sensitivity sweep moves them together as one input.
    """
    out: dict[str, tuple] = {}
    for fk in _factor_keys(prep):
        sk = _stats_key(table, fk)
        if sk is None:
            continue
        if sk not in out:
            out[sk] = ((lambda u, sk=sk, fk=fk: _engine_factor(fk, sk, factor_ppf(table, sk, np.atleast_1d(u))[0])),
                       [])
        out[sk][1].append(fk)
    return out


FACTOR_LABELS = {"temperature": "model error: temperature", "heat_flux": "model error: heat flux",
                 "co": "model error: CO", "hcn": "model error: HCN", "co2": "model error: CO2",
                 "o2": "model error: O2 depletion", "layer_height": "model error: layer height",
                 "extinction": "model error: smoke (extinction)",
                 "optical_density": "model error: smoke (optical density)",
                 "soot": "model error: smoke (soot)", "visibility": "model error: smoke (visibility)",
                 "hcl": "model error: HCl", "hbr": "model error: HBr", "hf": "model error: HF",
                 "so2": "model error: SO2", "no2": "model error: NO2", "acrolein": "model error: acrolein",
                 "formaldehyde": "model error: formaldehyde"}


def si_keys(sweep_index) -> list[str]:
    return [name for name, _, _ in sweep_index]


def _label(key: str) -> str:
    """Words for a table row swept in the sensitivity study."""
    return FACTOR_LABELS.get(key, f"model error: {key}")


def _t(x) -> float | None:
    x = float(x)
    return round(x, 3) if np.isfinite(x) else None


def assess_scenario(loaded: Loaded, index: int, S: int, seed: int, plots: bool = True):
    """Everything about one scenario: location criteria, routes, credibility; plus plot data."""
    study, table = loaded.study, loaded.table
    spec = study.scenarios[index]
    data = loaded.data[spec.id]
    crit = study.criteria
    prep = aset.prepare(data, crit, spec.ambient_temperature_c, spec.ambient_o2)
    raw = aset.evaluate(prep, crit, {}, 1)
    raw_aset = aset.location_aset(raw)[:, 0]
    factors = draw_scenario_factors(table, prep, S, seed, index) if table else {}
    if factors:
        corr = aset.evaluate(prep, crit, factors, S)
    else:
        corr = {cid: aset.CriterionResult(np.repeat(r.times, S, axis=1), r.assessed, r.missing, None, r.partial)
                for cid, r in raw.items()}
    loc_aset = aset.location_aset(corr)
    end = data.end_s
    locations = []
    governing_raw = []
    for li, lid in enumerate(prep.ids):
        crits, na = {}, []
        for cid, c in crit.items.items():
            r, rr = corr[cid], raw[cid]
            assessed = bool(r.assessed[li])
            entry = {"limit": _limit_value(c), "unit": c.unit,
                     "status": "assessed" if assessed else "not assessed"}
            if assessed:
                times = r.times[li]
                entry.update({"raw_s": _t(rr.times[li, 0]), "corrected_s": summarise(times),
                              "p_reached": round(share(np.isfinite(times)), 4)})
                if r.missing[li]:
                    entry["missing_series"] = r.missing[li]
                    entry["note"] = "not supplied, contributes nothing: " + ", ".join(r.missing[li])
                if r.partial is not None and r.partial[li]:
                    entry["partial"] = True     # a dose-raising series (CO2) is missing: time is an upper bound
                if r.grid_bound_s is not None and np.isfinite(r.grid_bound_s[li]):
                    entry["grid_bound_s"] = round(float(r.grid_bound_s[li]), 3)
                flag = _outside_range(table, prep, data, cid, li, rr.times[li, 0], times, factors)
                entry["outside_validated_range"] = bool(flag)
                if flag:
                    entry["range_note"] = flag
            else:
                na.append(cid)
                entry.update({"raw_s": None, "corrected_s": {"p05": None, "p50": None, "p95": None},
                              "p_reached": None, "missing_series": r.missing[li]})
            crits[cid] = entry
        p50 = {cid: crits[cid]["corrected_s"]["p50"] for cid in crits if crits[cid]["status"] == "assessed"}
        reached = {k: v for k, v in p50.items() if v is not None}
        gov = min(reached, key=reached.get) if reached else None
        raws = {cid: crits[cid]["raw_s"] for cid in crits if crits[cid].get("raw_s") is not None}
        governing_raw.append(min(raws, key=raws.get) if raws else None)
        locations.append({"id": lid, "title": spec.locations[li].title, "criteria": crits,
                          "aset_raw_s": _t(raw_aset[li]), "aset_s": summarise(loc_aset[li]),
                          "governing": gov, "governing_raw": governing_raw[-1], "not_assessed": na})
    # sensitivity factor rows, evaluated once per scenario
    routes_here = [(i, r) for i, r in enumerate(study.routes) if r.scenarios is None or spec.id in r.scenarios]
    sweep = None
    if routes_here:
        ppfs = factor_ppfs(table, prep)
        sweep_factors, sweep_index = assess.factor_sweep_rows(ppfs)
        R = 1 + 2 * len(sweep_index)
        sweep_res = aset.evaluate(prep, crit, sweep_factors, R, with_bound=False) if ppfs else \
            {cid: aset.CriterionResult(np.repeat(r.times, R, axis=1), r.assessed, r.missing) for cid, r in raw.items()}
        sweep = (sweep_factors, sweep_index, aset.location_aset(sweep_res))
    routes, route_plots = [], {}
    for ri, route in routes_here:
        draws = assess.egress_uniforms(seed, ri, S)
        fac = factors if factors else {}
        out = assess.outcome(route, prep, fac, loc_aset, raw_aset, governing_raw, draws, study.max_p_fail)
        # raw deterministic margin: raw ASET against RSET at median inputs
        med = assess.EgressDraws(np.full(1, 0.5), np.full(1, 0.5), np.full(1, 0.5))
        rset_med, _, _ = assess.route_rset(route, prep, {}, med)
        margin_raw = out.aset_raw - float(rset_med[0])
        na = [{"location": loc, "criterion": cid} for loc in route.exposed_at
              for cid in locations[prep.ids.index(loc)]["not_assessed"]]
        entry = {
            "id": route.id, "title": route.title, "occupants": route.occupants,
            "rset_s": summarise(out.rset),
            "rset_components_s": {k: summarise(v) for k, v in out.components.items()},
            "movement": {"travel_s": round(float(np.mean(out.movement.travel_s)), 2),
                         "flow_s": round(float(np.mean(out.movement.flow_s)), 2),
                         "controlling_element": out.movement.controlling + 1,
                         "controlling_type": route.path[out.movement.controlling]["type"],
                         "capacity_p_s": round(float(out.movement.capacities_p_s[out.movement.controlling]), 4),
                         "mode": route.movement_mode, "notes": list(out.movement.notes)},
            "aset_raw_s": _t(out.aset_raw), "aset_s": summarise(out.aset),
            "governing_location": out.governing_location, "governing_criterion": out.governing_criterion,
            "margin_s": summarise(out.margin), "margin_raw_s": _t(margin_raw),
            "p_fail": round(out.p_fail, 4), "verdict": out.verdict, "not_assessed": na,
        }
        censored = ~np.isfinite(out.aset)
        if censored.any():
            entry["margin_at_least_s"] = summarise(np.where(censored, end, out.aset) - out.rset)
            entry["share_aset_beyond_end"] = round(share(censored), 4)
        undetected = ~np.isfinite(out.components["detection"])
        if undetected.any():
            entry["share_not_detected"] = round(share(undetected), 4)
        assessed_any = any(locations[prep.ids.index(loc)]["criteria"][cid]["status"] == "assessed"
                           for loc in route.exposed_at for cid in crit.items)
        entry["criteria_assessed"] = assessed_any
        entry["verdict_text"] = _verdict_text(entry, study.max_p_fail, undetected.any())
        if route.along_route:
            entry["along_route"] = assess.along_route_dose(route, prep, crit, fac, S, out.components,
                                                           out.movement)
        sf, si, sa = sweep
        labels = {k: _label(k) for k in si_keys(si)}
        entry["sensitivity"] = assess.sensitivity(route, prep, sf, si, sa, labels)
        routes.append(entry)
        route_plots[route.id] = {"aset_samples": out.aset, "rset_samples": out.rset, "margin_samples": out.margin}
    scenario = {"id": spec.id, "title": spec.title, "end_s": _t(end), "histories": str(data.path),
                "locations": locations, "routes": routes}
    cred, cred_plot = credibility(loaded, index, crit)
    if cred is not None:
        scenario["credibility"] = cred
    plot = {"t_s": data.t_s, "locations": _plot_locations(prep, crit, factors, corr) if plots else {},
            "routes": route_plots, "credibility": cred_plot}
    return scenario, plot


def _limit_value(c):
    return round(c.limit, 6)


def _verdict_text(entry, max_p_fail, undetected) -> str:
    if not entry.get("criteria_assessed", True):
        return ("NOTHING ASSESSED: none of the criteria could be assessed at the locations this route "
                "passes (their series are missing), so the 'pass' below carries no evidence. "
                + _verdict_text({**entry, "criteria_assessed": True}, max_p_fail, undetected))
    words = (f"{'Passes' if entry['verdict'] == 'pass' else 'Fails'}: the probability that the route becomes "
             f"untenable before its occupants are out is {entry['p_fail']:.1%} "
             f"(acceptance: at most {max_p_fail:.1%}).")
    if entry["not_assessed"]:
        pairs = sorted({f"{x['criterion']} at {x['location']}" for x in entry["not_assessed"]})
        words += " Not assessed (missing series), so not part of this verdict: " + "; ".join(pairs) + "."
    if entry.get("share_aset_beyond_end"):
        words += (f" In {entry['share_aset_beyond_end']:.0%} of draws no limit is reached before the histories end;"
                  " the margin there is at least the time left.")
    if undetected:
        words += " In some draws the detector does not respond before the histories end."
    return words


def _outside_range(table, prep, data, cid, li, raw_t, times, factors) -> str | None:
    """Note if a prediction used up to the crossing lies outside the table's validated range."""
    if table is None:
        return None
    t_end = np.nanmax(np.concatenate([[raw_t], times[np.isfinite(times)]])) if np.isfinite(times).any() or \
        np.isfinite(raw_t) else prep.t_s[-1]
    upto = prep.t_s <= t_end + 1e-9
    notes = []
    for q in aset.CRITERION_QUANTITIES[cid]:
        if q == "smoke":
            kind = prep.smoke_kind[li]
            sk = _stats_key(table, aset.smoke_factor_key(kind))
            series = None if kind is None else (data.series[kind][li] if sk == kind else prep.extinction[li])
        else:
            sk = _stats_key(table, q)
            series = data.series[q][li] if q in data.series and data.has(q)[li] else \
                (prep.layer[li] if q == "layer_height" and prep.layer is not None else None)
        if sk is None or series is None:
            continue
        st = table.quantities[sk]
        if st.range_min is None:
            continue
        v = series[upto]
        v = v[np.isfinite(v)]
        if v.size and (v.max() > st.range_max * (1 + 1e-9) or v.min() < st.range_min * (1 - 1e-9) - 1e-12):
            notes.append(f"{sk} outside the validated range {st.range_text}")
    return ("corrected with statistics outside their validated range: " + "; ".join(notes)) if notes else None


def _plot_locations(prep, crit, factors, corr) -> dict:
    out = {lid: {} for lid in prep.ids}
    sub = {k: v[:BAND_SAMPLES] for k, v in factors.items()}
    S = len(next(iter(sub.values()))) if sub else 0
    labels = {"temperature": ("Gas temperature", "degC"), "visibility": ("Visibility", "m"),
              "heat_flux": ("Radiant heat flux", "kW/m^2"), "layer_height": ("Smoke layer height", "m"),
              "fed_toxic": ("FED, asphyxiant gases", "-"), "fed_heat": ("FED, heat", "-"),
              "fed_hypoxia": ("FED, low oxygen", "-"), "fec_irritant": ("FEC, irritant gases", "-")}
    for cid, c in crit.items.items():
        rows = np.flatnonzero(corr[cid].assessed)
        if rows.size == 0:
            continue
        if cid in aset.DOSE_CRITERIA:
            curves = _dose_curves(prep, c, rows, sub, S)
        elif cid == "fec_irritant":       # raw FEC only (a sum over gases; no band drawn)
            from .tenability.irritants import fec_irritant
            curves = {li: (fec_irritant(**{g: v[li] for g, v in prep.gases.items() if g in IRRITANT_GASES}), None)
                      for li in rows}
        else:
            curves = {li: _series_curves(prep, c, li, sub, S) for li in rows}
        label, unit = labels[cid]
        for li in rows:
            raw, band = curves[li]
            out[prep.ids[li]][cid] = {"label": label, "unit": unit, "raw": raw, "band": band, "limit": c.limit,
                                      "direction": c.direction}
    return out


def _dose_curves(prep, c, rows, sub, S) -> dict:
    """Raw cumulative dose and the corrected p05/p95 band at each of ``rows``, from one dose grid each."""
    raw_field = aset.dose_field(prep, c, {}, 1, rows)
    fld = aset.dose_field(prep, c, sub, S, rows) if S else None
    out = {}
    for j, li in enumerate(rows):
        raw = raw_field.grid[0, j]
        if fld is None:
            out[li] = (raw, None)
            continue
        curves = np.einsum("sc,scn->sn", fld.weights, fld.grid[fld.corners, j, :])
        out[li] = (raw, (np.percentile(curves, 5, axis=0), np.percentile(curves, 95, axis=0)))
    return out


def _series_curves(prep, c, li, sub, S):
    """Raw curve and corrected p05/p95 band of one single-series criterion at one location."""
    cid = c.id
    if cid == "temperature":
        base, amb = prep.rise[li], prep.amb_c[li]
        raw = amb + base
        fk = "temperature"
        fn = (lambda f: amb + base[None, :] * f[:, None])
    elif cid in ("heat_flux", "layer_height"):
        raw = prep.flux[li] if cid == "heat_flux" else prep.layer[li]
        fk = cid
        fn = (lambda f: raw[None, :] * f[:, None])
    else:
        from .tenability.visibility import visibility_from_extinction
        cs = c.params.get("sign_constant", 8.0)
        k = prep.extinction[li]
        cap = max(30.0, 3 * c.limit)          # plotting cap only: clear air has infinite visibility
        raw = np.minimum(visibility_from_extinction(k, cs), cap)
        fk = aset.smoke_factor_key(prep.smoke_kind[li])
        fn = (lambda f: np.minimum(visibility_from_extinction(k[None, :] * f[:, None], cs), cap))
    if not S or fk not in sub:
        return raw, None
    curves = fn(sub[fk])
    return raw, (np.percentile(curves, 5, axis=0), np.percentile(curves, 95, axis=0))


def credibility(loaded: Loaded, index: int, crit):
    """Grid sensitivity of raw times to limit over the scenario's resolutions (Celik et al. 2008)."""
    spec = loaded.study.scenarios[index]
    runs = loaded.resolutions.get(spec.id) or []
    if len(runs) < 2:
        return None, {}
    threshold = loaded.study.max_grid_change
    per_run = []
    for cell, d in runs:
        p = aset.prepare(d, crit, spec.ambient_temperature_c, spec.ambient_o2)
        res = aset.evaluate(p, crit, {}, 1, with_bound=False)
        per_run.append((cell, res, aset.location_aset(res)[:, 0]))
    cells = [c for c, _, _ in per_run]
    locs, plots = [], {}
    for li, lid in enumerate(loaded.data[spec.id].location_ids):
        entry, plot = {"id": lid, "criteria": {}}, {}
        for cid in crit.items:
            if not all(res[cid].assessed[li] for _, res, _ in per_run):
                continue
            vals = [_t(res[cid].times[li, 0]) for _, res, _ in per_run]
            entry["criteria"][cid] = _gci_entry(cells, vals, threshold)
            plot[cid] = {"cells": cells, "values_s": vals, "extrapolated_s": entry["criteria"][cid]["extrapolated_s"]}
        vals = [_t(a[li]) for _, _, a in per_run]
        entry["aset"] = _gci_entry(cells, vals, threshold)
        plot["aset"] = {"cells": cells, "values_s": vals, "extrapolated_s": entry["aset"]["extrapolated_s"]}
        locs.append(entry)
        plots[lid] = plot
    return {"resolutions": cells, "threshold": threshold, "locations": locs,
            "method": "Celik et al. (2008), J. Fluids Eng. 130, 078001; Roache (1994)"}, plots


def _gci_entry(cells, vals, threshold) -> dict:
    g = grid_convergence(cells, vals)
    rc = g.get("relative_change")
    return {"cells_m": g.get("h"), "values_s": g.get("values"),
            "relative_change": None if rc is None else round(rc, 4), "flagged": bool(flag_change(rc, threshold)),
            "convergence": g.get("convergence"), "order": _r(g.get("p")),
            "extrapolated_s": _r(g.get("phi_ext21")), "gci": _r(g.get("gci_fine21")), "note": g.get("note")}


def _r(x, n=4):
    return None if x is None or not np.isfinite(x) else round(float(x), n)


def build_results(loaded: Loaded, options: RunOptions):
    """Run every scenario; return (results dict, plot data)."""
    study = loaded.study
    S = options.samples or study.samples
    seed = study.seed if options.seed is None else options.seed
    want_plots = options.html or options.pdf      # curves and bands are only for the report
    jobs = [(i, S, seed, want_plots) for i in range(len(study.scenarios))]
    workers = _workers(loaded, S, options.workers)
    if options.progress:
        options.progress(f"{len(jobs)} scenario(s), {S} samples" + (f", {workers} processes" if workers > 1 else ""))
    if workers > 1:
        outcomes = _run_parallel(loaded, jobs, workers)
    else:
        outcomes = [assess_scenario(loaded, *job) for job in jobs]
    scenarios = [sc for sc, _ in outcomes]
    plots = {spec.id: pl for spec, (_, pl) in zip(study.scenarios, outcomes)}
    inputs = [{"path": str(study.path), "sha256": sha256_of(study.path), "role": "study"}]
    if study.criteria.path is not None:
        inputs.append({"path": str(study.criteria.path), "sha256": sha256_of(study.criteria.path),
                       "role": "criteria"})
    if loaded.table is not None and loaded.table.path is not None:
        inputs.append({"path": str(loaded.table.path), "sha256": sha256_of(loaded.table.path),
                       "role": "model uncertainty"})
    seen = set()
    for spec in study.scenarios:
        files = [(spec.histories, loaded.data[spec.id])] + [(None, d) for _, d in loaded.resolutions.get(spec.id, [])]
        for _, d in files:
            if str(d.path) in seen:
                continue
            seen.add(str(d.path))
            inputs.append({"path": str(d.path), "sha256": d.sha256, "role": f"histories ({spec.id})",
                           "rows": d.rows, "t_start_s": float(d.t_s[0]), "t_end_s": float(d.t_s[-1]),
                           "columns": [{"column": c.column, "series": c.series, "location": c.location,
                                        "unit_as_read": c.unit_as_read} for c in d.columns]})
    results = {
        "version": __version__, "seed": seed, "samples": S,
        "generated": date.today().isoformat(),
        "study": {"title": study.title, "reference": study.reference, "prepared_by": study.prepared_by,
                  "prepared_for": study.prepared_for, "paper": study.paper, "path": str(study.path),
                  "sha256": sha256_of(study.path)},
        "inputs": inputs,
        "criteria": study.criteria.as_results(),
        "uncertainty": loaded.table.as_results() if loaded.table else None,
        "egress_method": egress_method(),
        "acceptance": {"max_p_fail": study.max_p_fail},
        "assumptions": assumptions(loaded),
        "warnings": [str(w) for w in loaded.warnings],
        "scenarios": scenarios,
    }
    return results, plots


#: Below this much work (samples x locations x rows, summed over scenarios) one process is
#: faster than starting several (measured on the benchmark machine; project choice).
PARALLEL_MIN_WORK = 2e8
_WORKER_LOADED: Loaded | None = None


def _workers(loaded: Loaded, S: int, requested: int | None) -> int:
    n = len(loaded.study.scenarios)
    if requested is not None:
        return max(1, min(requested, n))
    work = sum(S * len(d.location_ids) * len(d.t_s) for d in loaded.data.values())
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    if n < 2 or cores < 2 or work < PARALLEL_MIN_WORK or "fork" not in mp.get_all_start_methods():
        return 1
    return min(n, cores)


def _assess_in_worker(job):
    return assess_scenario(_WORKER_LOADED, *job)


def _run_parallel(loaded: Loaded, jobs, workers: int):
    """Scenarios in a process pool. Each scenario seeds its own streams from (seed, index),
    so the results are identical to a serial run (tested)."""
    global _WORKER_LOADED
    from concurrent.futures import ProcessPoolExecutor

    _WORKER_LOADED = loaded          # inherited by the forked workers, not pickled
    try:
        with ProcessPoolExecutor(workers, mp_context=mp.get_context("fork")) as pool:
            return list(pool.map(_assess_in_worker, jobs))
    finally:
        _WORKER_LOADED = None


def egress_method() -> dict:
    from .egress import movement as mv
    constants = [
        {"name": "speed constant k, corridors, ramps, doorways", "value": mv.K_LEVEL_M_S.get("corridor"),
         "unit": "m/s", "source": "SFPE Handbook, 5th ed., ch. 59 (hydraulic model); from memory"},
        {"name": "density coefficient a", "value": mv.A_DENSITY_M2, "unit": "m^2/person",
         "source": "SFPE Handbook, 5th ed., ch. 59; from memory"},
        {"name": "maximum specific flow, level elements", "value": mv.FSM_LEVEL_P_S_M, "unit": "persons/(s m)",
         "source": "SFPE Handbook, 5th ed., ch. 59; from memory"},
        {"name": "unimpeded speed as a fraction of k", "value": mv.UNIMPEDED_FRACTION, "unit": "-",
         "source": "SFPE Handbook, 5th ed., ch. 59; from memory"},
    ]
    for row in mv.STAIR_ROWS:
        constants.append({"name": f"stair {row['riser_m'] * 1000:.0f}/{row['tread_m'] * 1000:.0f} mm: k, Fsm"
                          if isinstance(row, dict) else f"stair row {row}",
                          "value": f"{row['k']}, {row['fsm']}" if isinstance(row, dict) else str(row),
                          "unit": "m/s, persons/(s m)", "source": "SFPE Handbook, 5th ed., ch. 59; from memory"})
    for kind, b in mv.BOUNDARY_LAYER_M.items():
        constants.append({"name": f"boundary layer, {kind}", "value": b, "unit": "m",
                          "source": "SFPE Handbook, 5th ed., ch. 59; from memory"})
    return {"name": "hydraulic hand method",
            "text": ("RSET = detection + alarm + pre-movement + movement. Movement = travel time of the whole path "
                     "at unimpeded speed + occupants / flow capacity of the controlling element (or the larger of "
                     "the two where a route says movement: max). Uncertain times are sampled by inverse transform; "
                     "a detector rule uses the same sampled model-error factors as the ASET."),
            "constants": constants}


def assumptions(loaded: Loaded) -> list[str]:
    out = [
        "Times are counted from the start of the histories (taken as ignition).",
        "A limit is first reached at the first crossing, interpolated linearly between the bracketing samples; "
        "doses are integrated with the trapezoidal rule on the histories' own time grid.",
        "A gas series that is not supplied contributes nothing to a dose: its term is zero and any multiplier "
        "it would set is 1. Such gases are listed per location.",
        "Temperature is corrected as the rise above ambient (the first value of each series unless the study "
        "states the ambient), oxygen as the depletion below ambient, visibility through the extinction "
        "coefficient; other quantities as given.",
        "One model-error factor per quantity per Monte Carlo draw is shared by every location and time of a "
        "scenario (a systematic model error); quantities are drawn independently.",
        "The route ASET is the earliest ASET of the locations the occupants pass, draw by draw.",
    ]
    if loaded.table is None:
        out.append("No model-uncertainty table was applied: the predictions are uncorrected and the bands "
                   "show only the egress uncertainty.")
    return out


def run(study_path: Path, options: RunOptions) -> Path:
    """The whole pipeline; returns the output folder. Raises InputError for user mistakes."""
    loaded = load(study_path, options)
    results, plots = build_results(loaded, options)
    out = options.out or Path.cwd() / f"{Path(study_path).stem}-out"
    write_outputs(results, plots, out, options)
    return out


def write_outputs(results: dict, plots: dict, out: Path, options: RunOptions) -> None:
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}-", dir=out.parent))
    try:
        (tmp / "results.json").write_text(json.dumps(results, indent=2, sort_keys=False, allow_nan=False) + "\n",
                                          encoding="utf-8")
        if options.html or options.pdf:
            from .report import render_report
            if options.progress:
                options.progress("report")
            render_report(results, plots, tmp, paper=results["study"].get("paper", "A4"), pdf=options.pdf)
        if out.exists():
            backup = out.with_name(f".{out.name}-old")
            if backup.exists():
                shutil.rmtree(backup)
            out.rename(backup)
            tmp.rename(out)
            shutil.rmtree(backup)
        else:
            tmp.rename(out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
