"""The analysis steps of a run, in the order they run.

Each step reads its settings, calls the analysis functions of the earlier stages, and adds a
section (tables, figures, text) plus sentences for the methods paragraph. Every number in the
report comes from a result object of an analysis function; nothing is computed here except
the arrangement of those results into tables.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ..permutation import adjust_pvalues
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


#: Order of the sections in the report (steps run in dependency order, which differs).
SECTION_ORDER = ("verdicts", "planted_truth", "ordination", "vectors", "surfaces", "factors",
                 "mantel", "partial_mantel", "regression", "correlogram", "distance_decay")


def order_sections(sections: list[Section]) -> list[Section]:
    rank = {k: i for i, k in enumerate(SECTION_ORDER)}
    return sorted(sections, key=lambda s: rank.get(s.key, len(rank)))


# ------------------------------------------------------------------------------- community
METRIC_NAMES = {"bray-curtis": "Bray-Curtis", "jaccard": "Jaccard", "sorensen": "Sørensen",
                "ruzicka": "Růžička", "kulczynski": "Kulczynski", "hellinger": "Hellinger",
                "chord": "chord", "chi-square": "chi-square", "euclidean": "Euclidean",
                "manhattan": "Manhattan", "canberra": "Canberra",
                "morisita-horn": "Morisita-Horn"}


@step("community", required=True)
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


@step("environment", required=True)
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
    logs = set(ctx.settings["environment.log10"])
    ctx.results["analysis_names"] = {c: (f"log10({c})" if c in logs else c) for c in env.columns}
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


@step("geography", required=True)
def geography_step(ctx: Context) -> None:
    from ..distance import geographic_distance

    if ctx.survey.locations is None:
        return
    from ..distance import DistanceMatrix

    g = geographic_distance(ctx.survey.locations)
    if not np.any(g.condensed > 0):
        raise Skip("every site has the same location, so all distances between sites are "
                   "zero: space was left out of every analysis. Check the coordinates in "
                   "`[inputs] locations` (or the coordinate columns).")
    km = DistanceMatrix(g.condensed / 1000.0, g.labels, metric=g.metric, validate=False)
    ctx.results["geography"] = km
    ctx.methods.append(
        f"Geographic distances between sites were {g.metric} distances in kilometres"
        f"{' on the WGS84 ellipsoid (Karney 2013)' if g.metric == 'geodesic' else ''}.")


# ------------------------------------------------------------------------------ ordination
@step("ordination", required=True)
def ordination_step(ctx: Context) -> None:
    from ..ordination import nmds, pcoa

    d = ctx.results["community"]
    kind = ctx.settings["analyses.ordination"]
    k = ctx.settings["analyses.dimensions"]
    sec = Section("ordination", "Ordination of the communities")
    if kind == "nmds":
        res = nmds(d, dimensions=k, starts=ctx.settings["analyses.starts"], rng=ctx.rng("nmds"))
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
    sec.display["vector_fits"] = [*axes, "r2", "pvalue", "pvalue_adjusted", "n"]
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


# -------------------------------------------------------------------------- matrix stage
def _predictors(ctx: Context) -> dict[str, object]:
    """Every predictor distance matrix by name: hypotheses, covariables, geography."""
    out: dict[str, object] = dict(ctx.results.get("hypothesis_distances", {}))
    if "covariables" in ctx.results:
        out["covariables"] = ctx.results["covariables"]
    if "geography" in ctx.results:
        out["geography"] = ctx.results["geography"]
    return out


def _spatial_kwargs(ctx: Context) -> dict[str, object]:
    geo = ctx.results.get("geography")
    if geo is None or ctx.settings["design.strata"]:
        return {}
    return {"spatial_null": geo, "n_surrogates": ctx.n_resamples}


def _spatial_reason(ctx: Context) -> str:
    """Why the report ran no spatially constrained test, in project-file words."""
    if ctx.results.get("geography") is not None and ctx.settings["design.strata"]:
        return ("Spatial autocorrelation was not checked: with `design.strata` set, the "
                "spatially constrained null (Moran spectral randomisation), which does not keep "
                "strata, is not computed. When both matrices are spatially structured, Mantel "
                "p-values are too small (Guillot & Rousset 2013); read them with care.")
    return ("Spatial autocorrelation was not checked because no usable site locations were "
            "given (`[inputs] locations`). When both matrices are spatially structured, Mantel "
            "p-values are too small (Guillot & Rousset 2013); add locations for a check and a "
            "spatially constrained p-value.")


def _attributed_notes(results: dict[str, Any], ctx: Context | None = None) -> list[str]:
    """Notes of several results, each said once, prefixed by the names it applies to.

    A note that every result carries is given without a prefix. With ``ctx``, the analyses'
    advice to pass locations to a Python argument is said in project-file words instead.
    """
    owners: dict[str, list[str]] = {}
    for name, res in results.items():
        for note in res.notes:
            if ctx is not None and note.startswith("Spatial autocorrelation was not checked"):
                note = _spatial_reason(ctx)
            names = owners.setdefault(note, [])
            if name not in names:
                names.append(name)
    return [note if len(names) == len(results) else f"{', '.join(names)}: {note}"
            for note, names in owners.items()]


@step("mantel", "analyses.mantel")
def mantel_step(ctx: Context) -> None:
    from ..matrix import mantel

    community = ctx.results["community"]
    preds = _predictors(ctx)
    preds.pop("covariables", None)
    if not preds:
        return
    rows = []
    results = {}
    for name, d in preds.items():
        spatial = _spatial_kwargs(ctx) if name != "geography" else {}
        res = mantel(d, community, n_resamples=ctx.n_resamples, rng=ctx.rng(f"mantel:{name}"),
                     strata=_strata(ctx), **spatial)
        results[name] = res
        rows.append({"predictor": name, "statistic": res.statistic, "pvalue": res.pvalue,
                     "pvalue_spatial": res.pvalue_spatial, "method": res.method,
                     "n_sites": res.n_sites, "n_pairs": res.n_pairs,
                     "n_resamples": res.n_resamples, "exact": res.exact})
    ctx.results["mantel"] = results
    table = pd.DataFrame(rows).set_index("predictor")
    if table["pvalue_spatial"].isna().all():
        table = table.drop(columns="pvalue_spatial")
    sec = Section("mantel", "Mantel tests: community turnover against each predictor")
    sec.paragraphs.append(
        "Correlation (Mantel r) between community dissimilarity and the environmental distance "
        "of each hypothesis, and geographic distance, each on its own. A positive r means "
        "sites that differ more in the predictor differ more in their communities.")
    if "pvalue_spatial" in table.columns:
        sec.paragraphs.append(
            "pvalue_spatial is the p-value against a spatially constrained null (Moran "
            "spectral randomisation of the predictor, Wagner & Dray 2015), which keeps the "
            "spatial structure of the data; it guards against the too-small p-values that "
            "spatial autocorrelation gives ordinary Mantel tests.")
    sec.tables["mantel"] = table
    sec.shown.append("mantel")
    sec.notes.extend(_attributed_notes(results, ctx))
    ctx.sections.append(sec)
    ctx.methods.append(
        "Mantel tests (Mantel 1967; Pearson r, sites permuted) of community dissimilarity "
        "against each predictor gave " + "; ".join(
            f"{n} r = {r.statistic:.3f} ({_fmt_p(r.pvalue)}"
            + (f", spatially constrained {_fmt_p(r.pvalue_spatial)}"
               if r.pvalue_spatial is not None else "") + ")"
            for n, r in results.items()) + ".")


@step("partial_mantel", "analyses.partial_mantel")
def partial_mantel_step(ctx: Context) -> None:
    from ..matrix import partial_mantel

    community = ctx.results["community"]
    hyp = ctx.results.get("hypothesis_distances", {})
    preds = _predictors(ctx)
    if not hyp or len(preds) < 2:
        return
    rows = []
    results = {}
    for name, d in hyp.items():
        controls = {k: v for k, v in preds.items() if k != name}
        res = partial_mantel(d, community, controls, permute="residuals",
                             n_resamples=ctx.n_resamples, rng=ctx.rng(f"partial:{name}"),
                             strata=_strata(ctx), **_spatial_kwargs(ctx))
        results[name] = res
        rows.append({"hypothesis": name, "controls": ", ".join(res.controls),
                     "statistic": res.statistic, "r_simple": res.r_xy, "pvalue": res.pvalue,
                     "pvalue_spatial": res.pvalue_spatial, "permute": res.permute,
                     "n_resamples": res.n_resamples})
    ctx.results["partial_mantel"] = results
    table = pd.DataFrame(rows).set_index("hypothesis")
    if table["pvalue_spatial"].isna().all():
        table = table.drop(columns="pvalue_spatial")
    sec = Section("partial_mantel", "Partial Mantel tests: each hypothesis given the others")
    sec.paragraphs.append(
        "Correlation between community dissimilarity and each hypothesis' environmental "
        "distance after the other hypotheses, the covariables and geographic distance are "
        "regressed out of both (r_simple is the correlation before). The residuals of the "
        "hypothesis distance on the controls were permuted (Freedman & Lane 1983), the method "
        "Legendre (2000) recommends for partial Mantel tests.")
    sec.tables["partial_mantel"] = table
    sec.shown.append("partial_mantel")
    sec.notes.extend(_attributed_notes(results, ctx))
    ctx.sections.append(sec)
    ctx.methods.append(
        "Partial Mantel tests (Smouse, Long & Sokal 1986) of each hypothesis controlling for "
        "the others" + (", the covariables" if "covariables" in preds else "")
        + (" and geographic distance" if "geography" in preds else "")
        + ", permuting residuals of the reduced model (Legendre 2000), gave " + "; ".join(
            f"{n} r = {r.statistic:.3f} ({_fmt_p(r.pvalue)})" for n, r in results.items())
        + ".")


@step("regression", "analyses.regression")
def regression_step(ctx: Context) -> None:
    from ..matrix import matrix_regression

    preds = _predictors(ctx)
    if not preds:
        return
    res = matrix_regression(ctx.results["community"], preds, n_resamples=ctx.n_resamples,
                            rng=ctx.rng("regression"), strata=_strata(ctx))
    ctx.results["regression"] = res
    table = res.table.copy()
    table.index.name = "predictor"
    fit = pd.DataFrame({"r2": [res.r2], "pvalue": [res.pvalue], "f_statistic": [res.f_statistic],
                        "intercept": [res.intercept], "n_sites": [res.n_sites],
                        "n_pairs": [res.n_pairs], "n_resamples": [res.n_resamples]},
                       index=pd.Index(["model"], name="fit"))
    sec = Section("regression", "Multiple regression on distance matrices")
    sec.paragraphs.append(
        f"Community dissimilarity regressed on every predictor distance together (Lichstein "
        f"2007): R2 = {res.r2:.3f} ({_fmt_p(res.pvalue)}). std_coefficient is the change in "
        "community dissimilarity, in standard deviations, per standard deviation of the "
        "predictor distance with the others held fixed; each is tested by permuting the "
        "community matrix. A variance inflation factor (vif) above about 5 means the "
        "predictor is hard to separate from the others.")
    sec.tables["matrix_regression"] = table
    sec.tables["matrix_regression_fit"] = fit
    sec.shown.append("matrix_regression")
    sec.notes.extend(res.notes)
    ctx.sections.append(sec)
    ctx.methods.append(
        f"A multiple regression on distance matrices (Lichstein 2007) of community "
        f"dissimilarity on {', '.join(preds)} had R2 = {res.r2:.3f} ({_fmt_p(res.pvalue)}); "
        + "; ".join(f"{n} standardised coefficient {row.std_coefficient:.3f} "
                    f"({_fmt_p(row.pvalue)})" for n, row in res.table.iterrows()) + ".")


@step("correlogram", "analyses.correlogram")
def correlogram_step(ctx: Context) -> None:
    from ..matrix import mantel_correlogram

    geo = ctx.results.get("geography")
    if geo is None:
        raise Skip("no site locations were given")
    res = mantel_correlogram(ctx.results["community"], geo, n_resamples=ctx.n_resamples,
                             rng=ctx.rng("correlogram"), strata=_strata(ctx))
    ctx.results["correlogram"] = res
    table = res.table.copy()
    table.index.name = "class"
    sec = Section("correlogram", "Mantel correlogram: community similarity across distance")
    sec.paragraphs.append(
        "Mantel correlation between community dissimilarity and membership of each class of "
        "geographic distance (Oden & Sokal 1986); positive values mean sites in that class are "
        "more alike than average. p-values are corrected progressively (Holm) from the "
        "shortest class; classes with few pairs are shown but not tested.")
    sec.tables["correlogram"] = table
    sec.shown.append("correlogram")
    sec.notes.extend(res.notes)
    ctx.sections.append(sec)
    fig_table = pd.DataFrame({
        "midpoint": table["midpoint"], "statistic": table["statistic"],
        "pvalue": table["pvalue"], "pvalue_adjusted": table["pvalue_adjusted"],
        "n_pairs": table["n_pairs"], "flagged": ~table["tested"].astype(bool)})
    _add_figure(ctx, sec, "correlogram", "Mantel correlogram; filled marks are significant after "
                "the progressive Holm correction.", "correlogram", fig_table,
                alpha=ctx.settings["output.level"], distance_unit="km")
    tested = table[table["tested"].astype(bool)]
    sig = tested[tested["pvalue_adjusted"] <= ctx.settings["output.level"]]
    ctx.methods.append(
        f"A Mantel correlogram over {len(table)} distance classes (Sturges' rule) found "
        f"{len(sig)} of {len(tested)} tested classes significant after progressive Holm "
        "correction.")


BOUNDED = ("bray-curtis", "jaccard", "sorensen", "ruzicka", "kulczynski", "morisita-horn")


@step("distance_decay", "analyses.distance_decay")
def distance_decay_step(ctx: Context) -> None:
    from ..matrix import distance_decay

    geo = ctx.results.get("geography")
    if geo is None:
        raise Skip("no site locations were given")
    d = ctx.results["community"]
    if d.metric not in BOUNDED:
        raise Skip(f"{d.metric} dissimilarities are not bounded by 1, so 1 - d is not a "
                   "similarity; choose a bounded dissimilarity such as bray-curtis")
    res = distance_decay(d, geo, rng=ctx.rng("distance_decay"), n_boot=ctx.n_resamples)
    ctx.results["distance_decay"] = res
    sec = Section("distance_decay", "Distance decay of community similarity")
    halving = (f"a halving distance of {res.halving:.1f} km (95 % interval "
               f"{res.halving_interval[0]:.1f} to {res.halving_interval[1]:.1f} km, bootstrap "
               "of sites)" if np.isfinite(res.halving) else "no decline (slope not negative)")
    sec.paragraphs.append(
        f"Similarity (1 - dissimilarity) against geographic distance, {res.model} model "
        f"ln S = a + b g (Nekola & White 1999): slope {res.slope:.4f} per km, {halving}. "
        "Intervals come from resampling sites, because pairs of sites are not independent.")
    table = res.table.copy()
    table.index.name = "parameter"
    sec.tables["distance_decay"] = table
    sec.tables["distance_decay_curve"] = res.curve
    sec.shown.append("distance_decay")
    sec.notes.extend(res.notes)
    ctx.sections.append(sec)
    pairs = res.pairs[res.pairs["used"].astype(bool)]
    _add_figure(ctx, sec, "distance_decay", "Community similarity of each pair of sites against "
                "their distance, with the fitted decay curve.", "distance_decay_plot",
                pairs, res.curve,
                halving=float(res.halving) if np.isfinite(res.halving) else None,
                distance_unit="km")
    ctx.methods.append(
        f"Distance decay of similarity was fitted with the {res.model} model (Nekola & White "
        f"1999): slope {res.slope:.4f} per km, {halving}.")


# ---------------------------------------------------------------------------- verdicts
#: Correlation between two predictor distance matrices above which their effects are called
#: hard to separate (common practice for collinearity screening).
COLLINEAR_R = 0.7
#: Fewer sites than this get the small-sample caveat (common practice).
SMALL_N = 20


def _holm(p: pd.Series) -> pd.Series:
    return pd.Series(adjust_pvalues(p.to_numpy(dtype=np.float64), "holm"), index=p.index)


def _predictor_correlations(preds: dict[str, object]) -> pd.DataFrame:
    """Pearson correlations among the predictor matrices' off-diagonal entries (descriptive)."""
    names = list(preds)
    first = preds[names[0]]
    vectors = [first.condensed if n == names[0] else preds[n].align(first).condensed
               for n in names]
    r = np.corrcoef(np.vstack(vectors)) if len(names) > 1 else np.ones((1, 1))
    return pd.DataFrame(r, index=pd.Index(names, name="predictor"), columns=names)


