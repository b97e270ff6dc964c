"""A smoke series given as percent obscuration per length (%/m, %/ft) is read by Beer-Lambert.

Closed form (Beer-Lambert law; percent obscuration over a path L is p = 100 (1 - exp(-K L)),
so K = -ln(1 - p/100) / L; SFPE Handbook of Fire Protection Engineering, 5th ed., smoke
measurement, from memory): the fixture's smoke is K = 0.002 t 1/m, so with C = 8 (Jin 1978,
light-emitting signs; criteria general-2m) a 10 m visibility, K = 0.8 1/m, is reached at
t = 400 s. Here the same smoke is written as obscuration, computed in the test with math.exp.
"""

from __future__ import annotations

import json
import math

import pytest

from egressmargin.pipeline import RunOptions, build_results, load

FOOT_M = 0.3048   # international foot (exact by definition, 1959)


def _obscuration_csv(kit, length_m: float, unit: str, last: float | None = None) -> str:
    header = [("S_hall [" + unit + "]") if h == "K_hall [1/m]" else h for h in kit.header]
    rows = kit.rows()
    j = kit.header.index("K_hall [1/m]")
    for row in rows:
        t = float(row[0])
        row[j] = repr(100.0 * (1.0 - math.exp(-0.002 * t * length_m)))   # full precision
    if last is not None:
        rows[-1][j] = repr(last)
    return kit.csv_text(header, rows)


@pytest.mark.parametrize("unit, length_m", [("%/m", 1.0), ("%/ft", FOOT_M), ("percent/ft", FOOT_M)])
def test_obscuration_series_reaches_10_m_visibility_at_400_s(kit, make_study, unit, length_m):
    """K = -ln(1 - p/100)/L: the visibility limit is reached at 400 s for both units
    (before the fix: 804.7 s for %/m and 458.5 s for %/ft)."""
    study = make_study(kit.study.replace("extinction: K_hall", "extinction: S_hall"),
                       _obscuration_csv(kit, length_m, unit))
    opts = RunOptions(pdf=False, html=False, samples=20)
    res, _ = build_results(load(study, opts), opts)
    hall = res["scenarios"][0]["locations"][0]
    # t = C / (0.002 K-slope) with K = C / S: 8 / 10 / 0.002 = 400 s (closed form)
    assert hall["criteria"]["visibility"]["raw_s"] == pytest.approx(8.0 / 10.0 / 0.002, abs=1e-3)


def test_obscuration_at_100_percent_is_an_error_naming_the_cell(kit, make_study, expect_input_error):
    study = make_study(kit.study.replace("extinction: K_hall", "extinction: S_hall"),
                       _obscuration_csv(kit, 1.0, "%/m", last=100.0))
    err = expect_input_error(study)
    assert "fire-a.csv:61 column 'S_hall [%/m]' row 60" in err
    assert "100 percent or more" in err and "extinction" in err


@pytest.mark.parametrize("where", ["header", "study"])
def test_optical_density_in_percent_per_length_is_refused(kit, make_study, expect_input_error, where):
    if where == "header":
        text = kit.study.replace("extinction: K_hall", "optical_density: S_hall")
        csv = _obscuration_csv(kit, 1.0, "%/m")
    else:
        text = kit.study.replace("extinction: K_hall", "optical_density: {column: S_hall, unit: '%/ft'}")
        csv = _obscuration_csv(kit, FOOT_M, "%/ft").replace("S_hall [%/ft]", "S_hall")
    err = expect_input_error(make_study(text, csv))
    assert "percent obscuration" in err and "map the column as 'extinction'" in err


def test_cli_run_records_the_beer_lambert_time(kit, make_study, cli, tmp_path):
    study = make_study(kit.study.replace("extinction: K_hall", "extinction: S_hall"),
                       _obscuration_csv(kit, FOOT_M, "%/ft"))
    out = tmp_path / "out"
    status, _, err = cli(["run", study, "--no-pdf", "--out", out, "--samples", "20"])
    assert status == 0, err
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert res["scenarios"][0]["locations"][0]["criteria"]["visibility"]["raw_s"] == pytest.approx(400.0, abs=1e-3)


def test_smoke_detector_on_an_obscuration_series(kit, make_study):
    """A smoke rule of 3 %/ft on a location whose smoke is given in %/ft: both sides by Beer-Lambert,
    so the detector responds where 0.002 t = -ln(0.97)/0.3048 1/m, t = 49.97 s (closed form)."""
    text = kit.study.replace("extinction: K_hall", "extinction: S_hall").replace(
        "    detection: 30 s\n", "    detection: {smoke: {location: hall-l1, obscuration: 3 percent/ft}}\n")
    study = make_study(text, _obscuration_csv(kit, FOOT_M, "%/ft"))
    opts = RunOptions(pdf=False, html=False, samples=20)
    res, _ = build_results(load(study, opts), opts)
    detection = res["scenarios"][0]["routes"][0]["rset_components_s"]["detection"]
    assert detection["p50"] == pytest.approx(-math.log(0.97) / FOOT_M / 0.002, abs=0.05)
