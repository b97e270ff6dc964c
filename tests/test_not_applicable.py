"""Criteria declared not applicable, with a reason (issue 20, "Not applicable, with a reason").

Contract (/work/shared/contract.md, "Added in turn 3"): a criteria override
``{<criterion>: {not_applicable: "<reason>"}}`` leaves the criterion out for the study and
results.json records ``criteria.not_applicable: {<criterion>: <reason>}``. An empty reason,
or a declaration mixed with the criterion's parameters, is an input error (exit 2, located).

The fixture study (tests/conftest.py, invented) has no irritant and no heat-flux or layer
series, so with the bundled general-2m set those criteria are "not assessed" at every location.
"""

from __future__ import annotations

import json

import pytest

ORIGINAL = "criteria: general-2m"
NA = ('criteria: {base: general-2m, fec_irritant: {not_applicable: "no halogenated or nitrogenous fuel"}, '
      'heat_flux: {not_applicable: "no radiant source near the routes"}, '
      'fed_heat: {not_applicable: "heat dose covered by the temperature limit"}, '
      'layer_height: {not_applicable: "single well-mixed volume"}}')


def _run(cli, study, out):
    status, stdout, err = cli(["run", study, "--no-pdf", "--out", out])
    assert status == 0, err
    return json.loads((out / "results.json").read_text())


def test_not_applicable_recorded_and_left_out(kit, make_study, cli, tmp_path):
    res = _run(cli, make_study(kit.study.replace(ORIGINAL, NA)), tmp_path / "out")
    na = res["criteria"]["not_applicable"]
    assert na == {"fec_irritant": "no halogenated or nitrogenous fuel",
                  "heat_flux": "no radiant source near the routes",
                  "fed_heat": "heat dose covered by the temperature limit",
                  "layer_height": "single well-mixed volume"}
    assert not set(na) & set(res["criteria"]["applied"])
    for loc in res["scenarios"][0]["locations"]:
        assert not set(na) & set(loc["criteria"])
    route = res["scenarios"][0]["routes"][0]
    # stair-l1 has temperature only, so some criteria stay not assessed there; none declared n/a is listed
    assert not {x["criterion"] for x in route["not_assessed"]} & set(na)
    assert not any(c in route["verdict_text"] for c in ("fec_irritant", "heat_flux", "layer_height"))


def test_without_declaration_the_same_criteria_are_not_assessed(kit, make_study, cli, tmp_path):
    """The counter-case: the bundled set alone reports fec_irritant as not assessed, and records an empty mapping."""
    res = _run(cli, make_study(), tmp_path / "out")
    assert res["criteria"]["not_applicable"] == {}
    route = res["scenarios"][0]["routes"][0]
    assert "fec_irritant" in {x["criterion"] for x in route["not_assessed"]}
    assert "fec_irritant" in route["verdict_text"]


def test_route_fully_covered_reads_as_a_plain_verdict(kit, make_study, cli, tmp_path):
    """Every criterion without series declared not applicable: the route's text no longer says what is missing."""
    text = kit.study.replace(ORIGINAL, NA).replace("exposed_at: [hall-l1, stair-l1]", "exposed_at: [hall-l1]")
    res = _run(cli, make_study(text), tmp_path / "out")
    route = res["scenarios"][0]["routes"][0]
    assert route["not_assessed"] == []
    assert "Not assessed" not in route["verdict_text"]


def test_report_lists_the_reason(kit, make_study, cli, tmp_path):
    from egressmargin.report import render_html

    html = render_html(_run(cli, make_study(kit.study.replace(ORIGINAL, NA)), tmp_path / "out"), {})
    assert "Not applicable in this study" in html
    assert "FEC, irritant" in html.split("Not applicable in this study")[1][:600]
    assert "no halogenated or nitrogenous fuel" in html


