"""Inline criteria overrides, sign types and the input errors of a criteria mapping."""

from __future__ import annotations

from pathlib import Path

import pytest

from egressmargin.criteria import resolve_criteria


def _resolve(value, base_dir=Path(".")):
    problems = []
    cset = resolve_criteria(value, lambda kp: "study.yaml: criteria." + ".".join(map(str, kp)), base_dir, problems)
    return cset, problems


def test_override_inherits_every_field_it_does_not_change():
    """issue 17 item 1: {base: general-2m, fed_toxic: {method: purser}} keeps the 0.3 limit."""
    cset, problems = _resolve({"base": "general-2m", "fed_toxic": {"method": "purser"}})
    assert problems == []
    c = cset.items["fed_toxic"]
    assert c.limit == 0.3 and c.limit_text == "0.3"
    assert c.params["method"] == "purser"
    assert "ISO 13571" in c.source and "method" in c.source          # base source kept, change named
    assert cset.items["visibility"].params["sign_constant"] == 8.0   # other criteria untouched


def test_override_of_visibility_keeps_sign_and_mass_extinction():
    cset, problems = _resolve({"base": "general-2m", "visibility": {"limit": "5 m"}})
    assert problems == []
    v = cset.items["visibility"]
    assert v.limit == 5.0 and v.params["sign_constant"] == 8.0 and v.params["mass_extinction"] == 8700.0


@pytest.mark.parametrize("spec, culprit", [
    ({"visibility": {"limit": "0 m"}}, "visibility.limit"),
    ({"visibility": {"limit": "-5 m"}}, "visibility.limit"),
    ({"visibility": {"sign_constant": float("nan")}}, "visibility.sign_constant"),
    ({"visibility": {"sign_constant": float("inf")}}, "visibility.sign_constant"),
    ({"only": []}, "only"),
    ({"visibility": {"signs": "glowing"}}, "visibility.signs"),
    ({"visibility": {"signs": "light-reflecting", "sign_constant": 8}}, "visibility.sign_constant"),
])
def test_values_run_cannot_use_are_input_errors(spec, culprit):
    """issue 13 item 5: caught when the study is read, naming the key."""
    _, problems = _resolve({"base": "general-2m", **spec})
    assert problems, spec
    assert any(p.where.endswith(culprit) for p in problems), [p.where for p in problems]


def test_light_reflecting_signs_use_c_3():
    """Jin (1978): S = C/K with C = 3 for light-reflecting signs; a 10 m limit is K = 0.3 1/m."""
    cset, problems = _resolve({"base": "general-2m", "visibility": {"signs": "light-reflecting"}})
    assert problems == []
    assert cset.items["visibility"].params["sign_constant"] == 3.0
    assert cset.visibility_signs == {"signs": "light-reflecting", "sign_constant": 3.0, "default": False}
    assert cset.as_results()["visibility_signs"]["signs"] == "light-reflecting"


def test_bundled_sign_assumption_is_reported_as_default():
    cset, _ = _resolve("general-2m")
    assert cset.visibility_signs == {"signs": "light-emitting", "sign_constant": 8.0, "default": True}
    cset, _ = _resolve({"base": "general-2m", "visibility": {"sign_constant": 8}})
    assert cset.visibility_signs["default"] is False and cset.visibility_signs["signs"] == "light-emitting"
    cset, _ = _resolve({"base": "general-2m", "visibility": {"sign_constant": 5}})
    assert cset.visibility_signs["signs"] == "custom"
