"""The flow model against the SFPE hydraulic hand method (issue 22, item 5).

Hand calculations use the hydraulic method of Gwynne & Rosenbaum (2016), SFPE Handbook
of Fire Protection Engineering, 5th ed., ch. 59 (constants from memory, as in
egress/movement.py): k = 1.40 m/s level, 1.08 m/s stair 178/279 mm; a = 0.266 m^2/p;
unimpeded speed 0.85 k (1.19 m/s level); Fsm = 1.3 level, 1.01 stair 178/279
persons/(s m); boundary layers 0.15 m (door, stair wall), 0.20 m (corridor wall); the
flow time through the controlling element N/Fc; transitions flow in = flow out; the
density of maximum flow 1/(2a) = 1.880 persons/m^2, speed k/2 there; unimpeded below
0.54 persons/m^2.

The independent reference for arbitrary start times is a fluid simulation written here
(time-stepped cumulative counts, as in Newell 1982, Applications of Queueing Theory,
ch. 2): each element passes at most c dt persons per step, and person k has passed when
the element's cumulative count reaches k.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from egressmargin.egress import flow
from egressmargin.egress import movement as mv
from egressmargin.egress.summary import explain_route, explain_text

A = 0.266                      # m^2/person (SFPE Handbook ch. 59, from memory)


def props_of(path):
    return [mv.element_properties(e) for e in path]


def run(path, starts, speed_factor=1.0):
    """The flow model for one route; ``starts`` (N,) or (S, N) start times [s]."""
    starts = np.atleast_2d(np.asarray(starts, dtype=float))
    S, N = starts.shape
    elements = tuple(flow.NetElement(f"e{i}", p["length_m"], p["k"], p["effective_width_m"], p["capacity_p_s"])
                     for i, p in enumerate(props_of(path)))
    counts = np.isfinite(starts).sum(axis=1)
    r = flow.NetRoute("r", starts, np.maximum(counts, 1), elements, np.ones(S), np.full(S, speed_factor))
    return flow.simulate([r])[0]["r"]


def corridor(length, width=2.0):
    return {"type": "corridor", "length_m": length, "width_m": width}


def door(width):
    return {"type": "door", "width_m": width}


def stair(length, width=1.2):
    return {"type": "stair", "length_m": length, "width_m": width, "riser_m": 0.178, "tread_m": 0.279}


# --------------------------------------------------------------- 1. small groups walk unimpeded

def test_one_person_on_a_long_corridor_walks_unimpeded():
    # Hand: one person makes no crowd (D = 0 < 0.54): 60 m at 0.85 x 1.40 = 1.19 m/s is
    # 50.42 s, plus N/Fc = 1/2.08 = 0.48 s for their passage: 50.90 s (was 77.7 s, the
    # crowd speed of a 2.08 persons/s flow). The 60/1.199 = 50.0 s uses
    # k (1 - a x 0.54) = 1.199 m/s; the project keeps the handbook's tabulated 0.85 k.
    r = run([corridor(60.0)], [[0.0]])
    assert r.elements[0].speed_m_s[0] == pytest.approx(1.19)
    assert r.exit_s[0] == pytest.approx(60 / 1.19 + 1 / 2.08, abs=1e-9)
    assert r.exit_s[0] == pytest.approx(50.90, abs=0.01)


def test_a_small_group_is_not_a_crowd_but_a_large_one_is():
    # Hand: the corridor (1.6 m effective, 2.08 persons/s) controls and discharges at
    # capacity; its flow density is 1/(2a) = 1.880, but 5 persons spread over
    # 60 m x 1.6 m = 96 m^2 are at most 5/96 = 0.052 persons/m^2 < 0.54: unimpeded,
    # 60/1.19 + 5/2.08 = 52.82 s. 300 persons: 300/96 = 3.1 > 1.880, so D = 1.880 and
    # S = 1.40/2 = 0.70 m/s: 60/0.70 + 300/2.08 = 85.71 + 144.23 = 229.95 s.
    small = run([corridor(60.0)], np.zeros((1, 5)))
    assert small.elements[0].density_p_m2[0] == 0.0
    assert small.exit_s[0] == pytest.approx(60 / 1.19 + 5 / 2.08, abs=1e-9)
    big = run([corridor(60.0)], np.zeros((1, 300)))
    assert big.elements[0].density_p_m2[0] == pytest.approx(1 / (2 * A), rel=1e-6)
    assert big.elements[0].speed_m_s[0] == pytest.approx(0.70, abs=1e-6)
    assert big.exit_s[0] == pytest.approx(60 / 0.70 + 300 / 2.08, abs=1e-6)


# ------------------------------------------------- 2. N/Fc, and nothing added downstream

def test_controlling_door_then_two_wider_doors_take_n_over_fc():
    # Hand: 0.8 m door: We = 0.8 - 0.30 = 0.5 m, Fc = 1.3 x 0.5 = 0.65 persons/s,
    # 100/0.65 = 153.85 s. The 2.0 m doors (2.21 persons/s) pass the 0.65 persons/s
    # stream as it comes (flow in = flow out): the route takes N/Fc = 153.85 s (was
    # 153.85 + 2/2.21 = 154.75 s: 0.9 s added by two doors that do not control).
    r = run([door(0.8), door(2.0), door(2.0)], np.zeros((1, 100)))
    assert r.exit_s[0] == pytest.approx(100 / 0.65, abs=1e-9)
    assert [e.pass_s[0] for e in r.elements] == pytest.approx([100 / 0.65] * 3, abs=1e-9)
    assert all(e.queue_s[0] == pytest.approx(0.0, abs=1e-9) for e in r.elements[1:])


def test_controlling_element_in_the_middle_adds_only_walking():
    # Hand: corridor 15 m (2.08 p/s, upstream: unimpeded 1.19 m/s, 12.61 s); door 0.8 m
    # (0.65 p/s, controls, 100/0.65 = 153.85 s); stair 20 m, 1.2 m (0.909 p/s) carries
    # 0.65 p/s: F/Fc = 0.715, D = (1 - sqrt(0.285))/(2a) = 0.877 persons/m^2, S = 1.08
    # (1 - 0.266 x 0.877) = 0.828 m/s, 24.15 s; door 2.0 m adds nothing.
    # Total 12.61 + 153.85 + 24.15 = 190.60 s.
    path = [corridor(15.0), door(0.8), stair(20.0), door(2.0)]
    d = (1 - np.sqrt(1 - 0.65 / 0.909)) / (2 * A)
    v = 1.08 * (1 - A * d)
    assert d == pytest.approx(0.877, abs=1e-3) and v == pytest.approx(0.828, abs=1e-3)
    r = run(path, np.zeros((1, 100)))
    assert r.elements[2].speed_m_s[0] == pytest.approx(v, rel=1e-9)
    assert r.exit_s[0] == pytest.approx(15 / 1.19 + 100 / 0.65 + 20 / v, abs=1e-6)
    assert r.exit_s[0] == pytest.approx(190.60, abs=0.01)


# ------------------------------------- 3. speed at the density of maximum flow at capacity

@pytest.mark.parametrize("element, k", [(corridor(20.0), 1.40), (stair(20.0), 1.08)])
def test_element_at_capacity_walks_at_half_k(element, k):
    # Hand: an element discharging at capacity has D = 1/(2a) = 1.880 persons/m^2 and
    # S = k (1 - a/(2a)) = k/2: corridor 0.70 m/s, stair 178/279 0.54 m/s (was 0.777 and
    # 0.578 m/s, the rounded Fsm inverted on the lower branch: on a 20 m stair 34.60 s
    # instead of 37.04 s, 2.4 s optimistic).
    r = run([element], np.zeros((1, 300)))
    c = props_of([element])[0]["capacity_p_s"]
    assert r.elements[0].speed_m_s[0] == pytest.approx(k / 2, rel=1e-9)
    assert r.exit_s[0] == pytest.approx(300 / c + 20 / (k / 2), abs=1e-6)


# ---------------------------------------------- the hand form equals the model, everyone at 0

ROUTES = {
    "corridor-door": ([corridor(30.0), door(0.9)], 200),
    "corridor-door-stair": ([corridor(30.0), door(1.2), stair(15.0)], 200),
    "narrow-corridor-in-the-middle": ([door(1.2), corridor(25.0, 1.1), door(2.0), stair(12.0, 1.6)], 150),
    "one-person": ([corridor(60.0)], 1),
    "small-group-long-corridor": ([door(1.0), corridor(80.0)], 12),
    "stair-then-corridor": ([stair(18.0), corridor(40.0, 1.5)], 400),
}


@pytest.mark.parametrize("name", sorted(ROUTES))
def test_hand_form_and_explain_equal_the_flow_model_when_everyone_starts_together(name):
    """movement_time (the report's hand calculation) and explain_route (validate
    --explain) give the model's movement time and speeds for one route whose occupants
    all start at t = 0; also with a speed factor (0.8) on the travel part."""
    path, n = ROUTES[name]
    r = run(path, np.zeros((1, n)))
    hand = mv.movement_time(path, n)
    # (1e-6 s: the flow measured through an element at capacity is c to round-off, and
    # D = (1 - sqrt(1 - F/Fc))/(2a) turns 1e-16 in F/Fc into 1e-8 in D)
    assert r.exit_s[0] == pytest.approx(hand.total_s, abs=1e-6)
    np.testing.assert_allclose([e.speed_m_s[0] for e in r.elements], hand.speeds_m_s, rtol=1e-7)
    route = type("R", (), {"path": path, "occupants": n, "exposed_at": ["x"], "start_at": None})()
    rows = explain_route(route)
    np.testing.assert_allclose([x.speed_m_s for x in rows], hand.speeds_m_s, rtol=1e-12)
    travel = sum(x.length_m / x.speed_m_s for x in rows)
    ctrl = next(x for x in rows if x.controlling)
    assert travel + n / ctrl.capacity_p_s == pytest.approx(r.exit_s[0], abs=1e-6)
    slow = run(path, np.zeros((1, n)), speed_factor=0.8)
    assert slow.exit_s[0] == pytest.approx(mv.movement_time(path, n, speed_factor=0.8).total_s, abs=1e-6)


def test_validate_explain_text_gives_the_models_time(kit, make_study, cli):
    """The fixture route (120 persons, corridor 20 m, door 1.0 m, stair 12 m): the
    movement time printed by validate --explain is the model's with everyone at 0."""
    from egressmargin.study import load_study

    study = load_study(make_study())
    (route,) = study.routes
    r = run(route.path, np.zeros((1, route.occupants)))
    text = explain_text(study)
    total = float(re.search(r"-> ([0-9.]+) s", text).group(1))
    assert total == pytest.approx(r.exit_s[0], abs=0.05)


