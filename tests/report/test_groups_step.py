"""The report's "Site classes compared": what it shows, where, and what it says it did.

The numbers are the groups stage's (checked in tests/groups against scipy, statsmodels and the
published definitions); these tests check that the section carries them unchanged, in the
place and words the documentation (docs/groups.md, docs/project-file.md) promises.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from gradients import dispersion_test, indicator_taxa, permanova
from gradients.data import Survey, simulate_survey
from gradients.distance import dissimilarity
from gradients.report import analyse
from gradients.report._pipeline import rng_for
from gradients.report.steps import SECTION_ORDER


@pytest.fixture(scope="module")
def small() -> Survey:
    truth = simulate_survey(n_sites=24, n_taxa=12, rng=5)
    return truth.survey(censored="half-limit")


def _section(outcome, key: str = "groups"):
    found = [s for s in outcome.sections if s.key == key]
    return found[0] if found else None


def test_the_demo_section_holds_the_tests_the_taxa_and_the_tree(demo_report: Path) -> None:
    tables = demo_report / "tables"
    perm = pd.read_csv(tables / "permanova.csv", index_col="term")
    assert list(perm.index) == ["habitat", "zone", "residual", "total"]
    assert perm.loc["total", "r2"] == pytest.approx(1.0)
    disp = pd.read_csv(tables / "dispersion.csv")
    assert list(disp["term"]) == ["habitat", "zone"]
    full = pd.read_csv(tables / "indicator_taxa.csv")
    top = pd.read_csv(tables / "indicator_taxa_top.csv")
    assert len(full) == 2 * 40  # every taxon, for each class variable
    assert top.groupby(["variable", "group"]).size().max() == 5  # [groups] top_taxa
    clusters = pd.read_csv(tables / "site_clusters.csv", index_col="site")
    assert clusters["cluster"].nunique() == 4  # [groups] clusters in the demo project
    for name in ("site_dendrogram", "dispersion_habitat", "dispersion_zone"):
        assert (demo_report / "figures" / f"{name}.png").is_file(), name
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    assert "Site classes compared" in html
    methods = (demo_report / "methods.md").read_text(encoding="utf-8")
    for source in ("PERMANOVA (Anderson 2001", "Anderson 2006", "Dufrêne & Legendre 1997",
                   "Rousseeuw 1987", "Sokal & Rohlf 1962"):
        assert source in methods, source


def test_section_carries_the_stage_numbers_unchanged(small) -> None:
    settings = {"permutations.count": 49, "analyses.starts": 2,
                "environment.factors": ("zone",)}
    outcome = analyse(small, settings=settings, hypotheses={"metals": ("Cu",)})
    sec = _section(outcome)
    # the same analyses called directly, with the streams the report derives from its seed
    d = dissimilarity(small.community, "bray-curtis")
    direct = permanova(d, small.environment[["zone"]], terms=["zone"], n_resamples=49,
                       rng=rng_for(1, "permanova"), dispersion=False)
    table = sec.tables["permanova"].set_index("term")
    pd.testing.assert_series_equal(table["pvalue"], direct.table.set_index("term")["pvalue"])
    disp = dispersion_test(d, small.environment["zone"], n_resamples=49,
                           rng=rng_for(1, "dispersion:zone"))
    assert sec.tables["dispersion"].set_index("term").loc["zone", "pvalue"] == disp.pvalue
    ind = indicator_taxa(small.community, small.environment["zone"].astype(object),
                         n_resamples=49, rng=rng_for(1, "indicators:zone"))
    got = sec.tables["indicator_taxa"].drop(columns="variable").reset_index(drop=True)
    pd.testing.assert_frame_equal(got, ind.table[got.columns])
    assert "site_dendrogram" not in sec.figures  # clustering is off by default


def test_order_switch_and_clustering_keys(small) -> None:
    base = {"permutations.count": 19, "analyses.starts": 2}
    outcome = analyse(small, settings={**base, "groups.cluster": True, "groups.clusters": 3,
                                       "groups.contiguous": "space"},
                      hypotheses={"metals": ("Cu",)})
    keys = [s.key for s in outcome.sections]
    assert keys.index("groups") == keys.index("factors") + 1
    assert SECTION_ORDER.index("groups") == SECTION_ORDER.index("factors") + 1
    sec = _section(outcome)
    assert "site_dendrogram" in sec.figures
    assert sec.tables["site_clusters"]["cluster"].nunique() == 3
    assert "clusters_by_habitat" in sec.tables
    off = analyse(small, settings={**base, "analyses.groups": False},
                  hypotheses={"metals": ("Cu",)})
    assert _section(off) is None


def test_bad_designs_are_refused_or_skip_the_clustering_with_the_reason(small) -> None:
    from gradients.report._pipeline import PreflightError

    base = {"permutations.count": 19, "analyses.starts": 2}
    # a term the project names but the table does not have: refused before any analysis
    with pytest.raises(PreflightError, match=r"`groups\.terms` names 'depth'"):
        analyse(small, settings={**base, "groups.terms": ("zone", "depth")},
                hypotheses={"metals": ("Cu",)})
    # Ward's method on Bray-Curtis: the clustering alone is skipped, with the reason
    ward = analyse(small, settings={**base, "groups.cluster": True, "groups.cluster_method":
                                    "ward"}, hypotheses={"metals": ("Cu",)})
    assert _section(ward) is not None and "site_clusters" not in _section(ward).tables
    assert "Ward's method needs dissimilarities" in dict(ward.skipped)["site clusters"]


def test_interaction_terms_say_what_they_test(small) -> None:
    settings = {"permutations.count": 19, "analyses.starts": 2,
                "environment.factors": ("zone", "habitat"),
                "groups.terms": ("zone", "habitat", "zone:habitat")}
    sec = _section(analyse(small, settings=settings, hypotheses={"metals": ("Cu",)}))
    assert "zone:habitat" in set(sec.tables["permanova"]["term"])
    assert any("it is the test of impact" in n for n in sec.notes)
