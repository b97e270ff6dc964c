"""The plausibility screen (egressmargin.plausibility): each slip of issue 20's list "Implausible
series pass validate silently" gives a warning naming the series (or exit 2), the same from
``validate`` and ``run``; a location can acknowledge a finding with ``accept_warnings``.

The fixture (tests/conftest.py, invented illustrative ramps) has none of these slips and must
stay quiet. Thresholds are the module's named constants; each test's data is far beyond them.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from egressmargin import plausibility as pl
from egressmargin.pipeline import RunOptions, load
from egressmargin.resources import resource_dir


def _csv(kit, column: str, f, header: str | None = None, extra: tuple[str, object] | None = None) -> str:
    """The fixture CSV with ``column``'s values replaced by f(t) (and its header by ``header``),
    and optionally an extra column (header, f)."""
    rows = kit.rows()
    hdr = list(kit.header)
    j = hdr.index(column)
    if header is not None:
        hdr[j] = header
    for row in rows:
        t = float(row[0])
        if f is not None:
            row[j] = repr(float(f(t)))
        if extra is not None:
            row.append(repr(float(extra[1](t))))
    if extra is not None:
        hdr.append(extra[0])
    return kit.csv_text(hdr, rows)


def _both(cli, study, tmp_path):
    """(validate stderr, run stderr, results.json) of a study that loads."""
    status, _, verr = cli(["validate", study])
    assert status == 0, verr
    out = tmp_path / "out"
    status, _, rerr = cli(["run", study, "--no-pdf", "--quiet", "--out", out, "--samples", "20"])
    assert status == 0, rerr
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    return verr, rerr, res


def _warned(cli, study, tmp_path, code: str, *names: str) -> dict:
    """Both commands warn with ``code`` and every one of ``names``; the same lines; results.json lists it."""
    verr, rerr, res = _both(cli, study, tmp_path)
    lines = [ln for ln in verr.splitlines() if f"[{code};" in ln]
    assert lines, f"no {code} warning from validate:\n{verr}"
    for name in names:
        assert any(name in ln for ln in lines), f"{name!r} not named in {lines}"
    assert [ln for ln in rerr.splitlines() if f"[{code};" in ln] == lines      # run says the same
    assert [w for w in res["warnings"] if f"[{code};" in w] == lines
    found = [p for p in res["plausibility"] if p["code"] == code]
    assert found and not any(p["acknowledged"] for p in found)
    return found[0]


# ------------------------------------------------------------------ the fixture and the demo stay quiet

def test_fixture_study_has_no_finding(good_study):
    assert load(good_study).findings == []


def test_demo_study_has_no_finding():
    loaded = load(resource_dir("demo") / "study.yaml", RunOptions(pdf=False, html=False))
    assert loaded.findings == []


# ------------------------------------------------------------------ issue 20 cases, through the CLI

def test_o2_fraction_labelled_percent(kit, make_study, cli, tmp_path):
    """0.209 in a column labelled percent is 0.209 %: far below any ambient air (was ASET 1 s, no warning)."""
    study = make_study(csv=_csv(kit, "O2_hall [percent]", lambda t: 0.209 - 0.00005 * t))
    f = _warned(cli, study, tmp_path, "o2-fraction-as-percent", "location 'hall-l1'", "o2", "O2_hall")
    assert f["series"] == "o2" and f["location"] == "hall-l1" and "0.209 %" in f["message"]


def test_layer_height_in_mm_labelled_m(kit, make_study, cli, tmp_path):
    """A layer falling from 3000 mm, labelled m, never reaches 1.8 'm' (not conservative)."""
    text = kit.study.replace("        extinction: K_hall\n", "        extinction: K_hall\n        layer_height: Z_hall\n")
    study = make_study(text, _csv(kit, "Time", None, extra=("Z_hall [m]", lambda t: 3000.0 - 3.0 * t)))
    f = _warned(cli, study, tmp_path, "layer-height-too-high", "layer_height", "Z_hall", "3000 m")
    assert f["column"] == "Z_hall [m]"


def test_layer_height_above_the_locations_own_ceiling(kit, make_study, cli, tmp_path):
    """A profile's ceiling is the location's own geometry: a 20 m layer under a 4 m ceiling is a slip."""
    text = kit.study.replace("        extinction: K_hall\n", "        extinction: K_hall\n        layer_height: Z_hall\n"
                             "        temperature_profile: {columns: [T_stair, T_hall], heights: [1 m, 2 m], ceiling: 4 m, "
                             "unit: degC}\n")
    study = make_study(text, _csv(kit, "Time", None, extra=("Z_hall [m]", lambda t: 20.0 - 0.02 * t)))
    _warned(cli, study, tmp_path, "layer-height-too-high", "ceiling (4 m")


def test_co_percent_labelled_ppm(kit, make_study, cli, tmp_path):
    """CO of 5t ppm written in percent (5t/1e4) under a ppm label: the toxic dose stays ~0 (not conservative).
    At the CO2 peak (2.99 %) CO reads 0.295 ppm: CO/CO2 = 1e-5, below CO_CO2_RATIO_MIN."""
    study = make_study(csv=_csv(kit, "CO_hall [ppm]", lambda t: 5.0 * t / 1e4))
    _warned(cli, study, tmp_path, "co-percent-as-ppm", "co (column 'CO_hall [ppm]')", "CO/CO2")


def test_visibility_mapped_as_extinction(kit, make_study, cli, tmp_path):
    """V = min(30, 8/(0.002 t)) m mapped as extinction: large at ignition and falling (was ASET 0 s)."""
    study = make_study(csv=_csv(kit, "K_hall [1/m]", lambda t: min(30.0, 8.0 / (0.002 * t)) if t else 30.0))
    _warned(cli, study, tmp_path, "extinction-looks-like-visibility", "extinction", "K_hall")


def test_extinction_mapped_as_visibility(kit, make_study, cli, tmp_path):
    """K = 0.002 t 1/m mapped as visibility: 0 at ignition and rising."""
    study = make_study(kit.study.replace("extinction: K_hall", "visibility: {column: K_hall, unit: m}"),
                       _csv(kit, "K_hall [1/m]", None, header="K_hall"))
    _warned(cli, study, tmp_path, "visibility-looks-like-extinction", "visibility", "K_hall")


def test_start_temperature_15_K_above_stated_ambient(kit, make_study, cli, tmp_path):
    text = kit.study.replace("    time: {column: Time, unit: s}\n",
                             "    time: {column: Time, unit: s}\n    ambient: {temperature: 5 degC}\n")
    study = make_study(text)
    f = _warned(cli, study, tmp_path, "start-temperature-off-ambient", "temperature", "T_hall", "15 K")
    assert "20 degC" in f["message"]


def test_limit_already_exceeded_at_ignition(kit, make_study, cli, tmp_path):
    """T = 70 + 0.2 t degC: the 60 degC limit (general-2m) is exceeded at t = 0."""
    study = make_study(csv=_csv(kit, "T_hall [degC]", lambda t: 70.0 + 0.2 * t))
    f = _warned(cli, study, tmp_path, "limit-at-ignition", "location 'hall-l1'", "temperature")
    assert f["series"].startswith("temperature")


def test_time_in_minutes_labelled_seconds(kit, make_study, cli, tmp_path):
    """Times 0 to 9.83 min labelled s: the histories 'end at 9.83 s' (was accepted silently)."""
    study = make_study(csv=_csv(kit, "Time", lambda t: t / 60.0))
    f = _warned(cli, study, tmp_path, "time-minutes-as-seconds", "time (column 'Time')", "9.833 s")
    assert f["location"] is None


def test_one_column_mapped_at_two_locations(kit, make_study, cli, tmp_path):
    study = make_study(kit.study.replace("temperature: T_stair", "temperature: T_hall"))
    f = _warned(cli, study, tmp_path, "column-mapped-twice", "location 'stair-l1'", "T_hall", "'hall-l1'")
    assert f["location"] == "stair-l1"


def test_two_locations_with_identical_series(kit, make_study, cli, tmp_path):
    text = kit.study.replace("        temperature: T_stair\n",
                             "        temperature: T_stair\n      - id: stair-l2\n        temperature: T_stair2\n")
    study = make_study(text, _csv(kit, "Time", None, extra=("T_stair2 [degC]", lambda t: 20 + 0.05 * t)))
    _warned(cli, study, tmp_path, "identical-series", "location 'stair-l2'", "'stair-l1'")


@pytest.mark.parametrize("stair, named", [
    ("riser: 18 mm, tread: 279 mm", "stair riser 18 mm is outside"),          # an 18 mm riser: refused
    ("riser: 178 mm, tread: 2790 mm", "stair tread 2790 mm is outside"),
    ("plan_length: 9.5 m, rise: 36 m, width: 1.2 m, riser: 178 mm, tread: 279 mm", "need a plan length"),
])
def test_stair_geometry_outside_the_table_or_its_own_rise(kit, make_study, expect_input_error, stair, named):
    """Riser/tread against the stair table's span (SFPE Handbook ch. 59 rows, 165-191 mm and 254-330 mm)
    and against the stair's own rise and plan length: 36 m / 178 mm = 202 risers need >= 201 x 0.279 m."""
    if "plan_length" in stair:
        text = kit.study.replace("{stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}",
                                 "{stair: {" + stair + "}}")
    else:
        text = kit.study.replace("riser: 178 mm, tread: 279 mm", stair)
    err = expect_input_error(make_study(text))
    assert named in err and "study.yaml:" in err


