"""Variance-based sensitivity: first-order and total Sobol indices of each route's margin.

Every uncertain input of a scenario is one column of uniform numbers on [0, 1]: one
model-error factor per table row in use (as :func:`egressmargin.pipeline.factor_ppfs`
groups them), and per route each egress input given as a distribution (detection,
alarm, pre-movement and each uncertain parameter of it, occupant count, walking-speed
and flow factors). The uniforms are mapped to the inputs by the same inverse transforms
the Monte Carlo uses (:func:`egressmargin.uncertainty.factor_ppf`, the
:class:`egressmargin.assess.EgressDraws` streams), so the indices describe the verdict's
own model. Inputs with no spread (fixed values, degenerate distributions) are omitted:
their indices are zero by definition.

Estimators: the Saltelli/Sobol' design of N base rows and N (D + 2) evaluations
(matrices A, B and the D matrices A_B^(i), no second-order terms), first-order index by
Saltelli et al. (2010, eq. (b) of table 2) and total index by Jansen (1999) (Saltelli et
al. 2010 table 2, eq. (f)), with bootstrap 95 % intervals, all by SALib
(:func:`SALib.sample.sobol.sample`, :func:`SALib.analyze.sobol.analyze`; Herman &
Usher 2017, Iwanaga et al. 2022). Checked against the Ishigami function's published
indices in the tests.

An extra input is one more :class:`UncertainInput` with its own ``kind``, mapped from
its column in :func:`scenario_indices`. An ensemble scenario (several fire runs) has one:
the ensemble member (``kind`` "member"), its uniform mapped to a member by the
cumulative weights (:func:`egressmargin.ensemble.member_at`, the inverse transform the
stratified assignment uses), each row's ASET, detector rules and end of data on its
member.

References
----------
Saltelli, A., Annoni, P., Azzini, I., Campolongo, F., Ratto, M., Tarantola, S. (2010).
Variance based sensitivity analysis of model output. Design and estimator for the total
sensitivity index. Computer Physics Communications 181, 259-270.

Jansen, M. J. W. (1999). Analysis of variance designs for model output. Computer Physics
Communications 117, 35-43.

Sobol', I. M. (2001). Global sensitivity indices for nonlinear mathematical models and
their Monte Carlo estimates. Mathematics and Computers in Simulation 55, 271-280.

Herman, J., Usher, W. (2017). SALib: an open-source Python library for sensitivity
analysis. Journal of Open Source Software 2(9), 97.
"""

from __future__ import annotations

import dataclasses

import warnings
from dataclasses import dataclass

import numpy as np

__all__ = ["BASE_SAMPLES", "MAX_EVALUATIONS", "UncertainInput", "base_samples", "saltelli_uniforms",
           "sobol_indices", "uncertain_inputs", "scenario_indices", "METHOD"]

#: Base samples N of the Saltelli design: N (D + 2) evaluations for D inputs, drawn
#: apart from the verdict's samples (project choice: a power of two, as the Sobol'
#: sequence wants; with N = 512 the bootstrap half-widths of the demo's leading indices
#: are a few hundredths).
BASE_SAMPLES = 512
#: At most this many evaluations per scenario: N is halved (down to MIN_BASE_SAMPLES)
#: until N (D + 2) fits, and until N is at most the verdict's samples (project choice:
#: about the cost of the verdict's own run at its largest default, max_samples 16000).
MAX_EVALUATIONS = 16384
MIN_BASE_SAMPLES = 64
#: The failure indicator's indices are given only when at least this many of the 2N
#: base draws (rows A and B) fail and as many pass: with fewer, the indicator's variance
#: rests on a handful of draws and the indices are noise (project choice).
MIN_OUTCOMES = 10
#: Bootstrap resamples for the 95 % intervals (SALib's default).
BOOTSTRAP_RESAMPLES = 100
#: Uniforms are kept inside [U_EPS, 1 - U_EPS] so that an unbounded distribution's
#: inverse transform stays finite (the Monte Carlo's generator never returns 1 either;
#: project choice).
U_EPS = 1e-9
#: Entropy word that keeps the Sobol' design apart from the Monte Carlo streams (project
#: choice, like assess.EGRESS_STREAM_TAG; it must differ from every other stream's word,
#: ensemble.ENSEMBLE_STREAM_TAG among them, which a test checks).
SOBOL_STREAM_TAG = 130363

