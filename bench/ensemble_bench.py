#!/usr/bin/env python
"""Benchmark of an ensemble scenario on a SYNTHETIC study: the tool against the input floor.

Run from the repository root::

    python bench/ensemble_bench.py            # 200 members x 20 locations x 1801 rows x 2000 draws
    python bench/ensemble_bench.py --quick    # 12 members x 5 locations x 301 rows x 200 draws

What it measures, each in one run on the same files, ``--repeats`` pairs in turn (medians):

1. **Input floor**: the CPU (and wall) time pandas needs just to read the member CSV
   files (``pandas.read_csv`` on each, in a fresh child process, imports not counted,
   after one untimed warm-up read so both sides see the files in the page cache).
2. **Tool**: ``egressmargin run STUDY --no-pdf --jobs 1`` as a child process (CPU time of
   the child, user + system, and wall clock, start to exit, imports included), and its
   peak resident memory (``ru_maxrss`` of the child). Progress is shown per member read
   (on the first run).

It prints both times and the ratio tool / floor (target at most 3) and the peak memory
(target under 1 GB). CPU time, because the machine may be shared.

Everything the script writes is SYNTHETIC: the curves are the invented smooth growth
curves of ``bench/bench.py`` with a growth time stretched per member, and the model
uncertainty table is invented. They are not measurements, not the output of any fire
model and not statistics from any validation study.
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent


def _bench_module():
    spec = importlib.util.spec_from_file_location("egressmargin_bench", HERE / "bench.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod
    spec.loader.exec_module(mod)
    return mod


def write_ensemble_study(folder: Path, members: int, locations: int, rows: int, samples: int) -> Path:
    """Write a SYNTHETIC ensemble study (one scenario, ``members`` runs via ``glob``) and return its path."""
    b = _bench_module()
    runs = folder / "runs"
    runs.mkdir(parents=True, exist_ok=True)
    side = ["file,name,value"]
    for m in range(members):
        # member m: the synthetic curves of "scenario" m (own onsets and peaks per location)
        t, temp, co, ext = b.synthetic_histories(m, locations, rows)
        name = f"a-{m + 1:03d}.csv"
        b._csv(runs / name, t, temp, co, ext)
        side.append(f"{name},member_index,{m + 1}")
    (runs / "params.csv").write_text("\n".join(side) + "\n", encoding="utf-8")
    unc = ["source: SYNTHETIC statistics invented for the egressmargin benchmark; not from any "
           "validation study", "distribution: lognormal", "quantities:"]
    for q, (bias, sm, se) in b.SYNTHETIC_UNCERTAINTY.items():
        unc.append(f"  {q}: {{bias: {bias}, sigma_model: {sm}, sigma_exp: {se}}}")
    (folder / "uncertainty.yaml").write_text("\n".join(unc) + "\n", encoding="utf-8")
    lines = [f"title: SYNTHETIC ensemble benchmark ({members} members x {locations} x {rows} x {samples}; invented)",
             "criteria: {base: general-2m, only: [" + ", ".join(b.CRITERIA) + "]}",
             "uncertainty: uncertainty.yaml", f"samples: {samples}", "seed: 1", "scenarios:",
             "  - id: fire-a", "    title: Synthetic ensemble (invented growth curves)",
             "    ensemble: {glob: runs/a-*.csv, parameters: runs/params.csv}", "    time: t", "    locations:"]
    for i in range(locations):
        z = b.location_id(i).replace("-", "")
        lines += [f"      - id: {b.location_id(i)}", f"        temperature: temp_{z}",
                  f"        co: co_{z}", f"        extinction: ext_{z}"]
    lines.append("egress:")
    text = "\n".join(lines) + "\n" + "".join(b._routes(locations))
    path = folder / "study.yaml"
    path.write_text(text, encoding="utf-8")
    return path


READ_SNIPPET = """
import sys, time
from pathlib import Path
import pandas as pd
files = sorted(Path(sys.argv[1]).glob("a-*.csv"))
t0, c0 = time.perf_counter(), time.process_time()
for f in files:
    pd.read_csv(f)
