"""Best-subset search: every subset's statistic against scipy, the selection-aware null against
a plain search per permutation, planted truth, the stepwise switch and input errors."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist
from scipy.stats import pearsonr, spearmanr

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.permutation._threads import numba_threads
from gradients.ranking import EXHAUSTIVE_LIMIT, subset_search
from gradients.ranking._inputs import zscores
from gradients.ranking._subsets import SubsetProblem


def _survey(n=25, p=5, seed=0, ties=False):
    rng = np.random.default_rng(seed)
    values = rng.normal(size=(n, p))
    if ties:  # ordinal scores 1..4: many equal differences, so many tied distances
        values = rng.integers(1, 5, size=(n, p)).astype(float)
    labels = [f"site{i:02d}" for i in range(n)]
    env = pd.DataFrame(values, index=labels, columns=[f"v{j}" for j in range(p)])
    z = zscores(env.to_numpy())
    d = DistanceMatrix(pdist(z[:, [0, 2]]) + rng.uniform(0, 0.8, n * (n - 1) // 2), labels)
    return d, env, z


def _subsets(p):
    for size in range(1, p + 1):
        yield from itertools.combinations(range(p), size)


def _pdist(x, cols, ties):
    # z-scored Euclidean distances; with ties, pdist's standardised Euclidean distance of the
    # raw values (scipy 'seuclidean' with V = the sample variances), which equals it and keeps
    # equal differences equal (z-scores would split some ties by rounding)
    if ties:
        return pdist(x[:, cols], "seuclidean", V=x[:, cols].var(axis=0, ddof=1))
    return pdist(zscores(x)[:, cols])


@pytest.mark.parametrize("ties", [False, True])
def test_every_subset_statistic_equals_spearmanr_of_pdist(ties):
    # scipy.stats.spearmanr (average ranks for ties) between the community dissimilarities and
    # scipy.spatial.distance.pdist of the subset's z-scores, for every one of the 31 subsets,
    # both through the Gray-code kernel and through the one-subset kernel
    d, env, _ = _survey(ties=ties)
    x = env.to_numpy()
    problem = SubsetProblem(d, x, ranks=True)
    expected = {sum(1 << v for v in s): spearmanr(d.condensed, _pdist(x, list(s), ties)).statistic
                for s in _subsets(5)}
    _, stats, _, _ = problem.gray(1, 32, 5, write=False)
    gray = {i ^ (i >> 1): stats[i - 1] for i in range(1, 32)}
    rows, direct = problem.masks(list(expected))
    for k, (mask, value) in enumerate(expected.items()):
        assert gray[mask] == pytest.approx(value, abs=1e-12)
        assert direct[k] == pytest.approx(value, abs=1e-12)
        assert rows[k] @ problem.community == pytest.approx(value, abs=1e-12)


def test_pearson_statistic_equals_pearsonr_of_pdist():
    # scipy.stats.pearsonr between the dissimilarities and pdist (Euclidean) of the z-scores
    d, env, z = _survey(seed=4)
    problem = SubsetProblem(d, env.to_numpy(), ranks=False)
    _, stats, _, _ = problem.gray(1, 32, 5, write=False)
    for i in range(1, 32):
        cols = [v for v in range(5) if ((i ^ (i >> 1)) >> v) & 1]
        assert stats[i - 1] == pytest.approx(pearsonr(d.condensed, pdist(z[:, cols])).statistic,
                                             abs=1e-12)


def test_table_holds_the_best_subset_of_each_size():
    # two ways: the best of each size by brute force over scipy's statistics
    d, env, z = _survey(n=20, p=6, seed=2)
    res = subset_search(d, env, n_resamples=19, rng=1)
    for size, members, stat in zip(res.table["size"], res.subsets, res.table["statistic"],
                                   strict=True):
        values = {s: spearmanr(d.condensed, pdist(z[:, list(s)])).statistic
                  for s in itertools.combinations(range(6), size)}
        best = max(values, key=values.get)
        assert members == tuple(env.columns[list(best)])
        assert stat == pytest.approx(values[best], abs=1e-12)
        assert res.table.set_index("size").loc[size, "n_subsets"] == math.comb(6, size)
    assert res.n_subsets == 63 and res.search == "exhaustive"
    assert res.statistic == res.table["statistic"].max()
    assert " + ".join(res.best) in res.table["variables"].tolist()


def test_selection_aware_null_repeats_the_whole_search():
    # two ways: the batched null statistic for a few site orders equals a plain search of
    # every subset (scipy spearmanr + pdist) of the community rearranged with np.ix_
    d, env, z = _survey(n=15, p=4, seed=5)
    sq = d.square()
    res = subset_search(d, env, n_resamples=7, rng=3)
    from gradients.permutation import permutation_plan

    plan = permutation_plan(15, n_resamples=7, rng=3, site_labels=d.labels)
    orders = plan.batch(0)
    for b, order in enumerate(orders):
        permuted = DistanceMatrix.from_square(sq[np.ix_(order, order)]).condensed
        best = max(spearmanr(permuted, pdist(z[:, list(s)])).statistic for s in _subsets(4))
        assert res.null_distribution[b] == pytest.approx(best, abs=1e-12)


def test_planted_truth_two_of_eight_variables():
    # a community responding to v1 and v4 only (validation/ranking_calibration.py's
    # simulator): the best subset is those two
    from ranking_calibration import PLANTED, planted_survey

    for seed in (11, 12, 13):
        d, env = planted_survey(seed)
        res = subset_search(d, env, n_resamples=99, rng=seed)
        assert tuple(sorted(res.best)) == PLANTED
        assert res.pvalue <= 0.01


def test_selection_aware_pvalue_is_calibrated_and_naive_is_not():
    # Theory: under the null P(p <= 0.05) = 0.05 for (b + 1)/(P + 1) when the statistic is the
    # one searched for (Phipson & Smyth 2010); the count of rejections in 300 null data sets
    # must fall in the 99 % binomial interval (scipy.stats.binom). The naive p-value of the
    # chosen subset, which ignores the search, must reject well above it.
    from ranking_calibration import null_subset_pvalues
    from scipy import stats

    datasets = 300
    p = np.array([null_subset_pvalues(7 * s + 3) for s in range(datasets)])
    lo, hi = stats.binom.interval(0.99, datasets, 0.05)
    assert lo <= np.sum(p[:, 0] <= 0.05) <= hi, np.sum(p[:, 0] <= 0.05)
    assert np.sum(p[:, 1] <= 0.05) > 2 * hi, np.sum(p[:, 1] <= 0.05)


def test_stepwise_beyond_the_limit_with_a_note():
    rng = np.random.default_rng(8)
    n, p = 12, EXHAUSTIVE_LIMIT + 1
    env = pd.DataFrame(rng.normal(size=(n, p)), columns=[f"x{j}" for j in range(p)])
    z = zscores(env.to_numpy())
    d = DistanceMatrix(pdist(z[:, [3, 9]]), env.index)
    res = subset_search(d, env, n_resamples=9, rng=1)
    assert res.search == "stepwise"
    assert res.notes[0].startswith(f"Stepwise search: {p} variables exceed the exhaustive limit "
                                   f"of {EXHAUSTIVE_LIMIT}")
    # the planted pair gives a perfect rank correlation: the stepwise search finds it
    assert sorted(res.best) == ["x3", "x9"] and res.statistic == pytest.approx(1.0)
    with pytest.raises(InputError, match=r"at most 16 variables are searched exhaustively"):
        subset_search(d, env, search="exhaustive")


def test_stepwise_agrees_with_exhaustive_on_planted_data():
    from ranking_calibration import planted_survey

    d, env = planted_survey(21)
    a = subset_search(d, env, n_resamples=19, rng=2)
    b = subset_search(d, env, n_resamples=19, rng=2, search="stepwise")
    assert a.best == b.best and a.statistic == pytest.approx(b.statistic, abs=1e-12)
    assert b.n_subsets < a.n_subsets


def test_results_do_not_depend_on_threads_or_site_order():
    d, env, _ = _survey(n=30, p=7, seed=9)
    with numba_threads(1):
        a = subset_search(d, env, n_resamples=49, rng=4, n_jobs=1)
    b = subset_search(d, env, n_resamples=49, rng=4, n_jobs=2)
    order = list(np.random.default_rng(0).permutation(d.labels))
    c = subset_search(d.subset(order), env.loc[order[::-1]], n_resamples=49, rng=4)
    for other in (b, c):
        pd.testing.assert_frame_equal(a.table, other.table, atol=1e-12)
        assert a.pvalue == other.pvalue and a.pvalue_naive == other.pvalue_naive


def test_max_size_limits_the_search():
    d, env, _ = _survey(p=6, seed=1)
    res = subset_search(d, env, max_size=2, n_resamples=9, rng=0)
    assert res.table["size"].tolist() == [1, 2] and res.n_subsets == 6 + 15
    assert "of up to 2 variables" in res.notes[0]
    with pytest.raises(InputError, match=r"`max_size` must be a positive integer"):
        subset_search(d, env, max_size=0)


def test_bad_input_is_explained():
    d, env, _ = _survey()
    bad = env.copy()
    bad["v3"] = 2.0
    with pytest.raises(InputError, match=r"'v3' of `environment` have the same value at every "
                                         r"site.*Leave them out") as err:
        subset_search(d, bad)
    assert err.value.columns == ("v3",)
    bad = env.copy()
    bad.iloc[4, 1] = np.nan
    with pytest.raises(InputError, match=r"'v1' of `environment` have missing or infinite "
                                         r"values at site\(s\) 'site04'. Fill them in"):
        subset_search(d, bad)
    small = d.subset(d.labels[:4])
    with pytest.raises(InputError, match=r"at least 5 sites; `d` has 4"):
        subset_search(small, env.iloc[:4])
    text = env.assign(kind="a")
    with pytest.raises(InputError, match=r"'kind' of `environment` are not numbers"):
        subset_search(d, text)
    with pytest.raises(InputError, match=r"1 site\(s\) in the dissimilarities but not in "
                                         r"`environment`: 'site24'"):
        subset_search(d, env.iloc[:-1])
    with pytest.raises(InputError, match=r"`method` must be one of 'spearman', 'pearson'"):
        subset_search(d, env, method="kendall")
