"""Matrix steps: Mantel and partial Mantel tests, regression on distance matrices, the Mantel
correlogram and the distance decay of similarity.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from .._model import Section
from .._pipeline import Context, Skip
from ._common import _add_figure, _fmt_p, _predictors, _strata

__all__ = ["correlogram_step", "distance_decay_check", "distance_decay_step", "mantel_results",
           "mantel_step", "partial_mantel_results", "partial_mantel_step", "regression_step",
           "spatial_check"]


def spatial_check(ctx: Context) -> None:
    """The analyses of space need the distance between sites."""
    if ctx.results.get("geography") is None:
        raise Skip("no site locations were given")


def _spatial_kwargs(ctx: Context) -> dict[str, object]:
    geo = ctx.results.get("geography")
    if geo is None or ctx.settings["design.strata"]:
        return {}
    return {"spatial_null": geo, "n_surrogates": ctx.n_resamples}


def _precision(ctx: Context) -> type:
    """The storage of the Mantel tests' work arrays (``[permutations] precision``)."""
    return np.float32 if ctx.settings.get("permutations.precision") == "float32" else np.float64


def _precision_sentence(ctx: Context) -> str:
    """The methods' words for float32 storage (empty for the default)."""
    if _precision(ctx) is np.float64:
        return ""
    return (" The tests' work arrays were stored in single precision (float32; products and "
            "sums in double precision); the notes give the bound on the change in r and say "
            "whether any permuted value came near enough to the observed one to move a "
            "p-value.")


def _spatial_reason(ctx: Context, name: str) -> str:
    """Why the report ran no spatially constrained test for ``name``, in project-file words."""
    if name == "geography":
        return ("No spatial check and no spatially constrained p-value: this predictor is "
                "itself the distance between sites, so the check for spatial structure does "
                "not apply to it. Its p-value asks whether community turnover rises with "
                "distance.")
    if ctx.results.get("geography") is not None and ctx.settings["design.strata"]:
        return ("Spatial autocorrelation was not checked: with `design.strata` set, the "
                "spatially constrained null (Moran spectral randomisation), which does not keep "
                "strata, is not computed. When both matrices are spatially structured, Mantel "
                "p-values are too small (Guillot & Rousset 2013); read them with care.")
    return ("Spatial autocorrelation was not checked because no usable site locations were "
            "given (`[inputs] locations`). When both matrices are spatially structured, Mantel "
            "p-values are too small (Guillot & Rousset 2013); add locations for a check and a "
            "spatially constrained p-value.")


def _is_structure_note(note: str) -> bool:
    """A matrix-stage note on one test's spatial-structure check (said once per section)."""
    return (note.startswith(("Both matrices are spatially structured",
                             "Neither matrix shows spatial structure"))
            or (note.startswith("Only ") and " is spatially structured (" in note))


def _attributed_notes(results: dict[str, Any], ctx: Context | None = None) -> list[str]:
    """Notes of several results, each said once, prefixed by the names it applies to.

    A note that every result carries is given without a prefix. The per-test notes on the
    spatial-structure check are left out (see :func:`_spatial_check`). With ``ctx``, the
    analyses' advice to pass locations to a Python argument is said in project-file words.
    """
    owners: dict[str, list[str]] = {}
    for name, res in results.items():
        for note in res.notes:
            if _is_structure_note(note):
                continue
            if ctx is not None and note.startswith("Spatial autocorrelation was not checked"):
                note = _spatial_reason(ctx, name)
            names = owners.setdefault(note, [])
            if name not in names:
                names.append(name)
    return [note if len(names) == len(results) else f"{', '.join(names)}: {note}"
            for note, names in owners.items()]


