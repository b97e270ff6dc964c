"""What the engine computed for a location and for a scenario, as typed records, and their serialisers.

The pipeline fills a :class:`LocationResult` per location (a :class:`CriterionAtLocation`
per criterion: the raw crossing and the corrected crossing of every draw) and a
:class:`ScenarioResult` per scenario; :func:`location_json` and :func:`scenario_json` turn
them into the results.json shapes (percentiles, rounding, nulls for "not reached"). The
routes' records and serialiser are :mod:`egressmargin.records`. A new key is one field
and one line here.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .stats import rounded as _t, share, summarise

__all__ = ["CriterionAtLocation", "LocationResult", "ScenarioResult", "location_json", "scenario_json",
           "criterion_json", "CLOCK_DEFAULT"]

#: results.json ``scenario.clock`` when the scenario states no ignition time.
CLOCK_DEFAULT = "times count from the histories' first time (0 s), taken as ignition"

_NONE_SUMMARY = {"p05": None, "p50": None, "p95": None}


@dataclass
class CriterionAtLocation:
    """One criterion at one location of a scenario.

    Attributes
    ----------
    limit : float
        The criterion's limit, in ``unit``.
    unit : str
        The limit's unit as the criteria state it.
    assessed : bool
        Whether the location supplies the series the criterion needs.
    raw_s : float
        Time the raw predictions first reach the limit [s from ignition]; inf (or NaN)
        when not reached, NaN when not assessed.
    times_s : numpy.ndarray or None
        Corrected crossing time of every Monte Carlo draw [s from ignition], shape (S,);
        inf/NaN where a draw does not reach the limit; None when not assessed.
    missing_series : list of str
        Series the criterion would use that the location does not supply.
    partial : bool
        Assessed without a dose-raising series (CO2): the time is an upper bound.
    grid_bound_s : float or None
        Proven bound on the crossing time's error from the histories' time grid [s];
        None (or not finite) when not computed.
    range_note : str or None
        Where the predictions that matter leave the uncertainty table's validated range,
        in words; None when they stay inside it.
    range_findings : list of dict
        The same excursions as records (results.json scenario ``range_warnings`` without
        the location and the route marks).
    """

    limit: float
    unit: str
    assessed: bool
    raw_s: float = float("nan")
    times_s: np.ndarray | None = None
    missing_series: list[str] = field(default_factory=list)
    partial: bool = False
    grid_bound_s: float | None = None
    range_note: str | None = None
    range_findings: list[dict] = field(default_factory=list)

    @property
    def p50_s(self) -> float | None:
        """Median corrected crossing as results.json states it (rounded; None: not reached or not assessed)."""
        return summarise(self.times_s)["p50"] if self.assessed else None


@dataclass
class LocationResult:
    """One location in one scenario.

    Attributes
    ----------
    id, title : str
        As the study names the location.
    role : str
        "occupied", or "detector" (a detection point: not assessed for tenability).
    height_m : float or None
        Height of the measuring point above the floor [m], as given.
    criteria : dict of str to CriterionAtLocation
        Every criterion of the set, in the set's order (empty for a detector).
    aset_raw_s : float
        Earliest raw crossing over the criteria [s]; inf/NaN when none is reached.
    aset_s : numpy.ndarray or None
        Earliest corrected crossing of every draw [s], shape (S,); None for a detector.
    aset_by_member : list of dict or None
        An ensemble's raw and corrected ASET per member, already in results form
        (:meth:`egressmargin.ensemble.Ensemble.aset_by_member`); None for one run.
    """

    id: str
    title: str
    role: str = "occupied"
    height_m: float | None = None
    criteria: dict[str, CriterionAtLocation] = field(default_factory=dict)
    aset_raw_s: float = float("nan")
    aset_s: np.ndarray | None = None
    aset_by_member: list[dict] | None = None

    @property
    def not_assessed(self) -> list[str]:
        """The criteria not assessed here (missing series), in the set's order."""
        return [cid for cid, c in self.criteria.items() if not c.assessed]

    @property
    def governing(self) -> str | None:
        """The criterion with the earliest median corrected crossing (as rounded in results.json);
        the first in the set's order on a tie; None when no median is reached."""
        p50 = {cid: c.p50_s for cid, c in self.criteria.items() if c.assessed}
        reached = {cid: t for cid, t in p50.items() if t is not None}
        return min(reached, key=reached.get) if reached else None

    @property
    def governing_raw(self) -> str | None:
        """The criterion with the earliest raw crossing (as rounded in results.json), or None."""
        raws = {cid: _t(c.raw_s) for cid, c in self.criteria.items() if c.assessed and _t(c.raw_s) is not None}
        return min(raws, key=raws.get) if raws else None


