"""Findings of the bad-input campaign of issue 20, one test each.

Each case feeds one mistake and checks exit status 2 with a located message (the
contract's "Exit status": 2 is a problem with the input, the message names the file, the
key or column and the line), from ``validate`` and from ``run`` (``expect_input_error``
also checks that nothing is written), or checks the number now reported. The fixture
study and CSV are invented (tests/conftest.py).
"""

from __future__ import annotations

import pytest


def _both(cli, expect_input_error, study) -> tuple[str, str]:
    """stderr of ``validate`` and of ``run`` on a bad study (both exit 2)."""
    status, _, verr = cli(["validate", study])
    assert status == 2, verr
    return verr, expect_input_error(study)


# --------------------------------------------------------------------------- CSV line ends and blank lines


def test_cr_only_line_ends_are_refused_with_a_located_message(kit, make_study, cli, expect_input_error):
    """A file with CR-only line ends gave `_csv.Error: new-line character seen in unquoted field`."""
    for msg in _both(cli, expect_input_error, make_study(csv=kit.csv.replace("\n", "\r"))):
        assert "fire-a.csv:1: error: the lines end with a carriage return (CR) alone" in msg
        assert "expected LF or CR LF line ends" in msg


def test_crlf_line_ends_are_read(kit, make_study, cli):
    """The counter-case: Windows line ends (CR LF) are ordinary and read as usual."""
    status, _, err = cli(["validate", make_study(csv=kit.csv.replace("\n", "\r\n"))])
    assert status == 0, err


def test_stray_cr_inside_a_header_cell_is_located(kit, make_study, cli, expect_input_error):
    csv = kit.csv.replace("T_hall [degC]", "T_hall\r [degC]", 1)
    for msg in _both(cli, expect_input_error, make_study(csv=csv)):
        assert "fire-a.csv:1 column 2: error: a carriage return (CR) inside the cell 'T_hall<CR> [degC]'" in msg


def test_stray_cr_in_a_later_row_is_an_input_error_not_a_traceback(kit, make_study, cli, expect_input_error):
    csv = kit.csv.replace("\n200,", "\n200\r,", 1)
    for msg in _both(cli, expect_input_error, make_study(csv=csv)):
        assert "fire-a.csv:" in msg and "expected a number" in msg


@pytest.mark.parametrize("blank", ["", "   ", "\r"])
def test_blank_lines_do_not_shift_the_line_numbers(kit, make_study, cli, expect_input_error, blank):
    """Data row 10 (t = 100 s) is file line 12; one blank line before it makes it line 13, two make it 14."""
    lines = kit.csv.split("\n")
    assert lines[11].startswith("100,")
    lines[11] = "xx" + lines[11][3:]
    once = lines[:5] + [blank] + lines[5:]
    for msg in _both(cli, expect_input_error, make_study(csv="\n".join(once))):
        assert "fire-a.csv:13 column 'Time' row 11: error: found 'xx'" in msg
    twice = lines[:3] + [blank] + lines[3:8] + [blank] + lines[8:]
    status, _, err = cli(["validate", make_study(csv="\n".join(twice))])
    assert status == 2 and "fire-a.csv:14 column 'Time' row 11: error: found 'xx'" in err
    after = lines[:13] + [blank] + lines[13:]          # a blank line after the bad row changes nothing
    status, _, err = cli(["validate", make_study(csv="\n".join(after))])
    assert status == 2 and "fire-a.csv:12 column 'Time' row 11: error: found 'xx'" in err


# --------------------------------------------------------------------------- uncertainty tables: sigma as a percentage

UNC = ("source: illustrative table for a test\ndistribution: lognormal\nquantities:\n"
       "  extinction:\n    bias: 1.2\n    sigma_model: {sm}\n    sigma_exp: {se}\n")


def _with_table(kit, make_study, sm, se="0.1"):
    text = kit.study.replace("criteria: general-2m", "criteria: general-2m\nuncertainty: unc.yaml")
    return make_study(text, extra={"unc.yaml": UNC.format(sm=sm, se=se)})


@pytest.mark.parametrize("sm, se, key", [("50", "0.1", "sigma_model"), ("1.5", "0.1", "sigma_model"),
                                         ("0.3", "15", "sigma_exp")])
