"""Tests of the submittal report (HTML + PDF) on the synthetic fixture.

The fixture (tests/report_fixture.py) is illustrative and self-consistent; these tests
check that the report prints what ``results`` holds, formatted by the report's own
format functions, in the right place, and that it is safe and self-contained.

External references used below:
- ISO 216 (A4 = 210 mm x 297 mm) and ANSI/ASME Y14.1 (Letter = 8.5 in x 11 in);
  1 in = 72 PDF points, 1 in = 25.4 mm (PDF 1.7, ISO 32000-1, 8.3.2.3 user space).
- The contract (shared/contract.md): a null time is "not reached by end_s" and must be
  written in words as "> end".
"""

from __future__ import annotations

import copy
import re

import numpy as np
import pytest

pypdf = pytest.importorskip("pypdf")

from report_fixture import make_fixture  # noqa: E402

from egressmargin.errors import InputError  # noqa: E402
from egressmargin.report import render_html, render_report  # noqa: E402
from egressmargin.report import format as fmt  # noqa: E402
from egressmargin.report import plots  # noqa: E402
from egressmargin.report.render import CAUTIONS, build_context, templates_dir  # noqa: E402

MM_TO_PT = 72.0 / 25.4  # 1 in = 25.4 mm = 72 pt (ISO 32000-1, 8.3.2.3)


def squash(text: str) -> str:
    """Text with every kind of whitespace (incl. no-break spaces) removed."""
    return re.sub(r"\s+", "", text)


@pytest.fixture(scope="module")
def fixture_data():
    return make_fixture()


@pytest.fixture(scope="module")
def rendered(tmp_path_factory, fixture_data):
    results, plotdata = fixture_data
    out = tmp_path_factory.mktemp("report")
    paths = render_report(results, plotdata, out)
    reader = pypdf.PdfReader(str(paths["pdf"]))
    pages = [p.extract_text() or "" for p in reader.pages]
    html = paths["html"].read_text(encoding="utf-8")
    return {"paths": paths, "reader": reader, "pages": pages, "html": html,
            "text": "\n".join(pages)}


def _summary_page(pages: list[str]) -> str:
    hits = [p for p in pages if "Summaryofverdictsperscenarioandroute" in squash(p)]
    assert len(hits) == 1, "the summary table should be on exactly one page"
    return hits[0]


# ------------------------------------------------------------------- format filters

def test_fmt_time_null_is_written_as_greater_than_end():
    # contract: a null time means "not reached by the end of the histories" and is
    # written as "> end" (e.g. "> 1200 s"), never as the end time
    assert fmt.fmt_time(None, 1200.0) == "> 1200 s".replace(" ", fmt.NBSP)
    assert fmt.fmt_time(float("nan"), 900) == "> 900 s".replace(" ", fmt.NBSP)
    assert fmt.fmt_time(float("inf"), 900) == "> 900 s".replace(" ", fmt.NBSP)
    assert fmt.fmt_time(None) == ">" + fmt.NBSP + "end"
    assert fmt.fmt_time(1199.6, 1200) == "1200" + fmt.NBSP + "s"


def test_fmt_time_rounding_and_sign():
    # round half to even is Python's round(); 244.5 -> 244, 245.5 -> 246
    assert fmt.fmt_time(244.5) == "244\u00a0s"
    assert fmt.fmt_time(245.5) == "246\u00a0s"
    assert fmt.fmt_time(-12.6) == "\u221213\u00a0s"
    assert fmt.fmt_time(30.2, signed=True) == "+30\u00a0s"
    assert fmt.fmt_time(-0.2, signed=True) == "0\u00a0s"
    assert fmt.fmt_margin(None, 900) == "ASET\u00a0>\u00a0900\u00a0s"


def test_fmt_prob_never_prints_a_small_risk_as_zero():
    assert fmt.fmt_prob(0.0312) == "0.031"
    assert fmt.fmt_prob(0.0) == "0.000"
    assert fmt.fmt_prob(1.0) == "1.000"
    assert fmt.fmt_prob(0.0004) == "<\u00a00.001"
    assert fmt.fmt_prob(0.9996) == ">\u00a00.999"
    assert fmt.fmt_prob(None) == "n/a"
    with pytest.raises(ValueError):
        fmt.fmt_prob(1.2)


