"""``run --criteria NAME|FILE``: another criteria set without editing the study.

The fixture study (tests/conftest.py, invented "test hall") has K = 0.002 t [1/m] at
hall-l1 and names general-2m (visibility 10 m). With S = C/K and C = 8 for
light-emitting signs (Jin 1978, Visibility through fire smoke, J. Fire & Flammability 9),
S = 10 m at K = 0.8 1/m, i.e. t = 400 s; S = 5 m at K = 1.6 1/m, t = 800 s, beyond the
histories' end (590 s); S = 20 m at K = 0.4 1/m, t = 200 s.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
import yaml

from engine_helpers import location, results_for

OWN_SET = {"name": "test-20m", "description": "Visibility only, 20 m (a test set).",
           "sources": ["common practice (test values)"],
           "criteria": {"visibility": {"limit": "20 m", "sign_constant": 8}}}


def _visibility(res):
    return location(res, "hall-l1")["criteria"]["visibility"]


def test_bundled_name_replaces_the_studys_set(good_study):
    base, _ = results_for(good_study)
    other, _ = results_for(good_study, criteria="small-familiar")
    assert _visibility(base)["raw_s"] == pytest.approx(400.0, abs=1e-6)     # Jin 1978, C = 8, 10 m
    assert _visibility(other)["limit"] == 5.0
    assert _visibility(other)["raw_s"] is None                              # 800 s > end (590 s)
    assert other["criteria"]["name"] == "small-familiar"
    assert other["criteria"]["override"] == {"option": "--criteria small-familiar",
                                             "study_criteria": "general-2m"}
    assert "override" not in base["criteria"]
    crit_inputs = [i for i in other["inputs"] if i["role"] == "criteria"]
    assert [i["path"] for i in crit_inputs] == ["bundled: small-familiar"]     # issue 23: no machine path
    assert any("--criteria small-familiar replaces" in w for w in other["warnings"])


def test_a_file_is_read_relative_to_the_current_folder(good_study, tmp_path, monkeypatch):
    cwd = tmp_path / "elsewhere"
    cwd.mkdir()
    text = yaml.safe_dump(OWN_SET)
    (cwd / "mine.yaml").write_text(text, encoding="utf-8")
    monkeypatch.chdir(cwd)
    res, _ = results_for(good_study, criteria="mine.yaml")
    assert _visibility(res)["raw_s"] == pytest.approx(200.0, abs=1e-6)      # Jin 1978, C = 8, 20 m
    assert list(location(res, "hall-l1")["criteria"]) == ["visibility"]
    entry = next(i for i in res["inputs"] if i["role"] == "criteria")
    assert entry["sha256"] == hashlib.sha256(text.encode("utf-8")).hexdigest()
    # shown relative to the study file (issue 23), and it leads to the file read
    assert not Path(entry["path"]).is_absolute()
    assert (Path(good_study).parent / entry["path"]).resolve() == (cwd / "mine.yaml").resolve()


def test_unknown_set_is_an_input_error(good_study, expect_input_error):
    err = expect_input_error(good_study, "--criteria", "small-familar")
    assert "--criteria" in err and "small-familar" in err and "small-familiar" in err


def test_cli_records_the_override(good_study, cli, tmp_path):
    out = tmp_path / "out"
    status, _, err = cli(["run", good_study, "--no-pdf", "--samples", "20", "--criteria", "small-familiar",
                          "--out", out])
    assert status == 0, err
    import json
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert res["criteria"]["name"] == "small-familiar"
    assert res["criteria"]["visibility"] == {"limit": 5.0, "unit": "m"}