def test_sigma_above_one_is_refused_as_a_likely_percentage(kit, make_study, cli, expect_input_error, sm, se, key):
    """sigma_model: 50 made the visibility limit unreachable in most draws, silently.

    The threshold is fit-uncertainty's for sigma_exp (uncertainty.SIGMA_PERCENT_SUSPECT = 1,
    project choice): a lognormal factor with sigma 1 spans exp(+/-1.96) = x/7 at 95 %.
    """
    line = 6 if key == "sigma_model" else 7
    for msg in _both(cli, expect_input_error, _with_table(kit, make_study, sm, se)):
        assert f"unc.yaml:{line} quantities.extinction.{key}: error: found " in msg
        assert "is it a percentage?" in msg


def test_wide_sigma_is_a_warning_and_an_ordinary_one_is_quiet(kit, make_study, cli):
    from egressmargin.uncertainty import SIGMA_PERCENT_SUSPECT, SIGMA_WIDE
    from egressmargin import uncertainty_fit

    assert uncertainty_fit.SIGMA_PERCENT_SUSPECT is SIGMA_PERCENT_SUSPECT    # one threshold for both tools
    status, _, err = cli(["validate", _with_table(kit, make_study, "0.8")])
    assert status == 0, err
    assert "unc.yaml:6 quantities.extinction.sigma_model: warning: found 0.8" in err
    assert SIGMA_WIDE < 0.8 < SIGMA_PERCENT_SUSPECT
    status, _, err = cli(["validate", _with_table(kit, make_study, "0.3")])
    assert status == 0 and "sigma_model: warning" not in err


# --------------------------------------------------------------------------- every problem at once


def test_study_table_and_coarse_csv_problems_are_reported_together(kit, make_study, cli, expect_input_error):
    """A study error hid the table's error and a bad cell in a coarser resolution's CSV."""
    text = (kit.study.replace("samples: 200", "samples: -1")
            .replace("criteria: general-2m", "criteria: general-2m\nuncertainty: unc.yaml")
            .replace("    histories: fire-a.csv\n",
                     "    resolutions: [{cell: 0.1 m, histories: fire-a.csv}, {cell: 0.2 m, histories: coarse.csv}]\n"))
    coarse = kit.with_cell(kit.csv, 7, "T_hall [degC]", "hot")
    study = make_study(text, extra={"unc.yaml": UNC.format(sm="50", se="0.1"), "coarse.csv": coarse})
    for msg in _both(cli, expect_input_error, study):
        assert f"study.yaml:{kit.line_of(text, 'samples:')} samples: error" in msg
        assert "unc.yaml:6 quantities.extinction.sigma_model: error" in msg
        assert f"coarse.csv:{kit.csv_line(7)} column 'T_hall [degC]' row 8: error: found 'hot'" in msg


def test_a_bad_fine_csv_does_not_hide_the_coarse_one(kit, make_study, cli):
    text = kit.study.replace("    histories: fire-a.csv\n",
                             "    resolutions: [{cell: 0.1 m, histories: fire-a.csv}, {cell: 0.2 m, histories: coarse.csv}]\n")
    fine = kit.with_cell(kit.csv, 3, "CO_hall [ppm]", "n/a")
    coarse = kit.with_cell(kit.csv, 7, "T_hall [degC]", "hot")
    status, _, err = cli(["validate", make_study(text, csv=fine, extra={"coarse.csv": coarse})])
    assert status == 2
    assert f"fire-a.csv:{kit.csv_line(3)} column 'CO_hall [ppm]'" in err
    assert f"coarse.csv:{kit.csv_line(7)} column 'T_hall [degC]'" in err


# --------------------------------------------------------------------------- integer ids