def test_fmt_num_significant_figures():
    # three significant figures, no exponent for plain magnitudes
    assert fmt.fmt_num(1200) == "1200"
    assert fmt.fmt_num(0.30) == "0.3"
    assert fmt.fmt_num(1.0312) == "1.03"
    assert fmt.fmt_num(2.456, 2) == "2.5"
    assert fmt.fmt_num(-2.5) == "\u22122.5"
    assert fmt.fmt_num(1.5e-6) == "1.5\u00a0×\u00a010⁻⁶"
    assert fmt.fmt_pct(0.052) == "5.2\u00a0%"


def test_fmt_units_and_quantities():
    assert fmt.fmt_quantity(60, "degC") == "60\u00a0°C"
    assert fmt.fmt_quantity(2.5, "kW/m^2") == "2.5\u00a0kW/m²"
    assert fmt.fmt_quantity(0.3, "") == "0.3"
    assert fmt.fmt_unit("percent") == "%"
    assert fmt.fmt_span(0, 1200) == "0–1200\u00a0s"
    assert fmt.fmt_trio({"p05": 201.2, "p50": 245.0, "p95": None}, 900) == \
        "201\u00a0s / 245\u00a0s / >\u00a0900\u00a0s"


# ------------------------------------------------------------------------------ PDF

def test_pdf_exists_with_enough_pages_on_a4(rendered):
    assert rendered["paths"]["pdf"].stat().st_size > 10_000
    assert len(rendered["reader"].pages) >= 6
    box = rendered["reader"].pages[0].mediabox
    # ISO 216: A4 is 210 mm x 297 mm
    assert float(box.width) == pytest.approx(210 * MM_TO_PT, abs=0.5)
    assert float(box.height) == pytest.approx(297 * MM_TO_PT, abs=0.5)


def test_pdf_names_every_route_and_the_verdict_words(rendered, fixture_data):
    results, _ = fixture_data
    text = rendered["text"]
    for sc in results["scenarios"]:
        for rt in sc["routes"]:
            assert rt["id"] in text
    assert "PASS" in text and "FAIL" in text and "NOT ASSESSED" in text


def test_pdf_repeats_every_caution(rendered):
    text = squash(rendered["text"])
    for c in CAUTIONS:
        # each caution appears on the title page, in the summary and in its section
        assert text.count(squash(c)) >= 3, c


def test_summary_rows_print_the_results_numbers(rendered, fixture_data):
    """Each summary row reads, in order: scenario, route, RSET p50, RSET p95, ASET p05,
    ASET p50, margin p05, p_fail, verdict - formatted by the report's functions."""
    results, _ = fixture_data
    page = squash(_summary_page(rendered["pages"]))
    for sc in results["scenarios"]:
        end = sc["end_s"]
        for rt in sc["routes"]:
            row = "".join([
                sc["id"], rt["id"],
                fmt.fmt_time(rt["rset_s"]["p50"]), fmt.fmt_time(rt["rset_s"]["p95"]),
                fmt.fmt_time(rt["aset_s"]["p05"], end), fmt.fmt_time(rt["aset_s"]["p50"], end),
                fmt.fmt_margin(rt["margin_s"]["p05"], end), fmt.fmt_prob(rt["p_fail"]),
            ])
            assert squash(row) in page, row
            verdict_pos = page.index(squash(row)) + len(squash(row))
            mark = "✓PASS" if rt["verdict"] == "pass" else "✗FAIL"
            assert page[verdict_pos:].startswith(mark), page[verdict_pos:verdict_pos + 20]


def test_fixture_has_a_failing_route_and_a_null_aset(fixture_data):
    # guards the two summary-row cases above: a FAIL and an ASET written as "> end"
    results, _ = fixture_data
    routes = [(sc, rt) for sc in results["scenarios"] for rt in sc["routes"]]
    assert any(rt["verdict"] == "fail" for _, rt in routes)
    assert any(rt["aset_s"]["p50"] is None for _, rt in routes)