@dataclass
class ScenarioResult:
    """One scenario: its locations' records and its routes' entries.

    Attributes
    ----------
    id, title : str
        As the study names the scenario.
    end_s : float
        End of the histories [s from ignition] (an ensemble: the latest member's).
    histories : str
        The histories file as shown (relative to the study folder).
    ignition_s : float or None
        Ignition on the histories' clock [s], when the scenario states it.
    clock_note : str or None
        How the histories' clock was shifted to ignition, in words; None: not shifted.
    locations : list of LocationResult
        Every location, in the histories' order.
    routes : list of dict
        The routes' entries, already in results form (:func:`egressmargin.records.route_json`
        and what the pipeline adds to it).
    range_warnings : list of dict
        The validated-range excursions as records, marked with the routes they bear on.
    shared_elements : list of dict
        The elements the scenario's routes share, already in results form.
    design_fire, ensemble, hrr, credibility :
        Present when the scenario has them, already in results form.
    """

    id: str
    title: str
    end_s: float
    histories: str
    ignition_s: float | None
    clock_note: str | None
    locations: list[LocationResult]
    routes: list[dict] = field(default_factory=list)
    range_warnings: list[dict] = field(default_factory=list)
    shared_elements: list[dict] = field(default_factory=list)
    design_fire: dict | None = None
    ensemble: list[dict] | None = None
    hrr: dict | None = None
    credibility: dict | None = None

    @property
    def warnings(self) -> list[str]:
        """One sentence per criterion and location whose predictions leave the validated range."""
        return [f"scenario {self.id}, location {loc.id}, {cid}: {c.range_note}"
                for loc in self.locations for cid, c in loc.criteria.items() if c.range_note]


def criterion_json(c: CriterionAtLocation) -> dict:
    """The results.json entry of a criterion at a location."""
    entry = {"limit": round(c.limit, 6), "unit": c.unit, "status": "assessed" if c.assessed else "not assessed"}
    if not c.assessed:
        entry.update({"raw_s": None, "corrected_s": dict(_NONE_SUMMARY), "p_reached": None,
                      "missing_series": c.missing_series})
        return entry
    entry.update({"raw_s": _t(c.raw_s), "corrected_s": summarise(c.times_s),
                  "p_reached": round(share(np.isfinite(c.times_s)), 4)})
    if c.missing_series:
        entry["missing_series"] = c.missing_series
        entry["note"] = "not supplied, contributes nothing: " + ", ".join(c.missing_series)
    if c.partial:
        entry["partial"] = True     # a dose-raising series (CO2) is missing: time is an upper bound
    if c.grid_bound_s is not None and np.isfinite(c.grid_bound_s):
        entry["grid_bound_s"] = round(float(c.grid_bound_s), 3)
    entry["outside_validated_range"] = bool(c.range_note)
    if c.range_note:
        entry["range_note"] = c.range_note
    return entry


def location_json(r: LocationResult) -> dict:
    """The results.json entry of a location (contract keys and the documented extensions)."""
    if r.role == "detector":
        # a detection point: not assessed for tenability, and not counted as "not assessed"
        return {"id": r.id, "title": r.title, "role": "detector", "criteria": {}, "aset_raw_s": None,
                "aset_s": dict(_NONE_SUMMARY), "governing": None, "governing_raw": None, "not_assessed": []}
    entry = {"id": r.id, "title": r.title, "height_m": r.height_m,
             "criteria": {cid: criterion_json(c) for cid, c in r.criteria.items()},
             "aset_raw_s": _t(r.aset_raw_s),
             "aset_s": summarise(r.aset_s) if r.aset_s is not None else dict(_NONE_SUMMARY),
             "governing": r.governing, "governing_raw": r.governing_raw, "not_assessed": r.not_assessed}
    if r.aset_by_member is not None:
        entry["aset_by_member"] = r.aset_by_member
    return entry


def scenario_json(r: ScenarioResult) -> dict:
    """The results.json entry of a scenario (contract keys and the documented extensions)."""
    entry = {"id": r.id, "title": r.title, "end_s": _t(r.end_s), "histories": r.histories,
             "warnings": r.warnings, "range_warnings": r.range_warnings,
             "ignition_s": r.ignition_s, "clock": r.clock_note or CLOCK_DEFAULT,
             "locations": [location_json(loc) for loc in r.locations], "routes": r.routes,
             "shared_elements": r.shared_elements}
    if r.design_fire:
        entry["design_fire"] = r.design_fire
    if r.ensemble is not None:
        entry["ensemble"] = r.ensemble
    if r.hrr is not None:
        entry["hrr"] = r.hrr
    if r.credibility is not None:
        entry["credibility"] = r.credibility
    return entry