def test_integer_ids_are_text_everywhere(kit, make_study, cli, tmp_path):
    """`id: 1` then `scenarios: [1]` said "no scenario '1'; expected one of 1"; ids are now compared as text."""
    import json

    text = (kit.study.replace("  - id: fire-a", "  - id: 1").replace("      - id: hall-l1", "      - id: 10")
            .replace("      - id: stair-l1", "      - id: 20").replace("  - id: north-stair", "  - id: 7")
            .replace("    occupants: 120", "    scenarios: [1]\n    start_at: 10\n    occupants: 120")
            .replace("      - {door: {width: 1.0 m}}", "      - {door: {width: 1.0 m, at: 20}}")
            .replace("exposed_at: [hall-l1, stair-l1]", "exposed_at: [10, 20]"))
    status, _, err = cli(["run", make_study(text), "--no-pdf", "--out", tmp_path / "out"])
    assert status == 0, err
    res = json.loads((tmp_path / "out" / "results.json").read_text())
    sc = res["scenarios"][0]
    assert sc["id"] == "1" and [loc["id"] for loc in sc["locations"]] == ["10", "20"]
    assert sc["routes"][0]["id"] == "7" and sc["routes"][0]["exposed_at"] == ["10", "20"]


def test_an_integer_reference_to_a_missing_id_still_says_so(kit, make_study, cli):
    text = kit.study.replace("    occupants: 120", "    scenarios: [2]\n    occupants: 120")
    status, _, err = cli(["validate", make_study(text)])
    assert status == 2 and "no scenario '2'; expected one of fire-a" in err


# --------------------------------------------------------------------------- upstream naming every user


def test_upstream_naming_every_route_is_refused(kit, make_study, cli, expect_input_error):
    """It behaved as first come, first served while the report said the routes "keep their flow"."""
    from test_egress_study import shared_study

    text = shared_study(kit).replace("  - id: shared-stair\n",
                                     "  - id: shared-stair\n    upstream: [north-stair, south-stair]\n")
    for msg in _both(cli, expect_input_error, make_study(text)):
        assert f"study.yaml:{kit.line_of(text, 'upstream:')} elements[0].upstream: error: upstream names every " \
               "route that uses element 'shared-stair' (north-stair, south-stair)" in msg
    one = shared_study(kit).replace("  - id: shared-stair\n", "  - id: shared-stair\n    upstream: [north-stair]\n")
    status, _, err = cli(["validate", make_study(one)])
    assert status == 0, err                      # one route left behind: the rule is defined


# --------------------------------------------------------------------------- implausible limits and ambient


@pytest.mark.parametrize("limit", ["-300 degC", "20 degC", "290 K", "-40 degF"])
def test_temperature_limit_not_above_room_temperature_is_refused(kit, make_study, cli, expect_input_error, limit):
    """A limit at or below 20 degC (criteria.TEMPERATURE_LIMIT_FLOOR_C, common practice) is reached before any fire;
    290 K = 16.85 degC and -40 degF = -40 degC (pint's conversions)."""
    text = kit.study.replace("criteria: general-2m", f"criteria: {{base: general-2m, temperature: {{limit: {limit}}}}}")
    for msg in _both(cli, expect_input_error, make_study(text)):
        assert f"study.yaml:{kit.line_of(text, 'criteria:')} criteria.temperature.limit: error: found '{limit}'" in msg
        assert "expected a gas temperature limit above room temperature (20 degC)" in msg


def test_a_temperature_limit_just_above_room_temperature_is_accepted(kit, make_study, cli):
    text = kit.study.replace("criteria: general-2m", "criteria: {base: general-2m, temperature: {limit: 45 degC}}")
    status, _, err = cli(["validate", make_study(text)])
    assert status == 0, err


def _ambient(kit, o2):
    return kit.study.replace("    time: {column", f"    ambient: {{o2: {o2}}}\n    time: {{column")


@pytest.mark.parametrize("o2", ["30 percent", "0.1 percent", "14 percent", "0.3 mol/mol"])
def test_implausible_ambient_oxygen_is_refused(kit, make_study, cli, expect_input_error, o2):
    """Accepted range 15 to 23.5 percent: above 23.5 % is oxygen-enriched (US OSHA 29 CFR 1910.146(b));
    15 % is about what oxygen-reduction systems hold (from memory)."""
    text = _ambient(kit, o2)
    for msg in _both(cli, expect_input_error, make_study(text)):
        assert f"study.yaml:{kit.line_of(text, 'ambient:')} scenarios[0].ambient.o2: error: found" in msg
        assert "expected an ambient oxygen fraction from 15 to 23.5 percent" in msg