def test_null_times_are_written_as_greater_than_end(rendered, fixture_data):
    results, _ = fixture_data
    fire_b = results["scenarios"][1]
    west = next(rt for rt in fire_b["routes"] if rt["id"] == "west-exit")
    assert west["aset_s"]["p50"] is None
    summary = squash(_summary_page(rendered["pages"]))
    assert squash(fmt.fmt_time(None, fire_b["end_s"])) in summary  # "> 900 s"
    assert "&gt;\u00a01200\u00a0s" in rendered["html"]  # fire-a tables


def test_not_assessed_is_listed_in_the_summary(rendered, fixture_data):
    results, _ = fixture_data
    n = sum(1 for sc in results["scenarios"] for loc in sc["locations"]
            for c in loc["criteria"].values() if c["status"] == "not assessed")
    assert n == 2
    page = squash(_summary_page(rendered["pages"]))
    assert f"Criterianotassessed:{n}" in page
    assert "Radiantheatflux" in page


def test_running_header_footer_and_toc_page_numbers(rendered, fixture_data):
    results, _ = fixture_data
    pages, n = rendered["pages"], len(rendered["pages"])
    title = squash(results["study"]["title"])
    for i in range(1, n):  # every page but the title page
        assert f"page{i + 1}of{n}" in squash(pages[i])
        assert title in squash(pages[i])
    assert f"page1of{n}" not in squash(pages[0])
    toc = pages[1]
    assert "Contents" in toc
    for number, heading in enumerate(("Summary", "Method", "Results"), start=1):
        m = re.search(rf"^{number}\s*{heading}\s*\.+\s*(\d+)\s*$", toc, flags=re.M)
        assert m, heading
        page_no = int(m.group(1))
        # the numbered heading is printed on the page the contents point to, not before
        assert squash(f"{number}{heading}") in squash(pages[page_no - 1]), (heading, page_no)
        assert all(squash(f"{number}{heading}") not in squash(p)
                   for p in pages[2:page_no - 1]), heading
    m = re.search(r"^\d+\s*Cautions\s*\.+\s*(\d+)\s*$", toc, flags=re.M)
    assert m and int(m.group(1)) == n  # the cautions close the report


def test_letter_paper_sets_the_page_size(tmp_path):
    results, _ = make_fixture(n_locations=1, samples=200, credibility=False)
    paths = render_report(results, {}, tmp_path, paper="Letter")
    assert "@page { size: letter; }" in paths["html"].read_text(encoding="utf-8")
    box = pypdf.PdfReader(str(paths["pdf"])).pages[0].mediabox
    # ANSI Letter: 8.5 in x 11 in = 612 pt x 792 pt
    assert float(box.width) == pytest.approx(612.0, abs=0.5)
    assert float(box.height) == pytest.approx(792.0, abs=0.5)


def test_unknown_paper_is_an_input_error(fixture_data):
    results, _ = fixture_data
    with pytest.raises(InputError) as err:
        render_html(results, {}, paper="A3")
    assert "A3" in str(err.value) and "Letter" in str(err.value)


# ----------------------------------------------------------------------------- HTML

def test_html_is_self_contained_with_inline_svg(rendered):
    html = rendered["html"]
    ctx_figures = html.count('<figure class="plot-figure"')
    assert ctx_figures >= 10
    assert html.count("<svg ") == ctx_figures
    assert "<?xml" not in html and "<!DOCTYPE svg" not in html
    assert re.findall(r"\bsrc\s*=", html) == []
    hrefs = re.findall(r'\bhref\s*=\s*"([^"]*)"', html)
    assert hrefs and all(h.startswith("#") for h in hrefs), \
        [h for h in hrefs if not h.startswith("#")][:5]
    assert "<link" not in html and "@import" not in html
    assert "<style>" in html and "counter(pages)" in html  # CSS inlined


def test_svg_ids_are_unique_and_every_reference_resolves(rendered):
    html = rendered["html"]
    ids = re.findall(r'\bid="([^"]+)"', html)
    assert len(ids) == len(set(ids))
    idset = set(ids)
    refs = re.findall(r"url\(#([^)]+)\)", html) + re.findall(r'href="#([^"]+)"', html)
    assert refs and all(r in idset for r in refs)


