"""Tests for egressmargin.tenability.visibility.

Sources named beside each check:
- Jin, T. (1978) "Visibility through fire smoke", J. Fire & Flammability 9; Jin,
  SFPE Handbook chapter "Visibility and Human Behavior in Fire Smoke": S = C/K with
  C = 8 for light-emitting and 3 for light-reflecting signs;
- Bouguer-Lambert law: 10^(-D L) = exp(-K L), hence K = ln(10) D;
- Mulholland & Croarkin (2000), Fire and Materials 24: K_m = 8.7 m^2/g for flaming
  combustion (from memory).
"""

import math
import warnings

import numpy as np
import pytest

from egressmargin.tenability.crossing import first_crossing
from egressmargin.tenability.visibility import (
    LN10,
    MASS_EXTINCTION_FLAMING_M2_KG,
    SIGN_CONSTANT_LIGHT_EMITTING,
    SIGN_CONSTANT_LIGHT_REFLECTING,
    extinction_from_optical_density,
    extinction_from_soot,
    extinction_from_visibility,
    extinction_limit,
    sign_constant,
    visibility_from_extinction,
)


def test_sign_constants_from_jin():
    # Jin (1978): C = 8 light-emitting, C = 3 light-reflecting.
    assert SIGN_CONSTANT_LIGHT_EMITTING == 8.0
    assert SIGN_CONSTANT_LIGHT_REFLECTING == 3.0
    assert sign_constant("light-emitting") == 8.0
    with pytest.raises(ValueError) as err:
        sign_constant("glowing")
    assert "'light-emitting'" in str(err.value) and "'light-reflecting'" in str(err.value)


def test_linear_extinction_ramp_reaches_10_m_where_c_over_k_is_10():
    # Jin: S = C/K. K(t) = 0.002 t (1/m): with C = 8, S = 10 m when K = 0.8, t = 400 s.
    t = np.arange(0.0, 1000.0, 15.0)
    k = 0.002 * t
    k_lim = extinction_limit(10.0, 8.0)
    assert k_lim == pytest.approx(0.8)
    t_cross = first_crossing(t, k, k_lim)
    assert t_cross == pytest.approx(400.0, rel=1e-12)
    assert visibility_from_extinction(0.002 * t_cross, 8.0) == pytest.approx(10.0)
    # Light-reflecting signs (C = 3): K = 0.3 at 150 s.
    assert first_crossing(t, k, extinction_limit(10.0, 3.0)) == pytest.approx(150.0)


def test_visibility_series_crossing_below_agrees_at_samples():
    # Same ramp seen as visibility; the limit falls on a sample, so no interpolation
    # error: first time S <= 10 m is 400 s.
    t = np.arange(0.0, 1000.0, 20.0)
    s = visibility_from_extinction(0.002 * t, 8.0)
    assert np.isinf(s[0])
    assert first_crossing(t, s, 10.0, direction="below") == pytest.approx(400.0)


def test_optical_density_conversion():
    # Bouguer-Lambert: 10^(-D) = exp(-K) over 1 m, so K = ln(10) D = 2.302585 D.
    assert LN10 == pytest.approx(2.302585093, rel=1e-9)
    d = np.array([0.0, 0.1, 0.5])
    k = extinction_from_optical_density(d)
    np.testing.assert_allclose(np.exp(-k), 10.0 ** (-d), rtol=1e-12)
    assert extinction_from_optical_density(0.1) == pytest.approx(0.2302585, rel=1e-6)


def test_soot_conversion():
    # Mulholland & Croarkin (2000), from memory: 8.7 m^2/g = 8700 m^2/kg.
    assert MASS_EXTINCTION_FLAMING_M2_KG == 8700.0
    # 100 mg/m^3 of soot: K = 8700 * 1e-4 = 0.87 1/m, S = 8/0.87 = 9.2 m.
    k = extinction_from_soot(100e-6)
    assert k == pytest.approx(0.87, rel=1e-12)
    assert visibility_from_extinction(k, 8.0) == pytest.approx(9.195, abs=1e-3)
    # Configurable K_m (e.g. 4400 m^2/kg, an illustrative smouldering value).
    assert extinction_from_soot(100e-6, mass_extinction_m2_kg=4400.0) == pytest.approx(0.44)


def test_visibility_clear_air_is_infinite_without_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        s = visibility_from_extinction(np.array([0.0, -0.1, 0.4, np.nan]), 8.0)
        k = extinction_from_visibility(np.array([np.inf, 0.0, 20.0]), 8.0)
    assert np.isinf(s[0]) and np.isinf(s[1])
    assert s[2] == pytest.approx(20.0)
    assert np.isnan(s[3])
    np.testing.assert_allclose(k, [0.0, np.inf, 0.4])


def test_round_trip_visibility_extinction():
    s = np.array([[1.0, 5.0], [10.0, 30.0]])
    for c in (3.0, 8.0):
        back = visibility_from_extinction(extinction_from_visibility(s, c), c)
        np.testing.assert_allclose(back, s, rtol=1e-12)


def test_extinction_limit_rejects_nonpositive():
    with pytest.raises(ValueError):
        extinction_limit(0.0, 8.0)
    assert extinction_limit(5.0, 8.0) == pytest.approx(1.6)
    assert math.isclose(extinction_limit(13.0, 3.0), 3.0 / 13.0)
