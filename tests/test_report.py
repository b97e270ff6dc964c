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
from egressmargin.report.render import CAUTIONS, build_context, route_margin, templates_dir  # noqa: E402

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
    hits = [p for p in pages if "Verdictperscenarioandroute" in squash(p)]
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
    """One way to write a probability (probability_text): a percentage, significant figures."""
    assert fmt.fmt_prob(0.0312) == "3.1\u00a0%"
    assert fmt.fmt_prob(0.0) == "0\u00a0%"
    assert fmt.fmt_prob(1.0) == "100\u00a0%"
    assert fmt.fmt_prob(0.0004) == "0.040\u00a0%"
    assert fmt.fmt_prob(0.9996) == "99.96\u00a0%"
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
    verdicts = {rt["verdict"] for sc in results["scenarios"] for rt in sc["routes"]}
    assert verdicts == {"pass", "fail", "indeterminate"}
    for word in ("PASS", "FAIL", "INDETERMINATE"):
        assert word in text


def test_pdf_repeats_every_caution(rendered):
    text = squash(rendered["text"])
    for c in CAUTIONS:
        # each caution appears on the title page and in its section at the end
        assert text.count(squash(c)) >= 2, c


def test_summary_rows_print_the_results_numbers(rendered, fixture_data):
    """Each summary row reads, in order: scenario, route, verdict, p_fail, its interval,
    RSET p95, ASET p05, margin p05 - formatted by the report's own functions."""
    results, _ = fixture_data
    page = squash(_summary_page(rendered["pages"]))
    marks = {"pass": "✓PASS", "fail": "✗FAIL", "indeterminate": "INDETERMINATE"}
    for sc in results["scenarios"]:
        end = sc["end_s"]
        for rt in sc["routes"]:
            row = "".join([
                sc["id"], rt["id"], marks[rt["verdict"]],
                fmt.fmt_prob_ci(rt["p_fail"], rt["p_fail_ci95"], results["acceptance"]["max_p_fail"]),
                fmt.fmt_time(rt["rset_s"]["p95"]), fmt.fmt_time(rt["aset_s"]["p05"], end),
                fmt.fmt_route_margin(route_margin(rt)),
            ])
            assert squash(row) in page, row


def test_fixture_has_a_failing_route_and_a_null_aset(fixture_data):
    # guards the summary-row cases above: a FAIL, an ASET written as "> end" and a margin
    # known only as a lower bound
    results, _ = fixture_data
    routes = [(sc, rt) for sc in results["scenarios"] for rt in sc["routes"]]
    assert any(rt["verdict"] == "fail" for _, rt in routes)
    assert any(rt["aset_s"]["p05"] is None for _, rt in routes)
    assert any(rt["margin_s"]["p05"] is None and rt.get("margin_at_least_s") for _, rt in routes)


def test_null_times_are_written_as_greater_than_end(rendered, fixture_data):
    results, _ = fixture_data
    fire_b = results["scenarios"][1]
    west = next(rt for rt in fire_b["routes"] if rt["id"] == "west-exit")
    assert west["aset_s"]["p05"] is None
    summary = squash(_summary_page(rendered["pages"]))
    assert squash(fmt.fmt_time(None, fire_b["end_s"])) in summary  # "> 900 s"


def test_margin_beyond_the_data_is_the_lower_bound_not_aset_beyond_end(rendered, fixture_data):
    """Issue 15 item 4: a route that reaches no limit shows the useful lower bound
    (as the CLI does), never "ASET > 900 s" in a margin column."""
    results, _ = fixture_data
    rt = next(r for sc in results["scenarios"] for r in sc["routes"]
              if r["margin_s"]["p05"] is None and r.get("margin_at_least_s"))
    bound = fmt.fmt_time(rt["margin_at_least_s"]["p05"], signed=True)
    assert squash("≥" + bound) in squash(_summary_page(rendered["pages"]))
    assert "ASET>" not in squash(rendered["text"]).replace("ASET>RSET", "")


