"""Reading a scenario's histories: values, plausibility warnings, and no crash on odd files.

The fixture CSV (tests/conftest.py) is invented; its columns are ramps with closed forms,
so every converted value is known exactly: T = 20 + 0.2 t degC, CO = 5 t ppm, CO2 =
0.04 + 0.005 t percent, O2 = 20.9 - 0.005 t percent, K = 0.002 t 1/m (t in s). Unit
factors are pint's (ppm = 1e-6, percent = 0.01; see test_units.py).

Property tests (hypothesis) feed random study bytes and random CSV shapes and contents to
``load_study``, ``read_scenario`` and ``pipeline.load``: the answer is always either a
result or :class:`~egressmargin.errors.InputError`, never another exception (style
guide: "Property tests (hypothesis) for loaders ... no crash on odd input").
"""

from __future__ import annotations

import hashlib
import string
from pathlib import Path

import numpy as np
import pytest

from engine_helpers import without_sign_default
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from egressmargin.errors import InputError
from egressmargin.histories import read_scenario
from egressmargin.pipeline import RunOptions, build_results, load
from egressmargin.study import Study, load_study

PROPERTY = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@pytest.fixture(scope="module")
def scratch(tmp_path_factory):
    """``scratch(name)``: one folder per property test, rewritten by every example.

    Module scope, because hypothesis and function-scoped fixtures (tmp_path) do not mix.
    """
    folders: dict[str, Path] = {}

    def folder(name: str) -> Path:
        if name not in folders:
            folders[name] = tmp_path_factory.mktemp(name)
        return folders[name]
    return folder


# --------------------------------------------------------------------------- a good file


def test_good_histories_in_internal_units(good_study):
    spec = load_study(good_study).scenarios[0]
    data, warnings = read_scenario(spec)
    t = np.arange(60) * 10.0
    np.testing.assert_allclose(data.t_s, t)
    assert data.end_s == 590.0 and data.rows == 60
    assert data.location_ids == ["hall-l1", "stair-l1"]
    np.testing.assert_allclose(data.series["temperature"][0], 20 + 0.2 * t, rtol=1e-12)
    np.testing.assert_allclose(data.series["temperature"][1], 20 + 0.05 * t, rtol=1e-12)
    np.testing.assert_allclose(data.series["co"][0], 5 * t * 1e-6, rtol=1e-9)           # ppm -> fraction
    np.testing.assert_allclose(data.series["co2"][0], (0.04 + 0.005 * t) * 0.01, rtol=1e-9)  # percent
    np.testing.assert_allclose(data.series["o2"][0], (20.9 - 0.005 * t) * 0.01, rtol=1e-9)
    np.testing.assert_allclose(data.series["extinction"][0], 0.002 * t, rtol=1e-9, atol=1e-15)
    # a series a location lacks: NaN row, flagged absent
    assert np.isnan(data.series["co"][1]).all()
    assert data.has("co").tolist() == [True, False]
    assert data.has("heat_flux").tolist() == [False, False]
    assert warnings == []


def test_sha256_is_the_files(good_study):
    """hashlib (the standard library) as the outside check of the recorded digest."""
    data, _ = read_scenario(load_study(good_study).scenarios[0])
    csv = good_study.parent / "fire-a.csv"
    assert data.sha256 == hashlib.sha256(csv.read_bytes()).hexdigest()


def test_columns_as_read_are_recorded(good_study):
    data, _ = read_scenario(load_study(good_study).scenarios[0])
    got = {(c.column, c.series, c.location, c.unit_as_read) for c in data.columns}
    assert ("Time", "time", "", "s") in got
    assert ("CO_hall [ppm]", "co", "hall-l1", "ppm") in got
    assert ("T_stair [degC]", "temperature", "stair-l1", "degC") in got
    assert len(data.columns) == 7


def test_header_forms_full_name_and_no_space_before_bracket(kit, make_study):
    """A mapping may name the full header 'T_hall [degC]'; 'T_stair[degC]' splits into name and unit too."""
    csv = kit.csv.replace("T_stair [degC]", "T_stair[degC]")
    text = kit.study.replace("temperature: T_hall", "temperature: T_hall [degC]")
    data, _ = read_scenario(load_study(make_study(text, csv)).scenarios[0])
    t = np.arange(60) * 10.0
    np.testing.assert_allclose(data.series["temperature"][0], 20 + 0.2 * t)
    np.testing.assert_allclose(data.series["temperature"][1], 20 + 0.05 * t)


