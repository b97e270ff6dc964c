#!/usr/bin/env python
"""Benchmark of egressmargin on a SYNTHETIC study: speed, scaling and accuracy.

Run from the repository root::

    python bench/bench.py            # full sizes (about ten minutes, most of it report.html)
    python bench/bench.py --quick    # reduced sizes (seconds; used by the smoke test)

What it measures (see bench/README.md for how to read the tables):

1. The whole ``egressmargin run STUDY --no-pdf`` as a subprocess (wall clock, best of
   3) on 8 scenarios x 50 locations x 1801 rows x 2000 samples: the numbers-only path
   (results.json). Also ``--no-pdf --html`` (results.json + report.html), for scale.
   (If the installed command line has no ``--html``, ``--no-pdf`` alone is what writes
   report.html; the script detects this and says so.)
2. The same run split into stages, each timed in a fresh child process: interpreter
   start, imports, reading and checking (cold and warm), compute (``build_results``,
   numbers only, and with the report's plot curves), writing results.json only, and
   writing results.json + report.html.
3. Compute time of ``build_results`` against samples, locations and rows.
4. Accuracy: a brute-force reference that loops over the samples in Python, rebuilds
   each corrected series, integrates the doses and searches the crossings with the
   :mod:`egressmargin.tenability` functions, compared with the fast engine; plus the
   speed-up.

Everything the script writes is SYNTHETIC: invented smooth growth curves and an
invented model-uncertainty table, labelled so in the files. They are not measurements,
not the output of any fire model and not statistics from any validation study.

Only the standard library and numpy are used besides egressmargin itself. The target is
"on one core", so numpy's thread pools are limited to one thread, the pipeline is asked
for one process (``RunOptions(workers=1)`` / ``--jobs 1`` where it has a process pool),
and on Linux the process (and its children) is pinned to one CPU unless ``--no-pin`` is
given.
"""

from __future__ import annotations

import os

# One thread for every BLAS/OpenMP pool, set before numpy is imported (inherited by the
# subprocesses) when run as a script; importing this module (the smoke test) leaves the
# environment alone. OPENBLAS_CORETYPE is deliberately left alone.
if __name__ == "__main__":
    for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS",
                 "VECLIB_MAXIMUM_THREADS"):
        os.environ[_var] = "1"

import argparse  # noqa: E402
import dataclasses  # noqa: E402
import json  # noqa: E402
import platform  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from dataclasses import dataclass  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
SRC = REPO / "src"
try:  # a checkout without an install: use the source tree
    import egressmargin  # noqa: F401
except ImportError:  # pragma: no cover - depends on the environment
    sys.path.insert(0, str(SRC))

from egressmargin import aset, pipeline  # noqa: E402
from egressmargin.pipeline import RunOptions  # noqa: E402
from egressmargin.stats import summarise  # noqa: E402
from egressmargin.tenability import heat, toxicity, visibility  # noqa: E402
from egressmargin.tenability.crossing import cumulative_trapezoid, first_crossing  # noqa: E402

#: Duration of every synthetic history [s]; the row count sets the time step.
DURATION_S = 1800.0
#: Criteria the benchmark applies (a restriction of a bundled set).
CRITERIA = ("temperature", "visibility", "fed_toxic", "fed_heat")
#: Ambient temperature of the synthetic histories [degC] (invented).
AMBIENT_C = 20.0
#: SYNTHETIC model-uncertainty statistics, invented for the benchmark (not from any
#: validation study): quantity -> (bias, sigma_model, sigma_exp).
SYNTHETIC_UNCERTAINTY = {
    "temperature": (1.05, 0.10, 0.05),
    "co": (1.15, 0.25, 0.10),
    "extinction": (1.30, 0.35, 0.15),
}


# ----------------------------------------------------------------------------------------
# the synthetic study
# ----------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Size:
    """One study size: scenarios x locations x rows, and Monte Carlo samples."""

    scenarios: int = 8
    locations: int = 50
    rows: int = 1801
    samples: int = 2000

    def label(self) -> str:
        return f"{self.scenarios} x {self.locations} x {self.rows} x {self.samples}"


def location_id(i: int) -> str:
    return f"zone-{i + 1:03d}"


def synthetic_histories(scenario: int, locations: int, rows: int, seed: int = 2026):
    """SYNTHETIC smooth growth curves for one scenario (invented, illustrative).

    Each location gets an onset time, a growth time and peak values drawn from a fixed
    random stream (so the same sizes always give the same files), and the curves are

    ``g(t) = (1 - exp(-(max(t - t0, 0) / tau)^2)) * (1 + a sin(2 pi t / P + phi))``

    temperature = 20 degC + dT_max g, CO = CO_max g^1.2 [ppm], extinction = K_max g [1/m].
    The small sine term makes the curves non-monotone, as real histories are. The row
    count only changes the time step: every history spans 0-1800 s.

    Returns
    -------
    t_s : (rows,) time [s]; temp_c, co_ppm, ext_per_m : (locations, rows)
    """
    rng = np.random.default_rng([seed, scenario])
    t = np.linspace(0.0, DURATION_S, rows)
    t0 = rng.uniform(20.0, 400.0, locations)[:, None]
    tau = rng.uniform(250.0, 900.0, locations)[:, None]
    amp = rng.uniform(0.0, 0.04, locations)[:, None]
    period = rng.uniform(60.0, 240.0, locations)[:, None]
    phase = rng.uniform(0.0, 2 * np.pi, locations)[:, None]
    x = np.clip(t[None, :] - t0, 0.0, None) / tau
    g = (1.0 - np.exp(-x * x)) * (1.0 + amp * np.sin(2 * np.pi * t[None, :] / period + phase))
    temp = AMBIENT_C + rng.uniform(25.0, 160.0, locations)[:, None] * g
    co = rng.uniform(300.0, 3000.0, locations)[:, None] * g ** 1.2
    ext = rng.uniform(0.3, 3.0, locations)[:, None] * g
    return t, temp, co, ext


