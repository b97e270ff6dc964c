"""Check that results.json is byte-identical between two versions of the package's code.

Usage (from the repository root)::

    python tools/results_unchanged.py BEFORE_SRC [TEST_FILE ...]

BEFORE_SRC is the ``src`` folder of the earlier version (a ``git archive`` of it with
``demo``, ``criteria`` and ``report_templates`` beside it, or another checkout); the
later version is this checkout's ``src``. It runs ``egressmargin demo --no-pdf`` with
each and compares results.json byte for byte (it holds no date), then runs the given
test files with each (the whole ``tests`` folder: about 7 minutes), capturing every
results dict the tests' studies produce (tools/results_capture.py), and compares them
file by file (temporary-folder paths and the hashes of files the tests write made
equal). Exit status 0 when all are identical, 1 otherwise.

Example::

    git archive main src demo criteria report_templates | tar -x -C /tmp/before
    python tools/results_unchanged.py /tmp/before/src tests
"""

from __future__ import annotations

import difflib
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PY = sys.executable


def _env(src: Path, extra: dict | None = None) -> dict:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(src), str(ROOT / "tools")]))
    env.update(extra or {})
    return env


def _show_diff(a: str, b: str, label: str) -> None:
    lines = list(difflib.unified_diff(a.splitlines(), b.splitlines(), f"before/{label}", f"after/{label}", n=2))
    print("\n".join(lines[:60]))


def _normalise(text: str) -> str:
    """Temporary folders differ between runs, and so do the hashes of input files a test writes
    at run time (a fitted uncertainty table records the date and the pairs file's path);
    nothing else may."""
    text = re.sub(r"/tmp/[^\"\s]*?pytest-\d+/[^/\"\s]+/", "TMP/", text)
    return re.sub(r'"sha256": "[0-9a-f]{64}"', '"sha256": "HASH"', text)


def main(argv: list[str]) -> int:
    if not argv:
        print(__doc__)
        return 2
    before, tests = Path(argv[0]).resolve(), argv[1:]
    after = ROOT / "src"
    ok = True
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        texts = {}
        for name, src in (("before", before), ("after", after)):
            out = tmp / f"demo-{name}"
            subprocess.run([PY, "-m", "egressmargin", "demo", "--no-pdf", "--quiet", "--out", str(out)],
                           env=_env(src), check=True, cwd=tmp, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            texts[name] = (out / "results.json").read_text(encoding="utf-8")
        same = texts["before"] == texts["after"]
        print(f"demo results.json: {'identical' if same else 'DIFFERENT'} ({len(texts['after'])} bytes)")
        if not same:
            ok = False
            _show_diff(texts["before"], texts["after"], "demo/results.json")
        if tests:
            dirs = {}
            for name, src in (("before", before), ("after", after)):
                dirs[name] = tmp / f"capture-{name}"
                subprocess.run([PY, "-m", "pytest", "-q", "-p", "results_capture", "-p", "no:cacheprovider", *tests],
                               env=_env(src, {"RESULTS_CAPTURE_DIR": str(dirs[name])}), cwd=ROOT,
                               stdout=subprocess.DEVNULL)
            names_b = sorted(p.name for p in dirs["before"].glob("*.json"))
            names_a = sorted(p.name for p in dirs["after"].glob("*.json"))
            if names_b != names_a:
                ok = False
                print("captured different runs:", sorted(set(names_b) ^ set(names_a))[:20])
            differ = 0
            for n in sorted(set(names_b) & set(names_a)):
                a = _normalise((dirs["before"] / n).read_text(encoding="utf-8"))
                b = _normalise((dirs["after"] / n).read_text(encoding="utf-8"))
                if a != b:
                    differ += 1
                    ok = False
                    if differ <= 3:
                        _show_diff(a, b, n)
            print(f"test studies: {len(names_a)} results compared, {differ} different")
    print("IDENTICAL" if ok else "DIFFERENCES FOUND")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
