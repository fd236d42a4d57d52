"""The "Space and environment" section: on the demo, on a planted survey whose driver is not
spatially structured, and on inputs it must refuse with a note naming the key.

Planted truths (sources of the expectations): the demo generator (gradients.simulate_survey,
its docstring) makes contamination decay with distance from one works and texture follow the
valley, so both are spatially structured by construction, and gives pH, organic matter and
conductivity no effect; the survey built here makes every taxon respond to a variable drawn
independently at each site (no spatial structure), so its pure fraction must be large and
significant whatever the spatial eigenvectors (Borcard, Legendre & Drapeau 1992: a
non-spatial environmental effect sits in the environment-only fraction).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gradients.data import Survey, simulate_survey
from gradients.report import analyse

REFERENCES = ("Legendre & Anderson 1999", "McArdle & Anderson 2001",
              "Blanchet, Legendre & Borcard 2008", "Dray, Legendre & Peres-Neto 2006",
              "Borcard, Legendre & Drapeau 1992", "Peres-Neto et al. 2006")


def _csv(report: Path, name: str, index: str | list[str]) -> pd.DataFrame:
    return pd.read_csv(report / "tables" / f"{name}.csv", index_col=index)


def test_the_demo_report_has_the_section_with_its_tables_figures_and_methods(
        demo_report: Path) -> None:
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    assert 'id="partition"' in html and "Space and environment" in html
    for name in ("partition_fractions", "spatial_eigenvectors"):
        for ext in ("png", "svg"):
            assert (demo_report / "figures" / f"{name}.{ext}").stat().st_size > 1000
    fractions = _csv(demo_report, "partition_fractions", "fraction")
    pure = fractions[fractions["kind"] != "combined"]
    assert list(pure.index) == ["environment only", "space only",
                                "shared by environment & space", "unexplained"]
    assert pure["r2_adjusted"].sum() == pytest.approx(1.0, abs=1e-9)
    assert fractions.loc[["environment only", "space only"], "pvalue"].notna().all()
    assert "In plain words: the environment explains" in html
    methods = (demo_report / "methods.md").read_text(encoding="utf-8")
    assert "in-stream distances in kilometres along the river network of streams.gpkg" \
        in methods
    assert "spatial eigenvectors" in methods and "of the in-stream distances" in methods
    for ref in REFERENCES:
        assert ref in methods or ref in html, ref
    notes = html[html.find('id="partition"'):]
    assert "cannot be credited to either" in notes  # the shared fraction's caution
    assert "conditional on that selection" in notes
    vectors = _csv(demo_report, "spatial_eigenvectors", "vector")
    selected = _csv(demo_report, "partition_selection", ["selection", "order"])
    space = selected.loc["space"]
    assert set(space.loc[space["entered"], "variable"]) == set(vectors.index[vectors["selected"]])
    assert (vectors["moran_i"] > vectors["expected"]).all()


def test_the_demo_verdicts_carry_the_pure_fractions_and_keep_the_planted_truth(
        demo_report: Path) -> None:
    verdicts = _csv(demo_report, "hypothesis_verdicts", "hypothesis")
    by_hypothesis = _csv(demo_report, "partition_hypotheses", "hypothesis")
    columns = list(verdicts.columns)
    assert columns.index("pure_fraction") > columns.index("partial_mantel_r")
    assert np.allclose(verdicts["pure_fraction"], by_hypothesis["pure_fraction"])
    assert np.allclose(verdicts["pure_fraction_pvalue"], by_hypothesis["pvalue"])
    assert (verdicts["pure_fraction_pvalue_holm"] >= verdicts["pure_fraction_pvalue"]).all()
    # planted: pH, organic matter and conductivity have no effect of their own
    assert by_hypothesis.loc["water_and_organic", "pvalue"] > 0.05
    assert verdicts.loc["water_and_organic", "verdict"] == "not supported"
    # planted: contamination and texture drive the community; the environment selected holds
    # variables of both, and explains far more than space alone
    env = _csv(demo_report, "partition_selection", ["selection", "order"]).loc["environment"]
    entered = set(env.loc[env["entered"], "hypothesis"])
    assert {"contamination", "texture"} <= entered
    fractions = _csv(demo_report, "partition_fractions", "fraction")["r2_adjusted"]
    assert fractions["environment (whole table)"] > 2 * fractions["space only"]
    # planted: both gradients are spatial by construction (a plume from one works, a texture
    # gradient down the valley): most of what the environment explains is shared with space,
    # and the pure fraction of each driver is small. The verdict stays with the matrix tests
    # (the fraction never lowers one) and says so in a caveat.
    assert fractions["shared by environment & space"] > fractions["environment only"]
    for name in ("contamination", "texture"):
        assert verdicts.loc[name, "verdict"] in ("supported", "partly supported")
        if verdicts.loc[name, "pure_fraction_pvalue_holm"] > 0.05:
            assert "can hardly be told apart from spatial structure" in \
                verdicts.loc[name, "caveats"]
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    assert "never lowers a verdict" in html


@pytest.fixture(scope="module")
def planted() -> Survey:
    """60 demo-like sites whose 30 taxa respond strongly to ``driver``, drawn independently
    at each site, and weakly to one of the generator's smooth spatial fields."""
    truth = simulate_survey(n_sites=60, n_taxa=10, rng=5)
    env = truth.environment.set_index("site")
    rng = np.random.default_rng(12)
    driver = rng.normal(size=60)
    slopes = rng.normal(0.0, 1.0, size=30)
    field = truth.site_truth["spatial_1"].to_numpy()
    loadings = rng.normal(0.0, 0.7, size=30)
    counts = rng.poisson(np.exp(1.5 + np.outer(driver, slopes) + np.outer(field, loadings)))
    counts[counts.sum(axis=1) == 0, 0] = 1
    community = pd.DataFrame(counts, index=env.index,
                             columns=[f"taxon{j:02d}" for j in range(30)])
    env = env.assign(driver=np.round(driver, 4))
    return Survey(community, env, truth.locations, censored="half-limit")


