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
from .._pipeline import Context
from ._common import METRIC_NAMES

__all__ = ["community_step", "environment_step", "geography_step"]


def community_step(ctx: Context) -> None:
    from ...distance import dissimilarity, transform_community

    community = ctx.survey.community
    _check_community(community)
    twins = community.index[community.duplicated(keep=False)]
    if len(twins):
        ctx.warn("community", f"Sites {format_items([str(t) for t in twins])} have identical "
                 "communities (their dissimilarity is 0). They are kept; check "
                 "`[inputs] community` if the rows were copied by mistake.")
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


def _check_community(community: pd.DataFrame) -> None:
    """Abundances too large to sum, and a community with fewer than three different sites,
    are errors naming the taxa or the sites."""
    x = community.to_numpy(dtype=float)
    big = np.abs(x) > LARGEST_VALUE
    if big.any():
        taxa = [str(c) for c in community.columns[big.any(axis=0)]]
        raise InputError(
            f"The community table has abundances too large to analyse (above "
            f"{LARGEST_VALUE:g}) for {format_items(taxa)}: their sums overflow. Correct the "
            "values in `[inputs] community`.", columns=taxa)
    distinct = community.drop_duplicates()
    if len(distinct) < 3:
        raise InputError(
            f"The community table has only {len(distinct)} different site(s) among its "
            f"{len(community)}: every analysis compares sites by their communities, and needs "
            "at least 3 that differ. Check `[inputs] community` (the rows may have been "
            "copied).", sites=[str(i) for i in community.index])


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


def _composition_plan(ctx: Context, variables: tuple[str, ...],
                      key: str = "the hypothesis") -> dict[object, str]:
    """The transforms of one hypothesis' variables: log10 where asked, ilr for compositions.

    A composition only part of which the hypothesis names is an error (its parts enter
    together as log-ratios), raised by the pre-flight with the keys to change.
    """
    plan: dict[object, str] = {}
    for v in variables:
        if v in ctx.settings["environment.log10"]:
            plan[v] = "log10"
    for comp in ctx.settings["environment.compositions"]:
        parts = tuple(p for p in comp if p in variables)
        if parts:
            if len(parts) != len(comp):
                rest = [p for p in comp if p not in parts]
                raise InputError(
                    f"`environment.compositions` lists {list(comp)}, but {key} names only "
                    f"{format_items(parts)}: the parts of a composition enter together as "
                    f"log-ratios. Add {format_items(rest)} to {key}, or remove the "
                    "composition from `environment.compositions`.",
                    columns=list(comp))
            plan[parts] = "ilr"
    return plan


def _hypothesis_table(ctx: Context, variables: tuple[str, ...],
                      key: str = "the hypothesis") -> pd.DataFrame:
    """The variables of one hypothesis in analysis units (log10, ilr for compositions)."""
    from ...distance import transform_environment

    env = ctx.survey.environment
    plan = _composition_plan(ctx, variables, key)
    frame = env.loc[:, list(variables)]
    if not plan:
        return frame
    return transform_environment(frame, plan).table


#: Largest magnitude of an environmental value: z-scores and distances square and sum the
#: values, and a square of a number above about 1e154 overflows double precision.
LARGEST_VALUE = 1e100


def _check_values(ctx: Context, names: list[str]) -> None:
    """Values too large for the sums of squares of z-scores and distances are an error."""
    env = ctx.survey.environment
    for v in names:
        if v not in env.columns or not pd.api.types.is_numeric_dtype(env[v]):
            continue
        x = env[v].to_numpy(dtype=float)
        big = np.abs(x) > LARGEST_VALUE
        if big.any():
            sites = [str(i) for i in env.index[big]]
            raise InputError(
                f"Column {v!r} of the environmental table has values too large to analyse "
                f"(above {LARGEST_VALUE:g} in size, at site(s) {format_items(sites)}): their "
                "squares overflow. Correct the values, or give the column in a larger unit "
                "(`[environment.units]`).", sites=sites, columns=[v])


def _check_log10(ctx: Context) -> None:
    env = ctx.survey.environment
    text = [v for v in ctx.settings["environment.log10"]
            if v in env.columns and not pd.api.types.is_numeric_dtype(env[v])]
    if text:
        raise InputError(
            f"`environment.log10` names {format_items(text)}, which are categorical (text) "
            "columns: only numbers can be taken as log10. Remove them from "
            "`[environment] log10`.", columns=text)