def test_stair_consistent_with_its_rise_passes(kit, make_study, cli):
    """3.6 m / 178 mm = 20.2 risers: 19.2 treads of 279 mm = 5.4 m <= 9.5 m plan length (landings)."""
    text = kit.study.replace("{stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}",
                             "{stair: {plan_length: 9.5 m, rise: 3.6 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}")
    status, _, err = cli(["validate", make_study(text)])
    assert status == 0 and "warning: plan length" not in err, err


def test_o2_above_100_percent_is_an_error(kit, make_study, expect_input_error):
    """Any fraction above 100 % is an input error (histories._plausible)."""
    study = make_study(csv=_csv(kit, "CO2_hall [percent]", lambda t: 150.0))
    assert "above 100 percent" in expect_input_error(study)


# ------------------------------------------------------------------ acknowledging a finding

def test_accept_warnings_silences_and_records(kit, make_study, cli, tmp_path):
    text = kit.study.replace("        extinction: K_hall\n",
                             "        extinction: K_hall\n        accept_warnings: [o2-fraction-as-percent]\n")
    study = make_study(text, _csv(kit, "O2_hall [percent]", lambda t: 0.209 - 0.00005 * t))
    verr, rerr, res = _both(cli, study, tmp_path)
    assert "o2-fraction-as-percent" not in verr + rerr
    assert not any("o2-fraction-as-percent" in w for w in res["warnings"])
    [ack] = res["acknowledged_warnings"]
    assert ack["scenario"] == "fire-a" and ack["location"] == "hall-l1" and ack["code"] == "o2-fraction-as-percent"
    assert [p["acknowledged"] for p in res["plausibility"] if p["code"] == ack["code"]] == [True]


