"""Issue 23: basis of design, sign-off, heights, design-fire heat release, range warnings.

Study keys ``basis``, ``sign_off``, ``locations[].height`` and ``design_fire.hrr`` (contract,
"Added in turn 3"); the heat-release curve's t-squared fit against the NFPA 72 growth
classes; which validated-range excursions bear on a verdict; the one hand calculation that
``validate --explain`` and the report share. Every number in the studies below is
invented (illustrative).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from egressmargin.hrr import GROWTH_CLASSES_S, describe_growth, growth_alpha, read_curve
from egressmargin.errors import InputError
from egressmargin.pipeline import RunOptions, _mark_bearing, build_results, load

BASIS = """\
basis:
  building: Two-storey test hall (invented)
  occupant_load: 120 persons, seat count (illustrative)
  fire_model: {name: Example model (invented), version: "1.0", grid: 0.1 m}
  premovement_source: invented for the test
  acceptance_source: invented for the test
sign_off: {engineer: I. N. Vented (invented), licence: X-1, organisation: Example Ltd (invented), date: 2026-01-31}
"""


def _study(kit, extra_top="", hall_extra="", design_fire=""):
    text = kit.study.replace("criteria: general-2m\n", "criteria: general-2m\n" + extra_top)
    text = text.replace("      - id: hall-l1\n", "      - id: hall-l1\n" + hall_extra)
    if design_fire:
        text = text.replace("    time: {column: Time, unit: s}\n",
                            "    time: {column: Time, unit: s}\n" + design_fire)
    return text


# ------------------------------------------------------------------------------- t-squared

def test_growth_classes_are_nfpa72_annex_b():
    # NFPA 72 (2019) Annex B: alpha = 1055 kW / t_g^2 with t_g 600, 300, 150, 75 s, i.e.
    # 0.00293, 0.01172, 0.04689, 0.1876 kW/s^2 (SFPE Handbook tables; from memory)
    assert GROWTH_CLASSES_S == {"slow": 600.0, "medium": 300.0, "fast": 150.0, "ultra-fast": 75.0}
    for name, alpha in (("slow", 0.00293), ("medium", 0.01172), ("fast", 0.04689), ("ultra-fast", 0.1876)):
        assert growth_alpha(GROWTH_CLASSES_S[name]) == pytest.approx(alpha, rel=2e-3), name


@pytest.mark.parametrize("name", ["slow", "medium", "fast", "ultra-fast"])
def test_fit_recovers_the_alpha_of_a_capped_t_squared_fire(name):
    """Closed form: Q = alpha t^2 capped at 2 MW; least squares through the origin returns alpha."""
    alpha = growth_alpha(GROWTH_CLASSES_S[name])
    t = np.arange(0.0, 1800.0, 5.0)
    q = np.minimum(alpha * t ** 2, 2000.0)
    g = describe_growth(t, q)
    assert g["alpha_kw_s2"] == pytest.approx(alpha, rel=1e-5)
    assert g["nearest_class"] == name and g["class_ratio"] == pytest.approx(1.0, abs=1e-3)
    assert g["peak_kw"] == pytest.approx(2000.0)
    assert g["peak_s"] == pytest.approx(t[np.argmax(q >= 2000.0)])       # first time at the peak
    assert g["t_g_s"] == pytest.approx(GROWTH_CLASSES_S[name], rel=1e-4)  # 1055 kW reached at t_g


def test_nearest_class_between_two_classes_is_nearest_in_ratio():
    # alpha 2.5x the medium alpha is 0.625x the fast one: log ratio is nearer fast
    a = 2.5 * growth_alpha(300.0)
    t = np.linspace(0.0, 300.0, 61)
    g = describe_growth(t, a * t ** 2)
    assert g["nearest_class"] == "fast" and g["class_ratio"] == pytest.approx(0.625, abs=1e-3)


def test_read_curve_converts_units_with_pint(tmp_path):
    p = tmp_path / "hrr.csv"
    p.write_text("Time [min],Q [MW]\n0,0\n1,0.5\n2,1.5\n", encoding="utf-8")
    t, q = read_curve(p, "Time", None, "Q", None, "test")
    assert t.tolist() == [0.0, 60.0, 120.0]              # pint: 1 min = 60 s
    assert q.tolist() == pytest.approx([0.0, 500.0, 1500.0])   # pint: 1 MW = 1000 kW


def test_read_curve_refuses_a_column_without_unit_and_a_bad_cell(tmp_path):
    p = tmp_path / "hrr.csv"
    p.write_text("Time [s],Q\n0,0\n10,x\n", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        read_curve(p, "Time", None, "Q", None, "scenarios[0].design_fire.hrr", shown="hrr.csv")
    msg = str(exc.value)
    assert "hrr.csv:1" in msg and "column 'Q' has no unit" in msg and "Q [kW]" in msg
    with pytest.raises(InputError) as exc:
        read_curve(p, "Time", None, "Q", "kW", "here", shown="hrr.csv")
    assert "hrr.csv:3" in str(exc.value) and "found 'x'; expected a finite number" in str(exc.value)
    p.write_text("Time [s],Q [kW]\n0,0\n10,-5\n", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        read_curve(p, "Time", None, "Q", None, "here", shown="hrr.csv")
    assert "hrr.csv:3" in str(exc.value) and "negative" in str(exc.value)


# ------------------------------------------------------------------------ study and results

def test_basis_sign_off_height_and_hrr_reach_results(kit, make_study):
    hrr = kit.csv_text(header=["Time [s]", "HRR_a [kW]"],
                       rows=[[str(10 * i), f"{0.0469 * (10 * i) ** 2:.3f}"] for i in range(40)])
    text = _study(kit, BASIS, "        height: 1.8 m\n",
                  "    design_fire: {growth: fast, hrr: {file: hrr.csv, time: Time, column: HRR_a}}\n")
    study = make_study(text, extra={"hrr.csv": hrr})
    opts = RunOptions(samples=50, pdf=False, html=False)
    res, plots = build_results(load(study, opts), opts)
    assert res["study"]["basis"]["fire_model"] == {"name": "Example model (invented)", "version": "1.0",
                                                   "grid": "0.1 m"}
    assert res["study"]["sign_off"]["date"] == "2026-01-31"        # a YAML date kept as ISO text
    locs = {loc["id"]: loc for loc in res["scenarios"][0]["locations"]}
    assert locs["hall-l1"]["height_m"] == 1.8 and locs["stair-l1"]["height_m"] is None
    sc = res["scenarios"][0]
    assert sc["design_fire"] == {"growth": "fast"}
    assert sc["hrr"]["nearest_class"] == "fast" and sc["hrr"]["source"] == "hrr.csv"
    assert plots["fire-a"]["hrr"]["q_kw"].max() == pytest.approx(0.0469 * 390 ** 2, rel=1e-4)
    roles = {i["path"]: i["role"] for i in res["inputs"]}
    assert roles["hrr.csv"] == "heat-release rate (fire-a)"
    # no date in results.json unless the study gives one: the same bytes on any day
    text2 = _study(kit, BASIS.replace(", date: 2026-01-31", ""))
    res2, _ = build_results(load(make_study(text2, name="s2.yaml"), opts), opts)
    assert "date" not in res2["study"]["sign_off"]
    assert json.dumps(res2["study"]).count("2026") == 0


def test_bad_basis_sign_off_height_and_hrr_are_located(kit, make_study, expect_input_error):
    text = _study(kit, "basis: {building: [a, b], fire_model: text}\nsign_off: {licence: X}\n",
                  "        height: tall\n", "    design_fire: {hrr: {colum: HRR}}\n")
    err = expect_input_error(make_study(text))
    assert "basis.building: error: found ['a', 'b']; expected text" in err
    assert "basis.fire_model: error: found 'text'; expected a mapping (the fire model" in err
    assert "sign_off: error: missing 'engineer'" in err
    assert "scenarios[0].locations[0].height: error: found 'tall'" in err
    assert "design_fire.hrr.colum: error: unknown key 'colum'" in err and "did you mean 'column'" in err
    # a column the histories lack: found when the files are read, with file and line
    err = expect_input_error(make_study(_study(kit, "", "", "    design_fire: {hrr: {column: NOPE}}\n"),
                                        name="s2.yaml"))
    assert "fire-a.csv:1" in err and "column 'NOPE' not found" in err and "design_fire.hrr" in err


def test_report_prints_not_stated_and_not_signed_off(kit, make_study):
    from egressmargin.report.render import build_context

    opts = RunOptions(samples=50, pdf=False, html=False)
    res, _ = build_results(load(make_study(_study(kit)), opts), opts)
    ctx = build_context(res, {}, generated="2026-05-06 07:08")
    assert [r["value"] for r in ctx["basis_rows"]][:2] == ["not stated", "not stated"]
    assert ctx["basis_rows"][2]["value"] == "name: not stated; version: not stated; grid: not stated"
    assert ctx["sign_off"] is None
    assert ctx["heights"]["missing"] == 2          # hall-l1 and stair-l1, each once
    res["study"]["sign_off"] = {"engineer": "E"}
    ctx = build_context(res, {}, generated="2026-05-06 07:08")
    assert ctx["sign_off"]["date"] == "2026-05-06" and not ctx["sign_off"]["date_given"]
    assert ctx["sign_off"]["licence"] == "not stated"


# --------------------------------------------------------------------------- range warnings

def test_only_excursions_before_a_governing_crossing_bear_on_a_verdict():
    recs = [{"location": "a", "criterion": "fed_toxic", "first_outside_s": 100.0},   # before 212 s
            {"location": "a", "criterion": "fed_toxic", "first_outside_s": 300.0},   # after it
            {"location": "a", "criterion": "temperature", "first_outside_s": 10.0},  # not governing
            {"location": "b", "criterion": "fed_toxic", "first_outside_s": 10.0}]    # not on the route
    routes = [{"id": "r1", "governing_location": "a", "governing_criterion": "fed_toxic",
               "aset_s": {"p05": 150.0, "p50": 212.0, "p95": 289.0}},
              {"id": "r2", "governing_location": None, "governing_criterion": None,
               "aset_s": {"p05": None, "p50": None, "p95": None}}]
    _mark_bearing(recs, routes)
    assert [r["bears_on_verdict"] for r in recs] == [True, False, False, False]
    assert recs[0]["routes"] == ["r1"] and recs[0]["governing_crossing_s"] == 212.0


# ------------------------------------------------------------------------ one hand method

def test_explain_and_the_report_print_the_same_hand_calculation(cli, kit, make_study):
    study = make_study()
    status, out, _ = cli(["validate", study, "--explain"])
    assert status == 0
    opts = RunOptions(samples=50, pdf=False, html=False)
    res, _ = build_results(load(study, opts), opts)
    hand = res["scenarios"][0]["routes"][0]["movement"]["hand"]
    assert hand["text"] in out
    # 120 persons over the least capacity, by hand: N / Fc
    assert hand["flow_s"] == pytest.approx(120 / hand["capacity_p_s"], rel=1e-3)
    assert hand["total_s"] == pytest.approx(hand["travel_s"] + hand["flow_s"], abs=2e-3)


def test_a_note_shared_by_elements_is_printed_once():
    from egressmargin.egress.summary import grouped_notes
    from egressmargin.report.render import _grouped_movement_notes

    note = "stair 190/250 mm is not a row of the stair table"
    assert grouped_notes([(4, note), (5, note)]) == [f"elements 4, 5: {note}"]
    assert _grouped_movement_notes([f"path element 4: {note}", f"path element 5: {note}", "other"]) == \
        [f"path elements 4, 5: {note}", "other"]