def test_each_margin_is_defined_once(rendered):
    text = squash(rendered["text"])
    assert text.count(squash("Margin (the one used throughout)")) == 1
    assert "rawmargin" not in text.lower()
    assert "centralmargin" not in text.lower()


def test_not_assessed_is_one_compact_table_and_detectors_are_not_counted(rendered, fixture_data):
    results, _ = fixture_data
    na = [(sc["id"], loc["id"], cid) for sc in results["scenarios"] for loc in sc["locations"]
          for cid, c in loc["criteria"].items() if c["status"] == "not assessed"]
    assert na == [("fire-a", "stair-lobby", "heat_flux"), ("fire-b", "stair-lobby", "heat_flux")]
    text = squash(rendered["text"])
    assert "NOTASSESSED" not in text
    # one row for the location, both scenarios named in it
    assert squash("Radiant heat flux (needs heat_flux)") in text
    assert text.count(squash("Radiant heat flux (needs heat_flux)")) == 1
    assert squash("fire-a, fire-b") in text
    summary = squash(_summary_page(rendered["pages"]))
    assert squash("Criteria not assessed at locations the routes pass: 2") in summary
    assert squash("Detection points (not occupied, not assessed for tenability): "
                  "Heat detector under the soffit (soffit-detector)") in summary


def test_running_header_footer_and_contents_page_numbers(rendered, fixture_data):
    results, _ = fixture_data
    pages, n = rendered["pages"], len(rendered["pages"])
    title = squash(results["study"]["title"])
    for i in range(1, n):  # every page but the title page
        assert f"page{i + 1}of{n}" in squash(pages[i])
        assert title in squash(pages[i])
    assert f"page1of{n}" not in squash(pages[0])
    toc = pages[0]
    assert "Contents" in toc
    for number, heading in ((1, "Summary"), (2, "Basis of design"), (3, "Results per route"),
                            (4, "Location detail")):
        m = re.search(rf"^{number}\s*{heading}\s*\.+\s*(\d+)\s*$", toc, flags=re.M)
        assert m, heading
        page_no = int(m.group(1))
        # the numbered heading is printed on the page the contents point to, not before
        assert squash(f"{number}{heading}") in squash(pages[page_no - 1]), (heading, page_no)
        assert all(squash(f"{number}{heading}") not in squash(p)
                   for p in pages[1:page_no - 1]), heading


def test_summary_is_at_most_two_pages(rendered):
    pages = rendered["pages"]
    start = next(i for i, p in enumerate(pages) if "Verdictperscenarioandroute" in squash(p))
    basis = next(i for i, p in enumerate(pages) if "2.1Designfiresandscenarios" in squash(p))
    assert basis - start <= 2


def test_summary_stays_within_two_pages_for_many_routes(tmp_path):
    """Eight scenarios of four routes each (32 verdicts): the summary still fits two pages."""
    results, plotdata = make_fixture(n_locations=3, samples=200, credibility=False)
    base = results["scenarios"]
    results["scenarios"] = []
    for k in range(4):
        for sc in base:
            sc = copy.deepcopy(sc)
            sc["id"] = f"{sc['id']}-{k}"
            for rt in list(sc["routes"]):
                extra = copy.deepcopy(rt)
                extra["id"] = f"{rt['id']}-2"
                sc["routes"].append(extra)
            results["scenarios"].append(sc)
    paths = render_report(results, {}, tmp_path)
    pages = [p.extract_text() or "" for p in pypdf.PdfReader(str(paths["pdf"])).pages]
    start = next(i for i, p in enumerate(pages) if "Verdictperscenarioandroute" in squash(p))
    basis = next(i for i, p in enumerate(pages) if "2.1Designfiresandscenarios" in squash(p))
    assert sum(len(sc["routes"]) for sc in results["scenarios"]) == 32
    assert basis - start <= 2, basis - start


