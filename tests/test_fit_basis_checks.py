"""fit-uncertainty: the basis of each quantity, the fit checks, the measured range, I/O safety.

Sources named beside the checks:
- McGrattan & Toman (2011), Metrologia 48(3), 173-180: delta from ln(M/E).
- The project's contract ("Model-uncertainty file"): the run applies temperature as the
  rise above ambient and O2 as the depletion below ambient.
- scipy.stats.shapiro (Shapiro & Wilk 1965) and scipy.stats.linregress: the checks'
  statistics are compared with scipy's own values.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
import yaml
from scipy import stats

from egressmargin.errors import InputError
from egressmargin.uncertainty import load_table
from egressmargin.uncertainty_fit import fit_checks, fit_table, output_problems, read_pairs, write_table


def _csv(tmp_path, text, name="pairs.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _errors(path, **kw) -> list[str]:
    with pytest.raises(InputError) as info:
        read_pairs(path, **kw)
    return [str(p) for p in info.value.problems if not p.warning]


# ------------------------------------------------------------------------ basis


def test_o2_depletion_delta(tmp_path):
    """15 % measured, 14 % predicted, ambient 20.9 %: depletions 5.9 and 6.9 %, so
    delta = 6.9/5.9 = 1.1695 (issue 12 item 7), not 14/15 = 0.933 on the concentration.
    sigma_E = 0 and identical pairs: s^2 = 0, the floor is 0, delta = exp(m) exactly
    (McGrattan & Toman 2011 with sigma_M = sigma_E = 0)."""
    path = _csv(tmp_path, "quantity,measured,predicted,sigma_exp,ambient,unit\n"
                          "o2,15,14,0,20.9,percent\no2,15,14,0,20.9,percent\n")
    pairs = read_pairs(path)
    np.testing.assert_allclose(pairs["o2"]["measured"], [5.9, 5.9])
    np.testing.assert_allclose(pairs["o2"]["predicted"], [6.9, 6.9])
    table = fit_table(pairs, "illustrative pairs", "2026-01-01")
    row = table["quantities"]["o2"]
    assert row["bias"] == pytest.approx(6.9 / 5.9, abs=5e-4)       # 1.17, not 0.933
    assert row["basis"] == "depletion"
    # the fitted table is accepted by the run without a basis warning
    out = tmp_path / "unc.yaml"
    write_table(table, out)
    loaded = load_table(out)
    assert loaded.quantities["o2"].basis == "depletion" and loaded.warnings == []


def test_temperature_ambient_gives_rises_and_a_located_error_at_or_below_ambient(tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted,ambient,unit\n"
                          "temperature,120,130,20,degC\ntemperature,220,210,20,degC\n"
                          "temperature,19,25,20,degC\n")
    errors = _errors(path)
    assert len(errors) == 1
    assert f"{path}:4 column 'measured'" in errors[0] and "rise" in errors[0] and "-1" in errors[0]


@pytest.mark.parametrize("body,words", [
    ("co,10,12,0,ppm\nco,20,22,0,ppm\n", "run applies co as given"),
    ("temperature,120,130,20,degC\ntemperature,220,210,,degC\n", "on every row"),
])
def test_ambient_that_does_not_fit(tmp_path, body, words):
    path = _csv(tmp_path, "quantity,measured,predicted,ambient,unit\n" + body)
    errors = _errors(path)
    assert any(words in e and "column 'ambient'" in e for e in errors), errors


def test_basis_column_and_option(tmp_path):
    # rises given as rises: fitted as they are, basis recorded, range not (it would be a rise)
    path = _csv(tmp_path, "quantity,measured,predicted,basis\n"
                          "temperature,100,110,rise\ntemperature,200,190,rise\n")
    pairs = read_pairs(path)
    assert pairs["temperature"]["basis"] == "rise" and pairs["temperature"]["range"] is None
    np.testing.assert_array_equal(pairs["temperature"]["measured"], [100.0, 200.0])
    # the same from the command-line mapping
    plain = _csv(tmp_path, "quantity,measured,predicted\ntemperature,100,110\ntemperature,200,190\n", "p2.csv")
    assert read_pairs(plain, basis={"temperature": "rise"})["temperature"]["basis"] == "rise"
    # a basis that does not apply to the quantity, a misspelt one, one that conflicts
    assert "does not apply to co" in _errors(plain, basis={"co": "rise"})[0]
    assert "did you mean 'depletion'" in _errors(plain, basis={"o2": "depletin"})[0]
    both = _csv(tmp_path, "quantity,measured,predicted,basis,ambient\n"
                          "temperature,120,130,rise,20\ntemperature,220,210,rise,20\n", "p3.csv")
    assert any("already rises" in e for e in _errors(both))
    conflict = _csv(tmp_path, "quantity,measured,predicted,basis\n"
                              "temperature,100,110,rise\ntemperature,200,190,as-given\n", "p4.csv")
    assert any("one basis per quantity" in e for e in _errors(conflict))


def test_unstated_basis_warns_and_records_none(tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted,sigma_exp\n"
                          "temperature,100,110,0.05\ntemperature,200,190,0.05\n")
    pairs = read_pairs(path)
    assert pairs["temperature"]["basis"] is None
    assert any("neither an 'ambient' nor a 'basis'" in w for w in pairs["temperature"]["warnings"])
    table = fit_table(pairs, "illustrative", "2026-01-01")
    assert "basis" not in table["quantities"]["temperature"]


def test_as_given_temperature_is_written_and_then_refused_by_the_run(tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted,basis\n"
                          "temperature,100,110,as-given\ntemperature,200,190,as-given\n")
    pairs = read_pairs(path)
    assert any("will refuse this table" in w for w in pairs["temperature"]["warnings"])
    out = tmp_path / "unc.yaml"
    write_table(fit_table(pairs, "illustrative", "2026-01-01"), out)
    with pytest.raises(InputError) as info:
        load_table(out)
    assert "quantities.temperature.basis" in str(info.value)


# ------------------------------------------------------------------------ range, units


def test_range_written_with_units_and_read_by_the_run(tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted,ambient,unit\n"
                          "temperature,35,40,20,degC\ntemperature,180,200,20,degC\n"
                          "co,50,55,,ppm\nco,400,380,,ppm\n")
    table = fit_table(read_pairs(path), "illustrative", "2026-01-01")
    assert table["quantities"]["temperature"]["range"] == {"min": 35.0, "max": 180.0, "unit": "degC"}
    assert table["quantities"]["co"]["range"] == {"min": 50.0, "max": 400.0, "unit": "ppm"}
    out = tmp_path / "unc.yaml"
    write_table(table, out)
    loaded = load_table(out)
    assert loaded.quantities["temperature"].range_min == pytest.approx(35.0)       # degC internal
    assert loaded.quantities["co"].range_max == pytest.approx(400e-6)              # ppm -> mol/mol (pint)


def test_units_checked_and_one_per_quantity(tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted,unit\nco,50,55,ppm\nco,400,380,percent\n"
                          "hcn,5,6,metre\nhcn,7,8,metre\n")
    errors = _errors(path)
    assert any("quantity 'co' column 'unit'" in e and "one unit" in e for e in errors)
    assert any("quantity 'hcn' column 'unit'" in e and "'metre'" in e for e in errors)


def test_no_unit_column_warns_that_no_range_is_written(tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted\nco,50,55\nco,400,380\n")
    pairs = read_pairs(path)
    assert pairs["co"]["range"] is None
    assert any("no 'unit' column" in w for w in pairs["co"]["warnings"])
    assert "range" not in fit_table(pairs, "illustrative", "2026-01-01")["quantities"]["co"]


# ------------------------------------------------------------------------ checks


def _pairs_with_trend(slope, n=40, seed=11):
    rng = np.random.default_rng(seed)
    e = np.geomspace(10.0, 1000.0, n)
    m = e * 1.2 * (e / 100.0) ** slope * np.exp(0.08 * rng.standard_normal(n))
    return e, m


def test_trend_check_fires_when_bias_grows_with_magnitude():
    e, m = _pairs_with_trend(0.15)
    check = fit_checks(e, m)
    ref = stats.linregress(np.log(e), np.log(m / e))     # scipy's own slope test
    assert check["trend"]["p_value"] == pytest.approx(ref.pvalue, rel=1e-3)
    assert check["trend"]["slope"] == pytest.approx(ref.slope, rel=1e-3)
    assert check["trend"]["passed"] is False
    table = fit_table({"co": {"measured": e, "predicted": m, "sigma_exp": 0.05}}, "illustrative", "2026-01-01")
    assert table["fitted"]["checks"]["co"]["trend"]["passed"] is False
    assert any("bias changes with the size" in w for w in table["fitted"]["warnings"]["co"])


def test_trend_check_silent_without_a_trend():
    e, m = _pairs_with_trend(0.0)
    check = fit_checks(e, m)
    assert check["trend"]["p_value"] > 0.05 and check["trend"]["passed"] is True
    table = fit_table({"co": {"measured": e, "predicted": m, "sigma_exp": 0.05}}, "illustrative", "2026-01-01")
    assert "co" not in (table["fitted"].get("warnings") or {})


def test_normality_check_is_named_and_matches_scipy():
    e, m = _pairs_with_trend(0.0)
    check = fit_checks(e, m)
    w, p = stats.shapiro(np.log(m / e))
    assert "Shapiro-Wilk" in check["normality"]["test"]
    assert check["normality"]["statistic"] == pytest.approx(w, rel=1e-3)
    assert check["normality"]["p_value"] == pytest.approx(p, rel=1e-3)
    # strongly skewed ln(M/E) (exponential): Shapiro-Wilk rejects, and the fit warns
    rng = np.random.default_rng(2)
    e = np.geomspace(10.0, 1000.0, 60)
    m = e * np.exp(rng.exponential(0.3, e.size))
    check = fit_checks(e, m)
    assert check["normality"]["passed"] is False
    table = fit_table({"co": {"measured": e, "predicted": m, "sigma_exp": 0.05}}, "illustrative", "2026-01-01")
    assert any("does not look normal" in w for w in table["fitted"]["warnings"]["co"])


def test_checks_not_computed_for_two_pairs():
    check = fit_checks([1.0, 2.0], [1.1, 2.2])
    assert check["normality"]["passed"] is None and "at least 3" in check["normality"]["note"]


# ------------------------------------------------------------------------ I/O safety (CLI)


@pytest.fixture
def pairs_file(tmp_path):
    return _csv(tmp_path, "quantity,measured,predicted,sigma_exp,unit\n"
                          + "".join(f"co,{c},{c * 1.1 + 1},0.1,ppm\n" for c in (10, 20, 40, 80, 160)))


@pytest.mark.parametrize("option,target,words", [
    ("--out", "pairs.csv", "pairs file being read"),
    ("--out", "sub", "is a folder"),
    ("--out", "nodir/t.yaml", "does not exist"),
    ("--plot", "fit.txt", "expected .svg, .png, .pdf"),
    ("--out", "old.yaml", "--force"),
    ("--out", "link.csv", "pairs file being read"),
])
def test_fit_outputs_checked_before_computing(cli, tmp_path, pairs_file, option, target, words):
    (tmp_path / "sub").mkdir()
    (tmp_path / "old.yaml").write_text("mine\n")
    (tmp_path / "link.csv").symlink_to(pairs_file)
    before = pairs_file.read_bytes()
    status, out, err = cli(["fit-uncertainty", pairs_file, option, tmp_path / target])
    assert status == 2
    assert f"{option} {tmp_path / target}" in err and words in err
    assert out == ""                                   # nothing computed or printed
    assert pairs_file.read_bytes() == before and (tmp_path / "old.yaml").read_text() == "mine\n"


def test_out_and_plot_the_same_file(cli, tmp_path, pairs_file):
    status, _, err = cli(["fit-uncertainty", pairs_file, "--out", tmp_path / "a.pdf", "--plot", tmp_path / "a.pdf"])
    assert status == 2 and "the same file as --out" in err


def test_force_replaces_an_earlier_table_atomically(cli, tmp_path, pairs_file):
    (tmp_path / "old.yaml").write_text("mine\n")
    status, out, err = cli(["fit-uncertainty", pairs_file, "--out", tmp_path / "old.yaml", "--force",
                            "--plot", tmp_path / "fit.svg"])
    assert status == 0, err
    table = yaml.safe_load((tmp_path / "old.yaml").read_text())
    assert table["quantities"]["co"]["range"]["unit"] == "ppm"
    assert (tmp_path / "fit.svg").stat().st_size > 1000
    assert not [p for p in os.listdir(tmp_path) if p.startswith(".")]     # no temporary files left


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write anywhere")
def test_unwritable_folder(tmp_path, pairs_file):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        problems = output_problems(pairs_file, locked / "t.yaml", None)
        assert len(problems) == 1 and "not writable" in problems[0].message
    finally:
        locked.chmod(0o700)


def test_basis_option_on_the_command_line(cli, tmp_path):
    path = _csv(tmp_path, "quantity,measured,predicted,sigma_exp\n"
                          "temperature,100,110,0.05\ntemperature,200,190,0.05\ntemperature,50,56,0.05\n")
    status, out, err = cli(["fit-uncertainty", path, "--basis", "temperature=rise"])
    assert status == 0, err
    assert yaml.safe_load(out)["quantities"]["temperature"]["basis"] == "rise"
    status, _, err = cli(["fit-uncertainty", path, "--basis", "temperature"])
    assert status == 2 and "QUANTITY=BASIS" in err
