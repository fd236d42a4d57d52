"""Community, environment and geography steps: the distance matrices every later step uses.

The community step computes the community dissimilarities (after the transform the project
asks for); the environment step puts each hypothesis' variables in analysis units (log10,
isometric log-ratios of compositions) and computes one environmental distance matrix per
hypothesis and for the covariables; the geography step computes the distance between sites in
km that the project's ``[geography]`` keys ask for (geodesic, straight-line or in-stream; see
:mod:`gradients.report._geography`), the one matrix every spatial analysis reads.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..._errors import InputError, format_items
from .._pipeline import Context, Skip
from ._common import METRIC_NAMES

__all__ = ["community_step", "environment_step", "geography_step"]


def community_step(ctx: Context) -> None:
    from ...distance import dissimilarity, transform_community

    community = ctx.survey.community
    transform = ctx.settings["community.transform"]
    metric = ctx.settings["community.dissimilarity"]
    table = community
    if transform != "none":
        res = transform_community(community, transform)
        table = res.table
        ctx.methods.append(res.description.rstrip(".") + ".")
    d = dissimilarity(table, metric, transform=None if transform == "none" else transform)
    ctx.results["community"] = d
    why = {
        "bray-curtis": "it ignores joint absences and weighs abundant taxa by their abundance "
                       "(Bray & Curtis 1957)",
        "jaccard": "it compares presence and absence only and ignores joint absences",
        "sorensen": "it compares presence and absence only, counting shared taxa twice",
        "hellinger": "it is Euclidean on square-root relative abundances and suits linear "
                     "ordination (Legendre & Gallagher 2001)",
    }.get(metric, "it was chosen in the project file")
    ctx.methods.append(
        f"Community dissimilarities between the {d.n} sites were "
        f"{METRIC_NAMES.get(metric, metric)} dissimilarities"
        f"{' of the transformed table' if transform != 'none' else ''}, chosen because {why}."
    )


def _analysis_environment(ctx: Context) -> pd.DataFrame:
    """Numeric variables in analysis units: log10 applied where the project asks for it."""
    from ...distance import transform_environment

    env = ctx.survey.environment
    logs = [v for v in ctx.settings["environment.log10"] if v in env.columns]
    if not logs:
        return env
    try:
        res = transform_environment(env, {v: "log10" for v in logs})
    except InputError as exc:
        if "log10 needs positive values" not in str(exc):
            raise
        head = str(exc).split(". Pass offset=")[0]
        raise InputError(
            f"{head}. Remove the column from `[environment] log10`, or correct those values in "
            "the environmental table (a value below detection is written as '<limit').",
            sites=exc.sites, columns=exc.columns) from None
    ctx.results["log10"] = res
    out = res.table.copy()
    out.columns = [f"log10({c})" if c in logs else c for c in out.columns]
    return out


def _hypothesis_table(ctx: Context, variables: tuple[str, ...]) -> pd.DataFrame:
    """The variables of one hypothesis in analysis units (log10, ilr for compositions)."""
    from ...distance import transform_environment

    env = ctx.survey.environment
    plan: dict[object, str] = {}
    for v in variables:
        if v in ctx.settings["environment.log10"]:
            plan[v] = "log10"
    for comp in ctx.settings["environment.compositions"]:
        parts = tuple(p for p in comp if p in variables)
        if parts:
            if len(parts) != len(comp):
                raise Skip(f"the composition {list(comp)} is split between hypotheses; put all "
                           "its parts in one hypothesis")
            plan[parts] = "ilr"
    frame = env.loc[:, list(variables)]
    if not plan:
        return frame
    return transform_environment(frame, plan).table


def environment_step(ctx: Context) -> None:
    from ...distance import environmental_distance

    env = ctx.survey.environment
    wanted = [v for vs in ctx.hypotheses.values() for v in vs]
    wanted += list(ctx.settings["design.covariables"])
    absent = [v for v in wanted if v not in env.columns]
    if absent:
        raise InputError(
            f"The project names variable(s) {format_items(absent)} that are not in the "
            f"environmental table (it has {format_items(env.columns)}). Fix [hypotheses] or "
            "`design.covariables`.", columns=absent)
    ctx.results["environment"] = _analysis_environment(ctx)
    logs = set(ctx.settings["environment.log10"])
    ctx.results["analysis_names"] = {c: (f"log10({c})" if c in logs else c) for c in env.columns}
    distances, tables = {}, {}
    for name, variables in ctx.hypotheses.items():
        tables[name] = _hypothesis_table(ctx, variables)
        distances[name] = environmental_distance(tables[name])
    ctx.results["hypothesis_tables"] = tables  # analysis units (the survey planner's model)
    cov = ctx.settings["design.covariables"]
    if cov:
        distances_cov = environmental_distance(_hypothesis_table(ctx, tuple(cov)))
        ctx.results["covariables"] = distances_cov
    ctx.results["hypothesis_distances"] = distances
    if ctx.settings["environment.log10"]:
        ctx.methods.append(
            f"{format_items(ctx.settings['environment.log10'], quote=False)} were taken as "
            "log10 before analysis (right-skewed concentrations).")
    for comp in ctx.settings["environment.compositions"]:
        ctx.methods.append(
            f"The composition {', '.join(comp)} was expressed as isometric log-ratio "
            "coordinates (Egozcue et al. 2003) because its parts sum to a constant.")
    if distances:
        every = {**distances, **({"covariables": ctx.results["covariables"]} if cov else {})}
        gower = [n for n, d in every.items() if d.metric == "gower"]
        euclid = [n for n in every if n not in gower]
        if euclid:
            which = "each hypothesis" if not gower else format_items(euclid, quote=False)
            ctx.methods.append(
                f"For {which}, environmental distances between sites were Euclidean distances "
                "of the z-scored variables (in the units above).")
        if gower:
            ctx.methods.append(
                f"For {format_items(gower, quote=False)} (with categorical variables), "
                "environmental distances were Gower's (1971) dissimilarity, which compares "
                "numbers by their range and categories by match or mismatch.")


def geography_step(ctx: Context) -> None:
    """The distance between sites, in km: the one matrix every spatial analysis uses."""
    from ...distance import DistanceMatrix
    from .._geography import site_distances

    if ctx.survey.locations is None:
        return
    found = site_distances(ctx.settings, ctx.survey.locations)
    g = found.metres
    if not np.any(g.condensed > 0):
        raise Skip("every site has the same location, so all distances between sites are "
                   "zero: space was left out of every analysis. Check the coordinates in "
                   "`[inputs] locations` (or the coordinate columns).")
    km = DistanceMatrix(g.condensed / 1000.0, g.labels, metric=g.metric, validate=False)
    ctx.results["geography"] = km
    ctx.results["site_points"] = found.locations
    if found.network is not None:
        ctx.results["network"] = found.network
    path = ctx.settings.get("geography.network")
    ctx.methods.append(found.sentence(Path(path).name if path is not None else None))
