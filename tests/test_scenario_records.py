"""The location and scenario records and their serialisers (scenario_records.py).

The key sets of results.json locations, criteria and scenarios are locked here (the
contract's keys and the documented extensions, in the order they are written), and a
small record is serialised against JSON written out by hand. The percentiles expected
below are worked by hand with numpy's default linear interpolation (Hyndman & Fan 1996,
definition 7), a percentile touching a "not reached" draw being null (contract).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from egressmargin.scenario_records import (CLOCK_DEFAULT, CriterionAtLocation, LocationResult, ScenarioResult,
                                           location_json, scenario_json)
from engine_helpers import write_study, results_for

INF = math.inf

CRITERION_KEYS_ASSESSED = ["limit", "unit", "status", "raw_s", "corrected_s", "p_reached", "missing_series", "note",
                           "partial", "grid_bound_s", "outside_validated_range", "range_note"]
CRITERION_KEYS_NOT_ASSESSED = ["limit", "unit", "status", "raw_s", "corrected_s", "p_reached", "missing_series"]
LOCATION_KEYS = ["id", "title", "height_m", "criteria", "aset_raw_s", "aset_s", "governing", "governing_raw",
                 "not_assessed", "aset_by_member"]
DETECTOR_KEYS = ["id", "title", "role", "criteria", "aset_raw_s", "aset_s", "governing", "governing_raw",
                 "not_assessed"]
SCENARIO_KEYS = ["id", "title", "end_s", "histories", "warnings", "range_warnings", "ignition_s", "clock",
                 "locations", "routes", "shared_elements", "design_fire", "ensemble", "hrr", "credibility"]
# contract.md, results.json: the keys a location, a criterion and a scenario must carry
CONTRACT_LOCATION = {"id", "criteria", "aset_raw_s", "aset_s", "governing"}
CONTRACT_CRITERION = {"limit", "unit", "status", "raw_s", "corrected_s", "p_reached"}
CONTRACT_SCENARIO = {"id", "end_s", "locations", "routes"}


def _full_location() -> LocationResult:
    """Every optional key present: a criterion with all its notes, one not assessed, per-member ASET."""
    full = CriterionAtLocation(limit=1.0, unit="-", assessed=True, raw_s=100.0, times_s=np.array([90.0, 110.0]),
                               missing_series=["co2"], partial=True, grid_bound_s=0.5,
                               range_note="co outside the validated range",
                               range_findings=[{"criterion": "fed_toxic"}])
    absent = CriterionAtLocation(limit=2.5, unit="kW/m^2", assessed=False, missing_series=["heat_flux"])
    return LocationResult(id="hall", title="Hall", height_m=1.8, criteria={"fed_toxic": full, "heat_flux": absent},
                          aset_raw_s=100.0, aset_s=np.array([90.0, 110.0]),
                          aset_by_member=[{"member": "m1", "aset_raw_s": 100.0, "aset_s": {}}])


def test_location_and_criterion_key_sets_are_locked():
    entry = location_json(_full_location())
    assert list(entry) == LOCATION_KEYS
    assert list(entry["criteria"]["fed_toxic"]) == CRITERION_KEYS_ASSESSED
    assert list(entry["criteria"]["heat_flux"]) == CRITERION_KEYS_NOT_ASSESSED
    assert entry["not_assessed"] == ["heat_flux"]
    detector = location_json(LocationResult(id="soffit", title="Soffit", role="detector"))
    assert list(detector) == DETECTOR_KEYS
    assert detector["criteria"] == {} and detector["not_assessed"] == []
    # one run: no per-member ASET; a criterion without notes has only the plain keys
    plain = _full_location()
    plain.aset_by_member = None
    c = plain.criteria["fed_toxic"]
    c.missing_series, c.partial, c.grid_bound_s, c.range_note = [], False, None, None
    out = location_json(plain)
    assert list(out) == LOCATION_KEYS[:-1]
    assert list(out["criteria"]["fed_toxic"]) == ["limit", "unit", "status", "raw_s", "corrected_s", "p_reached",
                                                  "outside_validated_range"]


def test_scenario_key_set_is_locked():
    rec = ScenarioResult(id="s", title="S", end_s=600.0, histories="s.csv", ignition_s=None, clock_note=None,
                         locations=[_full_location()], routes=[], range_warnings=[], shared_elements=[],
                         design_fire={"growth": "fast"}, ensemble=[{"member": "m1"}], hrr={"column": "Q"},
                         credibility={"gci": 0.01})
    assert list(scenario_json(rec)) == SCENARIO_KEYS
    bare = ScenarioResult(id="s", title="S", end_s=600.0, histories="s.csv", ignition_s=None, clock_note=None,
                          locations=[])
    assert list(scenario_json(bare)) == SCENARIO_KEYS[:-4]
    assert scenario_json(bare)["clock"] == CLOCK_DEFAULT


def test_a_small_record_serialises_to_the_hand_written_json():
    # temperature: draws 10, 20, 30 s and one not reached. Sorted [10, 20, 30, inf]:
    # p05 at position 3 x 0.05 = 0.15 -> 10 + 0.15 x 10 = 11.5; p50 at 1.5 -> 25.0;
    # p95 at 2.85 interpolates towards the not-reached draw -> null. Reached in 3 of 4.
    temp = CriterionAtLocation(limit=60.00000004, unit="degC", assessed=True, raw_s=12.34567,
                               times_s=np.array([30.0, 10.0, INF, 20.0]), grid_bound_s=float("inf"))
    # visibility: reached at 5 s in every draw (earlier median, later raw crossing)
    vis = CriterionAtLocation(limit=10.0, unit="m", assessed=True, raw_s=40.0, times_s=np.full(4, 5.0),
                              grid_bound_s=0.12345, range_note="extinction outside the validated range")
    heat = CriterionAtLocation(limit=2.5, unit="kW/m^2", assessed=False, missing_series=["heat_flux"])
    loc = LocationResult(id="hall", title="Hall", height_m=None,
                         criteria={"temperature": temp, "visibility": vis, "heat_flux": heat},
                         aset_raw_s=12.34567, aset_s=np.array([5.0, 5.0, 5.0, 5.0]))
    expected = json.loads("""{
      "id": "hall", "title": "Hall", "height_m": null,
      "criteria": {
        "temperature": {"limit": 60.0, "unit": "degC", "status": "assessed", "raw_s": 12.346,
                        "corrected_s": {"p05": 11.5, "p50": 25.0, "p95": null}, "p_reached": 0.75,
                        "outside_validated_range": false},
        "visibility": {"limit": 10.0, "unit": "m", "status": "assessed", "raw_s": 40.0,
                       "corrected_s": {"p05": 5.0, "p50": 5.0, "p95": 5.0}, "p_reached": 1.0,
                       "grid_bound_s": 0.123, "outside_validated_range": true,
                       "range_note": "extinction outside the validated range"},
        "heat_flux": {"limit": 2.5, "unit": "kW/m^2", "status": "not assessed", "raw_s": null,
                      "corrected_s": {"p05": null, "p50": null, "p95": null}, "p_reached": null,
                      "missing_series": ["heat_flux"]}
      },
      "aset_raw_s": 12.346, "aset_s": {"p05": 5.0, "p50": 5.0, "p95": 5.0},
      "governing": "visibility", "governing_raw": "temperature", "not_assessed": ["heat_flux"]
    }""")
    got = location_json(loc)
    assert got == expected
    assert list(got) == list(expected)          # the order results.json is written in
    # the scenario around it: end rounded to ms, the range sentence named by scenario and location
    sc = scenario_json(ScenarioResult(id="fire-x", title="Fire X", end_s=600.00049, histories="x.csv",
                                      ignition_s=30.0, clock_note="shifted by 30 s", locations=[loc]))
    assert sc == {"id": "fire-x", "title": "Fire X", "end_s": 600.0, "histories": "x.csv",
                  "warnings": ["scenario fire-x, location hall, visibility: extinction outside the validated range"],
                  "range_warnings": [], "ignition_s": 30.0, "clock": "shifted by 30 s", "locations": [expected],
                  "routes": [], "shared_elements": []}
    assert json.loads(json.dumps(sc, allow_nan=False)) == sc      # plain JSON, no NaN or numpy types


def test_every_key_a_run_writes_is_in_the_locked_sets(tmp_path):
    """A small run (a room with temperature and CO but no CO2, a detector point): the pipeline's
    locations, criteria and scenario carry only the locked keys, and the contract's."""
    t = np.arange(0.0, 601.0, 10.0)
    cols = {"T": ("degC", 20.0 + 0.2 * t), "CO": ("ppm", 2.0 * t), "Td": ("degC", 20.0 + 0.3 * t)}
    locs = [{"id": "room", "temperature": "T", "co": "CO"}, {"id": "soffit", "role": "detector", "temperature": "Td"}]
    route = {"id": "r", "occupants": 10, "detection": "30 s", "alarm": "0 s", "premovement": "30 s",
             "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["room"]}
    res, _ = results_for(write_study(tmp_path, t, cols, locs, routes=[route], samples=50))
    sc = res["scenarios"][0]
    assert CONTRACT_SCENARIO <= set(sc) <= set(SCENARIO_KEYS)
    room, soffit = sc["locations"]
    assert list(soffit) == DETECTOR_KEYS
    assert CONTRACT_LOCATION <= set(room) and list(room) == LOCATION_KEYS[:-1]
    for cid, c in room["criteria"].items():
        allowed = CRITERION_KEYS_ASSESSED if c["status"] == "assessed" else CRITERION_KEYS_NOT_ASSESSED
        assert CONTRACT_CRITERION <= set(c) and set(c) <= set(allowed), cid
        assert [k for k in allowed if k in c] == list(c), cid       # written in the locked order
    assert room["criteria"]["temperature"]["status"] == "assessed"
    assert room["criteria"]["temperature"]["raw_s"] == pytest.approx(200.0)    # 20 + 0.2 t = 60 degC
