"""Unit conversion at the edge, checked against pint itself.

Outside source: pint (https://pint.readthedocs.io), a fresh ``pint.UnitRegistry()`` made
here, separate from the project's registry in ``egressmargin.units``. pint's default
definitions give ``percent = 0.01``, ``ppm = 1e-6``, ``degF`` and ``kelvin`` with their
offsets, ``minute = 60 s`` and ``milligram = 1e-6 kg``; every expected number below is
computed by that registry, not typed in, except where the closed form is stated beside it.

The contract (/work/shared/contract.md, "Units") fixes the rest: for gases ``percent``
and ``mol/mol`` are volume (mole) fractions; a series' unit comes from its ``unit:`` key,
a ``name [unit]`` header, or a units row under the header.
"""

from __future__ import annotations

import numpy as np
import pint
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from egressmargin.errors import InputError
from egressmargin.histories import read_scenario
from egressmargin.study import load_study
from egressmargin.units import (INTERNAL_UNITS, UnitProblem, check_unit, from_internal, parse_quantity,
                                to_internal)

UREG = pint.UnitRegistry()  # the outside check


def pint_to(value, unit, target):
    """``value`` in ``unit`` converted by a fresh pint registry to ``target``."""
    return UREG.Quantity(value, unit).to(target).magnitude


# --------------------------------------------------------------------------- named conversions


def test_gas_fraction_percent_ppm_mol_per_mol_agree_with_pint():
    """0.1 percent = 1000 ppm = 0.001 mol/mol (pint: percent = 0.01, ppm = 1e-6)."""
    expected = pint_to(0.1, "percent", "dimensionless")
    assert expected == pytest.approx(0.001, rel=1e-12)
    assert pint_to(1000.0, "ppm", "dimensionless") == pytest.approx(expected, rel=1e-12)
    assert pint_to(0.001, "mol/mol", "dimensionless") == pytest.approx(expected, rel=1e-12)
    for value, unit in ((0.1, "percent"), (1000.0, "ppm"), (0.001, "mol/mol"), (0.1, "%"), (1000.0, "ppmv")):
        for q in ("co", "co2", "o2", "hcn"):
            assert float(to_internal(value, unit, q)) == pytest.approx(expected, rel=1e-12), (value, unit, q)


def test_fahrenheit_to_celsius_agrees_with_pint():
    """68 degF = 20 degC (pint offset units; closed form (68 - 32) * 5/9 = 20)."""
    expected = pint_to(68.0, UREG.degF, UREG.degC)
    assert expected == pytest.approx(20.0, abs=1e-9)
    assert float(to_internal(68.0, "degF", "temperature")) == pytest.approx(expected, abs=1e-9)


def test_kelvin_to_celsius_agrees_with_pint():
    """300 K = 26.85 degC (pint; closed form 300 - 273.15)."""
    expected = pint_to(300.0, "K", UREG.degC)
    assert expected == pytest.approx(26.85, abs=1e-9)
    assert float(to_internal(300.0, "K", "temperature")) == pytest.approx(expected, abs=1e-9)
    assert float(to_internal(300.0, "kelvin", "temperature")) == pytest.approx(expected, abs=1e-9)


def test_soot_mg_per_m3_to_kg_per_m3_agrees_with_pint():
    """1 mg/m^3 = 1e-6 kg/m^3 (pint: milligram = 1e-6 kg)."""
    values = np.array([0.0, 1.0, 250.0])
    expected = pint_to(values, "mg/m^3", "kg/m^3")
    assert expected[1] == pytest.approx(1e-6, rel=1e-12)
    np.testing.assert_allclose(to_internal(values, "mg/m^3", "soot"), expected, rtol=1e-12)


def test_minutes_to_seconds_agrees_with_pint():
    """1.5 min = 90 s (pint: minute = 60 s)."""
    expected = pint_to(1.5, "min", "s")
    assert expected == pytest.approx(90.0)
    assert float(to_internal(1.5, "min", "time")) == pytest.approx(expected)
    assert parse_quantity("1.5 min", "duration") == pytest.approx(expected)