def test_unknown_accept_warnings_code_is_an_error(kit, make_study, expect_input_error):
    text = kit.study.replace("        extinction: K_hall\n",
                             "        extinction: K_hall\n        accept_warnings: [o2-as-percent]\n")
    err = expect_input_error(make_study(text))
    assert "unknown warning code 'o2-as-percent'" in err and "o2-fraction-as-percent" in err
    assert "accept_warnings" in err or "study.yaml:" in err


# ------------------------------------------------------------------ the pure checks at their thresholds

def test_start_value_thresholds():
    # O2 0.4 percentage points from 20.9 % is within O2_START_TOLERANCE (0.5); 0.6 is not
    assert pl.o2_checks("a", "x", None, [0.205, 0.2], None) == []
    assert [f.code for f in pl.o2_checks("a", "x", None, [0.203, 0.2], None)] == ["start-o2-off-ambient"]
    # CO 10 ppm at ignition is background; 100 ppm is not (CO_START_MAX = 20 ppm)
    assert pl.co_checks("a", "x", None, [10e-6, 1e-3], "ppm") == []
    assert [f.code for f in pl.co_checks("a", "x", None, [100e-6, 1e-3], "ppm")] == ["start-co-nonzero"]
    # smoke at ignition: K 0.01 1/m is clean air; 0.2 1/m is smoke before the fire
    assert pl.smoke_checks("a", "x", "extinction", None, [0.01, 0.5]) == []
    assert [f.code for f in pl.smoke_checks("a", "x", "extinction", None, [0.2, 0.5])] == ["start-smoke-nonzero"]
    # temperature 4 K from the stated ambient is within the 5 K tolerance; none stated: no check
    assert pl.temperature_checks("a", "x", None, [24.0], 20.0) == []
    assert pl.temperature_checks("a", "x", None, [40.0], None) == []