def test_user_names_are_escaped(fixture_data):
    results = copy.deepcopy(fixture_data[0])
    # plot data for the credibility figure only, which prints location titles
    plotdata = {"fire-a": {"credibility": fixture_data[1]["fire-a"]["credibility"]}}
    evil = "<script>alert(1)</script>"
    results["scenarios"][0]["locations"][0]["title"] = evil
    results["scenarios"][0]["routes"][0]["title"] = '<img src=x onerror="alert(2)">'
    results["study"]["title"] = "Study <b>bold</b> & co"
    html = render_html(results, plotdata)
    assert "<script" not in html.lower()
    assert "<img" not in html.lower()
    assert "<b>bold</b>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "Study &lt;b&gt;bold&lt;/b&gt; &amp; co" in html
    # the credibility figure draws location titles: SVG text must be escaped as well
    svg_titles = re.findall(r"<text[^>]*>([^<]*alert\(1\)[^<]*)</text>", html)
    assert svg_titles and all("&lt;script&gt;" in t for t in svg_titles)


def test_uncorrected_predictions_are_stated(fixture_data):
    results = copy.deepcopy(fixture_data[0])
    results["uncertainty"] = None
    html = render_html(results, {})
    assert "Predictions are uncorrected" in html
    assert "Method after McGrattan" not in html


def test_optional_sections_are_left_out_when_absent(fixture_data):
    results = copy.deepcopy(fixture_data[0])
    for sc in results["scenarios"]:
        sc["credibility"] = None
        for rt in sc["routes"]:
            rt["sensitivity"] = []
            rt["along_route"] = None
    ctx = build_context(results, {})
    assert [e["text"] for e in ctx["toc"] if e["level"] == 1] == [
        "Summary", "Method", "Results", "Assumptions and limitations", "Inputs",
        "Appendix: criteria and constants", "Cautions"]
    html = render_html(results, {})
    # without plot data only the timelines (drawn from results alone) remain
    n_routes = sum(len(sc["routes"]) for sc in results["scenarios"])
    assert "Simulation credibility" not in html and html.count("<svg ") == n_routes
    assert "Sensitivity of the margin" not in html


def test_minimal_results_still_render():
    # only the contract keys, no extensions: the report must cope
    results = {"version": "0.1.0", "seed": 1, "samples": 10,
               "inputs": [{"path": "a.csv", "sha256": "0" * 64}],
               "criteria": {"name": "x"},
               "scenarios": [{"id": "s", "end_s": 600.0, "locations": [
                   {"id": "l", "criteria": {"temperature": {
                       "limit": 60, "unit": "degC", "status": "assessed", "raw_s": None,
                       "corrected_s": {"p05": None, "p50": None, "p95": None},
                       "p_reached": 0.0}},
                    "aset_raw_s": None, "aset_s": {"p05": None, "p50": None, "p95": None},
                    "governing": None}],
                   "routes": [{"id": "r", "occupants": 10,
                               "rset_s": {"p05": 100, "p50": 120, "p95": 150},
                               "aset_raw_s": None,
                               "aset_s": {"p05": None, "p50": None, "p95": None},
                               "margin_s": {"p05": None, "p50": None, "p95": None},
                               "p_fail": 0.0, "verdict": "pass"}]}]}
    html = render_html(results, None)
    assert "&gt;\u00a0600\u00a0s" in html
    assert "Predictions are uncorrected" in html
    assert "&#10003;&nbsp;PASS" in html


# ---------------------------------------------------------------------------- plots

def test_svg_from_figure_strips_prolog_and_prefixes_ids():
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots()
    ax.fill_between([0, 1], [0, 1], [1, 2], hatch="//")
    svg = plots.svg_from_figure(fig, uid="abc")
    assert svg.startswith("<svg ") and svg.endswith("</svg>")
    assert "<?xml" not in svg and "<metadata>" not in svg
    ids = re.findall(r'\bid="([^"]+)"', svg)
    assert ids and all(i.startswith("abc-") for i in ids)
    assert not plt.get_fignums()  # the figure was closed


