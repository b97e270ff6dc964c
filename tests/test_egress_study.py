"""Study keys of egress as one building: named elements, pre-movement across occupants,
uncertain movement, `at` / `start_at`, stair length and the stair table (issues 14, 17).

The fixture study (tests/conftest.py) is invented; the stair table rows are the SFPE
Handbook 5th ed. ch. 59 rows as recalled in egress/movement.py (from memory).
"""

from __future__ import annotations

import math

import pytest

from egressmargin.study import load_study

NAMED = """elements:
  - id: shared-stair
    stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm, at: stair-l1}
egress:
"""


def _split(kit) -> tuple[str, str]:
    """The fixture study (tests/conftest.py) split at `egress:`: (what precedes, its route list)."""
    head, routes = kit.study.split("egress:\n")
    return head, routes


def shared_study(kit, second_id="south-stair"):
    """The fixture with the stair named and used by two routes."""
    head, route = _split(kit)
    first = route.replace("      - {stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}",
                          "      - {element: shared-stair}")
    second = first.replace("north-stair", second_id).replace("occupants: 120", "occupants: 80")
    return head + NAMED + first + second


def test_named_element_is_shared_by_two_routes(kit, make_study):
    study = load_study(make_study(shared_study(kit)))
    assert list(study.elements) == ["shared-stair"]
    a, b = study.routes
    assert a.path[-1]["id"] == b.path[-1]["id"] == "shared-stair"
    assert a.path[-1]["at"] == "stair-l1"
    assert a.path[-1]["length_m"] == pytest.approx(12.0)


def test_unknown_element_reference_is_located_with_a_hint(kit, make_study, expect_input_error):
    text = shared_study(kit).replace("{element: shared-stair}", "{element: shared-stiar}", 1)
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'shared-stiar')} egress[0].path[2].element" in err
    assert "did you mean 'shared-stair'?" in err


def test_upstream_must_name_a_route_that_uses_the_element(kit, make_study, expect_input_error):
    text = shared_study(kit).replace("  - id: shared-stair\n", "  - id: shared-stair\n    upstream: [west]\n")
    err = expect_input_error(make_study(text))
    assert "elements[0].upstream[0]" in err and "route 'west' does not use element 'shared-stair'" in err
    assert "north-stair, south-stair" in err


def test_across_occupants_and_uncertain_median_are_read(kit, make_study):
    text = kit.study.replace(
        "premovement: {lognormal: {median: 60 s, p95: 150 s}}",
        "premovement: {across_occupants: {lognormal: {median: {uniform: {low: 40 s, high: 80 s}}, p95: 150 s}}}")
    route = load_study(make_study(text)).routes[0]
    assert route.premovement_across
    assert route.premovement == {"lognormal": {"median": {"uniform": {"low": 40.0, "high": 80.0}}, "p95": 150.0}}


