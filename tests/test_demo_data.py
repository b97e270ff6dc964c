"""Checks of the bundled demo study's invented data and of the generator that makes it.

The demo building and its histories are invented and illustrative (demo/README.md).
These tests check that the generator is deterministic, that the CSV files carry what
the study maps with units, that the values are physically plausible, and that the
correlations inside the generator reproduce published values and closed forms.
"""

from __future__ import annotations

import importlib.util
import math
import re
from pathlib import Path

import numpy as np
import pytest
import yaml

DEMO = Path(__file__).resolve().parents[1] / "demo"
DATA = DEMO / "data"
HEADER_UNIT = re.compile(r"^\s*(.*?)\s*\[\s*([^\]]*?)\s*\]\s*$")


def _load_generator():
    spec = importlib.util.spec_from_file_location("demo_generate", DEMO / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


gen = _load_generator()


def _read_csv(path: Path) -> tuple[list[str], np.ndarray]:
    with open(path, encoding="ascii") as fh:
        header = fh.readline().rstrip("\n").split(",")
    values = np.loadtxt(path, delimiter=",", skiprows=1)
    return header, values


def _split(header: str) -> tuple[str, str | None]:
    m = HEADER_UNIT.match(header)
    return (m.group(1), m.group(2)) if m else (header.strip(), None)


def _columns(path: Path) -> dict[str, tuple[str | None, np.ndarray]]:
    header, values = _read_csv(path)
    return {_split(h)[0]: (_split(h)[1], values[:, i]) for i, h in enumerate(header)}


def _study() -> dict:
    with open(DEMO / "study.yaml", encoding="utf-8") as fh:
        return yaml.safe_load(fh)


def _csv_files() -> list[Path]:
    study = _study()
    files = set()
    for sc in study["scenarios"]:
        if "histories" in sc:
            files.add(DEMO / sc["histories"])
        for m in sc.get("ensemble", []):        # an ensemble of fire runs
            files.add(DEMO / m["histories"])
        for r in sc.get("resolutions", []):
            files.add(DEMO / r["histories"])
    return sorted(files)


def _first_crossing(t, v, level):
    above = np.nonzero(v >= level)[0]
    if above.size == 0:
        return None
    i = int(above[0])
    if i == 0:
        return float(t[0])
    return float(t[i - 1] + (level - v[i - 1]) * (t[i] - t[i - 1]) / (v[i] - v[i - 1]))


# ----------------------------------------------------------------------------------
# Determinism and the files the study names
# ----------------------------------------------------------------------------------

def test_generator_is_deterministic_and_matches_the_committed_files(tmp_path):
    written = gen.generate(tmp_path)
    assert sorted(p.name for p in written) == sorted(p.name for p in DATA.glob("*.csv"))
    for path in written:
        assert path.read_bytes() == (DATA / path.name).read_bytes(), path.name
    again = gen.generate(tmp_path / "again")
    for a, b in zip(written, again):
        assert a.read_bytes() == b.read_bytes()


def test_every_mapped_column_exists_with_a_unit():
    study = _study()
    for sc in study["scenarios"]:
        files = [DEMO / sc["histories"]] if "histories" in sc else []
        files += [DEMO / m["histories"] for m in sc.get("ensemble", [])]      # ensemble members
        files += [DEMO / r["histories"] for r in sc.get("resolutions", [])]
        for path in files:
            cols = _columns(path)
            time = sc["time"] if isinstance(sc["time"], dict) else {"column": sc["time"]}
            assert time["column"] in cols and (cols[time["column"]][0] or time.get("unit")) == "s"
            for loc in sc["locations"]:
                for key, ref in loc.items():
                    if key in ("id", "title", "role", "height"):
                        continue
                    if key == "temperature_profile":
                        assert len(ref["columns"]) == len(ref["heights"]) and 4 <= len(ref["columns"]) <= 6
                        for c in ref["columns"]:
                            assert c in cols, (path.name, c)
                            assert ref.get("unit") or cols[c][0], (path.name, c)
                        continue
                    column = ref["column"] if isinstance(ref, dict) else ref
                    unit = ref.get("unit") if isinstance(ref, dict) else None
                    assert column in cols, (path.name, loc["id"], key, column)
                    assert unit or cols[column][0], f"{path.name}: column {column} has no unit"


def test_series_keys_and_units_are_all_exercised():
    """Every series type the engine reads appears somewhere, with varied units."""
    study = _study()
    keys, units = set(), set()
    cols = _columns(DATA / "fire-a.csv")
    for loc in study["scenarios"][0]["locations"]:
        for key, ref in loc.items():
            keys.add(key)
            if isinstance(ref, dict) and "unit" in ref:
                units.add(ref["unit"])
            elif isinstance(ref, str) and ref in cols:
                units.add(cols[ref][0])
    assert {"temperature", "co", "co2", "o2", "hcn", "extinction", "optical_density", "soot", "visibility",
            "heat_flux", "layer_height", "velocity", "temperature_profile"} <= keys
    assert {"degC", "K", "ppm", "percent", "mol/mol", "1/m", "mg/m^3", "m", "kW/m^2", "m/s"} <= units


def test_resolutions_share_the_assessed_header():
    header, _ = _read_csv(DATA / "fire-a.csv")
    for name in ("fire-a-coarse.csv", "fire-a-medium.csv"):
        assert _read_csv(DATA / name)[0] == header


# ----------------------------------------------------------------------------------
# Plausibility
# ----------------------------------------------------------------------------------

@pytest.mark.parametrize("path", _csv_files(), ids=lambda p: p.name)
def test_histories_are_plausible(path):
    assert path.stat().st_size < 300_000
    cols = _columns(path)
    t = cols["Time"][1]
    assert t[0] == 0.0 and np.all(np.diff(t) == 5.0)
    assert 600.0 <= t[-1] <= 1800.0
    for name, (unit, v) in cols.items():
        assert np.all(np.isfinite(v)), name
        if name.startswith("O2_"):
            assert unit == "percent" and v.max() <= 20.9 and v.min() > 15.0, name
        elif unit == "degC" or name.startswith("Tree_"):
            assert v.min() >= 19.99 and v.max() < 600.0, name
        elif unit == "K":
            assert v.min() >= 293.14, name
        else:
            assert v.min() >= 0.0, name      # concentrations, smoke, flux, velocity, heights
        # every history starts from ambient air (O2 20.9 %, CO2 400 ppm, no smoke)
        start = {"CO2_": 0.04, "X_CO2_": 0.0004, "O2_": 20.9, "CO_": 0.0, "HCN_": 0.0, "Ext_": 0.0,
                 "OD_": 0.0, "Soot_": 0.0, "Flux_": 0.0}
        for prefix, value in start.items():
            if name.startswith(prefix):
                assert v[0] == pytest.approx(value, abs=1e-9), name


# ----------------------------------------------------------------------------------
# Published correlations and closed forms
# ----------------------------------------------------------------------------------

def test_t_squared_growth_constants_and_hrr_at_growth_time():
    # NFPA 72 (2019) Annex B: Q = alpha t^2 reaches 1055 kW at t_g; fast t_g = 150 s gives
    # alpha = 0.0469 kW/s^2, medium t_g = 300 s gives 0.01172 kW/s^2 (tabulated values).
    assert gen.growth_constant(150.0) == pytest.approx(0.0469, abs=5e-5)
    assert gen.growth_constant(300.0) == pytest.approx(0.01172, abs=5e-6)
    for t_g in (75.0, 150.0, 300.0, 600.0):
        assert float(gen.t_squared_hrr(t_g, gen.growth_constant(t_g))) == pytest.approx(1055.0, rel=1e-12)
    assert float(gen.t_squared_hrr(400.0, gen.growth_constant(150.0), 2500.0)) == 2500.0


def test_plume_mass_flow_nfpa92_hand_value_and_continuity():
    # NFPA 92 (2012) sec. 5.5.1: m = 0.071 Qc^(1/3) z^(5/3) + 0.0018 Qc above z_l; hand value
    # for Qc = 1000 kW, z = 10 m: 0.071 * 10 * 10^(5/3) + 1.8 = 34.755 kg/s.
    assert float(gen.plume_mass_flow(1000.0, 10.0)) == pytest.approx(0.071 * 10 * 10 ** (5 / 3) + 1.8, rel=1e-12)
    assert float(gen.plume_mass_flow(1000.0, 10.0)) == pytest.approx(34.755, abs=1e-3)
    # near field m = 0.032 Qc^(3/5) z; the two forms meet at z_l = 0.166 Qc^(2/5) within about 1 %
    for qc in (100.0, 1000.0, 5000.0):
        z_l = 0.166 * qc**0.4
        below = float(gen.plume_mass_flow(qc, z_l))
        above = 0.071 * qc ** (1 / 3) * z_l ** (5 / 3) + 0.0018 * qc
        assert below == pytest.approx(0.032 * qc**0.6 * z_l, rel=1e-12)
        assert below == pytest.approx(above, rel=0.015)


def test_alpert_ceiling_jet_regions_meet():
    # Alpert (1972): dT = 16.9 Q^(2/3)/H^(5/3) (r/H <= 0.18) and 5.38 (Q/r)^(2/3)/H meet at
    # r/H = 0.18 (5.38 / 0.18^(2/3) = 16.88); U = 0.96 (Q/H)^(1/3) (r/H <= 0.15) and
    # 0.195 Q^(1/3) H^(1/2) / r^(5/6) meet at r/H = 0.15 within 2 %.
    q, h = 1000.0, 4.0
    dt_in, u_in = gen.alpert_ceiling_jet(q, h, 0.15 * h)
    dt_out, _ = gen.alpert_ceiling_jet(q, h, 0.1801 * h)
    _, u_out = gen.alpert_ceiling_jet(q, h, 0.1501 * h)
    assert float(dt_in) == pytest.approx(16.9 * q ** (2 / 3) / h ** (5 / 3), rel=1e-12)
    assert float(dt_out) == pytest.approx(float(dt_in), rel=0.005)
    assert float(u_out) == pytest.approx(float(u_in), rel=0.02)
    # hand value beyond the turning region: Q = 1000 kW, H = 4 m, r = 3 m
    dt, u = gen.alpert_ceiling_jet(q, h, 3.0)
    assert float(dt) == pytest.approx(5.38 * (1000 / 3) ** (2 / 3) / 4, rel=1e-12)
    assert float(u) == pytest.approx(0.195 * 10 * 2 / 3 ** (5 / 6), rel=1e-12)


def test_rti_link_step_response_closed_form():
    # Heskestad & Bill (1988) RTI model: for a step in gas rise dTg at constant u,
    # theta(t) = dTg (1 - exp(-t sqrt(u) / RTI)).
    t = np.arange(0.0, 121.0, 1.0)
    gas = np.full_like(t, 50.0)
    gas[0] = 0.0
    theta = gen.link_temperature_rise(t, gas, np.full_like(t, 1.5), 50.0)
    expected = 50.0 * (1.0 - np.exp(-t * math.sqrt(1.5) / 50.0))
    assert np.allclose(theta, expected, rtol=1e-12, atol=1e-12)


def test_point_source_radiation_and_stefan_boltzmann():
    # point-source model (Modak 1977): q = chi_r Q / (4 pi r^2), chi_r = 0.3 (assumed)
    assert float(gen.point_source_flux(2500.0, 7.0)) == pytest.approx(0.3 * 2500 / (4 * math.pi * 49), rel=1e-12)
    # CODATA 2018 Stefan-Boltzmann constant, checked against scipy.constants
    scipy_constants = pytest.importorskip("scipy.constants")
    assert gen.SIGMA_KW * 1e3 == pytest.approx(scipy_constants.Stefan_Boltzmann, rel=1e-9)


def test_zone_model_equilibrium_matches_closed_form():
    """Steady fire with exhaust: the layer settles where the plume's volume flow plus the
    expansion equals the fan flow; then dT = (1 - lambda) Qc / (m_p cp) and the soot
    density is y_s Q / (dH_c V_fan) (mass balances of the generator's own model)."""
    q_kw, v_fan, area, ceiling, loss = 2500.0, 50.0, 320.0, 16.5, 0.35
    n = int(1500 / gen.DT_S)
    q = np.full(n, q_kw)
    zone = gen.fill_zone(n, area, ceiling, gen.fire_source(q, 0.5), loss, exhaust_m3_s=np.full(n, v_fan))
    qc = 0.7 * q_kw
    expansion = (1 - loss) * qc / (gen.RHO0 * gen.CP * gen.T0_K)
    lo, hi = 0.5, ceiling          # bisection for the closed-form equilibrium height
    for _ in range(60):
        mid = (lo + hi) / 2
        if float(gen.plume_mass_flow(qc, mid - 0.5)) / gen.RHO0 + expansion > v_fan:
            hi = mid
        else:
            lo = mid
    z_eq = (lo + hi) / 2
    m_p = float(gen.plume_mass_flow(qc, z_eq - 0.5))
    assert zone["z_int"][-1] == pytest.approx(z_eq, abs=0.02)
    assert zone["t_layer_k"][-1] - gen.T0_K == pytest.approx((1 - loss) * qc / (m_p * gen.CP), rel=0.01)
    state = gen.layer_state(zone, ceiling)
    k_closed = gen.K_M_M2_KG * gen.YIELDS["soot"] * q_kw / (gen.HEAT_OF_COMBUSTION_KJ_KG * v_fan)
    assert state["K"][-1] == pytest.approx(k_closed, rel=0.01)
    # oxygen: Huggett's 13.1 MJ/kg O2; the deficit mass fraction is (Q/13100) / m_p
    assert zone["y"]["o2def"][-1] == pytest.approx(q_kw / 13100.0 / m_p, rel=0.01)


def test_zone_filling_is_no_faster_than_the_nfpa92_correlation():
    """NFPA 92 (2012) sec. 5.4 empirical filling correlation for a steady fire,
    z/H = 1.11 - 0.28 ln[(t Q^(1/3)/H^(4/3))/(A/H^2)], describes the first indication
    of smoke (from memory), so a zone interface lies above it; the two should still
    agree within a factor of two in time over 0.2 <= z/H <= 0.8."""
    for q_kw, h, area in ((1000.0, 16.0, 320.0), (2000.0, 10.0, 400.0), (5000.0, 20.0, 1000.0)):
        n = int(600 / gen.DT_S) + 1
        t = np.arange(n) * gen.DT_S
        z = gen.fill_zone(n, area, h, gen.fire_source(np.full(n, q_kw), 0.0), 0.0)["z_int"]
        z_corr = gen.nfpa92_steady_fill_height(t, q_kw, h, area)
        for frac in (0.8, 0.6, 0.4, 0.2):
            t_zone = t[np.argmax(z <= frac * h)]
            t_corr = t[np.argmax(z_corr <= frac * h)]
            assert t_corr <= t_zone <= 2.0 * t_corr, (q_kw, h, area, frac)


def test_atrium_roof_extinction_in_fire_a_matches_the_steady_soot_balance():
    # K = K_m rho_soot (Mulholland & Croarkin 2000, K_m = 8700 m^2/kg); at steady state the
    # soot density is y_s Q / (dH_c V_fan) = 0.05 * 2500 / (20000 * 50) kg/m^3.
    cols = _columns(DATA / "fire-a.csv")
    k = cols["OD_roof_beam"][1] * math.log(10.0)
    k_closed = 8700.0 * 0.05 * 2500.0 / (20000.0 * 50.0)
    assert k[-60:].mean() == pytest.approx(k_closed, rel=0.03)


# ----------------------------------------------------------------------------------
# The story the demo is built to tell
# ----------------------------------------------------------------------------------

def test_fan_failure_makes_the_level3_gallery_untenable_in_three_to_four_minutes():
    # visibility 10 m with C = 8 (Jin) is K = 0.8 1/m
    a, b = _columns(DATA / "fire-a.csv"), _columns(DATA / "fire-b.csv")
    t = b["Time"][1]
    t_b = _first_crossing(t, b["Ext_atrium_L3"][1], 0.8)
    assert t_b is not None and 180.0 <= t_b <= 240.0
    assert _first_crossing(t, a["Ext_atrium_L3"][1], 0.8) is None
    assert a["Ext_atrium_L3"][1].max() < 0.1


def test_grid_variants_converge_at_second_order():
    # the invented discretisation error stretches times by 1 + 2 (h^2 - h_f^2): the
    # crossing of 60 degC at the heat detector converges with observed order near 2
    t60 = []
    for name in ("fire-a.csv", "fire-a-medium.csv", "fire-a-coarse.csv"):
        cols = _columns(DATA / name)
        t60.append(_first_crossing(cols["Time"][1], cols["T_soffit_det"][1], 60.0))
    f1, f2, f3 = t60
    assert f1 < f2 < f3
    order = math.log((f3 - f2) / (f2 - f1)) / math.log(2.0)
    assert order == pytest.approx(2.0, abs=0.3)
