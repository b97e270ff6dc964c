"""``egressmargin compare``: runs side by side, what differs, and files that cannot be compared.

The what-if is two runs of the bundled demo (invented building, illustrative data) that
differ only in the criteria set: the study's general-2m (visibility 10 m) and
``--criteria small-familiar`` (visibility 5 m, every other limit the same). With
S = C/K (Jin 1978, Visibility through fire smoke, J. Fire & Flammability 9) a 5 m limit
needs twice the extinction coefficient of a 10 m one; extinction only grows in time at a
location before its first crossing, so no crossing can come earlier, and with the same
seed the same model-error draws apply: no ASET of any location or route may move earlier.
"""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import pytest

from egressmargin.cli import main
from egressmargin.compare import change
from egressmargin.resources import resource_dir

SAMPLES = "40"


def _run(out: Path, *extra: str) -> Path:
    study = resource_dir("demo") / "study.yaml"
    status = main(["run", str(study), "--no-pdf", "--quiet", "--samples", SAMPLES, "--out", str(out), *extra])
    assert status == 0
    return out / "results.json"


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    """(general-2m results, small-familiar results) of the demo."""
    root = tmp_path_factory.mktemp("runs")
    return _run(root / "general"), _run(root / "small", "--criteria", "small-familiar")


@pytest.fixture(scope="module")
def compared(two_runs, tmp_path_factory):
    """The comparison folder of the two runs (with the PDF)."""
    out = tmp_path_factory.mktemp("cmp") / "out"
    assert main(["compare", str(two_runs[0]), str(two_runs[1]), "--out", str(out)]) == 0
    return out


def _load(path: Path) -> dict:
    return json.loads(path.read_text(encoding="utf-8"))


def _later_or_same(a, b) -> bool:
    """b no earlier than a; None is "not reached by the end of the histories"."""
    a = math.inf if a is None else a
    b = math.inf if b is None else b
    return b >= a - 1e-9


def test_five_metre_visibility_moves_no_time_earlier(compared, two_runs):
    comp = _load(compared / "comparison.json")
    res_a = _load(two_runs[0])
    n_loc = n_later = n_route = 0
    for sc in comp["scenarios"]:
        for loc in sc["locations"]:
            a, b = loc["values"]["A"], loc["values"]["B"]
            for key in ("aset_raw_s", "aset_p50_s"):
                assert _later_or_same(a[key], b[key]), (sc["id"], loc["id"], key, a[key], b[key])
                assert loc["changes"]["B"][key]["direction"] in ("same", "later")
            n_later += loc["changes"]["B"]["aset_raw_s"]["direction"] == "later"
            n_loc += 1
        for rt in sc["routes"]:
            a, b = rt["values"]["A"], rt["values"]["B"]
            for key in ("aset_raw_s", "aset_p50_s"):
                assert _later_or_same(a[key], b[key]), (sc["id"], rt["id"], key)
            n_route += 1
    src_locs = sum(1 for s in res_a["scenarios"] for loc in s["locations"] if loc.get("role") != "detector")
    assert n_loc == src_locs and n_route == sum(len(s["routes"]) for s in res_a["scenarios"])
    # the 5 m set does move some visibility time later (whether it governs an ASET depends on
    # the other criteria, so the check is on the criterion itself)
    res_b = _load(two_runs[1])
    vis = [(la["criteria"]["visibility"].get("raw_s"), lb["criteria"]["visibility"].get("raw_s"))
           for sa, sb in zip(res_a["scenarios"], res_b["scenarios"])
           for la, lb in zip(sa["locations"], sb["locations"]) if "visibility" in la["criteria"]]
    assert any(a is not None and (b is None or b > a) for a, b in vis)
    assert all(_later_or_same(a, b) for a, b in vis)
    # the record carries the runs' own numbers
    fire_b = next(s for s in res_a["scenarios"] if s["id"] == "fire-b")
    roof = next(x for x in fire_b["locations"] if x["id"] == "atrium-l3")
    cmp_b = next(s for s in comp["scenarios"] if s["id"] == "fire-b")
    roof_cmp = next(x for x in cmp_b["locations"] if x["id"] == "atrium-l3")
    assert roof_cmp["values"]["A"]["aset_raw_s"] == roof["aset_raw_s"]
    assert roof_cmp["values"]["A"]["aset_p50_s"] == roof["aset_s"]["p50"]


