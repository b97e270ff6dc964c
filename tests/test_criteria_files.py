"""Checks on the bundled criteria sets in criteria/*.yaml.

Format: the project's outside contract, "Criteria file". Units are checked with pint
(a fresh ``pint.UnitRegistry()``), so every limit a user sees is a unit pint
understands, of the right dimension. Specific values are those of the sets' sources:
ISO 13571:2012 (FED limits 0.3 and 1.0 with method iso13571, 2.5 kW/m^2 radiant
threshold), Jin 1978 (sign constant 8 for light-emitting signs), Mulholland and
Croarkin 2000 (8700 m^2/kg, from memory), and common practice (60 degC, 10 m / 5 m,
1.8 m).
"""

from pathlib import Path

import pint
import pytest
import yaml

from egressmargin.tenability.toxicity import TOXIC_METHODS
from egressmargin.tenability.visibility import SIGN_CONSTANTS

CRITERIA_DIR = Path(__file__).resolve().parent.parent / "criteria"
FILES = sorted(CRITERIA_DIR.glob("*.yaml"))
UREG = pint.UnitRegistry()

# Dimension of each criterion's limit; None = dimensionless plain number (FED).
LIMIT_DIMENSIONS = {
    "temperature": "[temperature]",
    "visibility": "[length]",
    "heat_flux": "[mass] / [time] ** 3",  # kW/m^2
    "layer_height": "[length]",
    "fed_toxic": None,
    "fed_heat": None,
    "fed_hypoxia": None,      # Purser, SFPE Handbook, hypoxia dose
    "fec_irritant": None,     # ISO 13571:2012 irritant FEC
}


def _quantity(text: str) -> pint.Quantity:
    """Parse '60 degC'-style strings (number, unit) without offset-unit arithmetic."""
    number, unit = str(text).split(maxsplit=1)
    return UREG.Quantity(float(number), unit)


def _load(path: Path) -> dict:
    with path.open(encoding="utf-8") as f:
        return yaml.safe_load(f)


def test_at_least_three_sets():
    assert len(FILES) >= 3


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.stem)
def test_structure_and_units(path):
    data = _load(path)
    assert set(data) >= {"name", "description", "sources", "criteria"}
    assert data["name"] == path.stem
    assert data["name"] == data["name"].lower() and " " not in data["name"]
    assert isinstance(data["description"], str) and len(data["description"]) > 40
    assert isinstance(data["sources"], list) and data["sources"]
    assert all(isinstance(s, str) and s.strip() for s in data["sources"])

    criteria = data["criteria"]
    assert set(criteria) == set(LIMIT_DIMENSIONS)
    for cid, spec in criteria.items():
        assert "limit" in spec, cid
        dim = LIMIT_DIMENSIONS[cid]
        if dim is None:
            assert isinstance(spec["limit"], (int, float)) and not isinstance(spec["limit"], bool)
            assert spec["limit"] > 0
        else:
            q = _quantity(spec["limit"])
            assert q.dimensionality == UREG.get_dimensionality(dim), (cid, spec["limit"])
            assert q.magnitude > 0
        if "source" in spec:
            assert isinstance(spec["source"], str) and spec["source"].strip()

    vis = criteria["visibility"]
    assert vis["sign_constant"] in SIGN_CONSTANTS.values()
    mass_ext = _quantity(vis["mass_extinction"])
    assert mass_ext.dimensionality == UREG.get_dimensionality("m^2/kg")
    assert criteria["fed_toxic"]["method"] in TOXIC_METHODS
    threshold = _quantity(criteria["fed_heat"]["radiant_threshold"])
    assert threshold.to("kW/m^2").magnitude == pytest.approx(2.5)  # ISO 13571


def _values(name: str) -> dict:
    c = _load(CRITERIA_DIR / f"{name}.yaml")["criteria"]
    return {
        "temperature_degc": _quantity(c["temperature"]["limit"]).to("degC").magnitude,
        "visibility_m": _quantity(c["visibility"]["limit"]).to("m").magnitude,
        "sign_constant": c["visibility"]["sign_constant"],
        "mass_extinction": _quantity(c["visibility"]["mass_extinction"]).to("m^2/kg").magnitude,
        "heat_flux_kw_m2": _quantity(c["heat_flux"]["limit"]).to("kW/m^2").magnitude,
        "fed_toxic": c["fed_toxic"]["limit"],
        "fed_toxic_method": c["fed_toxic"]["method"],
        "fed_heat": c["fed_heat"]["limit"],
        "layer_height_m": _quantity(c["layer_height"]["limit"]).to("m").magnitude,
        "fed_hypoxia": c["fed_hypoxia"]["limit"],
        "fec_irritant": c["fec_irritant"]["limit"],
    }


GENERAL = {
    "temperature_degc": 60.0,  # common practice
    "visibility_m": 10.0,  # common practice
    "sign_constant": 8,  # Jin 1978, light-emitting signs
    "mass_extinction": 8700.0,  # Mulholland & Croarkin 2000 (from memory)
    "heat_flux_kw_m2": 2.5,  # ISO 13571:2012 radiant threshold
    "fed_toxic": 0.3,  # ISO 13571:2012, protects most of the population
    "fed_toxic_method": "iso13571",
    "fed_heat": 0.3,  # ISO 13571:2012
    "layer_height_m": 1.8,  # common practice
    "fed_hypoxia": 0.3,  # Purser hypoxia dose, same fraction as fed_toxic
    "fec_irritant": 0.3,  # ISO 13571:2012 irritant FEC, same fraction as the doses
}


def test_general_set_values():
    got = _values("general-2m")
    for key, expected in GENERAL.items():
        if isinstance(expected, str):
            assert got[key] == expected, key
        else:
            assert got[key] == pytest.approx(expected), key


def test_small_familiar_differs_only_in_visibility():
    got = _values("small-familiar")
    assert got["visibility_m"] == pytest.approx(5.0)  # common practice, familiar occupants
    for key, expected in GENERAL.items():
        if key != "visibility_m":
            assert got[key] == expected, key


def test_median_incapacitation_uses_fed_1():
    # ISO 13571:2012: FED 1 = incapacitation of the median person.
    got = _values("median-incapacitation")
    assert got["fed_toxic"] == got["fed_heat"] == got["fed_hypoxia"] == got["fec_irritant"] == 1.0
    for key, expected in GENERAL.items():
        if key not in ("fed_toxic", "fed_heat", "fed_hypoxia", "fec_irritant"):
            assert got[key] == expected, key


def test_signs_not_a_word_is_a_located_problem():
    """A list given for ``signs`` is reported as a problem (not a TypeError from a dict lookup)."""
    from egressmargin.criteria import parse_criterion
    problems = []
    parse_criterion("visibility", {"limit": "10 m", "signs": ["light-emitting"]}, lambda kp: kp, problems)
    assert [p.where for p in problems] == [("signs",)]
    assert "expected one of light-emitting, light-reflecting" in problems[0].message