@pytest.mark.parametrize("text, quantity, pint_unit, target", [
    ("178 mm", "length", "mm", "m"),
    ("2.5 kW/m^2", "heat_flux", "kW/m^2", "kW/m^2"),
    ("68 degF", "temperature", UREG.degF, UREG.degC),
    ("20 percent", "fraction", "percent", "dimensionless"),
    ("8700 m^2/kg", "mass_extinction", "m^2/kg", "m^2/kg"),
    ("0.1 1/m", "extinction", "1/m", "1/m"),
    ("1 m/s", "velocity", "m/s", "m/s"),
    ("2 h", "duration", "hour", "s"),
])
def test_parse_quantity_agrees_with_pint(text, quantity, pint_unit, target):
    number = float(text.split()[0])
    assert parse_quantity(text, quantity) == pytest.approx(pint_to(number, pint_unit, target), rel=1e-12)


def test_internal_units_are_units_pint_knows():
    for q, unit in INTERNAL_UNITS.items():
        UREG.Unit(unit if unit != "dimensionless" else "")  # raises if pint does not know it


@pytest.mark.parametrize("alias, canonical", [("%", "percent"), ("ppmv", "ppm"), ("°C", "degC"), ("degc", "degC"),
                                              ("°F", "degF")])
def test_aliases_mean_what_pint_means_by_the_canonical_name(alias, canonical):
    quantity = "temperature" if "deg" in canonical else "co"
    target = UREG.degC if quantity == "temperature" else "dimensionless"
    expected = pint_to(50.0, getattr(UREG, canonical) if "deg" in canonical else canonical, target)
    assert float(to_internal(50.0, alias, quantity)) == pytest.approx(expected, rel=1e-12)


# --------------------------------------------------------------------------- refusals


@pytest.mark.parametrize("unit, quantity, words", [
    ("degZ", "temperature", "unknown unit 'degZ'"),
    ("m", "temperature", "not a unit of this quantity"),
    ("kg", "co", "not a unit of this quantity"),
    ("s", "length", "not a unit of this quantity"),
    ("ppm", "time", "not a unit of this quantity"),
])
def test_check_unit_names_the_unit_and_what_was_expected(unit, quantity, words):
    message = check_unit(unit, quantity)
    assert message is not None and words in message and "expected a unit of" in message
    with pytest.raises(UnitProblem):
        to_internal(1.0, unit, quantity)


@pytest.mark.parametrize("value", [60, "60", "abc", True, None, [60], "60 m"])
def test_parse_quantity_refuses_times_without_a_time_unit(value):
    with pytest.raises(UnitProblem):
        parse_quantity(value, "duration")


def test_bare_number_takes_the_default_unit_only_when_one_is_given():
    assert parse_quantity(50, "rti", default_unit="m^0.5*s^0.5") == pytest.approx(50.0)
    assert parse_quantity("0.3", "fraction", default_unit="dimensionless") == pytest.approx(0.3)
    with pytest.raises(UnitProblem, match="bare number"):
        parse_quantity(50, "rti")


@settings(max_examples=60, deadline=None)
@given(values=st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=8),
       case=st.sampled_from([("degF", "temperature"), ("K", "temperature"), ("ppm", "co"), ("percent", "o2"),
                             ("min", "time"), ("mg/m^3", "soot"), ("mm", "length")]))
def test_to_internal_matches_pint_and_round_trips(values, case):
    """Any value: the same number as pint gives, and from_internal undoes to_internal."""
    unit, quantity = case
    target = INTERNAL_UNITS[quantity]
    pu = getattr(UREG, unit) if unit in ("degF", "K") else unit
    expected = pint_to(np.array(values), pu, UREG.degC if target == "degC" else
                       (target if target != "dimensionless" else ""))
    got = to_internal(values, unit, quantity)
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(from_internal(got, quantity, unit), values, rtol=1e-12, atol=1e-6)


# --------------------------------------------------------------------------- three ways to give a unit