def test_basis_of_design_shows_design_fire_and_egress_inputs(rendered, fixture_data):
    results, _ = fixture_data
    text = squash(rendered["text"])
    df = results["scenarios"][0]["design_fire"]
    assert squash(f"Peak heat release rate: {df['peak_hrr']}") in text
    assert squash("Yields: co: 0.03 kg/kg; soot: 0.05 kg/kg") in text
    assert squash("Acceptance rule.") in text
    rt = results["scenarios"][0]["routes"][0]
    det = rt["rset_components_s"]["detection"]
    assert squash("Detection " + fmt.fmt_trio(det)) in text


def test_path_elements_and_shared_elements_are_shown(rendered, fixture_data):
    results, _ = fixture_data
    rt = results["scenarios"][0]["routes"][0]
    text = squash(rendered["text"])
    door = rt["elements"][1]
    assert squash("door door D2" + fmt.fmt_quantity(door["effective_width_m"], "m")
                  + fmt.fmt_num(door["capacity_p_s"]) + "p/s") in text
    assert squash("Clears at") in text and squash(fmt.fmt_time(door["clearing_s"])) in text
    assert squash("Shared path elements: door D2 (routes: east-stair, west-exit; "
                  "combined flow [persons/s]: 0.91)") in text


def test_grid_table_columns_follow_their_headers(rendered, fixture_data):
    """Issue 15 item 2: the grid study lists values fine to coarse (cells_m); the table's
    columns are the study's resolutions, coarse first here. The fixture's times follow
    t(h) = t0 + C h^2, so the coarsest grid has the largest temperature time."""
    results, _ = fixture_data
    cred = results["scenarios"][0]["credibility"]
    assert cred["resolutions"] == [0.4, 0.2, 0.1]
    loc = cred["locations"][0]
    c = loc["criteria"]["temperature"]
    assert c["cells_m"] == [0.1, 0.2, 0.4]
    by_cell = dict(zip(c["cells_m"], c["values_s"]))
    expected = "".join(fmt.fmt_time(by_cell[h]) for h in cred["resolutions"])
    row = squash(loc["id"] + "Gas temperature" + expected)
    assert row in squash(rendered["text"])


def test_grid_rows_only_where_a_limit_is_reached(rendered, fixture_data):
    results, _ = fixture_data
    cred = results["scenarios"][0]["credibility"]
    flagged_unreached = [(loc["id"], cid) for loc in cred["locations"]
                         for cid, c in loc["criteria"].items()
                         if c["flagged"] and all(v is None for v in c["values_s"])]
    assert flagged_unreached  # the fixture has such rows ...
    text = squash(rendered["text"])
    for lid, _ in flagged_unreached:   # ... and the table leaves them out
        assert squash(f"{lid}Radiant heat flux") not in text
    assert squash("criteria reached on no grid, not listed") in text


def test_every_figure_fits_on_its_page_with_its_caption(rendered):
    """Issue 15 item 3: no figure spills over the page or parts from its caption."""
    reader = rendered["reader"]
    box = reader.pages[0].mediabox
    content_height_pt = float(box.height) - (22 + 20) * MM_TO_PT   # report.css @page margins
    numbers = set()
    for page, text in zip(reader.pages, rendered["pages"]):
        captions = re.findall(r"Figure (\d+)\.", text)
        if captions:
            assert len(page.images) >= len(set(captions)), captions
        numbers.update(captions)
    html = rendered["html"]
    assert len(numbers) == html.count('<figure class="plot-figure"')
    from PIL import Image
    import base64
    import io
    for data in re.findall(r'src="data:image/png;base64,([^"]+)"', html):
        img = Image.open(io.BytesIO(base64.b64decode(data)))
        w_px, h_px = img.size
        # printed at the text width (210 - 2 x 17 mm) with the PNG's aspect ratio
        height_pt = (210 - 34) * MM_TO_PT * h_px / w_px
        assert height_pt < 0.85 * content_height_pt


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