def _csv(path: Path, t, temp, co, ext) -> None:
    L = temp.shape[0]
    header = ["t [s]"]
    for i in range(L):
        z = location_id(i).replace("-", "")
        header += [f"temp_{z} [degC]", f"co_{z} [ppm]", f"ext_{z} [1/m]"]
    table = np.empty((len(t), 1 + 3 * L))
    table[:, 0] = t
    table[:, 1::3] = temp.T
    table[:, 2::3] = co.T
    table[:, 3::3] = ext.T
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(",".join(header) + "\n")
        np.savetxt(fh, table, fmt="%.7g", delimiter=",")


def _routes(L: int) -> list[str]:
    """Three escape routes (invented) over the first locations of every scenario."""
    ids = [location_id(i) for i in range(L)]
    a, b, c = ids[: min(3, L)], ids[min(3, L - 1): min(6, L)] or ids[-1:], ids[-2:]
    return [
        f"""  - id: east-stair
    title: East stair (synthetic)
    occupants: 300
    detection: {{smoke: {{location: {ids[0]}, extinction: 0.1 1/m}}}}
    alarm: 30 s
    premovement: {{lognormal: {{median: 90 s, p95: 240 s}}}}
    path:
      - {{corridor: {{length: 30 m, width: 2.0 m}}}}
      - {{door: {{width: 1.2 m}}}}
      - {{stair: {{length: 15 m, width: 1.2 m, riser: 178 mm, tread: 279 mm}}}}
    exposed_at: [{", ".join(a)}]
""",
        f"""  - id: west-corridor
    title: West corridor (synthetic)
    occupants: 120
    detection: 60 s
    alarm: {{uniform: {{low: 15 s, high: 45 s}}}}
    premovement: {{triangular: {{low: 30 s, mode: 60 s, high: 180 s}}}}
    path:
      - {{corridor: {{length: 45 m, width: 1.8 m}}}}
      - {{door: {{width: 0.9 m}}}}
    exposed_at: [{", ".join(b)}]
""",
        f"""  - id: north-ramp
    title: North ramp (synthetic)
    occupants: 80
    detection: {{normal: {{mean: 90 s, sd: 20 s}}}}
    alarm: 20 s
    premovement: 120 s
    path:
      - {{ramp: {{length: 12 m, width: 1.5 m}}}}
      - {{door: {{width: 1.0 m}}}}
    exposed_at: [{", ".join(c)}]
""",
    ]


def write_study(folder: Path, size: Size, routes: int = 3, seed: int = 1) -> Path:
    """Write a SYNTHETIC study of ``size`` into ``folder``; return the study file's path."""
    folder = Path(folder)
    (folder / "data").mkdir(parents=True, exist_ok=True)
    unc = ["source: SYNTHETIC statistics invented for the egressmargin benchmark; not from any "
           "validation study", "distribution: lognormal", "quantities:"]
    for q, (b, sm, se) in SYNTHETIC_UNCERTAINTY.items():
        unc.append(f"  {q}: {{bias: {b}, sigma_model: {sm}, sigma_exp: {se}}}")
    (folder / "uncertainty.yaml").write_text("\n".join(unc) + "\n", encoding="utf-8")
    lines = [
        f"title: SYNTHETIC benchmark study ({size.label()}; invented curves, not a real building)",
        "criteria: {base: general-2m, only: [" + ", ".join(CRITERIA) + "]}",
        "uncertainty: uncertainty.yaml",
        f"samples: {size.samples}",
        f"seed: {seed}",
        "acceptance: {max_p_fail: 0.05}",
        "scenarios:",
    ]
    for s in range(size.scenarios):
        sid = f"fire-{s + 1:02d}"
        t, temp, co, ext = synthetic_histories(s, size.locations, size.rows)
        _csv(folder / "data" / f"{sid}.csv", t, temp, co, ext)
        lines += [f"  - id: {sid}", f"    title: Synthetic fire {s + 1} (invented growth curves)",
                  f"    histories: data/{sid}.csv", "    time: t", "    locations:"]
        for i in range(size.locations):
            z = location_id(i).replace("-", "")
            lines += [f"      - id: {location_id(i)}", f"        temperature: temp_{z}",
                      f"        co: co_{z}", f"        extinction: ext_{z}"]
    lines.append("egress:")
    text = "\n".join(lines) + "\n" + "".join(_routes(size.locations)[:routes])
    path = folder / "study.yaml"
    path.write_text(text, encoding="utf-8")
    return path


# ----------------------------------------------------------------------------------------
# timing helpers
# ----------------------------------------------------------------------------------------

def child_env() -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(SRC) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


def best_wall(cmd: list[str], repeats: int = 3) -> float:
    """Best wall-clock time [s] of a subprocess over ``repeats`` runs; raises if it fails."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, env=child_env(), capture_output=True, text=True)
        dt = time.perf_counter() - t0
        if proc.returncode != 0:
            raise RuntimeError(f"{' '.join(cmd)} exited {proc.returncode}:\n{proc.stderr}")
        best = min(best, dt)
    return best


def run_flags() -> set[str]:
    """The options ``egressmargin run --help`` lists (``--html``: ``--no-pdf`` alone is numbers only;
    ``--jobs``: the pipeline can use a process pool)."""
    proc = subprocess.run([sys.executable, "-m", "egressmargin", "run", "--help"], env=child_env(),
                          capture_output=True, text=True)
    return {f for f in ("--html", "--jobs") if f in proc.stdout}


def time_run_subprocess(study: Path, out: Path, repeats: int = 3, extra: tuple[str, ...] = ()) -> float:
    """Best wall clock [s] of ``egressmargin run STUDY --no-pdf [extra]`` (as the console script does)."""
    return best_wall([sys.executable, "-m", "egressmargin", "run", str(study), "--no-pdf", "--quiet",
                      "--out", str(out), *extra], repeats)


#: Runs in a fresh interpreter and prints the stage times as JSON. Imports are timed as
#: the command line triggers them; the first load and the first compute also pay for lazy
#: imports and first use (pandas, pint's registry, scipy), which the second calls do not.
_STAGES = r"""
import json, sys, time
t0 = time.perf_counter()
import numpy
t1 = time.perf_counter()
import egressmargin.cli
from egressmargin import pipeline
t2 = time.perf_counter()
import dataclasses
from pathlib import Path
study, out = Path(sys.argv[1]), Path(sys.argv[2])
one = {"workers": 1} if "workers" in {f.name for f in dataclasses.fields(pipeline.RunOptions)} else {}
o = pipeline.RunOptions(out=out, pdf=False, html=False, **one)
a = time.perf_counter(); loaded = pipeline.load(study, o); b = time.perf_counter()
pipeline.load(study, o); c = time.perf_counter()
c1 = time.perf_counter(); pipeline.build_results(loaded, o); c2 = time.perf_counter()
results, plots = pipeline.build_results(loaded, o); d = time.perf_counter()
pipeline.write_outputs(results, plots, out, o); e = time.perf_counter()
o2 = pipeline.RunOptions(out=out, pdf=False, html=True, **one)
g = time.perf_counter(); results, plots = pipeline.build_results(loaded, o2); h = time.perf_counter()
html_error = None
try:
    pipeline.write_outputs(results, plots, out, o2)
