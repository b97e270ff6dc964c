"""YAML reading that remembers the line of every key, for located error messages."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from .errors import InputError, Problem

Path_ = tuple  # a key path: ("scenarios", 0, "locations", 1, "co")


@dataclass
class Located:
    """A YAML document as plain Python objects with the line of each key path (1-based)."""

    data: object
    lines: dict = field(default_factory=dict)
    path: Path = Path(".")

    def line(self, key_path: Path_) -> int | None:
        """Line of ``key_path`` or of its nearest located parent."""
        kp = tuple(key_path)
        while kp:
            if kp in self.lines:
                return self.lines[kp]
            kp = kp[:-1]
        return self.lines.get((), None)

    def where(self, key_path: Path_) -> str:
        """``file:line key.path[0].sub`` for messages."""
        line = self.line(key_path)
        loc = f"{self.path}:{line}" if line else f"{self.path}"
        dotted = format_key_path(key_path)
        return f"{loc} {dotted}" if dotted else loc


def format_key_path(key_path: Path_) -> str:
    out = ""
    for part in key_path:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


#: Most YAML nodes a study may expand to (guards against alias bombs; a study has far fewer).
MAX_NODES = 200_000


class _Bad(Exception):
    def __init__(self, line, message):
        super().__init__(message)
        self.line, self.message = line, message


def _build(node, key_path, lines, ancestors=(), count=None, found=None):
    """Plain Python objects from ``node``; record key lines in ``lines``.

    Structural problems raise :class:`_Bad`; ambiguous or unusable values (a key given
    twice, a non-finite number) are appended to ``found`` as (line, key path, message) so
    that every one of them is reported at once.
    """
    count = count if count is not None else [0]
    found = found if found is not None else []
    count[0] += 1
    line = node.start_mark.line + 1
    if count[0] > MAX_NODES:
        raise _Bad(line, f"the document expands to more than {MAX_NODES} values (aliases?); expected a plain study")
    if id(node) in ancestors:
        raise _Bad(line, "an alias refers to itself; expected a document without recursive aliases")
    lines.setdefault(key_path, line)
    if isinstance(node, yaml.MappingNode):
        out = {}
        inner = ancestors + (id(node),)
        for knode, vnode in node.value:
            if not isinstance(knode, yaml.ScalarNode):
                raise _Bad(knode.start_mark.line + 1, "a list or mapping is used as a key; expected a plain key")
            if knode.tag == MERGE_TAG:
                found.append((knode.start_mark.line + 1, key_path, "found a YAML merge key ('<<: *name'), which "
                              "this tool does not expand; expected the keys written out in this mapping"))
                continue
            key = _construct_scalar(knode)
            kp = key_path + (key,)
            key_line = knode.start_mark.line + 1
            if key in out:
                # PyYAML would keep the last of two equal keys; an input must never mean two things.
                found.append((key_line, kp, f"found the key '{key}' twice (lines {lines[kp]} and {key_line}); "
                              "expected each key once: remove one"))
                continue
            lines[kp] = key_line
            out[key] = _build(vnode, kp, lines, inner, count, found)
        return out
    if isinstance(node, yaml.SequenceNode):
        inner = ancestors + (id(node),)
        return [_build(v, key_path + (i,), lines, inner, count, found) for i, v in enumerate(node.value)]
    value = _construct_scalar(node)
    if isinstance(value, float) and not math.isfinite(value):
        found.append((line, key_path, f"found {node.value!r}, which is not a finite number; expected a "
                      "finite number"))
    return value


#: The tag PyYAML gives the merge key ``<<`` (YAML 1.1 merge key type).
MERGE_TAG = "tag:yaml.org,2002:merge"
#: The tag of a date or date-time scalar (YAML 1.1 timestamp type): kept as the text as
#: written (a title ``2024-01-01`` is text, never ``datetime.date(2024, 1, 1)``).
TIMESTAMP_TAG = "tag:yaml.org,2002:timestamp"


#: One safe constructor for every scalar (a scalar's value depends on its node only).
_SCALARS = yaml.constructor.SafeConstructor()


def _construct_scalar(node):
    if node.tag == TIMESTAMP_TAG:
        return node.value
    try:
        return _SCALARS.construct_object(node, deep=True)
    finally:
        _SCALARS.constructed_objects.clear()
        _SCALARS.recursive_objects.clear()
        _SCALARS.state_generators = []


def _compose(text: str):
    """The document's node tree with line marks: libyaml's composer where PyYAML has it.

    libyaml keeps the same line marks and tags; anything it rejects is composed again
    by the pure-Python composer, so an error's message and place are PyYAML's own.
    """
    fast = getattr(yaml, "CSafeLoader", None)
    if fast is not None:
        try:
            return yaml.compose(text, Loader=fast)
        except yaml.YAMLError:
            pass
    return yaml.compose(text, Loader=yaml.SafeLoader)


def load_located(path: Path) -> Located:
    """Read a YAML file safely, keeping key lines. Raises InputError on unreadable YAML."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError([Problem(str(path), "file not found; expected a YAML file at this path")]) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError([Problem(str(path), f"cannot read the file ({exc}); expected UTF-8 YAML text")]) from None
    return load_located_text(text, path)


def load_located_text(text: str, path: Path) -> Located:
    try:
        node = _compose(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"{path}:{mark.line + 1}" if mark else str(path)
        what = getattr(exc, "problem", None) or str(exc)
        col = f" (column {mark.column + 1})" if mark else ""
        raise InputError([Problem(where, f"YAML syntax error{col}: {what}; expected valid YAML")]) from None
    if node is None:
        return Located({}, {(): 1}, path)
    lines: dict = {}
    found: list = []
    try:
        data = _build(node, (), lines, found=found)
    except _Bad as exc:
        raise InputError([Problem(f"{path}:{exc.line}", exc.message)]) from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None) or getattr(exc, "context_mark", None)
        what = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise InputError([Problem(f"{path}:{mark.line + 1}" if mark else str(path),
                                  f"YAML error: {what}; expected plain YAML values (text, numbers, lists, "
                                  "mappings)")]) from None
    if found:
        raise InputError([Problem(f"{path}:{line} {format_key_path(kp)}".rstrip(), message)
                          for line, kp, message in found])
    return Located(data, lines, path)