# Raw values as written in the CSV (illustrative): time in minutes, temperature in degF,
# CO in percent. Expected internal values are pint's conversions of them.
_T_MIN = [0.0, 0.5, 1.0, 1.5, 2.0, 3.0]
_T_DEGF = [68.0, 86.0, 104.0, 140.0, 212.0, 302.0]
_CO_PCT = [0.0, 0.01, 0.05, 0.1, 0.2, 0.4]

_STUDY = """\
title: Three ways to give a unit (illustrative)
criteria: general-2m
scenarios:
  - id: fire-a
    histories: fire-a.csv
    time: {time}
{units_row}    locations:
      - id: hall-l1
        temperature: {temp}
        co: {co}
"""


def _variant(kind: str) -> tuple[str, str]:
    rows = [[f"{a:g}", f"{b:g}", f"{c:g}"] for a, b, c in zip(_T_MIN, _T_DEGF, _CO_PCT)]
    if kind == "header":
        header, extra, m = ["Time [min]", "T_hall [degF]", "CO_hall [percent]"], [], \
            dict(time="Time", temp="T_hall", co="CO_hall", units_row="")
    elif kind == "mapping":
        header, extra, m = ["Time", "T_hall", "CO_hall"], [], \
            dict(time="{column: Time, unit: min}", temp="{column: T_hall, unit: degF}",
                 co="{column: CO_hall, unit: percent}", units_row="")
    else:
        header, extra, m = ["Time", "T_hall", "CO_hall"], [["min", "degF", "percent"]], \
            dict(time="Time", temp="T_hall", co="CO_hall", units_row="    units_row: true\n")
    csv = "\n".join(",".join(r) for r in [header] + extra + rows) + "\n"
    return _STUDY.format(**m), csv


@pytest.mark.parametrize("kind", ["header", "mapping", "units_row"])
def test_each_way_of_giving_a_unit_gives_pints_conversion(kind, make_study):
    text, csv = _variant(kind)
    spec = load_study(make_study(text, csv)).scenarios[0]
    data, warnings = read_scenario(spec)
    np.testing.assert_allclose(data.t_s, pint_to(np.array(_T_MIN), "min", "s"), rtol=1e-12)
    np.testing.assert_allclose(data.series["temperature"][0], pint_to(np.array(_T_DEGF), UREG.degF, UREG.degC),
                               rtol=1e-12)
    np.testing.assert_allclose(data.series["co"][0], pint_to(np.array(_CO_PCT), "percent", "dimensionless"),
                               rtol=1e-12, atol=1e-15)
    assert data.rows == len(_T_MIN)
    assert warnings == []
    as_read = {c.series: c.unit_as_read for c in data.columns}
    assert as_read == {"time": "min", "temperature": "degF", "co": "percent"}


def test_a_study_unit_that_disagrees_with_the_header_is_an_input_error(make_study):
    """Places that give a unit (contract, "Units": the ``unit:`` key, the header, a units row)
    must agree: ``K`` over a ``[degF]`` header names both places (issue 13 item 4), where a
    precedence rule would read 68..302 as kelvin silently."""
    text, csv = _variant("header")
    text = text.replace("temperature: T_hall", "temperature: {column: T_hall, unit: K}")
    with pytest.raises(InputError) as exc:
        read_scenario(load_study(make_study(text, csv)).scenarios[0])
    (problem,) = exc.value.problems
    assert "column 'T_hall [degF]'" in problem.where
    assert "found the unit 'K' in the study" in problem.message and "study.yaml:9" in problem.message
    assert "'degF' in the header 'T_hall [degF]'" in problem.message


def test_agreeing_units_in_two_places_are_read(make_study):
    """``degF`` in the study and ``[degF]`` in the header agree: pint's conversion, no problem."""
    text, csv = _variant("header")
    text = text.replace("temperature: T_hall", "temperature: {column: T_hall, unit: degF}")
    data, _ = read_scenario(load_study(make_study(text, csv)).scenarios[0])
    np.testing.assert_allclose(data.series["temperature"][0], pint_to(np.array(_T_DEGF), UREG.degF, UREG.degC),
                               rtol=1e-12)
