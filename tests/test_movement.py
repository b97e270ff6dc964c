"""Tests of egressmargin.egress.movement (hydraulic hand method).

Source of the method and constants: Gwynne, S. M. V., Rosenbaum, E. R. (2016),
"Employing the hydraulic model in assessing emergency movement", SFPE Handbook of Fire
Protection Engineering, 5th ed., ch. 59 (earlier editions: Nelson & Mowrer). The
constants are quoted from memory; the tests below check them against each other and
against the handbook's derived values as recalled (also from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from egressmargin.egress import movement as mv

CORRIDOR = {"type": "corridor", "length_m": 30.0, "width_m": 2.0}
DOOR_09 = {"type": "door", "width_m": 0.9}


def test_specific_flow_peaks_near_1_3_at_1_88_persons_per_m2():
    # SFPE Handbook ch. 59: corridors reach their maximum specific flow of about
    # 1.3 persons/(s m) at D = 1.88 persons/m^2 (from memory).
    # Hand: S = 1.40 (1 - 0.266 x 1.88) = 0.6999 m/s; Fs = 0.6999 x 1.88 = 1.316.
    assert mv.specific_flow(1.40, 1.88) == pytest.approx(1.316, abs=1e-3)
    assert mv.specific_flow(1.40, 1.88) == pytest.approx(1.3, abs=0.02)
    # ... and it is the maximum over density (dFs/dD = 0 at D = 1/(2a)).
    d = np.linspace(0.6, 3.7, 1000)
    assert d[np.argmax(mv.specific_flow(1.40, d))] == pytest.approx(1 / (2 * 0.266), abs=0.01)


def test_speed_formula_values():
    # S = k - a k D, a = 0.266 (SFPE Handbook ch. 59). Hand values:
    assert mv.speed(1.40, 1.0) == pytest.approx(1.40 - 0.266 * 1.40 * 1.0)  # 1.0276 m/s
    assert mv.speed(1.00, 2.0) == pytest.approx(0.468)  # 1.00 (1 - 0.532)
    # below 0.54 persons/m^2: unimpeded speed 0.85 k
    assert mv.speed(1.40, 0.3) == pytest.approx(1.19)
    # the formula reaches zero at D = 1/a = 3.76 persons/m^2; no negative speeds
    assert mv.speed(1.40, 4.0) == 0.0
    np.testing.assert_allclose(mv.speed(1.40, [0.0, 1.0]), [1.19, 1.0276], atol=1e-4)


def test_unimpeded_speeds_match_the_handbook_table():
    # SFPE Handbook table of maximum unimpeded speeds (from memory): corridor 1.19 m/s;
    # stairs 0.85 m/s (7.5/10 in) to 1.05 m/s (6.5/13 in) -- the same range is quoted
    # from Nelson & Mowrer in PD 7974-6:2004 (as recalled, not checked first-hand).
    assert mv.unimpeded_speed(1.40) == pytest.approx(1.19, abs=1e-12)
    stair_speeds = [mv.unimpeded_speed(r["k"]) for r in mv.STAIR_ROWS]
    assert stair_speeds[0] == pytest.approx(0.85, abs=0.005)
    assert stair_speeds[-1] == pytest.approx(1.05, abs=0.005)


def test_max_specific_flow_table_is_k_over_4a():
    # Internal consistency of the recalled tables: Fsm = max_D (1 - aD) k D = k/(4a),
    # rounded in the handbook to 2 decimals (corridors 1.316 -> 1.3).
    for row in mv.STAIR_ROWS:
        assert row["fsm"] == pytest.approx(row["k"] / (4 * mv.A_DENSITY_M2), abs=0.006)
    corridor_peak = mv.K_LEVEL_M_S["corridor"] / (4 * mv.A_DENSITY_M2)
    assert mv.FSM_LEVEL_P_S_M == pytest.approx(corridor_peak, abs=0.02)


def test_effective_width():
    # SFPE Handbook boundary layers (from memory): doors 0.15 m, corridor walls 0.20 m
    # per side. 1.0 m door -> 0.7 m; 2.0 m corridor -> 1.6 m.
    assert mv.effective_width(1.0, "door") == pytest.approx(0.7)
    assert mv.effective_width(2.0, "corridor") == pytest.approx(1.6)
    assert mv.effective_width(1.2, "stair") == pytest.approx(0.9)
    assert mv.effective_width(1.2, "stair", boundary_m=0.09) == pytest.approx(1.02)  # handrails


def test_no_effective_width_message():
    with pytest.raises(ValueError) as err:
        mv.effective_width(0.25, "door")
    assert str(err.value) == (
        "width 0.25 m leaves no effective width after 2 x 0.15 m boundary layers"
    )


def test_unknown_element_type_names_valid_types():
    with pytest.raises(ValueError) as err:
        mv.element_properties({"type": "stairs", "width_m": 1.2, "length_m": 10.0})
    msg = str(err.value)
    assert "unknown path element type 'stairs'" in msg
    assert "corridor, door, stair, ramp" in msg
    assert "did you mean 'stair'" in msg


def test_worked_example_door_limited_route():
    # Hand calculation (SFPE Handbook ch. 59 method, constants from memory):
    # 200 people; corridor 30 m long, 2.0 m wide; door 0.9 m clear.
    #   corridor: We = 2.0 - 2 x 0.20 = 1.6 m, Fc = 1.3 x 1.6 = 2.08 p/s,
    #             v = 0.85 x 1.40 = 1.19 m/s, travel = 30 / 1.19 = 25.21 s
    #   door:     We = 0.9 - 2 x 0.15 = 0.6 m, Fc = 1.3 x 0.6 = 0.78 p/s  <- controls
    #   flow = 200 / 0.78 = 256.41 s
    #   sum: 25.21 + 256.41 = 281.62 s
    #   (the door, at capacity, has the speed at the density of maximum flow,
    #   1.40/2 = 0.70 m/s, over its zero length)
    res = mv.movement_time([CORRIDOR, DOOR_09], 200)
    assert res.controlling == 1
    np.testing.assert_allclose(res.capacities_p_s, [2.08, 0.78])
    np.testing.assert_allclose(res.speeds_m_s, [1.19, 0.70])
    assert res.travel_s == pytest.approx(25.21, abs=0.005)
    assert res.flow_s == pytest.approx(256.41, abs=0.005)
    assert res.total_s == pytest.approx(281.62, abs=0.005)


def test_worked_example_stair_limited_route():
    # Hand calculation: 200 people; corridor 30 m x 2.0 m; door 1.2 m; stair 15 m along
    # the line of travel, 1.2 m wide, riser 178 mm / tread 279 mm (k = 1.08, Fsm = 1.01).
    #   door:  We = 0.9 m, Fc = 1.3 x 0.9 = 1.17 p/s
    #   stair: We = 1.2 - 2 x 0.15 = 0.9 m, Fc = 1.01 x 0.9 = 0.909 p/s  <- controls
    #          at capacity: D = 1/(2 x 0.266) = 1.880 p/m^2 (density of maximum flow),
    #          v = 1.08 (1 - 0.266 x 1.880) = 0.540 m/s, travel 15 / 0.540 = 27.78 s
    #          (200 persons over 15 m x 0.9 m = 14.8 p/m^2: no area bound)
    #   travel = 25.21 + 27.78 = 52.99 s; flow = 200 / 0.909 = 220.02 s; sum 273.01 s
    stair = {"type": "stair", "length_m": 15.0, "width_m": 1.2, "riser_m": 0.178, "tread_m": 0.279}
    res = mv.movement_time([CORRIDOR, {"type": "door", "width_m": 1.2}, stair], 200)
    assert res.controlling == 2
    assert res.travel_s == pytest.approx(52.99, abs=0.005)
    assert res.flow_s == pytest.approx(220.02, abs=0.005)
    assert res.total_s == pytest.approx(273.01, abs=0.005)
    assert res.elements[2]["stair_row"] == (0.178, 0.279)
    assert res.notes == []


def test_hand_sum_equals_the_flow_model_when_everyone_starts_together():
    # The flow model (egress/flow.py) reproduces travel + N / Fc when everyone starts
    # together. Hand: 30/1.19 + 200/0.78 = 25.21 + 256.41 = 281.62 s (the corridor's
    # entry, with spare capacity, adds nothing: SFPE Handbook ch. 59, flow in = flow out).
    from egressmargin.egress import flow

    props = [mv.element_properties(e) for e in (CORRIDOR, DOOR_09)]
    elements = tuple(flow.NetElement(str(i), p["length_m"], p["k"], p["effective_width_m"], p["capacity_p_s"])
                     for i, p in enumerate(props))
    route = flow.NetRoute("r", np.zeros((1, 200)), np.array([200]), elements, np.ones(1), np.ones(1))
    flows, _ = flow.simulate([route])
    hand = mv.movement_time([CORRIDOR, DOOR_09], 200).total_s
    assert flows["r"].exit_s[0] == pytest.approx(hand, abs=1e-6)
    assert flows["r"].exit_s[0] == pytest.approx(30 / 1.19 + 200 / 0.78, abs=1e-6)


def test_vectorised_over_occupants_and_speed_factor():
    occ = np.array([50.0, 200.0, 400.0])
    factor = np.array([1.0, 0.8, 1.25])
    res = mv.movement_time([CORRIDOR, DOOR_09], occ, speed_factor=factor)
    for i in range(3):
        one = mv.movement_time([CORRIDOR, DOOR_09], occ[i], speed_factor=factor[i])
        assert res.total_s[i] == pytest.approx(one.total_s, rel=1e-14)
    # speed_factor scales the travel time only; flow_factor the flow time only
    assert res.travel_s[1] == pytest.approx(30.0 / (1.19 * 0.8))
    half = mv.movement_time([CORRIDOR, DOOR_09], 200, flow_factor=0.5)
    assert half.flow_s == pytest.approx(2 * 256.41, abs=0.01)
    # scalar occupants with an array factor broadcast too
    assert mv.movement_time([CORRIDOR], 10, speed_factor=factor).total_s.shape == (3,)


def test_stair_row_selection():
    # Exact rows, including the inch dimensions converted to mm (6.5 in = 165.1 mm,
    # 12 in = 304.8 mm; 7.5 in = 190.5 mm, 10 in = 254 mm).
    assert mv.select_stair_row(0.1651, 0.3048)["k"] == 1.16
    assert mv.select_stair_row(0.1905, 0.254)["k"] == 1.00
    assert mv.select_stair_row(0.165, 0.330)["exact"]
    # Between rows: 170/290 mm (ratio 0.586) -> next steeper row 178/279 (0.638), k = 1.08.
    row = mv.select_stair_row(0.170, 0.290)
    assert (row["riser_m"], row["tread_m"], row["k"], row["fsm"]) == (0.178, 0.279, 1.08, 1.01)
    assert not row["exact"] and "not a row" in row["notes"][0]
    # Flatter than every row (150/350 mm) -> the least steep row, 165/330 mm.
    assert mv.select_stair_row(0.150, 0.350)["k"] == 1.23
    # Steeper than every row (200/250 mm, ratio 0.8 > 0.752) -> steepest row, flagged.
    steep = mv.select_stair_row(0.200, 0.250)
    assert steep["k"] == 1.00
    assert "steeper than every row" in steep["notes"][0]


def test_stair_note_reaches_the_movement_result():
    stair = {"type": "stair", "length_m": 10.0, "width_m": 1.2, "riser_m": 0.2, "tread_m": 0.25}
    res = mv.movement_time([stair], 100)
    assert res.notes and res.notes[0].startswith("path element 1: stair 200/250 mm")
    assert res.elements[0]["stair_row"] == (0.191, 0.254)


def test_input_errors():
    with pytest.raises(ValueError, match="occupants must be a positive"):
        mv.movement_time([CORRIDOR], 0)
    with pytest.raises(ValueError, match="occupants must be a positive"):
        mv.movement_time([CORRIDOR], np.array([10.0, -1.0]))
    with pytest.raises(ValueError, match="path element 2: width 0.25 m leaves no effective width"):
        mv.movement_time([CORRIDOR, {"type": "door", "width_m": 0.25}], 10)
    with pytest.raises(ValueError, match="stair needs riser and tread"):
        mv.element_properties({"type": "stair", "length_m": 10.0, "width_m": 1.2})
    with pytest.raises(ValueError, match="at least one path element"):
        mv.movement_time([], 10)


def test_element_properties_door():
    p = mv.element_properties({"type": "door", "width_m": 1.0})
    assert p["effective_width_m"] == pytest.approx(0.7)
    assert p["capacity_p_s"] == pytest.approx(0.91)  # 1.3 x 0.7
    assert p["length_m"] == 0.0 and p["boundary_m"] == 0.15 and p["stair_row"] is None
