"""load -> assess -> report, in that order, nothing else.

The only module that knows the order of the steps. Outputs are assembled in a temporary
folder beside the destination and moved into place only when everything succeeded.
"""

from __future__ import annotations

import json
import multiprocessing as mp
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__, aset, assess, design, ensemble, exposure, outputs, plausibility, sensitivity_indices
from .plausibility import Finding
from .clock import shift_to_ignition
from .egress import summary as egress_summary
from .credibility import GCI_THRESHOLD, grid_convergence, grid_flags
from .errors import InputError, Problem
from .histories import ScenarioData, read_scenario, sha256_of
from .stats import rounded as _t, summarise
from .study import SERIES_KEYS, SMOKE_KEYS, Study, check_study, data_problems
from .tenability.irritants import IRRITANT_GASES
from .uncertainty import UncertaintyTable, factor_ppf, load_table
from .yamlfile import load_located
from .records import RouteResult, route_json
from .scenario_records import CriterionAtLocation, LocationResult, ScenarioResult, location_json, scenario_json
from .paths import relative_text, shown_path
from .verdict import ci_method, could_settle, decide, draw_outcomes, planned_looks, sequential, worst_outcome

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
    progress: object = None               # None or progress.Progress-like: stage(name, total), step(n), done()
    workers: int | None = None            # processes over scenarios; None: automatic
    criteria: str | None = None           # replace the study's criteria: bundled name or file (cwd)
    force: bool = False                   # an earlier output holding other files: replace only the tool's own
    command: str | None = None            # the command line, recorded in the output's manifest
    #: filled by run(): warnings found once the output is in place (a set-aside folder that
    #: could not be removed), for the command line to print
    notices: list = field(default_factory=list)


@dataclass
class Loaded:
    study: Study
    table: UncertaintyTable | None
    data: dict[str, ScenarioData]
    resolutions: dict[str, list[tuple[float, ScenarioData]]]
    warnings: list[Problem] = field(default_factory=list)
    #: Plausibility findings and whether a location acknowledged each (accept_warnings).
    findings: list[tuple[Finding, bool]] = field(default_factory=list)
    #: Ensemble scenarios: every member's histories, in the order of ``spec.ensemble``.
    members: dict[str, list[ScenarioData]] = field(default_factory=dict)
    #: Design-fire heat-release rate per scenario id: (times from ignition [s], kW, file or None).
    hrr: dict = field(default_factory=dict)
    #: Per scenario id, the prepared series and the raw (uncorrected) results the screen made
    #: (:func:`screen`), so that assessing the scenario does not prepare and evaluate them again.
    raw: dict = field(default_factory=dict)


def load(study_path: Path, options: RunOptions | None = None) -> Loaded:
    """Read and check the study and every file it names; raise InputError with all problems."""
    options = options or RunOptions()
    study, specs, problems = check_study(study_path, criteria_override=options.criteria)
    if study is None:
        # Report the problems of every file that could be read, too: each scenario's CSV,
        # its resolutions' CSVs and the model-uncertainty table ("every problem at once").
        for spec in specs:
            if spec.time is None:
                continue
            paths = [spec.histories] + [r.histories for r in getattr(spec, "resolutions", None) or []]
            for k, path in enumerate(paths):
                if path is None or not path.is_file() or (k and path.resolve() == paths[0].resolve()):
                    continue
                try:
                    read_scenario(spec, None if k == 0 else path)
                except InputError as exc:
                    problems.extend(exc.problems)
        unc_path = options.uncertainty or _named_table(Path(study_path))
        if unc_path is not None and not options.raw_only and Path(unc_path).is_file():
            try:
                load_table(Path(unc_path))
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
            warnings.extend(table.warnings)
        except InputError as exc:
            problems.extend(exc.problems)
    signs = study.criteria.visibility_signs
    if signs is not None and signs["default"]:
        warnings.append(Problem(f"{study.path} criteria", "the visibility criterion assumes "
                                f"{signs['signs']} exit signs (C = {signs['sign_constant']:g}, Jin) because the "
                                "criteria do not say which signs the building has; with light-reflecting signs "
                                "(C = 3) the same visibility needs a lower extinction coefficient: state "
                                "'signs: light-emitting' or 'signs: light-reflecting' in the visibility criterion",
                                warning=True))
    data, res, members = {}, {}, {}
    for spec in study.scenarios:
        try:
            d, w = read_scenario(spec)
            d = _on_ignition_clock(spec, d, problems)
            data[spec.id] = d
            warnings.extend(w)
        except InputError as exc:
            problems.extend(exc.problems)
        runs = []
        for r in spec.resolutions:
            if r.histories.resolve() == spec.histories.resolve():
                if spec.id in data:
                    runs.append((r.cell_m, data[spec.id]))
                continue
            try:
                d2, w2 = read_scenario(spec, r.histories)
                d2 = _on_ignition_clock(spec, d2, problems)
                warnings.extend(w2)
                runs.append((r.cell_m, d2))
            except InputError as exc:
                problems.extend(exc.problems)
        res[spec.id] = runs
        if spec.ensemble:        # an ensemble of fire runs: every member on the scenario's column map
            def read_member(path, spec=spec):
                d_m, w_m = read_scenario(spec, path)
                return _on_ignition_clock(spec, d_m, problems), w_m
            members[spec.id], w_e, p_e = ensemble.read_members(spec, read_member, options.progress)
            warnings.extend(w_e)
            problems.extend(p_e)
    hrr = _read_hrr(study, problems)
    problems.extend(data_problems(study, data, options.samples))   # what only the data can tell (memory, detectors)
    if any(not p.warning for p in problems):
        raise InputError(problems + [w for w in warnings if w.warning])
    prepared = {spec.id: _prepare_raw(spec, data[spec.id], study.criteria) for spec in study.scenarios}
    findings = screen(study, data, prepared)
    warnings.extend(p for p, (_, acknowledged) in zip(_finding_problems(study, data, findings), findings)
                    if not acknowledged)
    return Loaded(study, table, data, res, warnings, findings=findings, members=members, hrr=hrr, raw=prepared)


