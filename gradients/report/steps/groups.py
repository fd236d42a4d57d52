"""Group contrasts step: the project's site classes (zones, habitats, periods) compared.

For the class variables of the project (``environment.factors``, else its categorical columns)
the step runs the design's PERMANOVA with its dispersion check, finds the indicator taxa of
every class, and, when the project asks for it, clusters the sites and draws the dendrogram.
Permutations stay within ``design.strata`` when it is set.
"""

from __future__ import annotations

import re

import pandas as pd

from ..._errors import InputError
from .._model import Section
from .._pipeline import Context
from ._common import METRIC_NAMES, _add_figure, _fmt_p, _strata

__all__ = ["class_variables", "groups_check", "groups_step"]

_CONTIGUITY = {
    "transect": "constrained to join only neighbouring sites along the site order",
    "space": "constrained to join only neighbouring sites (a Delaunay triangulation of the "
             "site locations)",
}


def class_variables(ctx: Context) -> list[str]:
    """The class variables compared: ``environment.factors``, else the categorical columns."""
    env = ctx.survey.environment
    names = list(ctx.settings["environment.factors"])
    if not names:
        names = [c for c in env.columns if str(env[c].dtype) == "category"
                 and c != ctx.settings["design.strata"]]
    missing = [v for v in names if v not in env.columns]
    if missing:
        raise InputError(f"`environment.factors` names {missing[0]!r}, which the environmental "
                         "table does not have.", columns=missing)
    return names


def _term_columns(terms: list[str]) -> list[str]:
    """The columns a list of terms names (``zone:period``, ``site(zone)``, ``a*b``)."""
    cols: list[str] = []
    for term in terms:
        for part in re.split(r"[:*()]", term):
            part = part.strip()
            if part and part not in cols:
                cols.append(part)
    return cols