def test_a_non_spatial_driver_has_a_large_significant_pure_fraction(planted: Survey) -> None:
    outcome = analyse(planted, settings={"permutations.count": 199, "analyses.starts": 2,
                                         "analyses.surfaces": False},
                      hypotheses={"driver": ("driver",), "acidity": ("pH",)})
    by_hypothesis = outcome.tables["partition_hypotheses"]
    assert by_hypothesis.loc["driver", "pure_fraction"] > 0.1
    assert by_hypothesis.loc["driver", "pvalue"] <= 0.01
    # pH is the generator's spatially structured noise: no effect, negligible on the raw data
    assert by_hypothesis.loc["acidity", "pure_fraction"] < 0.02
    fractions = outcome.tables["partition_fractions"]
    r2 = fractions["r2_adjusted"]
    assert r2["environment only"] > 0.1 and fractions.loc["environment only", "pvalue"] <= 0.01
    assert r2["environment only"] > r2["shared by environment & space"]
    assert r2["space only"] > 0 and fractions.loc["space only", "pvalue"] <= 0.05
    verdicts = outcome.tables["hypothesis_verdicts"]
    assert verdicts.loc["driver", "verdict"] == "supported"
    assert verdicts.loc["acidity", "verdict"] == "not supported"
    assert verdicts.loc["driver", "pure_fraction"] == pytest.approx(
        by_hypothesis.loc["driver", "pure_fraction"])


# ---------------------------------------------------------------- what it must refuse


@pytest.fixture(scope="module")
def demo() -> Survey:
    from gradients import demo_survey

    return demo_survey()


QUICK = {"permutations.count": 19, "analyses.starts": 2, "analyses.surfaces": False,
         "analyses.vectors": False, "analyses.factors": False, "analyses.correlogram": False,
         "analyses.distance_decay": False}


def test_without_locations_the_section_is_skipped_with_its_reason(demo: Survey) -> None:
    survey = Survey(demo.community, demo.environment, None)
    outcome = analyse(survey, settings=QUICK, hypotheses={"metals": ("Cu", "Zn")})
    assert "partition" not in [s.key for s in outcome.sections]
    reason = dict(outcome.skipped)["partition"]
    assert reason.startswith("no site locations were given (`[inputs] locations`)")
    assert "pure_fraction" not in outcome.tables["hypothesis_verdicts"]


def test_a_composition_not_declared_is_a_note_naming_the_key(demo: Survey) -> None:
    # sand + silt + clay = 100: collinear unless `environment.compositions` makes log-ratios
    outcome = analyse(demo, settings=QUICK, hypotheses={"metals": ("Cu", "Zn"),
                                                        "texture": ("sand", "silt", "clay")})
    section = next(s for s in outcome.sections if s.key == "partition")
    note = next(n for n in section.notes if n.startswith("`hypotheses.texture`"))
    assert "Collinear columns" in note and "`environment.compositions`" in note
    assert "left out of this section" in note
    assert list(outcome.tables["partition_hypotheses"].index) == ["metals"]
    verdicts = outcome.tables["hypothesis_verdicts"]
    assert pd.isna(verdicts.loc["texture", "pure_fraction"])
    # declared, the composition enters as two log-ratios and the hypothesis is kept
    declared = analyse(demo, settings={**QUICK,
                                       "environment.compositions": (("sand", "silt", "clay"),)},
                       hypotheses={"metals": ("Cu", "Zn"), "texture": ("sand", "silt", "clay")})
    table = declared.tables["partition_hypotheses"]
    assert table.loc["texture", "variables"] == "ilr_1, ilr_2"


def test_too_many_variables_for_the_sites_is_a_note_or_a_skip_naming_the_key() -> None:
    truth = simulate_survey(n_sites=9, n_taxa=8, rng=4)
    env = truth.environment.set_index("site")
    survey = Survey(truth.community, env, truth.locations, censored="half-limit")
    wide = ("Cu", "Zn", "Pb", "Cd", "pH", "organic_matter", "conductivity", "sand")
    outcome = analyse(survey, settings=QUICK, hypotheses={"everything": wide,
                                                          "clay": ("clay",)})
    section = next(s for s in outcome.sections if s.key == "partition")
    note = next(n for n in section.notes if n.startswith("`hypotheses.everything`"))
    assert "9 sites cannot fit 8 predictor column(s)" in note
    assert "Name fewer variables in `hypotheses.everything`" in note
    only = analyse(survey, settings=QUICK, hypotheses={"everything": wide})
    reason = dict(only.skipped)["partition"]
    assert reason.startswith("no hypothesis can enter a linear model: `hypotheses.everything`")
