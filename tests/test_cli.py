"""The command line and results.json against the outside contract (/work/shared/contract.md).

Contract points checked here: the commands and options ("Command line"); exit status 0
done, 2 input problem, and a design that fails its check is a result (exit 0); outputs
assembled in a temporary folder and moved into place at the end, so a run that stops
leaves no half-written output; the keys of ``results.json``; "With no uncertainty file and
fixed egress inputs, p05 = p50 = p95"; a limit "first reached" is the first crossing,
linearly interpolated (exact for the fixture's linear ramps, see tests/conftest.py).

The HTML/PDF report module is being written in parallel, so most run tests replace it
with a stub (``stub_report``) or call ``pipeline.build_results`` directly; one test runs
the real report and is allowed to fail while that module is in progress.
"""

from __future__ import annotations

import hashlib
import math
import json
import os
import subprocess
import sys
import types
from pathlib import Path

import pytest

from engine_helpers import without_sign_default
import yaml
from scipy import stats

import egressmargin
from egressmargin.pipeline import RunOptions, build_results, load

REPO = Path(__file__).resolve().parent.parent
CRITERIA_DIR = REPO / "criteria"


@pytest.fixture
def stub_report(monkeypatch):
    """Replace the report package by a stub that writes a marker file; records its calls."""
    calls = []

    def render_report(results, plots, folder, paper="A4", pdf=True, **keywords):
        calls.append({"folder": Path(folder), "pdf": pdf, "paper": paper})
        (Path(folder) / "report.html").write_text("stub", encoding="utf-8")

    module = types.ModuleType("egressmargin.report")
    module.render_report = render_report
    monkeypatch.setitem(sys.modules, "egressmargin.report", module)
    monkeypatch.setattr(egressmargin, "report", module, raising=False)
    return calls


# --------------------------------------------------------------------------- version, help


def test_version(cli):
    status, out, err = cli(["--version"])
    assert status == 0
    assert out.strip() == f"egressmargin {egressmargin.__version__}"


