"""Will a run fit in memory? A cheap estimate from the loaded data, before computing.

The Monte Carlo never holds samples x time arrays (see DEVELOPERS.md, "How the Monte
Carlo stays fast"): its working set is a few dozen float arrays of shape (locations,
samples) per scenario (crossing times per criterion, levels, factors) and a few per
route (detection, alarm, pre-movement, movement, RSET, ASET, margin), while the dose
grids are chunked to a fixed size (``aset.GRID_BYTES``). The histories themselves are
already in memory when this is asked. So the estimate is

    bytes = S * sum over scenarios of (L * BYTES_PER_SAMPLE_LOCATION
                                       + R * BYTES_PER_SAMPLE_ROUTE)
            + L * N * 8 * SERIES_COPIES         (corrected copies of the series)

with S the most samples a run may draw, L the scenario's locations, R its routes and N
its rows. Summing over scenarios is conservative: results of every scenario are kept
until the end, and scenarios may run in parallel processes.

The flow model (``egress/flow.py``) is the exception to "no samples x something arrays":
it follows every person, so it holds a few arrays of shape (samples, occupants) for the
routes of a scenario at once. A scenario whose routes carry P occupants in all adds

    S * P * BYTES_PER_SAMPLE_OCCUPANT

(``scenarios`` entries may give P as a fourth number; without it the term is zero). For
an occupant count given as a distribution, P uses :func:`occupant_count_bound`.

Every occupant's exposure (routes with ``exposure: along-route``, or every route when
``acceptance.basis`` is ``occupants`` or ``both``) needs the flow model's per-person times
of every path element kept (``egress/flow.py`` ``ElementPass.arrive_each_s``,
``pass_each_s``, ``leave_each_s``: about two new (samples, occupants) arrays per element)
and works through them in blocks. A kept route of P_r occupants and E_r path elements adds

    S * P_r * E_r * BYTES_PER_SAMPLE_OCCUPANT_ELEMENT
      + E_r * min(S * P_r, exposure.PERSON_BLOCK_ELEMENTS) * 8 * EXPOSURE_ARRAYS_PER_ELEMENT

(``scenarios`` entries give the kept routes' (P_r, E_r) pairs as a fifth item).
"""

from __future__ import annotations

import os

__all__ = ["BYTES_PER_SAMPLE_LOCATION", "BYTES_PER_SAMPLE_ROUTE", "available_memory", "estimate_bytes",
           "format_bytes"]

#: Bytes per sample and location (project measurement: peak resident memory of `run` on
#: the test fixture grew by 196-230 B per sample-location between 4e4 and 3.2e5 samples
#: with 2 and 20 locations, 60 and 600 rows; rounded up to 32 float64 values).
BYTES_PER_SAMPLE_LOCATION = 256
#: Bytes per sample and route (the same measurement: under 100 B; 64 float64 values
#: allowed for the egress components, the movement model and the route's records).
BYTES_PER_SAMPLE_ROUTE = 512
#: Bytes per sample and occupant held by the flow model (project measurement: peak
#: resident memory of `run --no-pdf` on the test fixture grew by 50 B per sample-occupant
#: between 20 000 and 40 000 occupants at 200 samples, with one or six path elements,
#: start times spread across occupants or not, along-route exposure or not; rounded up
#: to 8 float64 values).
BYTES_PER_SAMPLE_OCCUPANT = 64
#: Bytes per sample, occupant and path element of the per-person times kept for the
#: exposure (project measurement, ``bench/memory_per_person.py``: with along-route exposure
#: and 2500 occupants, going from 1 to 8 corridors raised the peak resident memory of
#: `run --no-pdf` by 344 MB at 400 samples and 452 MB at 800: 15.4 B per sample x
#: occupant x element, two float64 arrays per element; without exposure 2.3 B). Rounded up
#: to 2 float64 values.
BYTES_PER_SAMPLE_OCCUPANT_ELEMENT = 16
#: The exposure's working arrays per path element, each of one block of
#: min(samples x occupants, exposure.PERSON_BLOCK_ELEMENTS) float64 (the same measurement:
#: the part that does not grow with the samples, 236 MB over 7 elements of 4 MB blocks,
#: is 8.5 such arrays per element; project choice: rounded up to 10).
EXPOSURE_ARRAYS_PER_ELEMENT = 10
#: The sensitivity sweep draws the occupant count this much higher: 1 + assess.SWEEP_FRACTION
#: (its +/-10 % sweep; imported, so the two cannot drift apart; assess is loaded by then anyway).
from .assess import SWEEP_FRACTION as _SWEEP_FRACTION  # noqa: E402

OCCUPANT_SWEEP = 1.0 + _SWEEP_FRACTION
#: Copies of a location's series held at once (raw, corrected, running maxima, dose
#: curves; project choice, generous).
SERIES_COPIES = 8


def estimate_bytes(samples: int, scenarios) -> int:
    """Bytes a run of ``samples`` draws needs, from ``(locations, routes, rows)`` per scenario.

    Parameters
    ----------
    samples : int
        The most Monte Carlo samples a run may draw [-].
    scenarios : iterable of tuples
        Per scenario: locations, routes assessed on it, rows of its histories; optionally
        the occupants of its routes (fourth) and the (occupants, path elements) of each
        route whose per-person times are kept for the exposure (fifth).

    Examples
    --------
    Two locations, one route, 60 rows, 1000 samples:
    1000 * (2 * 256 + 512) + 2 * 60 * 8 * 8 = 1 031 680 bytes.

    >>> estimate_bytes(1000, [(2, 1, 60)])
    1031680
    """
    total = 0
    for shape in scenarios:
        locations, routes, rows = shape[:3]
        occupants = shape[3] if len(shape) > 3 else 0
        total += int(samples) * (locations * BYTES_PER_SAMPLE_LOCATION + routes * BYTES_PER_SAMPLE_ROUTE)
        total += int(samples) * int(occupants) * BYTES_PER_SAMPLE_OCCUPANT
        total += kept_bytes(samples, shape[4] if len(shape) > 4 else ())
        total += locations * rows * 8 * SERIES_COPIES
    return total