def test_progress_is_told_of_every_stage(tmp_path, fixture_data):
    from engine_helpers import ProgressRecorder as Recorder

    results, plotdata = fixture_data
    rec = Recorder()
    render_report(results, plotdata, tmp_path, progress=rec, generated="2026-12-02")
    stages = [c for c in rec.calls if c[0] == "stage"]
    n = stages[0][2]
    assert stages[0][:2] == ("stage", "figures") and n >= 5
    assert sum(1 for c in rec.calls if c[0] == "step") == n
    assert [c[1] for c in stages[1:]] == ["PDF layout", "PDF writing"]
    html = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert "2026-12-02" in html


# ----------------------------------------------------------------------------- HTML

def test_html_is_self_contained_with_inline_png(rendered):
    html = rendered["html"]
    n_figures = html.count('<figure class="plot-figure"')
    assert n_figures >= 6
    # one image a figure, except route figures drawn one image a panel
    n_parts = html.count('<div class="plot-part">')
    n_single = n_figures - len(re.findall(r'<figure class="plot-figure"[^>]*data-parts=', html))
    assert n_parts > 0
    assert html.count('<img class="plot" src="data:image/png;base64,') == n_single + n_parts
    srcs = re.findall(r'\bsrc\s*=\s*"([^"]*)"', html)
    assert all(s.startswith("data:image/png;base64,") for s in srcs)
    hrefs = re.findall(r'\bhref\s*=\s*"([^"]*)"', html)
    assert hrefs and all(h.startswith("#") for h in hrefs), \
        [h for h in hrefs if not h.startswith("#")][:5]
    assert "<link" not in html and "@import" not in html
    assert "<style>" in html and "counter(pages)" in html  # CSS inlined


def test_ids_are_unique_and_every_reference_resolves(rendered):
    html = rendered["html"]
    ids = re.findall(r'\bid="([^"]+)"', html)
    assert len(ids) == len(set(ids))
    idset = set(ids)
    refs = re.findall(r'href="#([^"]+)"', html)
    assert refs and all(r in idset for r in refs)


def test_user_names_are_escaped(fixture_data):
    results = copy.deepcopy(fixture_data[0])
    evil = "<script>alert(1)</script>"
    results["scenarios"][0]["locations"][0]["title"] = evil
    results["scenarios"][0]["routes"][0]["title"] = '<img src=x onerror="alert(2)">'
    results["study"]["title"] = "Study <b>bold</b> & co"
    html = render_html(results, {})
    assert "<script" not in html.lower()
    assert "<img src=x" not in html.lower()
    assert "<b>bold</b>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "Study &lt;b&gt;bold&lt;/b&gt; &amp; co" in html


def test_uncorrected_predictions_are_stated(fixture_data):
    results = copy.deepcopy(fixture_data[0])
    results["uncertainty"] = None
    html = render_html(results, {})
    assert "Predictions are uncorrected" in html
    assert "Method after McGrattan" not in html
    assert "with model uncertainty" not in html


def test_raw_only_says_the_table_was_set_aside_not_missing(fixture_data):
    """Issue 15 item 8: with --raw-only a table was supplied and set aside; the report must
    not say none was supplied, nor "with model uncertainty" on the cover."""
    results = copy.deepcopy(fixture_data[0])
    results["uncertainty"] = None
    results["raw_only"] = True
    html = render_html(results, {})
    assert "--raw-only" in html and "set aside" in html
    assert "with model uncertainty" not in html
    assert "No model-uncertainty table was" not in html and "was supplied" not in html


