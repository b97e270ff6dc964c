"""Route RSET from the flow model through the whole pipeline: doses where people are,
the location-aware comparison, shared elements in results.json, stream stability.

Histories are synthetic (constant or linear series, invented for the tests). Hand
calculations use the SFPE Handbook 5th ed. ch. 59 hydraulic constants (from memory, as
in egress/movement.py): corridor 2.0 m wide -> We 1.6 m, 2.08 persons/s, 1.19 m/s
unimpeded; door 1.0 m -> We 0.7 m, 0.91 persons/s; door 2.4 m -> We 2.1 m, 2.73 persons/s.
The ISO 13571:2012 CO term of the toxic FED is [CO, ppm] / 35000 per minute.
"""

from __future__ import annotations

import numpy as np
import pytest

from engine_helpers import results_for, write_study
from egressmargin import assess

ONLY_T = {"base": "general-2m", "only": ["temperature"]}


def test_along_route_dose_with_the_queue_at_its_location(tmp_path):
    """The queue for a door stands in the corridor before it, so it is charged there.

    Hand: 100 persons start at 60 s (detection 30 s + alarm 30 s, no pre-movement).
    They walk the corridor (at 'corridor', 2000 ppm CO; unimpeded, 11.9/1.19 = 10 s,
    upstream of the controlling door) and the door (0.91 persons/s, controlling)
    passes the last at 60 + 10 + 100/0.91 = 179.89 s: travel + N/Fc (the corridor's
    entry, with spare capacity, adds nothing: SFPE Handbook ch. 59, flow in = flow
    out). The door says `at: corridor`: the last occupant is in the corridor from
    60 s (walking, then queuing) to 179.89 s, and before that, with `start_at:
    corridor`, from 0 s. FED = 179.89 s / 60 x 2000/35000 = 0.1713. The exit corridor
    (no CO) adds nothing; its entry's queue (none) is charged to the door's location.
    """
    t = np.arange(0.0, 1201.0, 5.0)
    cols = {"CO1": ("ppm", np.full_like(t, 2000.0)), "CO2x": ("ppm", np.zeros_like(t))}
    locs = [{"id": "corridor", "co": "CO1"}, {"id": "exit", "co": "CO2x"}]
    route = {"id": "r", "occupants": 100, "detection": "30 s", "alarm": "30 s", "premovement": "0 s",
             "start_at": "corridor", "exposure": "along-route",
             "path": [{"corridor": {"length": "11.9 m", "width": "2 m", "at": "corridor"}},
                      {"door": {"width": "1.0 m", "at": "corridor"}},
                      {"corridor": {"length": "11.9 m", "width": "2 m", "at": "exit"}}],
             "exposed_at": ["corridor", "exit"]}
    crit = {"base": "general-2m", "only": ["fed_toxic"]}
    res, _ = results_for(write_study(tmp_path, t, cols, locs, routes=[route], criteria=crit))
    r = res["scenarios"][0]["routes"][0]
    leave_door = 60 + 11.9 / 1.19 + 100 / (1.3 * 0.7)
    assert r["elements"][1]["clearing_s"]["p50"] == pytest.approx(leave_door, abs=0.05)
    # the queue at the door: the last person waits from reaching it to passing it
    assert r["elements"][1]["queue_s"]["p50"] > 60.0
    # people wait for the exit corridor in the location before it (the door's)
    assert [(e["at"], e["queue_at"]) for e in r["elements"]] == [("corridor", "corridor"), ("corridor", "corridor"),
                                                                 ("exit", "corridor")]
    dose = r["along_route"]["criteria"]["fed_toxic"]["p50"]
    assert dose == pytest.approx(leave_door / 60 * 2000 / 35000, rel=2e-3)       # 0.1713
    where = [(h["location"], h["what"]) for h in r["along_route"]["history"]]
    assert where == [("corridor", "before moving"), ("corridor", "path element 1 (corridor)"),
                     ("corridor", "path element 2 (door)"), ("corridor", "waiting to enter path element 3 (corridor)"),
                     ("exit", "path element 3 (corridor)")]


