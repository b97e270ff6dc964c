"""Every kind of bad input is an input error: exit 2, a located message, nothing written.

Reference: the project's outside contract (/work/shared/contract.md), "Exit status": 2 is
a problem with the input, and "the message names the file, the key or column and the
line where it applies, and says what was expected"; "A run that exits non-zero leaves no
half-written output". Each test feeds one mistake to ``egressmargin run STUDY --no-pdf``
in-process (``expect_input_error`` checks exit 2, an empty current directory where the
default output folder would go, no new file beside the study, and no traceback).

Study file lines are found from the text (``kit.line_of``) rather than hard-coded; CSV
lines follow the file (header = line 1, data row 1 = line 2).
"""

from __future__ import annotations

import pytest

from egressmargin.errors import InputError
from egressmargin.pipeline import load


# --------------------------------------------------------------------------- files, columns, units


def test_missing_histories_file(kit, make_study, expect_input_error):
    text = kit.study.replace("histories: fire-a.csv", "histories: nosuch.csv")
    study = make_study(text)
    err = expect_input_error(study)
    line = kit.line_of(text, "histories: nosuch.csv")
    assert f"study.yaml:{line} scenarios[0].histories" in err
    assert "'nosuch.csv' not found" in err
    assert "expected a CSV file" in err


def test_histories_file_vanishing_after_the_study_loads(kit, make_study):
    """read_scenario itself reports a missing file by name (load_study checked it earlier)."""
    from egressmargin.histories import read_scenario
    from egressmargin.study import load_study

    study = load_study(make_study())
    spec = study.scenarios[0]
    spec.histories.unlink()
    with pytest.raises(InputError) as exc:
        read_scenario(spec)
    assert "fire-a.csv" in exc.value.problems[0].where
    assert "file not found" in exc.value.problems[0].message


def test_mapped_column_absent_gives_did_you_mean(kit, make_study, expect_input_error):
    text = kit.study.replace("co: CO_hall", "co: CO_hal")
    err = expect_input_error(make_study(text))
    line = kit.line_of(text, "co: CO_hal")
    assert "fire-a.csv column 'CO_hal'" in err
    assert "not in the file" in err
    assert f"study.yaml:{line} scenarios[0].locations[0].co" in err  # where it was mapped
    assert "did you mean 'CO_hall'?" in err


def test_mapped_column_absent_without_a_close_name_has_no_did_you_mean(kit, make_study, expect_input_error):
    err = expect_input_error(make_study(kit.study.replace("co: CO_hall", "co: Zq9")))
    assert "column 'Zq9'" in err and "not in the file" in err
    assert "did you mean" not in err
    assert "expected one of Time, T_hall [degC]" in err  # the columns that do exist


def test_series_with_no_unit(kit, make_study, expect_input_error):
    csv = kit.csv.replace("T_stair [degC]", "T_stair")
    err = expect_input_error(make_study(csv=csv))
    line = kit.line_of(kit.study, "temperature: T_stair")
    assert "fire-a.csv column 'T_stair'" in err
    assert "no unit for 'temperature' at location 'stair-l1'" in err
    assert f"study.yaml:{line} scenarios[0].locations[1].temperature" in err
    assert "units_row: true" in err  # says how to give one


def test_time_column_without_a_unit_is_seconds(kit, make_study, cli):
    """Contract: ``time: Time`` is in seconds unless ``{column: Time, unit: min}`` says otherwise."""
    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time")
    status, _, err = cli(["validate", make_study(text)])
    assert status == 0, err
    minutes = kit.study.replace("time: {column: Time, unit: s}", "time: {column: Time, unit: min}")
    from egressmargin.pipeline import load
    t_s = load(make_study(text)).data["fire-a"].t_s
    t_min = load(make_study(minutes)).data["fire-a"].t_s
    assert t_min[1] == pytest.approx(60.0 * t_s[1])


@pytest.mark.parametrize("unit, words", [("degZ", "unknown unit 'degZ'"),
                                         ("m", "unit 'm' is not a unit of this quantity")])
def test_unknown_or_wrong_unit_in_a_header(kit, make_study, expect_input_error, unit, words):
    csv = kit.csv.replace("T_stair [degC]", f"T_stair [{unit}]")
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv column 'T_stair [{unit}]'" in err
    assert words in err
    assert "expected a unit of temperature such as degC, K or degF" in err


def test_unknown_unit_in_the_study_mapping(kit, make_study, expect_input_error):
    text = kit.study.replace("        co: CO_hall\n", "        co: {column: CO_hall, unit: ppmm}\n")
    err = expect_input_error(make_study(text))
    line = kit.line_of(text, "unit: ppmm")
    assert f"study.yaml:{line} scenarios[0].locations[0].co.unit" in err
    assert "unknown unit 'ppmm'" in err


