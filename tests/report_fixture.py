"""A realistic, self-consistent synthetic results dict and plot data for report tests.

Everything here is ILLUSTRATIVE: an invented building (the "Harbourside community
library"), invented fire curves, invented validation statistics and invented egress
inputs. No number below is taken from, or should be cited as, a published source.

The numbers are made consistent the way the pipeline would make them:

- raw curves are smooth monotone functions of time; the raw time to a limit is their
  first crossing, linearly interpolated (contract: "first crossing, linearly
  interpolated between the two bracketing samples");
- model uncertainty is one multiplicative error factor per quantity and Monte Carlo
  sample (lognormal, median 1/bias), applied to the temperature rise, the extinction
  coefficient and the toxic dose; because the corrected curve is a monotone function
  of the factor, a corrected crossing equals the raw curve's crossing of an adjusted
  limit, so the percentiles of the time to limit are exact;
- ASET per sample is the earliest criterion at a location, a route's ASET the
  earliest of its exposed locations, RSET the sum of its sampled components, and the
  margin and p_fail follow sample by sample.

Two scenarios, three locations each, two routes each; in scenario ``fire-a`` the
route ``east-stair`` fails and the heat-flux criterion is "not assessed" at the stair
lobby (no flux series); uncertainty is on; sensitivity and along-route dose exist for
``east-stair`` in ``fire-a``; credibility (three cell sizes) exists for ``fire-a``.
"""

from __future__ import annotations

import copy
import hashlib
from typing import Any

import numpy as np

Z95 = 1.6448536269514722  # standard normal 95th percentile (scipy.stats.norm.ppf(0.95))
AMBIENT_C = 20.0
VIS_MAX_M = 30.0

CRITERIA = {
    "temperature": {"limit": 60.0, "unit": "degC", "direction": "above",
                    "label": "Gas temperature",
                    "source": "illustrative limit (test fixture)"},
    "visibility": {"limit": 10.0, "unit": "m", "direction": "below", "label": "Visibility",
                   "sign_constant": 8, "source": "illustrative limit (test fixture)"},
    "heat_flux": {"limit": 2.5, "unit": "kW/m^2", "direction": "above",
                  "label": "Radiant heat flux", "source": "illustrative limit (test fixture)"},
    "fed_toxic": {"limit": 0.3, "unit": "", "direction": "above",
                  "label": "FED, asphyxiant gases", "method": "iso13571",
                  "source": "illustrative limit (test fixture)"},
}
# quantity corrected for each criterion (contract: temperature as rise, visibility via
# extinction, doses through their gas)
QUANTITY = {"temperature": "temperature", "visibility": "extinction", "heat_flux": None,
            "fed_toxic": "co"}
UNCERTAINTY = {  # illustrative statistics, NOT a published validation table
    "temperature": {"bias": 1.03, "sigma_model": 0.07, "sigma_exp": 0.07,
                    "range": {"min": 20, "max": 600, "unit": "degC"}},
    "co": {"bias": 1.10, "sigma_model": 0.20, "sigma_exp": 0.10},
    "extinction": {"bias": 1.40, "sigma_model": 0.30, "sigma_exp": 0.15,
                   "range": {"min": 0.01, "max": 1.5, "unit": "1/m"}},
}

BASE_LOCATIONS = [
    ("atrium-l1", "Atrium, level 1"),
    ("corridor-l2", "Level 2 corridor"),
    ("stair-lobby", "East stair lobby"),
]


def _crossing(t: np.ndarray, y: np.ndarray, limit: float, direction: str) -> float | None:
    """First crossing of ``limit`` by ``y`` (linear interpolation), None if never."""
    s = (y - limit) if direction == "above" else (limit - y)
    idx = np.nonzero(s >= 0)[0]
    if idx.size == 0:
        return None
    i = int(idx[0])
    if i == 0:
        return float(t[0])
    f = s[i - 1] / (s[i - 1] - s[i])
    return float(t[i - 1] + f * (t[i] - t[i - 1]))


def _crossings_monotone(t: np.ndarray, y: np.ndarray, limits: np.ndarray,
                        direction: str) -> np.ndarray:
    """Crossing times of many limits on a monotone curve; +inf when not reached."""
    if direction == "below":  # decreasing curve: flip sign
        y, limits = -y, -limits
    out = np.interp(limits, y, t)
    out = np.where(limits > y.max(), np.inf, out)
    return np.where(limits <= y[0], t[0], out)