# ------------------------------------- arbitrary start times: an independent fluid simulation

def fluid_curves(t, arrived, caps, delays):
    """Cumulative counts that have passed each element of a chain, by time-stepped fluid.

    t: time grid [s] (step dt); arrived: persons arrived at the first element by each
    t; caps: capacity of each element [p/s]; delays: walking time after each element
    [s]. Element i passes min(waiting, c_i dt) persons per step.
    """
    dt = t[1] - t[0]
    out = []
    for c, delay in zip(caps, delays):
        passed = np.empty_like(arrived)
        done = 0.0
        for m in range(len(t)):                       # one time step at a time
            done = min(arrived[m], done + c * dt)
            passed[m] = done
        out.append(passed)
        arrived = np.interp(t - delay, t, passed, left=0.0)     # walking shifts the curve
    return out, arrived


def when_passed(t, passed, n):
    """Time at which person k = 1..n has passed: the count first reaches k."""
    return t[np.searchsorted(passed, np.arange(1, n + 1) - 1e-9, side="left")]


def fluid_pass_times(starts, caps, delays, dt):
    """Person-by-person pass times of each element for persons starting at ``starts``."""
    n = len(starts)
    t = np.arange(min(starts) - 1.0, max(starts) + n / min(caps) + sum(delays) + 20.0, dt)
    arrived = np.searchsorted(np.sort(starts), t, side="right").astype(float)
    curves, _ = fluid_curves(t, arrived, caps, delays)
    return [when_passed(t, c, n) for c in curves]