def test_optional_sections_are_left_out_when_absent(fixture_data):
    results = copy.deepcopy(fixture_data[0])
    for sc in results["scenarios"]:
        sc["credibility"] = None
        for rt in sc["routes"]:
            rt["sensitivity"] = []
            rt["along_route"] = None
    ctx = build_context(results, {})
    # without plot data only the route figures (drawn from results alone) remain
    n_routes = sum(len(sc["routes"]) for sc in results["scenarios"])
    assert [f["job"][0] for f in ctx["figures"]] == ["route_figure"] * n_routes
    html = render_html(results, {})
    assert "Simulation credibility" not in html
    assert "Sensitivity:" not in html and "Dose accumulated along the route" not in html


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
    assert "&#10003;&nbsp;PASS" in html


def test_decimate_keeps_peaks_and_ends():
    t = np.arange(10_000.0)
    y = np.zeros_like(t)
    y[4321] = 5.0  # a one-sample spike must survive
    y[7000] = -3.0
    idx = plots._decimate(t, [y], max_points=300)
    assert idx.size <= 302
    assert {0, 4321, 7000, 9999} <= set(idx.tolist())
    assert np.all(np.diff(idx) > 0)


def test_location_figure_has_axis_labels_with_units(fixture_data, monkeypatch):
    import matplotlib.text

    _, plotdata = fixture_data
    pd = plotdata["fire-a"]
    monkeypatch.setattr(plots, "finish", lambda fig: fig)     # keep the figure to read its texts
    fig = plots.location_figure(pd["t_s"], pd["locations"]["atrium-l1"], {}, 1200.0, uid="t")
    texts = [t.get_text() for t in fig.findobj(matplotlib.text.Text)]
    assert "Time [s]" in texts and "[°C]" in texts and "[m]" in texts
    assert any("untenable ≥ 60 °C" == t for t in texts)
    assert not any(a.get_hatch() for a in fig.findobj(lambda o: hasattr(o, "get_hatch")))  # no hatch patterns
    import matplotlib.pyplot as plt
    plt.close(fig)


def test_location_figures_show_only_reached_limits(fixture_data):
    """No plot that shows nothing: a location's panels are the criteria whose limit is
    reached raw or in some draw; a location where none is reached has no figure."""
    results, plotdata = fixture_data
    ctx = build_context(results, plotdata)
    for fig in ctx["figures"]:
        fn, kw = fig["job"]
        if fn != "location_figure":
            continue
        sid = fig["caption"].split("scenario ")[1].split(":")[0]
        sc = next(s for s in results["scenarios"] if s["id"] == sid)
        loc = next(loc for loc in sc["locations"] if kw["uid"].endswith(loc["id"]))
        for cid in kw["specs"]:
            c = loc["criteria"][cid]
            assert c["raw_s"] is not None or c["p_reached"] > 0


def test_templates_dir_finds_the_templates():
    d = templates_dir()
    assert (d / "report.html.j2").is_file() and (d / "report.css").is_file()


def test_twenty_locations_render(tmp_path):
    results, plotdata = make_fixture(n_locations=20, samples=500, credibility=False)
    results["scenarios"] = results["scenarios"][:1]
    ctx = build_context(results, plotdata)
    html = render_html(results, plotdata)
    assert html.count('<img class="plot"') == sum(len(f["parts"]) for f in ctx["figures"])
    assert ctx["n_figures"] >= 3


def test_report_paths_returned(tmp_path, fixture_data):
    results, _ = fixture_data
    paths = render_report(results, {}, tmp_path / "new" / "dir", pdf=False)
    assert "html" in paths and "pdf" not in paths and set(paths) <= {"html", "plots"}
    assert paths["html"] == tmp_path / "new" / "dir" / "report.html"
    assert paths["html"].read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert not (tmp_path / "new" / "dir" / "report.pdf").exists()


def _drawn_text(draw, *args, **kwargs) -> str:
    """Every text a figure function draws (titles, labels, legends), one a line."""
    import matplotlib.pyplot as plt
    import matplotlib.text

    kept = []
    real = plots.finish
    plots.finish = lambda fig: kept.append(fig) or b""
    try:
        draw(*args, **kwargs)
    finally:
        plots.finish = real
    fig = kept[0]
    try:
        return "\n".join(t.get_text() for t in fig.findobj(matplotlib.text.Text))
    finally:
        plt.close(fig)