except Exception as exc:  # the report is another module's; record its failure, keep the figures
    html_error = f"{type(exc).__name__}: {exc}"
f = time.perf_counter()
print(json.dumps({"import_numpy": t1 - t0, "import_egressmargin": t2 - t1, "load_cold": b - a,
                  "load_warm": c - b, "compute_cold": c2 - c1, "compute": d - c2, "write_json": e - d,
                  "compute_with_plots": h - g, "write_json_html": None if html_error else f - h,
                  "html_error": html_error}))
"""


def stage_split(study: Path, out: Path, repeats: int = 3) -> dict:
    """Best-of-``repeats`` time [s] of each stage of a run, each repeat in a fresh interpreter."""
    best: dict[str, float] = {}
    for _ in range(repeats):
        proc = subprocess.run([sys.executable, "-c", _STAGES, str(study), str(out)], env=child_env(),
                              capture_output=True, text=True)
        if proc.returncode != 0:
            raise RuntimeError(f"stage split failed:\n{proc.stderr}")
        for k, v in json.loads(proc.stdout.strip().splitlines()[-1]).items():
            if isinstance(v, (int, float)):
                old = best.get(k)
                best[k] = min(old, v) if isinstance(old, float) else float(v)
            elif k not in best:
                best[k] = v
    best["interpreter_start"] = best_wall([sys.executable, "-c", "pass"], repeats)
    return best


def time_compute(loaded, samples: int, repeats: int = 3) -> float:
    """Best time [s] of ``build_results`` (the compute stage) at ``samples`` draws."""
    opts = options(samples=samples, pdf=False, html=False)
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        pipeline.build_results(loaded, opts)
        best = min(best, time.perf_counter() - t0)
    return best


def options(**kw) -> RunOptions:
    """RunOptions for one process: ``workers=1`` where the pipeline has a process pool."""
    if "workers" in {f.name for f in dataclasses.fields(RunOptions)}:
        kw.setdefault("workers", 1)
    return RunOptions(**kw)


def load_quiet(study: Path):
    return pipeline.load(study, options(pdf=False, html=False))


# ----------------------------------------------------------------------------------------
# brute-force reference
# ----------------------------------------------------------------------------------------

def brute_force_times(loaded, factors: dict[str, np.ndarray], S: int, scenario: int = 0):
    """(L, S) crossing times per criterion by looping over samples in Python.

    For every sample the corrected series are rebuilt from the histories as read
    (temperature rise above the first value times the temperature factor; CO and the
    extinction coefficient times theirs), the criterion's quantity is computed with the
    :mod:`egressmargin.tenability` functions (visibility S = C/K, ISO 13571 FED rates),
    doses are integrated with the trapezoidal rule, and the first crossing of the limit is
    interpolated linearly on the criterion's own quantity (visibility in metres, dose),
    as the outside contract words it. No dose grid, no interpolation between factors.

    Returns
    -------
    times : dict criterion -> (L, S) crossing times [s], NaN where not reached.
    rule_gap : dict criterion -> (L, S) [s], the most by which a crossing interpolated
        linearly in another variable can differ from this one. Zero except for
        visibility: the engine interpolates the extinction coefficient K, this reference
        the visibility S = C/K. Between samples K0 < K* <= K1 (K* = C / limit) the two
        fractions of the step are f_K = (K* - K0)/(K1 - K0) and
        f_S = (1/K0 - 1/K*)/(1/K0 - 1/K1) = f_K K1/K*, so
        |t_S - t_K| = dt f_K (K1 - K*)/K* <= dt (K1 - K*)/K*  (derived here).
    """
    study = loaded.study
    spec = study.scenarios[scenario]
    data = loaded.data[spec.id]
    crit = study.criteria.items
    t = data.t_s
    temp = data.series["temperature"]
    amb = temp[:, :1] if spec.ambient_temperature_c is None else np.full((temp.shape[0], 1),
                                                                        spec.ambient_temperature_c)
    co = data.series["co"]
    ext = data.series["extinction"]
    one = np.ones(S)
    f_t = factors.get("temperature", one)
    f_co = factors.get("co", one)
    f_k = factors.get("smoke:extinction", one)
    L = temp.shape[0]
    out = {cid: np.full((L, S), np.nan) for cid in crit}
    gap = {cid: np.zeros((L, S)) for cid in crit}
    rows = np.arange(L)
    tox = toxicity.toxic_method(crit["fed_toxic"].params.get("method", "iso13571")) if "fed_toxic" in crit else None
    for s in range(S):
        temp_s = amb + (temp - amb) * f_t[s]
        if "temperature" in crit:
            out["temperature"][:, s] = first_crossing(t, temp_s, crit["temperature"].limit, "above")
        if "visibility" in crit:
            c_sign = crit["visibility"].params.get("sign_constant", 8.0)
            k_s = ext * f_k[s]
            vis = visibility.visibility_from_extinction(k_s, c_sign)
            out["visibility"][:, s] = first_crossing(t, vis, crit["visibility"].limit, "below")
            k_star = c_sign / crit["visibility"].limit
            reached = k_s >= k_star
            i = np.argmax(reached, axis=1)
            ok = reached.any(axis=1) & (i > 0)
            i0 = np.maximum(i - 1, 0)
            gap["visibility"][:, s] = np.where(ok, (t[i] - t[i0]) * (k_s[rows, i] - k_star) / k_star, 0.0)
        if "fed_toxic" in crit:
            dose = cumulative_trapezoid(t, tox(co=co * f_co[s]))
            out["fed_toxic"][:, s] = first_crossing(t, dose, crit["fed_toxic"].limit, "above")
        if "fed_heat" in crit:
            c = crit["fed_heat"]
            rate = heat.fed_heat_rate(temperature_degc=temp_s, radiant_threshold_kw_m2=c.params.get(
                "radiant_threshold", heat.RADIANT_THRESHOLD_KW_M2))
            out["fed_heat"][:, s] = first_crossing(t, cumulative_trapezoid(t, rate), c.limit, "above")
    return out, gap


# ----------------------------------------------------------------------------------------
# plain per-sample reference (the yardstick of the speed target)
# ----------------------------------------------------------------------------------------

#: Runs in a fresh interpreter: reads the study's CSV files with pandas and, per scenario,
#: loops over the draws in Python, each draw vectorised over locations and time: the
#: corrected series, temperature and visibility crossings, the ISO 13571 asphyxiant and
#: heat FED (trapezoidal rule) and their crossings, location ASET, route ASET (earliest of
#: its locations) against a hand-method RSET per draw. Prints its CPU seconds (process
#: time, imports included) and a checksum. What a competent engineer would write; it
#: uses egressmargin's published-formula functions (egressmargin.tenability) only.
_PLAIN_REFERENCE = r"""
import sys, time
t_start = time.process_time()
from pathlib import Path
import numpy as np
import pandas as pd
from egressmargin.tenability import heat, toxicity, visibility
from egressmargin.tenability.crossing import cumulative_trapezoid, first_crossing
folder, S = Path(sys.argv[1]), int(sys.argv[2])
BIAS = {"temperature": (1.05, 0.10, 0.05), "co": (1.15, 0.25, 0.10), "extinction": (1.30, 0.35, 0.15)}
rng = np.random.default_rng(1)
total = 0.0
for f in sorted((folder / "data").glob("fire-*.csv")):
    df = pd.read_csv(f)
    t = df.iloc[:, 0].to_numpy(float)
    temp = df.iloc[:, 1::3].to_numpy(float).T          # (L, N)
    co = df.iloc[:, 2::3].to_numpy(float).T
    ext = df.iloc[:, 3::3].to_numpy(float).T
    amb = temp[:, :1]
    fac = {q: np.exp(rng.normal(-np.log(b), np.hypot(sm, se), S)) for q, (b, sm, se) in BIAS.items()}
    rset = 60.0 + 30.0 + rng.lognormal(np.log(90.0), 0.6, S) + 45.0     # detection, alarm, premovement, travel
    L = temp.shape[0]
    route = [0, 1, 2]
    for s in range(S):
        temp_s = amb + (temp - amb) * fac["temperature"][s]
        k_s = ext * fac["extinction"][s]
        times = [first_crossing(t, temp_s, 60.0, "above"),
                 first_crossing(t, visibility.visibility_from_extinction(k_s, 8.0), 10.0, "below"),
                 first_crossing(t, cumulative_trapezoid(t, toxicity.iso13571_fed_rate(co=co * fac["co"][s])),
                                0.3, "above"),
                 first_crossing(t, cumulative_trapezoid(t, heat.fed_heat_rate(temperature_degc=temp_s)), 0.3,
                                "above")]
        loc_aset = np.fmin.reduce(np.vstack(times), axis=0)
        a = np.nanmin(np.where(np.isnan(loc_aset[route]), np.inf, loc_aset[route]))
        total += float(a - rset[s]) if np.isfinite(a) else 0.0
