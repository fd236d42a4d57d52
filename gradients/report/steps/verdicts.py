"""The verdict step: one verdict per hypothesis from the matrix tests, with its caveats.

The step gathers what the Mantel-type tests and the regression on distance matrices found, adds
the Holm adjustment across hypotheses and the correlations among the predictor matrices,
decides each verdict with the rule of :mod:`._rule` (stated in the report's text as well) and
lists the caveats the report checks for.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np
import pandas as pd

from ...permutation import adjust_pvalues
from .._model import Section
from .._pipeline import Context
from ._common import _add_figure, _fmt_p, _predictors
from ._rule import (
    NEGLIGIBLE_EFFECT,
    NEGLIGIBLE_FRACTION,
    NOT_SEPARABLE,
    PARTLY,
    SUPPORTED,
    Evidence,
    decide_verdict,
    fraction_counts,
)

__all__ = ["rule_text", "verdicts_step"]


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


def rule_text(level: float, test: str = "partial Mantel", fractions: bool = False) -> str:
    """The verdict rule in the report's words (``test``: the Mantel-type test used;
    ``fractions``: the table has the raw-data pure fractions)."""
    return _matrix_rule(level, test) + (_fraction_rule(level) if fractions else "")


def _fraction_rule(level: float) -> str:
    return (
        " The pure fraction from the raw data (section Space and environment: the adjusted R2 "
        "of the hypothesis' variables given the other hypotheses, the covariables and the "
        "selected spatial eigenvectors; pure_fraction, tested by permutation, its p-value "
        "Holm-adjusted across hypotheses in pure_fraction_pvalue_holm) counts as evidence when "
        f"it is positive, at least {NEGLIGIBLE_FRACTION} (Cohen's 1988 small effect size for "
        "a set of predictors, f2 = 0.02, read as a share of the variation: this report's own "
        f"rule) and its adjusted p-value at most {level}. It can only add support: it turns "
        "'not supported' or 'significant but negligible' into 'partly supported', and never "
        "lowers a verdict, because spatial eigenvectors selected on the same community "
        "describe a spatially structured gradient as well as its own variables do (the effect "
        "of a real driver can sit in the fraction it shares with space); a pure fraction that "
        "does not count is given as a caveat. It does not lift 'associated, but not separable "
        "from spatial structure'.")


def _matrix_rule(level: float, test: str) -> str:
    return (
        f"How the verdicts are decided. A test counts as significant when its effect is "
        f"positive and its p-value at most {level}: the {test} test by its p-value "
        "Holm-adjusted across hypotheses and, wherever the sites have locations, also by its "
        "spatially constrained p-value, which is not adjusted across hypotheses (each "
        "hypothesis must pass it on its own). It is asked for whatever the spatial check found "
        "(spatially_structured): the check is itself a test that can miss structure, and "
        "asking for the constrained p-value only where it found some rejected a true null too "
        "often under strong autocorrelation. The regression on distance matrices counts by "
        "the p-value of its coefficient. A "
        f"significant effect (Mantel r or standardised regression coefficient) below "
        f"{NEGLIGIBLE_EFFECT} is called negligible: Cohen's (1988) threshold for a small "
        "correlation, applied to these statistics as this report's own rule. The verdict is "
        f"'associated, but not separable from spatial structure' when the {test} test is "
        "significant by its Holm-adjusted p-value but not against the spatially constrained "
        "null (whatever the regression says: it has no spatially constrained test); "
        "otherwise 'supported' when every test is "
        "significant and not negligible, 'partly supported' when one is, 'significant but "
        "negligible' when a test is significant but each significant effect is below "
        f"{NEGLIGIBLE_EFFECT}, and 'not supported' when no test is significant.")


def _both_structured(result: Any) -> bool | None:
    """Whether the spatial check of a Mantel-type result found both matrices structured."""
    check = getattr(result, "spatial_structure", None)
    if check is None:
        return None
    return bool(check["structured"].astype(bool).all())


def verdicts_step(ctx: Context) -> None:
    from ...plot import hypotheses

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
    fractions = (ctx.results.get("partition") or {}).get("hypotheses")
    rows = []
    for name in hyp:
        row: dict[str, object] = {"hypothesis": name,
                                  "variables": ", ".join(ctx.hypotheses[name])}
        test = partial.get(name)
        prefix = "partial_mantel" if test is not None else "mantel"
        if test is None:
            test = simple.get(name)
        if test is not None:
            row.update({f"{prefix}_r": test.statistic, f"{prefix}_pvalue": test.pvalue})
            if test.pvalue_spatial is not None:
                row[f"{prefix}_pvalue_spatial"] = test.pvalue_spatial
            if _both_structured(test) is not None:
                row["spatially_structured"] = _both_structured(test)
            row["controls"] = ", ".join(test.controls) if prefix == "partial_mantel" else "none"
        if fractions is not None and name in fractions.index:
            row.update({"pure_fraction": fractions.loc[name, "pure_fraction"],
                        "pure_fraction_pvalue": fractions.loc[name, "pvalue"]})
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
    kind = "partial_mantel" if "partial_mantel_r" in table else "mantel"
    pcol, rcol, scol = f"{kind}_pvalue", f"{kind}_r", f"{kind}_pvalue_spatial"
    test_words = "partial Mantel" if kind == "partial_mantel" else "Mantel"
    if pcol in table:
        table.insert(table.columns.get_loc(pcol) + 1, pcol + "_holm", _holm(table[pcol]))
    has_fraction = "pure_fraction_pvalue" in table
    if has_fraction:
        known = table["pure_fraction_pvalue"].notna()
        holm = pd.Series(np.nan, index=table.index)
        holm[known] = _holm(table.loc[known, "pure_fraction_pvalue"])
        table.insert(table.columns.get_loc("pure_fraction_pvalue") + 1,
                     "pure_fraction_pvalue_holm", holm)
    verdicts, caveats, summary = [], [], []
    for name, row in table.iterrows():
        structured = row.get("spatially_structured")
        evidence = Evidence(
            mantel_r=row.get(rcol), mantel_pvalue=row.get(pcol + "_holm"),
            mantel_pvalue_spatial=row.get(scol),
            spatially_structured=bool(structured) if pd.notna(structured) else False,
            regression_coefficient=row.get("regression_std_coefficient"),
            regression_pvalue=row.get("regression_pvalue"),
            pure_fraction=row.get("pure_fraction"),
            pure_fraction_pvalue=row.get("pure_fraction_pvalue_holm"))
        verdict = decide_verdict(evidence, level=level)
        notes = []
        pure, pure_p = row.get("pure_fraction"), row.get("pure_fraction_pvalue_holm")
        if has_fraction and pd.notna(pure) and pd.notna(pure_p):
            counts = fraction_counts(evidence, level=level)
            if verdict in (SUPPORTED, PARTLY) and not counts:
                small = pure > 0 and pure_p <= level
                notes.append(f"on the raw data its pure fraction ({pure:.3f}, Holm-adjusted "
                             f"{_fmt_p(pure_p)}) "
                             + (f"is significant but below {NEGLIGIBLE_FRACTION}" if small
                                else "is not significant")
                             + " given the other hypotheses and the spatial eigenvectors: "
                             "there its effect can hardly be told apart from spatial structure "
                             "(see Space and environment)")
            elif verdict == NOT_SEPARABLE and counts:
                notes.append(f"its pure fraction on the raw data ({pure:.3f}, Holm-adjusted "
                             f"{_fmt_p(pure_p)}) counts, but does not lift this verdict")
            elif verdict == PARTLY and counts and decide_verdict(
                    replace(evidence, pure_fraction=None), level=level) != PARTLY:
                notes.append(f"partly supported by its pure fraction on the raw data "
                             f"({pure:.3f}, Holm-adjusted {_fmt_p(pure_p)}) alone")
        sp = row.get(scol)
        if sp is not None and pd.notna(sp) and sp > level and row.get(pcol, 1) <= level:
            notes.append(f"not significant against the spatially constrained null ({_fmt_p(sp)})")
        for label, effect, pvalue in (
                (f"{test_words} r", row.get(rcol), row.get(pcol + "_holm")),
                ("regression coefficient", row.get("regression_std_coefficient"),
                 row.get("regression_pvalue"))):
            if (effect is not None and pd.notna(effect) and pd.notna(pvalue)
                    and 0 < effect < NEGLIGIBLE_EFFECT and pvalue <= level):
                notes.append(f"{label} {effect:.3f} is significant but below "
                             f"{NEGLIGIBLE_EFFECT}: negligible by this report's rule")
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
            bits.append(f"{'partial ' if kind == 'partial_mantel' else ''}Mantel r = "
                        f"{row[rcol]:.2f}, {_fmt_p(row[pcol])}"
                        + (f", spatially constrained {_fmt_p(sp)}"
                           if sp is not None and pd.notna(sp)
                           else ""))
        if "regression_pvalue" in table and pd.notna(row.get("regression_pvalue")):
            bits.append(f"regression coefficient {row['regression_std_coefficient']:.2f}, "
                        f"{_fmt_p(row['regression_pvalue'])}")
        if has_fraction and pd.notna(pure) and pd.notna(pure_p):
            bits.append(f"pure fraction {pure:.3f}, {_fmt_p(pure_p)}")
        summary.append(f"{name}: {verdict} ({'; '.join(bits)}).")
    table.insert(0, "verdict", verdicts)
    table["caveats"] = caveats
    ctx.results["verdicts"] = table
    ctx.results["summary"] = summary
    sec = Section("verdicts", "Hypothesis verdicts")
    sec.paragraphs.append(
        "Each named hypothesis was tested against community turnover while controlling for the "
        "others and for space. Read the verdicts with their caveats: they describe association "
        "in this survey, not cause, and they are screening evidence for a professional "
        "judgement.")
    sec.paragraphs.append(rule_text(level, test_words, fractions=has_fraction))
    sec.tables["hypothesis_verdicts"] = table
    sec.tables["predictor_correlations"] = corr
    sec.shown += ["hypothesis_verdicts", "predictor_correlations"]
    sec.display["hypothesis_verdicts"] = [
        "verdict", "partial_mantel_r", "partial_mantel_pvalue_holm",
        "partial_mantel_pvalue_spatial", "mantel_r", "mantel_pvalue_holm",
        "mantel_pvalue_spatial", "spatially_structured", "pure_fraction",
        "pure_fraction_pvalue_holm", "regression_std_coefficient", "regression_pvalue",
        "best_vector", "vector_r2"]
    sec.notes.extend(f"{name}: {c}." for name, c in zip(table.index, caveats, strict=True)
                     if c != "none")
    if spatial:
        sec.paragraphs.append("Space: " + "; ".join(spatial) + ". Simple and partial Mantel "
                              "tests can then give p-values that are too small (Guillot & "
                              "Rousset 2013); this is why the verdicts also ask for the "
                              "spatially constrained p-value.")
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
                    f"significant at {level} (raw p-values).", hypotheses,
                    pd.DataFrame(plot_rows), alpha=level, xlabel="Effect size")
    test_name = test_words[0].upper() + test_words[1:]
    ctx.methods.append(
        "Verdicts per hypothesis: " + " ".join(summary)
        + f" {test_name} p-values were Holm-adjusted across hypotheses for the verdicts; "
        "where the sites had locations, the spatially constrained p-value "
        f"(not adjusted) had to be at most {level} as well, and significant effects below "
        f"{NEGLIGIBLE_EFFECT} were called negligible (Cohen's 1988 small correlation, used as "
        "this report's own rule)."
        + (" The pure fraction of each hypothesis on the raw data (Holm-adjusted across "
           f"hypotheses) could only add support, when at least {NEGLIGIBLE_FRACTION} and "
           "significant." if has_fraction else ""))
