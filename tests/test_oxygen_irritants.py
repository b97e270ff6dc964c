"""No supplied series ignored: O2 (hypoxia), CO2 (partial dose, narcosis), irritant gases."""

from __future__ import annotations

import math

import numpy as np
import pytest

from engine_helpers import location, results_for, write_study
from egressmargin.tenability.irritants import INCAPACITATING_PPM, fec_irritant

T = np.arange(0.0, 1201.0, 1.0)


def _crit(res, cid, lid="a"):
    return location(res, lid)["criteria"][cid]


def _purser_co(ppm):
    """Purser, SFPE Handbook: F_I,CO rate 2.764e-5 C^1.036 per minute, C in ppm."""
    return 2.764e-5 * ppm ** 1.036


def _purser_o2(pct):
    """Purser, SFPE Handbook: hypoxia rate 1/exp(8.13 - 0.54 (20.9 - O2 %)) per minute."""
    return math.exp(-(8.13 - 0.54 * (20.9 - pct)))


def test_o2_is_assessed_under_the_bundled_set(tmp_path):
    """issue 12 item 8: 10 % O2 with 100 ppm CO reaches a limit under general-2m (fed_hypoxia)."""
    cols = {"O": ("percent", np.full_like(T, 10.0)), "CO": ("ppm", np.full_like(T, 100.0))}
    res, _ = results_for(write_study(tmp_path, T, cols, [{"id": "a", "o2": "O", "co": "CO"}]))
    hyp = _crit(res, "fed_hypoxia")
    assert hyp["status"] == "assessed"
    assert hyp["raw_s"] == pytest.approx(60 * 0.3 / _purser_o2(10.0), abs=0.01)     # about 170 s
    assert location(res, "a")["aset_raw_s"] <= hyp["raw_s"]


def test_purser_method_with_hypoxia_term_about_165_s(tmp_path):
    """Purser's FED: (F_CO + F_CN) V_CO2 + F_O; 10 % O2 and 100 ppm CO reach 0.3 at about 165 s."""
    cols = {"O": ("percent", np.full_like(T, 10.0)), "CO": ("ppm", np.full_like(T, 100.0))}
    path = write_study(tmp_path, T, cols, [{"id": "a", "o2": "O", "co": "CO"}],
                       criteria={"base": "general-2m", "fed_toxic": {"method": "purser"}, "only": ["fed_toxic"]})
    res, _ = results_for(path)
    expected = 60 * 0.3 / (_purser_co(100.0) + _purser_o2(10.0))
    assert expected == pytest.approx(165.0, abs=1.0)
    assert _crit(res, "fed_toxic")["raw_s"] == pytest.approx(expected, abs=0.01)


def test_missing_co2_makes_the_toxic_dose_partial(tmp_path):
    """issue 12 item 9: without CO2 the hyperventilation multiplier is missing: partial."""
    cols = {"CO": ("ppm", np.full_like(T, 1000.0))}
    res, _ = results_for(write_study(tmp_path, T, cols, [{"id": "a", "co": "CO"}],
                                     criteria={"base": "general-2m", "only": ["fed_toxic"]}))
    c = _crit(res, "fed_toxic")
    assert c["partial"] is True and "co2" in c["missing_series"]
    cols["C2"] = ("percent", np.full_like(T, 1.0))
    res, _ = results_for(write_study(tmp_path, T, cols, [{"id": "a", "co": "CO", "co2": "C2"}],
                                     criteria={"base": "general-2m", "only": ["fed_toxic"]}))
    assert "partial" not in _crit(res, "fed_toxic")


