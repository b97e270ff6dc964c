"""Tests of egressmargin.egress.flow (persons flowing through shared elements).

Hand calculations use the hydraulic method of the SFPE Handbook, 5th ed., ch. 59
(Gwynne and Rosenbaum 2016; constants from memory, as in egress/movement.py):
k = 1.40 m/s (level), 1.08 m/s (stair 178/279 mm), a = 0.266, unimpeded speed 0.85 k,
Fsm = 1.3 (level) and 1.01 (stair 178/279) persons/(s m), boundary layers 0.15 m (stair
wall, door), 0.20 m (corridor wall).
"""

from __future__ import annotations

import numpy as np
import pytest

from egressmargin.egress import distributions as dist
from egressmargin.egress import flow
from egressmargin.egress.movement import element_properties

STAIR = {"type": "stair", "length_m": 20.0, "width_m": 1.2, "riser_m": 0.178, "tread_m": 0.279}
CORRIDOR = {"type": "corridor", "length_m": 10.0, "width_m": 2.0}


def net(element: dict, node: str) -> flow.NetElement:
    p = element_properties(element)
    return flow.NetElement(node, p["length_m"], p["k"], p["effective_width_m"], p["capacity_p_s"])


def route(rid, starts, elements, S=1):
    starts = np.atleast_2d(np.asarray(starts, float))
    return flow.NetRoute(rid, starts, np.full(S, starts.shape[1]), tuple(elements), np.ones(S), np.ones(S))


def brute_fifo(a, c):
    """Recursion d_k = max(a_k, d_(k-1)) + 1/c, person by person."""
    d, prev = [], -np.inf
    for x in a:
        prev = max(x, prev) + 1.0 / c
        d.append(prev)
    return np.array(d)


def test_fifo_closed_form_equals_the_recursion():
    rng = np.random.default_rng(3)
    a = np.sort(rng.uniform(0, 100, (4, 60)), axis=1)
    c = np.array([0.3, 0.9, 2.0, 7.0])
    got = flow.fifo_departures(a, c)
    for s in range(4):
        np.testing.assert_allclose(got[s], brute_fifo(a[s], c[s]), rtol=0, atol=1e-9)


def test_absent_persons_stay_absent_and_do_not_delay_others():
    a = np.array([[0.0, 0.0, np.inf]])
    d = flow.fifo_departures(a, 1.0)
    assert d[0, :2].tolist() == [1.0, 2.0] and np.isinf(d[0, 2])


def test_bottleneck_with_starts_uniform_over_60_to_160_s():
    # Hand: N = 100 persons start at the quantiles (i - 1/2)/N of U(60 s, 160 s), i.e.
    # 60.5, 61.5, ..., 159.5 s. Door then an 11.9 m corridor (unimpeded 1.19 m/s: 10 s).
    # Narrow door, c = 0.5 persons/s: flow-limited, the door clears at
    # 60.5 + 100/0.5 = 260.5 s (about 60 + N/c); the stream leaves it one person per
    # 2 s, which the corridor (2.08 persons/s) passes as it comes (flow in = flow out,
    # SFPE Handbook ch. 59): the route clears at 260.5 + 10 = 270.5 s.
    # Wide door, c = 10 persons/s: pre-movement-limited, the last person passes at
    # 159.5 + 0.1 = 159.6 s (about 160 s); alone, their passage past a point takes
    # 1/c of the narrowest element met, here the corridor's 1/2.08 = 0.48 s in all
    # (0.1 s at the door, 0.38 s more at the corridor): the route clears at
    # 159.5 + 0.48 + 10 = 169.98 s (160 s + travel).
    q = flow.quantile_positions([100])
    starts = dist.ppf({"uniform": {"low": 60.0, "high": 160.0}}, q)
    np.testing.assert_allclose(starts[0, [0, -1]], [60.5, 159.5])
    corridor = net({"type": "corridor", "length_m": 11.9, "width_m": 2.0}, "c")
    for capacity, door_clear, route_clear in ((0.5, 260.5, 260.5 + 10), (10.0, 159.6, 159.5 + 1 / 2.08 + 10)):
        door = flow.NetElement("door", 0.0, 1.40, 1.0, capacity)
        flows, _ = flow.simulate([route("r", starts, [door, corridor])])
        r = flows["r"]
        assert r.elements[0].pass_s[0] == pytest.approx(door_clear, abs=1e-9)
        # corridor downstream carries at most 1 person/s of its 2.08: F/Fc <= 0.48,
        # D = (1 - sqrt(1 - 0.48))/(2 x 0.266) = 0.525 < 0.54: unimpeded
        assert r.elements[1].speed_m_s[0] == pytest.approx(1.19)
        assert r.exit_s[0] == pytest.approx(route_clear, abs=1e-6)


