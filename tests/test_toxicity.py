"""Tests for egressmargin.tenability.toxicity (asphyxiant FED rates).

Sources of the reference values are named beside each check:
- ISO 13571:2012, asphyxiant toxic-gas model (CO dose 35 000 uL/L*min);
- Purser, SFPE Handbook of Fire Protection Engineering, 5th ed. 2016 (CO, HCN, CO2
  hyperventilation, O2 hypoxia equations);
- the missing-gas convention of the project's outside contract.
Values marked "from memory" are constants recalled, not checked against the text.
"""

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from egressmargin.tenability.crossing import cumulative_trapezoid, first_crossing
from egressmargin.tenability.toxicity import (
    METHOD_GASES,
    TOXIC_DOSES,
    TOXIC_GASES,
    TOXIC_METHODS,
    iso13571_co2_multiplier,
    iso13571_co_rate,
    iso13571_fed_rate,
    iso13571_hcn_rate,
    purser_co2_multiplier,
    purser_co2_rate,
    purser_co_rate,
    purser_fed_rate,
    purser_hcn_rate,
    purser_o2_rate,
    toxic_method,
)

PPM = 1e-6
PERCENT = 1e-2


# ---------------------------------------------------------------- ISO 13571


def test_iso13571_co_alone_reaches_fed_03_at_630_s():
    # ISO 13571:2012: FED = sum(phi_CO/35000 * dt); at a constant 1000 uL/L the dose
    # 0.3 is reached after 0.3*35000/1000 = 10.5 min = 630 s.
    t = np.arange(0.0, 1201.0, 10.0)
    rate = iso13571_fed_rate(co=np.full(t.shape, 1000 * PPM))
    dose = cumulative_trapezoid(t, rate)
    assert first_crossing(t, dose, 0.3) == pytest.approx(630.0, rel=1e-9)


def test_iso13571_co_rate_value():
    # ISO 13571:2012: 35 000 ppm*min to FED 1, so 3500 ppm gives 0.1 per minute.
    assert float(iso13571_co_rate(3500 * PPM)) == pytest.approx(0.1, rel=1e-12)


def test_iso13571_hcn_rate_value():
    # ISO 13571:2012 HCN term exp(phi/43)/220 - 0.0045 (constants from memory), by
    # hand at 100 ppm: exp(2.325581)/220 - 0.0045 = 10.232628/220 - 0.0045 = 0.042012.
    assert float(iso13571_hcn_rate(100 * PPM)) == pytest.approx(0.042012, abs=1e-6)


def test_iso13571_co2_multiplier_value():
    # ISO 13571 CO2 hyperventilation factor exp(phi_CO2[%]/5) (from memory): e at 5 %.
    assert float(iso13571_co2_multiplier(5 * PERCENT)) == pytest.approx(math.e, rel=1e-12)
    assert float(iso13571_co2_multiplier(0.0)) == 1.0


def test_iso13571_combination_multiplies_co_and_hcn():
    # ISO 13571: (CO term + HCN term) * v_CO2.
    co, hcn, co2 = 500 * PPM, 50 * PPM, 3 * PERCENT
    expected = (500 / 35000 + math.exp(50 / 43) / 220 - 0.0045) * math.exp(3 / 5)
    assert float(iso13571_fed_rate(co=co, hcn=hcn, co2=co2)) == pytest.approx(expected, rel=1e-12)


def test_iso13571_ignores_o2():
    # ISO 13571 asphyxiant sum has no O2 term (from memory; documented in the module).
    co = np.full(5, 800 * PPM)
    np.testing.assert_array_equal(
        iso13571_fed_rate(co=co, o2=np.full(5, 10 * PERCENT)), iso13571_fed_rate(co=co)
    )
    assert "o2" not in METHOD_GASES["iso13571"]


# ---------------------------------------------------------------- Purser


def test_purser_co_rate_at_1000_ppm():
    # Purser, SFPE Handbook: 2.764e-5 * 1000^1.036 = 0.03544 per minute.
    assert float(purser_co_rate(1000 * PPM)) == pytest.approx(0.03544, abs=5e-6)


def test_purser_hcn_rate_value():
    # Purser, SFPE Handbook: exp(C/43)/220 - 0.0045; by hand at 200 ppm:
    # exp(4.651163)/220 - 0.0045 = 104.70667/220 - 0.0045 = 0.47144.
    assert float(purser_hcn_rate(200 * PPM)) == pytest.approx(0.47144, abs=1e-5)


def test_purser_co2_factor_at_5_percent():
    # Purser, SFPE Handbook: V_CO2 = exp(0.1903*5 + 2.0004)/7.1 = 2.70 (approx).
    assert float(purser_co2_multiplier(5 * PERCENT)) == pytest.approx(2.70, abs=0.005)


def test_purser_o2_12_percent_gives_27_8_min():
    # Purser, SFPE Handbook: t = exp(8.13 - 0.54*(20.9 - 12)) = 27.8 min.
    assert 1.0 / float(purser_o2_rate(12 * PERCENT)) == pytest.approx(27.8, abs=0.05)


def test_purser_o2_fed_reaches_1_at_27_8_min():
    # Same source, through the dose integration: FED 1 at 27.77 min at constant 12 % O2.
    t = np.arange(0.0, 2400.0, 5.0)
    dose = cumulative_trapezoid(t, purser_fed_rate(o2=np.full(t.shape, 12 * PERCENT)))
    t_incap_min = math.exp(8.13 - 0.54 * 8.9)
    assert first_crossing(t, dose, 1.0) / 60.0 == pytest.approx(t_incap_min, rel=1e-9)