def _prepare_raw(spec, data: ScenarioData, crit) -> tuple:
    """A scenario's prepared series and its raw (uncorrected, one-draw) results."""
    prep = aset.prepare(data, crit, spec.ambient_temperature_c, spec.ambient_o2)
    return prep, aset.evaluate(prep, crit, {}, 1)


def _rough_rset_s(study: Study, sid: str) -> float | None:
    """The smallest, over the scenario's routes, of median detection + alarm + pre-movement [s]
    (no movement; a detector rule counts 0): a low estimate of the median RSET."""
    from .egress import distributions as dist
    out = []
    for r in study.routes:
        if r.scenarios is not None and sid not in r.scenarios:
            continue
        try:
            det = dist.median(r.detection) if isinstance(r.detection, dict) else 0.0
            out.append(det + dist.median(r.alarm) + dist.median(r.premovement))
        except Exception:   # a spec the screen cannot read is judged by the egress model, not here
            continue
    return min(out) if out else None


def screen(study: Study, data: dict[str, ScenarioData], prepared: dict | None = None) -> list[tuple[Finding, bool]]:
    """The plausibility screen (:mod:`egressmargin.plausibility`) of every scenario, with whether a
    location acknowledged each finding (``accept_warnings``). ``prepared``: each scenario's
    (prepared series, raw results) of :func:`_prepare_raw`, made here where not given."""
    from .units import same_unit
    out = []
    for spec in study.scenarios:
        d = data.get(spec.id)
        if d is None:
            continue
        columns = {(c.location, c.series): (c.column, c.unit_as_read) for c in d.columns
                   if c.series not in ("time", "temperature_profile")}
        time_col = next(((c.column, c.unit_as_read) for c in d.columns if c.series == "time"), None)
        prep, raw = (prepared or {}).get(spec.id) or _prepare_raw(spec, d, study.criteria)
        first = {lid: {cid: float(r.times[li, 0]) for cid, r in raw.items() if r.assessed[li]}
                 for li, lid in enumerate(d.location_ids) if spec.locations[li].role != "detector"}
        smoke = {k: prep.extinction for k in ("optical_density", "soot") if prep.extinction is not None}
        found = plausibility.screen_scenario(
            spec.id, d.location_ids, d.series, d.present, columns, t_end_s=d.end_s, time_column=time_col,
            time_in_seconds=time_col is not None and same_unit(time_col[1], "s", "time"),
            ambient_c=spec.ambient_temperature_c, ambient_o2=spec.ambient_o2,
            ceilings_m={loc.id: loc.profile.ceiling_m for loc in spec.locations if loc.profile is not None},
            rough_rset_s=_rough_rset_s(study, spec.id), first_reached_s=first, smoke_extinction=smoke)
        accepted = {loc.id: set(loc.accept_warnings) for loc in spec.locations}
        for f in found:
            ack = (f.code in accepted.get(f.location, set()) if f.location is not None
                   else any(f.code in a for a in accepted.values()))
            out.append((f, ack))
    return out


def _finding_problems(study: Study, data: dict, findings) -> list[Problem]:
    """Each finding as a located warning (the CSV column, else the location or scenario in the study)."""
    specs = {spec.id: spec for spec in study.scenarios}
    out = []
    for f, _ in findings:
        spec = specs[f.scenario]
        loc = next((loc for loc in spec.locations if loc.id == f.location), None)
        if f.column is not None:
            where = f"{data[f.scenario].path} column '{f.column}'"
        else:
            where = loc.where if loc is not None else spec.where
        place = f"scenario '{f.scenario}'" + (f", location '{f.location}'" if f.location else "")
        series = f.series + (f" (column '{f.column}')" if f.column else "")
        hint = (f"acknowledge with accept_warnings: [{f.code}] on the location" if f.location
                else f"acknowledge with accept_warnings: [{f.code}] on a location of the scenario")
        out.append(Problem(where, f"{place}, {series}: {f.message} [{f.code}; {hint}]", warning=True))
    return out


def _named_table(study_path: Path) -> Path | None:
    """The model-uncertainty table a study names (``uncertainty:``), read again from the file
    when the study has errors, so that the table's own problems are reported with them."""
    try:
        value = load_located(study_path).data.get("uncertainty")
    except (InputError, AttributeError):
        return None
    return study_path.parent / value if isinstance(value, str) and value.strip() else None


def _read_hrr(study: Study, problems: list[Problem]) -> dict:
    """Each scenario's design-fire heat-release rate (`design_fire: {hrr: ...}`), read with its
    unit; problems are added to ``problems``. A column of the histories counts from ignition
    as they do; a file of its own is taken as counting from ignition (project choice)."""
    from .hrr import read_curve

    out = {}
    for spec in study.scenarios:
        ref = spec.hrr
        if ref is None:
            continue
        try:
            if ref.file is None:
                if spec.time is None or spec.histories is None:
                    continue
                t, q = read_curve(spec.histories, spec.time.column, spec.time.unit, ref.column, ref.unit, ref.where,
                                  spec.delimiter, spec.decimal, spec.units_row,
                                  shown=relative_text(str(spec.histories), study.base_dir))
                t = t - (spec.ignition_s if spec.ignition_s is not None else float(t[0]))
            else:
                t, q = read_curve(ref.file, ref.time, ref.time_unit, ref.column, ref.unit, ref.where,
                                  shown=relative_text(str(ref.file), study.base_dir))
        except InputError as exc:
            problems.extend(exc.problems)
            continue
        out[spec.id] = (t, q, ref.file)
    return out