METHOD = ("first-order (Saltelli et al. 2010) and total (Jansen 1999) Sobol' indices from a Saltelli design "
          "of N (D + 2) evaluations on scrambled Sobol' points, with bootstrap 95 % intervals, by SALib")


@dataclass(frozen=True)
class UncertainInput:
    """One column of the design.

    Attributes
    ----------
    label : str
        The input's name in results.json and the report.
    kind : str
        "factor": ``key`` is a model-error table row; "egress": ``key`` is a stream of
        :class:`egressmargin.assess.EgressDraws` (``premovement.<parameter>`` for a
        parameter) of route ``route``; "member": the ensemble member (fire run) of an
        ensemble scenario.
    key : str
    route : int or None
        Index of the route (egress inputs).
    """

    label: str
    kind: str
    key: str
    route: int | None = None


def uncertain_inputs(routes, factor_ppfs: dict, labels: dict) -> list[UncertainInput]:
    """The scenario's uncertain inputs, in a fixed order: factors, then each route's egress inputs.

    Parameters
    ----------
    routes : list of RouteSpec
    factor_ppfs : dict
        Table row -> (inverse CDF, factor keys), :func:`egressmargin.pipeline.factor_ppfs`.
    labels : dict
        Table row -> words.
    """
    from .assess import uncertain_egress_inputs

    out = [UncertainInput(labels.get(k, k), "factor", k) for k, (f, _) in factor_ppfs.items()
           if float(f(0.95)) != float(f(0.05))]
    for i, route in enumerate(routes):
        own = uncertain_egress_inputs(route)
        out += [UncertainInput(label, "egress", key, i) for label, key in own]
    return out


def input_names(inputs: list[UncertainInput], routes, route_index: int) -> list[str]:
    """The inputs' names as route ``route_index`` lists them: another route's input names that route."""
    return [x.label if x.route is None or x.route == route_index else f"{x.label} (route {routes[x.route].id})"
            for x in inputs]


def base_samples(D: int, N: int = BASE_SAMPLES, max_evaluations: int = MAX_EVALUATIONS,
                 samples: int | None = None) -> int:
    """N, halved until N (D + 2) <= ``max_evaluations`` and N <= ``samples`` (the verdict's
    draws: a run asked for with few samples gets quick indices too), not below
    :data:`MIN_BASE_SAMPLES`."""
    while N > MIN_BASE_SAMPLES and (N * (D + 2) > max_evaluations or (samples is not None and N > samples)):
        N //= 2
    return N


def _problem(D: int) -> dict:
    return {"num_vars": D, "names": [f"x{j}" for j in range(D)], "bounds": [[0.0, 1.0]] * D}


def saltelli_uniforms(D: int, N: int, seed) -> np.ndarray:
    """The Saltelli design on [0, 1]^D: shape (N (D + 2), D), rows A, A_B^(1..D), B per base sample.

    Scrambled Sobol' points (SALib ``sobol.sample``, ``calc_second_order=False``),
    kept inside [U_EPS, 1 - U_EPS].
    """
    from SALib.sample import sobol

    X = sobol.sample(_problem(D), N, calc_second_order=False, scramble=True, seed=np.random.default_rng(seed))
    return np.clip(X, U_EPS, 1.0 - U_EPS)


