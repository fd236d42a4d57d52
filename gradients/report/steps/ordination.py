"""Ordination and fitting steps: the ordination, fitted vectors, class centroids, the biplot
and smooth surfaces of variables over the ordination.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..._errors import InputError
from .._model import Section
from .._pipeline import Context, Skip
from ._common import METRIC_NAMES, _add_figure, _fmt_p, _numeric, _section, _strata

__all__ = ["biplot_step", "factors_step", "ordinate", "ordination_check", "ordination_step",
           "surfaces_check", "surfaces_step", "vector_fit", "vectors_check", "vectors_step"]

#: Fewest sites with values a smooth surface is fitted to (the rule of ``fit_surface``).
SURFACE_MIN_SITES = 8


def ordination_check(ctx: Context) -> None:
    """Enough sites for the ordination in the dimensions asked for."""
    n = ctx.results["community"].n
    kind = ctx.settings["analyses.ordination"]
    k = int(ctx.settings["analyses.dimensions"])
    need = k + 2 if kind == "nmds" else k + 1
    if n < need:
        raise InputError(
            f"{'NMDS' if kind == 'nmds' else 'PCoA'} in {k} dimensions needs at least {need} "
            f"sites; the survey has {n}. Lower `[analyses] dimensions`, or add sites.")


def ordinate(ctx: Context) -> object:
    """The ordination of the community dissimilarities the project asks for (NMDS or PCoA)."""
    from ...ordination import nmds, pcoa

    d = ctx.results["community"]
    k = ctx.settings["analyses.dimensions"]
    if ctx.settings["analyses.ordination"] == "nmds":
        from ...permutation._workers import available_cores

        # the starts side by side on the cores the run may use (`[permutations] cores`); each
        # start has its own seed, so the result does not depend on how many run at once
        return nmds(d, dimensions=k, starts=ctx.settings["analyses.starts"], rng=ctx.rng("nmds"),
                    n_jobs=available_cores())
    return pcoa(d, dimensions=k)


def ordination_step(ctx: Context) -> None:
    from ...ordination import taxon_scores
    from ...plot import shepard

    kind = ctx.settings["analyses.ordination"]
    k = ctx.settings["analyses.dimensions"]
    sec = Section("ordination", "Ordination of the communities")
    res = ordinate(ctx)
    if kind == "nmds":
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
    sec.tables["taxon_scores"] = taxon_scores(res, ctx.survey.community)
    sec.notes.extend(res.notes)
    ctx.sections.append(sec)
    if kind == "nmds":
        _add_figure(ctx, sec, "shepard", "Shepard diagram: distances in the ordination against "
                    "community dissimilarities, with the monotone fit.", shepard, res,
                    xlabel=f"{METRIC_NAMES.get(ctx.results['community'].metric, 'Community')} "
                    "dissimilarity")


def vectors_check(ctx: Context) -> None:
    if _numeric(ctx.results["environment"]).shape[1] == 0:
        raise Skip("the environmental table has no numeric variables")


def vector_fit(ctx: Context) -> object:
    """Every numeric variable (in analysis units) fitted as a vector onto the ordination."""
    from ...fitting import fit_vectors

    scores = ctx.results["ordination"].scores
    env = _numeric(ctx.results["environment"])
    if env.shape[1] == 0:
        raise Skip("the environmental table has no numeric variables")
    return fit_vectors(scores, env, n_resamples=ctx.n_resamples, rng=ctx.rng("vectors"),
                       strata=_strata(ctx))


def vectors_step(ctx: Context) -> None:
    fit = vector_fit(ctx)
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
    sec.display["vector_fits"] = [*axes, "r2", "pvalue", "pvalue_adjusted", "n_sites"]
    sec.notes.extend(fit.notes)
    ctx.sections.append(sec)
    ctx.methods.append(
        f"Environmental variables were fitted as vectors onto the first {len(axes)} ordination "
        "axes (Kantvilas & Minchin 1989) and tested by permuting each variable among sites; "
        + "; ".join(f"{v} r2 = {row.r2:.2f} ({_fmt_p(row.pvalue)})"
                    for v, row in fit.table.iterrows()) + " (p-values before the Holm "
        "adjustment given in the table).")


def factors_step(ctx: Context) -> None:
    from ...fitting import fit_factors

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
    # one row per class, named by its variable and level (not by row number)
    sec.tables["factor_centroids"] = fit.centroids.set_index(["factor", "level"])
    sec.shown += ["factor_fits", "factor_centroids"]
    sec.notes.extend(fit.notes)
    ctx.sections.append(sec)
    ctx.methods.append(
        "Categorical variables were fitted as class centroids in the ordination and tested by "
        "permuting class labels: " + "; ".join(
            f"{f} r2 = {row.r2:.2f} ({_fmt_p(row.pvalue)})" for f, row in fit.table.iterrows())
        + ".")


def biplot_step(ctx: Context) -> None:
    from ...plot import biplot

    res = ctx.results.get("ordination")
    sec = _section(ctx, "ordination")
    if res is None or sec is None:
        return
    kwargs: dict[str, object] = {"alpha": ctx.settings["output.level"]}
    vec = ctx.results.get("vectors")
    if vec is not None:
        kwargs["vectors"] = vec  # the arrows of vector_fits.csv (its plot_* columns)
    fac = ctx.results.get("factors")
    if fac is not None:
        kwargs["factors"] = fac
        first = fac.table.index[0]
        kwargs["groups"] = ctx.survey.environment[first].astype(object)
    if "taxon_scores" in sec.tables:
        kwargs["taxa"] = sec.tables["taxon_scores"]
    caption = "Sites in the ordination"
    if vec is not None:
        caption += (", with fitted environmental arrows (faded and dashed when p > "
                    f"{ctx.settings['output.level']})")
    if fac is not None:
        caption += ", class centroids"
    if "taxa" in kwargs:
        caption += " and taxon weighted averages (grey crosses)"
    _add_figure(ctx, sec, "ordination_biplot", caption + ".", biplot, res, **kwargs)
    # the biplot goes first in the section
    sec.figures = dict(sorted(sec.figures.items(), key=lambda kv: kv[0] != "ordination_biplot"))


def surfaces_check(ctx: Context) -> None:
    """Every variable of `environment.surfaces` is numeric and has values at enough sites."""
    env = ctx.results["environment"]
    names = ctx.results["analysis_names"]
    for v in ctx.settings["environment.surfaces"]:
        column = names.get(v, v)
        if column not in env.columns or not pd.api.types.is_numeric_dtype(env[column]):
            raise InputError(f"`environment.surfaces` names {v!r}, which is not a numeric "
                             "variable of the environmental table (a surface is fitted to "
                             "numbers). Remove it from `[environment] surfaces`.", columns=[v])
        n = int(env[column].notna().sum())
        if n < SURFACE_MIN_SITES:
            raise InputError(f"`environment.surfaces`: a surface needs at least "
                             f"{SURFACE_MIN_SITES} sites with values; {v!r} has {n}. Remove it "
                             "from `[environment] surfaces`.", columns=[v])


def surfaces_step(ctx: Context) -> None:
    from ...fitting import fit_surface
    from ...plot import surface

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
        _add_figure(ctx, sec, f"surface_{v}", f"Fitted surface of {column} over the "
                    "ordination (contours within the sites' hull), with the sites.",
                    surface, fit, scores)
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