def _on_ignition_clock(spec, data: ScenarioData, problems: list[Problem]) -> ScenarioData:
    """Times from ignition (``scenarios[].ignition`` on the file's clock, default its first time)."""
    try:
        shifted, note = shift_to_ignition(data, spec.ignition_s)
    except ValueError as exc:
        problems.append(Problem(f"{spec.where}.ignition" if spec.where else "ignition",
                                f"{exc}; expected a time within the histories of {data.path}"))
        return data
    shifted.ignition_s = float(data.t_s[0]) if spec.ignition_s is None else float(spec.ignition_s)
    shifted.clock_note = note
    return shifted


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
            out[sk] = ((lambda u, sk=sk, fk=fk: _engine_factor(fk, sk, factor_ppf(table, sk, np.atleast_1d(u))
                                                               .reshape(np.shape(u)))), [])
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


def _repeat_draws(raw: dict, S: int) -> dict:
    """The one-draw results ``raw`` as S identical draws (no model-error correction)."""
    return {cid: aset.CriterionResult(np.repeat(r.times, S, axis=1), r.assessed, r.missing, None, r.partial)
            for cid, r in raw.items()}


def assess_scenario(loaded: Loaded, index: int, S: int, seed: int, plots: bool = True):
    """Everything about one scenario: location criteria, routes, credibility; plus plot data."""
    study, table = loaded.study, loaded.table
    spec = study.scenarios[index]
    data = loaded.data[spec.id]
    crit = study.criteria
    prep, raw = loaded.raw.get(spec.id) or _prepare_raw(spec, data, crit)     # made once, at load
    raw_aset = aset.location_aset(raw)[:, 0]
    factors = draw_scenario_factors(table, prep, S, seed, index) if table else {}
    ens = ensemble.build(spec, loaded.members.get(spec.id), crit, S, seed, index, study.routes)   # None: one run
    if ens is not None:
        corr = ens.evaluate(crit, factors, S)       # each member on its own draws
    elif factors:
        corr = aset.evaluate(prep, crit, factors, S)
    else:
        corr = _repeat_draws(raw, S)
    loc_aset = aset.location_aset(corr)
    end = data.end_s
    end_v = end if ens is None else ens.end_per_draw      # an ensemble's draws end with their member's data
    if ens is not None:
        end = float(ens.ends_s.max())
        prep = ensemble.MemberPrep(ens, prep)     # detector rules read each draw's own member
    loc_records = _location_records(spec, prep, data, table, crit, raw, corr, raw_aset, loc_aset, ens)
    governing_raw = [r.governing_raw for r in loc_records]
    locations = [location_json(r) for r in loc_records]     # what the route loop reads
    # sensitivity factor rows, evaluated once per scenario
    routes_here = [(i, r) for i, r in enumerate(study.routes) if r.scenarios is None or spec.id in r.scenarios]
    sweep = None
    if routes_here:
        ppfs = factor_ppfs(table, prep)
        sweep_factors, sweep_index = assess.factor_sweep_rows(ppfs)
        R = 1 + 2 * len(sweep_index)
        sweep_res = aset.evaluate(prep, crit, sweep_factors, R, with_bound=False) if ppfs else _repeat_draws(raw, R)
        sweep = (sweep_factors, sweep_index, aset.location_aset(sweep_res))
    routes, route_plots = [], {}
    specs_here = [r for _, r in routes_here]

    # every occupant's times are kept for the routes whose exposure is followed (all of them when
    # the occupants take part in the verdict)
    keep_persons = True if study.acceptance_basis != "route-aset" else None

    def egress_at(n: int, fac_n: dict, prep_n=prep):
        return assess.scenario_egress(specs_here, prep_n, fac_n, [assess.egress_uniforms(seed, ri, n)
                                                                for ri, _ in routes_here], study.elements,
                                      per_person=keep_persons)

    egress = egress_at(S, factors) if routes_here else None
    # raw deterministic margin: raw ASET against RSET at median inputs
    egress_med = assess.scenario_egress(specs_here, prep, {}, [assess.EgressDraws.median()] * len(specs_here),
                                        study.elements) if routes_here else None
    more = _MoreSamples(table, prep, crit, seed, index, raw, ens)
    s_max = max(study.max_samples, S)
    schedule = planned_looks(S, s_max)      # the sequential rule's planned looks (verdict.py)
    bigger: dict[int, object] = {}
    sensitivities = None
    for ri, route in routes_here:
        # every occupant's exposure: with `exposure: along-route`, or when the occupants take part in the verdict
        occupants_count = study.acceptance_basis != "route-aset"

        # Settle the statistics by sampling more where the interval straddles the limit: the
        # scenario's ASET and its (shared) egress again at the next planned look (twice the
        # draws, same seed streams); each look's interval is corrected for the number of looks.
        # When the occupants take part in the verdict, their verdict is settled the same way.
        def draw_at(n: int, route=route):
            if n == S:
                fac_n, loc_n, eg_n, ens_n = factors, loc_aset, egress, ens
            else:
                fac_n, loc_n = more.at(n)
                ens_n = more.ensemble_at(n)           # an ensemble: members assigned to the n draws again
                if n not in bigger:
                    bigger.clear()                                   # keep one count: memory
                    bigger[n] = egress_at(n, fac_n, prep if ens_n is None else prep.for_ensemble(ens_n))
                eg_n = bigger[n]
            o = assess.outcome(route, prep, loc_n, raw_aset, governing_raw, eg_n.routes[route.id])
            end_n = end_v if ens_n is None else ens_n.end_per_draw
            ex_n = v_n = None
            if occupants_count:
                ex_n, v_n = _occupants(route, prep, crit, fac_n, n, eg_n, study.max_p_fail, s_max, schedule, ens_n)
            return o.aset, o.rset, None, o, eg_n, fac_n, ens_n, end_n, ex_n, v_n

        s_used, (_, _, _, out, eg, fac_r, ens_r, end_r, ex, v_occ) = sequential(
            schedule, draw_at, lambda got: got[7], study.max_p_fail,
            more=lambda got: got[8] is not None and got[8].assessed and could_settle(got[9], study.max_p_fail))
        if ex is None and route.along_route:
            ex, v_occ = _occupants(route, prep, crit, fac_r, s_used, eg, study.max_p_fail, s_max, schedule, ens_r)
        margin_raw = out.aset_raw - float(egress_med.routes[route.id].rset[0])
        route_locs = [locations[prep.ids.index(loc)] for loc in route.exposed_at]
        assessed_any = any(c.get("status") == "assessed" for loc in route_locs for c in loc["criteria"].values())
        v = decide(out.aset, out.rset, end_r, study.max_p_fail, assessed=assessed_any, max_samples=s_max,
                   looks=len(schedule), schedule=schedule)
        la = out.extras.get("location_aware")
        v_la = None if la is None else decide(la.aset_s, la.leave_s, end_r, study.max_p_fail, assessed=assessed_any,
                                              outcomes=worst_outcome(draw_outcomes(la.aset_s, la.leave_s, end_r)),
                                              looks=len(schedule), schedule=schedule)
        if sensitivities is None:          # every route's sweep in one flow run of the scenario
            sf, si, sa = sweep
            sensitivities = assess.scenario_sensitivity(specs_here, prep, sf, si, sa,
                                                        {k: _label(k) for k in si_keys(si)}, study.elements)
            indices = sensitivity_indices.scenario_indices(specs_here, prep, crit, ppfs, {k: _label(k) for k in ppfs},
                                                           study.elements, end, seed, index, samples=S, ensemble=ens)
            if ens is not None and len(ens.specs) > 1:       # the fire run as one more row of the table
                member_rows = ens.member_rows(ens.median_margins(specs_here, crit, sf, study.elements))
                for rid, row in member_rows.items():
                    rows_r = sensitivities[rid]
                    rows_r.append(dict(row, base_margin_s=rows_r[0]["base_margin_s"] if rows_r else None,
                                       lower_bound=bool(row["lower_bound_members"])))
                    rows_r.sort(key=lambda r: -(r["swing_s"] if r["swing_s"] is not None else np.inf))
        v_route = v
        v = exposure.governing(study.acceptance_basis, v_route, v_occ)
        result = RouteResult(
            route=route, outcome=out, flow=eg.routes[route.id], nodes=eg.nodes, end_s=end_r, margin_raw_s=margin_raw,
            not_assessed=[{"location": loc["id"], "criterion": cid} for loc in route_locs
                          for cid in loc["not_assessed"]],
            partial=sorted({f"{cid} at {loc['id']}" for loc in route_locs
                            for cid, c in loc["criteria"].items() if c.get("partial")}),
            criteria_assessed=assessed_any, verdict=v, location_aware_verdict=v_la,
            along_route=(assess.along_route_dose(route, prep, crit, fac_r, s_used, eg.routes[route.id], ex)
                         if ex is not None else None),
            sensitivity=sensitivities[route.id], sensitivity_indices=indices[route.id], occupant_verdict=v_occ,
            route_aset_verdict=v_route, basis=study.acceptance_basis)
        entry = route_json(result)
        if ens is not None:
            entry["by_member"] = ens_r.by_member(out.aset, out.rset)
            if entry.get("along_route"):
                entry["along_route"]["ensemble_note"] = ensemble.ALONG_ROUTE_NOTE
        entry["draw_counts"] = design.counts_from_outcomes(draw_outcomes(out.aset, out.rset, end_r),
                                                           v.deterministic, assessed_any).as_results()
        if isinstance(entry.get("movement"), dict):      # the hand calculation validate --explain prints
            entry["movement"]["hand"] = egress_summary.hand_movement(route)
        routes.append(entry)
        route_plots[route.id] = {"aset_samples": out.aset, "rset_samples": out.rset, "margin_samples": out.margin}
        if ex is not None:
            route_plots[route.id]["occupant_dose"] = exposure.person_bands(ex)
    range_records = [{"location": r.id, **f} for r in loc_records
                     for c in r.criteria.values() for f in c.range_findings]
    _mark_bearing(range_records, routes)
    hrr_entry, hrr_plot = _design_fire_hrr(loaded, spec)
    cred, cred_plot = credibility(loaded, index, crit)
    scenario = ScenarioResult(
        id=spec.id, title=spec.title, end_s=end, histories=shown_path(data.path, study.base_dir),
        ignition_s=data.ignition_s, clock_note=data.clock_note, locations=loc_records, routes=routes,
        range_warnings=range_records,
        shared_elements=egress_summary.shared_keys(egress.nodes, study.elements) if routes_here else [],
        design_fire=spec.design_fire or None, ensemble=ens.results(study.base_dir) if ens is not None else None,
        hrr=hrr_entry, credibility=cred)
    detectors = {loc.id for loc in spec.locations if loc.role == "detector"}
    plot = {"t_s": data.t_s, "locations": _plot_locations(prep, crit, factors, corr, detectors) if plots else {},
            "routes": route_plots, "credibility": cred_plot, "hrr": hrr_plot}
    return scenario_json(scenario), plot


