"""Advice in input errors is given in the project file's own keys when a project is run."""

from __future__ import annotations

import pytest

from gradients import InputError
from gradients.report import init_project, load_project
from gradients.report._run import read_project_survey


def test_unmatched_site_advice_names_the_project_key(tmp_path):
    init_project(tmp_path / "p")
    env = next((tmp_path / "p").rglob("environment.csv"))
    lines = env.read_text(encoding="utf-8").splitlines()
    dropped = lines[1].split(",")[0]
    env.write_text("\n".join(lines[:1] + lines[2:]) + "\n", encoding="utf-8")
    project = load_project(next((tmp_path / "p").glob("*.toml")))
    with pytest.raises(InputError, match='unmatched_sites = "keep-shared"') as info:
        read_project_survey(project)
    assert "shared_sites_only" not in str(info.value)
    assert dropped in str(info.value) and dropped in info.value.sites