print(time.process_time() - t_start, total)
"""


def plain_reference_cpu(study_folder: Path, samples: int) -> float:
    """CPU seconds of the plain per-sample reference on the study in ``study_folder``."""
    proc = subprocess.run([sys.executable, "-c", _PLAIN_REFERENCE, str(study_folder), str(samples)],
                          env=child_env(), capture_output=True, text=True)
    if proc.returncode != 0:
        raise RuntimeError(f"plain reference failed:\n{proc.stderr}")
    return float(proc.stdout.split()[0])


def tool_run_cpu(study: Path, out: Path) -> float:
    """CPU seconds (user + system of the child) of ``egressmargin run STUDY --no-pdf --jobs 1``."""
    import resource

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    proc = subprocess.run([sys.executable, "-m", "egressmargin", "run", str(study), "--no-pdf", "--quiet",
                           "--jobs", "1", "--out", str(out)], env=child_env(), capture_output=True, text=True)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != 0:
        raise RuntimeError(f"run failed:\n{proc.stderr}")
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def speed_target(study: Path, size: Size, out: Path, repeats: int = 3, say=print) -> dict:
    """The speed target: the tool's whole run against the plain per-sample reference, in one run.

    Tool and reference run in turn ``repeats`` times (CPU time: the machine may be shared);
    the ratio is taken pair by pair and its median printed (target at most 0.05).
    """
    pairs = []
    for _ in range(repeats):
        tool = tool_run_cpu(study, out)
        ref = plain_reference_cpu(study.parent, size.samples)
        pairs.append((tool, ref, tool / ref))
    med = sorted(pairs, key=lambda p: p[2])[len(pairs) // 2]
    tools = sorted(p[0] for p in pairs)
    refs = sorted(p[1] for p in pairs)
    ratios = sorted(p[2] for p in pairs)
    row = {"size": size.label(), "tool_cpu_s": tools[len(tools) // 2], "reference_cpu_s": refs[len(refs) // 2],
           "ratio": ratios[len(ratios) // 2], "ratios": ratios, "pair_at_median": med}
    say(f"0. Speed target: `run --no-pdf --jobs 1` against a plain per-sample reference ({size.label()}; "
        f"CPU time, median of {repeats} pairs)")
    say(f"   egressmargin run --no-pdf --jobs 1 (whole process)           {_fmt(row['tool_cpu_s'])} s")
    say(f"   plain reference (pandas + numpy, Python loop over draws)     {_fmt(row['reference_cpu_s'])} s")
    say(f"   ratio tool / reference: {row['ratio']:.3f} (target <= 0.05; pairs {', '.join(f'{r:.3f}' for r in ratios)})")
    return row


def _pct_diff(a: dict, b: dict) -> tuple[float, int]:
    """Largest |difference| of matching percentiles [s], and the count of reached/not-reached mismatches."""
    worst, mismatch = 0.0, 0
    for k in ("p05", "p50", "p95"):
        if (a[k] is None) != (b[k] is None):
            mismatch += 1
        elif a[k] is not None:
            worst = max(worst, abs(a[k] - b[k]))
    return worst, mismatch


def accuracy_check(folder: Path, size: Size) -> dict:
    """Fast engine against the brute-force reference on one small scenario.

    Returns per-criterion rows: the largest percentile difference (results.json against
    the reference), the largest per-sample difference (engine times against the
    reference), the engine's largest ``grid_bound_s``, the largest interpolation-rule gap
    (see :func:`brute_force_times`), ``excess_s`` = the largest per-sample difference
    minus what the location's grid bound and the sample's rule gap allow (<= 0 when the
    engine is within its stated bound), plus the engine and brute-force times [s] and the
    speed-up.
    """
    study_path = write_study(folder, size, routes=1)
    loaded = load_quiet(study_path)
    S, seed = loaded.study.samples, loaded.study.seed
    spec = loaded.study.scenarios[0]
    crit = loaded.study.criteria
    prep = aset.prepare(loaded.data[spec.id], crit, spec.ambient_temperature_c, spec.ambient_o2)
    factors = pipeline.draw_scenario_factors(loaded.table, prep, S, seed, 0)

    t0 = time.perf_counter()
    engine = aset.evaluate(prep, crit, factors, S)
    t_engine = time.perf_counter() - t0
    t0 = time.perf_counter()
    brute, gap = brute_force_times(loaded, factors, S)
    t_brute = time.perf_counter() - t0
    results, _ = pipeline.build_results(loaded, options(pdf=False, html=False))

    rows = {}
    locs = results["scenarios"][0]["locations"]
    for cid in crit.items:
        pct, mism, bound, per_sample, rule_gap, excess, mism_s = 0.0, 0, 0.0, 0.0, 0.0, -np.inf, 0
        for li, loc in enumerate(locs):
            entry = loc["criteria"][cid]
            ref = summarise(brute[cid][li])
            d_pct, m = _pct_diff(entry["corrected_s"], ref)
            pct, mism = max(pct, d_pct), mism + m
            bound = max(bound, entry.get("grid_bound_s") or 0.0)
            e, r = engine[cid].times[li], brute[cid][li]
            both = np.isfinite(e) & np.isfinite(r)
            mism_s += int((np.isfinite(e) != np.isfinite(r)).sum())
            if both.any():
                diff = np.abs(e[both] - r[both])
                per_sample = max(per_sample, float(diff.max()))
                gb = engine[cid].grid_bound_s
                loc_bound = float(gb[li]) if gb is not None and np.isfinite(gb[li]) else 0.0
                excess = max(excess, float(np.max(diff - loc_bound - gap[cid][li][both])))
                rule_gap = max(rule_gap, float(gap[cid][li][both].max()))
        rows[cid] = {"sample_mismatch": mism_s, "max_pct_diff_s": pct, "pct_mismatch": mism,
                     "max_sample_diff_s": per_sample,
                     "grid_bound_s": bound, "rule_gap_s": rule_gap, "excess_s": excess,
                     "exact": engine[cid].grid_bound_s is None}
    dt = float(np.diff(prep.t_s).max())
    return {"size": size, "criteria": rows, "t_engine_s": t_engine, "t_brute_s": t_brute,
            "speedup": t_brute / t_engine, "time_step_s": dt}


def hard_cases_check(samples: int = 500, locations: int = 5, rows: int = 901) -> dict:
    """The dose engine on the cases a coarse factor grid gets wrong, against a per-draw loop.

    SYNTHETIC curves (invented): (a) heat FED where the radiant flux crosses the 2.5 kW/m^2
    threshold, flux and temperature uncertain; (b) ISO 13571 toxic FED with CO, HCN and CO2
    all uncertain. The reference loops over the draws, rebuilds the corrected series,
    integrates the :mod:`egressmargin.tenability` rates with the trapezoidal rule and finds
    the first crossing. Returns per case the largest per-draw difference [s], the largest
    ``grid_bound_s`` [s], whether every draw is within its location's bound, and the times.
    """
    from egressmargin.criteria import CriteriaSet, Criterion
    from egressmargin.histories import ScenarioData

    rng = np.random.default_rng(2026)
    t = np.linspace(0.0, 900.0, rows)
    grow = (t / t[-1])[None, :] ** rng.uniform(1.0, 1.6, (locations, 1))
    series = {"temperature": 20.0 + rng.uniform(40.0, 90.0, (locations, 1)) * grow,
              "heat_flux": rng.uniform(3.0, 5.0, (locations, 1)) * grow,
              "co": rng.uniform(800e-6, 2000e-6, (locations, 1)) * grow,
              "hcn": rng.uniform(20e-6, 80e-6, (locations, 1)) * grow,
              "co2": rng.uniform(0.02, 0.06, (locations, 1)) * grow}
    data = ScenarioData("hard", t, [location_id(i) for i in range(locations)], series,
                        {k: np.ones(locations, bool) for k in series})
    cases = {
        "fed_heat, flux across 2.5 kW/m^2": (Criterion("fed_heat", 0.3, "0.3", "-", {"radiant_threshold": 2.5}),
                                             ("temperature", "heat_flux")),
        "fed_toxic ISO, CO+HCN+CO2": (Criterion("fed_toxic", 0.3, "0.3", "-", {"method": "iso13571"}),
                                      ("co", "hcn", "co2")),
    }
    out = {}
    for name, (crit, qs) in cases.items():
        cset = CriteriaSet("hard", "", ["synthetic"], {crit.id: crit})
        prep = aset.prepare(data, cset)
        factors = {q: np.exp(rng.normal(0.0, 0.25, samples)) / 1.1 for q in qs}
        t0 = time.perf_counter()
        res = aset.evaluate(prep, cset, factors, samples)[crit.id]
        t_engine = time.perf_counter() - t0
        t0 = time.perf_counter()
        ref = np.full((locations, samples), np.nan)
        for s in range(samples):
            if crit.id == "fed_heat":
                rate = heat.fed_heat_rate(20.0 + (series["temperature"] - 20.0) * factors["temperature"][s],
                                          series["heat_flux"] * factors["heat_flux"][s], 2.5)
            else:
                rate = toxicity.iso13571_fed_rate(**{q: series[q] * factors[q][s] for q in qs})
            ref[:, s] = first_crossing(t, cumulative_trapezoid(t, rate), crit.limit, "above")
        t_brute = time.perf_counter() - t0
        both = np.isfinite(ref) & np.isfinite(res.times)
        diff = np.where(both, np.abs(res.times - ref), 0.0)
        bound = np.nan_to_num(res.grid_bound_s if res.grid_bound_s is not None else np.zeros(locations), nan=0.0)
        out[name] = {"max_sample_diff_s": float(diff.max()), "grid_bound_s": float(bound.max()),
                     "within_bound": bool(np.all(diff <= bound[:, None] + 1e-6)),
                     "reached_mismatch": int((np.isfinite(ref) != np.isfinite(res.times)).sum()),
                     "t_engine_s": t_engine, "t_brute_s": t_brute}
    return out


# ----------------------------------------------------------------------------------------
# the benchmark
# ----------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Plan:
    main: Size
    samples: tuple[int, ...]
    locations: tuple[int, ...]
    rows: tuple[int, ...]
    reference: Size
    repeats: int


    report: Size = Size(3, 40, 1801, 5000)   # the study timed with its PDF (section 5)


FULL = Plan(Size(8, 50, 1801, 2000), (250, 500, 1000, 2000, 4000, 8000), (10, 50, 200, 500),
            (451, 901, 1801, 3601, 7201), Size(1, 5, 601, 500), 3)
QUICK = Plan(Size(2, 10, 451, 250), (100, 200, 400), (5, 10), (226, 451), Size(1, 3, 301, 100), 1,
             Size(1, 4, 301, 100))


def machine() -> dict:
    cpus = os.cpu_count()
    pinned = sorted(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else None
    cpu_name = platform.processor() or ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.lower().startswith("model name"):
                cpu_name = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return {"platform": platform.platform(), "cpu": cpu_name or "unknown", "cpu_count": cpus,
            "affinity": pinned, "python": platform.python_version(), "numpy": np.__version__,
            "threads": os.environ.get("OMP_NUM_THREADS"), "egressmargin": egressmargin_state()}


def egressmargin_state() -> str:
    """Version, and the checkout's commit (with '+ local changes' if the tree is modified)."""
    from egressmargin import __version__
    try:
        head = subprocess.run(["git", "-C", str(REPO), "rev-parse", "--short", "HEAD"], capture_output=True,
                              text=True, timeout=10).stdout.strip()
        dirty = subprocess.run(["git", "-C", str(REPO), "status", "--porcelain", "--untracked-files=no", "src"],
                               capture_output=True, text=True, timeout=10).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        head, dirty = "", ""
    return f"{__version__}" + (f" (commit {head}{' + local changes in src/' if dirty else ''})" if head else "")