def _design_fire_hrr(loaded: Loaded, spec) -> tuple[dict | None, dict | None]:
    """The scenario's heat-release rate: its results.json entry and its curve for the report
    (None, None when the scenario gives none)."""
    if spec.id not in loaded.hrr:
        return None, None
    from .hrr import describe_growth
    t_h, q_h, f_h = loaded.hrr[spec.id]
    entry = {"source": (shown_path(f_h, loaded.study.base_dir) if f_h is not None else "histories"),
             "column": spec.hrr.column, **describe_growth(t_h, q_h)}
    return entry, {"t_s": t_h, "q_kw": q_h}


def _location_records(spec, prep, data, table, crit, raw, corr, raw_aset, loc_aset, ens) -> list[LocationResult]:
    """Every location's record: each criterion's raw and corrected crossings, the validated-range
    findings, and the location's ASET (per member for an ensemble). A detector location is not
    assessed for tenability and holds no criteria."""
    out = []
    for li, lid in enumerate(prep.ids):
        loc = spec.locations[li]
        if loc.role == "detector":
            out.append(LocationResult(id=lid, title=loc.title, role="detector", height_m=loc.height_m))
            continue
        crits = {}
        for cid, c in crit.items.items():
            r, rr = corr[cid], raw[cid]
            if not r.assessed[li]:
                crits[cid] = CriterionAtLocation(limit=c.limit, unit=c.unit, assessed=False,
                                                 missing_series=r.missing[li])
                continue
            times = r.times[li]
            note, found = _range_findings(table, prep, data, cid, li, rr.times[li, 0], times)
            crits[cid] = CriterionAtLocation(
                limit=c.limit, unit=c.unit, assessed=True, raw_s=float(rr.times[li, 0]), times_s=times,
                missing_series=r.missing[li], partial=bool(r.partial is not None and r.partial[li]),
                grid_bound_s=None if r.grid_bound_s is None else float(r.grid_bound_s[li]),
                range_note=note or None, range_findings=found if note else [])
        out.append(LocationResult(id=lid, title=loc.title, role=loc.role, height_m=loc.height_m, criteria=crits,
                                  aset_raw_s=float(raw_aset[li]), aset_s=loc_aset[li],
                                  aset_by_member=ens.aset_by_member(li, loc_aset) if ens is not None else None))
    return out