def kept_bytes(samples: int, kept) -> int:
    """Bytes of the per-person times kept for the exposure and of the exposure's blocks.

    ``kept``: (occupants, path elements) of each route whose per-person times are kept.

    Examples
    --------
    1000 occupants through 3 elements over 2000 draws: 2000 * 1000 * 3 * 16 bytes kept
    plus 3 blocks of 500 000 values * 8 bytes * 10 arrays = 96 MB + 120 MB.

    >>> kept_bytes(2000, [(1000, 3)])
    216000000
    """
    from .exposure import PERSON_BLOCK_ELEMENTS

    total = 0
    for occupants, elements in kept:
        sn = int(samples) * int(occupants)
        total += sn * int(elements) * BYTES_PER_SAMPLE_OCCUPANT_ELEMENT
        total += int(elements) * min(sn, PERSON_BLOCK_ELEMENTS) * 8 * EXPOSURE_ARRAYS_PER_ELEMENT
    return total


def occupant_count_bound(spec: dict, samples: int) -> int:
    """The most occupants the flow model should expect on a route over ``samples`` draws.

    A fixed count is itself. For a distribution the bound is its quantile at
    ``1 - 1/(10 samples)``: the largest of ``samples`` independent draws exceeds it with
    probability ``1 - (1 - 1/(10 S))^S``, about 1 - exp(-0.1) = 9.5 % (project choice: an
    estimate, not a guarantee). Times :data:`OCCUPANT_SWEEP` for the sensitivity sweep,
    rounded up; a value beyond 1e18 is capped there (it cannot fit anyway).

    Examples
    --------
    >>> occupant_count_bound({"fixed": 200.0}, 2000)
    220
    >>> occupant_count_bound({"uniform": {"low": 100.0, "high": 200.0}}, 1000)   # 200 - 1e-4 * 100, * 1.1
    220
    """
    import math

    from .egress.distributions import ppf

    q = 1.0 - 1.0 / (10.0 * max(int(samples), 1))
    n = float(ppf(spec, q)) if spec else 1.0
    if not math.isfinite(n) or n > 1e18:
        return 10 ** 18
    return int(math.ceil(max(round(n), 1) * OCCUPANT_SWEEP - 1e-9))


def available_memory() -> tuple[int | None, int | None]:
    """(available, total) physical memory [bytes] of this machine; None where it cannot be told.

    Available is ``MemAvailable`` of ``/proc/meminfo`` where there is one (it counts the
    page cache the kernel can reclaim), else ``os.sysconf('SC_AVPHYS_PAGES')`` pages.
    """
    try:
        page = os.sysconf("SC_PAGE_SIZE")
        total = os.sysconf("SC_PHYS_PAGES") * page
        avail = os.sysconf("SC_AVPHYS_PAGES") * page
    except (ValueError, OSError, AttributeError):
        return None, None
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    avail = int(line.split()[1]) * 1024
                    break
    except (OSError, ValueError):
        pass
    return avail, total


def format_bytes(n: float) -> str:
    """``1.5 GB`` style (powers of 1000).

    >>> format_bytes(2.07e9), format_bytes(126e6)
    ('2.1 GB', '126 MB')
    """
    for unit, size in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= size:
            value = n / size
            return f"{value:.1f} {unit}" if value < 10 else f"{value:.0f} {unit}"
    return f"{int(n)} B"


def memory_problems(samples: int, scenarios, where: str, available: int | None = None,
                    total: int | None = None) -> list:
    """A located Problem when ``estimate_bytes(samples, scenarios)`` exceeds the available memory.

    ``available`` and ``total`` default to :func:`available_memory` (this machine). No
    problem when the machine's memory cannot be told.

    Examples
    --------
    >>> memory_problems(10**9, [(2, 1, 60)], "study.yaml:3 samples", available=8e9, total=16e9)[0].message
    '1000000000 samples need about 1.0 TB of memory (2 locations and 1 route over 1 scenario); this machine has 8.0 GB available (16 GB in all); expected at most about 7812492 samples'
    """
    from .errors import Problem

    scenarios = list(scenarios)
    if available is None:
        available, total = available_memory()
    if available is None:
        return []
    need = estimate_bytes(samples, scenarios)
    if need <= available:
        return []
    fixed = estimate_bytes(0, scenarios)
    per_sample = max(estimate_bytes(1, scenarios) - fixed, 1)
    most = max(int((available - fixed) // per_sample), 0)
    L = sum(s[0] for s in scenarios)
    R = sum(s[1] for s in scenarios)
    P = sum(s[3] for s in scenarios if len(s) > 3)
    people = f", {P} occupants as the flow model counts them" if P else ""
    whole = f" ({format_bytes(total)} in all)" if total else ""
    return [Problem(where, f"{samples} samples need about {format_bytes(need)} of memory ({L} location"
                           f"{'s' if L != 1 else ''} and {R} route{'s' if R != 1 else ''}{people} over {len(scenarios)} "
                           f"scenario{'s' if len(scenarios) != 1 else ''}); this machine has "
                           f"{format_bytes(available)} available{whole}; expected at most about {most} samples")]
