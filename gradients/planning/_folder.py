"""``gradients plan``: a project's pilot survey -> survey power -> a small report folder.

The folder is written by the report's own writer (tables as CSV and one workbook, figures as
PNG and SVG, one HTML page, ``methods.md`` and ``run.json``), through a temporary folder moved
into place when complete.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputError
from ._power import INTERVAL_LEVEL, SurveyPowerResult, survey_power

__all__ = ["plan_outcome", "plan_project"]

HONESTY = (
    "Power depends on the generating model fitted to the pilot: it is the chance of detecting "
    "effects of the size the model holds, with the spread the model holds. A small pilot gives "
    "an uncertain model, and so an uncertain power; effects the pilot over- or under-states "
    "carry straight into these numbers. Treat the smallest number of sites as a guide for "
    "discussion, not a guarantee, and compare the simulated power with the subsamples of the "
    "pilot where both are shown.")


def plan_project(project: Any, *, sites: tuple[int, ...] | None = None,
                 out: str | Path | None = None, force: bool = False,
                 surveys: int | None = None, n_jobs: int = -1) -> Path:
    """Plan the next survey of a project file: power by simulation, written to a folder.

    Parameters
    ----------
    project : str, Path or Project
        The project file; its survey is the pilot, its ``[plan]`` keys set the plan.
    sites : tuple of int, optional
        Numbers of sites (default ``plan.sites``).
    out : str or Path, optional
        The folder to write (default ``plan.folder``).
    force : bool, default False
        Replace an existing plan or report folder once the new one is complete.
    surveys : int, optional
        Surveys per number of sites (default ``plan.surveys``).
    n_jobs : int, default -1
        Threads of the permutation kernels.

    Returns
    -------
    Path
        The folder written.
    """
    from ..report._project import Project, load_project
    from ..report._run import check_hypotheses, read_project_survey, write_report
    from ..report._writers import OutputFolder

    if not isinstance(project, Project):
        project = load_project(project)
    s = dict(project.settings)
    target = Path(out) if out is not None else Path(s["plan.folder"])
    OutputFolder(target, force=force)  # refuse early, before minutes of computation
    if not project.hypotheses:
        raise InputError("The project names no [hypotheses]; a plan asks how many sites it "
                         "takes to detect each of them. Add a [hypotheses] section.")
    survey = read_project_survey(project)
    check_hypotheses(project, survey)
    s["analyses.starts"] = s["plan.starts"]
    start = time.perf_counter()
    result = survey_power(
        survey, project.hypotheses, settings=s,
        n_sites=tuple(sites) if sites is not None else tuple(s["plan.sites"]),
        n_surveys=int(surveys) if surveys is not None else int(s["plan.surveys"]),
        n_resamples=int(s["plan.permutations"]), alpha=float(s["plan.level"]),
        tests=tuple(s["plan.tests"]), target_power=float(s["plan.target"]),
        n_bootstrap=int(s["plan.bootstrap"]), jitter=float(s["plan.jitter"]),
        rng=int(s["permutations.seed"]), n_jobs=n_jobs)
    outcome = plan_outcome(result, title=f"Survey plan: {s['title']}", settings=s,
                           hypotheses=project.hypotheses, survey=survey,
                           seconds=time.perf_counter() - start)
    return write_report(outcome, target, force=force)


def _fmt_share(v: float) -> str:
    return f"{100 * v:.0f} %"


def plan_outcome(result: SurveyPowerResult, *, title: str, settings: dict[str, Any],
                 hypotheses: dict[str, tuple[str, ...]], survey: Any = None,
                 seconds: float = 0.0) -> Any:
    """The report content of a plan: sections, methods paragraph and run record."""
    from ..plot import power_curve
    from ..report._model import Outcome, Section
    from ..report._run import _jsonable, software_versions

    table = result.table.set_index("hypothesis")  # one index column: readable in the page
    needed = result.smallest_n
    sec = Section("plan", "How many sites it takes")
    for (h, t), row in needed.iterrows():
        if np.isfinite(row["n_sites"]):
            sec.paragraphs.append(
                f"{h} ({t.replace('_', ' ')}): {int(row['n_sites'])} sites reach the target "
                f"power of {_fmt_share(result.target_power)}.")
        else:
            sec.paragraphs.append(
                f"{h} ({t.replace('_', ' ')}): no planned size reaches "
                f"{_fmt_share(result.target_power)}; with {int(row['largest_simulated'])} sites "
                f"the power is {_fmt_share(row['power_at_largest'])}.")
    sec.paragraphs.append(HONESTY)
    sec.tables["power"] = table
    sec.tables["sites_needed"] = needed.reset_index("test")
    sec.shown += ["power", "sites_needed"]
    sec.display["power"] = ["test", "n_sites", "method", "power", "power_low", "power_high",
                            "false_detection"] + (
        ["bootstrap_low", "bootstrap_high"] if "bootstrap_low" in table.columns else [])
    for t in result.tests:
        fig = power_curve(result, test=t).get_figure(root=True)
        name = f"power_curve_{t}"
        sec.figures[name] = fig
        sec.captions[name] = (
            f"Power of the {t.replace('_', ' ')} test against the number of sites: lines "
            "from surveys simulated from the generating model, bands their 95 % intervals"
            + (", hollow diamonds subsamples of the pilot" if
               (result.table["method"] == "subsample").any() else "")
            + "; dashed: the target power; dotted: the level, the power when there is "
            "nothing to find.")
    sec.notes.extend(result.notes)
    model = Section("model", "The generating model")
    model.paragraphs.append(
        "The parameters the surveys were simulated from: for each taxon and predictor the "
        "linear and quadratic coefficients of its log mean count (after shrinkage towards no "
        "effect), and for each taxon its intercept, overdispersion and the largest mean drawn.")
    model.tables["model_coefficients"] = result.model.table.set_index("taxon")
    model.tables["model_taxa"] = result.model.taxa_table
    model.shown.append("model_taxa")
    if result.bootstrap is not None:
        model.tables["bootstrap_power"] = result.bootstrap.set_index("resample")
    methods = methods_text(result, settings)
    n_sites = int(survey.community.shape[0]) if survey is not None else 0
    n_taxa = int(survey.community.shape[1]) if survey is not None else len(result.model.taxa)
    run_info = {
        "software": software_versions(),
        "command": ["gradients", "plan"],
        # the page's summary reads `permutations.count`: in a plan, the permutations per test
        "parameters": _jsonable({**settings, "permutations.count": result.n_resamples}),
        "hypotheses": _jsonable(hypotheses),
        "seed": settings.get("permutations.seed"),
        "permutations": result.n_resamples,
        "survey": {"n_sites": n_sites, "n_taxa": n_taxa,
                   "n_variables": int(survey.environment.shape[1]) if survey is not None else 0,
                   "locations": survey is not None and survey.locations is not None},
        "plan": {"surveys": result.n_surveys, "tests": list(result.tests),
                 "target": result.target_power, "level": result.alpha,
                 "bootstrap": result.n_bootstrap},
        "decisions": [],
        "skipped": [],
        "timings": {"simulation": round(seconds, 3)},
    }
    summary = [p for p in sec.paragraphs if p is not HONESTY]
    return Outcome(title=title, sections=[sec, model], methods=methods, run_info=run_info,
                   summary=summary)


def methods_text(result: SurveyPowerResult, settings: dict[str, Any]) -> str:
    """The methods paragraph of a plan: what the simulation assumed and how it was run."""
    from .. import __version__

    sizes = sorted(set(result.table["n_sites"]))
    sub = sorted(set(result.table.loc[result.table["method"] == "subsample", "n_sites"]))
    tests = ", ".join(t.replace("_", " ") for t in result.tests)
    parts = [
        f"Survey power was estimated by simulation with gradients {__version__}. "
        + " ".join(result.model.notes),
        f"For each of {', '.join(map(str, sizes))} sites, {result.n_surveys} surveys were "
        f"simulated and analysed as the report analyses the project (the {tests} "
        f"test{'s' if len(result.tests) > 1 else ''}, with the project's controls, "
        f"{result.n_resamples} permutations each, without the spatially constrained null), "
        "each test stopped early once its p-value could no longer reach the level "
        "(Besag & Clifford 1991). Power is the share of surveys detecting a hypothesis at "
        f"p <= {result.alpha:g}, with {100 * INTERVAL_LEVEL:.0f} % Wilson score intervals "
        "(Wilson 1927); the false detection rate is the same share in twin surveys whose "
        "counts were drawn with every hypothesis' effect set to zero. The report's verdicts "
        "also ask for the spatially constrained p-value, which has somewhat less power: the "
        "power given here is an upper bound on the chance that a report on the new survey "
        "calls a hypothesis supported.",
    ]
    if sub:
        parts.append(f"At {', '.join(map(str, sub))} sites the pilot itself was also "
                     f"subsampled without replacement {result.n_surveys} times.")
    if result.n_bootstrap:
        parts.append(f"The model was refitted to {result.n_bootstrap} bootstrap resamples of "
                     "the pilot's sites, and the 10th to 90th percentiles of power across them "
                     "are given as the bootstrap spread.")
    parts.append(f"The seed was {settings.get('permutations.seed')}. " + HONESTY)
    return "\n\n".join(parts) + "\n"
