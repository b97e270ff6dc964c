"""Where a route's occupants are while they walk each path element and wait to enter it.

An element may say ``at: <location>``; the others are placed from their neighbours on
the path, so that time spent on an element is charged to a location the occupants
really pass at that point of their way out. Pure functions of the route's path; the
dose along the route and the location-aware comparison
(:mod:`egressmargin.assess`) use them.

Rules (project choice, issue 22):

1. An element's own ``at`` wins ("given").
2. An element without ``at`` takes the location of its nearest placed neighbour in
   path order: the nearest placed element before it, else the nearest after it. It is
   never placed beyond a placed element: the path visits locations in order.
3. When no element of the route is placed, the elements are spread over the route's
   ``exposed_at`` in order, in proportion to distance along the path (element at
   location floor(midpoint / total length x n)); a zero-length door takes the
   location at its position. The index never decreases along the path, so no
   element is placed after a later element's location.
4. People waiting to enter an element wait in the location before it: a door's queue
   is charged to the location of the element before the door, or to the route's
   ``start_at`` for the first element (to the element's own location when the route
   has no ``start_at``).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

__all__ = ["Place", "element_places"]


class Place(NamedTuple):
    """Where the occupants are at one path element.

    Attributes
    ----------
    walk : str
        Location id while walking the element (from passing its entry to leaving it).
    queue : str
        Location id while waiting at its entry (from reaching it to passing it).
    how : str
        How ``walk`` was found: ``"given"`` (the element's ``at``), ``"from element j
        before"`` / ``"from element j after"`` (its nearest placed neighbour, 1-based
        j), or ``"by distance along exposed_at"``.
    """

    walk: str
    queue: str
    how: str

    @property
    def given(self) -> bool:
        """True when the element says its own ``at``."""
        return self.how == "given"


def _proportional(path: list[dict], exposed_at: list[str]) -> list[int]:
    lengths = np.array([float(e.get("length_m") or 0.0) for e in path])
    total = lengths.sum()
    n_loc = len(exposed_at)
    starts = np.concatenate([[0.0], np.cumsum(lengths)[:-1]])
    mids = starts + lengths / 2
    idx = np.minimum((mids / total * n_loc).astype(int) if total > 0 else np.zeros(len(path), int), n_loc - 1)
    return [int(i) for i in np.maximum.accumulate(idx)]          # never back along exposed_at


def element_places(route) -> list[Place]:
    """Walking and queuing location of each path element of a route.

    Parameters
    ----------
    route : egressmargin.study.RouteSpec
        Uses ``path`` (each element's ``at`` and ``length_m``), ``exposed_at`` and
        ``start_at``.

    Returns
    -------
    list of Place
        One per path element, in path order (see the module's rules).

    Examples
    --------
    >>> from types import SimpleNamespace as R
    >>> path = [{"length_m": 5}, {"at": "lobby"}, {"length_m": 10}, {"length_m": 10, "at": "stair-1"}]
    >>> [tuple(p) for p in element_places(R(path=path, exposed_at=["lobby", "stair-1"], start_at="room"))]
    ... # doctest: +NORMALIZE_WHITESPACE
    [('lobby', 'room', 'from element 2 after'), ('lobby', 'lobby', 'given'),
     ('lobby', 'lobby', 'from element 2 before'), ('stair-1', 'lobby', 'given')]
    """
    path = list(route.path)
    given = [i for i, e in enumerate(path) if e.get("at")]
    walk: list[tuple[str, str]] = []
    if given:
        for i, e in enumerate(path):
            if e.get("at"):
                walk.append((str(e["at"]), "given"))
                continue
            before = [j for j in given if j < i]
            j = before[-1] if before else next(j for j in given if j > i)
            walk.append((str(path[j]["at"]), f"from element {j + 1} {'before' if before else 'after'}"))
    else:
        walk = [(route.exposed_at[k], "by distance along exposed_at") for k in _proportional(path, route.exposed_at)]
    start = getattr(route, "start_at", None)
    out = []
    for i, (loc, how) in enumerate(walk):
        queue = walk[i - 1][0] if i > 0 else (start or loc)
        out.append(Place(loc, queue, how))
    return out
