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