def test_crowd_speed_on_a_long_stair():
    # Hand: 300 persons start together at t = 0 on a 60 m stair, 1.2 m wide,
    # 178/279 mm: We = 1.2 - 2 x 0.15 = 0.9 m, c = 1.01 x 0.9 = 0.909 persons/s,
    # flow time 300/0.909 = 330.03 s.
    # The stair discharges at capacity: density of maximum flow D = 1/(2a) = 1.880
    # persons/m^2 (the peak of Fs = (1 - aD) k D, SFPE Handbook ch. 59, from memory),
    # S = 1.08 (1 - 0.266 x 1.880) = 1.08/2 = 0.540 m/s, 60/0.540 = 111.11 s -> 441.14 s.
    # (Inverting the rounded Fsm = 1.01 on the unscaled curve gave D = 1.747 and
    # 0.578 m/s, faster than the speed at maximum flow: 433.8 s.)
    stair = net({**STAIR, "length_m": 60.0}, "s")
    assert stair.capacity_p_s == pytest.approx(0.909)
    assert flow.density_for_flow(1.08, 1.01) == pytest.approx(1.747, abs=1e-3)       # unscaled curve
    assert flow.density_for_flow(1.08, 1.01, 1.01) == pytest.approx(1 / (2 * 0.266))
    assert flow.crowd_speed(1.08, 1.01, 1.01) == pytest.approx(0.540, abs=1e-3)
    flows, _ = flow.simulate([route("r", np.zeros((1, 300)), [stair])])
    r = flows["r"]
    assert r.elements[0].speed_m_s[0] == pytest.approx(0.540, abs=1e-6)
    assert r.exit_s[0] == pytest.approx(300 / 0.909 + 60 / 0.540, abs=1e-6)
    assert r.exit_s[0] == pytest.approx(441.14, abs=0.01)


def test_density_for_flow_inverts_the_specific_flow_of_movement_py():
    # Closed form: on the crowded branch 0.54 <= D <= 1/(2a) = 1.8797 persons/m^2,
    # Fs = (1 - a D) k D is increasing, so D -> Fs -> D returns D (SFPE Handbook ch. 59,
    # from memory). Above the peak the density is held at 1/(2a). With the maximum
    # given, the curve is scaled to peak at it: Fs = Fsm 4 a D (1 - a D).
    from egressmargin.egress.movement import specific_flow
    for k in (1.40, 1.08):
        d = np.array([0.54, 1.0, 1.5, 1.8])
        np.testing.assert_allclose(flow.density_for_flow(k, specific_flow(k, d)), d, atol=1e-9)
        fsm = 1.3 if k == 1.40 else 1.01
        np.testing.assert_allclose(flow.density_for_flow(k, fsm * 4 * 0.266 * d * (1 - 0.266 * d), fsm), d,
                                   atol=1e-9)
    assert flow.density_for_flow(1.23, 1.16) == pytest.approx(1 / (2 * 0.266))


