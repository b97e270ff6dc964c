"""The submittal report: plots (PNG), HTML via jinja2 and PDF via WeasyPrint.

Public entry point: :func:`render_report`. Heavy libraries (matplotlib, jinja2,
WeasyPrint) are imported only when a report is rendered.
"""

from __future__ import annotations

from .render import render_html, render_report, templates_dir

__all__ = ["render_report", "render_html", "templates_dir"]
