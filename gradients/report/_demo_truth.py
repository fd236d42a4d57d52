"""The demo's planted truth beside what the analyses found: the report step of the demo only.

The demo survey (:func:`gradients.simulate_survey`) plants known effects; this step, run only
for the demo, lists them beside the verdicts and fits the true (unobserved) gradients onto the
ordination. It sits next to the demo code (:mod:`gradients.report._demo`); the step list in
:mod:`gradients.report.steps` names it.
"""

from __future__ import annotations

import pandas as pd

from ..fitting import fit_vectors
from ._model import Section
from ._pipeline import Context
from .steps._common import _fmt_p, _section
from .steps._rule import PARTLY, SUPPORTED

__all__ = ["PLANTED", "planted_truth_step"]

PLANTED = {
    "contamination": ("strong", "every taxon has a unimodal response to the distance-decaying "
                      "contamination from the Tellmark works"),
    "texture": ("moderate", "every taxon has a unimodal response to the fine fraction "
                "(silt + clay)"),
    "water_and_organic": ("none", "pH and organic matter are pure noise; conductivity follows "
                          "the valley position (and so texture) but has no effect of its own"),
}


def _zones(ctx: Context, truth: object) -> dict[str, object] | None:
    """The planted bank zones beside the PERMANOVA term and the indicator taxa of the zones."""
    from ..data._demo_zones import ZONE_SD, ZONES

    perm = ctx.results.get("permanova")
    indicators = (ctx.results.get("indicators") or {}).get("zone")
    if perm is None or "zone" not in perm.pvalue.index:
        return None
    row: dict[str, object] = {
        "effect": "zone", "planted": "moderate",
        "how": f"each taxon's log-abundance shifted by N(0, {ZONE_SD:g}) per bank zone "
               "(moorland, plantation, pasture), in stretches along every reach"}
    p = float(perm.pvalue["zone"])
    found = (f"PERMANOVA pseudo-F = {float(perm.statistic['zone']):.2f}, {_fmt_p(p)}")
    if indicators is not None:
        effects = truth.taxon_truth[[f"effect_zone_{z}" for z in ZONES]]  # type: ignore[attr-defined]
        favoured = effects.idxmax(axis=1).str.removeprefix("effect_zone_")
        top = indicators.top(1)
        agree = sum(favoured[r.taxon] == r.group for r in top.itertuples())
        found += (f"; the top indicator taxon of {agree} of {len(top)} zones is one planted to "
                  "be most abundant there")
    row["found"] = found
    row["recovered"] = p <= ctx.settings["output.level"]
    return row


def planted_truth_step(ctx: Context) -> None:
    """Demo only: a section comparing the planted truth with what the analyses found."""
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
        if found:  # an effect is claimed only by these two verdicts
            row["recovered"] = (found in (SUPPORTED, PARTLY)) == expected
        rows.append(row)
    geo = (ctx.results.get("mantel") or {}).get("geography")
    found = [f"Mantel r = {geo.statistic:.2f}, {_fmt_p(geo.pvalue)}"] if geo is not None else []
    parts = (ctx.results.get("partition") or {}).get("fractions")
    if parts is not None:
        found.append(f"space alone {100 * parts.fraction('space'):.1f} % of turnover on the "
                     f"raw data, shared with the environment "
                     f"{100 * parts.fraction('environment', 'space'):.1f} %")
    rows.append({"effect": "space", "planted": "weak",
                 "how": "two smooth random fields (range 3 km) shift every taxon a little",
                 "found": "; ".join(found) or "not tested"})
    fac = ctx.results.get("factors")
    if fac is not None and "habitat" in fac.table.index:
        rows.append({"effect": "habitat", "planted": "weak",
                     "how": "each taxon's log-abundance shifted by N(0, 0.3) per habitat",
                     "found": f"r2 = {fac.table.loc['habitat', 'r2']:.2f}, "
                              f"{_fmt_p(fac.table.loc['habitat', 'pvalue'])}"})
    zone_row = _zones(ctx, truth)
    if zone_row is not None:
        rows.append(zone_row)
    if not rows:
        return
    sec = Section("planted_truth", "Demo only: what was planted and what was found")
    sec.paragraphs.append(
        "The demo data are invented: a seeded generator (gradients.data.simulate_survey) made "
        "the Corvanne Basin communities respond strongly to contamination, moderately to "
        "texture and to the bank zones, weakly to space and habitat, and not at all to pH and "
        "organic matter. This "
        "section compares that planted truth with what the analyses found.")
    table = pd.DataFrame(rows).set_index("effect")
    sec.tables["planted_truth"] = table
    sec.shown.append("planted_truth")
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
    ctx.sections.insert(1 if _section(ctx, "verdicts") is not None else 0, sec)
