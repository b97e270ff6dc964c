"""Peak memory of the flow model's kept per-person arrays (sizing.BYTES_PER_SAMPLE_OCCUPANT_ELEMENT).

Writes a SYNTHETIC study (an invented hall and corridor, illustrative numbers only) with one
route of N occupants through E path elements (10 m corridors), and runs
``egressmargin run --no-pdf`` on it in a subprocess for each (S, N, E, basis); prints the
peak resident memory (``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss``) of each run and
the growth per sample x occupant x element between E_low and E_high elements. With
``exposure: along-route`` every element keeps its per-person times (S x N arrays); with
``acceptance.basis: route-aset`` and no along-route exposure none are kept.

    python bench/memory_per_person.py [--samples 400] [--occupants 2500] [--elements 1 8]
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def write(folder: Path, S: int, N: int, E: int, along: bool) -> Path:
    t = np.arange(0.0, 1801.0, 5.0)
    temp = 20.0 + 30.0 * (1 - np.exp(-t / 600.0))            # illustrative, never reaches 60 degC
    co = 400.0 * (1 - np.exp(-t / 300.0))                    # illustrative ppm
    rows = ["Time [s],T_hall [degC],CO_hall [ppm],T_corr [degC],CO_corr [ppm]"]
    rows += [f"{a:.6g},{b:.6g},{c:.6g},{b:.6g},{c / 2:.6g}" for a, b, c in zip(t, temp, co)]
    (folder / "h.csv").write_text("\n".join(rows) + "\n")
    path = [f"      - corridor: {{length: 10 m, width: 2 m, at: {'hall' if k == 0 else 'corr'}}}"
            for k in range(E)]
    text = f"""title: per-person memory (synthetic, illustrative)
samples: {S}
max_samples: {S}
seed: 1
criteria: {{base: general-2m, only: [fed_toxic, temperature]}}
scenarios:
  - id: s
    histories: h.csv
    time: Time
    locations:
      - {{id: hall, temperature: T_hall, co: CO_hall}}
      - {{id: corr, temperature: T_corr, co: CO_corr}}
egress:
  - id: r
    occupants: {N}
    detection: 30 s
    alarm: 30 s
    premovement: {{across_occupants: {{lognormal: {{median: 60 s, p95: 240 s}}}}}}
    start_at: hall
{"    exposure: along-route" if along else ""}
    exposed_at: [hall, corr]
    path:
""" + "\n".join(path) + "\n"
    study = folder / "study.yaml"
    study.write_text(text)
    return study


def peak_rss(study: Path) -> float:
    """Peak resident memory of one run in a fresh child process [bytes] (Linux: ru_maxrss in kB)."""
    code = ("import resource,subprocess,sys;"
            "subprocess.run(sys.argv[1:], check=True, stdout=subprocess.DEVNULL);"
            "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)")
    env = dict(os.environ, PYTHONPATH=str(ROOT / "src"))
    out = subprocess.run([sys.executable, "-c", code, sys.executable, "-m", "egressmargin", "run", str(study),
                          "--no-pdf", "--quiet", "--jobs", "1", "--force", "--out", str(study.parent / "out")],
                         env=env, capture_output=True, text=True)
    if out.returncode:
        raise SystemExit(out.stderr)
    out = out.stdout
    return float(out.split()[-1]) * 1024


def main(argv=None) -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=400)
    ap.add_argument("--occupants", type=int, default=2500)
    ap.add_argument("--elements", type=int, nargs=2, default=[1, 8])
    a = ap.parse_args(argv)
    S, N = a.samples, a.occupants
    res = {}
    with tempfile.TemporaryDirectory() as tmp:
        for along in (False, True):
            for E in a.elements:
                folder = Path(tmp) / f"{along}-{E}"
                folder.mkdir()
                res[along, E] = peak_rss(write(folder, S, N, E, along))
                print(f"S={S} N={N} E={E} along-route={along}: peak RSS {res[along, E] / 1e6:.0f} MB", flush=True)
    e0, e1 = a.elements
    for along in (False, True):
        per = (res[along, e1] - res[along, e0]) / (S * N * (e1 - e0))
        print(f"along-route={along}: {per:.1f} B per sample x occupant x element")


if __name__ == "__main__":
    main()