def test_round_off_negatives_are_clipped_to_zero(kit, make_study):
    """-0.5 ppm CO is within the 1e-6 round-off tolerance (histories.ROUND_OFF, common practice): read as 0."""
    csv = kit.with_cell(kit.csv, 3, "CO_hall [ppm]", "-0.5")
    data, _ = read_scenario(load_study(make_study(csv=csv)).scenarios[0])
    assert data.series["co"][0][3] == 0.0
    assert data.series["co"][0][4] == pytest.approx(5 * 40 * 1e-6)


def test_oxygen_slightly_above_ambient_is_accepted(kit, make_study):
    """21.0 percent is within the 0.2 percent sensor tolerance over 20.9 percent (common practice)."""
    csv = kit.with_cell(kit.csv, 0, "O2_hall [percent]", "21.0")
    data, _ = read_scenario(load_study(make_study(csv=csv)).scenarios[0])
    assert data.series["o2"][0][0] == pytest.approx(0.21)


# --------------------------------------------------------------------------- warnings, not errors


def _kelvin_csv(kit) -> str:
    """T_stair labelled degC but written in kelvin for its first rows (293.15 K = 20 degC)."""
    text = kit.with_cell(kit.csv, 0, "T_stair [degC]", "293.15")
    return kit.with_cell(text, 1, "T_stair [degC]", "293.65")


def test_celsius_column_that_looks_like_kelvin_is_a_warning(kit, make_study, cli):
    study = make_study(csv=_kelvin_csv(kit))
    status, out, err = cli(["validate", study])
    assert status == 0
    assert "OK" in out
    assert f"fire-a.csv:{kit.csv_line(0)} column 'T_stair [degC]' row 1: warning: first value 293.15 degC " \
           "looks like kelvin" in err


def test_celsius_column_that_looks_like_kelvin_still_runs(kit, make_study):
    loaded = load(make_study(csv=_kelvin_csv(kit)))
    warnings = without_sign_default(loaded.warnings)
    assert [w.where.endswith("column 'T_stair [degC]' row 1") for w in warnings] == [True, False]
    # and the plausibility screen says the 60 degC limit is already exceeded at ignition there
    assert "location 'stair-l1'" in warnings[1].message and "[limit-at-ignition;" in warnings[1].message
    results, _ = build_results(loaded, RunOptions(samples=50, pdf=False, html=False))
    assert any("looks like kelvin" in w for w in results["warnings"])
    # the run is done on the numbers as labelled: 293.15 degC is over the 60 degC limit at t = 0
    stair = results["scenarios"][0]["locations"][1]
    assert stair["criteria"]["temperature"]["raw_s"] == 0.0


def test_celsius_warning_is_also_given_for_a_unit_from_the_study(kit, make_study):
    csv = _kelvin_csv(kit).replace("T_stair [degC]", "T_stair")
    text = kit.study.replace("temperature: T_stair", "temperature: {column: T_stair, unit: degC}")
    _, warnings = read_scenario(load_study(make_study(text, csv)).scenarios[0])
    assert len(warnings) == 1 and "looks like kelvin" in warnings[0].message


def test_co_in_mol_per_mol_above_a_tenth_is_a_warning(kit, make_study, cli):
    """CO labelled mol/mol whose values exceed 0.1 (10 percent) is a likely unit slip: warn, do not stop."""
    csv = kit.csv.replace("CO_hall [ppm]", "CO_hall [mol/mol]")
    rows = kit.rows()
    for i, r in enumerate(rows):
        r[2] = f"{0.0005 * i:g}"       # up to 0.0295 mol/mol
    rows[40][2] = "0.15"              # one value above 0.1
    header = csv.splitlines()[0].split(",")
    study = make_study(csv=kit.csv_text(header, rows))
    status, out, err = cli(["validate", study])
    assert status == 0
    assert f"fire-a.csv:{kit.csv_line(40)} column 'CO_hall [mol/mol]' row 41: warning: CO above 0.1 mol/mol" in err
    loaded = load(study)
    assert len(without_sign_default(loaded.warnings)) == 1
    assert loaded.data["fire-a"].series["co"][0][40] == pytest.approx(0.15)


def test_warnings_are_shown_with_errors(kit, make_study):
    """When a study has errors, its warnings still come with them (one message for everything)."""
    csv = kit.with_cell(_kelvin_csv(kit), 5, "CO_hall [ppm]", "x")
    with pytest.raises(InputError) as exc:
        load(make_study(csv=csv))
    kinds = sorted(p.warning for p in without_sign_default(exc.value.problems))
    assert kinds == [False, True]
    assert "warning: first value 293.15 degC looks like kelvin" in str(exc.value)