def _occupants(route, prep, crit, fac, S, eg, max_p_fail, s_max, schedule, ens=None):
    """Every occupant's exposure on the route and the occupant-exposure verdict (its interval
    corrected for the planned looks, as the route verdict's); an ensemble's draws each on
    their own member (:meth:`egressmargin.ensemble.Ensemble.occupant_exposure`)."""
    ex = (exposure.occupant_exposure(route, prep, crit, fac, S, eg.routes[route.id]) if ens is None
          else ens.occupant_exposure(route, crit, fac, eg.routes[route.id]))
    return ex, exposure.occupant_verdict(ex, eg.routes[route.id].rset, max_p_fail, s_max, schedule=schedule)


def _mark_bearing(records: list[dict], routes: list[dict]) -> None:
    """Set ``bears_on_verdict`` on each range excursion: True when it is at the location and
    criterion that govern a route (its median ASET) and leaves the range before that
    crossing; ``routes`` names those routes. Other excursions cannot move a governing time."""
    for rec in records:
        rec["routes"] = []
        for rt in routes:
            t_gov = (rt.get("aset_s") or {}).get("p50")
            if (rt.get("governing_location") == rec["location"] and rt.get("governing_criterion") == rec["criterion"]
                    and t_gov is not None and rec["first_outside_s"] <= t_gov):
                rec["routes"].append(rt.get("id"))
                rec["governing_crossing_s"] = t_gov
        rec["bears_on_verdict"] = bool(rec["routes"])


class _MoreSamples:
    """The scenario's ASET draws at a larger sample count, computed once per count."""

    def __init__(self, table, prep, crit, seed, index, raw, ens=None):
        self.table, self.prep, self.crit, self.seed, self.index, self.raw = table, prep, crit, seed, index, raw
        self.ens = ens                  # an ensemble: its members are assigned to the larger count again
        self.cache: dict[int, tuple[dict, np.ndarray]] = {}
        self.ensembles: dict[int, object] = {}

    def at(self, S: int):
        if S not in self.cache:
            factors = draw_scenario_factors(self.table, self.prep, S, self.seed, self.index) if self.table else {}
            if self.ens is not None:
                ens_n = self.ens.resized(S)
                res = ens_n.evaluate(self.crit, factors, S, with_bound=False)    # each member on its own draws
                self.ensembles = {S: ens_n}
            else:
                res = (aset.evaluate(self.prep, self.crit, factors, S, with_bound=False) if factors
                       else _repeat_draws(self.raw, S))
            self.cache = {S: (factors, aset.location_aset(res))}    # keep one count: memory
        return self.cache[S]

    def ensemble_at(self, S: int):
        """The ensemble at S draws (None: one set of histories)."""
        return self.ensembles.get(S) if self.ens is not None else None


def _range_findings(table, prep, data, cid, li, raw_t, times) -> tuple[str | None, list[dict]]:
    """A warning, in words, where predictions that matter lie outside the table's validated range.

    The predictions that matter run up to the latest crossing (raw and every corrected draw), or to
    the end of the data when some draw does not reach the limit; the ambient stretch before a series
    first reaches the range is not counted (:func:`uncertainty.range_excursion`). The sentence names
    the quantity, how far and when it leaves the range, and the range; the caller adds the scenario,
    location and criterion.
    """
    from .uncertainty import FALLING, range_excursion

    if table is None:
        return None, []
    reached_all = bool(np.isfinite(raw_t)) and bool(np.isfinite(times).all())
    t_end = float(np.nanmax(np.append(times, raw_t))) if reached_all else float(prep.t_s[-1])
    # the median crossing is the one the report quotes (p50 over all draws, "not reached" kept as such)
    med = summarise(times).get("p50")
    med_words = f"median crossing {med:.0f} s" if med is not None else "median crossing not reached"
    upto = (f"up to the last draw's crossing ({t_end:.0f} s; {med_words})" if reached_all
            else f"up to the end of the data ({t_end:.0f} s; {med_words})")
    notes, items = [], []
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
        exc = range_excursion(prep.t_s, series, t_end, st.range_min, st.range_max, falling=sk in FALLING)
        if exc is not None:
            notes.append(_excursion_words(sk, st, exc, upto))
            items.append(_excursion_record(sk, st, exc, cid, med))
    return ("; ".join(notes) if notes else None), items


