"""The soil and water sections of a report: texture classes, guideline quotients, the derived
mean quotient as a hypothesis variable, and the one rule for compositions.

Outside checks: the texture classes of the report equal `texture_class` (whose classes are
checked against the Soil Survey Manual, Soil Science Division Staff 2017, in
tests/data/test_texture.py); the quotients equal concentration / screening value by hand
(MacDonald, Ingersoll & Berger 2000, mean quotient); geopandas reads the GeoPackage (an outside
reader).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import gradients
from gradients import InputError
from gradients.report import init_project, run_project

QUICK_KEYS = 'count = 19\nseed = 3\n'


def test_demo_report_has_texture_and_screening_sections(demo_report: Path) -> None:
    import geopandas as gpd

    tables = demo_report / "tables"
    classes = pd.read_csv(tables / "texture_classes.csv", index_col="site")
    env = gradients.demo_survey().environment
    expected = gradients.texture_class(env["sand"], env["silt"], env["clay"])
    assert classes["texture_class"].tolist() == expected.astype(str).tolist()
    exceed = pd.read_csv(tables / "guideline_exceedances.csv", index_col="variable")
    # by hand: exceedances of the probable-effect values (Cu 149, Zn 459, Pb 128, Cd 4.98 mg/kg)
    survey = gradients.demo_survey()
    pec = {"Cu": 149.0, "Zn": 459.0, "Pb": 128.0, "Cd": 4.98}
    for var, value in pec.items():
        assert exceed.loc[var, "n_exceeded"] == int((survey.environment[var] > value).sum())
    quotients = pd.read_csv(tables / "guideline_quotients.csv", index_col="site")
    by_hand = np.mean([survey.environment[v] / pec[v] for v in pec], axis=0)
    assert quotients["mean_quotient"].to_numpy() == pytest.approx(by_hand, rel=1e-9)
    for name in ("texture_triangle", "guideline_quotient_map"):
        assert (demo_report / "figures" / f"{name}.svg").stat().st_size > 1000
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    assert 'id="texture"' in html and 'id="screening"' in html
    assert "not site-specific criteria; defer to the local regulator" in html
    gdf = gpd.read_file(demo_report / "sites.gpkg", layer="sites")
    assert {"texture_class", "mean_quotient", "n_exceeded", "exceedance"} <= set(gdf.columns)
    assert gdf.set_index("site").loc["FB01", "texture_class"] == expected["FB01"]
    info = json.loads((demo_report / "run.json").read_text(encoding="utf-8"))
    assert any("The screening table lists As, Cr, Hg, Ni" in d for d in info["decisions"])
    methods = (demo_report / "methods.md").read_text(encoding="utf-8")
    for phrase in ("USDA class definitions (Soil Science Division Staff 2017)",
                   "(MacDonald, Ingersoll & Berger 2000)", "read with the pint library"):
        assert phrase in methods


@pytest.fixture
def project(tmp_path: Path) -> Path:
    path = init_project(tmp_path / "p")
    text = path.read_text(encoding="utf-8").replace("count = 999\nseed = 1\n", QUICK_KEYS)
    text = text.replace("[analyses]\n", "[analyses]\nstarts = 2\ncorrelogram = false\n"
                        "distance_decay = false\nsurfaces = false\n")
    path.write_text(text, encoding="utf-8")
    return path


def test_mean_quotient_can_be_a_hypothesis_variable(project: Path, tmp_path: Path) -> None:
    text = project.read_text(encoding="utf-8")
    text = text.replace('contamination = ["Cu", "Zn", "Pb", "Cd"]\ntexture',
                        'contamination = ["mean_quotient"]\ntexture')
    project.write_text(text, encoding="utf-8")
    out = run_project(project, out=tmp_path / "r")
    mantel = pd.read_csv(out / "tables" / "mantel.csv")
    assert "contamination" in mantel.iloc[:, 0].tolist()
    info = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert any("was added as the variable 'mean_quotient'" in d for d in info["decisions"])
    vectors = pd.read_csv(out / "tables" / "vector_fits.csv", index_col=0)
    assert "mean_quotient" in vectors.index


def test_texture_sums_far_from_100_stop_the_run_unless_renormalised(project: Path,
                                                                    tmp_path: Path) -> None:
    env_file = project.parent / "data" / "environment.csv"
    env = pd.read_csv(env_file, dtype=str, keep_default_na=False)
    env.loc[0, "sand"] = "58.0"  # FB01: 58 + 24.9 + 7.1 = 90
    env.to_csv(env_file, index=False)
    text = project.read_text(encoding="utf-8").replace('compositions = [["sand", "silt", '
                                                       '"clay"]]', "compositions = []")
    project.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=r"`environment.texture`: .*FB01 \(sum 90\).*"
                       r"\[environment\] renormalise_compositions = true"):
        run_project(project, out=tmp_path / "r1")
    text = text.replace('texture = ["sand", "silt", "clay"]    #',
                        'renormalise_compositions = true\ntexture = ["sand", "silt", "clay"]    #')
    project.write_text(text, encoding="utf-8")
    out = run_project(project, out=tmp_path / "r2")
    info = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert any("renormalised" in d and "FB01 (sum 90)" in d for d in info["decisions"])


def test_project_keys_are_checked(project: Path) -> None:
    text = project.read_text(encoding="utf-8")
    project.write_text(text.replace('texture = ["sand", "silt", "clay"]',
                                    'texture = ["sand", "clay"]'), encoding="utf-8")
    with pytest.raises(InputError, match=r"`environment\.texture` must name three columns"):
        gradients.load_project(project)
    project.write_text(text.replace('screening = "data/screening.csv"',
                                    'screening = "data/none.csv"'), encoding="utf-8")
    with pytest.raises(InputError, match=r"`environment\.screening` names the file"):
        gradients.load_project(project)
