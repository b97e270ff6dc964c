"""Shared fixtures: a small valid study on disk, and a way to call the command line in-process.

The study and its histories are INVENTED for the tests (an illustrative "test hall"): the
numbers are simple ramps chosen so that times to a limit have closed forms, and are not
taken from, and must not be cited as, any published source.

Histories (60 rows, one every 10 s from 0 to 590 s; t in seconds):

=================  ===========  ======================
column             unit         value
=================  ===========  ======================
Time               s (study)    t
T_hall [degC]      degC         20 + 0.2 t   (60 degC at t = 200 s)
CO_hall [ppm]      ppm          5 t
CO2_hall [percent] percent      0.04 + 0.005 t
O2_hall [percent]  percent      20.9 - 0.005 t
K_hall [1/m]       1/m          0.002 t      (S = 8/K = 10 m at t = 400 s)
T_stair [degC]     degC         20 + 0.05 t  (never 60 degC by 590 s)
=================  ===========  ======================

The time column's header has no unit on purpose; the study gives it with
``{column: Time, unit: s}``, so both ways of naming a unit are exercised.
"""

from __future__ import annotations

import os
from pathlib import Path
from types import SimpleNamespace

import pytest

N_ROWS = 60
DT_S = 10.0

STUDY_YAML = """\
title: Test hall, small fixture (illustrative)
criteria: general-2m
samples: 200
seed: 3
acceptance: {max_p_fail: 0.05}
scenarios:
  - id: fire-a
    title: Hall fire (illustrative)
    histories: fire-a.csv
    time: {column: Time, unit: s}
    locations:
      - id: hall-l1
        temperature: T_hall
        co: CO_hall
        co2: CO2_hall
        o2: O2_hall
        extinction: K_hall
      - id: stair-l1
        temperature: T_stair
egress:
  - id: north-stair
    occupants: 120
    detection: 30 s
    alarm: 30 s
    premovement: {lognormal: {median: 60 s, p95: 150 s}}
    path:
      - {corridor: {length: 20 m, width: 2.0 m}}
      - {door: {width: 1.0 m}}
      - {stair: {length: 12 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}
    exposed_at: [hall-l1, stair-l1]
"""

HEADER = ["Time", "T_hall [degC]", "CO_hall [ppm]", "CO2_hall [percent]", "O2_hall [percent]",
          "K_hall [1/m]", "T_stair [degC]"]


def _fmt(x: float) -> str:
    return f"{round(x, 9):g}"


def histories_rows(n: int = N_ROWS) -> list[list[str]]:
    """Data rows of the fixture CSV as text cells (see the module docstring)."""
    rows = []
    for i in range(n):
        t = DT_S * i
        rows.append([_fmt(v) for v in (t, 20 + 0.2 * t, 5 * t, 0.04 + 0.005 * t, 20.9 - 0.005 * t,
                                       0.002 * t, 20 + 0.05 * t)])
    return rows


def csv_text(header=None, rows=None) -> str:
    header = HEADER if header is None else header
    rows = histories_rows() if rows is None else rows
    return "\n".join(",".join(r) for r in [header] + rows) + "\n"


def with_cell(text: str, data_row: int, column: str, value: str) -> str:
    """The CSV ``text`` with the cell of ``column`` (exact header) in data row ``data_row`` (0-based) replaced."""
    lines = text.splitlines()
    header = lines[0].split(",")
    j = header.index(column)
    cells = lines[data_row + 1].split(",")
    cells[j] = value
    lines[data_row + 1] = ",".join(cells)
    return "\n".join(lines) + "\n"


def csv_line(data_row: int, units_row: bool = False) -> int:
    """1-based file line of data row ``data_row`` (0-based): the header is line 1."""
    return data_row + 2 + (1 if units_row else 0)


def line_of(text: str, needle: str) -> int:
    """1-based line of the first line of ``text`` containing ``needle``."""
    for i, line in enumerate(text.splitlines(), start=1):
        if needle in line:
            return i
    raise AssertionError(f"{needle!r} not in the text")


def write_study(folder, yaml_text: str | None = None, csv: str | None = None, extra: dict | None = None,
                name: str = "study.yaml") -> Path:
    """Write the study (default: the valid fixture), ``fire-a.csv`` and ``extra`` files; return the study path.

    ``csv=None`` writes the valid fixture CSV; pass ``csv=False`` to write no CSV at all.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(STUDY_YAML if yaml_text is None else yaml_text, encoding="utf-8")
    if csv is not False:
        (folder / "fire-a.csv").write_text(csv_text() if csv is None else csv, encoding="utf-8")
    for fname, text in (extra or {}).items():
        (folder / fname).write_text(text, encoding="utf-8")
    return path


class _Kit(SimpleNamespace):
    def __repr__(self) -> str:  # keep hypothesis' failure reports short
        return "kit"


@pytest.fixture(scope="session")
def kit():
    """The fixture texts and plain helpers (usable from hypothesis tests: session scope)."""
    return _Kit(study=STUDY_YAML, csv=csv_text(), header=list(HEADER), rows=histories_rows,
                csv_text=csv_text, with_cell=with_cell, csv_line=csv_line, line_of=line_of, write=write_study)


@pytest.fixture
def make_study(tmp_path):
    """Callable ``(yaml_text=None, csv=None, extra=None) -> study path`` writing into ``tmp_path/study``."""
    def make(yaml_text=None, csv=None, extra=None, name="study.yaml"):
        return write_study(tmp_path / "study", yaml_text, csv, extra, name)
    return make


@pytest.fixture
def good_study(make_study):
    return make_study()


@pytest.fixture
def cli(capsys):
    """Call ``egressmargin.cli.main(argv)`` in-process; return (status, stdout, stderr).

    argparse's own exits (``--version``, usage errors) are turned into a status. Asserts
    that nothing printed looks like a traceback.
    """
    from egressmargin.cli import main

    def call(argv):
        try:
            status = main([str(a) for a in argv])
        except SystemExit as exc:
            status = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
        out, err = capsys.readouterr()
        assert "Traceback" not in out + err
        return status, out, err
    return call


def _listing(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


@pytest.fixture
def expect_input_error(cli, tmp_path, monkeypatch):
    """Run ``egressmargin run STUDY --no-pdf`` on a bad study; check exit 2 and that nothing was written.

    The command runs with an empty current directory (where the default output folder
    ``<stem>-out`` would go). Returns the message printed on stderr.
    """
    def check(study: Path, *extra_args) -> str:
        cwd = tmp_path / "cwd"
        cwd.mkdir(exist_ok=True)
        monkeypatch.chdir(cwd)
        before = _listing(study.parent)
        status, out, err = cli(["run", study, "--no-pdf", *extra_args])
        assert status == 2, f"expected exit 2, got {status}; stderr:\n{err}"
        assert not any(cwd.iterdir()), f"output written despite the error: {os.listdir(cwd)}"
        assert _listing(study.parent) == before, "files appeared beside the study despite the error"
        assert "problem" in err and "error:" in err
        return err
    return check