# --------------------------------------------------------------------------- CSV cells


def test_time_going_backwards(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.csv, 9, "Time", "50")          # rows 8, 9: 80 s then 50 s
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(9)} column 'Time' row 10" in err
    assert "time goes backwards (80 then 50)" in err
    assert "expected strictly increasing times" in err


def test_time_repeated(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.csv, 10, "Time", "90")         # rows 9, 10: 90 s twice
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(10)} column 'Time' row 11" in err
    assert "time repeats (90 then 90)" in err


def test_blank_value(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.csv, 19, "CO_hall [ppm]", "")
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(19)} column 'CO_hall [ppm]' row 20" in err
    assert "found a blank; expected a number" in err


@pytest.mark.parametrize("cell", ["NaN", "nan", "abc", "inf", "--5", "1e400", "12 degC"])
def test_non_numeric_value(kit, make_study, expect_input_error, cell):
    csv = kit.with_cell(kit.csv, 20, "T_hall [degC]", cell)
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(20)} column 'T_hall [degC]' row 21" in err
    assert "expected a number" in err


def test_nan_cell_is_quoted_not_called_blank(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.csv, 20, "T_hall [degC]", "NaN")
    err = expect_input_error(make_study(csv=csv))
    assert "found 'NaN'" in err


def test_several_bad_values_in_one_column_are_counted(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.with_cell(kit.csv, 3, "K_hall [1/m]", "x"), 8, "K_hall [1/m]", "")
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(3)} column 'K_hall [1/m]' row 4" in err  # the first one
    assert "found 'x' (and 1 more)" in err


def test_row_with_an_extra_field_names_the_line(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.csv, 20, "T_hall [degC]", "1,5")
    err = expect_input_error(make_study(csv=csv))
    assert "fire-a.csv" in err and "cannot read as CSV" in err
    assert f"line {kit.csv_line(20)}" in err


def test_co_above_100_percent(kit, make_study, expect_input_error):
    # 2 000 000 ppm = 200 percent (1 ppm = 1e-6, 1 percent = 1e-2 by definition; pint agrees,
    # see test_units.py)
    csv = kit.with_cell(kit.csv, 22, "CO_hall [ppm]", "2000000")
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(22)} column 'CO_hall [ppm]' row 23" in err
    assert "CO of 200 percent is above 100 percent" in err


@pytest.mark.parametrize("column, cell, words", [
    ("O2_hall [percent]", "25", "O2 of 25.00 percent is above ambient"),
    ("CO_hall [ppm]", "-50", "negative concentration"),
    ("T_hall [degC]", "-300", "at or below absolute zero"),
])
def test_implausible_values(kit, make_study, expect_input_error, column, cell, words):
    csv = kit.with_cell(kit.csv, 5, column, cell)
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(5)} column '{column}' row 6" in err
    assert words in err


def test_units_row_shifts_the_reported_line(kit, make_study, expect_input_error):
    header = [h.split(" [")[0] for h in kit.header]
    units = ["s", "degC", "ppm", "percent", "percent", "1/m", "degC"]
    rows = kit.rows()
    rows[4][1] = "oops"
    csv = kit.csv_text(header, [units] + rows)
    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time\n    units_row: true")
    err = expect_input_error(make_study(text, csv))
    assert f"fire-a.csv:{kit.csv_line(4, units_row=True)} column 'T_hall' row 5" in err
    assert "found 'oops'" in err


def test_every_csv_problem_of_a_scenario_is_reported(kit, make_study, expect_input_error):
    csv = kit.with_cell(kit.with_cell(kit.csv, 5, "T_hall [degC]", "x"), 7, "Time", "0")
    err = expect_input_error(make_study(csv=csv))
    assert f"fire-a.csv:{kit.csv_line(7)} column 'Time' row 8: error: time goes backwards" in err
    assert f"fire-a.csv:{kit.csv_line(5)} column 'T_hall [degC]' row 6: error: found 'x'" in err


# --------------------------------------------------------------------------- study keys


def test_yaml_syntax_error_names_the_line(kit, make_study, expect_input_error):
    text = kit.study.replace("occupants: 120", "occupants: [120")
    err = expect_input_error(make_study(text))
    # PyYAML reports an unclosed flow sequence where it gives up: the next line
    line = kit.line_of(text, "occupants: [120")
    assert f"study.yaml:{line + 1}: error: YAML syntax error" in err
    assert "expected valid YAML" in err


