"""Progress on stderr (src/egressmargin/progress.py) and the stages the pipeline reports.

The interface (helpers' common brief): ``stage(name, total=None)``, ``step(n=1)``,
``done()``; one line per stage when stderr is not a terminal, a live bar redrawn with a
carriage return when it is; ``--quiet`` silences it.
"""

from __future__ import annotations

import io
import sys
import types
from pathlib import Path

from egressmargin.pipeline import RunOptions, run
from egressmargin.progress import BAR_WIDTH, Progress
from engine_helpers import ProgressRecorder, without_sign_default


Recorder = ProgressRecorder


def test_one_line_per_stage_when_not_a_terminal():
    stream = io.StringIO()
    p = Progress(stream)
    assert p.live is False                      # StringIO is not a terminal
    p.stage("scenario fire-a (1/2)")
    p.stage("figures", total=3)
    p.step()
    p.step(2)
    p.done()
    assert stream.getvalue() == "egressmargin: scenario fire-a (1/2) …\negressmargin: figures (3) …\n"


def test_live_bar_redraws_one_line_and_clears_it():
    stream = io.StringIO()
    p = Progress(stream, live=True)
    p.stage("figures", total=4)
    p.step()
    first = f"egressmargin: figures [{'.' * BAR_WIDTH}] 0/4"
    quarter = f"egressmargin: figures [{'#' * (BAR_WIDTH // 4)}{'.' * (BAR_WIDTH - BAR_WIDTH // 4)}] 1/4"
    assert stream.getvalue() == "\r" + first + "\r" + quarter
    p.stage("writing")                          # shorter: padded over the longer line
    assert stream.getvalue().endswith("\regressmargin: writing" + " " * (len(quarter) - len("egressmargin: writing")))
    p.done()
    assert stream.getvalue().endswith("\r" + " " * len("egressmargin: writing") + "\r")
    assert "\n" not in stream.getvalue()


def test_pipeline_reports_each_stage_in_order(good_study, tmp_path, monkeypatch):
    rec, seen = Recorder(), []

    def render_report(results, plots, folder, paper="A4", pdf=True, progress=None, generated=None):
        seen.append(progress)
        (Path(folder) / "report.html").write_text("stub", encoding="utf-8")

    module = types.ModuleType("egressmargin.report")
    module.render_report = render_report
    monkeypatch.setitem(sys.modules, "egressmargin.report", module)
    run(good_study, RunOptions(out=tmp_path / "out", samples=20, pdf=False, html=True, progress=rec))
    assert rec.calls == [("stage", "scenario fire-a (1/1)", None), ("stage", "results", None),
                         ("stage", "report", None), ("stage", "writing", None), ("done",)]
    assert seen == [rec]                        # the report adds its own stages to the same object


def test_cli_progress_lines_and_quiet(cli, good_study, tmp_path):
    status, _, err = cli(["run", good_study, "--out", tmp_path / "a", "--no-pdf", "--samples", "20"])
    assert status == 0
    assert without_sign_default(err.splitlines()) == ["egressmargin: scenario fire-a (1/1) …",
                                                      "egressmargin: results …", "egressmargin: writing …"]
    status, _, err = cli(["run", good_study, "--out", tmp_path / "b", "--no-pdf", "--samples", "20", "--quiet"])
    assert status == 0 and without_sign_default(err.splitlines()) == []   # warnings still shown