def test_the_differing_input_is_the_criteria_set(compared):
    diff = _load(compared / "comparison.json")["differences"]
    assert [d["role"] for d in diff["inputs"]] == ["criteria"]
    # a bundled set is shown by name, never by a path on the machine (issue 23)
    names = [f["path"] for f in diff["inputs"][0]["files"].values()]
    assert names == ["bundled: general-2m", "bundled: small-familiar"]
    assert diff["criteria"]["names"] == {"A": "general-2m (modified in the study)", "B": "small-familiar"}
    assert diff["criteria"]["differences"] == [{"criterion": "visibility", "field": "limit",
                                                "values": {"A": "10 m", "B": "5 m"}}]
    assert diff["criteria"]["overrides"]["B"]["option"] == "--criteria small-familiar"
    assert diff["uncertainty"] == [] and diff["settings"] == []


def test_html_and_pdf_are_written_and_short(compared):
    from pypdf import PdfReader

    html = (compared / "comparison.html").read_text(encoding="utf-8")
    assert "<style>" in html and "http://" not in html and "https://" not in html and " src=" not in html
    assert "Visibility" in html and "10 m" in html and "5 m" in html and "No verdict changes" in html
    pdf = compared / "comparison.pdf"
    assert pdf.read_bytes()[:5] == b"%PDF-"
    assert len(PdfReader(str(pdf)).pages) <= 3
    manifest = _load(compared / "egressmargin-output.json")
    assert sorted(manifest["written"]) == ["comparison.html", "comparison.json", "comparison.pdf"]


def test_rerun_replaces_an_earlier_comparison_byte_for_byte(two_runs, tmp_path):
    out = tmp_path / "cmp"
    args = ["compare", str(two_runs[0]), str(two_runs[1]), "--out", str(out), "--no-pdf"]
    assert main(args) == 0
    first = (out / "comparison.json").read_bytes()
    assert main(args) == 0
    assert (out / "comparison.json").read_bytes() == first
    assert sorted(p.name for p in out.iterdir()) == ["comparison.html", "comparison.json",
                                                     "egressmargin-output.json"]


def _refused(cli, argv, *words):
    status, out, err = cli(argv)
    assert status == 2, err
    for w in words:
        assert w in err, (w, err)
    return err


def test_output_folder_that_is_not_a_comparison_is_left_alone(two_runs, tmp_path, cli):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    _refused(cli, ["compare", two_runs[0], two_runs[1], "--out", out, "--no-pdf"], "notes.txt", "--out")
    assert sorted(p.name for p in out.iterdir()) == ["notes.txt"]
    # an earlier comparison with a file the user added is refused too
    out2 = tmp_path / "cmp"
    assert cli(["compare", two_runs[0], two_runs[1], "--out", out2, "--no-pdf"])[0] == 0
    (out2 / "extra.txt").write_text("mine", encoding="utf-8")
    _refused(cli, ["compare", two_runs[0], two_runs[1], "--out", out2, "--no-pdf"], "extra.txt")
    assert (out2 / "extra.txt").read_text(encoding="utf-8") == "mine"
    # a run's output folder is not a comparison either
    _refused(cli, ["compare", two_runs[0], two_runs[1], "--out", two_runs[0].parent, "--no-pdf"], "results.json")
    # nor is a run's output that holds no input of this comparison: it is not replaced
    copy = tmp_path / "run-copy"
    shutil.copytree(two_runs[0].parent, copy)
    before = sorted(p.name for p in copy.iterdir())
    _refused(cli, ["compare", two_runs[0], two_runs[1], "--out", copy, "--no-pdf"], "egressmargin run",
             "results.json")
    assert sorted(p.name for p in copy.iterdir()) == before