def _excursion_record(q, st, exc, cid, median_crossing_s) -> dict:
    """One validated-range excursion as a record (results.json scenario ``range_warnings``).

    ``beyond`` is how far the farthest counted value lies outside the range, in the
    table's range unit; ``excursion_rel`` the same as a share of the range's width (the
    size the appendix table sorts by)."""
    from .uncertainty import FALLING
    from .units import display_unit, from_internal

    unit = st.range_unit or display_unit(q)

    def show(x):
        return float(from_internal(np.array([x]), q, unit)[0])

    lo, hi = show(st.range_min), show(st.range_max)
    above = show(exc["peak"]) - hi if exc["above_by"] > 0 else 0.0
    below = lo - show(exc["trough"]) if exc["below_by"] > 0 else 0.0
    if exc["stays_outside"]:
        falls = q in FALLING
        extreme = show(exc["trough"] if falls else exc["peak"])
        beyond = (extreme - hi) if falls else (lo - extreme)
        side = "above" if falls else "below"
    else:
        extreme = show(exc["peak"]) if above >= below else show(exc["trough"])
        beyond, side = (above, "above") if above >= below else (below, "below")
    width = abs(hi - lo) or 1.0
    return {"criterion": cid, "quantity": q, "range": {"min": round(lo, 6), "max": round(hi, 6), "unit": unit},
            "side": side, "extreme": round(extreme, 6), "beyond": round(abs(beyond), 6),
            "excursion_rel": round(abs(beyond) / width, 6), "first_outside_s": round(exc["first_outside_s"], 3),
            "stays_outside": bool(exc["stays_outside"]), "median_crossing_s": median_crossing_s}


def _excursion_words(q, st, exc, upto) -> str:
    """One sentence on a range excursion, in the unit the table gives its range in."""
    from .uncertainty import FALLING
    from .units import display_unit, from_internal

    unit = st.range_unit or display_unit(q)

    def show(x):
        return float(from_internal(np.array([x]), q, unit)[0])

    lo, hi = show(st.range_min), show(st.range_max)
    head = f"{q} outside the validated range ({st.range_text or f'{lo:.4g} to {hi:.4g} {unit}'}): predictions {upto}"
    tail = "; corrected with statistics not validated there"
    if exc["stays_outside"]:
        falls = q in FALLING
        value = show(exc["trough"] if falls else exc["peak"])
        return (f"{head} stay {'above' if falls else 'below'} it, {'lowest' if falls else 'highest'} "
                f"{value:.4g} {unit}{tail}")
    parts = []
    if exc["above_by"] > 0:
        parts.append(f"reach {show(exc['peak']):.4g} {unit}, {show(exc['peak']) - hi:.3g} {unit} above it")
    if exc["below_by"] > 0:
        parts.append(f"fall to {show(exc['trough']):.4g} {unit}, {lo - show(exc['trough']):.3g} {unit} below it")
    return f"{head} " + " and ".join(parts) + f", first at {exc['first_outside_s']:.0f} s{tail}"


def _plot_locations(prep, crit, factors, corr, skip=frozenset()) -> dict:
    """Curves for the report's location figures; none for the locations in ``skip`` (detectors)."""
    out = {lid: {} for lid in prep.ids if lid not in skip}
    sub = {k: v[:BAND_SAMPLES] for k, v in factors.items()}
    S = len(next(iter(sub.values()))) if sub else 0
    labels = {"temperature": ("Gas temperature", "degC"), "visibility": ("Visibility", "m"),
              "heat_flux": ("Radiant heat flux", "kW/m^2"), "layer_height": ("Smoke layer height", "m"),
              "fed_toxic": ("FED, asphyxiant gases", "-"), "fed_heat": ("FED, heat", "-"),
              "fed_hypoxia": ("FED, low oxygen", "-"), "fec_irritant": ("FEC, irritant gases", "-")}
    for cid, c in crit.items.items():
        if cid not in labels:          # a criterion this figure does not know how to draw
            continue
        rows = np.array([li for li in np.flatnonzero(corr[cid].assessed) if prep.ids[li] not in skip], int)
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
    """Raw cumulative dose and the corrected p05/p95 band at each of ``rows``.

    The raw curve is integrated here from the raw series (trapezoidal rule, as the
    engine does), never read off the engine's cached grid of factor values: a grid node
    is a corrected curve, not the raw one. The band comes from the Monte Carlo grid.
    """
    raw_dose = aset.cumulative_dose(c, prep.t_s, aset.corrected_inputs(prep, aset.dose_quantities(c), {}, rows),
                                    (len(rows), len(prep.t_s)))
    fld = aset.dose_field(prep, c, sub, S, rows) if S else None
    out = {}
    for j, li in enumerate(rows):
        raw = raw_dose[j]
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
    max_gci = getattr(loaded.study, "max_gci", GCI_THRESHOLD)
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
            entry["criteria"][cid] = _gci_entry(cells, vals, threshold, max_gci)
            plot[cid] = {"cells": cells, "values_s": vals, "extrapolated_s": entry["criteria"][cid]["extrapolated_s"]}
        vals = [_t(a[li]) for _, _, a in per_run]
        entry["aset"] = _gci_entry(cells, vals, threshold, max_gci)
        plot["aset"] = {"cells": cells, "values_s": vals, "extrapolated_s": entry["aset"]["extrapolated_s"]}
        locs.append(entry)
        plots[lid] = plot
    return {"resolutions": cells, "threshold": threshold, "max_gci": max_gci, "locations": locs,
            "method": "Celik et al. (2008), J. Fluids Eng. 130, 078001; Roache (1994)"}, plots