def _permanova(ctx: Context, sec: Section, names: list[str]) -> None:
    from ...groups import permanova
    from ...plot import dispersion

    terms = list(ctx.settings["groups.terms"]) or list(names)
    env = ctx.survey.environment
    columns = _term_columns(terms)
    missing = [c for c in columns if c not in env.columns]
    if missing:
        raise InputError(f"`groups.terms` names {missing[0]!r}, which the environmental table "
                         "does not have.", columns=missing)
    kind = ctx.settings["groups.sums_of_squares"]
    strata = _strata(ctx)
    d = ctx.results["community"]
    res = permanova(d, env[columns], terms=terms, strata=strata, n_resamples=ctx.n_resamples,
                    rng=ctx.rng("permanova"), sums_of_squares=kind, dispersion=False)
    ctx.results["permanova"] = res
    dispersions, disp_notes = _dispersions(ctx, terms, strata)
    ctx.results["dispersion"] = dispersions
    level = ctx.settings["output.level"]
    table = res.table.copy()
    sec.tables["permanova"] = table
    sec.shown.append("permanova")
    sec.display["permanova"] = ["term", "df", "sum_of_squares", "mean_square", "pseudo_f", "r2",
                                "pvalue", "tested_against"]
    tested = table[~table["term"].isin(["residual", "total"])]
    words = "; ".join(
        f"{r.term}: pseudo-F = {r.pseudo_f:.2f}, R2 = {r.r2:.3f}, {_fmt_p(r.pvalue)}"
        for r in tested.itertuples())
    sec.paragraphs.append(
        "PERMANOVA (Anderson 2001) of the community dissimilarities: how much of their "
        "variation lies between the classes of each term (R2) and whether that is more than "
        "rearranging the sites would give (pseudo-F and its permutation p-value; "
        f"{kind} sums of squares"
        + (", each term adjusted for the terms before it" if kind == "sequential"
           else ", each term adjusted for all the others") + "). " + words + ".")
    if len(res.pairwise):
        sec.tables["permanova_pairwise"] = res.pairwise
        sec.shown.append("permanova_pairwise")
    disp = pd.DataFrame(
        [{"term": t, "n_groups": r.n_groups, "statistic": r.statistic, "df": r.df,
          "df_residual": r.df_residual, "pvalue": r.pvalue, "exact": r.exact}
         for t, r in dispersions.items()],
        columns=["term", "n_groups", "statistic", "df", "df_residual", "pvalue", "exact"])
    if len(disp):
        sec.tables["dispersion"] = disp
        sec.shown.append("dispersion")
        differ = [r.term for r in disp.itertuples() if r.pvalue <= level]
        sec.paragraphs.append(
            "Dispersion check (Anderson 2006): do the classes differ in spread, each site's "
            "distance to its class centroid compared among classes? "
            + ("; ".join(f"{r.term}: F = {r.statistic:.2f}, {_fmt_p(r.pvalue)}"
                         for r in disp.itertuples()) + ". ")
            + (f"The spreads differ for {', '.join(differ)}: a significant PERMANOVA term "
               "there may reflect the difference in spread rather than a shift of the "
               "classes' centres (the notes say more)." if differ else
               "No class variable differs in spread at this level, so the PERMANOVA terms "
               "read as shifts of the classes' centres."))
        for term, result in dispersions.items():
            _add_figure(ctx, sec, f"dispersion_{term}",
                        f"Distance of every site to the centroid of its class of {term} (the "
                        "dispersion check); bars: class means; filled marks: spreads differ.",
                        dispersion, result, alpha=level)
    sec.notes.extend(f"PERMANOVA: {n}" for n in res.notes)
    sec.notes.extend(disp_notes)
    for term in terms:
        if ":" in term and "(" not in term:
            a, b = term.split(":", 1)
            sec.notes.append(
                f"The interaction {term} asks whether the differences among the classes of {a} "
                f"change with {b} (and the other way round). In a before/after-control/impact "
                "design (period x treatment, sites as strata) it is the test of impact: did "
                "the impact sites change from before to after differently from the control "
                "sites? The main effects alone say nothing about an impact.")
    ctx.methods.append(
        "Differences among site classes were tested by PERMANOVA (Anderson 2001; McArdle & "
        f"Anderson 2001) of the community dissimilarities with the terms {', '.join(terms)} "
        f"({kind} sums of squares), each term by permuting the residuals of the model without "
        "it (Anderson & ter Braak 2003)"
        + (f" within {ctx.settings['design.strata']}" if strata is not None else "")
        + ": " + words + ". Beside each factor, homogeneity of dispersions was tested with "
        "distances to class centroids (Anderson 2006)"
        + (": " + "; ".join(f"{r.term} F = {r.statistic:.2f} ({_fmt_p(r.pvalue)})"
                            for r in disp.itertuples()) if len(disp) else "") + ".")


def _dispersions(ctx: Context, terms: list[str], strata: pd.Series | None
                 ) -> tuple[dict[str, object], list[str]]:
    """The dispersion check of every factor among the terms, and notes on those not checked.

    A factor that does not vary within the strata (the treatment of a site visited before and
    after) has no rearrangement within them: it is listed in the notes, not tested.
    """
    from ...groups import dispersion_test

    env = ctx.survey.environment
    out: dict[str, object] = {}
    notes: list[str] = []
    for term in terms:
        if any(ch in term for ch in ":*(") or pd.api.types.is_numeric_dtype(env[term]):
            continue
        try:
            result = dispersion_test(ctx.results["community"], env[term], strata=strata,
                                     n_resamples=ctx.n_resamples,
                                     rng=ctx.rng(f"dispersion:{term}"))
        except InputError as exc:
            if strata is None or "changes nothing" not in str(exc):
                raise
            notes.append(f"Dispersion check: {term} does not vary within the strata "
                         f"({ctx.settings['design.strata']}), so its spread cannot be compared "
                         "by rearranging sites within them; it was not checked.")
            continue
        out[term] = result
        notes.extend(f"Dispersion check of {term}: {n}" for n in result.notes)
    return out, notes