def test_spread_start_times_agree_with_a_fluid_simulation_person_by_person():
    rng = np.random.default_rng(22)
    starts = np.sort(rng.uniform(0.0, 60.0, 70))
    path = [corridor(10.0), door(0.8), corridor(15.0, 1.2), stair(12.0), door(1.0)]
    r = run(path, starts)
    caps = [p["capacity_p_s"] for p in props_of(path)]
    delays = [p["length_m"] / e.speed_m_s[0] for p, e in zip(props_of(path), r.elements)]
    ref = fluid_pass_times(starts, caps, delays, dt=0.01)
    for e, want in zip(r.elements, ref):
        np.testing.assert_allclose(e.pass_each_s[0], want, atol=0.05)


def test_merged_routes_clear_when_the_merged_fluid_clears():
    # Two routes of 40 and 60 persons with spread starts walk their own corridors to a
    # shared 1.0 m door (0.91 p/s): first come, first served, the door clears when the
    # fluid of the summed arrivals clears (the order within does not matter).
    rng = np.random.default_rng(7)
    s1, s2 = np.sort(rng.uniform(0, 30, 40)), np.sort(rng.uniform(10, 50, 60))
    shared = mv.element_properties(door(1.0))
    routes = []
    for rid, s, length in (("a", s1, 12.0), ("b", s2, 20.0)):
        p = mv.element_properties(corridor(length))
        els = (flow.NetElement(f"c-{rid}", length, p["k"], p["effective_width_m"], p["capacity_p_s"]),
               flow.NetElement("door", 0.0, shared["k"], shared["effective_width_m"], shared["capacity_p_s"]))
        routes.append(flow.NetRoute(rid, s[None, :], np.array([len(s)]), els, np.ones(1), np.ones(1)))
    flows, nodes = flow.simulate(routes)
    # reference: each corridor's fluid, walked, then the door on the summed curves
    dt = 0.01
    t = np.arange(-1.0, 200.0, dt)
    at_door = 0.0
    for rid, s, length in (("a", s1, 12.0), ("b", s2, 20.0)):
        arrived = np.searchsorted(s, t, side="right").astype(float)
        _, walked = fluid_curves(t, arrived, [2.08], [length / flows[rid].elements[0].speed_m_s[0]])
        at_door = at_door + walked
    (door_curve,), _ = fluid_curves(t, at_door, [shared["capacity_p_s"]], [0.0])
    assert nodes["door"].clearing_s[0] == pytest.approx(when_passed(t, door_curve, 100)[-1], abs=0.05)


