"""One simulated survey, analysed as ``gradients run`` analyses a project.

A survey's environment and locations come from the model's site source and its counts from
the generating model; its distances are then computed by the report's own steps (community,
environment, geography) and the chosen tests are run by the same functions the report steps
call, with the project's controls (the other hypotheses, the covariables, space). The only
differences from a report run: fewer permutations, no spatially constrained null (its
surrogates would multiply the cost), and sequential early stopping where the outcome is
already clear (Besag & Clifford 1991), which never changes whether a test detects.
"""

from __future__ import annotations

from collections.abc import Callable
from types import SimpleNamespace
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError
from ._model import GeneratingModelResult
from ._sites import site_labels

__all__ = ["TESTS", "early_stop_for", "simulated_detections", "subsample_detections"]

Detections = dict[tuple[str, str], bool]


def early_stop_for(alpha: float, n_resamples: int) -> int:
    """The smallest count of extremes ``h`` after which a test cannot reach ``alpha``.

    A run stopped after ``h`` extremes in ``L <= P`` draws has p = h / L >= h / P > alpha, and
    the full run would have p >= (h + 1)/(P + 1) > alpha: stopping never changes a detection.
    """
    return int(np.floor(alpha * n_resamples)) + 1


def _partial_mantel(ctx: Any, alpha: float, early_stop: int, n_jobs: int) -> dict[str, bool]:
    from ..report.steps.matrix import partial_mantel_results

    res = partial_mantel_results(ctx, spatial=False, early_stop=early_stop, n_jobs=n_jobs)
    if not res:
        raise InputError("The partial Mantel test needs something to control for: a second "
                         "hypothesis, covariables or site locations. Add one, or plan with "
                         "tests=(\"mantel\",).")
    return {h: r.pvalue <= alpha for h, r in res.items()}


def _mantel(ctx: Any, alpha: float, early_stop: int, n_jobs: int) -> dict[str, bool]:
    from ..report.steps.matrix import mantel_results

    res = mantel_results(ctx, spatial=False, early_stop=early_stop, n_jobs=n_jobs)
    return {h: res[h].pvalue <= alpha for h in ctx.hypotheses}


def _vectors(ctx: Any, alpha: float, early_stop: int, n_jobs: int) -> dict[str, bool]:
    from ..report.steps.ordination import ordinate, vector_fit

    ctx.results["ordination"] = ordinate(ctx)
    fit = vector_fit(ctx)
    table = fit.table
    column = "pvalue_adjusted" if "pvalue_adjusted" in table.columns else "pvalue"
    names = ctx.results["analysis_names"]
    out = {}
    for h, variables in ctx.hypotheses.items():
        rows = [names.get(v, v) for v in variables if names.get(v, v) in table.index]
        out[h] = bool((table.loc[rows, column] <= alpha).any()) if rows else False
    return out


#: The tests a plan can run: name -> function(ctx, alpha, early_stop, n_jobs) giving one
#: detection per hypothesis. Vector fits: a hypothesis is detected when any of its variables
#: is significant after the report's Holm adjustment.
TESTS: dict[str, Callable[[Any, float, int, int], dict[str, bool]]] = {
    "partial_mantel": _partial_mantel,
    "mantel": _mantel,
    "vectors": _vectors,
}


def _context(model: GeneratingModelResult, environment: pd.DataFrame, locations: Any,
             seed: int, n_resamples: int) -> Any:
    from ..report._pipeline import Context
    from ..report.steps.community import environment_step, geography_step

    survey = SimpleNamespace(community=None, environment=environment, locations=locations,
                             log=())
    ctx = Context(settings=model.settings, hypotheses=model.hypotheses, survey=survey,
                  seed=seed, n_resamples=n_resamples)
    environment_step(ctx)
    if locations is not None:
        geography_step(ctx)
    return ctx


def _detect(ctx: Any, community: pd.DataFrame, tests: tuple[str, ...], alpha: float,
            early_stop: int, n_jobs: int) -> Detections:
    from ..report.steps.community import community_step

    ctx.survey.community = community
    ctx.results.pop("ordination", None)
    community_step(ctx)
    out: Detections = {}
    for t in tests:
        for h, hit in TESTS[t](ctx, alpha, early_stop, n_jobs).items():
            out[(t, h)] = bool(hit)
    return out


def _predictors(model: GeneratingModelResult, ctx: Any) -> np.ndarray:
    tables = dict(ctx.results["hypothesis_tables"])
    if "covariables" in model.groups:
        from ..report.steps.community import _hypothesis_table

        tables["covariables"] = _hypothesis_table(
            ctx, tuple(model.settings["design.covariables"]))
    return model.standardise(tables)


def simulated_detections(model: GeneratingModelResult, n: int, seed: np.random.SeedSequence, *,
                         tests: tuple[str, ...], alpha: float, n_resamples: int,
                         n_jobs: int, null: bool = True) -> tuple[Detections, Detections]:
    """Detections in one survey of ``n`` sites drawn from ``model``, and (when ``null``) in
    its twin: the same sites with counts drawn with every hypothesis' effect set to zero."""
    gen = np.random.default_rng(seed)
    labels = site_labels(n)
    environment, locations = model.sites.draw(n, labels, gen)
    ctx = _context(model, environment, locations, int(gen.integers(0, 2**31)), n_resamples)
    z = _predictors(model, ctx)
    stop = early_stop_for(alpha, n_resamples)
    found = _detect(ctx, model.draw_community(z, labels, gen), tests, alpha, stop, n_jobs)
    if not null:
        return found, {}
    counts = model.draw_community(z, labels, gen, null=tuple(model.hypotheses))
    return found, _detect(ctx, counts, tests, alpha, stop, n_jobs)


def subsample_detections(model: GeneratingModelResult, pilot: Any, n: int,
                         seed: np.random.SeedSequence, *, tests: tuple[str, ...], alpha: float,
                         n_resamples: int, n_jobs: int) -> Detections:
    """Detections in ``n`` pilot sites drawn without replacement (over label-sorted sites)."""
    from ..permutation import site_ranks

    gen = np.random.default_rng(seed)
    labels = pilot.community.index
    ranks = site_ranks(labels)
    by_label = np.argsort(ranks)
    index = np.sort(by_label[gen.choice(len(labels), size=n, replace=False)])
    environment = pilot.environment.iloc[index]
    locations = None if pilot.locations is None else pilot.locations.iloc[index]
    ctx = _context(model, environment, locations, int(gen.integers(0, 2**31)), n_resamples)
    stop = early_stop_for(alpha, n_resamples)
    return _detect(ctx, pilot.community.iloc[index], tests, alpha, stop, n_jobs)
