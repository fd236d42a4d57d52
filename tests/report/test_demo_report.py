"""The whole job on the demo data: every output file, determinism, the planted truth."""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import pandas as pd
import pytest

from gradients import InputError
from gradients.report import run_demo

EXPECTED_TABLES = {
    "site_scores", "taxon_scores", "nmds_starts", "mantel", "partial_mantel",
    "matrix_regression", "matrix_regression_fit", "correlogram", "distance_decay",
    "distance_decay_curve", "hypothesis_verdicts", "predictor_correlations", "planted_truth",
    "mantel_spatial_check", "partial_mantel_spatial_check",
}
EXPECTED_FIGURES = {"ordination_biplot", "shepard", "correlogram", "distance_decay",
                    "hypotheses"}


def test_demo_writes_every_file(demo_report: Path) -> None:
    for name in ("report.html", "methods.md", "run.json", "tables.xlsx", "sites.gpkg"):
        assert (demo_report / name).is_file(), name
    tables = {p.stem for p in (demo_report / "tables").glob("*.csv")}
    assert EXPECTED_TABLES <= tables
    figures = {p.stem for p in (demo_report / "figures").iterdir()}
    assert EXPECTED_FIGURES <= figures
    for stem in figures:
        for ext in ("png", "svg"):
            assert (demo_report / "figures" / f"{stem}.{ext}").stat().st_size > 1000
    # nothing but the report folder was left beside it (no temporary folders)
    assert [p.name for p in demo_report.parent.iterdir()] == ["report"]


def test_run_json_records_the_run(demo_report: Path, quick: dict) -> None:
    info = json.loads((demo_report / "run.json").read_text(encoding="utf-8"))
    assert info["seed"] == 7 and info["permutations"] == quick["n_resamples"]
    for dep in ("gradients", "python", "numpy", "scipy", "pandas", "matplotlib", "geopandas"):
        assert info["software"][dep]
    assert set(info["inputs"]) == {"community", "environment", "locations", "network"}
    assert all(len(v["sha256"]) == 64 for v in info["inputs"].values())
    assert info["parameters"]["community.dissimilarity"] == "bray-curtis"
    assert info["parameters"]["analyses.starts"] == quick["overrides"]["analyses.starts"]
    assert "ordination" in info["timings"] and "writing" in info["timings"]
    assert sorted(info["files"]) == info["files"]
    for f in info["files"]:
        assert (demo_report / f).is_file(), f


def test_workbook_has_a_sheet_per_table(demo_report: Path) -> None:
    from openpyxl import load_workbook

    wb = load_workbook(demo_report / "tables.xlsx", read_only=True)
    n_csv = len(list((demo_report / "tables").glob("*.csv")))
    assert wb.sheetnames[0] == "contents" and len(wb.sheetnames) == n_csv + 1


def test_tables_are_keyed_by_what_their_rows_are(demo_report: Path) -> None:
    # common practice for tidy tables: a row is named by its own keys, never by a row number
    import pandas as pd

    for path in sorted((demo_report / "tables").glob("*.csv")):
        head = pd.read_csv(path, nrows=0).columns
        assert head[0] not in ("index", "Unnamed: 0"), path.name
    centroids = pd.read_csv(demo_report / "tables" / "factor_centroids.csv")
    assert list(centroids.columns[:2]) == ["factor", "level"]
    assert not centroids.duplicated(["factor", "level"]).any()


def test_geopackage_has_sites_and_scores(demo_report: Path) -> None:
    import geopandas as gpd

    gdf = gpd.read_file(demo_report / "sites.gpkg", layer="sites")
    assert len(gdf) == 60 and {"site", "axis1", "axis2"} <= set(gdf.columns)
    assert gdf.crs is not None and gdf.crs.to_epsg() == 4326
    with sqlite3.connect(demo_report / "sites.gpkg") as con:  # an OGC GeoPackage
        assert con.execute("select table_name from gpkg_contents").fetchall() == [("sites",)]


