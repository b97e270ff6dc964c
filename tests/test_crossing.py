"""Tests for egressmargin.tenability.crossing: dose integration and first crossings.

The rules under test are fixed by the project's outside contract (results.json
section): first crossing linearly interpolated between the bracketing samples, doses
by the trapezoidal rule. Reference answers are closed-form (ramps, steps, constants)
or scipy.integrate.cumulative_trapezoid.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.integrate import cumulative_trapezoid as scipy_cumtrapz

from egressmargin.tenability.crossing import (
    crossing_times_for_levels,
    cumulative_trapezoid,
    first_crossing,
)

# ---------------------------------------------------------------- cumulative dose


def test_cumulative_constant_rate_closed_form():
    # Closed form: constant rate r per minute for t seconds gives r * t/60.
    t = np.linspace(0.0, 600.0, 31)
    dose = cumulative_trapezoid(t, np.full(t.shape, 0.05))
    np.testing.assert_allclose(dose, 0.05 * t / 60.0, rtol=1e-12, atol=1e-15)
    assert dose[0] == 0.0


def test_cumulative_linear_rate_exact():
    # The trapezoidal rule is exact for a linear rate: r = a t_min gives a t_min^2/2.
    t = np.array([0.0, 30.0, 45.0, 120.0, 300.0])
    t_min = t / 60.0
    dose = cumulative_trapezoid(t, 0.2 * t_min)
    np.testing.assert_allclose(dose, 0.1 * t_min**2, rtol=1e-12)


def test_cumulative_matches_scipy_on_2d():
    # Reference: scipy.integrate.cumulative_trapezoid along the last axis, initial=0.
    rng = np.random.default_rng(3)
    t = np.sort(rng.uniform(0.0, 900.0, 50))
    rate = rng.uniform(0.0, 0.2, (4, 50))
    expected = scipy_cumtrapz(rate, t / 60.0, axis=-1, initial=0.0)
    np.testing.assert_allclose(cumulative_trapezoid(t, rate), expected, rtol=1e-12)


def test_cumulative_shape_mismatch_raises():
    with pytest.raises(ValueError, match="samples"):
        cumulative_trapezoid([0.0, 1.0, 2.0], [0.1, 0.2])


# ---------------------------------------------------------------- first_crossing


def test_ramp_crossing_closed_form():
    # T = 20 + 0.5 t degC reaches 60 degC at t = 80 s exactly, between samples.
    t = np.arange(0.0, 301.0, 7.0)
    values = 20.0 + 0.5 * t
    assert first_crossing(t, values, 60.0) == pytest.approx(80.0, rel=1e-12)


def test_falling_ramp_below():
    # Visibility falling linearly 30 - 0.1 t m reaches 10 m at t = 200 s.
    t = np.linspace(0.0, 400.0, 9)
    assert first_crossing(t, 30.0 - 0.1 * t, 10.0, direction="below") == pytest.approx(200.0)


def test_step_interpolates_between_bracketing_samples():
    # A step from 0 to 10 between samples at 10 s and 20 s: level 5 is crossed halfway.
    t = np.array([0.0, 10.0, 20.0, 30.0])
    values = np.array([0.0, 0.0, 10.0, 10.0])
    assert first_crossing(t, values, 5.0) == pytest.approx(15.0)
    assert first_crossing(t, values, 10.0) == pytest.approx(20.0)


def test_not_reached_is_nan():
    t = np.array([0.0, 10.0, 20.0])
    assert np.isnan(first_crossing(t, [1.0, 2.0, 3.0], 3.5))
    assert np.isnan(first_crossing(t, [1.0, 2.0, 3.0], 0.5, direction="below"))


def test_reached_at_first_sample_returns_t0():
    t = np.array([5.0, 10.0, 20.0])
    assert first_crossing(t, [4.0, 5.0, 6.0], 3.0) == 5.0
    assert first_crossing(t, [4.0, 5.0, 6.0], 4.0) == 5.0


def test_first_not_last_crossing():
    # The series crosses 5 going up at 5 s, down, and again later: the first counts.
    t = np.array([0.0, 10.0, 20.0, 30.0])
    assert first_crossing(t, [0.0, 10.0, 0.0, 10.0], 5.0) == pytest.approx(5.0)


def test_2d_rows_with_per_row_levels():
    t = np.linspace(0.0, 100.0, 11)
    values = np.vstack([t, 2.0 * t, np.full(t.shape, np.nan)])
    out = first_crossing(t, values, np.array([50.0, 50.0, 1.0]))
    np.testing.assert_allclose(out[:2], [50.0, 25.0])
    assert np.isnan(out[2])  # an all-NaN row (series not supplied) never crosses


def test_nan_before_crossing_uses_reaching_sample():
    t = np.array([0.0, 10.0, 20.0])
    assert first_crossing(t, [0.0, np.nan, 10.0], 5.0) == 20.0


def test_bad_direction_raises():
    with pytest.raises(ValueError, match="above"):
        first_crossing([0.0, 1.0], [0.0, 1.0], 0.5, direction="up")


# ---------------------------------------------------------------- vectorised levels


def test_levels_closed_form_ramp():
    t = np.linspace(0.0, 100.0, 6)
    out = crossing_times_for_levels(t, 3.0 * t, np.array([-1.0, 0.0, 30.0, 150.0, 300.0, 301.0]))
    np.testing.assert_allclose(out[:5], [0.0, 0.0, 10.0, 50.0, 100.0])
    assert np.isnan(out[5])


def test_levels_keep_shape_and_nan_levels():
    t = np.array([0.0, 1.0])
    out = crossing_times_for_levels(t, [0.0, 1.0], np.array([[0.5, np.nan], [2.0, 1.0]]))
    assert out.shape == (2, 2)
    assert out[0, 0] == pytest.approx(0.5)
    assert np.isnan(out[0, 1]) and np.isnan(out[1, 0])
    assert out[1, 1] == pytest.approx(1.0)


@pytest.mark.parametrize("direction", ["above", "below"])
def test_levels_agree_with_first_crossing_on_random_data(direction):
    rng = np.random.default_rng(11)
    for _ in range(20):
        n = int(rng.integers(2, 60))
        t = np.cumsum(rng.uniform(0.1, 5.0, n))
        values = np.cumsum(rng.normal(0.0, 1.0, n))
        values[rng.random(n) < 0.05] = np.nan
        levels = rng.uniform(np.nanmin(values) - 1.0, np.nanmax(values) + 1.0, 40)
        fast = crossing_times_for_levels(t, values, levels, direction)
        slow = np.array([first_crossing(t, values, lv, direction) for lv in levels])
        np.testing.assert_array_equal(np.isnan(fast), np.isnan(slow))
        np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-9)


# ---------------------------------------------------------------- properties


@st.composite
def series(draw, min_size=1, max_size=40):
    n = draw(st.integers(min_size, max_size))
    finite = st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False)
    dt = draw(arrays(float, n, elements=st.floats(0.0, 100.0)))
    t = np.cumsum(dt)
    v = draw(arrays(float, n, elements=finite))
    return t, v


@settings(max_examples=200, deadline=None)
@given(series(), st.floats(-1e6, 1e6), st.sampled_from(["above", "below"]))
def test_property_no_crash_and_result_in_time_range(tv, level, direction):
    t, v = tv
    out = first_crossing(t, v, level, direction)
    fast = crossing_times_for_levels(t, v, np.array([level]), direction)[0]
    if np.isnan(out):
        assert np.isnan(fast)
    else:
        assert t[0] <= out <= t[-1]
        assert fast == pytest.approx(out, abs=1e-6)


@settings(max_examples=200, deadline=None)
@given(series(min_size=2), st.data())
def test_property_raising_series_never_delays_crossing(tv, data):
    t, v = tv
    bump = data.draw(arrays(float, v.shape, elements=st.floats(0.0, 1e6)))
    level = data.draw(st.floats(-1e6, 1e6))
    before = first_crossing(t, v, level)
    after = first_crossing(t, v + bump, level)
    if not np.isnan(before):
        assert not np.isnan(after)
        assert after <= before + 1e-9 * max(1.0, abs(t[-1]))


@settings(max_examples=200, deadline=None)
@given(series(min_size=2), st.floats(-1e6, 1e6), st.floats(0.0, 1e6))
def test_property_higher_level_never_crosses_earlier(tv, level, extra):
    t, v = tv
    low, high = crossing_times_for_levels(t, v, np.array([level, level + extra]))
    if not np.isnan(high):
        assert not np.isnan(low)
        assert high >= low
