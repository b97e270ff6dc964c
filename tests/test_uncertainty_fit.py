"""Tests for egressmargin.uncertainty_fit (model-uncertainty table from pairs).

Method: McGrattan, K. and Toman, B. (2011), "Quantifying the predictive uncertainty of
complex numerical models", Metrologia 48(3), 173-180:
    m = mean ln(M/E), s^2 = sample variance of ln(M/E),
    sigma_M^2 = s^2 - sigma_E^2, delta = exp(m + sigma_M^2/2 - sigma_E^2/2).
The formulas are as remembered from the paper (not retrieved with the search tool).
Floor sigma_M >= sigma_E/2: from memory. Minimum of 10 pairs: common practice.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import yaml

from egressmargin.errors import InputError
from egressmargin.uncertainty_fit import (
    FLOOR_FRACTION,
    METHOD,
    MIN_PAIRS_ADVISED,
    fit_quantity,
    fit_table,
    read_pairs,
    write_table,
)
from egressmargin.uncertainty_plot import plot_fit

# Hand-worked table (five pairs). Measured values are arbitrary; each prediction is
# measured * exp(l) with the logs below, so ln(M/E) = l exactly.
HAND_MEASURED = np.array([20.0, 50.0, 100.0, 300.0, 600.0])
HAND_LOGS = np.array([0.0, 0.1, 0.2, 0.3, 0.4])
HAND_PREDICTED = HAND_MEASURED * np.exp(HAND_LOGS)


def test_fit_formulas_hand_worked():
    """McGrattan & Toman (2011) formulas on a hand-worked table.

    ln(M/E)           = 0.0, 0.1, 0.2, 0.3, 0.4
    m                 = (0.0 + 0.1 + 0.2 + 0.3 + 0.4) / 5 = 0.2
    deviations        = -0.2, -0.1, 0, 0.1, 0.2
    s^2               = (0.04 + 0.01 + 0 + 0.01 + 0.04) / (5 - 1) = 0.1 / 4 = 0.025
    sigma_E           = 0.1  ->  sigma_E^2 = 0.01
    sigma_M^2         = 0.025 - 0.01 = 0.015  ->  sigma_M = 0.122474...
    delta             = exp(0.2 + 0.015/2 - 0.01/2) = exp(0.2025) = 1.224460...
    floor sigma_E/2   = 0.05 < 0.1225: not floored. n = 5 < 10: warning.
    """
    fit = fit_quantity(HAND_MEASURED, HAND_PREDICTED, 0.1)
    assert fit["mean_ln"] == pytest.approx(0.2, abs=1e-12)
    assert fit["var_ln"] == pytest.approx(0.025, abs=1e-12)
    assert fit["sigma_model"] == pytest.approx(math.sqrt(0.015), rel=1e-12)
    assert fit["bias"] == pytest.approx(math.exp(0.2025), rel=1e-12)
    assert fit["bias"] == pytest.approx(1.224460, abs=5e-7)
    assert fit["sigma_exp"] == 0.1
    assert fit["n_pairs"] == 5
    assert fit["floored"] is False
    # Fewer than 10 pairs: a sensible minimum, common practice.
    assert MIN_PAIRS_ADVISED == 10
    assert len(fit["warnings"]) == 1 and "10" in fit["warnings"][0]


def test_recovers_known_bias_and_sigma_from_synthetic_lognormal_pairs():
    """Synthetic data from the McGrattan & Toman (2011) model, n = 2000, seed 20110301.

    True values theta; ln E = ln theta + sigma_E Z1 - sigma_E^2/2 (mean E = theta);
    ln M = ln(delta theta) + sigma_M Z2 - sigma_M^2/2 (mean M = delta theta).
    Then ln(M/E) ~ N(ln delta - sigma_M^2/2 + sigma_E^2/2, sigma_M^2 + sigma_E^2),
    which the estimators invert.

    Tolerance: 3 standard errors. With s^2 = sigma_M^2 + sigma_E^2:
    se(ln delta) = sqrt(s^2/n + s^4/(2(n-1)))  (ln delta = m + s^2/2 - sigma_E^2),
    se(sigma_M) = s^2 sqrt(2/(n-1)) / (2 sigma_M)  (delta method on sqrt).
    """
    rng = np.random.default_rng(20110301)
    n, delta, sigma_m, sigma_e = 2000, 1.15, 0.20, 0.08
    theta = rng.uniform(20.0, 800.0, n)
    e = theta * np.exp(sigma_e * rng.standard_normal(n) - sigma_e**2 / 2)
    m = delta * theta * np.exp(sigma_m * rng.standard_normal(n) - sigma_m**2 / 2)
    fit = fit_quantity(e, m, sigma_e)
    s2 = sigma_m**2 + sigma_e**2
    se_ln_delta = math.sqrt(s2 / n + s2**2 / (2 * (n - 1)))
    se_sigma_m = s2 * math.sqrt(2 / (n - 1)) / (2 * sigma_m)
    assert abs(math.log(fit["bias"]) - math.log(delta)) < 3 * se_ln_delta
    assert abs(fit["sigma_model"] - sigma_m) < 3 * se_sigma_m
    assert fit["floored"] is False
    assert fit["warnings"] == []


def test_floor_when_scatter_below_experimental():
    """Floor sigma_M >= sigma_E/2 (from memory; see FLOOR_FRACTION).

    Same logs as the hand-worked table (m = 0.2, s^2 = 0.025) with sigma_E = 0.2:
    s^2 - sigma_E^2 = 0.025 - 0.04 < 0, so sigma_M = 0.2/2 = 0.1 and
    delta = exp(0.2 + 0.01/2 - 0.04/2) = exp(0.185) = 1.203218...
    """
    assert FLOOR_FRACTION == 0.5
    fit = fit_quantity(HAND_MEASURED, HAND_PREDICTED, 0.2)
    assert fit["floored"] is True
    assert fit["sigma_model"] == pytest.approx(0.1, rel=1e-12)
    assert fit["bias"] == pytest.approx(math.exp(0.185), rel=1e-12)
    assert any("floor" in w for w in fit["warnings"])


def test_floor_when_sigma_model_positive_but_small():
    # sigma_E = 0.15: s^2 - sigma_E^2 = 0.025 - 0.0225 = 0.0025 -> sigma_M = 0.05, below
    # the floor 0.075, so sigma_M = 0.075 and delta = exp(0.2 + 0.075^2/2 - 0.0225/2).
    fit = fit_quantity(HAND_MEASURED, HAND_PREDICTED, 0.15)
    assert fit["floored"] is True
    assert fit["sigma_model"] == pytest.approx(0.075, rel=1e-12)
    assert fit["bias"] == pytest.approx(math.exp(0.2 + 0.075**2 / 2 - 0.0225 / 2), rel=1e-12)


def test_fit_quantity_rejects_bad_arrays():
    with pytest.raises(ValueError):
        fit_quantity([1.0], [1.0], 0.1)
    with pytest.raises(ValueError):
        fit_quantity([1.0, 2.0], [1.0, -2.0], 0.1)
    with pytest.raises(ValueError):
        fit_quantity([1.0, 2.0], [1.0, 2.0, 3.0], 0.1)


def _write(tmp_path, text, name="pairs.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_read_pairs_good_file(tmp_path):
    path = _write(
        tmp_path,
        "Quantity, Measured, Predicted, sigma_exp, ambient, unit\n"
        "temperature, 120, 130, 0.07, 20, degC\n"
        "temperature, 220, 210, 0.07, 20, degC\n"
        "\n"
        "CO, 50, 60, 0.10,, ppm\n"
        "co, 80, 90, 0.10,, ppm\n"
        "co, 120, 130, 0.10,, ppm\n",
    )
    pairs = read_pairs(path)
    assert list(pairs) == ["temperature", "co"]
    # rises above the 20 degC ambient (the basis the run applies temperature on)
    np.testing.assert_array_equal(pairs["temperature"]["measured"], [100.0, 200.0])
    assert pairs["temperature"]["basis"] == "rise" and pairs["co"]["basis"] == "as-given"
    assert pairs["temperature"]["range"] == {"min": 120.0, "max": 220.0, "unit": "degC"}
    np.testing.assert_array_equal(pairs["co"]["predicted"], [60.0, 90.0, 130.0])
    assert pairs["co"]["sigma_exp"] == pytest.approx(0.10)
    assert pairs["co"]["lines"] == [5, 6, 7]  # header is line 1, blank line 4
    assert pairs["temperature"]["warnings"] == []


def test_read_pairs_default_sigma_and_mixed_sigma(tmp_path):
    path = _write(tmp_path, "quantity,measured,predicted\nco2,1,1.1\nco2,2,2.1\n")
    # The contract makes sigma_exp optional: without it sigma_E is 0 (all scatter charged
    # to the model, the conservative reading) and a warning says so.
    pairs = read_pairs(path)
    assert pairs["co2"]["sigma_exp"] == 0.0
    assert any("sigma_exp" in w for w in pairs["co2"]["warnings"])
    assert read_pairs(path, default_sigma_exp=0.05)["co2"]["sigma_exp"] == 0.05

    # Rows disagree: root mean square of sigma_E, and a warning (documented choice).
    path = _write(
        tmp_path, "quantity,measured,predicted,sigma_exp\no2,1,1.1,0.03\no2,2,2.1,0.04\n"
    )
    pairs = read_pairs(path)
    assert pairs["o2"]["sigma_exp"] == pytest.approx(math.sqrt((0.03**2 + 0.04**2) / 2))
    assert len([w for w in pairs["o2"]["warnings"] if "sigma_exp differs" in w]) == 1


def test_read_pairs_reports_every_problem_located(tmp_path):
    path = _write(
        tmp_path,
        "quantity,measured,predicted,sigma_exp\n"  # line 1
        "temprature,100,110,0.07\n"  # 2: unknown quantity, did-you-mean
        "temperature,abc,110,0.07\n"  # 3: non-numeric measured
        "temperature,100,-5,0.07\n"  # 4: non-positive predicted
        "temperature,100,120,0.07\n"  # 5: fine
        "temperature,150,160,0.07\n"  # 6: fine
        "hcn,10,12,-0.1\n"  # 7: sigma_exp negative
        "visibility,10,12,0.1\n",  # 8: only one pair for visibility
    )
    with pytest.raises(InputError) as info:
        read_pairs(path)
    errors = [p for p in info.value.problems if not p.warning]
    text = "\n".join(str(p) for p in errors)
    assert len(errors) == 5, text
    assert f"{path}:2 column 'quantity'" in text and "did you mean 'temperature'?" in text
    assert f"{path}:3 column 'measured'" in text
    assert "found 'abc', expected a positive number" in text
    assert f"{path}:4 column 'predicted'" in text and "found '-5'" in text
    assert f"{path}:7 column 'sigma_exp'" in text and "found '-0.1'" in text
    assert f"{path}:8 quantity 'visibility'" in text and "at least 2" in text


def test_read_pairs_missing_columns_named(tmp_path):
    path = _write(tmp_path, "quantity,measurd,model\nco,1,2\n")
    with pytest.raises(InputError) as info:
        read_pairs(path)
    text = str(info.value)
    assert "'measured'" in text and "'predicted'" in text
    assert "'quantity', 'measured', 'predicted'" in text
    assert "did you mean 'measurd' for 'measured'?" in text
    assert f"{path}:1" in text


def test_fit_table_and_yaml_round_trip(tmp_path):
    pairs = {
        "temperature": {
            "measured": HAND_MEASURED,
            "predicted": HAND_PREDICTED,
            "sigma_exp": 0.1,
            "file": "validation/pairs.csv",
            "warnings": [],
        }
    }
    table = fit_table(pairs, source="Illustrative pairs, invented", today="2024-05-01")
    assert list(table) == ["source", "distribution", "quantities", "fitted"]
    assert table["distribution"] == "lognormal"
    row = table["quantities"]["temperature"]
    # Hand-worked values above, rounded to 4 significant digits.
    assert row == {"bias": 1.224, "sigma_model": 0.1225, "sigma_exp": 0.1, "n_pairs": 5}
    assert table["fitted"]["method"] == METHOD
    assert table["fitted"]["date"] == "2024-05-01"
    assert table["fitted"]["pairs_file"] == "validation/pairs.csv"
    assert "temperature" in table["fitted"]["warnings"]  # fewer than 10 pairs

    out = tmp_path / "uncertainty.yaml"
    write_table(table, out)
    loaded = yaml.safe_load(out.read_text())
    assert loaded == table
    assert out.read_text().splitlines()[0].startswith("source:")


@pytest.mark.parametrize("suffix", [".svg", ".png"])
def test_plot_written(tmp_path, suffix):
    rng = np.random.default_rng(7)
    e = rng.uniform(10, 500, 30)
    pairs = {
        "temperature": {"measured": HAND_MEASURED, "predicted": HAND_PREDICTED,
                        "sigma_exp": 0.1},
        "co": {"measured": e, "predicted": e * np.exp(0.2 * rng.standard_normal(30)),
               "sigma_exp": 0.1},
    }
    table = fit_table(pairs, source="illustrative", today="2024-05-01")
    out = tmp_path / f"fit{suffix}"
    plot_fit(pairs, table, out)
    assert out.stat().st_size > 1000
    head = out.read_bytes()[:200]
    if suffix == ".png":
        assert head.startswith(b"\x89PNG")
    else:
        assert b"<svg" in out.read_bytes()[:2000] or b"<?xml" in head
    with pytest.raises(ValueError):
        plot_fit(pairs, table, tmp_path / "fit.jpg")
