"""The study option ``report: {unused_locations: appendix | omit}``.

``appendix`` (the default, and what the report did before the option existed) prints the
detail of locations no route uses in the appendix; ``omit`` leaves that detail out and
the report names the locations left out, so no input disappears without a word. A bad
value is an input error located at its key (project rule: every user mistake raises
``InputError`` naming file, line and key, what was found and what was expected).
"""

from __future__ import annotations

import copy
import json

import pytest

from egressmargin.errors import InputError
from egressmargin.report.render import build_context, render_html
from egressmargin.study import load_study

from report_fixture import make_fixture

UNUSED_HEADING = "Locations no route passes, scenario"
LEFT_OUT = "Left out of this report by the study"

#: The fixture study with a third location that no route lists (same CSV column as the
#: stair: the option is about the report, not the data).
STORE = "      - id: store-l1\n        title: Book store (unused)\n        temperature: T_stair\negress:\n"


def _with_store(text: str, report_block: str = "") -> str:
    return text.replace("egress:\n", STORE, 1) + report_block


def test_default_is_appendix(kit, make_study):
    study = load_study(make_study(_with_store(kit.study)))
    assert study.report == {"unused_locations": "appendix"}


@pytest.mark.parametrize("given, parsed", [("omit", "omit"), ("appendix", "appendix"), ("Omit", "omit")])
def test_the_two_values_parse(kit, make_study, given, parsed):
    study = load_study(make_study(_with_store(kit.study, f"report: {{unused_locations: {given}}}\n")))
    assert study.report == {"unused_locations": parsed}


def test_bad_value_is_a_located_error(kit, make_study, expect_input_error):
    text = _with_store(kit.study, "report:\n  unused_locations: hide\n")
    err = expect_input_error(make_study(text))
    line = kit.line_of(text, "unused_locations: hide")
    assert f"study.yaml:{line} report.unused_locations" in err
    assert "found 'hide'" in err and "expected appendix" in err and "or omit" in err


def test_unknown_key_in_the_report_block_is_a_located_error(kit, make_study):
    text = _with_store(kit.study, "report:\n  unused_location: omit\n")
    with pytest.raises(InputError) as exc:
        load_study(make_study(text))
    where = [p.where for p in exc.value.problems]
    assert any("report.unused_location" in w and f":{kit.line_of(text, 'unused_location:')}" in w
               for w in where), where
    assert "did you mean 'unused_locations'" in str(exc.value)


@pytest.mark.parametrize("value", ["appendix", "omit"])
def test_run_carries_the_option_to_results_and_report(kit, make_study, cli, tmp_path, value):
    """results.json ``study.report`` holds the option and the report honours it."""
    study = make_study(_with_store(kit.study, f"report: {{unused_locations: {value}}}\n"))
    out = tmp_path / "out"
    status, _, err = cli(["run", str(study), "--no-pdf", "--html", "--out", str(out), "--samples", "50"])
    assert status == 0, err
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert res["study"]["report"] == {"unused_locations": value}
    html = (out / "report.html").read_text(encoding="utf-8")
    if value == "appendix":
        assert UNUSED_HEADING in html and LEFT_OUT not in html
        appendix_table = html.split(UNUSED_HEADING, 1)[1].split("Column maps", 1)[0]
        assert "store-l1" in appendix_table
    else:
        assert UNUSED_HEADING not in html and LEFT_OUT in html
        assert "1 location no route passes: Book store (unused) (store-l1)" in " ".join(html.split())


def _results_with_unused(value: str | None) -> tuple[dict, dict]:
    results, plotdata = make_fixture(n_locations=3, samples=300, credibility=False)
    results = copy.deepcopy(results)
    sc = results["scenarios"][0]
    store = copy.deepcopy(sc["locations"][0])
    store.update(id="plant-room", title="Plant room")
    for c in store["criteria"].values():   # a criterion not assessed there, to be grouped
        c["status"] = "not assessed"
        c["missing_series"] = ["co"]
    sc["locations"].append(store)
    if value is not None:
        results["study"]["report"] = {"unused_locations": value}
    return results, plotdata


def test_render_appendix_keeps_the_unused_location_detail():
    for value in (None, "appendix"):   # none given (results of older runs): appendix
        results, plotdata = _results_with_unused(value)
        ctx = build_context(results, plotdata)
        sc = ctx["scenarios"][0]
        assert [row for row in sc["matrix_unused"] if "Plant room" in str(row)]
        assert sc["omitted_locations"] == []
        assert any("plant-room" in row["locations"] for row in ctx["not_supplied"])
        assert UNUSED_HEADING in render_html(results, plotdata)


def test_render_omit_leaves_the_detail_out_and_names_the_location():
    results, plotdata = _results_with_unused("omit")
    ctx = build_context(results, plotdata)
    sc = ctx["scenarios"][0]
    assert sc["matrix_unused"] == [] and len(sc["omitted_locations"]) == 1
    assert "Plant room" in sc["omitted_locations"][0]
    assert not any("plant-room" in row["locations"] for row in ctx["not_supplied"])
    html = render_html(results, plotdata)
    assert UNUSED_HEADING not in html
    assert LEFT_OUT in html and "Plant room" in html
