"""Other shapes of project: PCoA, strata and covariables; no locations; one hypothesis.

The report shows only what was computed: analyses that cannot run have no section and are
listed with the reason.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from gradients.data import Survey, simulate_survey
from gradients.report import analyse, write_report


@pytest.fixture(scope="module")
def small() -> tuple[pd.DataFrame, pd.DataFrame, object]:
    truth = simulate_survey(n_sites=18, n_taxa=10, rng=11)
    env = truth.environment.set_index("site")
    return truth.community, env, truth.locations


def test_pcoa_with_strata_and_covariables(small, tmp_path: Path) -> None:
    community, env, locations = small
    survey = Survey(community, env, locations, censored="half-limit")
    settings = {"analyses.ordination": "pcoa", "design.strata": "habitat",
                "design.covariables": ("organic_matter",), "environment.log10": ("Cu", "Zn"),
                "permutations.count": 19, "permutations.seed": 2, "analyses.surfaces": False}
    outcome = analyse(survey, settings=settings,
                      hypotheses={"metals": ("Cu", "Zn"), "texture": ("sand", "clay")})
    keys = [s.key for s in outcome.sections]
    assert keys[:3] == ["verdicts", "ranking", "ordination"]
    assert "surfaces" not in keys
    # habitat is the strata column: of the categorical columns only the bank zone is fitted
    assert list(outcome.tables["factor_fits"].index) == ["zone"]
    assert "pcoa_axes" in outcome.tables and "nmds_starts" not in outcome.tables
    pm = outcome.tables["partial_mantel"]
    assert pm.loc["metals", "controls"] == "texture, covariables, geography"
    assert "pvalue_spatial" not in pm.columns  # no spatial null within strata
    verdicts = outcome.tables["hypothesis_verdicts"]
    assert verdicts["caveats"].str.contains("small sample \\(18 sites\\)").all()
    assert "permuting sites within habitat" in outcome.methods
    assert "Sites per habitat:" in outcome.methods
    # the missing spatial p-values are explained in project-file words, not Python arguments
    notes = [n for sec in outcome.sections for n in sec.notes]
    assert any("with `design.strata` set, the spatially constrained null" in n for n in notes)
    assert not any("spatial_null=" in n for n in notes)
    folder = write_report(outcome, tmp_path / "r")
    assert (folder / "sites.gpkg").is_file()


def test_without_locations_space_is_not_claimed(small, tmp_path: Path) -> None:
    community, env, _ = small
    survey = Survey(community, env, None, censored="half-limit")
    settings = {"permutations.count": 19, "analyses.starts": 2}
    outcome = analyse(survey, settings=settings, hypotheses={"metals": ("Cu", "Zn", "Pb")})
    keys = {s.key for s in outcome.sections}
    assert {"correlogram", "distance_decay", "partial_mantel"}.isdisjoint(keys)
    assert {"verdicts", "mantel", "regression", "ordination", "vectors"} <= keys
    skipped = dict(outcome.skipped)
    assert skipped["correlogram"] == "no site locations were given"
    assert skipped["distance_decay"] == "no site locations were given"
    verdicts = outcome.tables["hypothesis_verdicts"]
    assert "mantel_r" in verdicts and "partial_mantel_r" not in verdicts
    assert "space not controlled" in verdicts.loc["metals", "caveats"]
    folder = write_report(outcome, tmp_path / "r")
    assert not (folder / "sites.gpkg").exists()
    assert not list((folder / "figures").glob("correlogram*"))
    html = (folder / "report.html").read_text(encoding="utf-8")
    assert 'id="correlogram"' not in html and "no site locations were given" in html
    info = json.loads((folder / "run.json").read_text(encoding="utf-8"))
    assert {"analysis": "correlogram", "reason": "no site locations were given"} in info[
        "skipped"]


def test_switched_off_analyses_leave_no_trace(small, tmp_path: Path) -> None:
    community, env, locations = small
    survey = Survey(community, env, locations, censored="half-limit")
    off = {f"analyses.{k}": False for k in ("vectors", "factors", "surfaces", "mantel",
                                            "partial_mantel", "regression", "correlogram",
                                            "distance_decay", "partition", "verdicts", "ranking",
                                            "groups")}
    outcome = analyse(survey, settings={**off, "permutations.count": 9,
                                        "analyses.starts": 2},
                      hypotheses={"metals": ("Cu",)})
    assert [s.key for s in outcome.sections] == ["ordination"]
    assert outcome.skipped == [] and outcome.summary == []


def test_sites_at_one_location_are_refused_before_the_analyses(small, tmp_path: Path) -> None:
    # Every site at the same coordinates: distances in space are all zero. The locations are
    # refused with the key to change, before any analysis runs (not a run without space).
    import geopandas as gpd
    from shapely.geometry import Point

    from gradients.report._pipeline import PreflightError

    community, env, locations = small
    same = gpd.GeoDataFrame(index=locations.index, geometry=[Point(9.4, 61.1)] * len(locations),
                            crs=locations.crs)
    survey = Survey(community, env, same, censored="half-limit")
    with pytest.raises(PreflightError, match=r"Every site has the same location.*"
                                             r"`\[inputs\] locations`"):
        analyse(survey, settings={"permutations.count": 19, "analyses.starts": 2},
                hypotheses={"metals": ("Cu", "Zn", "Pb")})


def test_methods_name_gower_for_a_hypothesis_with_categories(small) -> None:
    community, env, locations = small
    survey = Survey(community, env, locations, censored="half-limit")
    outcome = analyse(survey, settings={"permutations.count": 9, "analyses.starts": 2,
                                        "analyses.surfaces": False, "environment.factors": ()},
                      hypotheses={"metals": ("Cu", "Zn"), "site_type": ("habitat", "pH")})
    assert "For metals, environmental distances between sites were Euclidean" in outcome.methods
    assert "For site_type (with categorical variables), environmental distances were Gower" \
        in outcome.methods


def test_zero_before_log10_names_the_project_key(small) -> None:
    from gradients import InputError

    community, env, locations = small
    env = env.copy()
    env.iloc[2, env.columns.get_loc("Zn")] = 0.0
    survey = Survey(community, env, locations, censored="half-limit")
    with pytest.raises(InputError, match=r"column 'Zn' has 1 zero.*Remove the column from "
                                         r"`\[environment\] log10`"):
        analyse(survey, settings={"permutations.count": 9, "environment.log10": ("Zn",)},
                hypotheses={"metals": ("Zn",)})