def _gci_entry(cells, vals, threshold, max_gci=None) -> dict:
    """One results.json grid-sensitivity entry (Celik et al. 2008, Steps 1-5) and whether to flag it.

    Flagged (``credibility.grid_flags``, every reason listed in ``flag_reason``): a divergent or
    oscillatory triple (whatever the size of the change), a limit reached on some grids but not on
    others, a change between the two finest grids above ``threshold``, and for a monotone triple a
    fine-grid GCI above ``max_gci``, an apparent order outside 0.5-4 or an extrapolated time more
    than ``max_gci`` from the fine-grid time. A limit reached on no grid is not flagged: there is
    no time to be grid sensitive.
    """
    g = grid_convergence(cells, vals)
    rc = g.get("relative_change")
    reached_any = any(v is not None for v in g["values"])
    reasons = grid_flags(g, threshold, GCI_THRESHOLD if max_gci is None else max_gci)
    osc = g.get("oscillation_range")
    return {"cells_m": g.get("h"), "values_s": g.get("values"),
            "relative_change": None if rc is None else round(rc, 4), "flagged": bool(reasons),
            "flag_reason": "; ".join(reasons) or None, "flag_reasons": reasons, "reached_on_any_grid": reached_any,
            "convergence": g.get("convergence") if reached_any else "not reached",
            "convergence_ratio": _r(g.get("convergence_ratio")),
            "r21": _r(g.get("r21")), "r32": _r(g.get("r32")), "order": _r(g.get("p")),
            "extrapolated_s": _r(g.get("phi_ext21")), "e_a21": _r(g.get("e_a21"), 6),
            "e_ext21": _r(g.get("e_ext21"), 6), "gci": _r(g.get("gci_fine21")),
            "gci_fine21": _r(g.get("gci_fine21"), 6),
            "oscillation_bounds_s": None if osc is None else {"low": osc[0], "high": osc[1]},
            "note": g.get("note") if reached_any else "The limit is reached on none of the grids."}


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
    progress = options.progress
    if workers > 1:
        if progress:
            progress.stage(f"{len(jobs)} scenarios in {workers} processes, {S} samples")
        outcomes = _run_parallel(loaded, jobs, workers)
    else:
        outcomes = []
        for k, job in enumerate(jobs):
            if progress:
                progress.stage(f"scenario {study.scenarios[k].id} ({k + 1}/{len(jobs)})")
            outcomes.append(assess_scenario(loaded, *job))
    scenarios = [sc for sc, _ in outcomes]
    plots = {spec.id: pl for spec, (_, pl) in zip(study.scenarios, outcomes)}
    base = study.base_dir            # every path shown relative to the study file (paths.shown_path)
    inputs = [{"path": shown_path(study.path, base), "sha256": sha256_of(study.path), "role": "study"}]
    if study.criteria.path is not None:
        inputs.append({"path": shown_path(study.criteria.path, base), "sha256": sha256_of(study.criteria.path),
                       "role": "criteria"})
    if loaded.table is not None and loaded.table.path is not None:
        inputs.append({"path": shown_path(loaded.table.path, base), "sha256": sha256_of(loaded.table.path),
                       "role": "model uncertainty"})
    seen = set()
    for spec in study.scenarios:
        files = [(spec.histories, loaded.data[spec.id])] + [(None, d) for _, d in loaded.resolutions.get(spec.id, [])]
        files += [(None, d) for d in loaded.members.get(spec.id, [])]        # ensemble members
        for _, d in files:
            if str(d.path) in seen:
                continue
            seen.add(str(d.path))
            inputs.append({"path": shown_path(d.path, base), "sha256": d.sha256, "role": f"histories ({spec.id})",
                           "rows": d.rows, "t_start_s": float(d.t_s[0]), "t_end_s": float(d.t_s[-1]),
                           "columns": [{"column": c.column, "series": c.series, "location": c.location,
                                        "unit_as_read": c.unit_as_read} for c in d.columns]})
    for spec in study.scenarios:
        if spec.ensemble_table is not None:
            inputs.append({"path": shown_path(spec.ensemble_table, base), "sha256": sha256_of(spec.ensemble_table),
                           "role": f"ensemble parameters ({spec.id})"})
    for sid, (_, _, f_h) in loaded.hrr.items():
        if f_h is not None and shown_path(f_h, base) not in {i["path"] for i in inputs}:
            inputs.append({"path": shown_path(f_h, base), "sha256": sha256_of(f_h),
                           "role": f"heat-release rate ({sid})"})
    results = {
        "version": __version__, "seed": seed, "samples": S,
        "study": {"title": study.title, "reference": study.reference, "prepared_by": study.prepared_by,
                  "prepared_for": study.prepared_for, "paper": study.paper, "path": shown_path(study.path, base),
                  "sha256": sha256_of(study.path), "report": dict(study.report),
                  # basis of design and sign-off as given (no date added: results.json carries none)
                  "basis": dict(study.basis), "sign_off": dict(study.sign_off) if study.sign_off else None},
        "inputs": inputs,
        "criteria": study.criteria.as_results(),
        "uncertainty": _shown_table(loaded.table, base),
        "egress_method": egress_method(),
        "acceptance": {"max_p_fail": study.max_p_fail, "max_samples": study.max_samples,
                       "interval_method": ci_method(len(planned_looks(S, max(study.max_samples, S))),
                                                    planned_looks(S, max(study.max_samples, S))),
                       "basis": study.acceptance_basis},
        "raw_only": bool(options.raw_only),
        "assumptions": assumptions(loaded),
        "warnings": [relative_text(str(w), base) for w in loaded.warnings] + [w for sc in scenarios for w in sc["warnings"]],
        "scenarios": scenarios,
    }
    found = getattr(loaded, "findings", [])
    results["plausibility"] = [f.as_json(ack) for f, ack in found]
    results["acknowledged_warnings"] = [{"scenario": f.scenario, "location": f.location, "code": f.code,
                                         "message": f.message} for f, ack in found if ack]
    if study.scenario_weights is not None:      # weighted design fires: the design-level figure
        limit = study.max_p_fail if study.max_design_p_fail is None else study.max_design_p_fail
        results["design"] = design.design_results(scenarios, study.scenario_weights, limit, study.weights_source)
    return results, plots


