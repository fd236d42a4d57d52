"""The terminal progress bars: shown only on a terminal, one per analysis, in permutations."""

from __future__ import annotations

import io

import numpy as np

from gradients.permutation import (
    TerminalProgress,
    permutation_plan,
    permutation_test,
    report_progress,
)


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_bar_names_the_analysis_and_counts_permutations():
    stream = _Terminal()
    bars = TerminalProgress(stream, delay=0.0, interval=0.0)
    plan = permutation_plan(12, n_resamples=2500, rng=0, batch_size=500)
    y = np.arange(12.0)
    with report_progress(bars):
        permutation_test(lambda o: y[o] @ y, plan, task="Mantel test", n_jobs=1)
    text = stream.getvalue()
    assert "Mantel test" in text and "/2500" in text and "2000/2500" in text
    assert bars._bars == {}  # finished bars are closed (and cleared: leave=False)


def test_nothing_is_written_off_a_terminal():
    stream = io.StringIO()  # not a terminal (a log file, CI)
    bars = TerminalProgress(stream, delay=0.0)
    bars("Mantel test", 10, 100)
    bars.close()
    assert stream.getvalue() == "" and not bars.enabled
