"""What the engine computed for a route, as a typed record, and its one serialiser.

The pipeline fills a :class:`RouteResult` per route and scenario (arrays of draws and the
records of the verdict and the flow model) and :func:`route_json` turns it into the
results.json shape (percentiles, rounding, nulls for "not reached"): a new key is one
field and one line here.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .egress import summary as egress_summary
from .probability_text import percent
from .stats import rounded as _t, share, summarise
from .verdict import Verdict

__all__ = ["RouteResult", "route_json", "VERDICT_BASIS"]

#: Which comparison governs a route's verdict (stated in results.json and the report).
VERDICT_BASIS = ("route ASET: the earliest ASET of the locations the route passes, against RSET; "
                 "the location-aware comparison is reported beside it")
#: The governing comparison in words, per `acceptance.basis` (the route-ASET one is VERDICT_BASIS).
VERDICT_BASES = {
    "route-aset": VERDICT_BASIS,
    "occupants": ("occupants: the probability that any occupant exceeds a limit (dose or value) while present at a "
                  "location of the route, against the acceptance limit; the route-ASET comparison is reported beside it"),
    "both": ("both: the worse of the route-ASET verdict (earliest ASET of the route's locations against RSET) and the "
             "occupant-exposure verdict (any occupant exceeds a limit while present)"),
}


@dataclass
class RouteResult:
    """One route in one scenario.

    Attributes
    ----------
    route : RouteSpec
        The route as read from the study.
    outcome : assess.RouteOutcome
        Per-draw ASET, RSET, margin and RSET components [s], the hand-form movement
        record and, in ``extras["location_aware"]``, the location-aware comparison.
    flow, nodes :
        The flow model's record of the route and of the scenario's elements.
    end_s : float
        End of the histories [s from ignition].
    margin_raw_s : float
        Raw ASET minus RSET at median egress inputs [s].
    not_assessed : list of dict
        ``{location, criterion}`` pairs not assessed on the route.
    partial : list of str
        "criterion at location" assessed without a modifying gas.
    criteria_assessed : bool
        Whether any criterion was assessed at any location of the route.
    verdict, location_aware_verdict : verdict.Verdict
        The governing verdict and the location-aware one (None when not computed).
    along_route : dict or None
        The along-route dose, already in results form.
    occupant_verdict, route_aset_verdict, basis :
        See the fields' comments (``acceptance.basis``).
    sensitivity : list of dict
        The one-at-a-time sweep, already in results form.
    sensitivity_indices : dict or None
        The Sobol' indices of the margin and of the failure indicator and how they were
        estimated (:func:`egressmargin.sensitivity_indices.scenario_indices`), already in
        results form.
    """

    route: Any
    outcome: Any
    flow: Any
    nodes: Any
    end_s: float
    margin_raw_s: float
    not_assessed: list[dict]
    partial: list[str]
    criteria_assessed: bool
    verdict: Verdict
    location_aware_verdict: Verdict | None = None
    along_route: dict | None = None
    sensitivity: list[dict] = field(default_factory=list)
    sensitivity_indices: dict | None = None
    #: The occupant-exposure verdict (None when not computed), the route-ASET verdict when
    #: another basis governs, and the study's ``acceptance.basis``.
    occupant_verdict: Verdict | None = None
    route_aset_verdict: Verdict | None = None
    basis: str = "route-aset"


def verdict_text(r: RouteResult) -> str:
    """The verdict reason plus what the reader must know about the evidence behind it."""
    words = r.verdict.reason
    if r.not_assessed:
        pairs = sorted({f"{x['criterion']} at {x['location']}" for x in r.not_assessed})
        words += " Not assessed (missing series), so not part of this verdict: " + "; ".join(pairs) + "."
    if r.partial:
        words += (" Assessed without a modifying gas that was not supplied (the dose is partial and may be "
                  "understated): " + "; ".join(r.partial) + ".")
    undetected = ~np.isfinite(r.outcome.components["detection"])
    if undetected.any():
        words += (f" In {percent(float(undetected.mean()))} of draws the detector does not respond before the histories end"
                  " (such draws fail where a limit is reached and are undecided otherwise).")
    return words


def _spec_text(spec, unit: str = "s") -> str:
    """A duration or count specification as a reviewer reads it ("lognormal: median 60 s, p95 180 s")."""
    if spec is None:
        return "-"
    if not isinstance(spec, dict):
        return f"{spec:g} {unit}".strip() if isinstance(spec, (int, float)) else str(spec)
    (kind, body), = spec.items()
    if kind == "fixed":
        return f"{body:g} {unit}".strip()
    if isinstance(body, dict):
        parts = ", ".join(f"{k} ({_spec_text(v, unit)})" if isinstance(v, dict) else f"{k} {v:g} {unit}".rstrip()
                          for k, v in body.items())
        return f"{kind}: {parts}"
    return f"{kind}: {body}"


def route_inputs(route) -> dict:
    """The route's egress inputs as given (in seconds, counts and factors), for a reviewer's re-check."""
    from .study import DetectorRule

    det = route.detection
    if isinstance(det, DetectorRule):
        if det.kind == "heat":
            detection = (f"heat detector at {det.location}: RTI {det.rti:g} m^0.5 s^0.5, activation "
                         f"{det.activation_c:g} degC, gas velocity "
                         + (f"{det.velocity_m_s:g} m/s" if det.velocity_m_s else "from the location's series"))
        else:
            detection = (f"smoke detector at {det.location}: {det.threshold_text} (extinction coefficient "
                         f"{det.extinction_per_m:.3g} 1/m)")
    else:
        detection = _spec_text(det)
    return {
        "occupants": _spec_text(route.occupants_dist or route.occupants, "persons"),
        "detection": detection,
        "alarm": _spec_text(route.alarm),
        "premovement": (("spread across the occupants (person i starts at quantile (i - 1/2)/N): "
                         if route.premovement_across else "one uncertain time for everyone: ")
                        + _spec_text(route.premovement)),
        "flow_factor": _spec_text(route.flow_factor, ""),
        "speed_factor": _spec_text(route.speed_factor, ""),
        "start_at": route.start_at or "-",
    }


def route_json(r: RouteResult) -> dict:
    """The results.json entry of a route (contract keys and the documented extensions)."""
    out, route, mv = r.outcome, r.route, r.outcome.movement
    entry = {
        "id": route.id, "title": route.title, "occupants": route.occupants,
        "exposed_at": list(route.exposed_at),
        "inputs": route_inputs(route),
        "rset_s": summarise(out.rset),
        "rset_components_s": {k: summarise(v) for k, v in out.components.items()},
        "movement": {"travel_s": round(float(np.mean(mv.travel_s)), 2),
                     "flow_s": round(float(np.mean(mv.flow_s)), 2),
                     "controlling_element": mv.controlling + 1,
                     "controlling_type": route.path[mv.controlling]["type"],
                     "capacity_p_s": round(float(mv.capacities_p_s[mv.controlling]), 4),
                     "mode": route.movement_mode, "notes": list(mv.notes)},
        **egress_summary.route_keys(route, r.flow, r.nodes, out.extras["location_aware"]),
        "aset_raw_s": _t(out.aset_raw), "aset_s": summarise(out.aset),
        "governing_location": out.governing_location, "governing_criterion": out.governing_criterion,
        "margin_s": summarise(out.margin), "margin_raw_s": _t(r.margin_raw_s),
        "not_assessed": list(r.not_assessed),
    }
    censored = ~np.isfinite(out.aset)
    if censored.any():
        entry["margin_at_least_s"] = summarise(np.where(censored, r.end_s, out.aset) - out.rset)
        entry["share_aset_beyond_end"] = round(share(censored), 4)
    undetected = ~np.isfinite(out.components["detection"])
    if undetected.any():
        entry["share_not_detected"] = round(share(undetected), 4)
    entry["criteria_assessed"] = r.criteria_assessed
    entry.update(r.verdict.as_results())
    entry["p_fail_method"] = r.verdict.method
    entry["share_undecided"] = round(r.verdict.share_unknown, 4)
    entry["verdict_basis"] = VERDICT_BASES.get(r.basis, VERDICT_BASIS)
    entry["acceptance_basis"] = r.basis
    if r.occupant_verdict is not None:
        entry["occupant_verdict"] = r.occupant_verdict.as_results()
    if r.route_aset_verdict is not None and r.basis != "route-aset":
        entry["route_aset_verdict"] = r.route_aset_verdict.as_results()
    if r.location_aware_verdict is not None:
        entry["location_aware_verdict"] = r.location_aware_verdict.as_results()
    entry["verdict_text"] = verdict_text(r)
    if r.along_route is not None:
        entry["along_route"] = r.along_route
    entry["sensitivity"] = r.sensitivity
    entry.update(r.sensitivity_indices or {})
    return entry