def test_methods_paragraph_says_what_was_run(demo_report: Path, quick: dict) -> None:
    text = (demo_report / "methods.md").read_text(encoding="utf-8")
    for phrase in ("gradients 0.1.0", "60 sites and 40 taxa", "Bray-Curtis",
                   "stress-1 =", f"{quick['n_resamples']} permutations", "random seed 7",
                   "Cd: 6 of 60 values were below a detection limit", "Partial Mantel",
                   "not corrected for multiple testing", "not site-specific criteria",
                   "local regulator and licensed professionals"):
        assert phrase in text, phrase


def test_demo_recovers_the_planted_truth(tmp_path: Path) -> None:
    # The generator (gradients.data.simulate_survey, its docstring) plants a strong
    # contamination and a moderate texture effect and none for pH / organic matter /
    # conductivity; the demo as a user runs it (default 999 permutations, seed 1) must say so.
    # (The quick 99-permutation report cannot: Holm-adjusted p-values of the moderate texture
    # effect then sit near 0.05 by permutation noise alone.)
    report = run_demo(tmp_path / "report")
    verdicts = pd.read_csv(report / "tables" / "hypothesis_verdicts.csv",
                           index_col="hypothesis")
    assert verdicts.loc["contamination", "verdict"] == "supported"
    assert verdicts.loc["texture", "verdict"] == "supported"
    assert verdicts.loc["water_and_organic", "verdict"] == "not supported"
    truth = pd.read_csv(report / "tables" / "planted_truth.csv", index_col="effect")
    assert truth.loc[["contamination", "texture", "water_and_organic"], "recovered"].all()
    # the bank zones (a moderate effect of their own, simulate_survey's docstring) are found by
    # the PERMANOVA of "Site classes compared"
    assert bool(truth.loc["zone", "recovered"])
    assert "PERMANOVA pseudo-F" in truth.loc["zone", "found"]


def test_same_seed_gives_byte_identical_tables(demo_report: Path, tmp_path: Path,
                                               quick: dict) -> None:
    again = run_demo(tmp_path / "again", **quick)
    first = sorted((demo_report / "tables").glob("*.csv"))
    assert [p.name for p in first] == sorted(p.name for p in (again / "tables").glob("*.csv"))
    for p in first:
        assert p.read_bytes() == (again / "tables" / p.name).read_bytes(), p.name
    assert (demo_report / "methods.md").read_bytes() == (again / "methods.md").read_bytes()


def test_existing_folder_needs_force(demo_report: Path, tmp_path: Path) -> None:
    with pytest.raises(InputError, match="already exists"):
        run_demo(demo_report)


def test_seed_is_deprecated_for_rng_with_the_same_numbers(demo_report: Path, tmp_path: Path,
                                                          quick: dict) -> None:
    # run_demo(seed=) is the old name of an integer rng (SPEC 7: rng takes an int, a
    # Generator or None): same int, byte-identical tables, and a DeprecationWarning.
    args = {k: v for k, v in quick.items() if k != "rng"}
    with pytest.warns(DeprecationWarning, match=r"run_demo\(seed=\) is deprecated"):
        old = run_demo(tmp_path / "old", seed=quick["rng"], **args)
    for p in sorted((demo_report / "tables").glob("*.csv")):
        assert p.read_bytes() == (old / "tables" / p.name).read_bytes(), p.name
    with pytest.raises(InputError, match="either `rng` or the deprecated `seed`"):
        run_demo(tmp_path / "both", rng=3, seed=4)


def test_rng_generator_or_none_records_the_seed_it_drew(tmp_path: Path) -> None:
    import numpy as np

    from gradients.report._demo import demo_seed

    assert demo_seed(7) == 7 and demo_seed(np.int64(7)) == 7
    # a Generator gives the integer drawn from it, as numpy draws it
    assert demo_seed(np.random.default_rng(3)) == int(
        np.random.default_rng(3).integers(0, 2**32))
    assert 0 <= demo_seed(None) < 2**32
    for bad in (-1, True, "7"):
        with pytest.raises(InputError, match="`rng` must be"):
            demo_seed(bad)
    report = run_demo(tmp_path / "g", rng=np.random.default_rng(3), n_resamples=9,
                      overrides={"analyses.starts": 2, "analyses.surfaces": False})
    info = json.loads((report / "run.json").read_text(encoding="utf-8"))
    assert info["seed"] == demo_seed(np.random.default_rng(3))
    assert f"random seed {info['seed']}" in (report / "methods.md").read_text(encoding="utf-8")
