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


@pytest.mark.parametrize("value", [".nan", ".inf", "-.inf", ".NaN"])
def test_non_finite_yaml_number(kit, make_study, expect_input_error, value):
    text = kit.study.replace("seed: 3", f"seed: {value}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'seed:')} seed: error: found '{value}', which is not a finite number" in err


_CRIT_TWICE = ("name: twice\ndescription: illustrative\nsources: [common practice]\ncriteria:\n"
               "  temperature: {limit: 60 degC}\n  temperature: {limit: 90 degC}\n")
_UNC_NAN = ("source: illustrative\ndistribution: lognormal\nquantities:\n"
            "  temperature: {bias: 1.03, sigma_model: .nan, sigma_exp: 0.07}\n")


@pytest.mark.parametrize("old, new, name, body, words", [
    ("criteria: general-2m", "criteria: crit.yaml", "crit.yaml", _CRIT_TWICE,
     "crit.yaml:6 criteria.temperature: error: found the key 'temperature' twice (lines 5 and 6)"),
    ("samples: 200", "samples: 200\nuncertainty: unc.yaml", "unc.yaml", _UNC_NAN,
     "unc.yaml:4 quantities.temperature.sigma_model: error: found '.nan'"),
])
def test_every_yaml_file_read_is_checked_the_same_way(kit, make_study, expect_input_error, old, new, name, body,
                                                      words):
    """A criteria file and an uncertainty file go through the same reader as the study."""
    err = expect_input_error(make_study(kit.study.replace(old, new), extra={name: body}))
    assert words in err


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


# --------------------------------------------------------------------------- CSV headers and units in several places


def _csv_with_header(kit, old, new):
    return kit.csv_text(header=[new if h == old else h for h in kit.header])


def test_the_same_header_twice_names_both_columns(kit, make_study, expect_input_error):
    """``T_stair [degC]`` twice: pandas would read the first silently (issue 13 item 4)."""
    csv = _csv_with_header(kit, "T_stair [degC]", "T_hall [degC]")
    err = expect_input_error(make_study(csv=csv))
    assert "fire-a.csv:1 column 'T_hall': error: 2 columns match 'temperature' at location 'hall-l1'" in err
    assert "column 2 'T_hall [degC]', column 7 'T_hall [degC]'" in err


def test_same_name_with_two_units_names_both_columns(kit, make_study, expect_input_error):
    csv = _csv_with_header(kit, "T_stair [degC]", "T_hall [K]")
    err = expect_input_error(make_study(csv=csv))
    assert "column 2 'T_hall [degC]', column 7 'T_hall [K]'" in err
    assert "expected exactly one column of that name" in err


def test_duplicate_of_an_unmapped_column_is_harmless(kit, make_study, cli):
    header = kit.header + ["notes", "notes"]
    rows = [r + ["a", "b"] for r in kit.rows()]
    status, out, err = cli(["validate", make_study(csv=kit.csv_text(header=header, rows=rows))])
    assert status == 0, err


def test_study_unit_over_a_different_header_unit(kit, make_study, expect_input_error):
    """``unit: percent`` over a ``[ppm]`` header is a factor of 10^4 (pint: percent = 0.01, ppm = 1e-6)."""
    text = kit.study.replace("        co: CO_hall\n", "        co: {column: CO_hall, unit: percent}\n")
    err = expect_input_error(make_study(text))
    line = kit.line_of(text, "unit: percent")
    assert "fire-a.csv column 'CO_hall [ppm]'" in err
    assert "found the unit 'percent' in the study (" in err
    assert f"study.yaml:{line} scenarios[0].locations[0].co)" in err
    assert "and 'ppm' in the header 'CO_hall [ppm]'; expected one unit" in err


def test_header_unit_and_units_row_disagree(kit, make_study, expect_input_error):
    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time\n    units_row: true")
    units = ["s", "degC", "ppm", "percent", "percent", "1/m", "K"]
    err = expect_input_error(make_study(text, csv=kit.csv_text(rows=[units] + kit.rows())))
    assert "fire-a.csv column 'T_stair [degC]'" in err
    assert "found the unit 'degC' in the header 'T_stair [degC]' and 'K' in the units row (line 2)" in err


def test_agreeing_aliases_in_three_places_are_read(kit, make_study):
    """``ppmv`` in the study, ``[ppm]`` in the header and ``ppm(v)`` in the units row agree."""
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time\n    units_row: true")
    text = text.replace("        co: CO_hall\n", "        co: {column: CO_hall, unit: ppmv}\n")
    units = ["s", "C", "ppm(v)", "%", "vol%", "m-1", "°C"]
    data, _ = read_scenario(load_study(make_study(text, csv=kit.csv_text(rows=[units] + kit.rows()))).scenarios[0])
    assert data.series["co"][0][10] == pytest.approx(5 * 100.0 * 1e-6, rel=1e-12)  # 5 t ppm at t = 100 s


# --------------------------------------------------------------------------- real exports: units rows, delimiters


def _units_above(kit):
    units = ["s", "degC", "ppm", "percent", "percent", "1/m", "degC"]
    names = [h.split(" [")[0] for h in kit.header]
    return "\n".join(",".join(r) for r in [units, names] + kit.rows()) + "\n"


def test_units_row_above_the_names_gives_one_hint(kit, make_study, expect_input_error):
    err = expect_input_error(make_study(csv=_units_above(kit)))
    assert err.count("error:") == 1
    assert "fire-a.csv:1: error: the mapped columns (" in err
    assert "are named on line 2, and line 1 looks like a units row (s, degC, ppm" in err
    assert "declare units_row: above on the scenario" in err


def test_units_row_above_the_names_is_read_when_declared(kit, make_study):
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time\n    units_row: above")
    data, _ = read_scenario(load_study(make_study(text, csv=_units_above(kit))).scenarios[0])
    assert data.rows == 60 and data.t_s[-1] == 590.0
    assert data.series["temperature"][0][20] == pytest.approx(20 + 0.2 * 200.0)   # 60 degC at 200 s


def test_undeclared_units_row_below_gives_one_hint(kit, make_study, expect_input_error):
    names = [h.split(" [")[0] for h in kit.header]
    units = ["s", "degC", "ppm", "percent", "percent", "1/m", "degC"]
    csv = "\n".join(",".join(r) for r in [names, units] + kit.rows()) + "\n"
    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time")
    err = expect_input_error(make_study(text, csv=csv))
    assert err.count("error:") == 1
    assert "fire-a.csv:2: error: line 2 looks like a units row (s, degC, ppm" in err
    assert "declare units_row: below (or true)" in err


def _semicolons(kit, decimal=","):
    rows = [[c.replace(".", decimal) for c in r] for r in kit.rows()]
    return "\n".join(";".join(r) for r in [kit.header] + rows) + "\n"


def test_semicolon_delimited_file_gives_one_hint(kit, make_study, expect_input_error):
    """Not one error per mapped column with the whole header in each (issue 13 item 7)."""
    err = expect_input_error(make_study(csv=_semicolons(kit)))
    assert err.count("error:") == 1
    assert "fire-a.csv:1: error: the header has 6 semicolons and 0 commas" in err
    assert "declare delimiter: ';' on the scenario" in err and "decimal: ','" in err


def test_decimal_comma_gives_one_hint(kit, make_study, expect_input_error):
    text = kit.study.replace("    time: {column", "    delimiter: ';'\n    time: {column")
    err = expect_input_error(make_study(text, csv=_semicolons(kit)))
    assert err.count("error:") == 1
    assert "a number with a decimal comma; expected a decimal point, or declare decimal: ','" in err


def test_semicolons_and_decimal_commas_are_read_when_declared(kit, make_study):
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    text = kit.study.replace("    time: {column", "    delimiter: ';'\n    decimal: ','\n    time: {column")
    data, _ = read_scenario(load_study(make_study(text, csv=_semicolons(kit))).scenarios[0])
    assert data.series["co2"][0][3] == pytest.approx((0.04 + 0.005 * 30.0) / 100.0, rel=1e-12)


def test_missing_column_message_caps_the_header(kit, make_study, expect_input_error):
    header = kit.header + [f"device_{i:04d}_with_a_rather_long_name_from_an_export_tool [degC]" for i in range(2000)]
    rows = [r + ["20"] * 2000 for r in kit.rows()]
    text = kit.study.replace("co: CO_hall", "co: CO_hal")
    err = expect_input_error(make_study(text, csv=kit.csv_text(header=header, rows=rows)))
    assert len(err) < 2000, len(err)
    assert "(2007 columns)" in err


def test_only_mapped_series_are_allocated(make_study):
    """Memory in proportion to the series used (issue 13 item 8): five locations with one
    temperature series each, 20 000 rows. Allocating all twelve series keys would take
    12 x 5 x 20 000 x 8 B = 9.6 MB of NaN arrays; the series used take 0.8 MB."""
    import tracemalloc

    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    n, L = 20_000, 5
    header = "Time [s]," + ",".join(f"T{i} [degC]" for i in range(L))
    rows = "\n".join(f"{t}," + ",".join(["20.5"] * L) for t in range(n))
    locations = "".join(f"      - {{id: l{i}, temperature: T{i}}}\n" for i in range(L))
    study = make_study(f"title: t\ncriteria: general-2m\nscenarios:\n  - id: s\n    histories: fire-a.csv\n"
                       f"    time: Time\n    locations:\n{locations}", csv=header + "\n" + rows + "\n")
    spec = load_study(study).scenarios[0]
    read_scenario(spec)          # first call: pandas' one-off set-up is not the data's memory
    tracemalloc.start()
    try:
        data, _ = read_scenario(spec)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert set(data.series) == {"temperature"} and data.series["temperature"].shape == (L, n)
    assert peak < 6e6, peak


# --------------------------------------------------------------------------- property: any declared layout, same numbers

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_LAYOUT_STUDY = """\
title: layouts (illustrative)
criteria: general-2m
scenarios:
  - id: s
    histories: fire-a.csv
{format}    time: {time}
    locations:
      - id: a
        temperature: {temp}
        co: {co}
"""


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(temps=st.lists(st.floats(-50, 1200, allow_nan=False), min_size=2, max_size=12),
       co=st.floats(0, 5e4, allow_nan=False),
       delimiter=st.sampled_from([",", ";", "\t"]), decimal=st.sampled_from([".", ","]),
       where=st.sampled_from(["header", "study", "above", "below"]),
       t_unit=st.sampled_from(["C", "degC", "°C", "deg C"]), co_unit=st.sampled_from(["ppm", "ppmv", "ppm(v)"]))
def test_every_declared_layout_reads_pints_numbers(make_study, temps, co, delimiter, decimal, where, t_unit,
                                                   co_unit):
    """Delimiter, decimal mark, where the units are given, and the spelling of the unit do not
    change the numbers read: each equals pint's conversion of the value written (``degC``
    unchanged; pint: ppm = 1e-6)."""
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    if decimal == delimiter:
        decimal = "."
    cell = (lambda x: repr(float(x)).replace(".", decimal))
    names = ["Time", "T", "CO"]
    units = ["s", t_unit, co_unit]
    rows = [[cell(10.0 * i), cell(v), cell(co)] for i, v in enumerate(temps)]
    if where == "header":
        lines = [[f"{n} [{u}]" for n, u in zip(names, units)]] + rows
    elif where == "above":
        lines = [units, names] + rows
    elif where == "below":
        lines = [names, units] + rows
    else:
        lines = [names] + rows
    fmt = "".join([f"    delimiter: {'tab' if delimiter == chr(9) else repr(delimiter)}\n",
                   f"    decimal: '{decimal}'\n",
                   f"    units_row: {where}\n" if where in ("above", "below") else ""])
    study = _LAYOUT_STUDY.format(
        format=fmt, time="{column: Time, unit: s}" if where == "study" else "Time",
        temp=f"{{column: T, unit: '{t_unit}'}}" if where == "study" else "T",
        co=f"{{column: CO, unit: '{co_unit}'}}" if where == "study" else "CO")
    text = "\n".join(delimiter.join(r) for r in lines) + "\n"
    data, _ = read_scenario(load_study(make_study(study, csv=text)).scenarios[0])
    assert data.t_s == pytest.approx([10.0 * i for i in range(len(temps))], abs=1e-9)
    assert data.series["temperature"][0] == pytest.approx(temps, rel=1e-12, abs=1e-9)
    assert data.series["co"][0] == pytest.approx([co * 1e-6] * len(temps), rel=1e-12, abs=1e-15)


# --------------------------------------------------------------------------- report fields, memory, detectors, truncation


@pytest.mark.parametrize("key", ["reference", "prepared_by", "prepared_for", "title"])
@pytest.mark.parametrize("value", ["{name: A. Engineer}", "[a, b]"])
def test_report_field_given_as_a_map_or_list(kit, make_study, expect_input_error, key, value):
    """Issue 13 item 4: a map was silently blanked."""
    text = kit.study.replace("samples: 200", f"samples: 200\n{key}: {value}") if key != "title" else \
        kit.study.replace("title: Test hall, small fixture (illustrative)", f"title: {value}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, key + ':')} {key}: error: found " in err and "expected text" in err


def test_absurd_sample_count_is_refused_with_the_figure(kit, make_study, cli):
    """samples: 1000000000 would end in a MemoryError after loading (issue 13 item 5):
    10^9 x (2 x 256 + 512 + 132 x 64) B = 9.5 TB for the fixture's 2 locations and 1 route of
    120 occupants (132 with the sweep's 10 %; the occupant term added for issue 20)."""
    from egressmargin.sizing import available_memory

    text = kit.study.replace("samples: 200", "samples: 1000000000")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 2
    line = kit.line_of(text, "samples:")
    assert f"study.yaml:{line} samples: error: 1000000000 samples need about 9.5 TB of memory" in err
    assert "this machine has" in err and "available" in err
    if available_memory()[0] is not None:
        assert "expected at most about" in err


def test_absurd_samples_on_the_command_line(kit, make_study, expect_input_error):
    err = expect_input_error(make_study(), "--samples", "1000000000")
    assert "--samples (command line): error: 1000000000 samples need about 9.5 TB" in err


def test_memory_estimate_closed_form():
    """sizing.estimate_bytes: S (L B_loc + R B_route) + L N 8 copies, summed over scenarios."""
    from egressmargin import sizing

    est = sizing.estimate_bytes(2000, [(42, 4, 181), (10, 1, 241)])
    expected = (2000 * (42 * sizing.BYTES_PER_SAMPLE_LOCATION + 4 * sizing.BYTES_PER_SAMPLE_ROUTE)
                + 42 * 181 * 8 * sizing.SERIES_COPIES
                + 2000 * (10 * sizing.BYTES_PER_SAMPLE_LOCATION + 1 * sizing.BYTES_PER_SAMPLE_ROUTE)
                + 10 * 241 * 8 * sizing.SERIES_COPIES)
    assert est == expected
    assert sizing.memory_problems(2000, [(42, 4, 181)], "x", available=8e9, total=16e9) == []


_HEAT = "    detection: {heat: {location: hall-l1, rti: 50, activation: %s%s}}\n"


def _heat_study(kit, activation="68 degC", velocity=", velocity: 1 m/s", location_velocity=False, ambient=""):
    text = kit.study.replace("    detection: 30 s\n", _HEAT % (activation, velocity))
    if location_velocity:
        text = text.replace("        extinction: K_hall\n", "        extinction: K_hall\n        velocity: V_hall\n")
    if ambient:
        text = text.replace("    time: {column", f"    ambient: {{temperature: {ambient}}}\n    time: {{column")
    return text


def _csv_with_velocity(kit):
    return kit.csv_text(header=kit.header + ["V_hall [m/s]"], rows=[r + ["1.0"] for r in kit.rows()])


def test_heat_rule_velocity_and_a_velocity_series_conflict(kit, make_study, expect_input_error):
    """Issue 12 item 12: the rule's velocity was silently ignored when the location had a series."""
    text = _heat_study(kit, location_velocity=True)
    err = expect_input_error(make_study(text, csv=_csv_with_velocity(kit)))
    line = kit.line_of(text, "detection: {heat:")
    assert f"study.yaml:{line} egress[0].detection.heat.velocity: error: the rule gives a constant velocity and " \
           "location 'hall-l1' in scenario fire-a has a 'velocity' series" in err
    assert "remove the other" in err


def test_heat_rule_velocity_alone_is_fine(kit, make_study, cli):
    status, out, err = cli(["validate", make_study(_heat_study(kit))])
    assert status == 0, err


@pytest.mark.parametrize("activation", ["20 degC", "15 degC", "293.15 K"])
def test_activation_at_or_below_the_first_temperature(kit, make_study, expect_input_error, activation):
    """T_hall starts at 20 degC (fixture): activation at or below it responds at 0 s (issue 12 item 12)."""
    text = _heat_study(kit, activation=activation)
    err = expect_input_error(make_study(text))
    line = kit.line_of(text, "detection: {heat:")
    assert f"study.yaml:{line} egress[0].detection.heat.activation: error: found an activation temperature of" in err
    assert "at or below the ambient 20 degC (the first temperature at location 'hall-l1'" in err


def test_activation_at_or_below_the_stated_ambient(kit, make_study, expect_input_error):
    text = _heat_study(kit, activation="24 degC", ambient="25 degC")
    err = expect_input_error(make_study(text))
    assert "at or below the ambient 25 degC (ambient.temperature of scenario fire-a)" in err


def _smoke_study(kit, threshold):
    return kit.study.replace("    detection: 30 s\n", f"    detection: {{smoke: {{location: hall-l1, obscuration: "
                                                      f"{threshold}}}}}\n")


def test_obscuration_per_foot_and_per_metre():
    """Beer-Lambert (NFPA 72 Annex / SFPE Handbook detection chapter, from memory): percent
    obscuration O over a path l gives K = -ln(1 - O) / l [1/m]. 3 %/ft: K = -ln(0.97)/0.3048 m
    = 0.09993 1/m (about 0.100, issue 12 item 12); 10 %/m: K = -ln(0.9) = 0.10536 1/m. The
    conversion a detector rule uses (units.obscuration_to_extinction), against math.log."""
    import math

    from egressmargin.units import obscuration_to_extinction, parse_obscuration

    frac, length = parse_obscuration("3 percent/ft")
    k = float(obscuration_to_extinction(100 * frac, length))
    assert k == pytest.approx(-math.log(0.97) / 0.3048, rel=1e-9)
    assert k == pytest.approx(0.100, abs=0.001)
    frac, length = parse_obscuration("10 %/m")
    assert float(obscuration_to_extinction(100 * frac, length)) == pytest.approx(-math.log(0.9), rel=1e-9)


@pytest.mark.parametrize("threshold, k", [("3 percent/ft", -__import__("math").log(0.97) / 0.3048),
                                          ("'3 %/ft'", -__import__("math").log(0.97) / 0.3048),
                                          ("10 percent/m", -__import__("math").log(0.9))])
def test_smoke_rule_reads_obscuration_per_length(kit, make_study, threshold, k):
    from egressmargin.study import load_study

    study = load_study(make_study(_smoke_study(kit, threshold)))
    assert study.routes[0].detection.extinction_per_m == pytest.approx(k, rel=1e-9)


@pytest.mark.parametrize("threshold", ["3 percent", "'3 %'", "0.03"])
def test_bare_percent_obscuration_is_refused(kit, make_study, expect_input_error, threshold):
    """A bare percent was read per metre: 3 %/ft became K 0.031 instead of 0.100 1/m."""
    text = _smoke_study(kit, threshold)
    err = expect_input_error(make_study(text))
    line = kit.line_of(text, "detection: {smoke:")
    assert f"study.yaml:{line} egress[0].detection.smoke.obscuration: error: found " in err
    assert "'10 percent/m' or '3 percent/ft'" in err


def test_truncated_normal_warns_when_the_median_moves(kit, make_study, cli):
    """Mean 30 s, sd 60 s truncated at zero: median 53.8 s (scipy.stats.truncnorm(-0.5, inf,
    30, 60).median() = 53.81; issue 17 item 5), 79 % above the mean: a located warning."""
    from scipy.stats import truncnorm

    assert truncnorm(-0.5, float("inf"), loc=30, scale=60).median() == pytest.approx(53.81, abs=0.01)
    text = kit.study.replace("alarm: 30 s", "alarm: {normal: {mean: 30 s, sd: 60 s}}")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 0
    line = kit.line_of(text, "alarm:")
    assert f"study.yaml:{line} egress[0].alarm.normal: warning: truncated at zero, this normal distribution " \
           "has its median at 53.8 s, 79 % above the stated mean 30 s" in out + err


def test_truncated_normal_within_two_percent_is_quiet(kit, make_study, cli):
    """Mean 60 s, sd 20 s: F0 = Phi(-3) = 0.00135, median 60.07 s (+0.1 %): no warning."""
    text = kit.study.replace("alarm: 30 s", "alarm: {normal: {mean: 60 s, sd: 20 s}}")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 0 and "truncated at zero" not in out + err


def test_units_row_above_declared_but_names_on_line_one(kit, make_study, expect_input_error):
    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time\n    units_row: above")
    names = [h.split(" [")[0] for h in kit.header]
    units = ["s", "degC", "ppm", "percent", "percent", "1/m", "degC"]
    csv = "\n".join(",".join(r) for r in [names, units] + kit.rows()) + "\n"
    err = expect_input_error(make_study(text, csv=csv))
    assert err.count("error:") == 1
    assert "fire-a.csv:1: error: units_row: above, but the mapped columns (" in err and "are named on line 1" in err


@pytest.mark.parametrize("unit", ["C", "deg C", "°C", "celsius"])
def test_kelvin_looking_celsius_is_warned_for_every_celsius_spelling(kit, make_study, unit):
    """293 'degC' at the start is most likely kelvin (a warning, not an error)."""
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    rows = kit.rows()
    for r in rows:
        r[6] = f"{float(r[6]) + 273.15:g}"
    header = [h.replace("T_stair [degC]", f"T_stair [{unit}]") for h in kit.header]
    _, warnings = read_scenario(load_study(make_study(csv=kit.csv_text(header=header, rows=rows))).scenarios[0])
    assert any("looks like kelvin" in w.message for w in warnings)


def test_data_rows_wider_than_the_names_row(kit, make_study, expect_input_error):
    """Every data row one field wider than the header: which value belongs to which column is
    not decided, so it is an error naming the first such line, not a silent shift."""
    rows = [r + ["7"] for r in kit.rows()]
    err = expect_input_error(make_study(csv=kit.csv_text(rows=rows)))
    assert "fire-a.csv:2: error: cannot read as CSV: line 2 has 8 fields and the names row 7" in err


@pytest.mark.parametrize("criteria, key", [
    ("{base: general-2m, visibility: {limit: 0 m}}", "criteria.visibility.limit"),
    ("{base: general-2m, visibility: {limit: -5 m}}", "criteria.visibility.limit"),
    ("{base: general-2m, layer_height: {limit: 0 m}}", "criteria.layer_height.limit"),
    ("{base: general-2m, only: []}", "criteria.only"),
])
def test_criteria_run_cannot_apply(kit, make_study, expect_input_error, criteria, key):
    """Issue 13 item 5: validate said OK, run crashed with a traceback."""
    text = kit.study.replace("criteria: general-2m", f"criteria: {criteria}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'criteria:')} {key}: error: " in err


def test_ambient_below_absolute_zero(kit, make_study, expect_input_error):
    """-300 degC is below absolute zero (-273.15 degC, the kelvin's definition)."""
    text = kit.study.replace("    time: {column", "    ambient: {temperature: -300 degC}\n    time: {column")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'ambient:')} scenarios[0].ambient.temperature: error: found '-300 degC', " \
           "at or below absolute zero" in err


@pytest.mark.parametrize("transform", ["bom", "crlf", "bom+crlf"])
def test_byte_order_mark_and_windows_line_ends_are_read(kit, make_study, transform):
    """Spreadsheet exports often start with a UTF-8 byte order mark and end lines with CR LF."""
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    csv = kit.csv
    if "crlf" in transform:
        csv = csv.replace("\n", "\r\n")
    study = make_study(csv=False)
    raw = (b"\xef\xbb\xbf" if "bom" in transform else b"") + csv.encode()
    (study.parent / "fire-a.csv").write_bytes(raw)
    data, _ = read_scenario(load_study(study).scenarios[0])
    assert data.rows == 60 and data.series["temperature"][0][20] == pytest.approx(60.0)


def test_latin1_degree_sign_is_an_input_error(kit, make_study, expect_input_error):
    """A Latin-1 '°' (byte 0xB0) is not UTF-8: say so, naming the line."""
    study = make_study(csv=False)
    raw = kit.csv.replace("T_stair [degC]", "T_stair [\u00b0C]").encode("latin-1")
    (study.parent / "fire-a.csv").write_bytes(raw)
    err = expect_input_error(study)
    assert "fire-a.csv:1: error: cannot read line 1 as UTF-8 text" in err


@pytest.mark.parametrize("gas", ["hcl", "hbr", "hf", "so2", "no2", "acrolein", "formaldehyde"])
def test_irritant_gases_are_volume_fractions_too(gas):
    """Contract, "Added in turn 2": the irritant series keys are volume fractions (pint: ppm = 1e-6)."""
    assert check_unit("ppm", gas) is None and check_unit("mg/kg", gas) is not None
    assert float(to_internal(100.0, "ppmv", gas)) == pytest.approx(1e-4, rel=1e-12)


def test_declared_semicolons_on_a_comma_file_gives_one_hint(kit, make_study, expect_input_error):
    text = kit.study.replace("    time: {column", "    delimiter: ';'\n    time: {column")
    err = expect_input_error(make_study(text))
    assert err.count("error:") == 1
    assert "fire-a.csv:1: error: the header has 6 commas and 0 semicolons: the file looks comma-delimited" in err
    assert "declare delimiter: ',' on the scenario" in err


@pytest.mark.parametrize("chunk", [7, 64, 1 << 24])
def test_scan_agrees_across_chunk_sizes(kit, tmp_path, chunk, monkeypatch):
    """Lines split across read chunks are counted once: the same hash (hashlib on the whole
    file) and the same over-wide line, whatever the chunk size."""
    import hashlib

    from egressmargin import histories

    monkeypatch.setattr(histories, "SCAN_CHUNK", chunk)
    good = tmp_path / "good.csv"
    good.write_text(kit.csv.replace("\n", "\r\n"), encoding="utf-8")
    digest, filled, blanks = histories._scan(good, "good.csv")
    assert digest == hashlib.sha256(good.read_bytes()).hexdigest() and filled == 61 and blanks == []
    gappy = tmp_path / "gappy.csv"          # blank lines 4 and 31 (1-based), one of them with a CR and spaces
    lines = kit.csv.split("\n")
    gappy.write_text("\n".join(lines[:3] + [""] + lines[3:29] + ["  \r"] + lines[29:]), encoding="utf-8")
    assert histories._scan(gappy, "gappy.csv")[2] == [4, 31]
    bad = tmp_path / "bad.csv"
    bad.write_text(kit.with_cell(kit.csv, 30, "T_hall [degC]", "1,5"), encoding="utf-8")
    with pytest.raises(InputError) as exc:
        histories._scan(bad, "bad.csv")
    assert exc.value.problems[0].where == f"bad.csv:{kit.csv_line(30)}"


# ------------------------------------------------------------- memory: the flow model's occupant term (issue 20)


@pytest.fixture
def small_machine(monkeypatch):
    """This machine with 8 GB available of 16 GB (sizing.available_memory replaced)."""
    from egressmargin import sizing
    monkeypatch.setattr(sizing, "available_memory", lambda: (8_000_000_000, 16_000_000_000))


def test_occupant_term_closed_form():
    """S x P x BYTES_PER_SAMPLE_OCCUPANT added per scenario (P: occupants of its routes, fourth number)."""
    from egressmargin import sizing

    with_occ = sizing.estimate_bytes(2000, [(2, 1, 60, 100000)])
    assert with_occ - sizing.estimate_bytes(2000, [(2, 1, 60)]) == 2000 * 100000 * sizing.BYTES_PER_SAMPLE_OCCUPANT


def test_occupant_bound_of_a_distribution_is_its_upper_quantile():
    """Quantile 1 - 1/(10 S) of the count, x 1.1; checked against scipy.stats.lognorm's ppf."""
    import numpy as np
    from scipy import stats
    from egressmargin import sizing

    median, p95, S = 100.0, 400.0, 2000
    sigma = np.log(p95 / median) / stats.norm.ppf(0.95)
    q = stats.lognorm(s=sigma, scale=median).ppf(1 - 1 / (10 * S))
    assert sizing.occupant_count_bound({"lognormal": {"median": median, "p95": p95}}, S) == \
        int(np.ceil(round(q) * 1.1 - 1e-9))


@pytest.mark.parametrize("occupants, samples, words", [
    ("100000", "2000", "100000 occupants on route 'north-stair' with 2000 samples need about"),
    ("1000000000", "200", "1000000000 occupants on route 'north-stair' with 200 samples need about"),
    ("{lognormal: {median: 100, p95: 1000000000000}}", "200", "an occupant count reaching beyond 1e18"),
])
def test_large_occupant_counts_are_input_errors(kit, make_study, cli, expect_input_error, small_machine,
                                                occupants, samples, words):
    """Issue 20: validate said OK and run died on a (samples x occupants) array; now exit 2 at the count."""
    text = kit.study.replace("occupants: 120", f"occupants: {occupants}").replace("samples: 200",
                                                                                   f"samples: {samples}")
    study = make_study(text)
    line = kit.line_of(text, "occupants:")
    status, _, verr = cli(["validate", study])
    assert status == 2, verr
    err = expect_input_error(study)
    for msg in (verr, err):
        assert f"study.yaml:{line} egress[0].occupants: error: {words}" in msg, msg
        assert "this machine has 8.0 GB available (16 GB in all)" in msg
        assert "expected at most about" in msg or "expected a count whose largest draws stay below" in msg


def test_largest_count_that_fits_is_stated(kit, make_study, cli, small_machine):
    """The count named as fitting is the one that solves estimate_bytes(...) = available for this route."""
    import re
    from egressmargin import sizing

    text = kit.study.replace("occupants: 120", "occupants: 100000").replace("samples: 200", "samples: 2000\nmax_samples: 2000")
    status, _, err = cli(["validate", make_study(text)])
    assert status == 2
    fits = int(re.search(r"expected at most about (\d+) occupants", err).group(1))
    bound = sizing.occupant_count_bound({"fixed": float(fits)}, 2000)
    assert sizing.estimate_bytes(2000, [(2, 1, 60, bound)]) <= 8e9
    assert sizing.estimate_bytes(2000, [(2, 1, 60, sizing.occupant_count_bound({"fixed": fits + 50.0}, 2000))]) > 8e9
    samples = int(re.search(r"or samples at most about (\d+)", err).group(1))
    assert sizing.estimate_bytes(samples, [(2, 1, 60, 110000)]) <= 8e9 < sizing.estimate_bytes(samples + 1, [(2, 1, 60, 110000)])


def test_ordinary_counts_pass_on_a_small_machine(kit, make_study, cli, small_machine):
    status, _, err = cli(["validate", make_study(kit.study.replace("occupants: 120", "occupants: 2000"))])
    assert status == 0, err
