"""Tests for egressmargin.tenability.heat (FED for heat after ISO 13571).

Sources named beside each check:
- ISO 13571:2012, convected heat t_Iconv = 5e7 T^-3.4 min (fully clothed): 7.92 min
  at 100 degC and 4.27 min at 120 degC;
- ISO 13571 radiant heat t_Irad = r/q^(4/3) with the 2.5 kW/m^2 threshold; r = 1.33
  (kW/m^2)^(4/3) min is from memory (Purser's dose to severe pain, SFPE Handbook);
- PD 7974-6:2004 radiant heat tolerance (pain after about 30 s at 2.5 kW/m^2 and
  4 s at 10 kW/m^2) as an order-of-magnitude cross-check.
"""

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from egressmargin.tenability.crossing import cumulative_trapezoid, first_crossing
from egressmargin.tenability.heat import (
    RADIANT_THRESHOLD_KW_M2,
    fed_heat_rate,
    t_iconv_min,
    t_irad_min,
)


def test_t_iconv_published_values():
    # ISO 13571:2012 (fully clothed): 5e7 * 100^-3.4 = 7.92 min; at 120 degC the
    # equation gives 4.263 min, quoted as 4.27 min (agreement to 0.01 min).
    assert t_iconv_min(100.0) == pytest.approx(7.92, abs=0.005)
    assert t_iconv_min(120.0) == pytest.approx(4.27, abs=0.01)
    assert t_iconv_min(120.0) == pytest.approx(4.263, abs=0.0005)


def test_t_iconv_vectorised_and_guarded():
    out = t_iconv_min(np.array([[100.0, 0.0, -20.0, np.nan]]))
    assert out.shape == (1, 4)
    assert out[0, 0] == pytest.approx(7.92, abs=0.005)
    assert np.isinf(out[0, 1]) and np.isinf(out[0, 2])
    assert np.isnan(out[0, 3])


def test_radiant_threshold_is_iso13571_value():
    # ISO 13571: radiant heat below 2.5 kW/m^2 is tolerated; the term is zero.
    assert RADIANT_THRESHOLD_KW_M2 == 2.5


def test_t_irad_infinite_at_and_below_threshold():
    out = t_irad_min(np.array([0.0, 1.0, 2.5]))
    assert np.all(np.isinf(out))
    assert np.isfinite(t_irad_min(2.5001))
    # A caller-supplied threshold moves the cut-off.
    assert np.isinf(t_irad_min(3.0, radiant_threshold_kw_m2=4.0))


def test_t_irad_closed_form():
    # ISO 13571 radiant equation t = r / q^(4/3), r = 1.33 (from memory):
    # at 10 kW/m^2, 1.33 / 10^(4/3) = 1.33 / 21.544 = 0.06173 min = 3.70 s.
    assert t_irad_min(10.0) == pytest.approx(1.33 / 10 ** (4 / 3), rel=1e-12)
    assert t_irad_min(10.0) * 60.0 == pytest.approx(3.70, abs=0.01)


def test_t_irad_consistent_with_published_tolerance_table():
    # PD 7974-6:2004 / Purser: pain after about 4 s at 10 kW/m^2 and about 30 s at
    # 2.5 kW/m^2. The r = 1.33 dose gives 3.7 s and 23.5 s: same order, conservative.
    assert 3.0 < t_irad_min(10.0) * 60.0 < 5.0
    assert 15.0 < t_irad_min(2.5 + 1e-9) * 60.0 < 35.0


def test_fed_heat_constant_100_degc_reaches_1_at_7_92_min():
    # ISO 13571:2012 convected heat: FED 1 at t_Iconv(100 degC) = 7.92 min.
    t = np.arange(0.0, 900.0, 3.0)
    dose = cumulative_trapezoid(t, fed_heat_rate(temperature_degc=np.full(t.shape, 100.0)))
    assert first_crossing(t, dose, 1.0) / 60.0 == pytest.approx(5e7 * 100.0**-3.4, rel=1e-9)


def test_fed_heat_sums_both_routes():
    # ISO 13571: FED rate = 1/t_Iconv + 1/t_Irad.
    rate = fed_heat_rate(temperature_degc=120.0, flux_kw_m2=5.0)
    expected = 1.0 / (5e7 * 120.0**-3.4) + 5.0 ** (4 / 3) / 1.33
    assert float(rate) == pytest.approx(expected, rel=1e-12)
    # Below the threshold only the convective term remains.
    assert float(fed_heat_rate(temperature_degc=120.0, flux_kw_m2=2.0)) == pytest.approx(
        1.0 / (5e7 * 120.0**-3.4), rel=1e-12
    )


def test_fed_heat_missing_series_none_and_nan():
    # Missing-series convention (outside contract): no series, no term.
    temp = np.array([[80.0, 100.0], [np.nan, np.nan]])
    flux = np.array([[np.nan, np.nan], [5.0, 10.0]])
    rate = fed_heat_rate(temperature_degc=temp, flux_kw_m2=flux)
    np.testing.assert_allclose(rate[0], fed_heat_rate(temperature_degc=temp[0]))
    np.testing.assert_allclose(rate[1], fed_heat_rate(flux_kw_m2=flux[1]))
    assert float(fed_heat_rate()) == 0.0


def test_fed_heat_no_warnings_no_nan_on_odd_input():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        temp = np.array([-50.0, 0.0, 1e-300, 20.0, 1e300, np.nan])
        flux = np.array([-1.0, 0.0, 2.5, 1e-300, 1e300, np.nan])
        rate = fed_heat_rate(temperature_degc=temp, flux_kw_m2=flux)
    assert not np.any(np.isnan(rate))
    assert rate[0] == 0.0 and rate[1] == 0.0


@settings(max_examples=200, deadline=None)
@given(
    st.floats(-50.0, 1200.0), st.floats(0.0, 300.0),
    st.floats(0.0, 200.0), st.floats(0.0, 50.0),
)
def test_property_hotter_never_lowers_rate(temp, flux, d_temp, d_flux):
    base = float(fed_heat_rate(temperature_degc=temp, flux_kw_m2=flux))
    assert float(fed_heat_rate(temperature_degc=temp + d_temp, flux_kw_m2=flux)) >= base
    assert float(fed_heat_rate(temperature_degc=temp, flux_kw_m2=flux + d_flux)) >= base
