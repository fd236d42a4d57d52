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

Before any analysis runs, :func:`preflight` checks the whole job: the steps that prepare the
distance matrices (``prepares``, cheap, no permutations) run for real, and every other step
that would run calls its own ``check`` (the pre-flight of its inputs, written beside its run
code). Every problem found becomes a :class:`Finding` naming the project key to change;
``gradients check`` prints them and a run refuses to start while any is an error, so the check
and the run take one code path and cannot disagree. A ``check`` that raises :class:`Skip`
plans the step as not run (listed with its reason), unless the project file asks for the
analysis itself (``analyses.<step> = true``, or the variables it names): then it is an error.
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

__all__ = ["RESOURCE_CHECKS", "Context", "Finding", "PreflightError", "Skip", "Step",
           "StepError", "preflight", "rng_for", "run_steps"]


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
    #: ``"section.key"`` settings the project file gives itself (not defaults).
    given: frozenset[str] = frozenset()
    #: What the pre-flight found, and the steps it planned as not run (name -> reason).
    findings: list[Finding] = field(default_factory=list)
    planned_skips: dict[str, str] = field(default_factory=dict)
    #: Steps already run (by the pre-flight), and whether the pre-flight has run.
    done: set[str] = field(default_factory=set)
    checked: bool = False

    def warn(self, step: str, message: str) -> None:
        """Record a warning of the pre-flight (printed by ``gradients check``, kept in the run)."""
        self.findings.append(Finding("warning", step, message))

    def rng(self, name: str) -> np.random.Generator:
        return rng_for(self.seed, name)

    def figure(self, draw: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
        """The figure drawn by ``draw(*args, **kwargs)``, a function of :mod:`gradients.plot`
        (which returns the axes it drew into, or the figure when it draws several panels)."""
        drawn = draw(*args, **kwargs)
        return drawn.get_figure(root=True) if hasattr(drawn, "get_figure") else drawn


StepFunction = Callable[[Context], None]


@dataclass(frozen=True)
class Finding:
    """One problem the pre-flight found: ``level`` is "error" (the run refuses) or "warning"."""

    level: str
    step: str
    message: str
    file: str | None = None
    sites: tuple[object, ...] = ()
    columns: tuple[object, ...] = ()

    @classmethod
    def of(cls, step: str, exc: InputError) -> Finding:
        """The error finding of an :class:`InputError` (its file, sites and columns kept)."""
        return cls("error", step, str(exc), exc.file, tuple(exc.sites), tuple(exc.columns))


class PreflightError(InputError):
    """The pre-flight found errors: the run does not start. ``findings`` lists all of them."""

    def __init__(self, findings: Sequence[Finding]) -> None:
        errors = [f for f in findings if f.level == "error"]
        if len(errors) == 1:
            text = errors[0].message
        else:
            text = (f"{len(errors)} problems must be fixed before the analyses can run:\n"
                    + "\n".join(f"  {i}. {f.message}" for i, f in enumerate(errors, 1)))
        files = [f.file for f in errors if f.file]
        super().__init__(text, file=files[0] if len(set(files)) == 1 else None,
                         sites=list(dict.fromkeys(s for f in errors for s in f.sites)),
                         columns=list(dict.fromkeys(c for f in errors for c in f.columns)))
        self.findings = tuple(findings)


#: Checks of the resources a run needs (memory, time), called at the end of every pre-flight
#: with the prepared context; each adds findings with :meth:`Context.warn` or raises
#: :class:`InputError`. The place for checks that depend on the size of the job, not its
#: inputs.
def memory_check(ctx: Context) -> None:
    """Refuse a run that will not fit in this machine's memory (:mod:`._memory`)."""
    from ._memory import check_memory

    if getattr(ctx.survey, "community", None) is None:
        return  # a context without a survey (steps run on results given by hand)
    check_memory(ctx, ctx.survey)  # reads the context's settings and hypotheses


RESOURCE_CHECKS: list[StepFunction] = [memory_check]


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
    #: The pre-flight of the step's inputs: raises InputError (an error), Skip (not run, for a
    #: reason of the data) or adds warnings; None when the step has nothing to check.
    check: StepFunction | None = None
    #: A cheap step that the pre-flight runs for real (it prepares what later checks need).
    prepares: bool = False


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


def _todo(ctx: Context, steps: Sequence[Step]) -> list[Step]:
    return [s for s in steps if s.setting is None or ctx.settings.get(s.setting, True)]


def _asked(ctx: Context, step: Step) -> bool:
    """Whether the project file itself switches ``step`` on (not only by default)."""
    return step.setting is not None and step.setting in ctx.given


def preflight(ctx: Context, steps: Sequence[Step]) -> list[Finding]:
    """Check the whole job before any analysis runs; return what was found.

    The ``prepares`` steps run (an error in one ends the pre-flight: the later checks need its
    result); every other step that would run calls its ``check``. Errors and warnings are
    added to ``ctx.findings``; nothing is raised for an :class:`InputError` of the data, so
    that every problem is listed at once (see :func:`run_steps` for the refusal).
    """
    ctx.checked = True
    for s in _todo(ctx, steps):
        if s.name in ctx.done or s.name in ctx.planned_skips:
            continue
        try:
            if s.prepares:
                start = time.perf_counter()
                s.run(ctx)
                ctx.timings[s.name] = round(time.perf_counter() - start, 3)
                ctx.done.add(s.name)
            elif s.check is not None:
                s.check(ctx)
        except Skip as exc:
            if s.prepares or s.required or _asked(ctx, s):
                why = (f" `{s.setting}` is switched on in the project file: remove it, or fix "
                       "the inputs." if _asked(ctx, s) else "")
                ctx.findings.append(Finding("error", s.name, f"{exc}{why}"))
                if s.prepares:
                    break
            else:
                ctx.planned_skips[s.name] = str(exc)
        except InputError as exc:
            ctx.findings.append(Finding.of(s.name, exc))
            if s.prepares:
                break
        except Exception as exc:
            raise StepError(s.name, exc) from exc
    else:
        for resource in RESOURCE_CHECKS:
            try:
                resource(ctx)
            except InputError as exc:
                ctx.findings.append(Finding.of("resources", exc))
    return ctx.findings


def run_steps(ctx: Context, steps: Sequence[Step]) -> None:
    """Run ``steps`` in the order given (telling an installed progress reporter).

    The pre-flight (:func:`preflight`) runs first unless it already has; when it found an
    error, :class:`PreflightError` is raised before any analysis starts. Then, step by step: a
    step the pre-flight planned as not run is listed in ``ctx.skipped`` with its reason; a
    :class:`Skip`, or an :class:`InputError` of a step that is not ``required``, lists the
    step in ``ctx.skipped`` with its reason; an ``InputError`` of a required step is raised as
    it is; any other exception is raised as a :class:`StepError` naming the step.
    """
    from ..permutation import current_reporter

    if not ctx.checked:
        preflight(ctx, steps)
    if any(f.level == "error" for f in ctx.findings):
        raise PreflightError(ctx.findings)
    todo = _todo(ctx, steps)
    reporter = current_reporter()
    for i, s in enumerate(todo):
        if reporter is not None:
            reporter("running analyses", i, len(todo))
        if s.name in ctx.done:
            continue
        if s.name in ctx.planned_skips:
            ctx.skipped.append((s.name, ctx.planned_skips[s.name]))
            continue
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