def test_decimate_keeps_peaks_and_ends():
    t = np.arange(10_000.0)
    y = np.zeros_like(t)
    y[4321] = 5.0  # a one-sample spike must survive
    y[7000] = -3.0
    idx = plots._decimate(t, [y], max_points=300)
    assert idx.size <= 302
    assert {0, 4321, 7000, 9999} <= set(idx.tolist())
    assert np.all(np.diff(idx) > 0)


def test_location_figure_has_axis_labels_with_units(fixture_data):
    _, plotdata = fixture_data
    pd = plotdata["fire-a"]
    svg = plots.location_figure(pd["t_s"], pd["locations"]["atrium-l1"], {}, 1200.0, uid="t")
    texts = re.findall(r"<text[^>]*>([^<]*)</text>", svg)
    assert "Time [s]" in texts and "[°C]" in texts and "[m]" in texts
    assert any("untenable ≥ 60 °C" == t for t in texts)


def test_templates_dir_finds_the_templates():
    d = templates_dir()
    assert (d / "report.html.j2").is_file() and (d / "report.css").is_file()


def test_twenty_locations_render():
    """A 20-location scenario renders one figure per location and two per route (the
    timing lives in the benchmark, not in the tests: issue 13 item 9)."""
    results, plotdata = make_fixture(n_locations=20, samples=500, credibility=False)
    results["scenarios"] = results["scenarios"][:1]
    html = render_html(results, plotdata)
    assert html.count("<svg ") == 20 + 2 * 2  # locations + timeline/histogram per route


def test_report_paths_returned(tmp_path, fixture_data):
    results, _ = fixture_data
    paths = render_report(results, {}, tmp_path / "new" / "dir", pdf=False)
    assert "html" in paths and "pdf" not in paths and set(paths) <= {"html", "plots"}
    assert paths["html"] == tmp_path / "new" / "dir" / "report.html"
    assert paths["html"].read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert not (tmp_path / "new" / "dir" / "report.pdf").exists()



def test_plots_cope_with_degenerate_inputs():
    """Deterministic runs (no uncertainty, fixed egress inputs: p05 = p50 = p95 by the
    contract), ASET never reached, and user text with '$' must all still draw."""
    same = plots.margin_histogram(np.full(100, 42.0), 0.0, 0.05,
                                  {"p05": 42.0, "p50": 42.0, "p95": 42.0}, uid="a")
    assert "<svg" in same and "P(ASET &lt; RSET) = 0.000" in same
    never = plots.margin_histogram(np.full(50, np.inf), 0.0, 0.05, None, uid="b")
    assert "50 of 50 samples: ASET not reached" in never
    tl = plots.timeline_figure({"detection": {"p50": 60.0}}, {"p05": 60, "p50": 60, "p95": 60},
                               {"p05": None, "p50": None, "p95": None}, None, 600.0, uid="c")
    assert "ASET p50 &gt; 600 s" in tl.replace("\u00a0", " ")
    tor = plots.tornado_figure([{"input": "cost $5 $x$", "low": 1, "high": 2,
                                 "margin_low_s": 10.0, "margin_high_s": -5.0,
                                 "swing_s": 15.0}], None, uid="d")
    assert "cost $5 $x$" in tor  # shown literally, not parsed as mathtext
    cred = plots.credibility_figure({"l": {"temperature": {"cells": [0.2, 0.1],
                                                           "values_s": [None, 300.0],
                                                           "extrapolated_s": None}}}, uid="e")
    assert "Cell size [m]" in cred


def test_every_figure_is_also_written_as_an_svg_file(tmp_path):
    """The output folder carries the plots as files (contract: report.pdf, report.html,
    results.json and plots), one per figure of the report, each a standalone SVG."""
    import xml.etree.ElementTree as ET

    from egressmargin.report import render_report
    results, plotdata = make_fixture()
    paths = render_report(results, plotdata, tmp_path, pdf=False)
    html = paths["html"].read_text(encoding="utf-8")
    files = sorted((tmp_path / "plots").glob("figure-*.svg"))
    assert len(files) == html.count("<svg")
    root = ET.parse(files[0]).getroot()
    assert root.tag.endswith("svg")
