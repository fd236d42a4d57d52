"""The before/after-control/impact example: its data are what its script makes, and its project
runs and finds the planted impact in the interaction term.

Sources: the design (PERMANOVA with period x treatment, sites as strata; the interaction is the
impact test) follows Anderson (2001, Austral Ecology 26: 32) and Anderson & ter Braak (2003, J.
Stat. Comput. Simul. 73: 85) as described in docs/groups.md; the planted effects are written in
examples/baci/make_data.py.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pandas as pd

from gradients import load_project, permanova
from gradients.distance import dissimilarity

ROOT = Path(__file__).resolve().parents[1]
HERE = ROOT / "examples" / "baci"


def _script():
    spec = importlib.util.spec_from_file_location("baci_make_data", HERE / "make_data.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_files_equal_what_the_script_makes(tmp_path):
    community, environment = _script().make_tables()
    community.to_csv(tmp_path / "community.csv", lineterminator="\n")
    environment.to_csv(tmp_path / "environment.csv", index=False, lineterminator="\n")
    for name in ("community.csv", "environment.csv"):
        assert (tmp_path / name).read_bytes() == (HERE / name).read_bytes(), name


def test_the_interaction_finds_the_planted_impact():
    community = pd.read_csv(HERE / "community.csv", index_col="sample")
    env = pd.read_csv(HERE / "environment.csv", index_col="sample")
    d = dissimilarity(community, "bray-curtis")
    res = permanova(d, env[["period", "treatment"]],
                    terms=["period", "treatment", "period:treatment"], strata=env["site"],
                    n_resamples=199, rng=1, dispersion=False, pairwise=False)
    assert res.pvalue["period:treatment"] <= 0.01  # planted: 12 taxa change at impact sites
    # without the impact (the same script, impact switched off) the interaction is not found
    module = _script()
    module_impact = module.SENSITIVE, module.TOLERANT
    try:
        module.SENSITIVE, module.TOLERANT = range(0), range(0)
        c0, e0 = module.make_tables()
    finally:
        module.SENSITIVE, module.TOLERANT = module_impact
    null = permanova(dissimilarity(c0, "bray-curtis"), e0.set_index("sample")[["period",
                                                                               "treatment"]],
                     terms=["period", "treatment", "period:treatment"],
                     strata=e0.set_index("sample")["site"], n_resamples=199, rng=1,
                     dispersion=False, pairwise=False)
    assert null.pvalue["period:treatment"] > 0.05


def test_the_project_runs_and_says_the_interaction_is_the_impact_test(tmp_path):
    from gradients.report._run import analyse, read_project_survey

    project = load_project(HERE / "project.toml")
    survey = read_project_survey(project)
    settings = {**project.settings, "permutations.count": 199, "analyses.starts": 3}
    outcome = analyse(survey, settings=settings, hypotheses=project.hypotheses)
    (groups,) = [s for s in outcome.sections if s.key == "groups"]
    assert groups.title == "Site classes compared"
    table = groups.tables["permanova"].set_index("term")
    assert table.loc["period:treatment", "pvalue"] <= 0.01
    assert any("it is the test of impact" in n for n in groups.notes)
    assert any("'treatment' do(es) not vary within the strata" in n for n in groups.notes)
    assert "dispersion" in groups.tables and "indicator_taxa" in groups.tables
