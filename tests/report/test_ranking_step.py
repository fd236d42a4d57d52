"""The report's ranking section: the demo's planted truth comes out as planted, the variables
enter as the project transforms them, and the project keys switch and restrict it."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gradients import InputError
from gradients.data import demo_survey
from gradients.distance import transform_environment
from gradients.report._demo import project_template
from gradients.report._pipeline import Context, run_steps
from gradients.report._project import project_from_dict
from gradients.report.steps import STEPS

METALS = ["log10(Cu)", "log10(Zn)", "log10(Pb)", "log10(Cd)"]
TEXTURE = ["ilr(sand | silt)", "ilr(sand, silt | clay)"]


def test_demo_planted_truth_comes_out_as_planted(demo_report: Path) -> None:
    # simulate_survey's planted truth (gradients/data/_demo.py): every taxon responds to the
    # contamination and to the fine fraction; pH and organic matter are pure noise
    table = pd.read_csv(demo_report / "tables" / "variable_ranking.csv", index_col="variable")
    order = list(table.index)
    assert set(order) == {*METALS, *TEXTURE, "pH", "organic_matter", "conductivity"}
    for planted in [*METALS, *TEXTURE]:
        for inert in ("pH", "organic_matter"):
            assert order.index(planted) < order.index(inert), (planted, inert, order)
    assert table["rank"].tolist() == list(range(1, len(table) + 1))
    assert table.loc[METALS, "collinear"].all()  # the metals share one source


def test_section_shows_what_was_computed(demo_report: Path) -> None:
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    assert "Which variables line up with turnover" in html
    assert "rank highest against community turnover; most of the turnover along" in html
    # the ranking's own permutation counts, said in the section, whatever permutations.count
    assert ("Permutations used here: 199 for the subset search, forward selection, vector "
            "fits and Mantel tests, and 99 per turnover predictor") in html
    assert "Collinearity caution:" in html and "ranking.permutations" in html
    for name in ("best_subsets", "turnover_predictors", "turnover_curves"):
        assert (demo_report / "tables" / f"{name}.csv").is_file()
    predictors = pd.read_csv(demo_report / "tables" / "turnover_predictors.csv",
                             index_col="predictor")
    assert "geography" in predictors.index  # the demo has locations
    for ext in ("png", "svg"):
        assert (demo_report / "figures" / f"turnover_curves.{ext}").stat().st_size > 1000
    methods = (demo_report / "methods.md").read_text(encoding="utf-8")
    for phrase in ("Clarke & Ainsworth 1993", "Ferrier et al. 2007", "Ramsay 1988",
                   "Blanchet, Legendre & Borcard 2008", "under each of 199 permutations",
                   "tested by 99 permutations", "variance inflation factor above 10",
                   "unless stated otherwise"):
        assert phrase in methods, phrase


def _context(**ranking: object) -> Context:
    import tomllib

    data = tomllib.loads(project_template(data_folder=str(Path(__file__).parents[2] / "gradients"
                                                          / "data" / "demo")))
    data.setdefault("ranking", {}).update(ranking)
    project = project_from_dict(data)
    return Context(settings=project.settings, hypotheses=project.hypotheses,
                   survey=demo_survey(), seed=3, n_resamples=19)


def _run(ctx: Context) -> None:
    wanted = {"community", "environment", "geography", "ranking"}
    run_steps(ctx, [s for s in STEPS if s.name in wanted])


def test_keys_restrict_the_candidates_and_set_the_permutations() -> None:
    ctx = _context(variables=["Cu", "sand", "silt", "clay", "pH"], permutations=29,
                   turnover_permutations=0)
    _run(ctx)
    assert not ctx.skipped
    (sec,) = [s for s in ctx.sections if s.key == "ranking"]
    table = sec.tables["variable_ranking"]
    assert set(table.index) == {"log10(Cu)", *TEXTURE, "pH"}
    assert any("Permutations used here: 29 for the subset search" in p for p in sec.paragraphs)
    assert sec.tables["turnover_predictors"]["pvalue"].isna().all()
    # the balances are the transform's own (transform_environment, Egozcue et al. 2003)
    env = ctx.survey.environment
    ilr = transform_environment(env[["sand", "silt", "clay"]],
                                {("sand", "silt", "clay"): "ilr"}).table
    res = ctx.results["ranking"]
    np.testing.assert_allclose(res.turnover.curves.query("variable == 'ilr(sand | silt)'")
                               ["value"].agg(["min", "max"]),
                               [ilr["ilr_1"].min(), ilr["ilr_1"].max()])


def test_switched_off_leaves_no_trace_and_bad_keys_are_named() -> None:
    import tomllib

    ctx = _context()
    ctx.settings["analyses.ranking"] = False
    _run(ctx)
    assert not [s for s in ctx.sections if s.key == "ranking"] and "ranking" not in ctx.results
    # variables the project names that cannot be ranked: refused before any analysis runs
    with pytest.raises(InputError, match=r"names part of the composition \['sand', 'silt', "
                                         r"'clay'\] \('sand'\)"):
        _run(_context(variables=["Cu", "sand"]))
    with pytest.raises(InputError, match="'habitat', which are not numeric"):
        _run(_context(variables=["Cu", "habitat"]))
    data = tomllib.loads(project_template())
    data["ranking"] = {"permutation": 5}
    with pytest.raises(InputError, match=r"Unknown key `permutation` in \[ranking\].*Did you "
                                         r"mean 'permutations'"):
        project_from_dict(data)