def test_two_floors_of_150_on_one_shared_stair():
    # Hand: each floor: 10 m corridor 2.0 m wide (We 1.6 m, 2.08 persons/s, unimpeded
    # 1.19 m/s, 8.40 s) to a shared 20 m stair of c = 0.909 persons/s, which
    # discharges at capacity: 1.08/2 = 0.540 m/s, 20/0.540 = 37.04 s.
    # Alone, a floor clears the stair entry at 8.40 + 150/0.909 = 173.42 s (the
    # corridor's entry adds nothing: the stair controls, N/Fc) and leaves it at
    # 210.46 s. Shared, the stair passes 300 persons: 8.40 + 300/0.909 + 37.04 =
    # 375.47 s.
    corridor_a, corridor_b = net(CORRIDOR, "a"), net(CORRIDOR, "b")
    stair = net(STAIR, "east-stair")
    starts = np.zeros((1, 150))
    walk = 20 / flow.crowd_speed(1.08, 1.01, 1.01)
    alone, _ = flow.simulate([route("l2", starts, [corridor_a, stair])])
    assert alone["l2"].exit_s[0] == pytest.approx(10 / 1.19 + 150 / 0.909 + walk, abs=1e-6)
    assert alone["l2"].exit_s[0] == pytest.approx(210.46, abs=0.01)
    flows, nodes = flow.simulate([route("l2", starts, [corridor_a, stair]),
                                  route("l3", starts, [corridor_b, stair])])
    shared = nodes["east-stair"]
    assert shared.routes == ["l2", "l3"] and shared.occupants[0] == 300
    assert shared.clearing_s[0] == pytest.approx(300 / 0.909 + 10 / 1.19 + walk, abs=1e-6)
    assert shared.clearing_s[0] == pytest.approx(375.47, abs=0.01)
    assert max(flows["l2"].exit_s[0], flows["l3"].exit_s[0]) == pytest.approx(shared.clearing_s[0])


def test_priority_merge_gives_the_joining_floor_only_the_remaining_capacity():
    # Hand: the stair stream arrives one person every 2 s (0.5 persons/s) at a landing
    # of capacity 1 person/s; 50 persons of the floor wait there from t = 0. The floor
    # gets the remaining 0.5 persons/s: its last person passes at about 50/0.5 = 100 s,
    # and the stair stream is not delayed (passes at a_i + 1 s). First come, first
    # served instead lets the floor through after the stair person who arrived with it
    # at t = 0: last at 51 s.
    stair_stream = np.arange(0.0, 200.0, 2.0)[None, :]
    floor = np.zeros((1, 50))
    (d_stair,), (d_floor,) = flow.merge_priority([stair_stream], [floor], 1.0)
    np.testing.assert_allclose(d_stair, stair_stream + 1.0)
    assert d_floor[0, -1] == pytest.approx(100.0, abs=1.0)
    assert flow.merge_fifo([stair_stream, floor], 1.0)[1][0, -1] == pytest.approx(51.0)
    # no two persons hold the landing at once: all pass times at least 1/c apart
    allp = np.sort(np.concatenate([d_stair[0], d_floor[0]]))
    assert np.diff(allp).min() >= 1.0 - 1e-9


def test_priority_merge_against_a_person_by_person_simulation():
    # Preemptive priority, simulated in small time steps (dt = 0.01 s) in the test.
    rng = np.random.default_rng(5)
    pr = np.sort(rng.uniform(0, 30, 20))
    jo = np.sort(rng.uniform(0, 30, 25))
    c, dt, steps = 1.25, 0.001, 800            # one person takes 1/c = 800 steps of dt
    (d_p,), (d_j,) = flow.merge_priority([pr[None, :]], [jo[None, :]], c)
    n, work_p, work_j, ip, ij, out_p, out_j = 0, 0, 0, 0, 0, [], []
    while ij < len(jo):
        t = n * dt
        if ip < len(pr) and pr[ip] <= t:
            work_p += 1
            if work_p == steps:
                out_p.append(t + dt)
                ip, work_p = ip + 1, 0
        elif jo[ij] <= t:
            work_j += 1
            if work_j == steps:
                out_j.append(t + dt)
                ij, work_j = ij + 1, 0
        n += 1
    np.testing.assert_allclose(d_j[0], out_j, atol=0.01)
    np.testing.assert_allclose(d_p[0][: len(out_p)], out_p, atol=0.01)


