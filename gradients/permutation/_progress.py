"""Progress reporting for long permutation runs.

Analyses never print. The command line installs a reporter with :func:`report_progress`; the
engine tells the current reporter how many batches are done. With no reporter installed nothing
is shown, so library use and non-terminal runs stay quiet.
"""

from __future__ import annotations

import contextlib
import contextvars
import sys
import time
from collections.abc import Callable, Iterator
from typing import TextIO

__all__ = ["TerminalProgress", "current_reporter", "report_progress"]

Reporter = Callable[[str, int, int], None]

_REPORTER: contextvars.ContextVar[Reporter | None] = contextvars.ContextVar(
    "gradients_progress", default=None
)


def current_reporter() -> Reporter | None:
    """The reporter installed by :func:`report_progress`, or None."""
    return _REPORTER.get()


@contextlib.contextmanager
def report_progress(reporter: Reporter | None) -> Iterator[None]:
    """Install ``reporter(task, done, total)`` for the permutation runs inside the block."""
    token = _REPORTER.set(reporter)
    try:
        yield
    finally:
        _REPORTER.reset(token)


class TerminalProgress:
    """A one-line progress bar on a terminal; silent when the stream is not a terminal.

    Only runs expected to take more than ``delay`` seconds show a bar.
    """

    def __init__(self, stream: TextIO | None = None, *, delay: float = 1.0,
                 width: int = 28) -> None:
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = bool(getattr(self.stream, "isatty", lambda: False)())
        self.delay = delay
        self.width = width
        self._start: dict[str, float] = {}
        self._shown = False

    def __call__(self, task: str, done: int, total: int) -> None:
        if not self.enabled or total <= 0:
            return
        now = time.perf_counter()
        start = self._start.setdefault(task, now)
        if done >= total:
            self._start.pop(task, None)
            if self._shown:
                self.stream.write("\r" + " " * (self.width + 60) + "\r")
                self.stream.flush()
                self._shown = False
            return
        if now - start < self.delay:
            return
        filled = int(self.width * done / total)
        bar = "#" * filled + "." * (self.width - filled)
        self.stream.write(f"\r  {task[:40]:<40} [{bar}] {100 * done // total:3d}%")
        self.stream.flush()
        self._shown = True