def test_python_dash_m_version():
    """``python -m egressmargin`` works the same (contract, "Command line")."""
    env = dict(os.environ, PYTHONPATH=str(REPO / "src") + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.run([sys.executable, "-m", "egressmargin", "--version"], capture_output=True, text=True,
                          env=env, timeout=60)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == f"egressmargin {egressmargin.__version__}"


def test_no_command_prints_help_and_exits_2(cli):
    status, out, err = cli([])
    assert status == 2
    for command in ("run", "demo", "validate", "fit-uncertainty", "criteria"):
        assert command in out


def test_unknown_command_exits_2(cli):
    status, out, err = cli(["frobnicate"])
    assert status == 2 and "invalid choice: 'frobnicate'" in err


# --------------------------------------------------------------------------- criteria


def test_criteria_lists_the_bundled_sets(cli):
    status, out, err = cli(["criteria"])
    assert status == 0
    names = sorted(p.stem for p in CRITERIA_DIR.glob("*.yaml"))  # the files themselves
    assert "general-2m" in names
    listed = [line.split()[0] for line in out.splitlines() if line and not line.startswith(("Show", " "))]
    assert listed == names


def test_criteria_prints_one_set_with_its_sources(cli):
    status, out, err = cli(["criteria", "general-2m"])
    assert status == 0
    doc = yaml.safe_load((CRITERIA_DIR / "general-2m.yaml").read_text(encoding="utf-8"))  # read by PyYAML
    assert out.splitlines()[0] == doc["name"]
    for source in doc["sources"]:
        assert f"  - {source}" in out
    for cid, spec in doc["criteria"].items():
        assert any(line.strip().startswith(cid) and f"limit {spec['limit']}" in line for line in out.splitlines())


@pytest.mark.parametrize("name, hint", [("general-2n", "did you mean 'general-2m'?"), ("nosuch", "")])
def test_criteria_unknown_name_exits_2(cli, name, hint):
    status, out, err = cli(["criteria", name])
    assert status == 2
    assert f"no bundled set '{name}'" in err
    assert "expected one of general-2m" in err
    assert hint in err
    if not hint:
        assert "did you mean" not in err


# --------------------------------------------------------------------------- validate


def test_validate_good_study(cli, good_study):
    status, out, err = cli(["validate", good_study])
    assert status == 0
    assert "OK — 1 scenario, 2 locations per scenario, 1 route, criteria 'general-2m', no model-uncertainty table" in out
    assert without_sign_default(err.splitlines()) == []


def test_validate_names_the_uncertainty_table(cli, kit, make_study):
    table = ("source: illustrative statistics for a test (not a published table)\n"
             "distribution: lognormal\nquantities:\n  temperature: {bias: 1.03, sigma_model: 0.07}\n")
    study = make_study(kit.study.replace("seed: 3", "seed: 3\nuncertainty: unc.yaml"), extra={"unc.yaml": table})
    status, out, err = cli(["validate", study])
    assert status == 0 and f"model uncertainty from {study.parent / 'unc.yaml'}" in out


def test_validate_missing_study_file(cli, tmp_path):
    status, out, err = cli(["validate", tmp_path / "nosuch.yaml"])
    assert status == 2
    assert f"{tmp_path / 'nosuch.yaml'}: error: file not found" in err


def test_validate_writes_nothing(cli, good_study, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    before = sorted(os.listdir(tmp_path))
    assert cli(["validate", good_study])[0] == 0
    assert sorted(os.listdir(tmp_path)) == before


def test_fit_uncertainty_missing_pairs_file_exits_2(cli, tmp_path):
    status, out, err = cli(["fit-uncertainty", tmp_path / "pairs.csv"])
    assert status == 2 and "pairs.csv" in err and "not found" in err


# --------------------------------------------------------------------------- run


CONTRACT_CRITERION_KEYS = {"limit", "unit", "status", "raw_s", "corrected_s", "p_reached"}
CONTRACT_ROUTE_KEYS = {"id", "occupants", "rset_s", "aset_raw_s", "aset_s", "margin_s", "p_fail", "verdict"}
BAND = {"p05", "p50", "p95"}


def check_contract_keys(res: dict, study: Path) -> None:
    """Every key the contract's results.json section names, with the right kinds of value."""
    assert {"version", "seed", "samples", "inputs", "criteria", "scenarios"} <= set(res)
    assert res["version"] == egressmargin.__version__
    # paths are relative to the study file (issue 23: no absolute path of the machine)
    assert not any(Path(i["path"]).is_absolute() for i in res["inputs"])
    paths = {(study.parent / i["path"]).resolve(): i["sha256"] for i in res["inputs"]}
    for f in (study, study.parent / "fire-a.csv"):  # hashlib as the outside check
        assert paths[f.resolve()] == hashlib.sha256(f.read_bytes()).hexdigest()
    assert res["criteria"]["name"] == "general-2m"
    limit = res["criteria"]["temperature"]["limit"]  # 60 degC in general-2m, as a number or "60 degC"
    assert float(str(limit).split()[0]) == 60.0 and res["criteria"]["temperature"]["unit"] == "degC"
    for sc in res["scenarios"]:
        assert {"id", "end_s", "locations", "routes"} <= set(sc)
        for loc in sc["locations"]:
            assert {"id", "criteria", "aset_raw_s", "aset_s", "governing"} <= set(loc)
            assert set(loc["aset_s"]) == BAND
            for cid, c in loc["criteria"].items():
                assert CONTRACT_CRITERION_KEYS <= set(c), cid
                assert set(c["corrected_s"]) == BAND
                assert c["status"] in ("assessed", "not assessed")
        for r in sc["routes"]:
            assert CONTRACT_ROUTE_KEYS <= set(r)
            for k in ("rset_s", "aset_s", "margin_s"):
                assert set(r[k]) == BAND
            assert r["verdict"] in ("pass", "fail")
            assert 0.0 <= r["p_fail"] <= 1.0


def test_results_of_the_small_study(good_study):
    """build_results on the fixture: contract keys and the closed-form times of its ramps."""
    opts = RunOptions(pdf=False, html=False)
    res, _ = build_results(load(good_study, opts), opts)
    check_contract_keys(res, good_study)
    assert res["seed"] == 3 and res["samples"] == 200
    sc = res["scenarios"][0]
    assert sc["end_s"] == 590.0
    hall, stair = sc["locations"]
    t = hall["criteria"]["temperature"]
    # 20 + 0.2 t = 60 degC at t = 200 s, exactly (linear ramp, linear interpolation)
    assert t["raw_s"] == pytest.approx(200.0, abs=1e-6) and t["status"] == "assessed"
    # no uncertainty file: p05 = p50 = p95 = raw (contract)
    assert t["corrected_s"] == {"p05": t["raw_s"], "p50": t["raw_s"], "p95": t["raw_s"]}
    assert t["p_reached"] == 1.0
    # S = C/K with C = 8 (Jin 1978, light-emitting signs; general-2m): S = 10 m at K = 0.8 1/m, t = 400 s
    assert hall["criteria"]["visibility"]["raw_s"] == pytest.approx(400.0, abs=1e-6)
    # no heat-flux or layer series: "not assessed", never passed
    for cid in ("heat_flux", "layer_height"):
        c = hall["criteria"][cid]
        assert c["status"] == "not assessed" and c["raw_s"] is None and c["p_reached"] is None
    assert hall["aset_raw_s"] == pytest.approx(200.0) and hall["governing"] == "temperature"
    # the stair reaches 49.5 degC by 590 s: the limit is not reached
    st_t = stair["criteria"]["temperature"]
    assert st_t["raw_s"] is None and st_t["p_reached"] == 0.0
    assert stair["criteria"]["visibility"]["status"] == "not assessed"


def test_route_results_of_the_small_study(good_study):
    opts = RunOptions(pdf=False, html=False)
    res, _ = build_results(load(good_study, opts), opts)
    r = res["scenarios"][0]["routes"][0]
    assert r["id"] == "north-stair" and r["occupants"] == 120
    # route ASET: the earliest of hall-l1 (200 s) and stair-l1 (not reached)
    assert r["aset_raw_s"] == pytest.approx(200.0)
    assert r["aset_s"] == {"p05": 200.0, "p50": 200.0, "p95": 200.0}
    # ASET is the same in every sample, so margin = 200 - RSET sample by sample and its
    # percentiles mirror RSET's: p05(200 - R) = 200 - p95(R)
    assert r["margin_s"]["p05"] == pytest.approx(200.0 - r["rset_s"]["p95"], abs=2e-3)
    assert r["margin_s"]["p50"] == pytest.approx(200.0 - r["rset_s"]["p50"], abs=2e-3)
    assert r["margin_s"]["p95"] == pytest.approx(200.0 - r["rset_s"]["p05"], abs=2e-3)
    # fixed detection and alarm; lognormal pre-movement with median 60 s, p95 150 s
    comp = r["rset_components_s"]
    assert comp["detection"] == {"p05": 30.0, "p50": 30.0, "p95": 30.0}
    assert comp["alarm"] == {"p05": 30.0, "p50": 30.0, "p95": 30.0}
    sigma = math.log(150 / 60) / stats.norm.ppf(0.95)  # lognormal through median and p95
    ref = stats.lognorm(s=sigma, scale=60.0)  # scipy.stats as the outside check; 200 draws: 10 %
    assert comp["premovement"]["p50"] == pytest.approx(ref.ppf(0.5), rel=0.10)
    assert comp["premovement"]["p95"] == pytest.approx(ref.ppf(0.95), rel=0.15)
    assert r["rset_s"]["p05"] < r["rset_s"]["p50"] < r["rset_s"]["p95"]
    # every draw's RSET exceeds 200 s here, so the route fails with certainty: a result, not an error
    assert r["rset_s"]["p05"] > 200.0
    assert r["p_fail"] == 1.0 and r["verdict"] == "fail"


def test_run_writes_results_json(cli, good_study, tmp_path, stub_report):
    out = tmp_path / "out"
    status, text, err = cli(["run", good_study, "--no-pdf", "--html", "--out", out, "--samples", "50", "--seed", "7"])
    assert status == 0, err  # the design fails its check: still exit 0 (contract)
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    check_contract_keys(res, good_study)
    assert res["seed"] == 7 and res["samples"] == 50
    assert stub_report == [{"folder": stub_report[0]["folder"], "pdf": False, "paper": "A4"}]
    assert stub_report[0]["folder"] != out  # assembled elsewhere, then moved into place
    assert sorted(os.listdir(tmp_path)) == ["out", "study"]  # no temporary folder left
    assert "north-stair" in text and "FAIL" in text and str(out / "results.json") in text


def test_run_default_output_folder(cli, good_study, tmp_path, monkeypatch, stub_report):
    cwd = tmp_path / "cwd"
    cwd.mkdir()
    monkeypatch.chdir(cwd)
    status, out, err = cli(["run", good_study, "--no-pdf", "--html", "--samples", "20"])
    assert status == 0, err
    assert os.listdir(cwd) == ["study-out"]
    assert (cwd / "study-out" / "results.json").is_file()


def test_run_replaces_an_earlier_output(cli, good_study, tmp_path, stub_report):
    """An earlier output (its manifest lists all it holds) is replaced whole: report.html goes with it."""
    out = tmp_path / "out"
    status, _, err = cli(["run", good_study, "--no-pdf", "--html", "--out", out, "--samples", "20"])
    assert status == 0, err
    assert sorted(os.listdir(out)) == ["egressmargin-output.json", "report.html", "results.json"]
    status, _, err = cli(["run", good_study, "--no-pdf", "--out", out, "--samples", "30"])
    assert status == 0, err
    assert sorted(os.listdir(out)) == ["egressmargin-output.json", "results.json"]
    assert json.loads((out / "results.json").read_text(encoding="utf-8"))["samples"] == 30
    assert sorted(os.listdir(tmp_path)) == ["out", "study"]


def test_failed_run_leaves_an_earlier_output_untouched(cli, kit, make_study, tmp_path, stub_report):
    out = tmp_path / "out"
    out.mkdir()
    (out / "results.json").write_text("{}", encoding="utf-8")
    study = make_study(kit.study.replace("occupants: 120", "occupants: 0"))
    status, _, err = cli(["run", study, "--no-pdf", "--html", "--out", out])
    assert status == 2 and "egress[0].occupants" in err
    assert os.listdir(out) == ["results.json"] and (out / "results.json").read_text() == "{}"
    assert stub_report == []


def test_report_failure_leaves_no_output(good_study, tmp_path, monkeypatch):
    """An internal error while writing the report: no output folder and no temporary folder remain."""
    from egressmargin.cli import main

    def broken(*args, **kwargs):
        raise RuntimeError("report failed (test)")

    module = types.ModuleType("egressmargin.report")
    module.render_report = broken
    monkeypatch.setitem(sys.modules, "egressmargin.report", module)
    out = tmp_path / "out"
    with pytest.raises(RuntimeError, match="report failed"):
        main(["run", str(good_study), "--no-pdf", "--html", "--out", str(out), "--samples", "20"])
    assert sorted(os.listdir(tmp_path)) == ["study"]


def test_run_with_the_real_report(cli, good_study, tmp_path):
    """The one end-to-end ``run --no-pdf --html`` with the real report module."""
    out = tmp_path / "out"
    status, text, err = cli(["run", good_study, "--no-pdf", "--html", "--out", out])
    assert status == 0, err
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    check_contract_keys(res, good_study)
    assert (out / "report.html").is_file()
    assert not (out / "report.pdf").exists()


def test_no_pdf_alone_writes_numbers_only(cli, good_study, tmp_path):
    """``--no-pdf`` is the fast path: results.json only; ``--html`` adds report.html."""
    out = tmp_path / "numbers"
    status, _, err = cli(["run", good_study, "--no-pdf", "--out", out, "--samples", "20"])
    assert status == 0, err
    assert sorted(os.listdir(out)) == ["egressmargin-output.json", "results.json"]


# --------------------------------------------------------------------------- output options shared by run and demo


def test_run_prints_the_warnings_validate_prints(cli, kit, make_study, tmp_path):
    """Issue 13 item 7: ``run`` prints (stderr) the same warnings as ``validate``; results.json keeps them."""
    rows = [r[:6] + [f"{float(r[6]) + 273.15:g}"] for r in kit.rows()]   # T_stair in kelvin under [degC]
    study = make_study(csv=kit.csv_text(rows=rows))
    status, _, validate_err = cli(["validate", study])
    assert status == 0 and "looks like kelvin" in validate_err
    warnings = [line for line in validate_err.splitlines() if ": warning: " in line]
    status, _, run_err = cli(["run", study, "--out", tmp_path / "out", "--no-pdf", "--samples", "20", "--quiet"])
    assert status == 0, run_err
    # results.json (and so run) names files relative to the study file; validate as given
    folder = str(Path(study).resolve().parent) + os.sep
    warnings = [w.replace(folder, "") for w in warnings]
    assert [line for line in run_err.splitlines() if ": warning: " in line] == warnings
    res = json.loads((tmp_path / "out" / "results.json").read_text(encoding="utf-8"))
    assert res["warnings"] == warnings


def test_demo_and_run_no_pdf_write_the_same_files(cli, good_study, tmp_path, stub_report):
    """Issue 17 item 4: ``--no-pdf`` means results.json only for both commands; ``--html`` adds report.html."""
    for command, args in (("run", [good_study]), ("demo", [])):
        status, _, err = cli([command, *args, "--no-pdf", "--samples", "20", "--quiet", "--out", tmp_path / command])
        assert status == 0, err
        assert sorted(os.listdir(tmp_path / command)) == ["egressmargin-output.json", "results.json"], command
        status, _, err = cli([command, *args, "--no-pdf", "--html", "--samples", "20", "--quiet",
                              "--out", tmp_path / f"{command}-html"])
        assert status == 0, err
        assert sorted(os.listdir(tmp_path / f"{command}-html")) == ["egressmargin-output.json", "report.html",
                                                                   "results.json"], command
    assert [c["pdf"] for c in stub_report] == [False, False]


def test_demo_default_output_folder(cli, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    status, _, err = cli(["demo", "--no-pdf", "--samples", "20", "--quiet"])
    assert status == 0, err
    assert os.listdir(tmp_path) == ["egressmargin-demo"]


def test_help_states_the_default_output_folders(cli):
    for command, words in (("run", "<study stem>-out in the current folder"), ("demo", "./egressmargin-demo")):
        status, out, _ = cli([command, "--help"])
        assert status == 0
        assert words in " ".join(out.split()), command
        assert "--force" in out


def test_summary_into_a_closed_pipe_ends_quietly(good_study, tmp_path):
    """``egressmargin run ... | head -0``: the reader is gone before the summary is written; exit
    128 + SIGPIPE (13) as a pipe's writer gets from the shell, no BrokenPipeError traceback."""
    env = dict(os.environ, PYTHONPATH=str(REPO / "src") + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-m", "egressmargin", "run", str(good_study), "--out",
                             str(tmp_path / "out"), "--no-pdf", "--samples", "20", "--quiet"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    proc.stdout.close()                      # the reader leaves at once, as ``head`` does when done
    err = proc.stderr.read().decode()
    proc.stderr.close()
    assert proc.wait(timeout=300) == 141
    assert without_sign_default(err.splitlines()) == [], err
    assert (tmp_path / "out" / "results.json").is_file()   # the output itself was complete
