"""The analysis steps of a run, in the order they run.

Each step reads its settings, calls the analysis functions of the earlier stages, and adds a
section (tables, figures, text) plus sentences for the methods paragraph. Every number in the
report comes from a result object of an analysis function; nothing is computed here except
the arrangement of those results into tables.
"""

from __future__ import annotations

import pandas as pd

from .._errors import InputError, format_items
from ._model import Section
from ._pipeline import Context, Skip, step

__all__: list[str] = []


def _fmt_p(p: float) -> str:
    return f"p = {p:.3g}" if p >= 0.001 else "p < 0.001"


def _section(ctx: Context, key: str) -> Section | None:
    for s in ctx.sections:
        if s.key == key:
            return s
    return None


def _add_figure(ctx: Context, section: Section, name: str, caption: str, function: str,
                *args: object, **kwargs: object) -> None:
    try:
        fig = ctx.figure(function, *args, **kwargs)
    except InputError as exc:
        ctx.skipped.append((f"figure {name}", str(exc)))
        return
    if fig is not None:
        section.figures[name] = fig
        section.captions[name] = caption


# ------------------------------------------------------------------------------- community
METRIC_NAMES = {"bray-curtis": "Bray-Curtis", "jaccard": "Jaccard", "sorensen": "Sørensen",
                "ruzicka": "Růžička", "kulczynski": "Kulczynski", "hellinger": "Hellinger",
                "chord": "chord", "chi-square": "chi-square", "euclidean": "Euclidean",
                "manhattan": "Manhattan", "canberra": "Canberra",
                "morisita-horn": "Morisita-Horn"}


@step("community")
def community_step(ctx: Context) -> None:
    from ..distance import dissimilarity, transform_community

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


# ----------------------------------------------------------------------------- environment
def _analysis_environment(ctx: Context) -> pd.DataFrame:
    """Numeric variables in analysis units: log10 applied where the project asks for it."""
    from ..distance import transform_environment

    env = ctx.survey.environment
    logs = [v for v in ctx.settings["environment.log10"] if v in env.columns]
    if not logs:
        return env
    res = transform_environment(env, {v: "log10" for v in logs})
    ctx.results["log10"] = res
    out = res.table.copy()
    out.columns = [f"log10({c})" if c in logs else c for c in out.columns]
    return out


def _hypothesis_table(ctx: Context, variables: tuple[str, ...]) -> pd.DataFrame:
    """The variables of one hypothesis in analysis units (log10, ilr for compositions)."""
    from ..distance import transform_environment

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


@step("environment")
def environment_step(ctx: Context) -> None:
    from ..distance import environmental_distance

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
    distances = {}
    for name, variables in ctx.hypotheses.items():
        distances[name] = environmental_distance(_hypothesis_table(ctx, variables))
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
        ctx.methods.append(
            "For each hypothesis, environmental distances between sites were Euclidean "
            "distances of its z-scored variables (in the units above).")


@step("geography")
def geography_step(ctx: Context) -> None:
    from ..distance import geographic_distance

    if ctx.survey.locations is None:
        return
    g = geographic_distance(ctx.survey.locations)
    ctx.results["geography"] = g
    ctx.methods.append(
        f"Geographic distances between sites were {g.metric} distances in metres"
        f"{' on the WGS84 ellipsoid (Karney 2013)' if g.metric == 'geodesic' else ''}.")