def test_oxygen_deficient_ambient_is_a_warning_and_dry_air_is_quiet(kit, make_study, cli):
    """Below 19.5 % is oxygen-deficient (US OSHA 29 CFR 1910.146(b)): accepted with a warning."""
    status, _, err = cli(["validate", make_study(_ambient(kit, "17 percent"))])
    assert status == 0, err
    assert "scenarios[0].ambient.o2: warning: ambient oxygen 17 percent is below 19.5 percent" in err
    status, _, err = cli(["validate", make_study(_ambient(kit, "20.9 percent"))])
    assert status == 0 and "ambient.o2" not in err


# --------------------------------------------------------------------------- output folders


def _fake_output(folder, written):
    """An output folder as egressmargin leaves it: the listed files and a manifest naming them."""
    import json

    folder.mkdir(parents=True)
    for name in written:
        (folder / name).write_text("{}\n", encoding="utf-8")
    (folder / "egressmargin-output.json").write_text(json.dumps(
        {"tool": "egressmargin", "version": "0", "generated_utc": "2026-01-01T00:00:00Z", "command": "x",
         "written": written}), encoding="utf-8")


def test_run_refuses_an_earlier_comparison(good_study, cli, tmp_path):
    """`run --out` replaced a comparison's folder while `compare` refused a run's: both now refuse the other's."""
    out = tmp_path / "whatif"
    _fake_output(out, ["comparison.html", "comparison.json"])
    before = sorted(p.name for p in out.iterdir())
    status, _, err = cli(["run", good_study, "--out", out, "--no-pdf", "--quiet"])
    assert status == 2
    assert "holds the output of an earlier 'egressmargin compare' (comparison.json)" in err
    assert sorted(p.name for p in out.iterdir()) == before


def test_compare_refuses_a_run_output(tmp_path):
    from egressmargin.errors import InputError
    from egressmargin.report.compare_render import write_comparison

    out = tmp_path / "runout"
    _fake_output(out, ["report.html", "results.json"])
    with pytest.raises(InputError) as exc:
        write_comparison({"runs": [], "version": "0"}, out, pdf=False)
    assert "holds results.json" in str(exc.value)


def test_a_240_character_out_name_is_written(good_study, cli, tmp_path):
    """The lock's name was `.NAME.egressmargin-lock`, 259 bytes for a 240-byte NAME (NAME_MAX is 255)."""
    out = tmp_path / ("r" * 240)
    status, _, err = cli(["run", good_study, "--out", out, "--no-pdf", "--quiet", "--samples", "20"])
    assert status == 0, err
    assert (out / "results.json").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([out.name, "study"])    # lock and staging gone


