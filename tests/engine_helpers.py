"""Build small studies on disk for engine and pipeline tests."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import yaml


def write_study(tmp: Path, t_s, columns: dict[str, tuple[str, np.ndarray]], locations: list[dict],
                routes: list[dict] | None = None, criteria="general-2m", uncertainty: dict | None = None,
                samples: int = 400, seed: int = 1, extra: dict | None = None) -> Path:
    """Write ``data.csv`` (columns: name -> (unit, values)) and ``study.yaml``; return the study path."""
    tmp = Path(tmp)
    header = ["Time [s]"] + [f"{name} [{unit}]" for name, (unit, _) in columns.items()]
    rows = [header] + [[repr(float(t_s[i]))] + [repr(float(v[i])) for _, v in columns.values()]
                       for i in range(len(t_s))]
    (tmp / "data.csv").write_text("\n".join(",".join(r) for r in rows) + "\n", encoding="utf-8")
    study = {"title": "engine test (synthetic)", "criteria": criteria, "samples": samples, "seed": seed,
             "scenarios": [{"id": "s1", "histories": "data.csv", "time": "Time", "locations": locations}]}
    if routes:
        study["egress"] = routes
    if uncertainty is not None:
        (tmp / "unc.yaml").write_text(yaml.safe_dump(uncertainty), encoding="utf-8")
        study["uncertainty"] = "unc.yaml"
    if extra:
        study.update(extra)
    path = tmp / "study.yaml"
    path.write_text(yaml.safe_dump(study, sort_keys=False), encoding="utf-8")
    return path


def results_for(path: Path, **kw):
    from egressmargin.pipeline import RunOptions, build_results, load

    opts = RunOptions(**kw)
    return build_results(load(path, opts), opts)


def location(results, lid, scenario=0):
    return next(loc for loc in results["scenarios"][scenario]["locations"] if loc["id"] == lid)


def without_sign_default(items):
    """Warnings other than the one every bundled set gets for its default exit-sign type."""
    return [x for x in items if "visibility criterion assumes" not in str(x)]


class ProgressRecorder:
    """A progress object (stage/step/done) that records its calls, for the tests."""

    def __init__(self):
        self.calls = []

    def stage(self, name, total=None):
        self.calls.append(("stage", name, total))

    def step(self, n=1):
        self.calls.append(("step", n))

    def done(self):
        self.calls.append(("done",))