@pytest.mark.parametrize("seed", [3, 4, 5])
def test_both_merge_rules_with_spans_clear_with_the_fluid(seed):
    """Two streams whose persons arrive spread over their spans (as they leave an
    upstream element) share a bottleneck of 1 person/s. The fluid of the summed
    arrivals (each person's unit spread evenly over [a - s, a]) clears at one time
    whatever the order: both merge rules clear within 0.2 s of it and never before it
    (spreading each passage evenly over its span is the model's approximation)."""
    rng = np.random.default_rng(seed)
    a, b = np.sort(rng.uniform(0, 40, 30))[None, :], np.sort(rng.uniform(0, 40, 25))[None, :]
    sa, sb = np.full_like(a, rng.uniform(0.2, 1.5)), np.full_like(b, rng.uniform(0.2, 1.5))
    t = np.arange(-5.0, 120.0, 0.005)
    arrived = sum(np.clip((t - (x - w)) / w, 0.0, 1.0) for arr, sp in ((a[0], sa[0]), (b[0], sb[0]))
                  for x, w in zip(arr, sp))
    (passed,), _ = fluid_curves(t, arrived, [1.0], [0.0])
    clear = when_passed(t, passed, 55)[-1]
    fifo = flow.merge_fifo([a, b], 1.0, spans=[sa, sb])
    (p,), (o,) = flow.merge_priority([a], [b], 1.0, spans_priority=[sa], spans_others=[sb])
    for got in (max(fifo[0].max(), fifo[1].max()), max(p.max(), o.max())):
        assert clear - 0.01 <= got <= clear + 0.2