def sobol_indices(Y, labels: list[str], seed) -> list[dict]:
    """First-order and total indices with bootstrap 95 % intervals, largest total first.

    Parameters
    ----------
    Y : array_like, shape (N (D + 2),)
        The output at the rows of :func:`saltelli_uniforms`, finite.
    labels : list of str
        The D inputs' names, in column order.
    seed : int
        Seed of the bootstrap.

    Returns
    -------
    list of dict
        ``{input, first_order, first_order_ci95: [lo, hi], total, total_ci95: [lo, hi]}``
        rounded to 4 decimals; an interval is the estimate -/+ SALib's half-width
        (normal quantile times the bootstrap standard deviation). Empty when the
        output does not vary (no index is defined).
    """
    from SALib.analyze import sobol

    Y = np.asarray(Y, float)
    D = len(labels)
    if D == 0 or not np.all(np.isfinite(Y)) or float(np.var(Y)) == 0.0:
        return []
    with warnings.catch_warnings():      # a bootstrap resample of a rare failure may not vary
        warnings.simplefilter("ignore")
        res = sobol.analyze(_problem(D), Y, calc_second_order=False, num_resamples=BOOTSTRAP_RESAMPLES,
                            conf_level=0.95, seed=int(seed))

    def r(x):
        return round(float(x), 4)

    rows = [{"input": name, "first_order": r(s1), "first_order_ci95": [r(s1 - c1), r(s1 + c1)],
             "total": r(st), "total_ci95": [r(st - ct), r(st + ct)]}
            for name, s1, c1, st, ct in zip(labels, res["S1"], res["S1_conf"], res["ST"], res["ST_conf"])]
    rows.sort(key=lambda x: (-x["total"], -x["first_order"]))
    return rows


def rows_location_aset(prep, criteria, factors: dict, S: int, needed) -> np.ndarray:
    """(L, S) location ASET of the design's rows at the locations ``needed``, +inf elsewhere.

    The same numbers as ``aset.location_aset(aset.evaluate(prep, criteria, factors, S,
    with_bound=False))`` at those locations, for less work: a dose with two or more
    varying factors, which :func:`egressmargin.aset.dose_times` integrates exactly for
    every draw, is integrated exactly (:func:`egressmargin.aset.exact_dose_times`) only
    at the locations a route passes and only up to the earliest crossing of the other
    criteria in that draw (a later crossing cannot be the minimum; the trapezoidal
    integral's first samples do not depend on the later ones), and not at all at a
    location where the dose at the rows' largest factors stays below the limit
    (:func:`_never_reached`: the dose is nondecreasing in every factor there, so no row
    reaches it). Every other criterion is evaluated as :func:`egressmargin.aset.evaluate`
    does.

    Parameters
    ----------
    prep : aset.Prepared
    criteria : CriteriaSet
    factors : dict
        Factor key -> (S,) factors of the rows.
    S : int
        Rows.
    needed : array_like of int
        Indices of the locations whose ASET is wanted.
    """
    from . import aset

    need = np.zeros(prep.n_loc, bool)
    need[np.asarray(needed, int)] = True
    best = np.full((prep.n_loc, S), np.inf)
    later = []
    for c in criteria.items.values():
        if c.id in aset.DOSE_CRITERIA:
            names = aset.dose_names(prep, c)
            fac = {q: np.broadcast_to(np.asarray(factors.get(q, 1.0), float), (S,)) for q in names}
            if sum(np.ptp(fac[q]) > 0 for q in names) >= 2:
                later.append((c, fac))
                continue
        t = aset.criterion_times(prep, c, factors, S, with_bound=False, only=need).times
        np.minimum(best, np.where(np.isnan(t), np.inf, t), out=best)
    for c, fac in later:
        ok, _ = aset.status(prep, c)
        rows = np.flatnonzero(ok & need)
        rows = rows[~_never_reached(prep, c, fac, rows)]
        if rows.size == 0:
            continue
        loc = np.repeat(rows, S)
        draw = np.tile(np.arange(S), rows.size)
        t = aset.exact_dose_times(prep, c, fac, loc, draw, best[loc, draw])
        best[rows] = np.minimum(best[rows], np.where(np.isnan(t), np.inf, t).reshape(rows.size, S))
    best[~need] = np.inf
    return best


#: Relative margin below the limit by which the dose at the largest factors must stay for
#: :func:`_never_reached` to rule a location out (rounding of the rates; project choice).
NEVER_REACHED_MARGIN = 1e-6


