"""pytest plugin: write every results dict `pipeline.build_results` returns during a test run.

Used by ``tools/results_unchanged.py`` to compare results.json before and after a refactor
on the studies the test suite builds. Set RESULTS_CAPTURE_DIR to the folder to write to;
each file is named after the test and a running count, and holds the results exactly as
`pipeline.run` serialises them (indent 2, keys in insertion order).
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path


def pytest_configure(config):
    target = os.environ.get("RESULTS_CAPTURE_DIR")
    if not target:
        return
    from egressmargin import pipeline

    out = Path(target)
    out.mkdir(parents=True, exist_ok=True)
    original = pipeline.build_results
    counts: dict[str, int] = {}

    def capturing(loaded, options):
        results, plots = original(loaded, options)
        test = os.environ.get("PYTEST_CURRENT_TEST", "outside-test").split(" ")[0]
        name = re.sub(r"[^A-Za-z0-9_.-]+", "_", test)
        counts[name] = counts.get(name, 0) + 1
        (out / f"{name}.{counts[name]}.json").write_text(
            json.dumps(results, indent=2, sort_keys=False, allow_nan=False) + "\n", encoding="utf-8")
        return results, plots

    pipeline.build_results = capturing
