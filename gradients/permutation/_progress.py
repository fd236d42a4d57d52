"""Progress reporting for long permutation runs.

Analyses never print. The command line installs a reporter with :func:`report_progress`; the
engine tells the current reporter how many batches are done. With no reporter installed nothing
is shown, so library use and non-terminal runs stay quiet. The reporter is told
``(task, done, total)``; the engine counts permutations.
"""

from __future__ import annotations

import contextlib
import contextvars
import sys
from collections.abc import Callable, Iterator
from typing import Any, TextIO

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
    """Progress bars on a terminal (``tqdm``); silent when the stream is not a terminal.

    One bar per task (the analysis name), counting what the caller counts (permutations for
    the engine), with the rate and the time left; a bar appears only once its task has run for
    ``delay`` seconds, is redrawn at most every ``interval`` seconds, and is cleared when the
    task is done.
    """

    def __init__(self, stream: TextIO | None = None, *, delay: float = 1.0,
                 interval: float = 0.1) -> None:
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = bool(getattr(self.stream, "isatty", lambda: False)())
        self.delay = delay
        self.interval = interval
        self._bars: dict[str, Any] = {}

    def __call__(self, task: str, done: int, total: int) -> None:
        if not self.enabled or total <= 0:
            return
        bar = self._bars.get(task)
        if bar is not None and (bar.total != total or done < bar.n):
            bar.close()  # a new run of the same task
            bar = None
        if bar is None:
            from tqdm import tqdm

            bar = tqdm(total=total, desc=f"  {task[:40]}", unit="",
                       file=self.stream, delay=self.delay, leave=False, dynamic_ncols=True,
                       mininterval=self.interval, miniters=1,
                       bar_format="{desc}: {percentage:3.0f}%|{bar}| {n_fmt}/{total_fmt} "
                                  "[{elapsed}<{remaining}]")
            self._bars[task] = bar
        bar.update(done - bar.n)
        if done >= total:
            bar.close()
            del self._bars[task]

    def close(self) -> None:
        """Clear any bar left open (a run that stopped early or failed)."""
        for bar in self._bars.values():
            bar.close()
        self._bars.clear()