# --------------------------------------------------------------------------- files with no data rows


def test_header_only_csv(kit, make_study):
    with pytest.raises(InputError, match="data row"):
        load(make_study(csv=kit.csv.splitlines()[0] + "\n"))


def test_units_row_and_no_data(kit, make_study):
    header = ",".join(h.split(" [")[0] for h in kit.header)
    text = kit.study.replace("time: {column: Time, unit: s}", "time: Time\n    units_row: true")
    with pytest.raises(InputError, match="data row"):
        load(make_study(text, header + "\ns,degC,ppm,percent,percent,1/m,degC\n"))


def test_header_only_csv_with_co_in_mol_per_mol(kit, make_study):
    header = "Time,T_hall [K],CO_hall [mol/mol],CO2_hall [percent],O2_hall [percent],K_hall [1/m],T_stair [K]\n"
    with pytest.raises(InputError, match="data row"):
        load(make_study(csv=header))


def test_one_data_row_is_too_few(kit, make_study):
    csv = "\n".join(kit.csv.splitlines()[:2]) + "\n"
    with pytest.raises(InputError) as exc:
        load(make_study(csv=csv))
    assert "1 data row(s); expected at least two times" in str(exc.value)


# --------------------------------------------------------------------------- property tests


@PROPERTY
@given(blob=st.binary(max_size=400) | st.text(max_size=300).map(lambda s: s.encode("utf-8")))
@example(blob=b"")
@example(blob=b"scenarios: 5\n")
@example(blob=b"criteria: general-2m\nscenarios: [{id: a}]\n")
@example(blob=b"\xff\xfe\x00\x01")
@example(blob=b"- a\n- b\n")
@example(blob=b"egress: [{id: r, occupants: 1, path: [{door: {}}]}]\n")
def test_random_study_bytes_load_or_input_error(kit, scratch, blob):
    """Random bytes as the study YAML (beside a valid CSV): a Loaded or an InputError, nothing else."""
    study = kit.write(scratch("bytes"))
    study.write_bytes(blob)
    try:
        loaded = load(study)
    except InputError as exc:
        assert exc.problems and all(p.where and p.message for p in exc.problems)
    else:
        assert isinstance(loaded.study, Study)



# scalar replacements for any value of the valid study: numbers, text, unit strings, file names
_SCALARS = (st.none() | st.booleans() | st.integers(-10**6, 10**6) | st.floats(allow_nan=True, allow_infinity=True)
            | st.sampled_from(["", "60 s", "-5 s", "0 s", "1e400 s", "1.5 min", "60 degC", "0.5 m", "-1 m", "abc",
                               "fire-a.csv", "study.yaml", "general-2m", ".", "hall-l1", "stair-l1", "fire-a",
                               "T_hall", "Time", "degC", "ppm", "percent", "lognormal", "door", "sum", "max",
                               "along-route"])
            | st.text(max_size=12))


def _paths(obj, prefix=()):
    out = [prefix] if prefix else []
    if isinstance(obj, dict):
        for k, v in obj.items():
            out += _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            out += _paths(v, prefix + (i,))
    return out


def _mutated(doc, path, action, value):
    import copy
    doc = copy.deepcopy(doc)
    parent = doc
    for k in path[:-1]:
        parent = parent[k]
    last = path[-1]
    if action == "set":
        parent[last] = value
    elif action == "delete":
        del parent[last]
    else:  # add an unknown key beside it
        if isinstance(parent, dict):
            parent[str(value)[:10] or "x"] = value
        else:
            parent.append(value)
    return doc


@PROPERTY
@given(data=st.data())
def test_random_scalar_anywhere_in_the_study_load_or_input_error(kit, scratch, data):
    """The valid study with one value set to a random scalar, deleted, or an extra key added.

    Values are scalars only: a list or mapping where an id is expected crashes today (see
    the xfail tests in test_study_errors.py); widen this to nested values once fixed.
    """
    import yaml

    doc = yaml.safe_load(kit.study)
    paths = _paths(doc)
    path = data.draw(st.sampled_from(paths), label="path")
    action = data.draw(st.sampled_from(["set", "delete", "add"]), label="action")
    value = data.draw(_SCALARS, label="value")
    text = yaml.safe_dump(_mutated(doc, path, action, value), sort_keys=False, allow_unicode=True)
    study = kit.write(scratch("scalar"), text)
    try:
        loaded = load(study)
    except InputError as exc:
        assert exc.problems and all(p.where and p.message for p in exc.problems)
    else:
        assert loaded.data and all(d.t_s.size >= 2 for d in loaded.data.values())


