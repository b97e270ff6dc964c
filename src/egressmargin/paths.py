"""Paths as the outputs show them: relative to the study file, never the machine's.

A submittal carries paths a reviewer can follow in the submitted folder, not the
engineer's disk layout. Every path that reaches ``results.json``, the report or a
message written into them goes through :func:`shown_path` (one path) or
:func:`relative_text` (a sentence that may quote paths).
"""

from __future__ import annotations

import os
from pathlib import Path


def _bundled_criteria_dir() -> Path | None:
    from .resources import resource_dir
    try:
        return resource_dir("criteria").resolve()
    except FileNotFoundError:
        return None


def shown_path(path: str | Path | None, base: str | Path) -> str:
    """``path`` relative to the study's folder ``base``, with ``/`` separators.

    A bundled criteria set is shown as ``bundled: <name>`` (it is part of the tool, not of
    the submittal). A path on another drive (Windows), where no relative path exists, is
    shown by its name only.

    >>> shown_path("/a/b/data/x.csv", "/a/b")
    'data/x.csv'
    >>> shown_path("/a/c/x.yaml", "/a/b")
    '../c/x.yaml'
    """
    if path is None or str(path) == "":
        return ""
    p = Path(path)
    bundled = _bundled_criteria_dir()
    try:
        resolved = p.resolve()
    except OSError:
        resolved = p
    if bundled is not None and resolved.parent == bundled and p.suffix in (".yaml", ".yml"):
        return f"bundled: {p.stem}"
    if not p.is_absolute():
        return p.as_posix()
    try:
        rel = os.path.relpath(str(p), str(Path(base)))
    except ValueError:           # another drive: no relative path
        return p.name
    return Path(rel).as_posix()


def relative_text(text: str, base: str | Path) -> str:
    """``text`` with every absolute mention of the study folder or the bundled criteria folder
    made relative (the study folder dropped; a bundled file named ``bundled: <name>``).

    >>> relative_text("/a/b/study.yaml:3: bad", "/a/b")
    'study.yaml:3: bad'
    """
    out = str(text)
    bundled = _bundled_criteria_dir()
    if bundled is not None and str(bundled) in out:
        import re
        out = re.sub(re.escape(str(bundled) + os.sep) + r"([\w.-]+?)\.ya?ml", r"bundled: \1", out)
    for b in {str(Path(base)), str(Path(base).resolve())}:
        out = out.replace(b + os.sep, "")
    return out