def test_location_aware_comparison_counts_only_where_and_while_people_are(tmp_path):
    """The room becomes untenable at 250 s, after its last occupant has left it.

    Hand: 100 persons, detection 30 s + alarm 30 s, pre-movement across occupants
    uniform over 0-100 s: the last starts at 60 + 99.5 = 159.5 s (quantile 0.995). The
    2.4 m door (at the room) passes them without a queue (arrivals 1 person/s < 2.73).
    Alone, a person's passage takes 1/c of the narrowest element met (N/Fc with N = 1):
    the last passes the 120 m corridor's entry (2.08 persons/s, controlling) at
    159.5 + 1/2.08 = 159.98 s, waiting for it in the room (the location before it), and
    walks it unimpeded (flow about 1 person/s of 2.08, D = (1 - sqrt(1 - 0.48))/(2 x
    0.266) = 0.52 < 0.54: 1.19 m/s): RSET = 159.98 + 120/1.19 = 260.82 s.
    Room temperature 20 + 0.16 t reaches 60 degC at 250 s; the corridor stays at 20 degC.
    Classic: route ASET 250 s < RSET 260.8 s, margin -10.8 s. Location-aware: room 250 -
    159.98 = +90.0 s; the corridor never: the route does not fail for its occupants.
    """
    t = np.arange(0.0, 1201.0, 5.0)
    cols = {"Troom": ("degC", 20 + 0.16 * t), "Tcorr": ("degC", np.full_like(t, 20.0))}
    locs = [{"id": "room", "temperature": "Troom"}, {"id": "corr", "temperature": "Tcorr"}]
    route = {"id": "r", "occupants": 100, "detection": "30 s", "alarm": "30 s",
             "premovement": {"across_occupants": {"uniform": {"low": "0 s", "high": "100 s"}}},
             "start_at": "room",
             "path": [{"door": {"width": "2.4 m", "at": "room"}},
                      {"corridor": {"length": "120 m", "width": "2 m", "at": "corr"}}],
             "exposed_at": ["room", "corr"]}
    res, _ = results_for(write_study(tmp_path, t, cols, locs, routes=[route], criteria=ONLY_T,
                                     extra={"scenarios": [{"id": "s1", "histories": "data.csv", "time": "Time",
                                                           "ambient": {"temperature": "20 degC"},
                                                           "locations": locs}]}))
    r = res["scenarios"][0]["routes"][0]
    rset = 159.5 + 1 / 2.08 + 120 / 1.19
    assert r["rset_s"]["p50"] == pytest.approx(rset, abs=0.05)
    assert r["rset_components_s"]["premovement"]["p50"] == pytest.approx(99.5)
    assert r["margin_s"]["p50"] == pytest.approx(250.0 - rset, abs=0.1)          # classic: fails
    assert r["location_aware_margin_s"]["p50"] == pytest.approx(250.0 - (159.5 + 1 / 2.08), abs=0.05)
    assert r["location_aware_binding"] == "room"
    assert r["premovement_meaning"].startswith("across occupants")


def test_shared_element_in_results_and_common_random_numbers(tmp_path):
    """Two routes of 60 on one named door: the door passes 120 persons at 0.91 persons/s.

    Hand: everyone starts at 30 s, each route walks 11.9 m (10 s) to the shared door:
    combined clearing 30 + 10 + 120/0.91 = 171.87 s; each route alone would clear at
    30 + 10 + 60/0.91 = 105.93 s (the corridors' entries, with spare capacity, add
    nothing: SFPE Handbook ch. 59, flow in = flow out).
    """
    t = np.arange(0.0, 601.0, 5.0)
    cols = {"T": ("degC", np.full_like(t, 20.0))}
    locs = [{"id": "a", "temperature": "T"}]

    def route(rid):
        return {"id": rid, "occupants": 60, "detection": "30 s", "alarm": "0 s", "premovement": "0 s",
                "path": [{"corridor": {"length": "11.9 m", "width": "2 m"}}, {"element": "exit-door"}],
                "exposed_at": ["a"]}
    extra = {"elements": [{"id": "exit-door", "door": {"width": "1.0 m"}}]}
    res, _ = results_for(write_study(tmp_path, t, cols, locs, routes=[route("x"), route("y")], criteria=ONLY_T,
                                     extra=extra))
    sc = res["scenarios"][0]
    (shared,) = sc["shared_elements"]
    assert shared["id"] == "exit-door" and shared["routes"] == ["x", "y"]
    assert shared["combined_occupants"]["p50"] == 120
    combined = 30 + 10 + 120 / 0.91
    assert shared["combined_clearing_s"]["p50"] == pytest.approx(combined, abs=0.05)
    x = sc["routes"][0]
    assert x["elements"][1]["shared_with"] == ["y"] and x["elements"][1]["id"] == "exit-door"
    assert max(r["rset_s"]["p50"] for r in sc["routes"]) == pytest.approx(combined, abs=0.05)
    assert min(r["rset_s"]["p50"] for r in sc["routes"]) > 30 + 10 + 60 / 0.91


def test_detection_alarm_premovement_streams_are_unchanged():
    """The movement inputs draw from new streams; the original three keep their numbers."""
    d = assess.egress_uniforms(7, 2, 50)
    rng = np.random.default_rng([7, 7919, 2])
    np.testing.assert_array_equal(d.detection, rng.random(50))
    np.testing.assert_array_equal(d.alarm, rng.random(50))
    np.testing.assert_array_equal(d.premovement, rng.random(50))
    assert not np.array_equal(d.occupants, d.detection)


def test_uncertain_occupants_are_whole_persons_and_swept(tmp_path):
    t = np.arange(0.0, 601.0, 5.0)
    cols = {"T": ("degC", 20 + 0.1 * t)}
    locs = [{"id": "a", "temperature": "T"}]
    route = {"id": "r", "occupants": {"uniform": {"low": 50, "high": 150}}, "detection": "30 s", "alarm": "0 s",
             "premovement": "0 s", "path": [{"door": {"width": "1.0 m"}}], "exposed_at": ["a"]}
    res, _ = results_for(write_study(tmp_path, t, cols, locs, routes=[route], criteria=ONLY_T, samples=2000))
    r = res["scenarios"][0]["routes"][0]
    # RSET = 30 + N/0.91 with N uniform over 50..150 persons: median N 100 -> 139.9 s
    assert r["rset_s"]["p50"] == pytest.approx(30 + 100 / 0.91, abs=3.0)
    assert r["occupants_drawn"]["p05"] == pytest.approx(55, abs=2)
    sens = {s["input"]: s for s in r["sensitivity"]}
    # occupant count swept between its 5th and 95th percentiles: 55 and 145 persons,
    # swing (145 - 55)/0.91 = 98.9 s
    assert sens["occupant count"]["swing_s"] == pytest.approx(90 / 0.91, abs=1.2)
    assert "effective width of element 1 (door)" in sens
