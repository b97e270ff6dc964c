"""The report prints names, not ids, and its words cannot be misread (a reviewer's list).

Each check is against the project's own lists of ids (criteria, series) or against the
text a reader sees; no external source is needed for wording.
"""

from __future__ import annotations

import re

import pytest

from report_fixture import make_fixture
from egressmargin.criteria import CRITERIA
from egressmargin.report import plots, render_html
from egressmargin.report.render import (CRITERION_LABELS, CRITERION_SHORT, QUANTITY_LABELS,
                                        _uncertainty_view)
from egressmargin.study import SERIES_KEYS


@pytest.mark.parametrize("cid", sorted(CRITERIA))
def test_every_criterion_id_has_a_printed_name_and_a_short_head(cid):
    assert cid in CRITERION_LABELS and "_" not in CRITERION_LABELS[cid]
    assert cid in CRITERION_SHORT and "_" not in CRITERION_SHORT[cid]
    assert len(CRITERION_SHORT[cid]) <= 9   # fits a matrix column without breaking a word


def test_hypoxia_and_irritants_are_named_in_words():
    assert CRITERION_LABELS["fed_hypoxia"] == "FED, hypoxia (low oxygen)"
    assert CRITERION_LABELS["fec_irritant"] == "FEC, irritant gases"


@pytest.mark.parametrize("key", SERIES_KEYS)
def test_every_series_key_has_a_printed_name(key):
    assert key in QUANTITY_LABELS and QUANTITY_LABELS[key] != key
    assert "_" not in QUANTITY_LABELS[key]


def test_uncertainty_rows_say_how_they_are_applied_apart_from_the_absolute_range():
    view = _uncertainty_view({"quantities": {
        "temperature": {"bias": 1.05, "sigma_model": 0.08, "range": "37.452 to 239.059 degC",
                        "basis": "rise"},
        "o2": {"bias": 1.0, "sigma_model": 0.1, "basis": "depletion"},
        "co": {"bias": 1.1, "sigma_model": 0.2, "basis": "as-given"}}})
    rows = {q["id"]: q for q in view["quantities"]}
    # the label no longer claims "rise above ambient" over an absolute range
    assert rows["temperature"]["label"] == "Temperature"
    assert rows["temperature"]["applied"] == "rise above ambient"
    assert rows["temperature"]["range"] == "37.452 to 239.059 degC"
    assert rows["o2"]["applied"] == "depletion below ambient"
    assert rows["co"]["applied"] == "as given"


def test_uncertainty_table_heads_the_range_as_absolute():
    results, plotdata = make_fixture(n_locations=3, samples=200, credibility=False)
    html = render_html(results, plotdata)
    head = re.search(r"<th>Validated range[^<]*</th>", html)
    assert head and "absolute" in head.group(0)
    assert "<th>Corrected as</th>" in html


def test_route_id_is_printed_once_in_the_egress_table():
    results, plotdata = make_fixture(n_locations=3, samples=200, credibility=False)
    html = render_html(results, plotdata)
    section = html.split("2.2 Occupants and egress", 1)[1].split("2.3 Tenability", 1)[0]
    for rid in ("east-stair", "west-exit"):
        row = next(r for r in section.split("<tr>") if f"<strong>{rid}</strong>" in r)
        first_cell = row.split("</td>", 1)[0]
        assert first_cell.count(rid) == 1, first_cell


def test_histogram_title_names_the_limit_and_the_verdict():
    txt = plots.histogram_title(1.0, 0.05, "fail")
    assert "acceptable" not in txt
    assert "acceptance limit 5.0\u00a0%" in txt and "verdict FAIL" in txt
    # the interval beside the estimate, written by the one probability function
    assert "= 0.15\u00a0% (0.020\u20130.52\u00a0%)" in plots.histogram_title(0.0015, 0.05, "pass",
                                                                            p_fail_ci95=[0.0002, 0.0052])
    two = plots.histogram_title(0.0, 0.05, "pass", n_open=1992, n_draws=2000)
    assert two.count("\n") == 1 and "1992 of 2000 draws" in two.splitlines()[1]


def test_long_sensitivity_labels_fit_left_of_the_panel():
    """The tick label's box must start inside the figure (x0 >= 0), not be cut off."""
    matplotlib, plt = plots._plt()
    label = "effective width of element 12 (stair), downstream"
    wrapped = plots.wrap_label(label)
    assert all(len(line) <= plots.TICK_LABEL_CHARS for line in wrapped.splitlines())
    assert len(wrapped.splitlines()) <= 2
    with matplotlib.rc_context(plots._RC):
        fig = plt.figure(figsize=(plots.FIG_WIDTH_IN, 2.0))
        ax = fig.add_axes((plots.AXES_LEFT, 0.2, 0.97 - plots.AXES_LEFT, 0.7))
        ax.set_yticks([0, 1], [wrapped, plots.wrap_label("walking speed")], fontsize=6.5)
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        x0 = min(t.get_window_extent(renderer).x0 for t in ax.get_yticklabels())
        plt.close(fig)
    assert x0 >= 0.0


def test_histogram_key_keeps_the_fail_colour_when_no_draw_fails():
    from matplotlib.colors import to_rgba
    matplotlib, plt = plots._plt()
    with matplotlib.rc_context(plots._RC):
        fig, ax = plt.subplots()
        entries = plots._histogram(ax, [150.0, 200.0, 310.0, float("nan")], 0.0, 0.05, 150.0, "pass")
        plt.close(fig)
    keys = {label: handle for handle, label in entries}
    assert keys["ASET < RSET (fails)"].get_facecolor() == to_rgba(plots.FAIL)
    assert keys["ASET ≥ RSET"].get_facecolor() == to_rgba(plots.PASS_FILL)
