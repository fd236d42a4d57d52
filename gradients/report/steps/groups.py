"""Group contrasts step: the project's site classes (zones, habitats, periods) compared.

For the class variables of the project (``environment.factors``, else its categorical columns)
the step runs the design's PERMANOVA with its dispersion check, finds the indicator taxa of
every class, and, when the project asks for it, clusters the sites and draws the dendrogram.
Permutations stay within ``design.strata`` when it is set.
"""

from __future__ import annotations

import pandas as pd

from ..._errors import InputError
from .._model import Section
from .._pipeline import Context
from ._common import METRIC_NAMES, _add_figure, _strata

__all__ = ["class_variables", "groups_step"]

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


def _indicators(ctx: Context, sec: Section, names: list[str]) -> None:
    from ...groups import indicator_taxa

    top_n = ctx.settings["groups.top_taxa"]
    level = ctx.settings["output.level"]
    full, shown, found = [], [], []
    for name in names:
        res = indicator_taxa(ctx.survey.community, ctx.survey.environment[name].astype(object),
                             n_resamples=ctx.n_resamples, rng=ctx.rng(f"indicators:{name}"),
                             strata=_strata(ctx))
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
        _indicators(ctx, sec, names)
    if cluster:
        _clusters(ctx, sec, names)
    if not sec.tables:
        return
    ctx.sections.append(sec)