def pin_one_core() -> int | None:
    """Pin this process (and its future children) to one CPU on Linux; return it, or None."""
    if not hasattr(os, "sched_setaffinity"):
        return None
    cpu = min(os.sched_getaffinity(0))
    os.sched_setaffinity(0, {cpu})
    return cpu


def _fmt(x: float) -> str:
    return f"{x:8.3f}"


def run_benchmark(plan: Plan, work: Path, say=print) -> dict:
    """Run every measurement of ``plan`` in ``work``; print the tables; return the figures."""
    figures: dict = {"machine": machine()}
    m = figures["machine"]
    say("egressmargin benchmark (SYNTHETIC study; invented curves and uncertainty table)")
    say(f"machine : {m['platform']}")
    say(f"cpu     : {m['cpu']}; {m['cpu_count']} CPUs, affinity {m['affinity']}; numpy threads {m['threads']}")
    say(f"python  : {m['python']}   numpy {m['numpy']}   egressmargin {m['egressmargin']}")

    # 0: the speed target -------------------------------------------------------------
    main = plan.main
    study = write_study(work / "main", main)
    figures["target"] = speed_target(study, main, work / "target-out", plan.repeats, say)
    say("")

    # 1-2: whole run and split -------------------------------------------------------
    out = work / "main-out"
    flags = run_flags()
    html_flag = "--html" in flags
    jobs = ("--jobs", "1") if "--jobs" in flags else ()
    runs = {}
    for label, extra in (("run --no-pdf", ()), ("run --no-pdf --html", ("--html",))):
        if extra and not html_flag:
            continue
        label += " --jobs 1" if jobs else ""
        try:
            runs[label] = (time_run_subprocess(study, out, plan.repeats, extra + jobs), None)
        except RuntimeError as exc:  # report the failure, keep measuring the stages
            runs[label] = (float("nan"), str(exc).strip().splitlines()[-1])
    split = stage_split(study, work / "split-out", plan.repeats)
    figures["run"] = {"size": main.label(), "html_flag": html_flag,
                      "whole_runs": {k: {"s": v[0], "error": v[1]} for k, v in runs.items()}, **split}
    say("")
    say(f"1. Whole run, `egressmargin run STUDY --no-pdf` (subprocess, wall clock, best of {plan.repeats})")
    say(f"   study: {main.scenarios} scenarios x {main.locations} locations x {main.rows} rows x "
        f"{main.samples} samples, {len(CRITERIA)} criteria, 3 routes")
    for label, (t_run, run_error) in runs.items():
        what = "results.json + report.html" if ("--html" in label or not html_flag) else "results.json only"
        say(f"   {label + ' (' + what + ')':58s} {_fmt(t_run)} s")
        if run_error:
            say(f"   ! the run failed: {run_error}")
    say("")
    say(f"2. Split of the same run (fresh interpreter per repeat, best of {plan.repeats})")
    parts = [("interpreter start (python -c pass)", split["interpreter_start"]),
             ("import numpy", split["import_numpy"]),
             ("import egressmargin.cli + pipeline", split["import_egressmargin"]),
             ("load, cold (read + check + lazy imports)", split["load_cold"]),
             ("  of which lazy imports/first use (cold-warm)", split["load_cold"] - split["load_warm"]),
             ("load, warm (read + check only)", split["load_warm"]),
             ("compute (build_results), numbers only, 1st call", split["compute_cold"]),
             ("compute (build_results), numbers only, warm", split["compute"]),
             ("write results.json only", split["write_json"]),
             ("compute with the report's plot curves, warm", split["compute_with_plots"]),
             ("write results.json + report.html", split["write_json_html"])]
    for name, v in parts:
        say(f"   {name:58s} {_fmt(float('nan') if v is None else v)} s")
    if split.get("html_error"):
        say(f"   ! writing report.html failed: {split['html_error'][:200]}")
    minimal = (split["interpreter_start"] + split["import_numpy"] + split["import_egressmargin"]
               + split["load_cold"] + split["compute_cold"] + split["write_json"])
    figures["run"]["json_only_total_s"] = minimal
    say(f"   {'sum: start + imports + load + 1st compute + json':58s} {_fmt(minimal)} s  (numbers-only path)")

    # 3: scaling ------------------------------------------------------------------------
    say("")
    say(f"3. Compute time of build_results (in-process, best of {plan.repeats})")
    one = Size(1, main.locations, main.rows, main.samples)
    loaded = load_quiet(write_study(work / "scale-base", one))
    time_compute(loaded, plan.samples[0], 1)  # warm-up
    rows = []
    for S in plan.samples:
        rows.append((S, time_compute(loaded, S, plan.repeats)))
    figures["scaling_samples"] = rows
    say(f"   a) samples, 1 scenario x {one.locations} locations x {one.rows} rows")
    say("      samples   compute [s]   per 1000 samples [s]   x time of first row")
    for S, v in rows:
        say(f"      {S:7d}   {v:11.3f}   {v / S * 1000:20.3f}   {v / rows[0][1]:18.2f}")
    say(f"      samples grew x{plan.samples[-1] / plan.samples[0]:.0f}; compute grew x{rows[-1][1] / rows[0][1]:.2f}")

    rows = []
    for L in plan.locations:
        ld = load_quiet(write_study(work / f"scale-L{L}", Size(1, L, main.rows, main.samples)))
        rows.append((L, time_compute(ld, main.samples, plan.repeats)))
    figures["scaling_locations"] = rows
    say(f"   b) locations, 1 scenario x {main.rows} rows x {main.samples} samples")
    say("      locations   compute [s]   per location [ms]")
    for L, v in rows:
        say(f"      {L:9d}   {v:11.3f}   {v / L * 1000:17.2f}")

    rows = []
    for N in plan.rows:
        ld = load_quiet(write_study(work / f"scale-N{N}", Size(1, main.locations, N, main.samples)))
        rows.append((N, time_compute(ld, main.samples, plan.repeats)))
    figures["scaling_rows"] = rows
    say(f"   c) rows (time step {DURATION_S:.0f} s / (rows - 1)), 1 scenario x {main.locations} locations x "
        f"{main.samples} samples")
    say("      rows   step [s]   compute [s]   per 1000 rows [s]")
    for N, v in rows:
        say(f"      {N:4d}   {DURATION_S / (N - 1):8.3f}   {v:11.3f}   {v / N * 1000:17.3f}")

    # 4: accuracy -----------------------------------------------------------------------
    acc = accuracy_check(work / "reference", plan.reference)
    figures["accuracy"] = acc
    r = plan.reference
    say("")
    say(f"4. Fast engine against a brute-force Python loop over samples ({r.scenarios} scenario x {r.locations} "
        f"locations x {r.rows} rows x {r.samples} samples, step {acc['time_step_s']:.2f} s)")
    say("   criterion    engine     max|d| p05/p50/p95  max|d| per sample  grid_bound_s  rule gap  "
        "within bound  reached/not mismatches")
    say("                                          [s]                [s]           [s]       [s]")
    for cid, row in acc["criteria"].items():
        kind = "exact" if row["exact"] else "dose grid"
        within = "yes" if row["excess_s"] <= 1e-6 else f"NO (+{row['excess_s']:.3g} s)"
        say(f"   {cid:11s}  {kind:9s}  {row['max_pct_diff_s']:18.4f}  {row['max_sample_diff_s']:17.4f}  "
            f"{row['grid_bound_s']:12.3f}  {row['rule_gap_s']:8.4f}  {within:12s}  "
            f"{row['pct_mismatch']:d} pct / {row['sample_mismatch']:d} samples")
    say(f"   engine (aset.evaluate) {acc['t_engine_s']:.4f} s; brute force {acc['t_brute_s']:.3f} s; "
        f"speed-up x{acc['speedup']:.0f}")

    # 5: the hard dose cases ------------------------------------------------------------
    hard = hard_cases_check(samples=r.samples, locations=r.locations)
    figures["hard_cases"] = hard
    say("")
    say(f"5. Dose engine on hard cases against a per-draw loop ({r.locations} locations x 901 rows x "
        f"{r.samples} draws; SYNTHETIC curves)")
    say("   case                                max|d| per draw [s]  grid_bound_s [s]  within bound  "
        "reached/not  engine [s]  loop [s]")
    for name, row in hard.items():
        say(f"   {name:34s}  {row['max_sample_diff_s']:19.4f}  {row['grid_bound_s']:16.3f}  "
            f"{'yes' if row['within_bound'] else 'NO':12s}  {row['reached_mismatch']:11d}  "
            f"{row['t_engine_s']:10.3f}  {row['t_brute_s']:8.3f}")

    # 6: the report with its PDF ----------------------------------------------------------
    figures["report"] = report_timing(plan, work, say)
    return figures