print(time.perf_counter() - t0, time.process_time() - c0)
"""


def child_env() -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT / "src") + os.pathsep + env.get("PYTHONPATH", "")
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = "1"
    return env


def pandas_floor(runs: Path) -> tuple[float, float]:
    """(wall, CPU) seconds pandas needs to read every member file, in a child process (imports not counted)."""
    out = subprocess.run([sys.executable, "-c", READ_SNIPPET, str(runs)], capture_output=True, text=True,
                         check=True, env=child_env())
    wall, cpu = out.stdout.split()
    return float(wall), float(cpu)


def tool_run(study: Path, out: Path, quiet: bool = False) -> tuple[float, float, float]:
    """(wall seconds, CPU seconds, peak resident memory [MiB]) of ``egressmargin run --no-pdf --jobs 1``.

    CPU is the child's user + system time (imports included). The peak is the largest child
    so far (``ru_maxrss``); the pandas child reads far less than the run holds.
    """
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "egressmargin", "run", str(study), "--out", str(out), "--no-pdf",
                    "--jobs", "1", *(["--quiet"] if quiet else [])], check=True, env=child_env())
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, after.ru_maxrss / 1024.0


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--quick", action="store_true", help="reduced sizes (seconds)")
    p.add_argument("--repeats", type=int, default=3, help="pairs (floor, run) to take the median of (default 3)")
    p.add_argument("--json", type=Path, help="also write the figures as JSON to this file")
    args = p.parse_args(argv)
    members, locations, rows, samples = (12, 5, 301, 200) if args.quick else (200, 20, 1801, 2000)
    pairs = []
    with tempfile.TemporaryDirectory(prefix="em-ens-bench-") as tmp:
        work = Path(tmp)
        print(f"writing {members} SYNTHETIC member files ({locations} locations x {rows} rows) ...", flush=True)
        study = write_ensemble_study(work, members, locations, rows, samples)
        pandas_floor(work / "runs")                       # warm-up: both sides read from the page cache
        for k in range(max(1, args.repeats)):
            floor_wall, floor_cpu = pandas_floor(work / "runs")
            wall, cpu, peak_mib = tool_run(study, work / "out", quiet=k > 0)   # progress shown on the first
            pairs.append({"floor_wall": floor_wall, "floor_cpu": floor_cpu, "wall": wall, "cpu": cpu,
                          "peak_mib": peak_mib, "ratio_cpu": cpu / floor_cpu, "ratio_wall": wall / floor_wall})
        res = json.loads((work / "out" / "results.json").read_text())
        shares = [m["draws"] for m in res["scenarios"][0]["ensemble"]]

    def med(key):
        v = sorted(x[key] for x in pairs)
        return v[len(v) // 2]

    row = {"members": members, "locations": locations, "rows": rows, "samples": samples, "repeats": len(pairs),
           "pandas_read_cpu_s": round(med("floor_cpu"), 3), "tool_run_cpu_s": round(med("cpu"), 3),
           "ratio_cpu": round(med("ratio_cpu"), 2), "pandas_read_wall_s": round(med("floor_wall"), 3),
           "tool_run_wall_s": round(med("wall"), 3), "ratio_wall": round(med("ratio_wall"), 2),
           "peak_mib": round(max(x["peak_mib"] for x in pairs), 1), "draws_per_member": [min(shares), max(shares)],
           "pairs": pairs}
    print(f"ensemble {members} members x {locations} locations x {rows} rows x {samples} draws "
          f"(medians of {len(pairs)} pairs)")
    print(f"  pandas reads the {members} files: {row['pandas_read_cpu_s']:.2f} s CPU "
          f"({row['pandas_read_wall_s']:.2f} s wall)")
    print(f"  egressmargin run --no-pdf --jobs 1: {row['tool_run_cpu_s']:.2f} s CPU "
          f"({row['tool_run_wall_s']:.2f} s wall; imports included)")
    print(f"  ratio tool / input floor: {row['ratio_cpu']:.2f} x CPU, {row['ratio_wall']:.2f} x wall (target <= 3 x)")
    print(f"  peak memory of the run: {row['peak_mib']:.0f} MiB (target < 1024 MiB)")
    print(f"  draws per member: {min(shares)} to {max(shares)}")
    if args.json:
        args.json.write_text(json.dumps(row, indent=2) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