# ------------------------------------------------------------------------------ ordination
@step("ordination")
def ordination_step(ctx: Context) -> None:
    from ..ordination import nmds, pcoa

    d = ctx.results["community"]
    kind = ctx.settings["analyses.ordination"]
    k = ctx.settings["analyses.dimensions"]
    sec = Section("ordination", "Ordination of the communities")
    if kind == "nmds":
        res = nmds(d, dimensions=k, rng=ctx.rng("nmds"))
        sec.paragraphs.append(
            f"Non-metric multidimensional scaling in {k} dimensions: stress {res.stress:.3f} "
            f"({res.stress_verdict}). {res.n_agreeing} of the starts reached the best solution"
            f"{'' if res.converged else '; the solution did not converge'}.")
        ctx.methods.append(
            f"Sites were ordinated by non-metric multidimensional scaling (Kruskal 1964) in {k} "
            f"dimensions from {len(res.start_stresses)} starts (one from PCoA); the best "
            f"solution had stress-1 = {res.stress:.3f} ({res.stress_verdict.split(':')[0]}).")
        starts = res.table.copy()
        sec.tables["nmds_starts"] = starts
    else:
        res = pcoa(d, dimensions=k)
        prop = res.proportion_explained
        sec.paragraphs.append(
            f"Principal coordinates analysis: the first two axes hold "
            f"{100 * prop.iloc[0]:.1f} % and {100 * prop.iloc[1]:.1f} % of the positive "
            "eigenvalues.")
        ctx.methods.append(
            f"Sites were ordinated by principal coordinates analysis (Gower 1966); axes 1 and 2 "
            f"hold {100 * prop.iloc[0]:.1f} % and {100 * prop.iloc[1]:.1f} % of the variation.")
        sec.tables["pcoa_axes"] = res.table
        sec.shown.append("pcoa_axes")
    ctx.results["ordination"] = res
    scores = res.scores
    sec.tables["site_scores"] = scores
    for c in scores.columns:
        ctx.site_columns[c] = scores[c]
    try:
        taxa = res.taxon_scores(ctx.survey.community)
    except (AttributeError, ImportError):
        try:
            from ..ordination import taxon_scores

            taxa = taxon_scores(res, ctx.survey.community)
        except ImportError:
            taxa = None
    if taxa is not None:
        sec.tables["taxon_scores"] = taxa
    sec.notes.extend(res.notes)
    ctx.sections.append(sec)
    if kind == "nmds":
        _add_figure(ctx, sec, "shepard", "Shepard diagram: distances in the ordination against "
                    "community dissimilarities, with the monotone fit.", "shepard_diagram",
                    res.shepard, stress=res.stress,
                    xlabel=f"{METRIC_NAMES.get(ctx.results['community'].metric, 'Community')} "
                    "dissimilarity")


# ------------------------------------------------------------------------- fitting stage
def _strata(ctx: Context) -> pd.Series | None:
    name = ctx.settings["design.strata"]
    if not name:
        return None
    env = ctx.survey.environment
    if name not in env.columns:
        raise InputError(f"`design.strata` names {name!r}, which the environmental table does "
                         "not have.", columns=[name])
    return env[name]


def _numeric(frame: pd.DataFrame) -> pd.DataFrame:
    keep = [c for c in frame.columns
            if pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(frame[c])]
    return frame.loc[:, keep]


@step("vectors", "analyses.vectors")
def vectors_step(ctx: Context) -> None:
    from ..fitting import fit_vectors

    scores = ctx.results["ordination"].scores
    env = _numeric(ctx.results["environment"])
    if env.shape[1] == 0:
        raise Skip("the environmental table has no numeric variables")
    fit = fit_vectors(scores, env, n_resamples=ctx.n_resamples, rng=ctx.rng("vectors"),
                      strata=_strata(ctx))
    ctx.results["vectors"] = fit
    axes = list(fit.axes)
    table = fit.table.copy()
    table.index.name = "variable"
    raw = fit.arrows(1.0)
    scaled = fit.arrows("auto")
    for a in axes:
        table[f"tip_{a}"] = raw[a]
    for a in axes:
        table[f"plot_{a}"] = scaled[a]
    table["plot_multiplier"] = scaled.attrs["multiplier"]
    sec = Section("vectors", "Environmental variables fitted onto the ordination")
    sec.paragraphs.append(
        "Each variable was regressed on the site scores; the arrow points where the variable "
        "increases fastest and r2 says how well the ordination predicts it. Direction cosines "
        "are in the axis columns, raw arrow tips (cosine x sqrt(r2)) in tip_*, and tips "
        "multiplied by one common factor to fill the plot in plot_*.")
    sig = table[table["pvalue"] <= ctx.settings["output.level"]].sort_values("r2",
                                                                               ascending=False)
    if len(sig):
        sec.paragraphs.append(
            "Strongest fits: " + "; ".join(
                f"{v} (r2 = {row.r2:.2f}, {_fmt_p(row.pvalue)})"
                for v, row in sig.head(5).iterrows()) + ".")
    sec.tables["vector_fits"] = table
    sec.shown.append("vector_fits")
    sec.notes.extend(fit.notes)
    ctx.sections.append(sec)
    ctx.methods.append(
        f"Environmental variables were fitted as vectors onto the first {len(axes)} ordination "
        "axes (Kantvilas & Minchin 1989) and tested by permuting each variable among sites; "
        + "; ".join(f"{v} r2 = {row.r2:.2f} ({_fmt_p(row.pvalue)})"
                    for v, row in fit.table.iterrows()) + " (p-values before the Holm "
        "adjustment given in the table).")