def test_transferred_flow_and_quantile_positions():
    d = flow.fifo_departures(np.zeros((1, 11)), 2.0)
    assert flow.transferred_flow(d, 2.0)[0] == pytest.approx(2.0)
    spread = np.array([[0.0, 10.0, 20.0, np.inf]])
    assert flow.transferred_flow(spread, 2.0)[0] == pytest.approx(0.1)
    q = flow.quantile_positions([4, 2])
    np.testing.assert_allclose(q[0], [0.125, 0.375, 0.625, 0.875])
    assert np.isnan(q[1, 2:]).all()


def test_elements_used_in_contradicting_orders_are_an_error():
    x, y = net(CORRIDOR, "x"), net(STAIR, "y")
    starts = np.zeros((1, 3))
    with pytest.raises(ValueError, match="orders"):
        flow.simulate([route("a", starts, [x, y]), route("b", starts, [y, x])])


# ------------------------------------------------------------------ properties (hypothesis)

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_times = st.lists(st.floats(0.0, 500.0, allow_nan=False), min_size=1, max_size=40)


@settings(max_examples=60, deadline=None)
@given(_times, _times, st.floats(0.1, 5.0))
def test_shared_bottleneck_serves_one_person_per_slot_and_never_early(a, b, c):
    """Both merge rules: nobody passes before arriving + 1/c; first come, first served
    never passes two persons within 1/c, and the priority rule (preemptive: a joining
    person interrupted by the stream already in the element finishes after it) keeps
    pass j - pass i >= (j - i - 1)/c (at most one passage split by the stream); both
    clear at the fluid-queue clearing time of the merged arrivals (work-conserving)."""
    sa, sb = np.sort(a)[None, :], np.sort(b)[None, :]
    merged = np.sort(np.concatenate([sa[0], sb[0]]))
    n = merged.size
    clearing = max(merged[j] + (n - j) / c for j in range(n))      # max_s [s + (N - A(s-))/c]
    for rule, (da, db) in (("fifo", flow.merge_fifo([sa, sb], c)),
                           ("priority", [x[0] for x in flow.merge_priority([sa], [sb], c)])):
        assert np.all(da >= sa + 1 / c - 1e-9) and np.all(db >= sb + 1 / c - 1e-9)
        passes = np.sort(np.concatenate([da[0], db[0]]))
        if rule == "fifo":
            assert np.all(np.diff(passes) >= 1 / c - 1e-6)
        else:
            k = np.arange(n)
            gap = passes[None, :] - passes[:, None]
            need = (k[None, :] - k[:, None] - 1) / c
            assert np.all(gap[k[None, :] > k[:, None]] >= need[k[None, :] > k[:, None]] - 1e-6)
        assert passes[-1] == pytest.approx(clearing, rel=1e-9, abs=1e-6)


@settings(max_examples=40, deadline=None)
@given(_times, st.floats(0.1, 5.0), st.floats(1.01, 3.0))
def test_more_capacity_never_clears_later(a, c, more):
    s = np.sort(a)[None, :]
    assert flow.fifo_departures(s, c * more)[0, -1] <= flow.fifo_departures(s, c)[0, -1] + 1e-9


def test_priority_merge_vectorised_over_draws_equals_draw_by_draw():
    rng = np.random.default_rng(11)
    pr = np.sort(rng.uniform(0, 50, (3, 15)), axis=1)
    jo = np.sort(rng.uniform(0, 50, (3, 9)), axis=1)
    jo[2, -2:] = np.inf                                   # two absent persons in draw 3
    c = np.array([0.4, 1.0, 3.0])
    (dp,), (dj,) = flow.merge_priority([pr], [jo], c, chunk_elements=200)   # forces chunks of one draw
    for s in range(3):
        (p1,), (j1,) = flow.merge_priority([pr[s:s + 1]], [jo[s:s + 1]], c[s])
        np.testing.assert_allclose(dp[s], p1[0])
        np.testing.assert_allclose(dj[s], j1[0])
    assert np.isinf(dj[2, -2:]).all() and np.isfinite(dj[2, :-2]).all()


