"""Ensembles of fire runs: a scenario whose histories are several runs of one design fire.

A scenario may give ``ensemble:`` instead of ``histories:`` (growth rate, soot yield, a
door open or closed, ...). Each Monte Carlo draw picks one member with probability
proportional to its weight; the draw's model-error factors and egress inputs apply on
that member's histories, so ASET, the verdict and the margin include the spread of the
fire itself.

Member assignment is **stratified** (systematic sampling: Cochran 1977, Sampling
Techniques, 3rd ed., ch. 8): with cumulative weights c_0 = 0 < c_1 < ... < c_M = 1 and
one uniform offset u, position j = 0..S-1 sits at (j + u)/S and belongs to the member m
with c_{m-1} <= (j + u)/S < c_m; a fixed permutation (from the seed) then spreads the
positions over the draws. Member m so receives floor or ceil of S w_m draws: its share
is exact to one draw, and p_fail carries no sampling error from the choice of member.

Censoring is per draw: a draw's end of data is its member's end, so a draw whose limit
is not reached and whose occupants are not out by its member's end is undecided.

This module holds the pure parts (assignment, per-member evaluation on each member's
subset of draws, assembling per-draw arrays, per-member summaries); the pipeline calls
:func:`build` and the methods of :class:`Ensemble`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import aset
from .stats import rounded, summarise
from .verdict import FAIL, UNKNOWN, draw_outcomes

__all__ = ["ENSEMBLE_STREAM_TAG", "MEMBER_INPUT", "MEMBER_ROW", "member_at", "assign_members", "Ensemble", "build"]

#: Entropy word of the member-assignment stream, apart from the model-error streams
#: (seeded with (seed, scenario index)) and the egress streams (project choice: any fixed
#: number not used as a scenario index or by another stream).
ENSEMBLE_STREAM_TAG = 104729


#: Name of the ensemble member as an uncertain input (Sobol' indices, one-at-a-time table).
MEMBER_INPUT = "ensemble member (fire run)"
#: The one-at-a-time table's row for the fire run, and what it holds.
MEMBER_ROW = "ensemble member: range over members"
MEMBER_ROW_NOTE = ("margin at median inputs on each member's own histories; low: the member with the lowest "
                   "margin, high: the member with the highest (not a p05-p95 sweep)")


def member_at(weights, u) -> np.ndarray:
    """The member m whose stretch of [0, 1) holds each uniform ``u``: c_{m-1} <= u < c_m.

    c_m are the cumulative weights over their sum (inverse transform of the discrete
    distribution of members), as :func:`assign_members` maps its stratified positions.

    >>> member_at([1, 1, 2], [0.1, 0.3, 0.5, 0.99]).tolist()
    [0, 1, 2, 2]
    """
    w = np.asarray(weights, float)
    cum = np.cumsum(w) / w.sum()
    return np.minimum(np.searchsorted(cum, np.asarray(u, float), side="right"), len(w) - 1)


def assign_members(weights, S: int, seed: int, scenario_index: int) -> np.ndarray:
    """Member index of each of S draws, stratified so each member's share is exact to one draw.

    Parameters
    ----------
    weights : array_like, shape (M,)
        Relative weights (positive).
    S : int
        Draws.
    seed, scenario_index : int
        The study's seed and the scenario's index (the stream is fixed by them).

    Returns
    -------
    numpy.ndarray of int, shape (S,)

    Examples
    --------
    Weights 1 : 1 : 2 over 400 draws give exactly 100, 100 and 200 draws:

    >>> np.bincount(assign_members([1, 1, 2], 400, 1, 0)).tolist()
    [100, 100, 200]
    """
    rng = np.random.default_rng([seed, ENSEMBLE_STREAM_TAG, scenario_index])
    u = rng.random()
    positions = (np.arange(S) + u) / S
    member = member_at(weights, positions)
    return member[rng.permutation(S)]


def _subset(factors: dict, idx: np.ndarray) -> dict:
    return {k: v[idx] for k, v in factors.items()}


def _take(record, idx: np.ndarray, S: int, seen: dict | None = None):
    """A copy of a per-draw record (a dataclass, list or dict of them) on draws ``idx``.

    Every array whose first axis has the S draws is indexed; anything else is kept. An
    array object met twice (an element's ``arrive_each_s`` is the previous element's
    ``leave_each_s``) is taken once, so the copies share as the originals do.
    """
    import dataclasses

    seen = {} if seen is None else seen
    if isinstance(record, np.ndarray):
        if record.ndim == 0 or record.shape[0] != S:
            return record
        if id(record) not in seen:
            seen[id(record)] = (record, record[idx])       # keep the original alive: ids stay unique
        return seen[id(record)][1]
    if dataclasses.is_dataclass(record) and not isinstance(record, type):
        return dataclasses.replace(record, **{f.name: _take(getattr(record, f.name), idx, S, seen)
                                              for f in dataclasses.fields(record) if f.init})
    if isinstance(record, list):
        return [_take(x, idx, S, seen) for x in record]
    if isinstance(record, dict):
        return {k: _take(v, idx, S, seen) for k, v in record.items()}
    return record


@dataclass
class Ensemble:
    """The members of one scenario and which member each draw uses.

    Members are prepared one at a time in :meth:`evaluate` and dropped after use (memory:
    one member's derived series at a time); what later steps need of them is kept: the
    raw location ASET and, for each detector rule of the scenario's routes, the detection
    time of every draw on its own member.
    """

    specs: list                 # study.MemberSpec per member
    data: list                  # histories.ScenarioData per member (on the ignition clock)
    member_of_draw: np.ndarray  # (S,)
    scenario: object = None     # study.ScenarioSpec (ambient values)
    rules: list = field(default_factory=list)    # [(route index, DetectorRule)] of the scenario's routes
    seed: int = 0
    raw_loc_aset: list = field(default_factory=list)    # (L,) raw location ASET per member
    detection: dict = field(default_factory=dict)       # id(rule) -> (uniforms (S,), detection (S,))
    crit: object = None                                 # the criteria set evaluated
    index: int = 0                                      # the scenario's index (the assignment's stream)

    @property
    def probabilities(self) -> np.ndarray:
        w = np.array([m.weight for m in self.specs], float)
        return w / w.sum()

    @property
    def ends_s(self) -> np.ndarray:
        return np.array([d.end_s for d in self.data], float)

    @property
    def end_per_draw(self) -> np.ndarray:
        """(S,) end of the data of each draw's member [s from ignition]."""
        return self.ends_s[self.member_of_draw]

    def indices(self, m: int) -> np.ndarray:
        return np.flatnonzero(self.member_of_draw == m)

    def with_members(self, member_of_draw) -> "Ensemble":
        """The same members with another assignment of draws (not yet evaluated)."""
        return Ensemble(self.specs, self.data, np.asarray(member_of_draw, int), self.scenario, self.rules,
                        self.seed, crit=self.crit, index=self.index)

    def resized(self, S: int) -> "Ensemble":
        """The same members over S draws, assigned (stratified) again from the same stream:
        a later look of the sequential rule (:func:`egressmargin.verdict.planned_looks`)."""
        return self.with_members(assign_members([m.weight for m in self.specs], S, self.seed, self.index))

    def _prepared(self, d, crit):
        return aset.prepare(d, crit, self.scenario.ambient_temperature_c, self.scenario.ambient_o2)

    def occupant_exposure(self, route, crit, factors: dict, egress):
        """Every occupant's exposure, each member's draws on that member's own histories.

        For each member, :func:`egressmargin.exposure.occupant_exposure` runs on the member's
        prepared series, its own draws' factors and its draws of the route's egress
        (``egress``: an :class:`egressmargin.assess.RouteEgress` over every draw, with the
        per-person times); :func:`egressmargin.exposure.assemble_exposures` puts the
        per-draw results back in draw order. A draw is undetermined by its own member's end.
        """
        from .exposure import assemble_exposures, occupant_exposure, occupant_stays

        S = len(self.member_of_draw)
        parts = []
        for m, d in enumerate(self.data):
            idx = self.indices(m)
            if not idx.size:
                continue
            prep = self._prepared(d, crit)
            parts.append((idx, occupant_exposure(route, prep, crit, _subset(factors, idx), idx.size,
                                                 _take(egress, idx, S))))
            del prep
        counts = np.asarray(egress.inputs.counts)
        exit_each = egress.flow.elements[-1].leave_each_s
        return assemble_exposures(parts, S, occupant_stays(route, egress), counts,
                                  exit_each[np.arange(S), counts - 1], float(self.ends_s.max()), self.end_per_draw)

    def median_margins(self, routes, crit, factors0: dict, named=None) -> dict[str, list[tuple[float, bool]]]:
        """Per route, each member's margin at median inputs [s] and whether it is a lower bound.

        Margin = route ASET - RSET with every model-error factor at ``factors0`` (one value
        per key: the medians) and every egress input at its median, on the member's own
        histories (detector rules included); where no limit is reached by the member's
        end, the end stands for the ASET (a lower bound), as in
        :func:`egressmargin.assess.scenario_sensitivity`.
        """
        from . import assess

        out = {r.id: [] for r in routes}
        f0 = {k: np.asarray(v, float).reshape(-1)[:1] for k, v in factors0.items()}
        for d in self.data:
            prep = self._prepared(d, crit)
            loc = aset.location_aset(aset.evaluate(prep, crit, f0, 1, with_bound=False))
            eg = assess.scenario_egress(routes, prep, f0, [assess.EgressDraws.median()] * len(routes), named,
                                        per_person=False)
            for r in routes:
                a = float(assess.route_aset(loc, prep.ids, r.exposed_at)[0])
                censored = not np.isfinite(a)
                out[r.id].append(((d.end_s if censored else a) - float(eg.routes[r.id].rset[0]), censored))
            del prep
        return out

    def member_rows(self, margins: dict[str, list[tuple[float, bool]]]) -> dict[str, dict]:
        """The one-at-a-time table's row for the fire run: per route, the members with the
        lowest and the highest margin at median inputs (:meth:`median_margins`)."""
        from .assess import _swing

        out = {}
        for rid, vals in margins.items():
            m = np.array([v for v, _ in vals])
            lo, hi = int(np.argmin(m)), int(np.argmax(m))
            row = _swing(MEMBER_ROW, f"member {self.specs[lo].id}", f"member {self.specs[hi].id}", m[lo], m[hi],
                         "ensemble")
            row["note"] = MEMBER_ROW_NOTE
            row["lower_bound_members"] = [self.specs[k].id for k, (_, c) in enumerate(vals) if c]
            out[rid] = row
        return out

    def evaluate(self, crit, factors: dict, S: int, with_bound: bool = True, location_rows=None):
        """Every criterion's (L, S) times, each member evaluated on its own draws' factors.

        A criterion counts as assessed at a location only where every member assesses it
        (a member without the series would otherwise read as "never reached"); a proven
        grid bound is the largest of the members'. Given ``location_rows`` (location
        indices), only the (L, S) location ASET at those locations is returned
        (:func:`egressmargin.sensitivity_indices.rows_location_aset`, +inf elsewhere).
        """
        from .assess import detection_times, egress_uniforms

        parts = []
        us = {ri: egress_uniforms(self.seed, ri, S).detection for ri, _ in self.rules}
        det = {ri: np.full(S, np.inf) for ri, _ in self.rules}
        self.raw_loc_aset, self.crit = [], crit
        for m, d in enumerate(self.data):
            prep = self._prepared(d, crit)
            raw = aset.evaluate(prep, crit, {}, 1)
            self.raw_loc_aset.append(aset.location_aset(raw)[:, 0])
            idx = self.indices(m)
            f_m = _subset(factors, idx)
            if factors and location_rows is not None:
                from .sensitivity_indices import rows_location_aset
                res = rows_location_aset(prep, crit, f_m, len(idx), location_rows)
            elif factors:
                res = aset.evaluate(prep, crit, f_m, len(idx), with_bound=with_bound)
            else:
                res = {cid: aset.CriterionResult(np.repeat(r.times, len(idx), axis=1), r.assessed, r.missing,
                                                 None, r.partial) for cid, r in raw.items()}
            for ri, rule in self.rules:       # each draw's detector on its own member
                det[ri][idx] = detection_times(rule, prep, f_m, us[ri][idx])
            parts.append((idx, res))
            del prep, raw
        self.detection = {id(rule): (us[ri], det[ri]) for ri, rule in self.rules}
        if location_rows is not None:
            loc = np.full((len(self.raw_loc_aset[0]), S), np.inf)
            for idx, res in parts:
                loc[:, idx] = res if isinstance(res, np.ndarray) else aset.location_aset(res)
            return loc
        out = {}
        for cid in crit.items:
            first = parts[0][1][cid]
            times = np.full((first.times.shape[0], S), np.inf)
            assessed = np.ones(first.times.shape[0], bool)
            bounds, partial = [], None
            for idx, res in parts:
                r = res[cid]
                times[:, idx] = r.times
                assessed &= np.asarray(r.assessed, bool)
                if r.grid_bound_s is not None:
                    bounds.append(r.grid_bound_s)
                if r.partial is not None:
                    partial = np.asarray(r.partial, bool) if partial is None else partial | r.partial
            bound = np.fmax.reduce(np.vstack(bounds), axis=0) if bounds else None   # NaN: no bound
            out[cid] = aset.CriterionResult(times, assessed, first.missing, bound, partial)
        return out

    def results(self, base_dir=None) -> list[dict]:
        """results.json ``scenario.ensemble`` (paths relative to the study folder ``base_dir``)."""
        from .paths import shown_path

        counts = np.bincount(self.member_of_draw, minlength=len(self.specs))
        S = len(self.member_of_draw)
        return [{"member": m.id, "histories": shown_path(d.path, base_dir) if base_dir else str(d.path),
                 "weight": m.weight,
                 "probability": round(float(p), 6), "parameters": dict(m.parameters),
                 "share_of_draws": round(int(c) / S, 6), "draws": int(c), "end_s": rounded(d.end_s)}
                for m, d, p, c in zip(self.specs, self.data, self.probabilities, counts)]

    def by_member(self, aset_s, rset_s) -> list[dict]:
        """results.json ``route.by_member``: p_fail (undecided as fail) and ASET p50 per member."""
        a, r = np.asarray(aset_s, float), np.asarray(rset_s, float)
        if a.shape[-1] != len(self.member_of_draw):       # drawn at another count: not per member
            return []
        out = []
        for m, (spec, p, end) in enumerate(zip(self.specs, self.probabilities, self.ends_s)):
            idx = self.indices(m)
            o = draw_outcomes(a[idx], r[idx], end)
            n = max(len(idx), 1)
            with np.errstate(invalid="ignore"):
                margin = a[idx] - r[idx]
            entry = {"member": spec.id, "weight": round(float(p), 6),
                     "p_fail": round(float(np.count_nonzero((o == FAIL) | (o == UNKNOWN))) / n, 6),
                     "p_fail_low": round(float(np.count_nonzero(o == FAIL)) / n, 6),
                     "aset_p50": summarise(a[idx])["p50"], "margin_s": summarise(margin),
                     "parameters": dict(spec.parameters), "draws": int(len(idx))}
            censored = ~np.isfinite(a[idx])
            if censored.any():
                # no limit reached within the member's data: the margin is at least the time left
                # (the member's end standing for ASET), as the route's margin_at_least_s
                with np.errstate(invalid="ignore"):
                    entry["margin_at_least_s"] = summarise(np.where(censored, end, a[idx]) - r[idx])
            out.append(entry)
        return out

    def aset_by_member(self, li: int, loc_aset: np.ndarray) -> list[dict]:
        """results.json ``location.aset_by_member`` of location ``li``: raw and corrected ASET per member."""
        raw_asets = self.raw_loc_aset
        return [{"member": spec.id, "aset_raw_s": rounded(raw_asets[m][li]),
                 "aset_s": summarise(loc_aset[li, self.indices(m)])}
                for m, spec in enumerate(self.specs)]


class MemberPrep:
    """The reference member's prepared series, with detector rules read on each draw's own member.

    The egress model reads a fire's series only through a detector rule
    (:func:`egressmargin.assess.detection_times`, which calls :meth:`member_detection`);
    every other attribute is the reference member's. Draw counts other than the
    ensemble's (the one-at-a-time sweep, the median-input run) use the reference member.
    """

    def __init__(self, ens: "Ensemble", base):
        self._ens, self._base = ens, base

    def for_ensemble(self, ens: "Ensemble") -> "MemberPrep":
        """The same reference series with another assignment of draws to members."""
        return MemberPrep(ens, self._base)

    def __getattr__(self, name):
        return getattr(self._base, name)

    def member_detection(self, rule, factors: dict, u: np.ndarray, scale=1.0) -> np.ndarray:
        """Detection per draw on the draw's own member; ``scale`` as in :func:`assess.detection_times`."""
        from .assess import detection_times

        unscaled = bool(np.all(np.asarray(scale) == 1.0))
        known = self._ens.detection.get(id(rule))
        if unscaled and known is not None and len(u) == len(known[0]) and np.array_equal(u, known[0]):
            return known[1].copy()            # computed member by member in Ensemble.evaluate
        if len(u) != len(self._ens.member_of_draw):
            return detection_times(rule, self._base, factors, u, scale)
        ens = self._ens                       # other streams of the ensemble's size: member by member again
        out = np.full(len(u), np.inf)
        sc = np.broadcast_to(np.asarray(scale, float), (len(u),))
        for m, d in enumerate(ens.data):
            idx = ens.indices(m)
            prep = aset.prepare(d, ens.crit, ens.scenario.ambient_temperature_c, ens.scenario.ambient_o2)
            out[idx] = detection_times(rule, prep, _subset(factors, idx), u[idx], sc[idx])
        return out


#: Said of an ensemble route's dose along the route (results and report).
ALONG_ROUTE_NOTE = ("ensemble: every occupant's exposure and the dose along the route are evaluated per member, "
                    "each draw on its own member's histories (as the ASET, the verdict and the detection)")


def build(spec, members_data, crit, S: int, seed: int, index: int, routes=()) -> Ensemble | None:
    """The scenario's ensemble (None when it has one set of histories).

    ``routes``: the study's routes (their index is their egress stream); the detector
    rules of those that run in this scenario are evaluated per member.
    """
    from .study import DetectorRule

    if not getattr(spec, "ensemble", None) or not members_data:
        return None
    member = assign_members([m.weight for m in spec.ensemble], S, seed, index)
    rules = [(ri, r.detection) for ri, r in enumerate(routes)
             if (r.scenarios is None or spec.id in r.scenarios) and isinstance(r.detection, DetectorRule)]
    return Ensemble(list(spec.ensemble), list(members_data), member, spec, rules, seed, index=index)


def read_members(spec, read, progress=None) -> tuple[list, list, list]:
    """Read every member with ``read(path) -> (data, warnings)``; every problem names the member's file.

    ``progress`` (optional, ``stage(name, total)``/``step()``) is told of each member read.

    Returns (data per member, warnings, problems). A member whose columns differ from the
    scenario's mapping fails in ``read`` with the file and the column named.
    """
    from .errors import InputError, Problem

    data, warnings, problems = [], [], []
    if progress:
        progress.stage(f"reading ensemble {spec.id}", len(spec.ensemble))
    for m in spec.ensemble:
        try:
            d, w = read(m.histories)
            data.append(d)
            warnings.extend(w)
            if progress:
                progress.step()
        except InputError as exc:
            problems.extend(Problem(p.where, f"ensemble member '{m.id}': {p.message}", warning=p.warning)
                            if not str(p.message).startswith("ensemble member") else p for p in exc.problems)
    if progress:
        progress.done()
    return data, warnings, problems
