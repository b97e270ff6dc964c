"""Tests for egressmargin.uncertainty.load_table: basis of each row, non-finite numbers.

The basis rule is the project's contract ("Model-uncertainty file"): the run applies the
temperature row to the rise above ambient, the O2 row to the depletion below ambient and
the others to the quantity as given; a table fitted on another basis would correct the
wrong quantity, so it is refused.
"""

from __future__ import annotations

import pytest

from egressmargin.errors import InputError
from egressmargin.uncertainty import applied_basis, load_table

HEAD = "source: illustrative table for a test\ndistribution: lognormal\nquantities:\n"


def _table(tmp_path, body: str):
    path = tmp_path / "unc.yaml"
    path.write_text(HEAD + body, encoding="utf-8")
    return path


def _errors(path) -> list[str]:
    with pytest.raises(InputError) as info:
        load_table(path)
    return [str(p) for p in info.value.problems if not p.warning]


def test_applied_basis_follows_the_contract():
    assert applied_basis("temperature") == "rise"
    assert applied_basis("o2") == "depletion"
    assert applied_basis("co") == "as-given" and applied_basis("extinction") == "as-given"


def test_matching_basis_is_read_without_warning(tmp_path):
    path = _table(tmp_path, "  temperature: {bias: 1.05, sigma_model: 0.1, basis: rise}\n"
                            "  o2: {bias: 1.1, sigma_model: 0.1, basis: depletion}\n"
                            "  co: {bias: 1.2, sigma_model: 0.2, basis: as-given}\n")
    table = load_table(path)
    assert table.warnings == []
    assert table.quantities["o2"].basis == "depletion"
    assert table.as_results()["quantities"]["temperature"]["basis"] == "rise"


@pytest.mark.parametrize("q,basis,line", [("temperature", "as-given", 4), ("o2", "as-given", 4),
                                          ("co", "rise", 4), ("o2", "rise", 4)])
def test_mismatched_basis_is_a_located_error(tmp_path, q, basis, line):
    path = _table(tmp_path, f"  {q}:\n    bias: 1.1\n    sigma_model: 0.1\n    basis: {basis}\n")
    errors = _errors(path)
    assert len(errors) == 1
    assert f"unc.yaml:{line + 3}" in errors[0] and f"quantities.{q}.basis" in errors[0]
    assert f"basis '{basis}'" in errors[0] and f"applies the {q} row" in errors[0]


def test_unknown_basis_word(tmp_path):
    errors = _errors(_table(tmp_path, "  temperature: {bias: 1.1, sigma_model: 0.1, basis: rize}\n"))
    assert "found 'rize'" in errors[0] and "did you mean 'rise'" in errors[0]


def test_table_without_basis_reads_with_the_convention_and_warns(tmp_path):
    path = _table(tmp_path, "  temperature: {bias: 1.05, sigma_model: 0.1}\n"
                            "  o2: {bias: 1.1, sigma_model: 0.1}\n"
                            "  co: {bias: 1.2, sigma_model: 0.2}\n")
    table = load_table(path)
    assert table.quantities["temperature"].basis is None
    words = [str(w) for w in table.warnings]
    assert len(words) == 2                       # co as given is unambiguous: no warning
    assert "unc.yaml:4" in words[0] and "rise above ambient" in words[0]
    assert "depletion below ambient" in words[1]
    assert all(w.warning for w in table.warnings)


@pytest.mark.parametrize("key", ["bias", "sigma_model", "sigma_exp"])
@pytest.mark.parametrize("value", [".nan", ".inf", "-.inf"])
def test_non_finite_statistics_are_located_errors(tmp_path, key, value):
    row = {"bias": "1.1", "sigma_model": "0.1", "sigma_exp": "0.05"}
    row[key] = value
    body = "  co:\n" + "".join(f"    {k}: {v}\n" for k, v in row.items())
    errors = _errors(_table(tmp_path, body))
    assert len(errors) == 1
    line = 5 + list(row).index(key)
    assert f"unc.yaml:{line}" in errors[0] and f"quantities.co.{key}" in errors[0]
    assert "finite" in errors[0]


@pytest.mark.parametrize("which", ["min", "max"])
def test_non_finite_range_is_a_located_error(tmp_path, which):
    bounds = {"min": "0", "max": "400"}
    bounds[which] = ".inf" if which == "max" else ".nan"
    body = (f"  co:\n    bias: 1.1\n    sigma_model: 0.1\n"
            f"    range: {{min: {bounds['min']}, max: {bounds['max']}, unit: ppm}}\n")
    errors = _errors(_table(tmp_path, body))
    assert len(errors) == 1 and "quantities.co.range" in errors[0] and "finite" in errors[0]


def test_failed_fit_checks_recorded_in_the_table_are_warned_at_load(tmp_path):
    body = ("  co: {bias: 1.2, sigma_model: 0.2}\n"
            "fitted:\n  checks:\n    co:\n      trend: {test: slope t-test, p_value: 0.001, passed: false}\n"
            "      normality: {test: Shapiro-Wilk, p_value: 0.4, passed: true}\n")
    table = load_table(_table(tmp_path, body))
    words = [str(w) for w in table.warnings]
    assert len(words) == 1 and "fitted.checks.co.trend" in words[0] and "p = 0.001" in words[0]