def _all_cpus():
    """Undo the one-core pin for a measurement that uses the report's process pool."""
    if not hasattr(os, "sched_setaffinity"):
        return None
    before = os.sched_getaffinity(0)
    os.sched_setaffinity(0, range(os.cpu_count() or 1))
    return before


def report_timing(plan: Plan, work: Path, say=print) -> dict:
    """Wall clock of the bundled demo with its PDF, and of a study's report per location.

    The report draws its figures in a process pool, so these two measurements run on every
    CPU of the machine (the pin of sections 1-4 is lifted and restored afterwards).
    """
    before = _all_cpus()
    try:
        cpus = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
        demo = best_wall([sys.executable, "-m", "egressmargin", "demo", "--out", str(work / "demo-out")],
                         plan.repeats)
        size = plan.report
        loaded = load_quiet(write_study(work / "report-study", size))
        opts = options(pdf=True)
        t0 = time.perf_counter()
        results, plots = pipeline.build_results(loaded, opts)
        t1 = time.perf_counter()
        from egressmargin.report import render_report
        best = float("inf")
        for _ in range(plan.repeats):
            t2 = time.perf_counter()
            paths = render_report(results, plots, work / "report-out")
            best = min(best, time.perf_counter() - t2)
        import pypdf
        pages = len(pypdf.PdfReader(str(paths["pdf"])).pages)
    finally:
        if before is not None:
            os.sched_setaffinity(0, before)
    locations = size.scenarios * size.locations
    used = sum(len({lid for rt in sc["routes"] for lid in rt.get("exposed_at", [])})
               for sc in results["scenarios"])
    out = {"cpus": cpus, "demo_with_pdf_s": demo, "study": size.label(), "compute_s": t1 - t0,
           "report_s": best, "pages": pages, "locations": locations, "route_locations": used,
           "report_per_location_s": best / locations,
           "report_per_route_location_s": best / used if used else float("nan")}
    say("")
    say(f"6. The report with its PDF ({cpus} CPUs; figures in the report's process pool; best of {plan.repeats})")
    say(f"   egressmargin demo --out DIR (whole command, subprocess)            {_fmt(demo)} s")
    say(f"   study {size.label()}: compute {_fmt(t1 - t0)} s, report (HTML + PDF, {pages} pages) {_fmt(best)} s")
    say(f"   report per location of the study ({locations})                      {best / locations * 1000:.0f} ms")
    if used:
        say(f"   report per location a route passes ({used}, the ones drawn)         {best / used * 1000:.0f} ms")
    return out