def test_purser_co2_narcosis_value():
    # Purser, SFPE Handbook CO2 narcosis (constants from memory): exp(6.1623 - 0.5189*7).
    assert 1.0 / float(purser_co2_rate(7 * PERCENT)) == pytest.approx(
        math.exp(6.1623 - 0.5189 * 7), rel=1e-12
    )


def test_purser_combination():
    # Purser, SFPE Handbook: (F_CO + F_CN) * V_CO2 + F_O, or F_CO2 when larger.
    co, co2, o2 = 1000 * PPM, 5 * PERCENT, 15 * PERCENT
    asph = 2.764e-5 * 1000**1.036 * math.exp(0.1903 * 5 + 2.0004) / 7.1
    hypoxia = 1.0 / math.exp(8.13 - 0.54 * (20.9 - 15))
    rate = float(purser_fed_rate(co=co, co2=co2, o2=o2))
    assert rate == pytest.approx(asph + hypoxia, rel=1e-12)
    # CO2 narcosis is the alternative endpoint, a dose of its own (not part of this rate).
    assert float(purser_fed_rate(co2=9 * PERCENT)) == 0.0
    assert TOXIC_DOSES["purser"][1](co2=9 * PERCENT) == pytest.approx(
        1.0 / math.exp(6.1623 - 0.5189 * 9), rel=1e-12)


def test_hcn_terms_never_negative():
    # The published HCN expression is 1/220 - 0.0045 = 4.5e-5 at zero and negative
    # only below zero; negative inputs are treated as zero.
    for f in (iso13571_hcn_rate, purser_hcn_rate):
        assert float(f(0.0)) == pytest.approx(1 / 220 - 0.0045, rel=1e-12)
        assert float(f(-5 * PPM)) == pytest.approx(1 / 220 - 0.0045, rel=1e-12)


# ---------------------------------------------------------------- missing gases


@pytest.mark.parametrize("method", ["iso13571", "purser"])
def test_missing_gas_none_and_nan_rows(method):
    # Outside contract: a gas not supplied contributes nothing (term 0, multiplier 1).
    fed = toxic_method(method)
    n = 4
    co = np.vstack([np.full(n, 1000 * PPM), np.full(n, 1000 * PPM)])
    co2 = np.vstack([np.full(n, 4 * PERCENT), np.full(n, np.nan)])  # row 1: no CO2
    hcn = np.vstack([np.full(n, np.nan), np.full(n, np.nan)])  # no HCN anywhere
    rate = fed(co=co, hcn=hcn, co2=co2)
    assert rate.shape == (2, n)
    assert np.all(np.isfinite(rate))
    np.testing.assert_allclose(rate[1], fed(co=co[1]))  # NaN CO2 row == CO2 None
    np.testing.assert_allclose(rate[0], fed(co=co[0], co2=co2[0]))  # NaN HCN == None
    # Multiplier 1 for the missing CO2 row: rate is the bare CO term.
    co_term = iso13571_co_rate if method == "iso13571" else purser_co_rate
    np.testing.assert_allclose(rate[1], co_term(co[1]))


def test_all_missing_gives_zero():
    for fed in TOXIC_METHODS.values():
        assert float(fed()) == 0.0
        nan_rows = np.full((3, 5), np.nan)
        rate = fed(co=nan_rows, hcn=nan_rows, co2=nan_rows, o2=nan_rows)
        np.testing.assert_array_equal(rate, 0.0)


def test_broadcast_shapes():
    co = np.full((3, 6), 500 * PPM)
    co2 = np.full(6, 2 * PERCENT)
    assert iso13571_fed_rate(co=co, co2=co2).shape == (3, 6)
    assert purser_fed_rate(co2=co2, o2=np.full((3, 1), 0.2)).shape == (3, 6)


def test_no_warnings_on_extreme_input():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        x = np.array([np.nan, -1.0, 0.0, 1e-3, 0.5, 1.0])
        for fed in TOXIC_METHODS.values():
            out = fed(co=x, hcn=x, co2=x, o2=x)
            assert not np.any(np.isnan(out))


# ---------------------------------------------------------------- registry


def test_registry_and_lookup():
    assert set(TOXIC_METHODS) == {"iso13571", "purser"}
    assert TOXIC_GASES == ("co", "hcn", "co2", "o2")
    assert toxic_method("iso13571") is iso13571_fed_rate
    with pytest.raises(ValueError) as err:
        toxic_method("iso-13571")
    assert "'iso13571'" in str(err.value) and "'purser'" in str(err.value)


# ---------------------------------------------------------------- monotonicity

conc = st.floats(0.0, 0.2, allow_nan=False)


@settings(max_examples=300, deadline=None)
@given(
    st.sampled_from(sorted(TOXIC_METHODS)),
    conc, conc, conc, st.floats(0.0, 0.21),
    st.sampled_from(TOXIC_GASES),
    st.floats(0.0, 0.05),
)
def test_property_more_gas_never_lowers_rate(method, co, hcn, co2, o2, gas, step):
    # Physics: more CO, HCN or CO2, or less O2, is never less hazardous.
    fed = TOXIC_METHODS[method]
    base = {"co": co, "hcn": hcn, "co2": co2, "o2": o2}
    worse = dict(base)
    worse[gas] = base[gas] - step if gas == "o2" else base[gas] + step
    r0 = float(fed(**base))
    r1 = float(fed(**worse))
    assert r1 >= r0 or math.isclose(r1, r0, rel_tol=1e-12)