def test_tab_indentation_names_the_line(kit, make_study, expect_input_error):
    text = kit.study.replace("    occupants: 120", "\toccupants: 120")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'occupants: 120')}: error: YAML syntax error (column 1)" in err


def test_unknown_top_level_key_with_did_you_mean(kit, make_study, expect_input_error):
    text = kit.study.replace("samples: 200", "sampels: 200")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'sampels')} sampels: error: unknown key 'sampels'" in err
    assert "did you mean 'samples'?" in err


def test_duplicate_location_ids(kit, make_study, expect_input_error):
    text = kit.study.replace("      - id: stair-l1\n        temperature: T_stair\n",
                             "      - id: stair-l1\n        temperature: T_stair\n"
                             "      - id: hall-l1\n        temperature: T_stair\n")
    err = expect_input_error(make_study(text))
    line = [i for i, s in enumerate(text.splitlines(), 1) if "- id: hall-l1" in s][1]
    assert f"study.yaml:{line} scenarios[0].locations[2].id" in err
    assert "duplicate location id 'hall-l1' (first at locations[0])" in err


def test_duplicate_route_ids(kit, make_study, expect_input_error):
    route = kit.study[kit.study.index("  - id: north-stair"):]
    text = kit.study + route
    err = expect_input_error(make_study(text))
    line = [i for i, s in enumerate(text.splitlines(), 1) if "- id: north-stair" in s][1]
    assert f"study.yaml:{line} egress[1].id" in err
    assert "duplicate route id 'north-stair' (first at egress[0])" in err


def test_route_naming_a_location_that_does_not_exist(kit, make_study, expect_input_error):
    text = kit.study.replace("exposed_at: [hall-l1, stair-l1]", "exposed_at: [hall-l1, stair-l2]")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'exposed_at')} egress[0].exposed_at[1]" in err
    assert "location 'stair-l2' does not exist in scenario fire-a" in err
    assert "did you mean 'stair-l1'?" in err


def test_route_naming_a_scenario_that_does_not_exist(kit, make_study, expect_input_error):
    text = kit.study.replace("occupants: 120", "occupants: 120\n    scenarios: [fire-b]")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'scenarios: [fire-b]')} egress[0].scenarios[0]" in err
    assert "no scenario 'fire-b'" in err and "did you mean 'fire-a'?" in err


@pytest.mark.parametrize("value", ["0", "-3", "12.5", "many", "true", "'120'", "null"])
def test_occupants_not_a_positive_integer(kit, make_study, expect_input_error, value):
    text = kit.study.replace("occupants: 120", f"occupants: {value}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'occupants:')} egress[0].occupants" in err
    assert "expected a positive whole number of occupants" in err


def test_door_narrower_than_its_two_boundary_layers_default(kit, make_study, expect_input_error):
    # 0.25 m < 2 x 0.15 m, the doorway boundary layer (SFPE Handbook, 5th ed., ch. 59, from memory)
    text = kit.study.replace("{door: {width: 1.0 m}}", "{door: {width: 0.25 m}}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'door:')} egress[0].path[1].door.width" in err
    assert "leaves no effective width after the boundary layers" in err


def test_door_narrower_than_its_two_boundary_layers_given(kit, make_study, expect_input_error):
    # independent of any default: 0.35 m < 2 x 0.20 m stated in the study
    text = kit.study.replace("{door: {width: 1.0 m}}", "{door: {width: 0.35 m, boundary: 0.2 m}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].path[1].door.width" in err and "no effective width" in err


def test_unknown_path_element_type(kit, make_study, expect_input_error):
    text = kit.study.replace("{door: {width: 1.0 m}}", "{doorway: {width: 1.0 m}}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'doorway')} egress[0].path[1].doorway" in err
    assert "unknown path element 'doorway'" in err and "did you mean 'door'?" in err


@pytest.mark.parametrize("spec, words", [
    ("{lognormal: {median: 60 s, p95: 30 s}}", "p95 (30 s) is below the median (60 s)"),
    ("{uniform: {low: 50 s, high: 10 s}}", "uniform low (50 s) is above high (10 s)"),
    ("{triangular: {low: 10 s, mode: 90 s, high: 50 s}}", "mode (90 s) is outside [10 s, 50 s]"),
    ("{normal: {mean: 60 s, sd: -5 s}}", "sd (-5 s) is negative"),
    ("{lognormal: {median: 60 s}}", "missing 'p95' for the lognormal distribution"),
    ("{lognormal: {median: 60, p95: 150 s}}", "bare number"),
    ("{lognormall: {median: 60 s, p95: 150 s}}", "did you mean 'lognormal'?"),
])
def test_bad_distribution(kit, make_study, expect_input_error, spec, words):
    text = kit.study.replace("{lognormal: {median: 60 s, p95: 150 s}}", spec)
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'premovement:')} egress[0].premovement" in err
    assert words in err


def test_smoke_detector_at_a_location_without_a_smoke_series(kit, make_study, expect_input_error):
    text = kit.study.replace("detection: 30 s", "detection: {smoke: {location: stair-l1, extinction: 0.1 1/m}}")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'detection:')} egress[0].detection.smoke.location" in err
    assert "location 'stair-l1' in scenario fire-a has no smoke series" in err


