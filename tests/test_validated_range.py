"""The validated-range guard: flag only predictions that matter, and say by how much.

Closed-form series (ramps and steps) built here; the rule is the project's (issue 16
item 5): predictions up to the latest crossing, or to the end of the data when the limit
is not reached in every draw, and not the ambient stretch before the series first
reaches the range.
"""

from __future__ import annotations

import numpy as np
import pytest

from egressmargin.uncertainty import range_excursion
from engine_helpers import location, results_for, write_study

T = np.arange(0.0, 601.0, 1.0)


def test_ambient_dip_before_the_rise_is_not_an_excursion():
    # 19.26 degC at the start, rising to 45 degC; range 20 to 200 degC
    v = 19.26 + (45.0 - 19.26) * T / T[-1]
    assert range_excursion(T, v, T[-1], 20.0, 200.0) is None


def test_real_excursion_reported_with_its_size_and_time():
    v = 20.0 + 0.5 * T                       # 20 -> 320 degC, above 200 from t = 360 s
    exc = range_excursion(T, v, T[-1], 20.0, 200.0)
    assert exc["peak"] == pytest.approx(320.0) and exc["above_by"] == pytest.approx(120.0)
    assert exc["first_outside_s"] == pytest.approx(361.0)    # first sample strictly above 200
    assert exc["below_by"] == 0.0 and exc["stays_outside"] is False
    # only up to the crossing: a crossing at 300 s (170 degC) leaves the range untouched
    assert range_excursion(T, v, 300.0, 20.0, 200.0) is None


def test_drop_below_the_range_after_entering_it_counts():
    v = np.where(T < 300, 20.0 + T, 5.0)     # enters at once, later falls to 5 degC
    exc = range_excursion(T, v, T[-1], 10.0, 400.0)
    assert exc["below_by"] == pytest.approx(5.0) and exc["first_outside_s"] == pytest.approx(300.0)


def test_falling_quantity_ignores_its_high_ambient_start():
    # layer height 3.0 m at the start (ceiling), falling to 1.2 m; range 1.0 to 2.5 m
    v = 3.0 - 1.8 * T / T[-1]
    assert range_excursion(T, v, T[-1], 1.0, 2.5, falling=True) is None
    # a rising reading of the same series would flag the start
    assert range_excursion(T, v, T[-1], 1.0, 2.5)["above_by"] == pytest.approx(0.5)


def test_series_that_never_reaches_the_range_is_reported():
    v = np.full(T.size, 30e-6)               # 30 ppm CO throughout; range 50 to 400 ppm
    exc = range_excursion(T, v, T[-1], 50e-6, 400e-6)
    assert exc["stays_outside"] is True and exc["peak"] == pytest.approx(30e-6)


UNC = {"source": "synthetic test values", "distribution": "lognormal",
       "quantities": {"temperature": {"bias": 1.1, "sigma_model": 0.05, "sigma_exp": 0.05, "basis": "rise",
                                      "range": {"min": 20, "max": 200, "unit": "degC"}}}}
ONLY_T = {"base": "general-2m", "only": ["temperature"]}


def _study(tmp_path, values):
    t = np.arange(0.0, 1201.0, 5.0)
    return write_study(tmp_path, t, {"T1": ("degC", values(t))}, [{"id": "a", "temperature": "T1"}],
                       criteria=ONLY_T, uncertainty=UNC, samples=500)


def test_pipeline_ambient_dip_gives_no_flag(tmp_path):
    # 19.26 degC for the first 60 s, then a rise to 45 degC: the limit (60 degC) is never
    # reached, so everything up to the end matters, but the dip is the ambient.
    res, _ = results_for(_study(tmp_path, lambda t: np.where(t < 60, 19.26, np.minimum(20 + 0.05 * t, 45.0))))
    c = location(res, "a")["criteria"]["temperature"]
    assert c["outside_validated_range"] is False and "range_note" not in c


def test_pipeline_excursion_flagged_with_its_size(tmp_path):
    # 20 + 0.5 t degC: above 200 degC after 360 s, but the 60 degC limit is crossed near
    # 80 s (raw) and no later than about 90 s corrected: nothing outside the range matters.
    res, _ = results_for(_study(tmp_path, lambda t: 20 + 0.5 * t))
    assert location(res, "a")["criteria"]["temperature"]["outside_validated_range"] is False
    # a plateau at 250 degC before any crossing of a 300 degC limit: outside by 50 degC
    crit = {"base": "general-2m", "only": ["temperature"], "temperature": {"limit": "300 degC"}}
    t = np.arange(0.0, 1201.0, 5.0)
    path = write_study(tmp_path, t, {"T1": ("degC", np.minimum(20 + 0.5 * t, 250.0))},
                       [{"id": "a", "temperature": "T1"}], criteria=crit, uncertainty=UNC, samples=500)
    res, _ = results_for(path)
    c = location(res, "a")["criteria"]["temperature"]
    assert c["outside_validated_range"] is True
    note = c["range_note"]
    assert "250 degC, 50 degC above it" in note and "(20 to 200 degC)" in note
    assert "up to the end of the data (1200 s; median crossing not reached)" in note


from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(-50, 500), min_size=1, max_size=40), st.integers(0, 100), st.integers(101, 300))
def test_property_inside_never_flagged_and_excursions_measured(values, low, high):
    """Values clipped into the range are never flagged. Otherwise, after the series first
    reaches ``low`` (the ambient stretch before it is not counted), above_by and below_by
    are exactly how far the counted values pass the bounds; a series that never reaches
    ``low`` is reported as staying outside. Whole numbers keep the comparison exact."""
    v = np.asarray(values, dtype=float)
    t = np.arange(v.size, dtype=float)
    assert range_excursion(t, np.clip(v, low, high), t[-1], low, high) is None
    exc = range_excursion(t, v, t[-1], low, high)
    reached = np.flatnonzero(v >= low)
    if not reached.size:
        assert exc["stays_outside"] is True and exc["peak"] == v.max()
        return
    counted = v[reached[0]:]
    if exc is None:
        assert np.all((counted >= low) & (counted <= high))
    else:
        assert exc["above_by"] == max(counted.max() - high, 0.0)
        assert exc["below_by"] == max(low - counted.min(), 0.0)
        assert exc["above_by"] > 0 or exc["below_by"] > 0