def _variant(src: Path, folder: Path, edit) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    data = _load(src)
    edit(data)
    path = folder / "results.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def test_not_comparable_files_exit_2_with_the_reason(two_runs, tmp_path, cli, monkeypatch):
    monkeypatch.chdir(tmp_path)                      # the default output folder would go here
    a = two_runs[0]
    _refused(cli, ["compare", a], "at least two")
    _refused(cli, ["compare", a, tmp_path / "missing.json"], "missing.json", "cannot be read")
    bad = tmp_path / "bad.json"
    bad.write_text("{not json", encoding="utf-8")
    _refused(cli, ["compare", a, bad], "bad.json", "not JSON")
    other = tmp_path / "other.json"
    other.write_text('{"hello": 1}', encoding="utf-8")
    _refused(cli, ["compare", a, other], "other.json", "missing keys version, inputs, criteria, scenarios")
    future = _variant(a, tmp_path / "v9", lambda d: d.update(version="9.0.0"))
    _refused(cli, ["compare", a, future], "version", "9.0.0")
    garbled = _variant(a, tmp_path / "vx", lambda d: d.update(version="soon"))
    _refused(cli, ["compare", a, garbled], "version 'soon' cannot be read")
    titled = _variant(a, tmp_path / "title", lambda d: d["study"].update(title="Another building"))
    _refused(cli, ["compare", a, titled], "different studies", "Another building", "--allow-different-titles")

    # every reason at once
    _refused(cli, ["compare", a, tmp_path / "missing.json", titled], "missing.json", "different studies")

    def rename(d):
        for sc in d["scenarios"]:
            sc["id"] = "other-" + sc["id"]
    disjoint = _variant(a, tmp_path / "disjoint", rename)
    _refused(cli, ["compare", a, disjoint], "in common")
    assert not (tmp_path / "egressmargin-compare").exists()
    # a comparison given as a results file
    cmp_out = tmp_path / "cmp"
    assert cli(["compare", a, two_runs[1], "--out", cmp_out, "--no-pdf"])[0] == 0
    _refused(cli, ["compare", a, cmp_out / "comparison.json"], "is a comparison")


def test_different_titles_when_asked(two_runs, tmp_path, cli):
    titled = _variant(two_runs[0], tmp_path / "t", lambda d: d["study"].update(title="Option 2"))
    status, out, err = cli(["compare", two_runs[0], titled, "--allow-different-titles", "--no-pdf",
                            "--out", tmp_path / "o"])
    assert status == 0, err
    assert "the same" in out                          # same input files: only the title differs


def test_partial_overlap_and_older_files(two_runs, tmp_path, cli):
    """Items present in some runs only are listed; older files without the newer route keys read."""
    older_keys = ("p_fail_bounds", "p_fail_ci95", "samples_used", "verdict_reason")

    def trim(d):
        d["scenarios"][0]["routes"].pop()
        for sc in d["scenarios"]:
            for rt in sc["routes"]:
                for k in older_keys:
                    rt.pop(k, None)

    def newer(d):
        rt = d["scenarios"][1]["routes"][0]
        rt.update(verdict="indeterminate", p_fail=0.04, p_fail_bounds={"low": 0.01, "high": 0.04},
                  p_fail_ci95=[0.02, 0.07], samples_used=4000,
                  verdict_reason="The interval straddles the acceptance limit; more samples would settle it.")
    old = _variant(two_runs[0], tmp_path / "old", trim)
    new = _variant(two_runs[1], tmp_path / "new", newer)
    out = tmp_path / "o"
    status, stdout, err = cli(["compare", old, new, two_runs[1], "--out", out, "--no-pdf"])
    assert status == 0, err
    comp = _load(out / "comparison.json")
    assert [r["label"] for r in comp["runs"]] == ["A", "B", "C"]
    missing = _load(two_runs[0])["scenarios"][0]["routes"][-1]["id"]
    assert {"scenario": comp["scenarios"][0]["id"], "kind": "route", "id": missing,
            "only_in": ["B", "C"]} in comp["not_compared"]
    first = comp["changes"][0]
    assert first["verdict_changed"] and first["verdicts"]["B"] == "indeterminate"
    html = (out / "comparison.html").read_text(encoding="utf-8")
    assert "VERDICT CHANGED" in html and "more samples would settle it" in html and "4000 samples" in html
    assert "verdict changed" in stdout


@pytest.mark.parametrize("base, other, kind, direction, changed", [
    (300.0, 250.0, "time", "earlier", True),
    (300.0, 300.4, "time", "same", False),          # below the printed resolution (whole seconds)
    (None, 410.0, "time", "earlier", True),          # reached now, not by the end before
    (410.0, None, "time", "later", True),
    (None, None, "time", "same", False),
    (-12.0, None, "margin", "larger", True),         # ASET beyond the end: margin unbounded above
    (0.031, 0.0314, "p", "same", False),             # p_fail printed to three decimals
    (0.031, 0.040, "p", "higher", True),
    ("pass", "indeterminate", "word", "differs", True),
])
def test_change_rules(base, other, kind, direction, changed):
    c = change(base, other, kind)
    assert (c["direction"], c["changed"]) == (direction, changed)