# ----------------------------------------------------------------- per-person times

def test_per_person_times_are_kept_in_start_order_and_share_memory():
    starts = np.array([[0.0, 0.0, 5.0, np.inf], [1.0, 2.0, np.inf, np.inf]])
    r = run([corridor(10.0), door(1.0), stair(6.0)], starts)
    for i, e in enumerate(r.elements):
        assert e.arrive_each_s.shape == e.pass_each_s.shape == e.leave_each_s.shape == (2, 4)
        assert np.isinf(e.leave_each_s[0, 3]) and np.isinf(e.leave_each_s[1, 2:]).all()
        assert np.all(e.arrive_each_s[np.isfinite(e.arrive_each_s)] <= e.pass_each_s[np.isfinite(e.pass_each_s)])
        last = np.array([2, 1])                        # the last occupant of each draw
        np.testing.assert_array_equal(e.leave_each_s[[0, 1], last], e.leave_s)
        np.testing.assert_array_equal(e.arrive_each_s[[0, 1], last], e.arrive_s)
        if i:
            assert e.arrive_each_s is r.elements[i - 1].leave_each_s        # no copy
    assert r.elements[1].leave_each_s is r.elements[1].pass_each_s          # a door has no length
    np.testing.assert_array_equal(r.elements[0].arrive_each_s, starts)
    one = [flow.NetRoute("r", starts, np.array([3, 2]), (flow.NetElement("d", 0.0, 1.4, 0.7, 0.91),),
                         np.ones(2), np.ones(2))]
    for keep, kept in ((False, False), ({"x"}, False), ({"r"}, True)):
        got, _ = flow.simulate(one, per_person=keep)
        assert (got["r"].elements[0].pass_each_s is not None) == kept


def test_report_hand_calculation_equals_the_runs_movement(tmp_path):
    """Through the whole run: with fixed inputs and everyone starting together, the
    movement component of the RSET equals the report's hand calculation (results.json
    `movement`: travel_s + flow_s). Hand: corridor 25 m (unimpeded, 21.01 s), door
    0.9 m (0.78 p/s, controls: 150/0.78 = 192.31 s), stair 14 m (0.909 p/s carrying
    0.78: D = (1 - sqrt(1 - 0.78/0.909))/(2a) = 1.172, S = 1.08 (1 - 0.266 x 1.172) =
    0.743 m/s, 18.83 s): 232.15 s."""
    from engine_helpers import results_for, write_study

    t = np.arange(0.0, 1201.0, 10.0)
    route = {"id": "r", "occupants": 150, "detection": "30 s", "alarm": "15 s", "premovement": "45 s",
             "path": [{"corridor": {"length": "25 m", "width": "2 m"}}, {"door": {"width": "0.9 m"}},
                      {"stair": {"length": "14 m", "width": "1.2 m", "riser": "178 mm", "tread": "279 mm"}}],
             "exposed_at": ["a"]}
    res, _ = results_for(write_study(tmp_path, t, {"T": ("degC", np.full_like(t, 20.0))},
                                     [{"id": "a", "temperature": "T"}], routes=[route],
                                     criteria={"base": "general-2m", "only": ["temperature"]}))
    r = res["scenarios"][0]["routes"][0]
    d = (1 - np.sqrt(1 - 0.78 / 0.909)) / (2 * A)
    hand = 25 / 1.19 + 150 / 0.78 + 14 / (1.08 * (1 - A * d))
    assert hand == pytest.approx(232.15, abs=0.01)
    assert r["movement"]["travel_s"] + r["movement"]["flow_s"] == pytest.approx(hand, abs=0.01)
    assert r["rset_components_s"]["movement"]["p50"] == pytest.approx(hand, abs=0.01)
    assert r["rset_s"]["p50"] == pytest.approx(90 + hand, abs=0.01)