def test_one_capacity_in_every_draw_equals_the_per_draw_form():
    """The shortcut for a capacity that is the same in every draw gives, bit for bit, what
    the per-draw form gives (the recursion of :func:`brute_fifo` is the reference)."""
    a = np.array([[0.0, 0.3, 0.3, 2.0, np.inf], [0.1, 0.1, 0.5, 0.6, 0.7]])
    same = flow.fifo_departures(a, np.array([0.91, 0.91]))
    mixed = flow.fifo_departures(a, np.array([0.91, 2.0]))
    assert same[0].tobytes() == mixed[0].tobytes()
    np.testing.assert_allclose(same[0, :4], brute_fifo(a[0, :4], 0.91), rtol=1e-12)
    np.testing.assert_allclose(mixed[1], brute_fifo(a[1], 2.0), rtol=1e-12)


def test_transferred_flow_skips_nan_and_queue_counts_only_persons_present():
    # F = (n - 1)/(last - first) over the finite pass times: 2 persons over 4 s -> 0.25 per s
    got = flow.transferred_flow(np.array([[1.0, np.nan, 5.0, np.inf]]), 2.0)
    assert got.tolist() == [0.25]
    # three persons at t = 0 through 1 person/s wait 0, 1 and 2 s (d_k - 1/c - a_k);
    # a draw in which nobody starts (never detected) has no queue
    r = route("r", [[0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]], [flow.NetElement("d", 0.0, 1.4, 1.0, 1.0)], S=2)
    flows, _ = flow.simulate([r])
    assert flows["r"].elements[0].queue_s.tolist() == [2.0, 0.0]
    assert flows["r"].exit_s[0] == 3.0 and np.isinf(flows["r"].exit_s[1])


def test_simultaneous_groups_share_a_bottleneck_whatever_their_order():
    """Two groups of 150 reaching one 1.3 p/s door at the same instant: first come, first
    served has no rule for the tie, so neither group may pass as if alone (which would give
    150/1.3 = 115 s to whichever route the study lists first). Interleaved, both clear at
    about 300/1.3 = 230.8 s, and swapping the streams swaps nothing."""
    from egressmargin.egress.flow import merge_fifo

    a = np.zeros((1, 150))
    b = np.zeros((1, 150))
    da, db = merge_fifo([a, b], 1.3)
    db2, da2 = merge_fifo([b, a], 1.3)
    assert da[0, -1] == pytest.approx(db[0, -1], abs=1 / 1.3 + 1e-9)
    assert max(da[0, -1], db[0, -1]) == pytest.approx(300 / 1.3, abs=1e-9)
    assert min(da[0, -1], db[0, -1]) > 229.0
    # listing the routes the other way round moves each group by at most one passing slot
    assert abs(da2[0, -1] - da[0, -1]) <= 1 / 1.3 + 1e-9 and abs(db2[0, -1] - db[0, -1]) <= 1 / 1.3 + 1e-9


def test_free_time_by_sorting_equals_the_sum_over_every_slot():
    """merge_priority's free time phi(x) = x - (time in slots before x) found by one sort per
    draw equals the direct sum over every slot (the definition in its Notes), bit for bit,
    with ties, absent persons (+inf) and capacities whose 1/c is not exact."""
    rng = np.random.default_rng(5)
    for _ in range(50):
        S, M, K = rng.integers(1, 12), rng.integers(1, 30), rng.integers(1, 30)
        c = rng.choice([1.0, 1.3, 2.7, 1 / 3])
        arr = np.sort(np.round(rng.uniform(0, 40, (S, M)), rng.integers(0, 2)), axis=1)
        arr[:, M - rng.integers(0, M):] = np.inf
        p = flow.fifo_departures(arr, c)
        slot = np.full((S, 1), 1.0 / c)
        x = np.round(rng.uniform(-5, 60, (S, K)), rng.integers(0, 2))
        x[:, : rng.integers(0, 3)] = np.inf
        x = np.concatenate([x, p[:, :3], p[:, :3] - slot], axis=1)    # on the slots' ends and starts
        got = flow._free_time(x, p, slot, p - slot, 10**6)
        ref = flow._free_time_all(x, p, slot, p - slot, 10**6)
        assert np.array_equal(got, ref, equal_nan=True)