def test_co_co2_ratio_needs_a_co2_rise():
    """No CO2 rise of CO2_RISE_FOR_RATIO (0.5 %): the ratio is not judged."""
    assert pl.co_checks("a", "x", None, np.zeros(3), "ppm", [0.0004, 0.001, 0.003]) == []
    assert [f.code for f in pl.co_checks("a", "x", None, np.zeros(3), "ppm", [0.0004, 0.01, 0.03])] \
        == ["co-percent-as-ppm"]
    assert pl.co_checks("a", "x", None, np.zeros(3), "percent", [0.0004, 0.01, 0.03]) == []   # only ppm labels


def test_end_time_rules():
    # 15 s < 60 s; 300 s is above both 60 s and a tenth of a 1200 s rough RSET
    assert [f.code for f in pl.end_checks("a", 15.0, "s", "Time", None, True)] == ["time-minutes-as-seconds"]
    assert pl.end_checks("a", 300.0, "s", "Time", 1200.0, True) == []
    assert [f.code for f in pl.end_checks("a", 100.0, "s", "Time", 1200.0, True)] == ["time-minutes-as-seconds"]
    assert pl.end_checks("a", 15.0, "min", "Time", None, False) == []     # a time unit that is not seconds


def test_stair_plan_length_far_beyond_its_treads_warns(kit, make_study, cli):
    """3.6 m / 178 mm = 20.2 risers x 279 mm = 5.6 m; 30 m of plan is more than STAIR_PLAN_EXCESS (3) times it."""
    text = kit.study.replace("{stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}",
                             "{stair: {plan_length: 30 m, rise: 3.6 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}")
    status, _, err = cli(["validate", make_study(text)])
    assert status == 0 and "warning: plan length 30 m is more than 3 times" in err, err


def test_stair_just_outside_the_table_within_one_inch_is_accepted(kit, make_study, cli):
    """A 150/300 mm stair is 15 mm below the table's lowest riser (165 mm): within STAIR_RANGE_TOLERANCE_M."""
    status, _, err = cli(["validate", make_study(kit.study.replace("riser: 178 mm, tread: 279 mm",
                                                                   "riser: 150 mm, tread: 300 mm"))])
    assert status == 0, err


# ------------------------------------------------------------------ the report

def test_report_lists_findings_where_routes_pass_and_the_acknowledged_ones(kit, make_study, cli, tmp_path):
    """A finding at a location a route passes is in the report's summary (it bears on a verdict);
    an acknowledged one is printed with the inputs, not as a warning (issue 20)."""
    study = make_study(csv=_csv(kit, "O2_hall [percent]", lambda t: 0.209 - 0.00005 * t))
    out = tmp_path / "out"
    status, _, err = cli(["run", study, "--no-pdf", "--html", "--quiet", "--out", out, "--samples", "20"])
    assert status == 0, err
    html = (out / "report.html").read_text(encoding="utf-8")
    summary = html[html.index('id="summary"'):html.index('id="basis"')]
    assert "Inputs that look implausible where the routes pass" in summary
    assert "north-stair" in summary and "o2-fraction-as-percent" in summary

    text = kit.study.replace("        extinction: K_hall\n",
                             "        extinction: K_hall\n        accept_warnings: [o2-fraction-as-percent]\n")
    acked = make_study(text, _csv(kit, "O2_hall [percent]", lambda t: 0.209 - 0.00005 * t), name="acked.yaml")
    out2 = tmp_path / "out2"
    status, _, err = cli(["run", acked, "--no-pdf", "--html", "--quiet", "--out", out2, "--samples", "20"])
    assert status == 0, err
    html = (out2 / "report.html").read_text(encoding="utf-8")
    assert "Inputs that look implausible where the routes pass" not in html
    assert "Plausibility findings acknowledged by the study" in html and "o2-fraction-as-percent" in html