@step("verdicts", "analyses.verdicts")
def verdicts_step(ctx: Context) -> None:
    hyp = ctx.results.get("hypothesis_distances", {})
    if not hyp:
        return
    level = ctx.settings["output.level"]
    partial = ctx.results.get("partial_mantel") or {}
    simple = ctx.results.get("mantel") or {}
    reg = ctx.results.get("regression")
    vec = ctx.results.get("vectors")
    if not partial and not simple and reg is None:
        return
    preds = _predictors(ctx)
    corr = _predictor_correlations(preds)
    n_sites = ctx.results["community"].n
    spatial = []
    geo_mantel = simple.get("geography")
    if geo_mantel is not None and geo_mantel.pvalue <= level:
        spatial.append(f"community turnover rises with geographic distance (Mantel r = "
                       f"{geo_mantel.statistic:.2f}, {_fmt_p(geo_mantel.pvalue)})")
    cg = ctx.results.get("correlogram")
    if cg is not None:
        first = cg.table[cg.table["tested"].astype(bool)].head(1)
        if len(first) and float(first["pvalue_adjusted"].iloc[0]) <= level:
            spatial.append("nearby sites are more alike than average (first correlogram class)")
    rows = []
    for name in hyp:
        row: dict[str, object] = {"hypothesis": name,
                                  "variables": ", ".join(ctx.hypotheses[name])}
        if name in partial:
            r = partial[name]
            row.update({"partial_mantel_r": r.statistic, "partial_mantel_pvalue": r.pvalue})
            if r.pvalue_spatial is not None:
                row["partial_mantel_pvalue_spatial"] = r.pvalue_spatial
            row["controls"] = ", ".join(r.controls)
        elif name in simple:
            r = simple[name]
            row.update({"mantel_r": r.statistic, "mantel_pvalue": r.pvalue, "controls": "none"})
        if reg is not None and name in reg.table.index:
            t = reg.table.loc[name]
            row.update({"regression_std_coefficient": t["std_coefficient"],
                        "regression_pvalue": t["pvalue"], "vif": t["vif"]})
        if vec is not None:
            names = [ctx.results["analysis_names"].get(v, v) for v in ctx.hypotheses[name]]
            names = [v for v in names if v in vec.table.index]
            if names:
                best = vec.table.loc[names, "r2"].idxmax()
                row.update({"best_vector": best, "vector_r2": vec.table.loc[best, "r2"],
                            "vector_pvalue": vec.table.loc[best, "pvalue"]})
        rows.append(row)
    table = pd.DataFrame(rows).set_index("hypothesis")
    pcol = "partial_mantel_pvalue" if "partial_mantel_pvalue" in table else "mantel_pvalue"
    rcol = "partial_mantel_r" if "partial_mantel_r" in table else "mantel_r"
    if pcol in table:
        table.insert(table.columns.get_loc(pcol) + 1, pcol + "_holm", _holm(table[pcol]))
    verdicts, caveats, summary = [], [], []
    for name, row in table.iterrows():
        checks = []
        if pcol in table and pd.notna(row.get(pcol)):
            checks.append(bool(row[pcol + "_holm"] <= level and row[rcol] > 0))
        if "regression_pvalue" in table and pd.notna(row.get("regression_pvalue")):
            checks.append(bool(row["regression_pvalue"] <= level
                               and row["regression_std_coefficient"] > 0))
        if checks and all(checks):
            verdict = "supported"
        elif any(checks):
            verdict = "partly supported"
        else:
            verdict = "not supported"
        notes = []
        if spatial:
            notes.append("spatially structured turnover: Mantel-type p-values may be too small "
                         "(Guillot & Rousset 2013)")
        sp = row.get("partial_mantel_pvalue_spatial")
        if sp is not None and pd.notna(sp) and sp > level and row.get(pcol, 1) <= level:
            notes.append(f"not significant against the spatially constrained null ({_fmt_p(sp)})")
        if "geography" not in preds:
            notes.append("space not controlled (no site locations)")
        if n_sites < SMALL_N:
            notes.append(f"small sample ({n_sites} sites): low power, unstable estimates")
        others = corr.loc[name].drop(name)
        high = others[others.abs() > COLLINEAR_R]
        if len(high):
            notes.append("collinear with " + ", ".join(f"{k} (r = {v:.2f})"
                                                        for k, v in high.items())
                         + ": their effects are hard to separate")
        vif = row.get("vif")
        if vif is not None and pd.notna(vif) and vif > 5 and not len(high):
            notes.append(f"variance inflation factor {vif:.1f}: shares much with the others")
        verdicts.append(verdict)
        caveats.append("; ".join(notes) if notes else "none")
        bits = []
        if pcol in table and pd.notna(row.get(pcol)):
            bits.append(f"{'partial ' if rcol.startswith('partial') else ''}Mantel r = "
                        f"{row[rcol]:.2f}, {_fmt_p(row[pcol])}")
        if "regression_pvalue" in table and pd.notna(row.get("regression_pvalue")):
            bits.append(f"regression coefficient {row['regression_std_coefficient']:.2f}, "
                        f"{_fmt_p(row['regression_pvalue'])}")
        summary.append(f"{name}: {verdict} ({'; '.join(bits)}).")
    table.insert(0, "verdict", verdicts)
    table["caveats"] = caveats
    ctx.results["verdicts"] = table
    ctx.results["summary"] = summary
    sec = Section("verdicts", "Hypothesis verdicts")
    sec.paragraphs.append(
        "Each named hypothesis was tested against community turnover while controlling for the "
        "others and for space. A hypothesis is 'supported' when both the partial Mantel test "
        f"(Holm-adjusted across hypotheses) and its regression coefficient are positive and "
        f"significant at {level}, 'partly supported' when one of them is, and 'not supported' "
        "otherwise. Read the verdicts with their caveats: they describe association in this "
        "survey, not cause, and they are screening evidence for a professional judgement.")
    sec.tables["hypothesis_verdicts"] = table
    sec.tables["predictor_correlations"] = corr
    sec.shown += ["hypothesis_verdicts", "predictor_correlations"]
    sec.display["hypothesis_verdicts"] = [
        "verdict", "partial_mantel_r", "partial_mantel_pvalue_holm",
        "partial_mantel_pvalue_spatial", "mantel_r", "mantel_pvalue_holm",
        "regression_std_coefficient", "regression_pvalue", "best_vector", "vector_r2"]
    sec.notes.extend(f"{name}: {c}." for name, c in zip(table.index, caveats, strict=True)
                     if c != "none")
    if spatial:
        sec.paragraphs.append("Space: " + "; ".join(spatial) + ". Simple and partial Mantel "
                              "tests can then give p-values that are too small; the "
                              "spatially constrained p-values, where given, are the safer "
                              "guide.")
    ctx.sections.insert(0, sec)
    plot_rows = []
    for name, row in table.iterrows():
        if rcol in table and pd.notna(row.get(rcol)):
            plot_rows.append({"hypothesis": name, "method": rcol.replace("_r", "").replace(
                "_", " "), "statistic": row[rcol], "pvalue": row[pcol]})
        if "regression_pvalue" in table and pd.notna(row.get("regression_pvalue")):
            plot_rows.append({"hypothesis": name, "method": "regression (std. coefficient)",
                              "statistic": row["regression_std_coefficient"],
                              "pvalue": row["regression_pvalue"]})
    if plot_rows:
        _add_figure(ctx, sec, "hypotheses", "Effect size of each hypothesis; filled marks are "
                    f"significant at {level} (raw p-values).", "hypothesis_plot",
                    pd.DataFrame(plot_rows), alpha=level, xlabel="Effect size")
    ctx.methods.append(
        "Verdicts per hypothesis: " + " ".join(summary)
        + " Partial Mantel p-values were Holm-adjusted across hypotheses for the verdicts.")