_NAMES = ["Time", "T1", "CO1", "K1", "O2", "V", "x", "T1 ", " CO1", "time"]
_UNITS = ["s", "min", "degC", "K", "degF", "ppm", "percent", "%", "mol/mol", "1/m", "m", "", "degZ", "kg",
          "1/0", "[", "m^", "**", "nan", "inf", "2", "delta_degC", "°C"]
# printable characters but no quote or line break, so the number of data rows is the number drawn
_CELL_CHARS = "".join(c for c in string.printable if c not in '"\n\r')
_CELLS = (st.sampled_from(["0", "1", "10", "20", "300", "-1", "1e3", "1e400", "", " ", "nan", "NaN", "inf",
                           "-inf", "x", "1,2", "0.5", "1e-7", "2e6", "-300"])
          | st.floats(allow_nan=True, allow_infinity=True).map(repr)
          | st.text(alphabet=_CELL_CHARS, max_size=6))

_CSV_STUDY = """\
title: random CSV (illustrative)
criteria: general-2m
scenarios:
  - id: fire-a
    histories: fire-a.csv
    time: Time
    units_row: {units_row}
    locations:
      - id: a
        temperature: T1
        co: CO1
        extinction: K1
        o2: O2
      - id: b
        visibility: V
egress:
  - id: r
    occupants: 10
    detection: {{heat: {{location: a, rti: 50, activation: 68 degC, velocity: 1 m/s}}}}
    alarm: 0 s
    premovement: 30 s
    path: [{{door: {{width: 1 m}}}}]
    exposed_at: [a, b]
"""


@st.composite
def random_csv(draw):
    """A header of 1-7 names (some with a random unit in brackets), rows of random cells.

    Rows are ragged (missing and extra cells; a cell may hold a comma). No cell holds a
    quote or a line break and the first cell of each row is never blank, so pandas sees
    as many data rows as are drawn, and there is always at least one data row after the
    units row: files with no data rows crash today (see the xfail tests above); widen
    this once fixed.
    """
    ncol = draw(st.integers(1, 7))
    header = []
    for _ in range(ncol):
        name = draw(st.sampled_from(_NAMES) | st.text(alphabet=string.ascii_letters + " _-", max_size=6))
        if draw(st.booleans()):
            name = f"{name} [{draw(st.sampled_from(_UNITS) | st.text(max_size=5))}]"
        header.append(name.replace(",", "").replace('"', "").replace("\n", "").replace("\r", ""))
    units_row = draw(st.booleans())
    nrows = draw(st.integers(1 + units_row, 8))
    rows = []
    for _ in range(nrows):
        width = draw(st.integers(1, ncol + 1))
        first = draw(st.sampled_from(["0", "10", "20", "5", "x", "-1", "1e400"]))
        rows.append([first] + [draw(_CELLS) for _ in range(width - 1)])
    if units_row:
        rows[0] = [draw(st.sampled_from(_UNITS[:-8]) | st.just("s")) for _ in range(ncol)]
        rows[0][0] = rows[0][0] or "s"
    return header, rows, units_row


@PROPERTY
@given(csv=random_csv())
@example(csv=(["Time [s]", "T1 [degC]", "CO1 [ppm]", "K1 [1/m]", "O2 [percent]", "V [m]"],
              [["0", "20", "0", "0", "20.9", "30"], ["10", "25", "100", "0.1", "20.5", "20"],
              ["20", "80", "500", "0.5", "19", "5"]], False))
@example(csv=(["Time", "T1", "CO1", "K1", "O2", "V"],
              [["s", "degC", "ppm", "1/m", "percent", "m"], ["0", "20", "0", "0", "20.9", "30"],
               ["10", "25", "100", "0.1", "20.5", "20"]], True))
def test_random_csv_read_or_input_error(kit, scratch, csv):
    """Random headers, cells, missing cells and units: read_scenario and pipeline.load succeed or raise InputError."""
    header, rows, units_row = csv
    text = "\n".join(",".join(r) for r in [header] + rows) + "\n"
    study = kit.write(scratch("csv"), _CSV_STUDY.format(units_row=str(units_row).lower()), text)
    spec = load_study(study).scenarios[0]
    try:
        data, warnings = read_scenario(spec)
    except InputError as exc:
        assert exc.problems and all(p.where and p.message for p in exc.problems)
        assert any("fire-a.csv" in p.where for p in exc.problems)
    else:
        assert np.all(np.diff(data.t_s) > 0)
        for key, arr in data.series.items():
            assert np.isfinite(arr[data.has(key)]).all()
    try:
        load(study)
    except InputError:
        pass