def _shown_table(table, base):
    """The uncertainty table as applied, its path relative to the study file."""
    if table is None:
        return None
    out = table.as_results()
    if out.get("path"):
        out["path"] = shown_path(out["path"], base)
    return out


#: Below this much work (samples x locations x rows, summed over scenarios) one process is
#: faster than starting several (project choice from measurements on the 2-core reference
#: machine: with the per-scenario Sobol' design and exposure, the demo's 1.7e7 already gains
#: about 2 s wall from two processes, 6.0-6.6 s -> 4.0-4.1 s, results identical).
PARALLEL_MIN_WORK = 1e7
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
            "text": ("RSET = detection + alarm + pre-movement + movement of the last occupant. Movement is a flow "
                     "of persons: each element passes them first come, first served at its capacity (Fsm x "
                     "effective width) and they then walk its length; N persons pass the controlling (least "
                     "capacity) element in N/Fc and an element with spare capacity adds no time (flow in = flow "
                     "out); upstream of the controlling element people walk at unimpeded speed, from it on at the "
                     "speed of the density with which each element carries the flow (the density of maximum flow "
                     "1/(2a) at capacity, at most the group over the element's area; unimpeded below 0.54 "
                     "persons/m^2). Where everyone starts together this equals the hand form: travel + N/Fc. Routes using the same named "
                     "element share its capacity draw by draw (first come, first served, or the stream already "
                     "in it keeps its flow). Pre-movement is either one uncertain time for everyone or spread "
                     "across the occupants (person i of N at quantile (i - 1/2)/N); each route says which. "
                     "Uncertain times, counts and factors are sampled by inverse transform; a detector rule uses "
                     "the same sampled model-error factors as the ASET."),
            "constants": constants}


def assumptions(loaded: Loaded) -> list[str]:
    out = [
        "Times are counted from ignition: the histories' first time unless a scenario states its ignition "
        "time on the file's clock; detection, alarm and pre-movement count from the same instant.",
        "Per draw, a route fails when a limit is reached within the histories before its occupants are out, "
        "passes when they are out within the histories no later than that, and is undecided otherwise; "
        "p_fail counts undecided draws as failures. A route passes only when the upper end of the interval on "
        "p_fail is within the acceptance limit, fails only when the lower end of the interval on p_fail without "
        "the undecided draws exceeds it, and is indeterminate otherwise; where more draws are taken the interval "
        "is widened for the number of planned looks (Clopper-Pearson at 1 - 0.05/K), so that over all looks "
        "together a wrong pass and a wrong fail each stay at or below 2.5 %.",
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
    """The whole pipeline; returns the output folder. Raises InputError for user mistakes.

    The output folder is checked and claimed (locked, see :mod:`egressmargin.outputs`)
    right after loading, before any computing.
    """
    loaded = load(study_path, options)
    out = options.out or Path.cwd() / f"{Path(study_path).stem}-out"
    study = loaded.study
    inputs = [study.path, study.criteria.path, study.uncertainty_path, options.uncertainty,
              loaded.table.path if loaded.table else None]
    inputs += [d.path for d in loaded.data.values()]
    inputs += [d.path for runs in loaded.resolutions.values() for _, d in runs]
    inputs += [d.path for ms in loaded.members.values() for d in ms]
    inputs += [spec.ensemble_table for spec in study.scenarios if spec.ensemble_table is not None]
    inputs += [f for _, _, f in loaded.hrr.values() if f is not None]
    try:
        with outputs.claim(out, inputs, force=options.force, purpose="run") as target:
            results, plots = build_results(loaded, options)
            write_outputs(results, plots, out, options, target)
        options.notices.extend(target.leftover_warnings())
    finally:
        if options.progress:
            options.progress.done()       # a live line is cleared before any message that follows
    return out


def write_outputs(results: dict, plots: dict, out: Path, options: RunOptions,
                  target: outputs.OutputFolder | None = None) -> None:
    """Write results.json (and the report) into a staging folder beside ``out``, then put it in place.

    ``target`` is the claimed output folder; without it, ``out`` is checked and claimed here
    (its inputs taken from ``results["inputs"]``, whose paths are relative to the study file:
    they guard an ``out`` only when the current folder is the study's; :func:`run` claims with
    the inputs' own paths). An OS error that is the user's situation
    (disk full, no permission) is an InputError naming the path.
    """
    if target is None:
        inputs = [Path(f["path"]) for f in results.get("inputs") or []
                  if not str(f["path"]).startswith("bundled: ")]   # relative to the study file
        try:
            with outputs.claim(out, inputs, force=options.force, purpose="run") as own:
                write_outputs(results, plots, out, options, own)
            options.notices.extend(own.leftover_warnings())
            return None
        finally:
            if options.progress:
                options.progress.done()
    progress = options.progress
    tmp = target.staging
    try:
        if progress:
            progress.stage("results")
        (tmp / "results.json").write_text(json.dumps(results, indent=2, sort_keys=False, allow_nan=False) + "\n",
                                          encoding="utf-8")
        if options.html or options.pdf:
            from .report import render_report
            if progress:
                progress.stage("report")
            render_report(results, plots, tmp, paper=results["study"].get("paper", "A4"), pdf=options.pdf,
                          progress=progress, generated=outputs.timestamp_text(target.when))
        if progress:
            progress.stage("writing")
        target.commit(__version__, options.command)
    except OSError as exc:
        problem = outputs.user_os_error(exc, Path(out))
        if problem is None:
            raise
        raise problem from None