def _check_counts(ctx: Context, name: str, table: pd.DataFrame, key: str) -> None:
    """A variable that cannot tell any two sites apart, or tells every pair apart equally,
    counts for nothing in an environmental distance: an error naming it."""
    for col in table.columns:
        x = table[col]
        values = x.dropna()
        if pd.api.types.is_numeric_dtype(x):
            finite = values.to_numpy(dtype=float)
            finite = finite[np.isfinite(finite)]
            if finite.size and (np.ptp(finite) == 0
                                or np.ptp(finite) <= 1e-12 * np.max(np.abs(finite))):
                raise InputError(
                    f"In {key}, {col!r} has the same value at every site with a value (in "
                    "analysis units): it counts for nothing in the environmental distance of "
                    f"{name!r}. Remove it from {key}.", columns=[str(col)])
            continue
        n_classes = values.nunique()
        if len(values) > 2 and n_classes in (1, len(values)):
            how = ("one class at every site" if n_classes == 1 else
                   "a different class at every site")
            raise InputError(
                f"In {key}, {col!r} is categorical with {how}: it counts for nothing in the "
                f"environmental distance of {name!r} (every pair of sites compares the same "
                f"way). Remove it from {key}.", columns=[str(col)])


def _close_compositions(ctx: Context) -> None:
    """The one rule for compositions: the parts of each sum to its total at every site.

    Sites outside the tolerance are an error naming them, unless
    ``[environment] renormalise_compositions = true`` (then recorded in the input
    decisions); zero parts replaced before the log-ratios are recorded too.
    """
    from ...data._compositions import DEFAULT_TOLERANCE, check_closure
    from ...distance import transform_environment

    env = ctx.survey.environment
    total = float(ctx.settings.get("environment.composition_total") or 100.0)
    renormalise = bool(ctx.settings["environment.renormalise_compositions"])
    extra = ctx.results.setdefault("input_decisions", [])
    for comp in ctx.settings["environment.compositions"]:
        cols = [p for p in comp if p in env.columns]
        if len(cols) != len(comp):
            continue  # a missing column is named by the check of the project's names
        text = [p for p in cols if not pd.api.types.is_numeric_dtype(env[p])]
        if text:
            raise InputError(f"`environment.compositions` names {format_items(text)}, which "
                             "are categorical (text) columns; the parts of a composition are "
                             "amounts. Fix `environment.compositions`.", columns=text)
        what = ", ".join(comp)
        try:
            _, decision = check_closure(
                env.loc[:, cols], total=total, tolerance=DEFAULT_TOLERANCE * total / 100.0,
                renormalise=renormalise, what=f"composition {what}",
                key="[environment] renormalise_compositions = true")
        except InputError as exc:
            raise InputError(
                f"`environment.compositions`: {exc} The total is set by `[environment] "
                f"composition_total` (now {total:g}; 1 for proportions).", sites=exc.sites,
                columns=exc.columns) from None
        if decision is not None:
            extra.append(decision)
        res = transform_environment(env.loc[:, cols], {tuple(cols): "ilr"})
        for note in res.notes:
            if "replaced multiplicatively" in note:
                extra.append(f"Composition {what}: {note}.")


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
    _check_log10(ctx)
    _check_values(ctx, list(env.columns))
    _close_compositions(ctx)
    ctx.results["environment"] = _analysis_environment(ctx)
    logs = set(ctx.settings["environment.log10"])
    ctx.results["analysis_names"] = {c: (f"log10({c})" if c in logs else c) for c in env.columns}
    distances, tables = {}, {}
    for name, variables in ctx.hypotheses.items():
        tables[name] = _hypothesis_table(ctx, variables, f"`hypotheses.{name}`")
        _check_counts(ctx, name, tables[name], f"`hypotheses.{name}`")
        distances[name] = environmental_distance(tables[name])
    ctx.results["hypothesis_tables"] = tables  # analysis units (the survey planner's model)
    cov = ctx.settings["design.covariables"]
    if cov:
        table = _hypothesis_table(ctx, tuple(cov), "`design.covariables`")
        _check_counts(ctx, "the covariables", table, "`design.covariables`")
        distances_cov = environmental_distance(table)
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
        raise InputError("Every site has the same location, so all distances between sites are "
                         "zero and no spatial analysis can run. Check the coordinates in "
                         "`[inputs] locations` (or the coordinate columns), or remove "
                         "`locations` from [inputs] to run without space.",
                         file=str(ctx.settings.get("inputs.locations") or "") or None)
    km = DistanceMatrix(g.condensed / 1000.0, g.labels, metric=g.metric, validate=False)
    ctx.results["geography"] = km
    ctx.results["site_points"] = found.locations
    if found.network is not None:
        ctx.results["network"] = found.network
    path = ctx.settings.get("geography.network")
    ctx.methods.append(found.sentence(Path(path).name if path is not None else None))