def test_uncertain_parameter_that_can_make_an_impossible_distribution(kit, make_study, expect_input_error):
    # median up to 200 s with p95 150 s: at the bound the p95 is below the median
    text = kit.study.replace("median: 60 s", "median: {uniform: {low: 40 s, high: 200 s}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].premovement.lognormal" in err
    assert "with median = 200 s (a bound of its range)" in err and "below the median" in err


def test_uncertain_parameter_must_be_bounded(kit, make_study, expect_input_error):
    text = kit.study.replace("median: 60 s", "median: {lognormal: {median: 60 s, p95: 90 s}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].premovement.lognormal.median" in err and "bounded distribution" in err


def test_occupants_flow_and_speed_factors_as_distributions(kit, make_study):
    text = kit.study.replace("occupants: 120", "occupants: {triangular: {low: 100, mode: 120, high: 150}}\n"
                             "    flow_factor: {uniform: {low: 0.8, high: 1.1}}\n"
                             "    speed_factor: {lognormal: {median: 1.0, p95: 1.2}}")
    route = load_study(make_study(text)).routes[0]
    # nominal count = the median of triangular(100, 120, 150): F(mode) = 20/50 = 0.4 < 0.5, so
    # median = 150 - sqrt(0.5 x 50 x 30) = 122.6 -> 123 persons (Johnson, Kotz and Balakrishnan,
    # Continuous Univariate Distributions vol. 2, ch. 26 sec. 9: triangular quantile)
    assert route.occupants == 123
    assert route.occupants_dist == {"triangular": {"low": 100.0, "mode": 120.0, "high": 150.0}}
    assert route.flow_factor == {"uniform": {"low": 0.8, "high": 1.1}}
    assert route.speed_factor == {"lognormal": {"median": 1.0, "p95": 1.2}}


def test_normal_factor_is_refused_because_it_can_reach_zero(kit, make_study, expect_input_error):
    text = kit.study.replace("occupants: 120", "occupants: 120\n    flow_factor: {normal: {mean: 1, sd: 0.2}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].flow_factor" in err and "normal is not accepted" in err


def test_stair_length_from_plan_length_and_rise_is_recorded(kit, make_study):
    text = kit.study.replace("{stair: {length: 12 m,", "{stair: {plan_length: 10 m, rise: 4.5 m,")
    stair = load_study(make_study(text)).routes[0].path[-1]
    assert stair["length_m"] == pytest.approx(math.hypot(10.0, 4.5))     # 10.97 m along the slope
    assert "plan length 10 m and rise 4.5 m" in stair["length_basis"]
    stair = load_study(make_study(kit.study)).routes[0].path[-1]
    assert stair["length_basis"] == "length along the slope, as given"


def test_stair_with_both_lengths_is_an_error(kit, make_study, expect_input_error):
    text = kit.study.replace("{stair: {length: 12 m,", "{stair: {length: 12 m, plan_length: 10 m,")
    err = expect_input_error(make_study(text))
    assert "egress[0].path[2].stair" in err and "either 'length'" in err


@pytest.mark.parametrize("riser, tread", [("230 mm", "200 mm"), ("400 mm", "100 mm")])
def test_stair_steeper_than_the_table_is_an_error_naming_the_rows(kit, make_study, expect_input_error, riser, tread):
    text = kit.study.replace("riser: 178 mm, tread: 279 mm", f"riser: {riser}, tread: {tread}")
    err = expect_input_error(make_study(text))
    assert "egress[0].path[2].stair" in err and "steeper than every row" in err
    assert "191/254 mm; 178/279 mm; 165/305 mm; 165/330 mm" in err


def test_movement_max_is_an_error_that_says_why(kit, make_study, expect_input_error):
    text = kit.study.replace("occupants: 120", "occupants: 120\n    movement: max")
    err = expect_input_error(make_study(text))
    assert "egress[0].movement" in err and "understates RSET" in err


def test_at_and_start_at_must_be_locations_and_every_problem_is_reported(kit, make_study, expect_input_error):
    text = (kit.study.replace("{corridor: {length: 20 m, width: 2.0 m}}",
                              "{corridor: {length: 20 m, width: 2.0 m, at: hall-l2}}")
            .replace("occupants: 120", "occupants: 120\n    start_at: hal-l1\n    movement: max")
            .replace("riser: 178 mm, tread: 279 mm", "riser: 230 mm, tread: 200 mm"))
    err = expect_input_error(make_study(text))
    assert "egress[0].path[0].corridor.at" in err and "location 'hall-l2' does not exist" in err
    assert "egress[0].start_at" in err and "did you mean 'hall-l1'?" in err
    assert "egress[0].movement" in err and "steeper than every row" in err


def test_validate_explain_prints_the_hand_calculation(kit, make_study, cli):
    """Hand (SFPE Handbook ch. 59 constants, from memory): corridor 2.0 m -> We 1.6 m,
    Fc 1.3 x 1.6 = 2.08 persons/s; door 1.0 m -> We 0.7 m, Fc 0.910; stair 1.2 m ->
    We 0.9 m, Fc 1.01 x 0.9 = 0.909 persons/s: the stair controls and discharges at
    capacity, so it has the density of maximum flow D = 1/(2 x 0.266) = 1.880
    persons/m^2 and speed S = 1.08 (1 - 0.266 x 1.880) = 1.08/2 = 0.540 m/s (120 persons
    over 12 m x 0.9 m = 11.1 persons/m^2 do not bound it). Hand movement: 20/1.19 +
    12/0.540 = 16.81 + 22.22 = 39.0 s travel + 120/0.909 = 132.0 s -> 171.0 s.
    No element says `at`: the three are spread over exposed_at [hall-l1, stair-l1] by
    distance (midpoints 10, 20, 26 m of 32 m: indices 0, 1, 1)."""
    status, out, err = cli(["validate", make_study(), "--explain"])
    assert status == 0, err
    rows = {line.split()[0]: line for line in out.splitlines() if line.strip()[:1].isdigit()}
    assert "1.600" in rows["1"] and "2.080" in rows["1"] and "unimpeded" in rows["1"] and "1.190" in rows["1"]
    assert "0.700" in rows["2"] and "0.910" in rows["2"]
    stair = rows["3"].split()
    assert stair[-1] == "controlling"
    assert stair[3:7] == ["0.900", "1.08", "1.01", "0.909"]     # We, k, Fsm, Fc
    assert stair[8:11] == ["1.010", "1.880", "0.540"]            # Fs, D, S
    assert "travel 39.0 s + 120 / 0.909 = 132.0 s -> 171.0 s" in out
    assert "stair length: length along the slope, as given" in out
    assert "element 1 (corridor) at hall-l1: assigned by distance along exposed_at; waiting to enter it at hall-l1" in out
    assert "element 2 (door) at stair-l1: assigned by distance along exposed_at; waiting to enter it at hall-l1" in out


def test_shared_elements_in_contradicting_orders_and_unused_elements(kit, make_study, cli):
    head, route = _split(kit)
    elements = ("elements:\n  - id: d1\n    door: {width: 1.0 m}\n  - id: d2\n    door: {width: 1.2 m}\n"
                "  - id: spare\n    door: {width: 2.0 m}\n")
    body = route.replace("      - {door: {width: 1.0 m}}\n", "      - {element: d1}\n      - {element: d2}\n")
    other = body.replace("north-stair", "south-stair").replace(
        "      - {element: d1}\n      - {element: d2}\n", "      - {element: d2}\n      - {element: d1}\n")
    status, out, err = cli(["validate", make_study(head + elements + "egress:\n" + body + other)])
    assert status == 2
    assert "egress[1].path" in err and "in another order than route 'north-stair'" in err
    assert "element 'spare' is not used by any route's path" in err


def test_misspelt_across_occupants_gets_a_hint(kit, make_study, expect_input_error):
    text = kit.study.replace("premovement: {lognormal: {median: 60 s, p95: 150 s}}",
                             "premovement: {across_occupant: {lognormal: {median: 60 s, p95: 150 s}}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].premovement" in err and "did you mean 'across_occupants'?" in err


def test_validate_explain_gives_the_shared_element_total(kit, make_study, cli):
    # Hand: 120 + 80 = 200 persons through the shared stair of 1.01 x 0.9 = 0.909 persons/s: 220.0 s
    status, out, err = cli(["validate", make_study(shared_study(kit)), "--explain"])
    assert status == 0, err
    assert ("shared element shared-stair: routes north-stair, south-stair (first come, first served); "
            "200 occupants / 0.909 persons/s = 220.0 s") in out


def test_a_broken_named_element_is_reported_once_where_it_is_defined(kit, make_study, expect_input_error):
    text = shared_study(kit).replace("stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm, at: stair-l1}",
                                     "stair: {length: 12 m, width: 1.2 m, riser: 178 mm, at: stair-l1}")
    err = expect_input_error(make_study(text))
    assert "elements[0].stair" in err and "missing 'tread'" in err
    assert "no element 'shared-stair'" not in err