def _never_reached(prep, criterion, fac: dict, rows: np.ndarray) -> np.ndarray:
    """Per location of ``rows``: is it proven that no row's dose reaches the limit?

    Where the dose is nondecreasing in every factor (:func:`egressmargin.aset.dose_shape`,
    the rates' form, checked on the series), each row's dose is at every time at most
    the dose with every factor at its largest value over the rows; if that dose stays
    below the limit (by :data:`NEVER_REACHED_MARGIN`, relative) and finite, no row
    reaches it, and the exact integration would give "not reached" for every row.
    """
    from . import aset

    out = np.zeros(rows.size, bool)
    if rows.size == 0:
        return out
    names = aset.dose_names(prep, criterion)
    top = {q: float(np.max(fac[q])) for q in names}
    varying = [q for q in names if np.ptp(fac[q]) > 0]
    mono = aset.dose_shape(prep, criterion, varying, rows, top)[0]
    if not mono.any():
        return out
    r = rows[mono]
    N = len(prep.t_s)
    dose = aset.cumulative_dose(criterion, prep.t_s, aset.corrected_inputs(prep, names, top, r), (r.size, N))
    out[mono] = np.all(np.isfinite(dose), axis=1) & (dose.max(axis=1) < criterion.limit * (1.0 - NEVER_REACHED_MARGIN))
    return out


def _sharing_groups(routes) -> list[set[int]]:
    """Routes that share a named element, directly or through others (they can move each other)."""
    named = [{e["id"] for e in route.path if e.get("id")} for route in routes]
    group = list(range(len(routes)))

    def find(i):
        while group[i] != i:
            i = group[i]
        return i

    for i in range(len(routes)):
        for j in range(i):
            if named[i] & named[j]:
                group[find(i)] = find(j)
    return [{j for j in range(len(routes)) if find(j) == find(i)} for i in range(len(routes))]


def _detector_keys(routes, prep) -> set[str]:
    """The factor keys the routes' detector rules read (:func:`egressmargin.assess.detection_times`)."""
    from . import aset
    from .study import DetectorRule

    keys = set()
    for route in routes:
        rule = route.detection
        if isinstance(rule, DetectorRule):
            keys.add("temperature" if rule.kind == "heat"
                     else aset.smoke_factor_key(prep.smoke_kind[prep.ids.index(rule.location)]))
    return keys


def _design_rsets(routes, groups, inputs, U, prep, factors, draws, named,
                  factor_keys: dict | None = None) -> dict[str, np.ndarray]:
    """(R,) RSET of every route at the design's rows, each group of routes run on its distinct rows only.

    Routes that share no named element do not move each other, and a route's RSET reads
    only its own egress inputs and, through a detector rule, the model-error factors. In
    the Saltelli design the rows A_B^(j) of an input j that a group does not read repeat
    row A for that group, so the flow model runs once per distinct row of the group's
    columns and the RSETs are copied back to every row (the flow model works draw by
    draw: the same RSETs as one run over all rows). ``factor_keys`` (table row -> factor
    keys) narrows the factor columns to those a detector rule of the group reads; without
    it every factor column counts for a group with a detector rule. An ensemble's reference member reads
    detection per member where the draw count matches, so its design runs in one piece.
    """
    from . import aset, assess
    from .study import DetectorRule

    R = U.shape[0]
    if not isinstance(prep, aset.Prepared):
        eg = assess.scenario_egress(routes, prep, factors, draws, named, per_person=False)   # margins only
        return {r.id: eg.routes[r.id].rset for r in routes}
    out = {}
    for grp in {tuple(sorted(g)) for g in groups}:
        detector = any(isinstance(routes[i].detection, DetectorRule) for i in grp)
        read = _detector_keys([routes[i] for i in grp], prep) if factor_keys is not None else None

        def reads(x) -> bool:
            if x.kind != "factor" or not detector:
                return False
            return read is None or x.key not in factor_keys or bool(set(factor_keys[x.key]) & read)

        cols = [j for j, x in enumerate(inputs) if (x.kind == "egress" and x.route in grp) or reads(x)]
        if cols:
            _, first, inverse = np.unique(U[:, cols], axis=0, return_index=True, return_inverse=True)
            order = np.argsort(first)                  # keep the design's row order
            rows = first[order]
            back = np.empty_like(order)
            back[order] = np.arange(order.size)
            inverse = back[inverse.reshape(-1)]
        else:
            rows, inverse = np.zeros(1, int), np.zeros(R, int)
        sub = [_draws_at(draws[i], rows) for i in grp]
        eg = assess.scenario_egress([routes[i] for i in grp], prep, {k: v[rows] for k, v in factors.items()}, sub,
                                    named, per_person=False)     # margins only: no per-person times kept
        for i in grp:
            out[routes[i].id] = eg.routes[routes[i].id].rset[inverse]
    return out


