"""How each model-uncertainty row is applied: one closed-form case per key.

Every row has bias delta = 1.25 and sigma 0, so its factor is exactly f = 1/delta = 0.8
(McGrattan & Toman 2011: corrected mean M/delta) and every draw gives the same time.
Directions (DEVELOPERS.md, "How each table row is applied"): temperature on the rise
above ambient, O2 on the depletion below ambient, extinction / optical density / soot on
the extinction coefficient K, visibility on the visibility (K/f), the others as given.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from engine_helpers import location, results_for, write_study

T1 = np.arange(0.0, 1201.0, 1.0)
LN10 = math.log(10.0)


def _run(tmp_path, columns, loc, criterion, row, base="general-2m", t=T1, extra_criteria=None):
    unc = {"source": "synthetic rows for the direction tests", "distribution": "lognormal",
           "quantities": {row: {"bias": 1.25, "sigma_model": 0.0}}}
    crit = {"base": base, "only": [criterion], **(extra_criteria or {})}
    path = write_study(tmp_path, t, columns, [{"id": "a", **loc}], criteria=crit, uncertainty=unc, samples=50)
    res, _ = results_for(path)
    c = location(res, "a")["criteria"][criterion]
    return c["raw_s"], c["corrected_s"]["p50"]


def _iso_hcn_minutes(ppm):
    """ISO 13571 HCN term: 0.3 / (exp(phi/43)/220 - 0.0045) minutes (constants from memory)."""
    return 0.3 / (math.exp(ppm / 43.0) / 220.0 - 0.0045)


def _purser_hypoxia_minutes(o2_percent):
    """Purser (SFPE Handbook): FED 0.3 at 0.3 exp(8.13 - 0.54 (20.9 - O2)) minutes."""
    return 0.3 * math.exp(8.13 - 0.54 * (20.9 - o2_percent))


CASES = {
    # key: (columns, location keys, criterion, row, raw, corrected)
    "temperature": ({"T": ("degC", 20.0 + 0.2 * T1)}, {"temperature": "T"}, "temperature", "temperature",
                    200.0, 250.0),                       # rise 0.16 K/s reaches 40 K at 250 s
    "heat_flux": ({"q": ("kW/m^2", 0.01 * T1)}, {"heat_flux": "q"}, "heat_flux", "heat_flux", 250.0, 312.5),
    "layer_height": ({"h": ("m", np.maximum(3.0 - 0.005 * T1, 0.0))}, {"layer_height": "h"}, "layer_height", "layer_height",
                     240.0, 150.0),                      # 0.8 h = 1.8 m where h = 2.25 m
    "extinction": ({"K": ("1/m", 0.004 * T1)}, {"extinction": "K"}, "visibility", "extinction",
                   200.0, 250.0),                        # K* = 8/10 = 0.8 1/m (Jin, C = 8)
    "optical_density": ({"D": ("1/m", 0.004 * T1 / LN10)}, {"optical_density": "D"}, "visibility",
                        "optical_density", 200.0, 250.0),
    "soot": ({"s": ("mg/m^3", 0.004 * T1 / 8700.0 * 1e6)}, {"soot": "s"}, "visibility", "soot", 200.0, 250.0),
    "visibility_on_K": ({"K": ("1/m", 0.004 * T1)}, {"extinction": "K"}, "visibility", "visibility",
                        200.0, 160.0),                   # V* = 0.8 V: K* = K / 0.8
    "visibility_on_V": ({"V": ("m", np.maximum(30.0 - 0.1 * T1, 0.0))}, {"visibility": "V"}, "visibility",
                        "visibility", 200.0, 175.0),     # 0.8 V = 10 m where V = 12.5 m
    "extinction_on_V": ({"V": ("m", np.maximum(30.0 - 0.1 * T1, 0.0))}, {"visibility": "V"}, "visibility",
                        "extinction", 200.0, 220.0),     # V / 0.8 = 10 m where V = 8 m
    "co": ({"CO": ("ppm", np.full_like(T1, 1000.0))}, {"co": "CO"}, "fed_toxic", "co",
           630.0, 787.5),                                # ISO 13571: 0.3 * 35000 / 800 ppm min
    "hcn": ({"HCN": ("ppm", np.full_like(T1, 100.0))}, {"hcn": "HCN"}, "fed_toxic", "hcn",
            60 * _iso_hcn_minutes(100.0), 60 * _iso_hcn_minutes(80.0)),
    "co2": ({"CO": ("ppm", np.full_like(T1, 1000.0)), "C2": ("percent", np.full_like(T1, 5.0))},
            {"co": "CO", "co2": "C2"}, "fed_toxic", "co2",
            630.0 / math.e, 630.0 / math.exp(0.8)),      # ISO multiplier exp(CO2 %/5)
    "o2": ({"O": ("percent", np.full_like(T1, 10.0))}, {"o2": "O"}, "fed_hypoxia", "o2",
           60 * _purser_hypoxia_minutes(10.0), 60 * _purser_hypoxia_minutes(20.9 - 0.8 * 10.9)),
    "hcl": ({"H": ("ppm", 1.0 * T1)}, {"hcl": "H"}, "fec_irritant", "hcl",
            300.0, 375.0),                               # FEC = phi/1000 ppm (ISO 13571 F_HCl, from memory)
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_row_with_bias_1_25_moves_the_time_by_the_closed_form(tmp_path, case):
    columns, loc, criterion, row, raw, corrected = CASES[case]
    got_raw, got = _run(tmp_path, columns, loc, criterion, row)
    assert got_raw == pytest.approx(raw, abs=0.02)
    assert got == pytest.approx(corrected, abs=0.02)