# ------------------------------------------------------------------------ demo: the truth
PLANTED = {
    "contamination": ("strong", "every taxon has a unimodal response to the distance-decaying "
                      "contamination from the Tellmark works"),
    "texture": ("moderate", "every taxon has a unimodal response to the fine fraction "
                "(silt + clay)"),
    "water_and_organic": ("none", "pH and organic matter are pure noise; conductivity follows "
                          "the valley position (and so texture) but has no effect of its own"),
}


@step("planted_truth")
def planted_truth_step(ctx: Context) -> None:
    truth = ctx.results.get("demo")
    if truth is None:
        return
    verdicts = ctx.results.get("verdicts")
    rows = []
    for name, (strength, how) in PLANTED.items():
        if name not in ctx.hypotheses:
            continue
        row: dict[str, object] = {"effect": name, "planted": strength, "how": how}
        if verdicts is not None and name in verdicts.index:
            row["found"] = verdicts.loc[name, "verdict"]
            for col in ("partial_mantel_r", "partial_mantel_pvalue"):
                if col in verdicts:
                    row[col] = verdicts.loc[name, col]
        expected = strength != "none"
        found = str(row.get("found", ""))
        if found:
            row["recovered"] = (found != "not supported") == expected
        rows.append(row)
    geo = (ctx.results.get("mantel") or {}).get("geography")
    rows.append({"effect": "space", "planted": "weak",
                 "how": "two smooth random fields (range 3 km) shift every taxon a little",
                 "found": (f"Mantel r = {geo.statistic:.2f}, {_fmt_p(geo.pvalue)}"
                           if geo is not None else "not tested")})
    fac = ctx.results.get("factors")
    if fac is not None and "habitat" in fac.table.index:
        rows.append({"effect": "habitat", "planted": "weak",
                     "how": "each taxon's log-abundance shifted by N(0, 0.3) per habitat",
                     "found": f"r2 = {fac.table.loc['habitat', 'r2']:.2f}, "
                              f"{_fmt_p(fac.table.loc['habitat', 'pvalue'])}"})
    if not rows:
        return
    sec = Section("planted_truth", "Demo only: what was planted and what was found")
    sec.paragraphs.append(
        "The demo data are invented: a seeded generator (gradients.data.simulate_survey) made "
        "the Corvanne Basin communities respond strongly to contamination, moderately to "
        "texture, weakly to space and habitat, and not at all to pH and organic matter. This "
        "section compares that planted truth with what the analyses found.")
    table = pd.DataFrame(rows).set_index("effect")
    sec.tables["planted_truth"] = table
    sec.shown.append("planted_truth")
    try:
        from ..fitting import fit_vectors

        site = truth.site_truth.loc[ctx.results["ordination"].scores.index,
                                    ["contamination", "fines"]]
        fit = fit_vectors(ctx.results["ordination"].scores, site.astype(float),
                          n_resamples=ctx.n_resamples, rng=ctx.rng("planted"))
        recovered = fit.table[["r2", "pvalue"]].copy()
        recovered.index.name = "planted_gradient"
        sec.tables["planted_gradients_on_ordination"] = recovered
        sec.shown.append("planted_gradients_on_ordination")
        sec.paragraphs.append(
            "The true (unobserved) gradients fitted onto the ordination: "
            + "; ".join(f"{k} r2 = {v.r2:.2f}" for k, v in recovered.iterrows())
            + ". A high r2 means the ordination of the communities alone recovers the planted "
            "gradient.")
    except ImportError:
        pass
    ctx.sections.insert(1 if _section(ctx, "verdicts") is not None else 0, sec)