def test_hidden_names_fit_name_max():
    from pathlib import Path

    from egressmargin import outputs

    for n in (1, 215, 216, 240, 255):
        name = "é" * (n // 2) if n % 2 else "r" * n      # multi-byte names are measured in bytes
        out = Path("/x") / name
        for tag in ("egressmargin-lock", "egressmargin-tmp-4194304-abcdefgh", "egressmargin-old-4194304-abcdefgh"):
            assert len(outputs._hidden(out, tag).encode()) <= outputs.NAME_MAX
    assert outputs._hidden(Path("/x/results"), "egressmargin-lock") == ".results.egressmargin-lock"


def test_a_set_aside_output_that_cannot_be_removed_is_reported(good_study, cli, tmp_path, monkeypatch):
    from egressmargin import outputs

    out = tmp_path / "prev"
    assert cli(["run", good_study, "--out", out, "--no-pdf", "--quiet", "--samples", "20"])[0] == 0
    real = outputs.remove_tree
    monkeypatch.setattr(outputs, "remove_tree",
                        lambda p: "Permission denied: 'plots'" if outputs._OLD_TAG in p.name else real(p))
    status, _, err = cli(["run", good_study, "--out", out, "--no-pdf", "--quiet", "--samples", "20"])
    assert status == 0, err
    assert "warning: the earlier output set aside here could not be removed (Permission denied: 'plots')" in err
    left = [p for p in tmp_path.iterdir() if outputs._OLD_TAG in p.name]
    assert len(left) == 1 and str(left[0]) in err
    monkeypatch.setattr(outputs, "remove_tree", real)          # the next run removes it (its process is gone)
    monkeypatch.setattr(outputs, "_alive", lambda pid: False)
    status, _, err = cli(["run", good_study, "--out", out, "--no-pdf", "--quiet", "--samples", "20"])
    assert status == 0 and "could not be removed" not in err
    assert not any(outputs._OLD_TAG in p.name for p in tmp_path.iterdir())


def test_remove_tree_gives_read_only_folders_back_to_their_owner(tmp_path, monkeypatch):
    """The second attempt makes every folder u+rwx first (checked on the modes: root may remove anyway)."""
    import shutil
    import stat

    from egressmargin import outputs

    top = tmp_path / ".prev.egressmargin-old-1-abc"
    (top / "old" / "plots").mkdir(parents=True)
    (top / "old" / "plots" / "a.png").write_bytes(b"png")
    (top / "old" / "plots").chmod(0o555)                      # read-only, as a user may leave it
    calls = []
    real = shutil.rmtree

    def rmtree(path, *a, **k):
        calls.append(stat.S_IMODE((top / "old" / "plots").stat().st_mode))
        if len(calls) == 1:
            raise PermissionError(13, "Permission denied", str(top / "old" / "plots" / "a.png"))
        return real(path, *a, **k)
    monkeypatch.setattr(shutil, "rmtree", rmtree)
    assert outputs.remove_tree(top) is None
    assert calls == [0o555, 0o755] and not top.exists()
    monkeypatch.setattr(shutil, "rmtree", lambda *a, **k: (_ for _ in ()).throw(PermissionError(13, "Permission denied", "x")))
    (tmp_path / "other").mkdir()
    assert outputs.remove_tree(tmp_path / "other") == "Permission denied: 'x'"


def test_out_through_dotdot_says_what_it_names(kit, make_study, cli, tmp_path, monkeypatch):
    study = make_study()
    monkeypatch.chdir(tmp_path)
    (tmp_path / "study" / "data").mkdir()
    status, _, err = cli(["run", study, "--out", "study/data/..", "--no-pdf", "--quiet"])
    assert status == 2
    assert f"'study/data/..' is the folder above 'study/data' ('{tmp_path / 'study'}'), named through '..'" in err
    assert "parent of the current folder" not in err


# --------------------------------------------------------------------------- messages


@pytest.mark.parametrize("command, words", [("validate", "nothing was written"),
                                            ("run", "unfinished output removed")])
def test_sigint_words_match_what_the_command_writes(good_study, cli, monkeypatch, command, words):
    """SIGINT during validate said "unfinished output removed" though validate writes nothing."""
    from egressmargin import pipeline

    def interrupted(*a, **k):
        raise KeyboardInterrupt
    monkeypatch.setattr(pipeline, "load", interrupted)
    status, _, err = cli([command, good_study, *(["--no-pdf"] if command == "run" else [])])
    assert status == 130
    assert f"egressmargin: stopped (SIGINT); {words}" in err


def test_yaml_merge_key_gets_a_located_message(kit, make_study, cli, expect_input_error):
    """The library's raw "could not determine a constructor for the tag ...merge" was shown."""
    text = kit.study.replace("egress:\n", "defaults: &d\n  alarm: 30 s\negress:\n", 1).replace(
        "    alarm: 30 s\n", "    <<: *d\n", 1)
    for msg in _both(cli, expect_input_error, make_study(text)):
        assert f"study.yaml:{kit.line_of(text, '<<: *d')} egress[0]: error: found a YAML merge key" in msg
        assert "constructor" not in msg


def test_a_date_like_title_is_the_text_as_written(kit, make_study, cli, tmp_path):
    import json

    text = kit.study.replace("title: Test hall, small fixture (illustrative)", "title: 2024-01-01")
    status, out, err = cli(["run", make_study(text), "--no-pdf", "--quiet", "--out", tmp_path / "out"])
    assert status == 0, err
    res = json.loads((tmp_path / "out" / "results.json").read_text())
    assert res["study"]["title"] == "2024-01-01"
    from egressmargin.report import render_html
    html = render_html(res, {})
    assert "2024-01-01" in html and "datetime" not in html
