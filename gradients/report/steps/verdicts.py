"""The verdict step: one verdict per hypothesis from the matrix tests, with its caveats."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ...permutation import adjust_pvalues
from .._model import Section
from .._pipeline import Context
from ._common import _add_figure, _fmt_p, _predictors

__all__ = ["verdicts_step"]


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
                    f"significant at {level} (raw p-values).", hypotheses,
                    pd.DataFrame(plot_rows), alpha=level, xlabel="Effect size")
    ctx.methods.append(
        "Verdicts per hypothesis: " + " ".join(summary)
        + " Partial Mantel p-values were Holm-adjusted across hypotheses for the verdicts.")