def test_validate_prints_the_declaration(kit, make_study, cli):
    status, out, err = cli(["validate", make_study(kit.study.replace(ORIGINAL, NA))])
    assert status == 0, err
    assert "'fec_irritant' not applicable: no halogenated or nitrogenous fuel" in out


@pytest.mark.parametrize("spec, culprit, words", [
    ('{not_applicable: ""}', "fec_irritant.not_applicable", "expected the reason"),
    ('{not_applicable: "  "}', "fec_irritant.not_applicable", "expected the reason"),
    ("{not_applicable: 3}", "fec_irritant.not_applicable", "found 3"),
    ("{not_applicable: null}", "fec_irritant.not_applicable", "found None"),
    ("{not_applicable: [a]}", "fec_irritant.not_applicable", "as text"),
    ('{not_applicable: "no such fuel", limit: 0.5}', "fec_irritant.limit", "beside not_applicable"),
])
def test_bad_declaration_is_a_located_input_error(kit, make_study, cli, expect_input_error, spec, culprit, words):
    text = kit.study.replace(ORIGINAL, f"criteria: {{base: general-2m, fec_irritant: {spec}}}")
    study = make_study(text)
    line = kit.line_of(text, "criteria:")
    status, _, verr = cli(["validate", study])
    assert status == 2
    err = expect_input_error(study)
    for msg in (verr, err):
        assert f"study.yaml:{line} criteria.{culprit}" in msg, msg
        assert words in msg


def test_in_a_criteria_file(kit, make_study, cli, tmp_path):
    crit = ("name: hall-set\ndescription: illustrative\nsources: [common practice]\ncriteria:\n"
            "  temperature: {limit: 60 degC}\n"
            "  fec_irritant:\n    not_applicable: timber only\n")
    study = make_study(kit.study.replace(ORIGINAL, "criteria: hall.yaml"), extra={"hall.yaml": crit})
    res = _run(cli, study, tmp_path / "out")
    assert res["criteria"]["not_applicable"] == {"fec_irritant": "timber only"}
    assert list(res["criteria"]["applied"]) == ["temperature"]


def test_empty_reason_in_a_criteria_file_is_located(kit, make_study, cli):
    crit = ("name: hall-set\ndescription: illustrative\nsources: [common practice]\ncriteria:\n"
            "  temperature: {limit: 60 degC}\n"
            "  fec_irritant:\n    not_applicable: ''\n")
    study = make_study(kit.study.replace(ORIGINAL, "criteria: hall.yaml"), extra={"hall.yaml": crit})
    status, _, err = cli(["validate", study])
    assert status == 2
    assert "hall.yaml:7 criteria.fec_irritant.not_applicable" in err


def test_only_and_not_applicable_together_is_an_error(kit, make_study, cli):
    text = kit.study.replace(ORIGINAL, 'criteria: {base: general-2m, only: [temperature, fec_irritant], '
                             'fec_irritant: {not_applicable: "no such fuel"}}')
    status, _, err = cli(["validate", make_study(text)])
    assert status == 2
    assert "criteria.only[1]" in err and "declared not applicable" in err


def test_every_criterion_not_applicable_is_an_error(kit, make_study, cli):
    from egressmargin.criteria import CRITERIA

    spec = ", ".join(f'{cid}: {{not_applicable: "illustrative"}}' for cid in CRITERIA)
    status, _, err = cli(["validate", make_study(kit.study.replace(ORIGINAL, f"criteria: {{base: general-2m, {spec}}}"))])
    assert status == 2
    assert "no criterion is left to apply (not applicable: temperature" in err


def test_null_criterion_points_to_not_applicable(kit, make_study, cli):
    """Issue 20 item 3: `fec_irritant: null` was the only way tried; the message now names the key that works."""
    status, _, err = cli(["validate", make_study(kit.study.replace(ORIGINAL,
                                                                   "criteria: {base: general-2m, fec_irritant: null}"))])
    assert status == 2
    assert "criteria.fec_irritant: error: found None" in err and "not_applicable" in err