def profile_stages(size: Size, work: Path, top: int = 30, say=print) -> None:
    """cProfile of load, build_results (without and with plot curves) and report.html; prints the top functions."""
    import cProfile
    import pstats

    study = write_study(work / "study", size)
    stages = {}
    opts = options(pdf=False, html=False)
    prof = cProfile.Profile()
    prof.enable()
    loaded = pipeline.load(study, opts)
    prof.disable()
    stages["load (cold)"] = prof
    prof = cProfile.Profile()
    prof.enable()
    pipeline.build_results(loaded, opts)
    prof.disable()
    stages["compute (build_results), numbers only"] = prof
    prof = cProfile.Profile()
    prof.enable()
    results, plots = pipeline.build_results(loaded, options(pdf=False, html=True))
    prof.disable()
    stages["compute (build_results) with the report's plot curves"] = prof
    prof = cProfile.Profile()
    prof.enable()
    pipeline.write_outputs(results, plots, work / "out", options(pdf=False, html=True))
    prof.disable()
    stages["write results.json + report.html"] = prof
    for name, prof in stages.items():
        say(f"\n=== {name}: {size.label()} ===")
        pstats.Stats(prof, stream=sys.stdout).sort_stats("cumulative").print_stats(top)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--quick", action="store_true", help="reduced sizes (seconds)")
    p.add_argument("--keep", action="store_true", help="write into bench/out/ and keep it (default: a temp folder)")
    p.add_argument("--no-pin", action="store_true", help="do not pin the process to one CPU")
    p.add_argument("--json", type=Path, help="also write the figures as JSON to this file")
    p.add_argument("--repeats", type=int, help="repeats per timing (default 3; 1 with --quick)")
    p.add_argument("--target", action="store_true",
                   help="only the speed target: the whole run against the plain per-sample reference, with the ratio")
    p.add_argument("--profile", action="store_true",
                   help="instead of the tables: cProfile of load, compute and report.html on the main study")
    args = p.parse_args(argv)
    if not args.no_pin:
        pin_one_core()
    plan = QUICK if args.quick else FULL
    if args.repeats:
        plan = dataclasses.replace(plan, repeats=max(1, args.repeats))
    if args.target:
        with tempfile.TemporaryDirectory(prefix="egressmargin-target-") as tmp:
            study = write_study(Path(tmp) / "main", plan.main)
            figures = {"machine": machine(), "target": speed_target(study, plan.main, Path(tmp) / "out",
                                                                    plan.repeats)}
        if args.json:
            args.json.write_text(json.dumps(figures, indent=2, default=str) + "\n", encoding="utf-8")
        return 0
    if args.profile:
        with tempfile.TemporaryDirectory(prefix="egressmargin-profile-") as tmp:
            profile_stages(plan.main, Path(tmp))
        return 0
    if args.keep:
        work = REPO / "bench" / "out"
        shutil.rmtree(work, ignore_errors=True)
        work.mkdir(parents=True)
        figures = run_benchmark(plan, work)
    else:
        with tempfile.TemporaryDirectory(prefix="egressmargin-bench-") as tmp:
            figures = run_benchmark(plan, Path(tmp))
    if args.json:
        def plain(o):
            return o.__dict__ if isinstance(o, Size) else str(o)
        args.json.write_text(json.dumps(figures, indent=2, default=plain) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