def test_co2_alone_is_assessed_under_purser_by_narcosis(tmp_path):
    """Purser: CO2 narcosis 1/exp(6.1623 - 0.5189 CO2 %) per minute (from memory); 7 % alone."""
    cols = {"C2": ("percent", np.full_like(T, 7.0))}
    path = write_study(tmp_path, T, cols, [{"id": "a", "co2": "C2"}],
                       criteria={"base": "general-2m", "fed_toxic": {"method": "purser"}, "only": ["fed_toxic"]})
    c = _crit(results_for(path)[0], "fed_toxic")
    assert c["status"] == "assessed"
    assert c["raw_s"] == pytest.approx(60 * 0.3 * math.exp(6.1623 - 0.5189 * 7.0), abs=0.01)
    path = write_study(tmp_path, T, cols, [{"id": "a", "co2": "C2"}],
                       criteria={"base": "general-2m", "only": ["fed_toxic"]})
    assert _crit(results_for(path)[0], "fed_toxic")["status"] == "not assessed"   # ISO: CO2 only multiplies


def test_purser_narcosis_is_an_alternative_dose_not_a_larger_rate(tmp_path):
    """Purser's "or": whichever dose reaches the limit first. CO2 7 % for 120 s gives a narcosis
    dose of 2/12.6 = 0.16 (not enough); then 2000 ppm CO: the asphyxiant dose starts from 0,
    so the limit is reached 0.3 / rate later (the larger-rate rule would carry the 0.16 over)."""
    co2 = np.where(T <= 120.0, 7.0, 0.0)
    co = np.where(T <= 120.0, 0.0, 2000.0)
    cols = {"C2": ("percent", co2), "CO": ("ppm", co)}
    path = write_study(tmp_path, T, cols, [{"id": "a", "co2": "C2", "co": "CO"}],
                       criteria={"base": "general-2m", "fed_toxic": {"method": "purser"}, "only": ["fed_toxic"]})
    got = _crit(results_for(path)[0], "fed_toxic")["raw_s"]
    v0 = math.exp(2.0004) / 7.1                        # Purser V_CO2 at 0 % CO2 (eq. 17)
    rate = _purser_co(2000.0) * v0
    assert got == pytest.approx(120.0 + 60 * 0.3 / rate, abs=1.0)   # the 1 s step at 120 s
    narcosis_dose = 2.0 / math.exp(6.1623 - 0.5189 * 7.0)
    assert got - (120.0 + 60 * (0.3 - narcosis_dose) / rate) > 100.0


def test_fec_hand_sum_at_constant_concentrations():
    """ISO 13571:2012 FEC = sum phi_i / F_i, F in ppm (from memory): HCl 1000, HBr 1000, HF 500,
    SO2 150, NO2 250, acrolein 30, formaldehyde 250."""
    ppm = {"hcl": 100.0, "hbr": 50.0, "hf": 25.0, "so2": 15.0, "no2": 10.0, "acrolein": 3.0, "formaldehyde": 25.0}
    hand = 100 / 1000 + 50 / 1000 + 25 / 500 + 15 / 150 + 10 / 250 + 3 / 30 + 25 / 250
    assert INCAPACITATING_PPM == {"hcl": 1000.0, "hbr": 1000.0, "hf": 500.0, "so2": 150.0, "no2": 250.0,
                                  "acrolein": 30.0, "formaldehyde": 250.0}
    assert float(fec_irritant(**{k: v * 1e-6 for k, v in ppm.items()})) == pytest.approx(hand, rel=1e-12)


def test_fec_irritant_criterion_first_time_the_sum_reaches_the_limit(tmp_path):
    """HCl 200 ppm, SO2 30 ppm, acrolein 6 ppm (each 0.2 of F): FEC 0.6 at full strength; ramped
    in over 600 s it reaches the 0.3 limit at 300 s; constant it is reached at once."""
    ramp = np.clip(T / 600.0, 0.0, 1.0)
    cols = {"HCl": ("ppm", 200.0 * ramp), "SO2": ("ppm", 30.0 * ramp), "ACR": ("ppm", 6.0 * ramp)}
    path = write_study(tmp_path, T, cols, [{"id": "a", "hcl": "HCl", "so2": "SO2", "acrolein": "ACR"}])
    c = _crit(results_for(path)[0], "fec_irritant")
    assert c["status"] == "assessed"
    assert c["raw_s"] == pytest.approx(300.0, abs=1e-6)