def _draws_at(d, rows: np.ndarray):
    """The egress uniforms of ``d`` (an :class:`egressmargin.assess.EgressDraws`) at ``rows``."""
    def at(x):
        return x if x is None or np.ndim(x) == 0 else np.asarray(x)[rows]

    return dataclasses.replace(d, detection=at(d.detection), alarm=at(d.alarm), premovement=at(d.premovement),
                               occupants=at(d.occupants), flow_factor=at(d.flow_factor),
                               speed_factor=at(d.speed_factor),
                               parameters={k: at(v) for k, v in d.parameters.items()})


def scenario_indices(routes, prep, criteria, factor_ppfs: dict, labels: dict, named, end_s: float, seed: int,
                     scenario_index: int, chunk: int = 4096, N: int = BASE_SAMPLES,
                     samples: int | None = None, ensemble=None) -> dict[str, dict]:
    """Sobol' indices of every route's margin and failure indicator in one scenario.

    Parameters
    ----------
    routes : list of RouteSpec
        The scenario's routes (evaluated together: they may share elements).
    prep : aset.Prepared
    criteria : CriteriaSet
    factor_ppfs, labels : dict
        As for :func:`uncertain_inputs`.
    named : dict
        The study's named elements.
    end_s : float
        End of the histories [s].
    seed, scenario_index : int
        The design's seed is (seed, SOBOL_STREAM_TAG, scenario_index).
    chunk : int
        Rows per ASET evaluation (bounds memory at the verdict's own level).
    N : int
        Base samples (reduced by :func:`base_samples`).
    samples : int, optional
        The verdict's sample count: N is not larger (:func:`base_samples`).
    ensemble : egressmargin.ensemble.Ensemble, optional
        The scenario's fire runs (with ``prep`` its
        :class:`egressmargin.ensemble.MemberPrep`): with two members or more, the member
        is one more input, and each row's ASET (unchunked), detector rules and end of
        data are its member's.

    Returns
    -------
    dict
        Route id -> ``{"sensitivity_indices": [...], "sensitivity_indices_fail": [...],
        "sensitivity_indices_method": {...}}`` (results.json keys).

    Notes
    -----
    One batched evaluation of the N (D + 2) rows: ASET of the locations the routes pass
    (:func:`rows_location_aset`, in chunks of ``chunk`` rows) and the RSET of every route
    (:func:`_design_rsets`: one flow run per group of routes sharing elements, on its
    distinct rows). The
    margin's output is min(ASET, end) - RSET: a draw in which no limit is reached by the
    end has the end time for its ASET (a lower bound on its margin), and a draw in which
    the fire is never detected has the end time for its RSET. The failure indicator is
    1 where the draw fails or is undecided (as p_fail counts it), else 0. A route's list
    holds the model-error inputs, its own inputs and those of routes that share a named
    element with it.
    """
    from . import aset, assess
    from .verdict import PASS, draw_outcomes

    inputs = uncertain_inputs(routes, factor_ppfs, labels)
    if ensemble is not None and len(ensemble.specs) > 1:
        from .ensemble import MEMBER_INPUT
        inputs.append(UncertainInput(MEMBER_INPUT, "member", "member"))
    D = len(inputs)
    method = {"method": METHOD, "base_samples": 0, "evaluations": 0, "inputs": D,
              "bootstrap_resamples": BOOTSTRAP_RESAMPLES,
              "margin_output": ("min(ASET, end of histories) - RSET [s]: ASET beyond the end replaced by the end "
                                "time; RSET of a draw never detected replaced by the end time"),
              "fail_output": ("1 where the draw fails or is undecided (as p_fail counts it), else 0; indices given "
                              f"only when at least {MIN_OUTCOMES} of the 2N base draws fail and {MIN_OUTCOMES} pass"),
              "omitted": "inputs with no spread (fixed values) are omitted: their indices are zero"}
    if D == 0:
        return {r.id: {"sensitivity_indices": [], "sensitivity_indices_fail": [],
                       "sensitivity_indices_method": method} for r in routes}
    N = base_samples(D, N, samples=samples)
    U = saltelli_uniforms(D, N, [seed, SOBOL_STREAM_TAG, scenario_index])
    R = U.shape[0]
    method.update(base_samples=N, evaluations=R)
    factors = {}
    for row, (f, keys) in factor_ppfs.items():
        col = next((j for j, x in enumerate(inputs) if x.kind == "factor" and x.key == row), None)
        vals = np.asarray(f(U[:, col]), float) if col is not None else np.full(R, float(f(0.5)))
        for k in keys:
            factors[k] = vals
    draws = [assess.EgressDraws.median(R) for _ in routes]
    for j, x in enumerate(inputs):
        if x.kind != "egress":
            continue
        d = draws[x.route]
        if x.key.startswith("premovement."):
            d.parameters = {**d.parameters, x.key.split(".", 1)[1]: U[:, j]}
        else:
            setattr(d, x.key, U[:, j])
    jm = next((j for j, x in enumerate(inputs) if x.kind == "member"), None)
    # only the locations a route is exposed at enter a margin: the others are not evaluated
    on_routes = sorted({prep.ids.index(x) for r in routes for x in r.exposed_at})   # the ASET the rows need
    used = np.zeros(len(prep.ids), bool)
    used[on_routes] = True
    if jm is not None:                  # each row on its own member (inverse transform of the weights)
        from .ensemble import member_at
        ens_rows = ensemble.with_members(member_at(ensemble.probabilities, U[:, jm]))
        loc_aset = ens_rows.evaluate(criteria, factors, R, with_bound=False, location_rows=on_routes)
        prep = prep.for_ensemble(ens_rows)          # detector rules read each row's own member
        end_s = ens_rows.end_per_draw
    else:
        # the design reads the scenario's cached dose grids and keeps its own out of them
        if isinstance(prep, aset.Prepared):
            prep = dataclasses.replace(prep, dose_grids=dict(prep.dose_grids))
        if factors:
            loc_aset = np.concatenate(
                [rows_location_aset(prep, criteria, {k: v[a:a + chunk] for k, v in factors.items()},
                                    min(chunk, R - a), on_routes) for a in range(0, R, chunk)], axis=1)
        else:
            loc_aset = np.repeat(aset.location_aset(aset.evaluate(prep, criteria, {}, 1, with_bound=False,
                                                                  only=used)), R, axis=1)
    groups = _sharing_groups(routes)
    rsets = _design_rsets(routes, groups, inputs, U, prep, factors, draws, named,
                          {row: keys for row, (_, keys) in factor_ppfs.items()})
    out = {}
    for i, route in enumerate(routes):
        a = assess.route_aset(loc_aset, prep.ids, route.exposed_at)
        rset = rsets[route.id]
        fail = (draw_outcomes(a, rset, end_s) != PASS).astype(float)
        a_c = np.where(np.isfinite(a), a, end_s)
        margin = a_c - np.where(np.isfinite(rset), rset, end_s)
        names = input_names(inputs, routes, i)
        keep = {names[j] for j, x in enumerate(inputs) if x.kind != "egress" or x.route in groups[i]}
        m_rows = [r for r in sobol_indices(margin, names, seed) if r["input"] in keep]
        base = np.concatenate([fail[:: D + 2], fail[D + 1:: D + 2]])       # the A and B rows
        decided = min(base.sum(), base.size - base.sum()) >= MIN_OUTCOMES
        f_rows = [r for r in sobol_indices(fail, names, seed) if r["input"] in keep] if decided else []
        out[route.id] = {"sensitivity_indices": m_rows, "sensitivity_indices_fail": f_rows,
                         "sensitivity_indices_method": method}
    return out