def _indicators(ctx: Context, sec: Section, names: list[str]) -> None:
    from ...groups import indicator_taxa

    top_n = ctx.settings["groups.top_taxa"]
    level = ctx.settings["output.level"]
    full, shown, found = [], [], []
    strata = _strata(ctx)
    for name in names:
        try:
            res = indicator_taxa(ctx.survey.community,
                                 ctx.survey.environment[name].astype(object),
                                 n_resamples=ctx.n_resamples,
                                 rng=ctx.rng(f"indicators:{name}"), strata=strata)
        except InputError as exc:
            if strata is None or "changes nothing" not in str(exc):
                raise
            sec.notes.append(f"Indicator taxa: {name} does not vary within the strata "
                             f"({ctx.settings['design.strata']}), so its indicator values "
                             "cannot be tested by rearranging sites within them; not listed.")
            continue
        ctx.results.setdefault("indicators", {})[name] = res
        table = res.table.copy()
        table.insert(0, "variable", name)
        full.append(table)
        top = res.top(top_n)
        top.insert(0, "variable", name)
        shown.append(top)
        n_sig = int((res.table["pvalue_adjusted"] <= level).sum())
        best = res.top(1, alpha=level)
        found.append(f"{name}: {n_sig} of {len(res.table)} taxa"
                     + (" (" + "; ".join(f"{r.group}: {r.taxon}, IndVal {r.indval:.2f}"
                                         for r in best.itertuples()) + ")" if len(best) else ""))
        sec.notes.extend(f"Indicator taxa of {name}: {n}" for n in res.notes
                         if not n.startswith("Exact test"))
    if not full:
        return
    names = list(ctx.results["indicators"])
    cols = ["variable", "group", "taxon", "indval", "specificity", "fidelity", "pvalue",
            "pvalue_adjusted", "n_sites"]
    sec.tables["indicator_taxa"] = pd.concat(full, ignore_index=True)[cols]
    sec.tables["indicator_taxa_top"] = pd.concat(shown, ignore_index=True)[cols]
    sec.shown.append("indicator_taxa_top")
    sec.display["indicator_taxa_top"] = ["variable", "group", "taxon", "indval", "specificity",
                                         "fidelity", "pvalue_adjusted"]
    sec.paragraphs.append(
        f"Indicator taxa: the {top_n} taxa with the largest indicator value in each class "
        "(specificity, the share of the taxon's class-mean abundance in that class, times "
        "fidelity, the share of the class's sites where it occurs; 1 means found at every "
        "site of the class and nowhere else). p-values from permuting the class labels, "
        "adjusted across taxa (Benjamini-Hochberg); the full table is indicator_taxa.csv. "
        f"Significant at {level} after adjustment: " + "; ".join(found) + ".")
    ctx.methods.append(
        "Indicator taxa of each class of " + ", ".join(names) + " were found from indicator "
        "values (specificity times fidelity; Dufrêne & Legendre 1997), each taxon's largest "
        "value tested by permuting class labels among sites and the p-values adjusted across "
        "taxa (Benjamini & Hochberg 1995).")


