"""``gradients plan``: the [plan] keys, the plan folder and its page, on the demo project."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from gradients import InputError, init_project, load_project
from gradients.cli import main
from gradients.planning._folder import HONESTY


@pytest.fixture(scope="module")
def demo_project(tmp_path_factory) -> Path:
    path = init_project(tmp_path_factory.mktemp("plan") / "proj")
    with open(path, "a", encoding="utf-8") as fh:
        fh.write("\n[plan]\nsites = [20, 30]\nsurveys = 3\npermutations = 19\n")
    return path


def test_plan_folder(demo_project: Path, tmp_path: Path) -> None:
    out = tmp_path / "plan"
    assert main(["plan", str(demo_project), "--sites", "20,70", "--out", str(out)]) == 0
    power = pd.read_csv(out / "tables" / "power.csv")
    assert set(power["hypothesis"]) == {"contamination", "texture", "water_and_organic"}
    # 20 sites: simulation and a subsample of the 60-site pilot; 70: simulation only
    assert sorted(map(tuple, power[["n_sites", "method"]].drop_duplicates().to_numpy())) == [
        (20, "simulation"), (20, "subsample"), (70, "simulation")]
    assert power["n_surveys"].eq(3).all()
    assert ((power["power_low"] <= power["power"]) & (power["power"] <= power["power_high"])).all()
    assert (out / "figures" / "power_curve_partial_mantel.svg").is_file()
    html = (out / "report.html").read_text(encoding="utf-8")
    assert HONESTY.split(":")[0] in html and "Wilson" in html
    assert "licensed professionals" in html  # the report's caution
    methods = (out / "methods.md").read_text(encoding="utf-8")
    assert "negative binomial GLM" in methods and "Besag & Clifford 1991" in methods
    info = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert info["plan"]["surveys"] == 3 and info["permutations"] == 19
    # an existing folder is refused without --force (nothing is recomputed)
    assert main(["plan", str(demo_project), "--out", str(out)]) == 2


def test_plan_keys(tmp_path: Path) -> None:
    from gradients.report._project import project_from_dict

    base = {"inputs": {"community": __file__, "environment": __file__}}
    # docs/project-file.md: [plan] sites is a list of whole numbers
    with pytest.raises(InputError, match=r"`plan\.sites` must be a list of whole numbers"):
        project_from_dict({**base, "plan": {"sites": ["many"]}})
    with pytest.raises(InputError, match=r"Unknown key `site` in \[plan\]"):
        project_from_dict({**base, "plan": {"site": [20]}})
    p = project_from_dict({**base, "plan": {"sites": 30, "target": 0.9}})
    assert p["plan.sites"] == (30,) and p["plan.target"] == 0.9
    assert load_project  # the public loader reads the same schema


def test_bad_site_counts_on_the_command_line(demo_project: Path, tmp_path: Path,
                                             capsys) -> None:
    assert main(["plan", str(demo_project), "--sites", "3,20", "--out",
                 str(tmp_path / "x")]) == 2
    assert "below 5" in capsys.readouterr().err
    assert main(["plan", str(demo_project), "--sites", "twenty", "--out",
                 str(tmp_path / "x")]) == 2
    assert "--sites must be whole numbers" in capsys.readouterr().err
