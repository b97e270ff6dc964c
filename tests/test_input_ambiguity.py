"""No silent ambiguity: every input that could mean two things, or that ``run`` cannot
compute with, is an input error (exit 2) naming the culprit (issue 13 items 4, 5, 7, 8;
issue 12 item 12; issue 17 item 5).

Outside sources named beside the checks: YAML 1.2 (keys of a mapping are unique, section
3.2.1.1); pint's definitions (``percent = 0.01``, ``ppm = 1e-6``); NFPA 72 Annex and the
SFPE Handbook's detection chapter for percent obscuration per unit length;
``scipy.stats.truncnorm`` for the truncated normal. The fixture study and CSV are
invented (tests/conftest.py).
"""

from __future__ import annotations

import pytest

from egressmargin.errors import InputError
from egressmargin import units
from egressmargin.units import check_unit, to_internal


# --------------------------------------------------------------------------- YAML: duplicate keys, non-finite numbers


def test_duplicate_top_level_key_names_both_lines(kit, make_study, expect_input_error):
    """YAML 1.2 section 3.2.1.1: mapping keys are unique; PyYAML would keep the last silently."""
    text = kit.study.replace("samples: 200\n", "samples: 2000\nsamples: 5\n")
    err = expect_input_error(make_study(text))
    first, second = kit.line_of(text, "samples: 2000"), kit.line_of(text, "samples: 5")
    assert f"study.yaml:{second} samples: error: found the key 'samples' twice (lines {first} and {second})" in err


def test_duplicate_series_key_in_a_location(kit, make_study, expect_input_error):
    """A second ``co:`` would silently map CO to the CO2 column (issue 13 item 4)."""
    text = kit.study.replace("        co2: CO2_hall\n", "        co2: CO2_hall\n        co: CO2_hall\n")
    err = expect_input_error(make_study(text))
    second = kit.line_of(text, "co: CO2_hall")
    assert f"study.yaml:{second} scenarios[0].locations[0].co: error: found the key 'co' twice" in err


def test_duplicate_key_in_a_criteria_file(kit, make_study, expect_input_error):
    crit = ("name: twice\ndescription: illustrative\nsources: [common practice]\ncriteria:\n"
            "  temperature: {limit: 60 degC}\n  temperature: {limit: 90 degC}\n")
    text = kit.study.replace("criteria: general-2m", "criteria: crit.yaml")
    err = expect_input_error(make_study(text, extra={"crit.yaml": crit}))
    assert "crit.yaml:6 criteria.temperature: error: found the key 'temperature' twice (lines 5 and 6)" in err


@pytest.mark.parametrize("value", [".nan", ".inf", "-.inf", ".NaN"])
def test_non_finite_yaml_number(kit, make_study, expect_input_error, value):
    text = kit.study.replace("seed: 3", f"seed: {value}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'seed:')} seed: error: found '{value}', which is not a finite number" in err


def test_non_finite_number_in_an_uncertainty_file(kit, make_study, expect_input_error):
    table = ("source: illustrative\ndistribution: lognormal\nquantities:\n"
             "  temperature: {bias: 1.03, sigma_model: .nan, sigma_exp: 0.07}\n")
    text = kit.study.replace("samples: 200", "samples: 200\nuncertainty: unc.yaml")
    err = expect_input_error(make_study(text, extra={"unc.yaml": table}))
    assert "unc.yaml:4 quantities.temperature.sigma_model: error: found '.nan'" in err


@pytest.mark.parametrize("quantity", ["1e999 s", "-1e400 s"])
def test_non_finite_quantity(kit, make_study, expect_input_error, quantity):
    text = kit.study.replace("alarm: 30 s", f"alarm: {quantity}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'alarm:')} egress[0].alarm: error: found '{quantity}', which is " \
           "not a finite number" in err


# --------------------------------------------------------------------------- units: aliases, volume fractions


@pytest.mark.parametrize("alias, pint_unit, quantity", [
    ("kW/m2", "kW/m^2", "heat_flux"), ("W/m2", "W/m^2", "heat_flux"), ("kW m-2", "kW/m^2", "heat_flux"),
    ("C", "degC", "temperature"), ("°C", "degC", "temperature"), ("degC", "degC", "temperature"),
    ("%", "percent", "co2"), ("ppmv", "ppm", "co"), ("ppm(v)", "ppm", "co"), ("vol%", "percent", "o2"),
    ("m-1", "1/m", "extinction"), ("1/m", "1/m", "extinction"), ("mg/m3", "mg/m^3", "soot"),
])
def test_export_spellings_convert_as_pint_does(alias, pint_unit, quantity):
    """Each alias converts 50 of it exactly as pint converts 50 of the unit it stands for."""
    import pint

    ureg = pint.UnitRegistry()
    target = {"heat_flux": "kW/m^2", "temperature": "degC", "extinction": "1/m", "soot": "kg/m^3"}.get(
        quantity, "dimensionless")
    expected = ureg.Quantity(50.0, pint_unit).to(target).magnitude
    assert check_unit(alias, quantity) is None
    assert float(to_internal(50.0, alias, quantity)) == pytest.approx(expected, rel=1e-12)


def test_ppb_is_one_thousandth_of_a_ppm():
    assert float(to_internal(1000.0, "ppb", "hcn")) == pytest.approx(1e-6, rel=1e-12)


@pytest.mark.parametrize("unit", ["kg/kg", "mg/kg", "turn", "radian", "count", "ppm*ppm", "g/g"])
@pytest.mark.parametrize("quantity", ["co", "co2", "o2", "hcn"])
def test_gas_units_that_are_not_volume_fractions_are_refused(unit, quantity):
    """pint calls all of these dimensionless; none is a volume (mole) fraction (contract, "Units")."""
    message = check_unit(unit, quantity)
    assert message is not None and f"found '{unit}', which is not a volume fraction" in message


def test_mass_fraction_gas_header_is_an_input_error(kit, make_study, expect_input_error):
    header = [h.replace("CO_hall [ppm]", "CO_hall [mg/kg]") for h in kit.header]
    err = expect_input_error(make_study(csv=kit.csv_text(header=header)))
    assert "fire-a.csv column 'CO_hall [mg/kg]'" in err and "not a volume fraction" in err


def test_same_unit_after_aliases():
    assert units.same_unit("ppmv", "ppm", "co") and units.same_unit("%", "percent", "o2")
    assert not units.same_unit("percent", "ppm", "co") and not units.same_unit("K", "degC", "temperature")
