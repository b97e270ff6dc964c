"""Where people walk and wait on a route (egress/placement.py; issue 22, item 4).

Rules are the project's (module docstring of egress/placement.py): an element without
`at` takes its nearest placed neighbour in path order (before it, else after it); with
nothing placed, elements are spread over exposed_at by distance, never backwards; the
queue for an element is in the location before it (start_at for the first element).
The routes are invented for the tests.
"""

from __future__ import annotations

from types import SimpleNamespace

import pytest

from egressmargin.assess import element_locations
from egressmargin.egress.placement import element_places
from egressmargin.egress.summary import explain_route


def route(path, exposed_at, start_at=None, occupants=100):
    return SimpleNamespace(path=path, exposed_at=exposed_at, start_at=start_at, occupants=occupants)


def stair(length, at=None):
    e = {"type": "stair", "length_m": length, "width_m": 1.2, "riser_m": 0.178, "tread_m": 0.279}
    return {**e, "at": at} if at else e


ISSUE_PATH = [
    {"type": "corridor", "length_m": 20.0, "width_m": 2.0},
    {"type": "door", "length_m": 0.0, "width_m": 1.0, "at": "lobby-l2"},
    stair(10.0),                                    # stair-a-mid: no at
    stair(10.0, "stair-a-l1"),                      # stair-a-lower
    {"type": "door", "length_m": 0.0, "width_m": 1.0, "at": "stair-a-l0"},
]
ISSUE_EXPOSED = ["lobby-l2", "stair-a-l1", "stair-a-l0"]


def test_issue_case_the_upper_flight_is_charged_to_the_floor_above_it():
    # Hand: element 3 (stair-a-mid) has element 2 (at lobby-l2) as its nearest placed
    # neighbour before it, so it is at lobby-l2: never after the flight below it
    # (stair-a-l1) nor at the ground floor (stair-a-l0), where the issue found it.
    # Element 1 has no placed element before it, so takes element 2's location.
    places = element_places(route(ISSUE_PATH, ISSUE_EXPOSED, start_at="office-l2"))
    assert [p.walk for p in places] == ["lobby-l2", "lobby-l2", "lobby-l2", "stair-a-l1", "stair-a-l0"]
    assert [p.how for p in places] == ["from element 2 after", "given", "from element 2 before", "given", "given"]
    # people wait for an element in the location before it; for the first, at start_at
    assert [p.queue for p in places] == ["office-l2", "lobby-l2", "lobby-l2", "lobby-l2", "stair-a-l1"]
    assert element_locations(route(ISSUE_PATH, ISSUE_EXPOSED))[2] == ("lobby-l2", "assigned")


def test_never_beyond_a_placed_element_and_first_queue_without_start_at():
    path = [stair(5.0), stair(5.0, "b"), stair(5.0), stair(5.0), stair(5.0, "d"), stair(5.0)]
    places = element_places(route(path, ["a", "b", "c", "d", "e"]))
    assert [p.walk for p in places] == ["b", "b", "b", "b", "d", "d"]
    assert places[0].queue == "b"                   # no start_at: its own location


def test_nothing_placed_spreads_by_distance_and_never_goes_back():
    # Hand: lengths 10, 0 (door), 30, 0 (door): midpoints 5, 10, 25, 40 of 40 m over
    # 2 locations -> floor(0.25), floor(0.5), floor(1.25), floor(2.0) capped at 1:
    # a, a, b, b.
    path = [{"type": "corridor", "length_m": 10.0, "width_m": 2.0}, {"type": "door", "length_m": 0.0, "width_m": 1.0},
            stair(30.0), {"type": "door", "length_m": 0.0, "width_m": 1.0}]
    places = element_places(route(path, ["a", "b"], start_at="a"))
    assert [p.walk for p in places] == ["a", "a", "b", "b"]
    assert [p.queue for p in places] == ["a", "a", "a", "b"]
    assert all(p.how == "by distance along exposed_at" for p in places)
    idx = [["a", "b"].index(p.walk) for p in places]
    assert idx == sorted(idx)


@pytest.mark.parametrize("start_at", [None, "office-l2"])
def test_explain_gives_each_elements_place(start_at):
    rows = explain_route(route(ISSUE_PATH, ISSUE_EXPOSED, start_at=start_at))
    assert [(r.at, r.at_how == "given") for r in rows] == [
        ("lobby-l2", False), ("lobby-l2", True), ("lobby-l2", False), ("stair-a-l1", True), ("stair-a-l0", True)]
    assert rows[0].queue_at == (start_at or "lobby-l2")
