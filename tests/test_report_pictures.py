"""The report's pictures show the numbers they claim to show.

External references used below:
- ISO 13571:2012, FED for convected heat: t_Iconv = 5 x 10^7 T^-3.4 min (T in degC), so
  the FED rate at a constant 100 degC is 1/7.92 per minute (the doctest in
  egressmargin.tenability.heat states the same value).
"""

from __future__ import annotations

import numpy as np
import yaml

from engine_helpers import results_for, write_study

T_HOT_C = 100.0
#: ISO 13571:2012, convected heat: time to incapacitation [min] at T_HOT_C.
T_ICONV_100C_MIN = 5e7 * T_HOT_C ** -3.4


def _hot_room_study(tmp_path):
    """A room held at 100 degC from t = 0 (ambient 20 degC), heat dose only, with an
    uncertain temperature so that the engine builds a grid of corrected dose curves."""
    t = np.arange(0.0, 601.0, 5.0)
    path = write_study(
        tmp_path, t, {"T_room": ("degC", np.full(t.size, T_HOT_C))},
        [{"id": "room", "temperature": "T_room"}],
        routes=[{"id": "out", "occupants": 10, "detection": "30 s", "alarm": "10 s",
                 "premovement": "30 s", "path": [{"door": {"width": "1.0 m"}}],
                 "exposed_at": ["room"]}],
        criteria={"base": "general-2m", "only": ["fed_heat"]},
        uncertainty={"source": "test statistics (illustrative)", "distribution": "lognormal",
                     "quantities": {"temperature": {"bias": 1.0, "sigma_model": 0.25,
                                                    "sigma_exp": 0.05}}},
        samples=300)
    study = yaml.safe_load(path.read_text(encoding="utf-8"))
    study["scenarios"][0]["ambient"] = {"temperature": "20 degC"}
    path.write_text(yaml.safe_dump(study, sort_keys=False), encoding="utf-8")
    return path, t


def _first_crossing(t, y, limit):
    i = int(np.argmax(y >= limit))
    return t[i - 1] + (limit - y[i - 1]) / (y[i] - y[i - 1]) * (t[i] - t[i - 1])


def test_raw_dose_line_is_the_raw_dose_not_a_grid_node(tmp_path):
    """Today's bug: the plotted "raw" heat dose was the lowest node of the Monte Carlo
    grid (a corrected curve), so it crossed the limit later than the table said."""
    path, t = _hot_room_study(tmp_path)
    results, plots = results_for(path)
    curve = plots["s1"]["locations"]["room"]["fed_heat"]
    expected = t / 60.0 / T_ICONV_100C_MIN          # ISO 13571 convected heat, constant T
    np.testing.assert_allclose(curve["raw"], expected, rtol=1e-9, atol=1e-12)
    raw_s = results["scenarios"][0]["locations"][0]["criteria"]["fed_heat"]["raw_s"]
    assert abs(_first_crossing(t, curve["raw"], 0.3) - raw_s) < 0.01
    # the corrected band straddles the raw line (median bias 1.0), never lies wholly above it
    lo, hi = curve["band"]
    assert np.all(lo[1:] < curve["raw"][1:]) and np.all(hi[1:] > curve["raw"][1:])


def test_detector_role_is_detection_only(tmp_path):
    """Contract (turn 2): a location with role: detector is not assessed for tenability and
    not counted as "not assessed"; it can still drive a detection rule."""
    t = np.arange(0.0, 601.0, 5.0)
    path = write_study(
        tmp_path, t, {"T_room": ("degC", 20 + 0.2 * t), "T_det": ("degC", 20 + 1.0 * t)},
        [{"id": "room", "temperature": "T_room"},
         {"id": "det", "role": "detector", "temperature": "T_det"}],
        routes=[{"id": "out", "occupants": 10,
                 "detection": {"heat": {"location": "det", "rti": 50, "activation": "57 degC",
                                        "velocity": "1 m/s"}},
                 "alarm": "10 s", "premovement": "30 s", "path": [{"door": {"width": "1.0 m"}}],
                 "exposed_at": ["room"]}],
        samples=50)
    results, plots = results_for(path)
    det = results["scenarios"][0]["locations"][1]
    assert det["role"] == "detector" and det["criteria"] == {} and det["not_assessed"] == []
    assert "det" not in plots["s1"]["locations"]
    route = results["scenarios"][0]["routes"][0]
    assert route["rset_components_s"]["detection"]["p50"] > 0


def test_a_route_cannot_be_exposed_at_a_detector(tmp_path):
    from egressmargin.errors import InputError
    from egressmargin.study import load_study
    import pytest

    t = np.arange(0.0, 61.0, 5.0)
    path = write_study(tmp_path, t, {"T_det": ("degC", 20 + t)},
                       [{"id": "det", "role": "detector", "temperature": "T_det"}],
                       routes=[{"id": "out", "occupants": 10, "detection": "30 s", "alarm": "10 s",
                                "premovement": "30 s", "path": [{"door": {"width": "1.0 m"}}],
                                "exposed_at": ["det"]}])
    with pytest.raises(InputError) as err:
        load_study(path)
    assert "exposed_at" in str(err.value) and "role: detector" in str(err.value)


def test_design_fire_keys_are_kept_as_given_and_checked(tmp_path):
    from egressmargin.errors import InputError
    from egressmargin.study import load_study
    import pytest

    t = np.arange(0.0, 61.0, 5.0)
    path = write_study(tmp_path, t, {"T_room": ("degC", 20 + t)}, [{"id": "room", "temperature": "T_room"}])
    study = yaml.safe_load(path.read_text(encoding="utf-8"))
    study["scenarios"][0]["design_fire"] = {"growth": "fast t-squared", "peak_hrr": "2.5 MW",
                                            "yields": {"co": "0.03 kg/kg"}}
    path.write_text(yaml.safe_dump(study, sort_keys=False), encoding="utf-8")
    assert load_study(path).scenarios[0].design_fire == {
        "growth": "fast t-squared", "peak_hrr": "2.5 MW", "yields": {"co": "0.03 kg/kg"}}
    results, _ = results_for(path)
    assert results["scenarios"][0]["design_fire"]["peak_hrr"] == "2.5 MW"
    study["scenarios"][0]["design_fire"] = {"peak": "2.5 MW"}
    path.write_text(yaml.safe_dump(study, sort_keys=False), encoding="utf-8")
    with pytest.raises(InputError) as err:
        load_study(path)
    assert "peak" in str(err.value) and "peak_hrr" in str(err.value)