def test_demo_results_are_not_modified(two_runs, tmp_path):
    """compare only reads: the results files keep their bytes."""
    before = [p.read_bytes() for p in two_runs]
    copy = tmp_path / "copy.json"
    shutil.copy(two_runs[1], copy)
    assert main(["compare", str(two_runs[0]), str(copy), "--no-pdf", "--out", str(tmp_path / "o")]) == 0
    assert [p.read_bytes() for p in two_runs] == before and copy.read_bytes() == before[1]


def test_shift_of_a_visibility_limit_in_closed_form(tmp_path, cli, monkeypatch):
    """K = 0.002 t [1/m]; S = C/K with C = 8 (Jin 1978): 10 m at t = 400 s, 20 m at t = 200 s.

    A study without routes compares on its locations; the 20 m set moves ASET 200 s earlier.
    """
    import numpy as np
    import yaml

    from engine_helpers import write_study

    t = np.arange(0.0, 601.0, 10.0)
    study = write_study(tmp_path, t, {"K1": ("1/m", 0.002 * t)}, [{"id": "room", "extinction": "K1"}],
                        criteria={"base": "general-2m", "only": ["visibility"]}, samples=20)
    (tmp_path / "v20.yaml").write_text(yaml.safe_dump({
        "name": "v20", "description": "Visibility 20 m only (a test set).", "sources": ["common practice"],
        "criteria": {"visibility": {"limit": "20 m", "sign_constant": 8}}}), encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    assert cli(["run", study, "--no-pdf", "--out", "a"])[0] == 0
    assert cli(["run", study, "--no-pdf", "--out", "b", "--criteria", "v20.yaml"])[0] == 0
    status, _, err = cli(["compare", "a/results.json", "b/results.json", "--no-pdf"])
    assert status == 0, err
    comp = _load(tmp_path / "egressmargin-compare" / "comparison.json")
    room = comp["scenarios"][0]["locations"][0]
    assert room["values"]["A"]["aset_raw_s"] == pytest.approx(400.0, abs=1e-6)
    assert room["values"]["B"]["aset_raw_s"] == pytest.approx(200.0, abs=1e-6)
    assert room["changes"]["B"]["aset_raw_s"] == {"changed": True, "delta": pytest.approx(-200.0, abs=1e-6),
                                                  "direction": "earlier"}
    assert comp["scenarios"][0]["routes"] == [] and comp["changes"] == []
    assert comp["differences"]["criteria"]["differences"][0]["values"] == {"A": "10 m", "B": "20 m"}


def test_changed_cells_note_the_signed_change():
    """A changed time notes its shift in whole seconds, a changed p_fail its signed shift in percentage points."""
    from egressmargin.report.compare_render import _cell
    from egressmargin.report.format import MINUS, NBSP

    t = _cell("aset_p50_s", 287.4, 1200.0, {"changed": True, "delta": -12.6, "direction": "earlier"}, {})
    assert t["note"] == f"{MINUS}13{NBSP}s" and t["worse"] and t["changed"]
    p = _cell("p_fail", 0.0623, 1200.0, {"changed": True, "delta": 0.0123, "direction": "higher"}, {})
    assert p["note"] == f"+1.23{NBSP}pp" and p["worse"]          # percentage points, as p_fail reads in percent
    m = _cell("margin_p05_s", 40.0, 1200.0, {"changed": True, "delta": 7.0, "direction": "larger"}, {})
    assert m["note"] == f"+7{NBSP}s" and not m["worse"]


# ---- damaged results.json: every field compare reads is checked (issue: hand-edited files) ----

def _damage(key_path, value):
    """An edit that sets one field of the first route (or a top-level / scenario key) to ``value``."""
    def edit(d):
        target = d
        for k in key_path[:-1]:
            target = target[k]
        if value is _DELETE:
            del target[key_path[-1]]
        else:
            target[key_path[-1]] = value
    return edit


_DELETE = object()


@pytest.mark.parametrize("key_path, value, words", [
    (("scenarios", 0, "routes", 0, "p_fail"), float("nan"), ("routes[0].p_fail", "NaN", "probability")),
    (("scenarios", 0, "routes", 0, "p_fail"), "abc", ("routes[0].p_fail", '"abc"', "probability")),
    (("scenarios", 0, "routes", 0, "margin_s", "p05"), "x", ("routes[0].margin_s.p05", '"x"', "time in seconds")),
    (("scenarios", 0, "routes", 0, "verdict"), 42, ("routes[0].verdict", "42", "pass, fail, indeterminate")),
    (("scenarios", 0, "routes", 0, "aset_s"), None, ("routes[0].aset_s", "null", "mapping")),
    (("uncertainty",), "abc", ("uncertainty", '"abc"', "mapping")),
    (("scenarios", 0, "locations"), _DELETE, ("scenarios[0]", "no 'locations'")),
    (("scenarios", 0, "end_s"), "later", ("scenarios[0].end_s", '"later"', "seconds")),
    (("scenarios", 0, "routes", 0, "p_fail_ci95"), [0.2, 0.1], ("p_fail_ci95", "low <= high")),
])
def test_damaged_results_file_exit_2_naming_file_and_field(two_runs, tmp_path, cli, key_path, value, words):
    bad = _variant(two_runs[1], tmp_path / "damaged", _damage(key_path, value))
    err = _refused(cli, ["compare", two_runs[0], bad, "--out", tmp_path / "o", "--no-pdf"],
                   str(bad), *words)
    assert "Traceback" not in err
    assert not (tmp_path / "o").exists()


def test_every_damaged_field_is_reported_at_once(two_runs, tmp_path, cli):
    def edit(d):
        d["scenarios"][0]["routes"][0]["p_fail"] = "abc"
        d["scenarios"][1]["routes"][0]["verdict"] = 42
    bad = _variant(two_runs[1], tmp_path / "damaged", edit)
    _refused(cli, ["compare", two_runs[0], bad, "--out", tmp_path / "o", "--no-pdf"],
             "scenarios[0].routes[0].p_fail", "scenarios[1].routes[0].verdict")


# ---- the comparison tables: one row model, every row spans the header's columns ----

class _Tables:
    """Column count of every row of every table of an HTML page (colspan and rowspan honoured)."""

    def __init__(self, html: str):
        from html.parser import HTMLParser

        tables = []

        class P(HTMLParser):
            def handle_starttag(self, tag, attrs):
                a = dict(attrs)
                if tag == "table":
                    tables.append({"head": None, "rows": [], "pending": []})
                elif tag == "tr" and tables:
                    tables[-1]["rows"].append([])
                elif tag in ("td", "th") and tables and tables[-1]["rows"]:
                    tables[-1]["rows"][-1].append((int(a.get("colspan", 1)), int(a.get("rowspan", 1))))

        P().feed(html)
        self.tables = tables

    def widths(self, table) -> list[int]:
        """Columns each row covers, counting cells spanning down from rows above."""
        carried: list[int] = []            # remaining rows of each spanning cell, by width
        out = []
        for row in table["rows"]:
            from_above = sum(w for w, left in carried if left > 0)
            out.append(from_above + sum(c for c, _ in row))
            carried = [(w, left - 1) for w, left in carried if left - 1 > 0]
            carried += [(c, r - 1) for c, r in row if r > 1]
        return out


def test_every_comparison_table_row_spans_the_header(two_runs, tmp_path):
    """A raw-versus-corrected what-if (the demo with and without its model-uncertainty table):
    run B's raw ASET must sit under "ASET raw", never under "Run" (the old rowspan bug)."""
    raw = _run(tmp_path / "raw", "--raw-only")
    out = tmp_path / "o"
    assert main(["compare", str(two_runs[0]), str(raw), str(two_runs[1]), "--out", str(out), "--no-pdf"]) == 0
    html = (out / "comparison.html").read_text(encoding="utf-8")
    tables = _Tables(html)
    assert len(tables.tables) >= 3
    checked = 0
    for t in tables.tables:
        widths = tables.widths(t)
        assert len(set(widths)) == 1, widths
        checked += len(widths)
    assert checked > 20
    # the cells of run B's row: label, then the values in the header's order
    comp = _load(out / "comparison.json")
    sc = comp["scenarios"][0]
    rt = next(r for r in sc["routes"] if r["changed"])
    assert rt["values"]["B"]["aset_raw_s"] == rt["values"]["A"]["aset_raw_s"]     # raw ASET does not move