def _clusters(ctx: Context, sec: Section, names: list[str]) -> None:
    from ...groups import cluster_sites
    from ...plot import dendrogram

    method = ctx.settings["groups.cluster_method"]
    contiguous = ctx.settings["groups.contiguous"]
    d = ctx.results["community"]
    try:
        res = cluster_sites(d, method, k=ctx.settings["groups.clusters"],
                            contiguous=None if contiguous == "none" else contiguous,
                            locations=ctx.survey.locations if contiguous == "space" else None)
    except InputError as exc:
        ctx.skipped.append(("site clusters", str(exc)))
        return
    ctx.results["clusters"] = res
    ctx.site_columns["cluster"] = res.membership
    table = res.table.set_index("site")
    for name in names:
        table[name] = ctx.survey.environment.loc[table.index, name].astype(object)
    sec.tables["site_clusters"] = table
    sec.tables["cluster_summary"] = res.clusters
    sec.shown.append("cluster_summary")
    metric = METRIC_NAMES.get(d.metric or "", d.metric or "community")
    how = _CONTIGUITY.get(contiguous, "")
    paragraph = (
        f"Sites clustered by {method} linkage of the {metric} dissimilarities"
        + (f", {how}" if how else "") + f": {res.k} clusters"
        + (" (the number with the widest mean silhouette)" if ctx.settings["groups.clusters"]
           is None else "")
        + f", mean silhouette width {res.silhouette:.2f} (Rousseeuw 1987; near 1: sites sit "
        f"well inside their cluster, near 0: between two), cophenetic correlation "
        f"{res.cophenetic_correlation:.2f} (how well the tree's merge heights keep the "
        "dissimilarities). Each site's cluster is in site_clusters.csv and sites.gpkg.")
    if names:
        first = names[0]
        cross = pd.crosstab(table["cluster"], table[first])
        cross.index.name = "cluster"
        sec.tables[f"clusters_by_{first}"] = cross
        sec.shown.append(f"clusters_by_{first}")
        paragraph += f" The table below it counts the sites of each cluster in each {first}."
    sec.paragraphs.append(paragraph)
    sec.notes.extend(f"Site clusters: {n}" for n in res.notes)
    _add_figure(ctx, sec, "site_dendrogram",
                f"Sites clustered by {method} linkage ({res.k} clusters: colours and marker "
                "shapes; dashed line: the cut).", dendrogram, res,
                dissimilarity_label=f"Merge height ({metric} dissimilarity)")
    ctx.methods.append(
        f"Sites were clustered by {method} linkage"
        + {"average": " (UPGMA; Sokal & Michener 1958)", "ward": " (Ward 1963)"}.get(method, "")
        + " of the community dissimilarities" + (f", {how}" if how else "")
        + f"; the tree was cut into {res.k} clusters"
        + (" chosen by the widest mean silhouette" if ctx.settings["groups.clusters"] is None
           else "")
        + f" (mean silhouette width {res.silhouette:.2f}; Rousseeuw 1987), and its cophenetic "
        f"correlation was {res.cophenetic_correlation:.2f} (Sokal & Rohlf 1962).")


def groups_check(ctx: Context) -> None:
    """The class variables and the terms name columns of the table, each with 2 classes or
    more (and fewer classes than sites)."""
    names = class_variables(ctx)
    if not names:
        return
    env = ctx.survey.environment
    terms = list(ctx.settings["groups.terms"]) or list(names)
    missing = [c for c in _term_columns(terms) if c not in env.columns]
    if missing:
        raise InputError(f"`groups.terms` names {missing[0]!r}, which the environmental table "
                         "does not have.", columns=missing)
    for name in names:
        k = env[name].nunique()
        if k < 2 or k >= len(env):
            how = "one class" if k < 2 else "a different class at every site"
            raise InputError(
                f"The class variable {name!r} has {how}, so its classes cannot be compared. "
                "Remove it from `environment.factors` (or from `groups.terms`).",
                columns=[name])


def groups_step(ctx: Context) -> None:
    """Site classes compared: tests of the design, indicator taxa, optional clustering."""
    names = class_variables(ctx)
    cluster = ctx.settings["groups.cluster"]
    if not names and not cluster:
        return
    sec = Section("groups", "Site classes compared")
    if names:
        sec.paragraphs.append(
            "How the communities differ between the classes of " + ", ".join(names) + ".")
        _permanova(ctx, sec, names)
        _indicators(ctx, sec, names)
    if cluster:
        _clusters(ctx, sec, names)
    if not sec.tables:
        return
    ctx.sections.append(sec)