def test_heat_detector_without_a_velocity(kit, make_study, expect_input_error):
    text = kit.study.replace("detection: 30 s", "detection: {heat: {location: hall-l1, rti: 50, activation: 68 degC}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].detection.heat" in err
    assert "has no 'velocity' series and the rule gives no constant 'velocity'" in err


def test_detector_at_an_unknown_location(kit, make_study, expect_input_error):
    text = kit.study.replace("detection: 30 s", "detection: {smoke: {location: hal-l1, extinction: 0.1 1/m}}")
    err = expect_input_error(make_study(text))
    assert "egress[0].detection.smoke.location" in err and "did you mean 'hall-l1'?" in err


def test_unknown_criteria_set_name(kit, make_study, expect_input_error):
    text = kit.study.replace("criteria: general-2m", "criteria: general-2n")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'criteria:')} criteria" in err
    assert "'general-2n' is neither a bundled criteria set" in err
    assert "did you mean 'general-2m'?" in err


def test_uncertainty_file_with_bad_bias_and_no_source(kit, make_study, expect_input_error):
    table = ("distribution: lognormal\n"
             "quantities:\n"
             "  temperature: {bias: 0, sigma_model: 0.07, sigma_exp: 0.07}\n"
             "  co: {bias: -1.1, sigma_model: 0.2}\n")
    text = kit.study.replace("seed: 3", "seed: 3\nuncertainty: unc.yaml")
    err = expect_input_error(make_study(text, extra={"unc.yaml": table}))
    assert "unc.yaml:3 quantities.temperature.bias: error: found 0; expected a number above 0" in err
    assert "unc.yaml:4 quantities.co.bias: error: found -1.1" in err
    assert "unc.yaml" in err and "missing 'source'" in err


def test_missing_uncertainty_file(kit, make_study, expect_input_error):
    text = kit.study.replace("seed: 3", "seed: 3\nuncertainty: nosuch.yaml")
    err = expect_input_error(make_study(text))
    assert f"study.yaml:{kit.line_of(text, 'uncertainty:')} uncertainty" in err and "'nosuch.yaml' not found" in err