def test_plots_cope_with_degenerate_inputs():
    """Deterministic runs (no uncertainty, fixed egress inputs: p05 = p50 = p95 by the
    contract), ASET never reached, and user text with '$' must all still draw."""
    same = _drawn_text(plots.route_figure, {"detection": {"p50": 60.0}}, {"p05": 60, "p50": 60, "p95": 60},
                       {"p05": None, "p50": None, "p95": None}, None, 600.0,
                       margin_samples_s=np.full(100, 42.0), p_fail=0.0, max_p_fail=0.05, uid="a")
    text = same.replace("\u00a0", " ")
    assert "ASET p50 > 600 s" in text
    assert "P(ASET" not in text          # one margin value: no histogram
    tor = _drawn_text(plots.route_figure, {}, {"p05": 60, "p50": 60, "p95": 60},
                      {"p05": 100, "p50": 100, "p95": 100},
                      sensitivity=[{"input": "cost $5 $x$", "low": 1, "high": 2,
                                    "margin_low_s": 10.0, "margin_high_s": -5.0,
                                    "swing_s": 15.0}], uid="d")
    assert r"cost \$5 \$x\$" in tor  # '$' escaped: shown literally, not parsed as mathtext
    cred = _drawn_text(plots.credibility_figure, {"l": {"temperature": {"cells": [0.2, 0.1],
                                                                        "values_s": [None, 300.0],
                                                                        "extrapolated_s": None}}},
                       uid="e")
    assert "Cell size [m]" in cred
    png = plots.credibility_figure({"l": {"temperature": {"cells": [0.2, 0.1],
                                                          "values_s": [None, None]}}}, uid="f")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


def test_route_figure_panels_draw_one_at_a_time(rendered):
    """A route figure is drawn one image a panel so a page may break between panels;
    each panel image shows its own panel only, and the caption follows the last panel."""
    kw = dict(components_s={"detection": {"p50": 60.0}},
              rset_s={"p05": 60, "p50": 70, "p95": 80}, aset_s={"p05": 100, "p50": 120, "p95": 140},
              margin_samples_s=np.linspace(-10.0, 80.0, 200), p_fail=0.1, max_p_fail=0.05,
              sensitivity=[{"input": "walking speed", "margin_low_s": 10.0,
                            "margin_high_s": 40.0, "swing_s": 30.0}])
    assert plots.route_panels(kw["margin_samples_s"], kw["sensitivity"]) == \
        ["timeline", "histogram", "tornado"]
    assert plots.route_panels(np.full(5, 3.0), []) == ["timeline"]
    timeline = _drawn_text(plots.route_figure, **kw, panels=["timeline"], uid="t")
    hist = _drawn_text(plots.route_figure, **kw, panels=["histogram"], uid="h")
    tornado = _drawn_text(plots.route_figure, **kw, panels=["tornado"], uid="s")
    assert "RSET components" in timeline and "P(ASET" not in timeline
    assert "P(ASET" in hist and "RSET components" not in hist and "walking speed" not in hist
    assert "walking speed" in tornado and "P(ASET" not in tornado
    html = rendered["html"]
    blocks = re.findall(r'<figure class="plot-figure"[^>]*data-parts="\d+">.*?</figure>', html, flags=re.S)
    assert blocks
    for block in blocks:
        parts = block.split('<div class="plot-part">')[1:]
        assert len(parts) >= 2
        assert block.count("<figcaption>") == 1 and "<figcaption>" in parts[-1]
        assert all(p.count('<img class="plot"') == 1 for p in parts)
    css = (templates_dir() / "report.css").read_text(encoding="utf-8")
    assert ".plot-part { break-inside: avoid; }" in css


