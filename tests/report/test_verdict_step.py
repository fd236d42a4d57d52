"""The verdict step and the Mantel sections as a reader sees them: the rule is stated and
followed, the spatial check is said once per section with its numbers, and nothing untrue is said
about the geography predictor."""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd

from gradients.distance import DistanceMatrix
from gradients.report._pipeline import Context
from gradients.report.steps.verdicts import verdicts_step


def _structure(structured: bool) -> pd.DataFrame:
    return pd.DataFrame({"statistic": [0.4, 0.7], "pvalue": [0.001 if structured else 0.4,
                                                            0.001],
                         "structured": [structured, True]},
                        index=pd.Index(["x", "y"], name="matrix"))


def _partial(r: float, p: float, p_spatial: float, structured: bool,
             controls: tuple[str, ...]) -> SimpleNamespace:
    return SimpleNamespace(statistic=r, pvalue=p, pvalue_spatial=p_spatial,
                           spatial_structure=_structure(structured), controls=controls)


def test_the_step_follows_the_spatially_constrained_pvalue() -> None:
    # The situation of simulate_survey(n_sites=1000, n_taxa=120, seed=3), 999 permutations
    # (the partial Mantel and regression numbers of that run): the planted-null hypothesis
    # water_and_organic is significant by the plain test only. Random matrices stand in for
    # the distances; only their correlations (a caveat) depend on them.
    rng = np.random.default_rng(4)
    labels = [f"s{i}" for i in range(30)]
    m = len(labels) * (len(labels) - 1) // 2
    names = ("contamination", "texture", "water_and_organic")
    dists = {n: DistanceMatrix(rng.uniform(size=m), labels) for n in names}
    geo = DistanceMatrix(rng.uniform(size=m), labels)
    numbers = {"contamination": (0.5377, 0.001, 0.021, 0.4307, 0.001),
               "texture": (0.1741, 0.001, 0.001, 0.1652, 0.001),
               "water_and_organic": (0.0422, 0.002, 0.535, 0.0290, 0.006)}
    partial = {n: _partial(r, p, ps, True, tuple(k for k in (*names, "geography") if k != n))
               for n, (r, p, ps, _, _) in numbers.items()}
    regression = SimpleNamespace(table=pd.DataFrame(
        {"std_coefficient": [v[3] for v in numbers.values()],
         "pvalue": [v[4] for v in numbers.values()], "vif": [1.3, 2.5, 1.4]},
        index=list(names)))
    ctx = Context(settings={"output.level": 0.05}, hypotheses={n: (n,) for n in names},
                  survey=None, seed=1, n_resamples=999)
    ctx.results.update({"hypothesis_distances": dists, "geography": geo,
                         "partial_mantel": partial, "mantel": {}, "regression": regression,
                         "community": SimpleNamespace(n=1000)})
    verdicts_step(ctx)
    table = ctx.results["verdicts"]
    assert table.loc["water_and_organic", "verdict"] == (
        "associated, but not separable from spatial structure")
    assert table.loc["contamination", "verdict"] == table.loc["texture", "verdict"] == "supported"
    assert table["spatially_structured"].all()
    # Holm across the three hypotheses (Holm 1979): 0.001 * 3, 0.001 * 2 -> 0.003, 0.002 * 1
    # -> max(0.002, 0.003) = 0.003
    assert np.allclose(table["partial_mantel_pvalue_holm"], [0.003, 0.003, 0.003])
    caveat = table.loc["water_and_organic", "caveats"]
    assert "not significant against the spatially constrained null (p = 0.535)" in caveat
    assert "partial Mantel r 0.042 is significant but below 0.1" in caveat
    assert "spatially structured turnover" not in " ".join(table["caveats"])
    summary = " ".join(ctx.results["summary"])
    assert "water_and_organic: associated, but not separable from spatial structure (partial " \
           "Mantel r = 0.04, p = 0.002, spatially constrained p = 0.535" in summary
    section = ctx.sections[0]
    assert any(p.startswith("How the verdicts are decided.") for p in section.paragraphs)
    # with the spatial check finding only one matrix structured, the constrained p-value
    # still decides (the check can miss structure: validation/spatial.py)
    for n in names:
        partial[n].spatial_structure = _structure(False)
    ctx.sections.clear()
    verdicts_step(ctx)
    again = ctx.results["verdicts"]
    assert again.loc["water_and_organic", "verdict"] == (
        "associated, but not separable from spatial structure")
    assert not again["spatially_structured"].any()


def test_the_demo_report_says_the_spatial_check_once_per_section(demo_report: Path) -> None:
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    # the geography predictor is itself distance in space: no claim that locations are missing
    assert "no usable site locations were given" not in html
    assert "geography: No spatial check and no spatially constrained p-value: this predictor " \
           "is itself the distance between sites" in html
    # the matrix stage's per-test structure notes are replaced by one note and one table
    assert "Both matrices are spatially structured (Mantel correlation" not in html
    for key, label in (("mantel", "predictor"), ("partial_mantel", "hypothesis")):
        assert html.count(f"Spatial check ({key}_spatial_check)") == 1
        table = pd.read_csv(demo_report / "tables" / f"{key}_spatial_check.csv",
                            index_col=label)
        assert list(table.index) == ["contamination", "texture", "water_and_organic"]
        assert list(table.columns) == ["predictor_r", "predictor_pvalue", "community_r",
                                       "community_pvalue", "both_structured"]
    assert "How the verdicts are decided." in html
    assert "Cohen&#x27;s (1988)" in html or "Cohen's (1988)" in html
    verdicts = pd.read_csv(demo_report / "tables" / "hypothesis_verdicts.csv",
                           index_col="hypothesis")
    assert "spatially_structured" in verdicts.columns


def test_the_user_guide_states_the_rule() -> None:
    guide = (Path(__file__).parents[2] / "docs" / "user-guide.md").read_text(encoding="utf-8")
    for phrase in ("associated, but not separable from spatial structure",
                   "significant but negligible", "Cohen (1988)",
                   "not adjusted across hypotheses"):
        assert phrase in guide, phrase
