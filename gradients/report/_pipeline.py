"""Running the analyses a project asks for, in order, and collecting what they found.

Each analysis is one *step* (:class:`Step`): a function that reads what earlier steps left in
the :class:`Context` and adds a :class:`~gradients.report._model.Section`. The steps and their
order are listed in :data:`gradients.report.steps.STEPS`.

What happens to a step, and nothing else can:

- switched off in the project (its ``analyses.*`` setting is false): it does not run and leaves
  no trace in the report;
- it has nothing to do for this project (no surfaces named, no categorical variables): it adds
  no section;
- the data do not allow it: the step raises :class:`Skip` with the reason (a correlogram
  without site locations, for example), or an analysis it calls refuses the data with an
  :class:`~gradients.InputError` whose message says why. The step is listed among the skipped
  analyses with that reason (in the report and in ``run.json``). An ``InputError`` in a
  ``required`` step, on which the rest of the job depends, stops the run instead;
- any other exception (a bug, a missing module): the run stops with a :class:`StepError` that
  names the step and the original error. No report folder is written: the report is written
  only after every step has run.
"""

from __future__ import annotations

import time
import zlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError
from ._model import Section

__all__ = ["Context", "Skip", "Step", "StepError", "rng_for", "run_steps"]


def rng_for(seed: int, name: str) -> np.random.Generator:
    """A generator for one analysis, derived from the project seed and the analysis name.

    Each analysis has its own stream, so switching one analysis on or off does not change the
    p-values of the others.
    """
    return np.random.default_rng(np.random.SeedSequence([int(seed), zlib.crc32(name.encode())]))


@dataclass
class Context:
    """State shared by the steps of one run."""

    settings: dict[str, Any]
    hypotheses: dict[str, tuple[str, ...]]
    survey: Any
    seed: int
    n_resamples: int
    results: dict[str, Any] = field(default_factory=dict)
    sections: list[Section] = field(default_factory=list)
    methods: list[str] = field(default_factory=list)
    skipped: list[tuple[str, str]] = field(default_factory=list)
    timings: dict[str, float] = field(default_factory=dict)
    site_columns: dict[str, pd.Series] = field(default_factory=dict)

    def rng(self, name: str) -> np.random.Generator:
        return rng_for(self.seed, name)

    def figure(self, draw: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
        """The figure drawn by ``draw(*args, **kwargs)``, a function of :mod:`gradients.plot`
        (which returns the axes it drew into, or the figure when it draws several panels)."""
        drawn = draw(*args, **kwargs)
        return drawn.get_figure(root=True) if hasattr(drawn, "get_figure") else drawn


StepFunction = Callable[[Context], None]


@dataclass(frozen=True)
class Step:
    """One analysis step of a run.

    ``setting`` is the ``analyses.*`` switch that turns it off (None: always runs). An
    :class:`InputError` in a ``required`` step stops the run (the rest of the job depends on
    it); in any other step it only skips that analysis (listed with its reason in the report).
    """

    name: str
    run: StepFunction
    setting: str | None = None
    required: bool = False


class Skip(Exception):
    """Raised by a step when the data do not allow its analysis; the message says why.

    The step is then listed among the skipped analyses with the message as its reason.
    """


class StepError(RuntimeError):
    """An analysis step failed for a reason other than the data; the run stops.

    Attributes
    ----------
    step : str
        The name of the step that failed.
    """

    def __init__(self, step: str, error: BaseException) -> None:
        super().__init__(
            f"The analysis step {step!r} failed with {type(error).__name__}: {error}. No report "
            "folder was written.")
        self.step = step


def run_steps(ctx: Context, steps: Sequence[Step]) -> None:
    """Run ``steps`` in the order given (telling an installed progress reporter).

    A :class:`Skip`, or an :class:`InputError` of a step that is not ``required``, lists the
    step in ``ctx.skipped`` with its reason; an ``InputError`` of a required step is raised as
    it is; any other exception is raised as a :class:`StepError` naming the step.
    """
    from ..permutation import current_reporter

    todo = [s for s in steps if s.setting is None or ctx.settings.get(s.setting, True)]
    reporter = current_reporter()
    for i, s in enumerate(todo):
        if reporter is not None:
            reporter("running analyses", i, len(todo))
        start = time.perf_counter()
        try:
            s.run(ctx)
        except Skip as exc:
            ctx.skipped.append((s.name, str(exc)))
        except InputError as exc:
            if s.required:
                raise
            ctx.skipped.append((s.name, str(exc)))
        except Exception as exc:
            raise StepError(s.name, exc) from exc
        finally:
            ctx.timings[s.name] = round(time.perf_counter() - start, 3)
    if reporter is not None:
        reporter("running analyses", len(todo), len(todo))
