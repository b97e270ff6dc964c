"""Progress on stderr: a live one-line bar on a terminal, one line per stage otherwise.

The interface the pipeline and the report call (``RunOptions.progress`` is None or an
object with these three methods):

``stage(name, total=None)``
    A new stage begins (``"scenario fire-a (1/3)"``, ``"figures"`` with ``total=24``).
``step(n=1)``
    ``n`` more of the current stage's ``total`` are done.
``done()``
    Everything is done: the live line is cleared.

On a terminal the line is redrawn in place with a carriage return; when stderr is a file
or a pipe each stage is one line (``egressmargin: figures (24) …``) and steps print
nothing, so a log stays short. ``--quiet`` passes no object at all.
"""

from __future__ import annotations

import sys
from typing import TextIO

#: Width of the bar drawn for a stage with a known total [characters] (project choice).
BAR_WIDTH = 24


class Progress:
    """Stage-by-stage progress written to ``stream`` (default ``sys.stderr``).

    Parameters
    ----------
    stream : text stream, optional
    live : bool, optional
        Redraw one line in place; default: when ``stream`` is a terminal.
    """

    def __init__(self, stream: TextIO | None = None, live: bool | None = None):
        self.stream = sys.stderr if stream is None else stream
        if live is None:
            isatty = getattr(self.stream, "isatty", None)
            live = bool(isatty and isatty())
        self.live = live
        self.name: str | None = None
        self.total: int | None = None
        self.count = 0
        self._width = 0            # length of the live line drawn last

    def stage(self, name: str, total: int | None = None) -> None:
        self.name, self.total, self.count = name, total, 0
        if self.live:
            self._draw()
        else:
            self._write(f"egressmargin: {name}{f' ({total})' if total else ''} …\n")

    def step(self, n: int = 1) -> None:
        self.count += n
        if self.live:
            self._draw()

    def done(self) -> None:
        if self.live and self._width:
            self._write("\r" + " " * self._width + "\r")
            self._width = 0
        self.name = None

    def line(self) -> str:
        """The live line for the current stage (without the carriage return)."""
        text = f"egressmargin: {self.name}"
        if self.total:
            filled = min(BAR_WIDTH, round(BAR_WIDTH * self.count / self.total))
            text += f" [{'#' * filled}{'.' * (BAR_WIDTH - filled)}] {min(self.count, self.total)}/{self.total}"
        elif self.count:
            text += f" ({self.count})"
        return text

    def _draw(self) -> None:
        text = self.line()
        pad = max(0, self._width - len(text))
        self._write("\r" + text + " " * pad)
        self._width = len(text)

    def _write(self, text: str) -> None:
        try:
            self.stream.write(text)
            self.stream.flush()
        except (OSError, ValueError):   # a closed or broken stderr must not stop the run
            pass