@step("surfaces", "analyses.surfaces")
def surfaces_step(ctx: Context) -> None:
    from ..fitting import fit_surface

    variables = list(ctx.settings["environment.surfaces"])
    if not variables:
        return
    env = ctx.results["environment"]
    names = ctx.results["analysis_names"]
    scores = ctx.results["ordination"].scores
    rows, lines = [], []
    sec = Section("surfaces", "Smooth surfaces of variables over the ordination")
    sec.paragraphs.append(
        "Each variable modelled as a penalised thin plate regression spline of the first two "
        "axes (Wood 2003), smoothness chosen by restricted maximum likelihood (REML), which "
        "over-fits less often than generalised cross-validation in samples of this size "
        "(Wood 2011). edf near 2 means "
        "a straight arrow describes the variable well; larger values mean a curved response. "
        "The permutation p-value re-selects the smoothness on every permutation; the curvature "
        "p-value asks whether the surface bends more than chance would have it, by permuting "
        "the residuals of the plane (Freedman & Lane 1983), and decides between 'a straight "
        "vector would do' and 'curved response'.")
    fits = {}
    for v in variables:
        column = names.get(v, v)
        if column not in env.columns or not pd.api.types.is_numeric_dtype(env[column]):
            raise InputError(f"`environment.surfaces` names {v!r}, which is not a numeric "
                             "variable of the environmental table.", columns=[v])
        fit = fit_surface(scores, env[column], n_resamples=ctx.n_resamples,
                          rng=ctx.rng(f"surface:{v}"), strata=_strata(ctx), method="reml",
                          grid_size=150)
        fits[column] = fit
        rows.append({"variable": column, "edf": fit.edf,
                     "deviance_explained": fit.deviance_explained, "smoothing": fit.smoothing,
                     "pvalue_approx": fit.pvalue_approx, "pvalue": fit.pvalue,
                     "pvalue_curvature": fit.pvalue_curvature,
                     "n_resamples": fit.n_resamples, "basis_size": fit.basis_size,
                     "verdict": fit.verdict})
        contours = fit.contours()
        contours.insert(0, "variable", column)
        lines.append(contours)
        ctx.site_columns[f"fitted_{column}"] = fit.fitted
        sec.notes.extend(n for n in fit.notes if n not in sec.notes)
        drawn = contours.copy()
        drawn["path"] = drawn.groupby(["level", "line"], sort=False).ngroup()
        _add_figure(ctx, sec, f"surface_{v}", f"Fitted surface of {column} over the "
                    "ordination (contours within the sites' hull), with the sites.",
                    "surface_contours", scores, fit.grid, variable=column, contours=drawn)
    ctx.results["surfaces"] = fits
    table = pd.DataFrame(rows).set_index("variable")
    sec.tables["surface_summary"] = table
    sec.tables["surface_contours"] = pd.concat(lines, ignore_index=True)
    sec.shown.append("surface_summary")
    ctx.sections.append(sec)
    ctx.methods.append(
        "Smooth surfaces (thin plate regression splines, Wood 2003; smoothness by restricted "
        "maximum likelihood, Wood 2011) of " + "; ".join(
            f"{r['variable']} (edf {r['edf']:.1f}, deviance explained "
            f"{100 * r['deviance_explained']:.0f} %, {_fmt_p(r['pvalue'])}"
            + (f"; curvature {_fmt_p(r['pvalue_curvature'])}"
               if np.isfinite(r["pvalue_curvature"]) else "") + ")" for r in rows)
        + " were fitted over the first two axes"
        + ("; curvature was tested by permuting the residuals of the plane (Freedman & Lane "
           "1983)." if any(np.isfinite(r["pvalue_curvature"]) for r in rows) else "."))
