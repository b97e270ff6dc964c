"""Tests of egressmargin.egress.detection.

The RTI model dT_d/dt = sqrt(u)(T_g - T_d)/RTI is from Heskestad & Bill (1988),
"Quantification of thermal responsiveness of automatic sprinklers including
conduction effects", Fire Safety Journal 14, 113-125 (conduction term dropped); its
closed-form step and ramp solutions are those of a first-order linear ODE with time
constant tau = RTI/sqrt(u).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from egressmargin.egress.detection import (
    activation_time,
    rti_response,
)


def test_step_response_matches_closed_form_on_a_coarse_grid():
    # Heskestad & Bill (1988): constant gas rise dTg from ambient gives
    # dT_d(t) = dTg (1 - exp(-t/tau)), tau = RTI/sqrt(u). Exact at any grid spacing.
    rti, u, d_tg = 100.0, 2.0, 100.0
    tau = rti / math.sqrt(u)
    t = np.arange(0.0, 301.0, 30.0)
    got = rti_response(t, np.full(t.shape, d_tg), u, rti)
    np.testing.assert_allclose(got, d_tg * (1.0 - np.exp(-t / tau)), rtol=1e-12, atol=1e-12)


def test_step_activation_time_matches_heskestad_bill():
    # t_act = (RTI/sqrt(u)) ln((Tg - Ta)/(Tg - Tact)); Tg = 120, Ta = 20, Tact = 68 degC,
    # RTI = 100 m^0.5 s^0.5, u = 2 m/s: t = 70.711 ln(100/52) = 46.24 s (hand calculation).
    rti, u = 100.0, 2.0
    t_g, t_a, t_act = 120.0, 20.0, 68.0
    expected = rti / math.sqrt(u) * math.log((t_g - t_a) / (t_g - t_act))
    assert expected == pytest.approx(46.24, abs=0.01)
    t = np.arange(0.0, 200.0, 0.25)
    rise = rti_response(t, np.full(t.shape, t_g - t_a), u, rti)
    assert activation_time(t, rise, t_act - t_a) == pytest.approx(expected, abs=0.01)


def test_ramp_response_matches_closed_form_on_a_coarse_grid():
    # Linear first-order ODE with ramp input dTg = alpha t:
    # dT_d = alpha (t - tau (1 - exp(-t/tau))), tau = RTI/sqrt(u).
    alpha, rti, u = 0.5, 50.0, 1.5
    tau = rti / math.sqrt(u)
    t = np.array([0.0, 7.0, 40.0, 41.0, 120.0, 300.0])  # uneven and coarse on purpose
    got = rti_response(t, alpha * t, u, rti)
    expected = alpha * (t - tau * (1.0 - np.exp(-t / tau)))
    np.testing.assert_allclose(got, expected, rtol=1e-11, atol=1e-11)


def test_response_scales_linearly_with_the_gas_rise():
    # The ODE is linear in (T_g - T_amb): a model-error factor on the gas rise
    # multiplies the element rise by the same factor.
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 600.0, 61)
    gas = np.cumsum(rng.random(61)) * 3.0
    vel = 0.5 + rng.random(61)
    factors = np.array([0.6, 1.0, 1.7])
    scaled = rti_response(t, factors[:, None] * gas, vel, 80.0)
    base = rti_response(t, gas, vel, 80.0)
    np.testing.assert_allclose(scaled, factors[:, None] * base, rtol=1e-12)


def test_variable_velocity_converges_to_a_reference_ode_solution():
    # Reference: scipy.integrate.solve_ivp (RK45, tight tolerances) on the same ODE with
    # smooth gas rise and velocity histories; the step-average scheme is second order.
    rti = 60.0

    def gas(t):
        return 150.0 * (1.0 - np.exp(-t / 80.0))

    def vel(t):
        return 0.3 + 1.2 * t / 300.0

    def rhs(t, y):
        return np.sqrt(vel(t)) * (gas(t) - y) / rti

    sol = solve_ivp(rhs, (0.0, 300.0), [0.0], rtol=1e-10, atol=1e-10, dense_output=True)
    t = np.linspace(0.0, 300.0, 301)
    got = rti_response(t, gas(t), vel(t), rti)
    np.testing.assert_allclose(got, sol.sol(t)[0], atol=2e-3)


def test_vectorised_over_samples_matches_one_at_a_time():
    t = np.linspace(0.0, 300.0, 31)
    gas = np.vstack([t * 0.4, t * 0.8, np.full(31, 60.0)])
    rti = np.array([30.0, 100.0, 250.0])
    together = rti_response(t, gas, 1.0, rti)
    for i in range(3):
        np.testing.assert_allclose(together[i], rti_response(t, gas[i], 1.0, rti[i]), rtol=1e-14)
    # one gas history, many RTIs: broadcast to (S, N)
    assert rti_response(t, gas[0], 1.0, rti).shape == (3, 31)


def test_zero_velocity_gives_no_heating():
    t = np.linspace(0.0, 100.0, 11)
    np.testing.assert_array_equal(rti_response(t, np.full(11, 200.0), 0.0, 50.0), np.zeros(11))


@settings(max_examples=60, deadline=None)
@given(
    base=st.lists(st.floats(0.0, 20.0), min_size=12, max_size=12),
    extra=st.lists(st.floats(0.0, 20.0), min_size=12, max_size=12),
    rti=st.floats(20.0, 300.0),
)
def test_hotter_gas_never_activates_later(base, extra, rti):
    # Monotonicity of the RTI model: a gas rise that is everywhere at least as high
    # gives an element rise at least as high, hence no later activation.
    t = np.linspace(0.0, 550.0, 12)
    cool = np.cumsum(base)
    hot = cool + np.asarray(extra)
    r_cool = rti_response(t, cool, 1.0, rti)
    r_hot = rti_response(t, hot, 1.0, rti)
    assert np.all(r_hot >= r_cool - 1e-9)
    t_cool = activation_time(t, r_cool, 30.0)
    t_hot = activation_time(t, r_hot, 30.0)
    if not math.isnan(t_cool):
        assert not math.isnan(t_hot) and t_hot <= t_cool + 1e-9


def test_activation_time_not_reached_is_nan_and_levels_broadcast():
    t = np.linspace(0.0, 100.0, 11)
    rise = np.vstack([t, 2.0 * t])  # linear rises of 1 and 2 degC/s
    got = activation_time(t, rise, np.array([50.0, 50.0]))
    np.testing.assert_allclose(got, [50.0, 25.0])
    assert math.isnan(activation_time(t, t, 500.0))
    cube = np.broadcast_to(rise, (4, 2, 11))
    np.testing.assert_allclose(activation_time(t, cube, 50.0), np.tile([50.0, 25.0], (4, 1)))
    with pytest.raises(ValueError, match="above the ambient"):
        activation_time(t, rise, 0.0)


def test_bad_inputs_raise():
    t = np.array([0.0, 1.0, 1.0])
    with pytest.raises(ValueError, match="strictly increasing"):
        rti_response(t, np.zeros(3), 1.0, 50.0)
    with pytest.raises(ValueError, match="rti must be positive"):
        rti_response([0.0, 1.0], [0.0, 1.0], 1.0, 0.0)
    with pytest.raises(ValueError, match="time axis last"):
        rti_response([0.0, 1.0], [0.0, 1.0, 2.0], 1.0, 50.0)