def test_every_figure_is_also_written_as_a_png_file(tmp_path):
    """The output folder carries the plots as files, one per image of the report: a
    figure drawn in parts is written as figure-NNN-a.png, -b ... in the order shown."""
    results, plotdata = make_fixture()
    paths = render_report(results, plotdata, tmp_path, pdf=False)
    html = paths["html"].read_text(encoding="utf-8")
    files = sorted((tmp_path / "plots").glob("figure-*.png"))
    assert len(files) == html.count('<img class="plot"') > html.count('<figure class="plot-figure"')
    assert files[0].read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    numbers = {re.match(r"figure-(\d{3})", f.name).group(1) for f in files}
    assert len(numbers) == html.count('<figure class="plot-figure"')
    parts = sorted(f.name for f in files if "-a.png" in f.name or "-b.png" in f.name)
    assert parts and all(n.replace("-a.png", "-b.png") in parts for n in parts if "-a" in n)


def test_pdf_engine_fetches_nothing_but_inline_data(tmp_path):
    """The report is self-contained: any other URL stops the rendering with the PDF
    engine's own error (not an AttributeError from a plain-function fetcher), and an
    inline data: image still renders."""
    from egressmargin.report.render import write_pdf

    png = plots.credibility_figure({"l": {"temperature": {"cells": [0.2, 0.1],
                                                          "values_s": [310.0, 300.0]}}})
    import base64
    ok = ('<html><body><img src="data:image/png;base64,'
          + base64.b64encode(png).decode("ascii") + '"></body></html>')
    assert write_pdf(ok, tmp_path / "ok.pdf").stat().st_size > 1000
    bad = '<html><body><img src="file:///etc/hostname"></body></html>'
    with pytest.raises(RuntimeError) as err:
        write_pdf(bad, tmp_path / "bad.pdf")
    assert "self-contained" in str(err.value) and "file:///etc/hostname" in str(err.value)


def test_route_figure_draws_sobol_indices_with_their_method(tmp_path, fixture_data):
    """The indices panel is one more panel of the route figure; its caption states N, the
    estimators and the intervals (issue 21)."""
    rows = [{"input": "premovement time", "first_order": 0.7, "first_order_ci95": [0.6, 0.8],
             "total": 0.75, "total_ci95": [0.7, 0.8]},
            {"input": "walking speed", "first_order": 0.001, "first_order_ci95": [0.0, 0.002],
             "total": 0.002, "total_ci95": [0.0, 0.004]}]
    assert plots.route_panels(np.full(5, 3.0), [], rows) == ["timeline", "indices"]
    assert [r["input"] for r in plots.shown_indices(rows)] == ["premovement time"]     # below 0.01 not drawn
    text = _drawn_text(plots.route_figure, {"detection": {"p50": 60.0}}, {"p05": 60, "p50": 60, "p95": 60},
                       {"p05": 100, "p50": 100, "p95": 100}, indices=rows, panels=["indices"], uid="i")
    assert "premovement time" in text and "walking speed" not in text and "total index" in text
    import copy

    results, plotdata = copy.deepcopy(fixture_data)
    route = results["scenarios"][0]["routes"][0]
    route.update({"sensitivity_indices": rows, "sensitivity_indices_method": {"base_samples": 512, "evaluations": 3072},
                  "sensitivity_indices_fail": [dict(rows[0], total=0.9, total_ci95=[0.85, 0.95])]})
    html = render_report(results, plotdata, tmp_path, pdf=False)["html"].read_text(encoding="utf-8")
    assert "Sobol\u2019 indices of the margin" in html
    assert "indices of the failure indicator" in html and "premovement time 0.9" in html
    assert re.search(r"N\u00a0=\u00a0\d+ base samples \(\d+ evaluations", html)
    assert "Saltelli (2010) and Jansen (1999) estimators via SALib" in html