@step("factors", "analyses.factors")
def factors_step(ctx: Context) -> None:
    from ..fitting import fit_factors

    names = list(ctx.settings["environment.factors"])
    env = ctx.survey.environment
    if not names:
        names = [c for c in env.columns if str(env[c].dtype) == "category"
                 and c != ctx.settings["design.strata"]]
    if not names:
        return
    fit = fit_factors(ctx.results["ordination"].scores, env[names],
                      n_resamples=ctx.n_resamples, rng=ctx.rng("factors"), strata=_strata(ctx))
    ctx.results["factors"] = fit
    sec = Section("factors", "Site classes in the ordination")
    sec.paragraphs.append(
        "Class centroids of each categorical variable in the ordination; r2 is the share of the "
        "scores' sum of squares between classes, tested by permuting the class labels.")
    table = fit.table.copy()
    table.index.name = "factor"
    sec.tables["factor_fits"] = table
    sec.tables["factor_centroids"] = fit.centroids
    sec.shown += ["factor_fits", "factor_centroids"]
    sec.notes.extend(fit.notes)
    ctx.sections.append(sec)
    ctx.methods.append(
        "Categorical variables were fitted as class centroids in the ordination and tested by "
        "permuting class labels: " + "; ".join(
            f"{f} r2 = {row.r2:.2f} ({_fmt_p(row.pvalue)})" for f, row in fit.table.iterrows())
        + ".")


@step("biplot")
def biplot_step(ctx: Context) -> None:
    res = ctx.results.get("ordination")
    sec = _section(ctx, "ordination")
    if res is None or sec is None:
        return
    kwargs: dict[str, object] = {"alpha": ctx.settings["output.level"]}
    vec = ctx.results.get("vectors")
    if vec is not None:
        arrows = vec.arrows(1.0)[list(vec.axes)]
        arrows["pvalue"] = vec.table["pvalue"]
        kwargs["arrows"] = arrows
    fac = ctx.results.get("factors")
    if fac is not None:
        kwargs["centroids"] = fac.centroids
        first = fac.table.index[0]
        kwargs["groups"] = ctx.survey.environment[first].astype(object)
    if "taxon_scores" in sec.tables:
        kwargs["taxa"] = sec.tables["taxon_scores"]
    if hasattr(res, "stress"):
        kwargs["stress"] = res.stress
    else:
        kwargs["explained"] = tuple(res.proportion_explained.iloc[:2])
    caption = "Sites in the ordination"
    if vec is not None:
        caption += (", with fitted environmental arrows (faded and dashed when p > "
                    f"{ctx.settings['output.level']})")
    if fac is not None:
        caption += ", class centroids"
    if "taxa" in kwargs:
        caption += " and taxon weighted averages (grey crosses)"
    _add_figure(ctx, sec, "ordination_biplot", caption + ".", "ordination_biplot",
                res.scores, **kwargs)
    # the biplot goes first in the section
    sec.figures = dict(sorted(sec.figures.items(), key=lambda kv: kv[0] != "ordination_biplot"))
