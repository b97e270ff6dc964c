"""Where the bundled folders (criteria, report templates, demo) are, installed or in a checkout."""

from __future__ import annotations

from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent


def resource_dir(name: str) -> Path:
    """Return the folder ``name`` shipped in the wheel, or the checkout's top-level one.

    The wheel maps the top-level folders ``criteria/``, ``report_templates/`` and ``demo/``
    into the package; an editable install finds them at the repository root.
    """
    inside = _PACKAGE / name
    if inside.is_dir():
        return inside
    checkout = _PACKAGE.parents[1] / name
    if checkout.is_dir():
        return checkout
    raise FileNotFoundError(f"bundled folder '{name}' is missing from the installation ({inside})")
