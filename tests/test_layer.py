"""Tests for egressmargin.tenability.layer (integral method for interface height).

Method: He, Fernando & Luo (1998), Fire Safety Journal 31; Janssens & Tran (1992),
J. Fire Sciences 10 (equation from memory):
    z_int = T_l (I1 I2 - H^2) / (I1 + I2 T_l^2 - 2 T_l H),
    I1 = int_0^H T dz, I2 = int_0^H dz/T.
Closed form used below: for an exact two-zone profile the equation returns the
interface height (substitute I1 = T_l z + T_u (H - z), I2 = z/T_l + (H - z)/T_u).
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from egressmargin.tenability.layer import layer_height_integral

H = 3.0


def _two_zone(z_int, t_low, t_up, gap=1e-7):
    """Sensors tightly straddling the interface reproduce a step profile."""
    z = np.array([0.2, z_int - gap, z_int + gap, 2.9])
    temp = np.array([t_low, t_low, t_up, t_up])[:, None]
    return z, temp


@pytest.mark.parametrize("z_int", [0.5, 1.2, 1.8, 2.5])
@pytest.mark.parametrize("t_up", [320.0, 450.0, 900.0])
def test_step_profile_returns_interface_height(z_int, t_up):
    # Closed form (see module docstring): a two-zone profile gives z_int exactly;
    # the only error is the 2e-7 m linear segment standing in for the step.
    z, temp = _two_zone(z_int, 293.15, t_up)
    assert layer_height_integral(z, temp, H)[0] == pytest.approx(z_int, abs=1e-6)


def test_uniform_profile_returns_ceiling():
    # No layer: the denominator int (T - T_l)^2 / T dz vanishes; answer = ceiling.
    z = np.linspace(0.1, 2.9, 15)
    temp = np.full((15, 4), 293.15)
    temp[:, 1] = 400.0  # uniformly hot room is also "no interface"
    np.testing.assert_array_equal(layer_height_integral(z, temp, H), H)


def test_linear_segment_integrals_closed_form():
    # Piecewise-linear profile between sensors, constant beyond: I1, I2 by hand,
    # int_a^b dz / T over a linear segment = dz ln(T_b/T_a)/(T_b - T_a).
    z1, z2, t_l, t_u = 1.0, 2.0, 300.0, 500.0
    i1 = t_l * z1 + 0.5 * (t_l + t_u) * (z2 - z1) + t_u * (H - z2)
    i2 = z1 / t_l + (z2 - z1) * math.log(t_u / t_l) / (t_u - t_l) + (H - z2) / t_u
    expected = t_l * (i1 * i2 - H**2) / (i1 + i2 * t_l**2 - 2 * t_l * H)
    got = layer_height_integral([z1, z2], [[t_l], [t_u]], H)[0]
    assert got == pytest.approx(expected, rel=1e-12)
    assert z1 < got < z2


def test_nearly_equal_neighbours_use_stable_series():
    # Segments with tiny temperature differences must match the exact log formula.
    z = np.array([0.5, 1.5, 2.5])
    temp = np.array([[300.0], [300.0 + 1e-3], [600.0]])
    t = temp[:, 0]
    i1 = t[0] * 0.5 + 0.5 * (t[0] + t[1]) + 0.5 * (t[1] + t[2]) + t[2] * 0.5
    x = (t[1] - t[0]) / t[0]
    seg0 = math.log1p(x) / (t[0] * x)  # exact mean of 1/T, computed without cancellation
    seg1 = math.log(t[2] / t[1]) / (t[2] - t[1])
    i2 = 0.5 / t[0] + seg0 + seg1 + 0.5 / t[2]
    expected = t[0] * (i1 * i2 - H**2) / (i1 + i2 * t[0] ** 2 - 2 * t[0] * H)
    assert layer_height_integral(z, temp, H)[0] == pytest.approx(expected, rel=1e-9)


def test_descending_layer_gives_nonincreasing_height():
    # Monotone behaviour: a hot layer whose (smooth) interface descends over time.
    z = np.linspace(0.1, 2.9, 15)
    z_true = np.linspace(2.7, 0.6, 40)
    temp = 293.15 + 300.0 / (1.0 + np.exp(-(z[:, None] - z_true[None, :]) / 0.08))
    est = layer_height_integral(z, temp, H)
    assert np.all(np.diff(est) <= 1e-12)
    # It follows the layer down (the method sits somewhat below the midpoint of a
    # smooth profile, so only the overall travel is checked here).
    assert est[0] - est[-1] > 1.5


def test_batch_shape_and_nan():
    z, temp = _two_zone(1.4, 293.15, 500.0)
    batch = np.stack([np.repeat(temp, 3, axis=1), np.repeat(temp, 3, axis=1)])  # (2, 4, 3)
    batch[1, 2, 1] = np.nan
    out = layer_height_integral(z, batch, H)
    assert out.shape == (2, 3)
    assert np.isnan(out[1, 1])
    np.testing.assert_allclose(out[0], 1.4, atol=1e-6)


def test_bad_heights_raise():
    with pytest.raises(ValueError, match="ascending"):
        layer_height_integral([1.0, 0.5], [[300.0], [400.0]], H)
    with pytest.raises(ValueError, match="within"):
        layer_height_integral([1.0, 3.5], [[300.0], [400.0]], H)
    with pytest.raises(ValueError, match="shape"):
        layer_height_integral([1.0, 2.0], [[300.0], [400.0], [500.0]], H)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(250.0, 1500.0), min_size=2, max_size=12))
def test_property_result_within_room(temps):
    z = np.linspace(0.1, 2.9, len(temps))
    out = layer_height_integral(z, np.array(temps)[:, None], H)[0]
    assert 0.0 <= out <= H