def test_bad_samples_on_the_command_line(make_study, cli, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    status, out, err = cli(["run", make_study(), "--no-pdf", "--samples", "0"])
    assert status == 2
    assert "--samples" in err and "expected a whole number of at least 1, found '0'" in err
    assert not (tmp_path / "study-out").exists()


# --------------------------------------------------------------------------- ten mistakes at once

TEN = {
    # what: (text to replace, replacement, where the error must be reported, words)
    "unknown key": ("samples: 200", "samples: 200\nrefrence: EM-1", "refrence", "did you mean 'reference'?"),
    "bad samples": ("samples: 200", "samples: 0", "samples", "expected a number of Monte Carlo samples"),
    "bad acceptance": ("{max_p_fail: 0.05}", "{max_p_fail: 1.5}", "acceptance.max_p_fail",
                       "expected a probability in [0, 1)"),
    "bad unit": ("        co: CO_hall\n", "        co: {column: CO_hall, unit: ppmm}\n",
                 "scenarios[1].locations[0].co.unit", "unknown unit 'ppmm'"),
    "duplicate id": ("        temperature: T_stair\n",
                     "        temperature: T_stair\n      - id: hall-l1\n        temperature: T_stair\n",
                     "scenarios[1].locations[2].id", "duplicate location id 'hall-l1'"),
    "missing histories": ("scenarios:\n", "scenarios:\n  - id: fire-b\n    histories: fire-b.csv\n    time: Time\n"
                          "    locations:\n      - id: hall-l1\n        temperature: T_hall\n"
                          "      - id: stair-l1\n        temperature: T_stair\n",
                          "scenarios[0].histories", "'fire-b.csv' not found"),
    "bad occupants": ("occupants: 120", "occupants: -3", "egress[0].occupants", "found -3"),
    "bad distribution": ("p95: 150 s", "p95: 30 s", "egress[0].premovement.lognormal", "below the median"),
    "unknown element": ("{door: {width: 1.0 m}}", "{dor: {width: 1.0 m}}", "egress[0].path[1].dor",
                        "did you mean 'door'?"),
    "unknown route location": ("[hall-l1, stair-l1]", "[hall-l1, stair-l9]", "egress[0].exposed_at[1]",
                               "location 'stair-l9' does not exist"),
}


def test_validate_reports_ten_mistakes_at_once(kit, make_study, cli):
    """One study, ten different mistakes: ``validate`` reports all ten, each located, exit 2.

    The new scenario fire-b comes first, so fire-a is scenarios[1]. The mistakes are all
    in the study file (keys, units, ids, a histories file): a CSV
    problem (e.g. a missing column) is only looked for once the study itself loads (see
    test_csv_problems_are_hidden_by_study_problems).
    """
    text = kit.study
    for old, new, _, _ in TEN.values():
        assert old in text
        text = text.replace(old, new, 1)
    study = make_study(text)
    status, out, err = cli(["validate", study])
    assert status == 2
    assert "10 problems in the input:" in err
    lines = [s for s in err.splitlines() if ": error: " in s]
    assert len(lines) == 10
    for what, (_, _, key_path, words) in TEN.items():
        hits = [s for s in lines if f" {key_path}: error: " in s and words in s]
        assert len(hits) == 1, f"{what}: not reported as expected in\n{err}"
        # every one is located with a line number of the study file
        head = hits[0].strip().split(" ")[0]
        assert head.startswith(str(study)) and head[len(str(study)) + 1:].isdigit(), hits[0]
        assert "expected" in hits[0] or "did you mean" in hits[0]


def test_csv_problems_are_reported_with_study_problems(kit, make_study, cli):
    text = kit.study.replace("occupants: 120", "occupants: 0").replace("co: CO_hall", "co: CO_hal")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 2
    assert "egress[0].occupants" in err
    assert "column 'CO_hal'" in err


def test_route_without_id_still_has_its_other_mistakes_reported(kit, make_study, cli):
    text = kit.study.replace("  - id: north-stair\n", "  - title: North stair\n").replace("occupants: 120",
                                                                                         "occupants: 0")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 2
    assert "missing key 'id'" in err
    assert "egress[0].occupants" in err


def test_problems_of_two_scenarios_are_all_reported(kit, make_study):
    """Once the study loads, every scenario's CSV is read and all their problems collected."""
    second = ("  - id: fire-b\n    histories: fire-b.csv\n    time: {column: Time, unit: s}\n"
              "    locations:\n      - id: hall-l1\n        temperature: T_hall\n"
              "      - id: stair-l1\n        temperature: T_stair\n")
    text = kit.study.replace("egress:\n", second + "egress:\n")
    csv_b = kit.with_cell(kit.csv, 2, "T_hall [degC]", "?")
    csv_a = kit.csv.replace("CO_hall [ppm]", "CO_hall")
    study = make_study(text, csv_a, extra={"fire-b.csv": csv_b})
    with pytest.raises(InputError) as exc:
        load(study)
    where = [p.where for p in exc.value.problems if not p.warning]
    assert any("fire-a.csv column 'CO_hall'" in w for w in where)
    assert any(f"fire-b.csv:{kit.csv_line(2)} column 'T_hall [degC]' row 3" in w for w in where)
    assert len(where) == 2


# --------------------------------------------------------------------------- crashes that must be input errors


def test_exposed_at_entry_that_is_a_list(kit, make_study, cli):
    text = kit.study.replace("exposed_at: [hall-l1, stair-l1]", "exposed_at: [[hall-l1], stair-l1]")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 2 and "egress[0].exposed_at[0]" in err


def test_route_scenarios_entry_that_is_a_list(kit, make_study, cli):
    text = kit.study.replace("occupants: 120", "occupants: 120\n    scenarios: [[fire-a]]")
    status, out, err = cli(["validate", make_study(text)])
    assert status == 2 and "egress[0].scenarios[0]" in err


@pytest.mark.parametrize("key", ["? [a, b]\n: 1\n", "{a: 1}: 1\n"])
def test_yaml_key_that_is_a_list_or_mapping(kit, make_study, cli, key):
    status, out, err = cli(["validate", make_study(kit.study + key)])
    assert status == 2 and "study.yaml" in err


def test_recursive_yaml_alias(kit, make_study, cli):
    status, out, err = cli(["validate", make_study("title: &a [*a]\n")])
    assert status == 2 and "study.yaml" in err