def _spatial_check(sec: Section, results: dict[str, Any], label: str) -> None:
    """The spatial-structure check of every test of a section: one table, one note."""
    rows = []
    for name, res in results.items():
        check = res.spatial_structure
        if check is None:
            continue
        rows.append({label: name, "predictor_r": check.loc["x", "statistic"],
                     "predictor_pvalue": check.loc["x", "pvalue"],
                     "community_r": check.loc["y", "statistic"],
                     "community_pvalue": check.loc["y", "pvalue"],
                     "both_structured": bool(check["structured"].astype(bool).all())})
    if not rows:
        return
    table = pd.DataFrame(rows).set_index(label)
    name = f"{sec.key}_spatial_check"
    sec.tables[name] = table
    sec.shown.append(name)
    both = [str(k) for k in table.index[table["both_structured"].to_numpy(dtype=bool)]]
    note = (f"Spatial check ({name}): Mantel correlation of the predictor (predictor_r) and "
            "of the community dissimilarity (community_r) with the distance between sites, "
            "one-sided; a matrix is spatially structured when its p-value is at most 0.05. ")
    if len(both) == len(table):
        note += ("Both matrices are spatially structured in every test: simple and partial "
                 "Mantel tests then reject a true null too often (Guillot & Rousset 2013), so "
                 "rely on pvalue_spatial, from the spatially constrained null, rather than "
                 "pvalue.")
    elif both:
        note += (f"Both matrices are spatially structured for {', '.join(both)}: there simple "
                 "and partial Mantel tests reject a true null too often (Guillot & Rousset "
                 "2013), so rely on pvalue_spatial rather than pvalue. In the other tests at "
                 "most one matrix is structured: autocorrelation in one matrix alone does not "
                 "inflate the plain test, so read pvalue there, with pvalue_spatial as a "
                 "check; where pvalue_spatial is above the level and pvalue is not, the "
                 "association may still be spatial (the check can miss weak or short-range "
                 "structure), and the caveats say so. The verdicts ask for pvalue_spatial in "
                 "every test for that reason.")
    else:
        note += ("In no test are both matrices spatially structured: autocorrelation in one "
                 "matrix alone does not inflate the plain test, so read pvalue, with "
                 "pvalue_spatial as a check; where pvalue_spatial is above the level and "
                 "pvalue is not, the association may still be spatial (the check can miss "
                 "weak or short-range structure), and the caveats say so. The verdicts ask for "
                 "pvalue_spatial in every test for that reason.")
    sec.notes.insert(0, note)


def mantel_results(ctx: Context, *, spatial: bool = True, early_stop: int | None = None,
                   n_jobs: int | None = -1) -> dict[str, Any]:
    """The Mantel test of each predictor (hypotheses and geography) as the report runs it.

    ``spatial=False`` leaves out the spatially constrained null; ``early_stop`` and ``n_jobs``
    go to :func:`gradients.mantel` (the survey planner re-runs the tests with them). The
    report keeps the engine's default ``n_jobs=-1``, bounded by ``[permutations] cores``.
    """
    from ...matrix import mantel

    community = ctx.results["community"]
    preds = _predictors(ctx)
    preds.pop("covariables", None)
    results = {}
    for name, d in preds.items():
        extra = _spatial_kwargs(ctx) if spatial and name != "geography" else {}
        results[name] = mantel(d, community, n_resamples=ctx.n_resamples,
                               rng=ctx.rng(f"mantel:{name}"), strata=_strata(ctx),
                               early_stop=early_stop, n_jobs=n_jobs, dtype=_precision(ctx),
                               **extra)
    return results


def mantel_step(ctx: Context) -> None:
    results = mantel_results(ctx)
    if not results:
        return
    rows = []
    for name, res in results.items():
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
    _spatial_check(sec, results, "predictor")
    ctx.sections.append(sec)
    ctx.methods.append(
        "Mantel tests (Mantel 1967; Pearson r, sites permuted) of community dissimilarity "
        "against each predictor gave " + "; ".join(
            f"{n} r = {r.statistic:.3f} ({_fmt_p(r.pvalue)}"
            + (f", spatially constrained {_fmt_p(r.pvalue_spatial)}"
               if r.pvalue_spatial is not None else "") + ")"
            for n, r in results.items()) + "." + _precision_sentence(ctx))