def _pct(x: np.ndarray) -> dict[str, float | None]:
    with np.errstate(invalid="ignore"):  # inf - inf between two unreached samples
        p = np.percentile(x, [5, 50, 95])
    return {k: (None if not np.isfinite(v) else float(v)) for k, v in zip(("p05", "p50", "p95"), p)}


def _location_curves(t: np.ndarray, k: int, severity: float) -> dict[str, np.ndarray]:
    """Raw curves for location number k; severity scales the fire (invented)."""
    delay = 60.0 + 70.0 * (k % 3) + 15.0 * (k // 3)
    tau = max(t[-1], 1.0)
    x = np.clip((t - delay) / tau, 0.0, None)
    rise = severity * (75.0 - 12.0 * (k % 3)) * (1.0 - np.exp(-4.0 * x**1.5))
    temp = AMBIENT_C + rise
    ext = severity * (1.6 - 0.3 * (k % 3)) * (1.0 - np.exp(-5.0 * x**1.3))  # 1/m
    vis = np.minimum(VIS_MAX_M, 8.0 / np.maximum(ext, 1e-9))
    fed = severity * (0.9 - 0.2 * (k % 3)) * x**1.8
    flux = severity * (3.2 - 0.8 * (k % 3)) * (1.0 - np.exp(-3.0 * x**1.2))
    return {"temperature": temp, "visibility": vis, "fed_toxic": fed, "heat_flux": flux,
            "_ext": ext, "_rise": rise}


def _scenario(sid: str, title: str, end_s: float, severity: float, n_locations: int,
              rng: np.random.Generator, samples: int, routes_spec: list[dict],
              with_extras: bool) -> tuple[dict, dict]:
    t = np.linspace(0.0, end_s, int(end_s / 2) + 1)
    # one error factor per quantity and sample, shared by all locations (systematic)
    factors = {q: np.exp(rng.normal(0.0, u["sigma_model"], samples)) / u["bias"]
               for q, u in UNCERTAINTY.items()}
    locs_out, locs_plot, loc_aset_samples = [], {}, {}
    for k in range(n_locations):
        base_id, base_title = BASE_LOCATIONS[k % 3]
        lid = base_id if k < 3 else f"{base_id}-{k // 3 + 1}"
        ltitle = base_title if k < 3 else f"{base_title} ({k // 3 + 1})"
        curves = _location_curves(t, k, severity)
        crit_out, plot_out, per_sample = {}, {}, []
        for cid, c in CRITERIA.items():
            lim, direction = c["limit"], c["direction"]
            missing = cid == "heat_flux" and base_id == "stair-lobby"
            if missing:
                crit_out[cid] = {"limit": lim, "unit": c["unit"], "status": "not assessed",
                                 "raw_s": None,
                                 "corrected_s": {"p05": None, "p50": None, "p95": None},
                                 "p_reached": None, "missing_series": ["heat_flux"],
                                 "note": "no heat_flux series supplied at this location",
                                 "outside_validated_range": False}
                continue
            raw = curves[cid]
            raw_s = _crossing(t, raw, lim, direction)
            q = QUANTITY[cid]
            if q is None:  # no uncertainty statistics: corrected = raw
                times = np.full(samples, np.inf if raw_s is None else raw_s)
                band = None
            else:
                f = factors[q]
                if cid == "temperature":
                    adj = AMBIENT_C + (lim - AMBIENT_C) / f
                    times = _crossings_monotone(t, raw, adj, "above")
                    med, s = 1.0 / UNCERTAINTY[q]["bias"], UNCERTAINTY[q]["sigma_model"]
                    band = (AMBIENT_C + curves["_rise"] * med * np.exp(-Z95 * s),
                            AMBIENT_C + curves["_rise"] * med * np.exp(Z95 * s))
                elif cid == "visibility":
                    # corrected extinction K*f -> visibility 8/(K f); V < lim <=> K > 8/(lim f)
                    times = _crossings_monotone(t, curves["_ext"], 8.0 / (lim * f), "above")
                    med, s = 1.0 / UNCERTAINTY[q]["bias"], UNCERTAINTY[q]["sigma_model"]
                    kx = np.maximum(curves["_ext"], 1e-9)
                    band = (np.minimum(VIS_MAX_M, 8.0 / (kx * med * np.exp(Z95 * s))),
                            np.minimum(VIS_MAX_M, 8.0 / (kx * med * np.exp(-Z95 * s))))
                else:  # dose scales with the gas concentration factor
                    times = _crossings_monotone(t, raw, lim / f, "above")
                    med, s = 1.0 / UNCERTAINTY[q]["bias"], UNCERTAINTY[q]["sigma_model"]
                    band = (raw * med * np.exp(-Z95 * s), raw * med * np.exp(Z95 * s))
            per_sample.append(times)
            crit_out[cid] = {
                "limit": lim, "unit": c["unit"], "status": "assessed", "raw_s": raw_s,
                "corrected_s": _pct(times), "p_reached": float(np.mean(np.isfinite(times))),
                "missing_series": [], "note": "",
                "outside_validated_range": bool(cid == "visibility" and base_id == "atrium-l1"),
            }
            plot_out[cid] = {"label": c["label"], "unit": c["unit"], "raw": raw, "band": band,
                             "limit": lim, "direction": direction, "log": False}
        aset_samples = np.min(np.vstack(per_sample), axis=0)
        loc_aset_samples[lid] = aset_samples
        assessed = {cid: v for cid, v in crit_out.items() if v["status"] == "assessed"}

        def key50(cid: str) -> float:
            v = assessed[cid]["corrected_s"]["p50"]
            return np.inf if v is None else v

        def keyraw(cid: str) -> float:
            v = assessed[cid]["raw_s"]
            return np.inf if v is None else v

        raws = [v["raw_s"] for v in assessed.values() if v["raw_s"] is not None]
        governing = min(assessed, key=key50)
        governing_raw = min(assessed, key=keyraw)
        locs_out.append({
            "id": lid, "title": ltitle, "criteria": crit_out,
            "aset_raw_s": min(raws) if raws else None, "aset_s": _pct(aset_samples),
            "governing": governing if np.isfinite(key50(governing)) else None,
            "governing_raw": governing_raw if np.isfinite(keyraw(governing_raw)) else None,
            "not_assessed": [cid for cid, v in crit_out.items() if v["status"] == "not assessed"],
        })
        locs_plot[lid] = plot_out

    routes_out, routes_plot = [], {}
    loc_by_id = {loc["id"]: loc for loc in locs_out}
    for spec in routes_spec:
        comp = {
            "detection": rng.uniform(*spec["detection"], samples),
            "alarm": np.full(samples, spec["alarm"]),
            # lognormal with given median and 95th percentile: sigma = ln(p95/median)/z95
            "premovement": spec["pre_median"] * np.exp(
                rng.normal(0.0, np.log(spec["pre_p95"] / spec["pre_median"]) / Z95, samples)),
            "movement": np.maximum(rng.normal(spec["move_mean"], spec["move_sd"], samples), 1.0),
        }
        rset = sum(comp.values())
        exposed = [lid for lid in spec["exposed"] if lid in loc_aset_samples]
        aset = np.min(np.vstack([loc_aset_samples[lid] for lid in exposed]), axis=0)
        margin = aset - rset
        p_fail = float(np.mean(margin < 0))
        raw_list = [loc_by_id[lid]["aset_raw_s"] for lid in exposed
                    if loc_by_id[lid]["aset_raw_s"] is not None]
        aset_raw = min(raw_list) if raw_list else None
        gov_loc = min(exposed, key=lambda lid: np.inf if loc_by_id[lid]["aset_s"]["p50"] is None
                      else loc_by_id[lid]["aset_s"]["p50"])
        not_assessed = [{"location": lid, "criterion": cid} for lid in exposed
                        for cid in loc_by_id[lid]["not_assessed"]]
        verdict = "pass" if p_fail <= 0.05 else "fail"
        rset_med = float(np.median(rset))
        text = (f"{'Passes' if verdict == 'pass' else 'Fails'}: ASET falls short of RSET in "
                f"{p_fail:.1%} of samples (acceptable up to 5.0%).")
        if not_assessed:
            text += (" Not every criterion was assessed on this route ("
                     + ", ".join(f"{d['criterion']} at {d['location']}" for d in not_assessed)
                     + "); the verdict does not cover them.")
        route = {
            "id": spec["id"], "title": spec["title"], "occupants": spec["occupants"],
            "exposed_at": exposed,
            "rset_s": _pct(rset), "rset_components_s": {k: _pct(v) for k, v in comp.items()},
            "movement": {"travel_s": spec["move_mean"] * 0.6, "flow_s": spec["move_mean"],
                         "controlling_element": "door D2 (1.0 m clear width)",
                         "mode": "flow"},
            "aset_raw_s": aset_raw, "aset_s": _pct(aset),
            "governing_location": gov_loc,
            "governing_criterion": loc_by_id[gov_loc]["governing"],
            "margin_s": _pct(margin),
            "margin_raw_s": (None if aset_raw is None else aset_raw - rset_med),
            "p_fail": p_fail, "verdict": verdict, "not_assessed": not_assessed,
            "verdict_text": text, "along_route": None, "sensitivity": [],
            # turn-2 contract keys (illustrative values; the interval is not recomputed here)
            "p_fail_bounds": {"low": p_fail, "high": p_fail},
            "p_fail_ci95": [max(0.0, p_fail - 0.01), min(1.0, p_fail + 0.01)],
            "samples_used": samples,
        }
        censored = ~np.isfinite(aset)
        if censored.any():
            route["margin_at_least_s"] = _pct(np.where(censored, end_s, aset) - rset)
            route["share_aset_beyond_end"] = float(np.mean(censored))
            if route["margin_s"]["p05"] is None:
                # both beyond the data in some draws: the lead's rule makes it indeterminate
                route["verdict"] = "indeterminate"
                route["verdict_reason"] = (f"The histories end at {end_s:.0f} s with no limit "
                                           "reached in some draws; extend the simulation.")
                route["p_fail_bounds"] = {"low": 0.0, "high": 0.08}
        if with_extras and spec.get("extras"):
            # per-element flow results (illustrative numbers in the shape of the results keys)
            route["elements"] = [
                {"type": "corridor", "effective_width_m": 1.7, "capacity_p_s": 2.2,
                 "speed_m_s": 1.19, "clearing_s": 250.0, "queue_s": 0.0, "shared_with": []},
                {"type": "door", "id": "door D2", "effective_width_m": 0.7, "capacity_p_s": 0.91,
                 "speed_m_s": 1.0, "clearing_s": 395.0, "queue_s": 120.0, "shared_with": ["west-exit"]},
            ]
            route["along_route"] = {
                "criteria": {
                    "fed_toxic": {"p05": 0.04, "p50": 0.09, "p95": 0.21, "limit": 0.3,
                                  "exceeds_p": 0.012},
                    "fed_heat": {"p05": 0.02, "p50": 0.05, "p95": 0.11, "limit": 0.3,
                                 "exceeds_p": 0.0},
                },
                "assumptions": ["occupants walk the route at the median movement speed",
                                "each location is occupied for the time spent in its segment"],
            }
            base = route["margin_s"]["p50"]
            sens = []
            for name, lo, hi, dlo, dhi in [
                ("pre-movement time", "60 s", "240 s", 45.0, -110.0),
                ("detection time", "45 s", "75 s", 15.0, -15.0),
                ("door D2 clear width", "0.9 m", "1.2 m", -22.0, 30.0),
                ("extinction bias", "1.2", "1.6", -18.0, 12.0),
            ]:
                sens.append({"input": name, "low": lo, "high": hi,
                             "margin_low_s": base + dlo, "margin_high_s": base + dhi,
                             "swing_s": abs(dhi - dlo)})
            route["sensitivity"] = sorted(sens, key=lambda r: -r["swing_s"])
        routes_out.append(route)
        routes_plot[spec["id"]] = {"aset_samples": aset, "rset_samples": rset,
                                   "margin_samples": margin}

    if with_extras:
        locs_out.append({"id": "soffit-detector", "title": "Heat detector under the soffit",
                         "role": "detector", "criteria": {}, "aset_raw_s": None,
                         "aset_s": {"p05": None, "p50": None, "p95": None}, "governing": None,
                         "governing_raw": None, "not_assessed": []})
    scenario = {"id": sid, "title": title, "end_s": float(t[-1]),
                "histories": f"data/{sid}.csv", "locations": locs_out, "routes": routes_out,
                "credibility": None}
    plot = {"t_s": t, "locations": locs_plot, "routes": routes_plot, "credibility": {}}
    if with_extras:
        scenario["credibility"], plot["credibility"] = _credibility(locs_out[:2])
        scenario["shared_elements"] = [{"id": "door D2", "routes": ["east-stair", "west-exit"],
                                        "combined_flow_p_s": 0.91}]
        scenario["design_fire"] = {"growth": "fast t-squared, 0.047 kW/s^2 (illustrative)",
                                   "peak_hrr": "2.5 MW", "sprinklers": "none assumed",
                                   "yields": {"co": "0.03 kg/kg", "soot": "0.05 kg/kg"}}
    return scenario, plot


def _credibility(locations: list[dict]) -> tuple[dict, dict]:
    """Three-grid study: t(h) = t0 + C h^2 (invented), with Richardson extrapolation.

    Observed order p = ln((t1 - t2)/(t2 - t3)) / ln r, extrapolated t3 + (t3 - t2)/(r^p - 1)
    and the fine-grid GCI = Fs |(t3 - t2)/t3| / (r^p - 1) with Fs = 1.25 (Roache, P.J.,
    1998, Verification and Validation in Computational Science and Engineering,
    Hermosa; Celik et al., 2008, J. Fluids Eng. 130(7) 078001) -- from memory.
    """
    cells = [0.4, 0.2, 0.1]
    r = 2.0
    out_locs, plot = [], {}
    for j, loc in enumerate(locations):
        crits, plot_loc = {}, {}
        for cid in ("temperature", "visibility"):
            t0 = loc["criteria"][cid]["raw_s"]
            if t0 is None:
                continue
            c = (60.0 + 40.0 * j) * (1 if cid == "temperature" else -1)
            vals = [t0 + c * h**2 for h in cells]
            t1, t2, t3 = vals
            p = float(np.log((t1 - t2) / (t2 - t3)) / np.log(r))
            ext = t3 + (t3 - t2) / (r**p - 1.0)
            rel = abs(t3 - t2) / abs(t3)
            gci = 1.25 * rel / (r**p - 1.0)
            crits[cid] = {"cells_m": cells[::-1], "values_s": vals[::-1],
                          "relative_change": rel, "flagged": rel > 0.05,
                          "convergence": "monotone", "order": p, "extrapolated_s": ext,
                          "gci": gci, "note": "" if rel <= 0.05 else "finer grid advised"}
            plot_loc[cid] = {"cells": cells, "values_s": vals, "extrapolated_s": ext}
        aset_vals = [min(plot_loc[c]["values_s"][i] for c in plot_loc) for i in range(3)]
        # a criterion reached on no grid, flagged by the grid study: the report leaves it out
        crits["heat_flux"] = {"cells_m": cells[::-1], "values_s": [None, None, None],
                              "relative_change": None, "flagged": True, "convergence": None,
                              "order": None, "extrapolated_s": None, "gci": None, "note": ""}
        crits_aset = {"cells_m": cells[::-1], "values_s": aset_vals[::-1],
                      "relative_change": abs(aset_vals[2] - aset_vals[1]) / aset_vals[2],
                      "flagged": False, "convergence": "oscillatory", "order": None,
                      "extrapolated_s": None, "gci": None,
                      "note": "order not estimated (governing criterion changes)"}
        plot_loc["aset"] = {"cells": cells, "values_s": aset_vals, "extrapolated_s": None}
        out_locs.append({"id": loc["id"], "criteria": crits, "aset": crits_aset})
        plot[loc["id"]] = plot_loc
    return {"resolutions": cells, "threshold": 0.05, "locations": out_locs}, plot


def make_fixture(n_locations: int = 3, samples: int = 2000, seed: int = 7,
                 credibility: bool = True) -> tuple[dict[str, Any], dict[str, Any]]:
    """Build ``(results, plotdata)`` for the report tests (illustrative numbers)."""
    rng = np.random.default_rng(seed)
    loc_ids = [BASE_LOCATIONS[k % 3][0] if k < 3 else f"{BASE_LOCATIONS[k % 3][0]}-{k // 3 + 1}"
               for k in range(n_locations)]
    east = [lid for lid in loc_ids if lid.startswith(("atrium-l1", "stair-lobby"))]
    west = [lid for lid in loc_ids if lid.startswith("corridor-l2")] or loc_ids[:1]
    routes = [
        {"id": "east-stair", "title": "East stair from the reading room", "occupants": 180,
         "detection": (45.0, 75.0), "alarm": 30.0, "pre_median": 90.0, "pre_p95": 240.0,
         "move_mean": 150.0, "move_sd": 15.0, "exposed": east, "extras": True},
        {"id": "west-exit", "title": "West exit via level 2 corridor", "occupants": 95,
         "detection": (45.0, 75.0), "alarm": 30.0, "pre_median": 60.0, "pre_p95": 150.0,
         "move_mean": 80.0, "move_sd": 10.0, "exposed": west, "extras": False},
    ]
    sa, pa = _scenario("fire-a", "Reading-room fire, sprinklers controlling", 1200.0, 1.0,
                       n_locations, rng, samples, routes, with_extras=credibility)
    sb, pb = _scenario("fire-b", "Store-room fire, door closed", 900.0, 0.4,
                       n_locations, rng, samples, routes, with_extras=False)
    # scenario B keeps the extras off so the report must cope with their absence
    digest = lambda s: hashlib.sha256(s.encode()).hexdigest()  # noqa: E731
    inputs = []
    for sc in (sa, sb):
        cols = [{"column": "Time [s]", "series": "time", "location": None, "unit_as_read": "s"}]
        for loc in sc["locations"]:
            for series, unit in (("temperature", "degC"), ("co", "ppm"),
                                 ("extinction", "1/m"), ("heat_flux", "kW/m^2")):
                if series == "heat_flux" and loc["id"].startswith("stair-lobby"):
                    continue
                cols.append({"column": f"{series.upper()}_{loc['id']}", "series": series,
                             "location": loc["id"], "unit_as_read": unit})
        inputs.append({"path": sc["histories"], "sha256": digest(sc["id"] + " histories"),
                       "rows": int(sc["end_s"] / 2) + 1, "t_start_s": 0.0,
                       "t_end_s": sc["end_s"], "columns": cols})
    results = {
        "version": "0.1.0",
        "seed": seed,
        "samples": samples,
        "generated": "2025-03-14T09:30:00",
        "study": {"title": "Harbourside community library — atrium smoke study",
                  "reference": "HCL-FE-0042 rev B (illustrative)",
                  "prepared_by": "A. Example, fire engineer (invented)",
                  "prepared_for": "Harbourside Library Trust (invented)",
                  "paper": "A4", "path": "study.yaml", "sha256": digest("study")},
        "inputs": inputs,
        "criteria": {
            "name": "fixture-set",
            "description": "Illustrative tenability limits for report testing only.",
            "sources": ["illustrative values (test fixture); not a published criteria set"],
            "applied": {cid: {k: v for k, v in c.items() if k not in ("direction", "label")}
                        for cid, c in CRITERIA.items()},
        },
        "uncertainty": {
            "source": "Illustrative validation statistics (test fixture, not a published table)",
            "distribution": "lognormal",
            "path": "validation/uncertainty.yaml", "sha256": digest("uncertainty"),
            "quantities": copy.deepcopy(UNCERTAINTY),
        },
        "egress_method": {
            "name": "flow and travel (illustrative)",
            "text": ("RSET = detection + alarm + pre-movement + movement; movement is the "
                     "larger of the walking time along the route and the time for the "
                     "occupants to pass the controlling element at its specific flow."),
            "constants": [
                {"name": "unimpeded walking speed", "value": 1.19, "unit": "m/s",
                 "source": "illustrative fixture value"},
                {"name": "maximum specific flow, doors", "value": 1.3,
                 "unit": "persons/(s·m)", "source": "illustrative fixture value"},
                {"name": "boundary layer, each side of a door", "value": 0.15, "unit": "m",
                 "source": "illustrative fixture value"},
            ],
        },
        "acceptance": {"max_p_fail": 0.05},
        "assumptions": ["sprinkler activation as modelled in the fire simulation",
                        "all occupants are awake and familiar with the building"],
        "warnings": ["fire-a: visibility at atrium-l1 falls below the validated "
                     "extinction range of the uncertainty table after 900 s"],
        "scenarios": [sa, sb],
    }
    plotdata = {"fire-a": pa, "fire-b": pb}
    return results, plotdata


__all__ = ["make_fixture"]
