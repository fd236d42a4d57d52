"""The ranking table: planted truth, each column against its own analysis or a reference
library, the sort rule, and the collinearity flags."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist
from scipy.stats import spearmanr

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.ranking import SORT_RULE, collinearity, rank_variables


@pytest.fixture(scope="module")
def planted():
    # validation/ranking_calibration.py's simulator: a community responding to v1 and v4
    from ranking_calibration import planted_survey

    d, env = planted_survey(31)
    return d, env, rank_variables(d, env, n_resamples=99, turnover_resamples=19, rng=5)


def test_planted_variables_rank_first(planted):
    _, _, res = planted
    assert set(res.order[:2]) == {"v1", "v4"}
    assert res.table["rank"].tolist() == list(range(1, 9))
    top = res.table.loc[["v1", "v4"]]
    assert top["in_best_subset"].all() and (top["importance_pvalue"] <= 0.1).all()
    assert res.notes[0] == SORT_RULE == res.sort_rule
    assert res.table["mean_rank"].is_monotonic_increasing


def test_columns_come_from_their_analyses(planted):
    d, env, res = planted
    t = res.table
    # the single-variable Mantel statistic is scipy's spearmanr of the dissimilarities and the
    # variable's distances, which is also the size-1 statistic of the subset search
    for v in env.columns:
        assert t.loc[v, "mantel"] == pytest.approx(
            spearmanr(d.condensed, pdist(env[[v]])).statistic, abs=1e-12)
    best1 = res.subsets.table.set_index("size").loc[1]
    assert t.loc[best1["variables"], "mantel"] == pytest.approx(best1["statistic"], abs=1e-12)
    # turnover importance and forward selection, as their own results give them
    for v in env.columns:
        assert t.loc[v, "importance"] == res.turnover.table.loc[v, "importance"]
    entered = res.selection.table[res.selection.table["entered"]]
    for _, row in entered.iterrows():
        assert t.loc[row["variable"], "selection_order"] == row["order"]
        assert t.loc[row["variable"], "r2_adjusted_gain"] == pytest.approx(row["gain"])
    assert t["selection_order"].isna().sum() == len(env.columns) - len(entered)
    np.testing.assert_allclose(t.loc[list(env.columns), "vector_r2"],
                               res.vectors.table.loc[list(env.columns), "r2"])


def test_sort_rule_is_the_mean_rank_of_five_measures(planted):
    # by hand: ranks of each measure (1 best, missing last, ties averaged), averaged
    _, _, res = planted
    t = res.table
    ranks = pd.DataFrame({
        "importance": (-t["importance"]).rank(),
        "mantel": (-t["mantel"]).rank(),
        "vector_r2": (-t["vector_r2"]).rank(),
        "first_best_size": t["first_best_size"].astype(float).fillna(np.inf).rank(),
        "selection_order": t["selection_order"].astype(float).fillna(np.inf).rank(),
    })
    np.testing.assert_allclose(ranks.mean(axis=1), t["mean_rank"])


def test_collinearity_flags_and_vif_match_statsmodels():
    # statsmodels.stats.outliers_influence.variance_inflation_factor on the design with a
    # constant; |r| > 0.8 by numpy.corrcoef
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    rng = np.random.default_rng(3)
    a = rng.normal(size=50)
    frame = pd.DataFrame({"a": a, "a_twin": a + rng.normal(0, 0.2, 50),
                          "b": rng.normal(size=50), "c": rng.normal(size=50),
                          "e": rng.normal(size=50)})
    frame["combo"] = frame["b"] + frame["c"] + frame["e"] + rng.normal(0, 0.15, 50)
    out = collinearity(frame)
    design = np.column_stack([np.ones(50), frame.to_numpy()])
    for j, name in enumerate(frame.columns, start=1):
        assert out.loc[name, "vif"] == pytest.approx(variance_inflation_factor(design, j),
                                                     rel=1e-8)
    assert out.loc["a", "collinear"] and out.loc["a_twin", "collinear"]
    assert out.loc["a", "collinear_with"].startswith("a_twin (r = 0.98")
    # combo is correlated with no part beyond 0.8, but is almost their sum: flagged by its VIF
    assert out.loc["combo", "collinear"] and "VIF above 10" in out.loc["combo", "collinear_with"]
    exact = frame.assign(sum_bc=frame["b"] + frame["c"])
    assert np.isinf(collinearity(exact).loc["sum_bc", "vif"])


def test_collinear_variables_are_named_in_the_notes():
    from ranking_calibration import planted_survey

    d, env = planted_survey(32)
    env = env.iloc[:, :4].assign(v1_copy=env["v1"] * 2 + 0.01 * np.arange(len(env)))
    res = rank_variables(d, env, n_resamples=19, turnover_resamples=0, rng=1)
    assert res.table.loc[["v1", "v1_copy"], "collinear"].all()
    assert any(n.startswith("v1, v1_copy are collinear") or n.startswith("v1_copy, v1 are")
               for n in res.notes)
    assert res.table["importance_pvalue"].isna().all()  # no turnover tests were asked for


def test_bad_input_is_explained():
    rng = np.random.default_rng(0)
    env = pd.DataFrame(rng.normal(size=(10, 2)), columns=["a", "b"])
    d = DistanceMatrix(pdist(env) / 10, env.index)
    with pytest.raises(InputError, match=r"'b' of `environment` have the same value"):
        rank_variables(d, env.assign(b=1.0))
    with pytest.raises(InputError, match=r"`n_resamples` must be a positive integer"):
        rank_variables(d, env, n_resamples=0)


def test_forward_selection_leaves_out_exact_combinations_and_needs_enough_sites():
    # the parts of a composition sum to 100: one is a linear combination of the others (and the
    # intercept), which a linear model cannot hold (the partition stage refuses it)
    from ranking_calibration import planted_survey

    d, env = planted_survey(33)
    env = env.iloc[:, :3].assign(part_a=np.linspace(10, 40, len(env)))
    env["part_b"] = 100 - env["part_a"] - 30 * (env["v0"] > 0)
    env["part_c"] = 100 - env["part_a"] - env["part_b"]
    res = rank_variables(d, env, n_resamples=19, turnover_resamples=0, rng=2)
    assert any(n.startswith("Forward selection left out part_c: exact linear") for n in res.notes)
    assert "part_c" not in set(res.selection.table["variable"])
    assert np.isinf(res.table.loc["part_c", "vif"]) and res.table.loc["part_c", "collinear"]
    # too few sites for the global model of every candidate: no forward selection at all
    few = d.subset(d.labels[:6])
    res = rank_variables(few, env.iloc[:6], n_resamples=19, turnover_resamples=0, rng=2)
    assert res.selection is None and res.table["selection_order"].isna().all()
    assert any(n.startswith("Forward selection was not run: 6 sites cannot fit the 5 ")
               for n in res.notes)