def partial_mantel_results(ctx: Context, *, spatial: bool = True,
                           early_stop: int | None = None,
                           n_jobs: int | None = -1) -> dict[str, Any]:
    """The partial Mantel test of each hypothesis given every other predictor, as the report
    runs it (empty when there are no hypotheses or fewer than two predictors).

    ``spatial=False`` leaves out the spatially constrained null; ``early_stop`` and ``n_jobs``
    go to :func:`gradients.partial_mantel` (the survey planner re-runs the tests with them).
    The report keeps the engine's default ``n_jobs=-1``, bounded by ``[permutations] cores``.
    """
    from ...matrix import partial_mantel

    community = ctx.results["community"]
    hyp = ctx.results.get("hypothesis_distances", {})
    preds = _predictors(ctx)
    if not hyp or len(preds) < 2:
        return {}
    extra = _spatial_kwargs(ctx) if spatial else {}
    results = {}
    for name, d in hyp.items():
        controls = {k: v for k, v in preds.items() if k != name}
        results[name] = partial_mantel(d, community, controls, permute="residuals",
                                       n_resamples=ctx.n_resamples,
                                       rng=ctx.rng(f"partial:{name}"), strata=_strata(ctx),
                                       early_stop=early_stop, n_jobs=n_jobs,
                                       dtype=_precision(ctx), **extra)
    return results


def partial_mantel_step(ctx: Context) -> None:
    results = partial_mantel_results(ctx)
    if not results:
        return
    preds = _predictors(ctx)
    rows = []
    for name, res in results.items():
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
    _spatial_check(sec, results, "hypothesis")
    ctx.sections.append(sec)
    ctx.methods.append(
        "Partial Mantel tests (Smouse, Long & Sokal 1986) of each hypothesis controlling for "
        "the others" + (", the covariables" if "covariables" in preds else "")
        + (" and geographic distance" if "geography" in preds else "")
        + ", permuting residuals of the reduced model (Legendre 2000), gave " + "; ".join(
            f"{n} r = {r.statistic:.3f} ({_fmt_p(r.pvalue)})" for n, r in results.items())
        + "." + _precision_sentence(ctx))


def regression_step(ctx: Context) -> None:
    from ...matrix import matrix_regression

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


def correlogram_step(ctx: Context) -> None:
    from ...matrix import mantel_correlogram
    from ...plot import correlogram

    geo = ctx.results["geography"]
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
    _add_figure(ctx, sec, "correlogram", "Mantel correlogram; filled marks are significant after "
                "the progressive Holm correction.", correlogram, res,
                alpha=ctx.settings["output.level"], distance_unit="km")
    tested = table[table["tested"].astype(bool)]
    sig = tested[tested["pvalue_adjusted"] <= ctx.settings["output.level"]]
    ctx.methods.append(
        f"A Mantel correlogram over {len(table)} distance classes (Sturges' rule) found "
        f"{len(sig)} of {len(tested)} tested classes significant after progressive Holm "
        "correction.")


BOUNDED = ("bray-curtis", "jaccard", "sorensen", "ruzicka", "kulczynski", "morisita-horn")


def distance_decay_check(ctx: Context) -> None:
    spatial_check(ctx)
    d = ctx.results["community"]
    if d.metric not in BOUNDED:
        raise Skip(f"{d.metric} dissimilarities are not bounded by 1, so 1 - d is not a "
                   "similarity; choose a bounded dissimilarity such as bray-curtis "
                   "(`[community] dissimilarity`)")


def distance_decay_step(ctx: Context) -> None:
    from ...matrix import distance_decay
    from ...plot import distance_decay as decay_figure

    geo = ctx.results["geography"]
    d = ctx.results["community"]
    res = distance_decay(d, geo, rng=ctx.rng("distance_decay"), n_resamples=ctx.n_resamples)
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
    _add_figure(ctx, sec, "distance_decay", "Community similarity of each pair of sites against "
                "their distance, with the fitted decay curve.", decay_figure, res,
                distance_unit="km")
    ctx.methods.append(
        f"Distance decay of similarity was fitted with the {res.model} model (Nekola & White "
        f"1999): slope {res.slope:.4f} per km, {halving}.")
