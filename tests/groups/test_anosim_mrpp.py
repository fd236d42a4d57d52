"""ANOSIM and MRPP against their published definitions written out in the test (Clarke 1993;
Mielke, Berry & Johnson 1976), by hand, and against exact enumeration with itertools."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist, squareform
from scipy.stats import rankdata

from gradients import DistanceMatrix, anosim, mrpp


def _sites(n):
    return [f"s{i:02d}" for i in range(n)]


def _clarke_r(d, groups):
    # Clarke (1993, Aust. J. Ecol. 18:117): rank all n(n-1)/2 dissimilarities (ties: average
    # rank), R = (mean rank between - mean rank within) / (M / 2)
    n = len(groups)
    pairs = list(itertools.combinations(range(n), 2))
    values = np.array([d[i, j] for i, j in pairs])
    ranks = rankdata(values)
    within = np.array([groups[i] == groups[j] for i, j in pairs])
    m = len(pairs)
    return (ranks[~within].mean() - ranks[within].mean()) / (m / 2)


def _mielke_delta(d, groups):
    # Mielke, Berry & Johnson (1976): delta = sum_g (n_g / N) * mean of the within-g distances
    groups = np.asarray(groups)
    n = len(groups)
    delta = 0.0
    for g in np.unique(groups):
        idx = np.flatnonzero(groups == g)
        within = [d[i, j] for i, j in itertools.combinations(idx, 2)]
        delta += idx.size / n * np.mean(within)
    return delta


def _counts_example(seed=0, sizes=(5, 6, 7)):
    rng = np.random.default_rng(seed)
    groups = np.repeat(["reference", "near", "far"], sizes)
    lam = np.where((groups == "near")[:, None], 4.0, 2.0) * rng.uniform(0.5, 1.5, size=10)
    counts = rng.poisson(lam)
    counts[counts.sum(axis=1) == 0, 0] = 1
    return counts, groups


def test_anosim_r_equals_clarke_definition_with_ties():
    counts, groups = _counts_example()
    # round the dissimilarities to two decimals so that many tie (average ranks)
    d = np.round(squareform(pdist(counts, "braycurtis")), 2)
    sites = _sites(len(groups))
    dm = DistanceMatrix.from_square(d, sites)
    res = anosim(dm, pd.Series(groups, index=sites, name="zone"), rng=1, n_resamples=199)
    assert res.statistic == pytest.approx(_clarke_r(d, groups), rel=1e-12)
    assert res.grouping == "column 'zone'"
    assert any("tie" in note for note in res.notes)
    n = len(groups)
    m = n * (n - 1) / 2
    # the two mean ranks recombine to R (definition)
    assert (res.mean_rank_between - res.mean_rank_within) / (m / 2) == pytest.approx(res.statistic)


def test_anosim_by_hand_perfect_separation():
    # by hand: every within-class distance is smaller than every between-class one, so the
    # within pairs hold ranks 1..6 (mean 3.5) and the between pairs ranks 7..15 (mean 11):
    # R = (11 - 3.5) / (15 / 2) = 1
    y = np.array([[0.0], [0.1], [0.25], [5.0], [5.2], [5.3]])
    res = anosim(DistanceMatrix(pdist(y), _sites(6)), list("aaabbb"), rng=0)
    assert res.mean_rank_within == pytest.approx(3.5)
    assert res.mean_rank_between == pytest.approx(11.0)
    assert res.statistic == pytest.approx(1.0)
    # exact: C(6, 3) / 2 = 10 splits, only the observed one reaches R = 1
    assert res.exact and res.n_resamples == 10 and res.pvalue == pytest.approx(0.1)


def test_mrpp_delta_expectation_and_agreement_equal_definitions():
    counts, groups = _counts_example(seed=2)
    d = squareform(pdist(counts, "braycurtis"))
    sites = _sites(len(groups))
    res = mrpp(DistanceMatrix.from_square(d, sites), groups, rng=1, n_resamples=199)
    delta = _mielke_delta(d, groups)
    expected = d[np.triu_indices(len(groups), 1)].mean()
    assert res.statistic == pytest.approx(delta, rel=1e-12)
    assert res.expected_delta == pytest.approx(expected, rel=1e-12)
    assert res.agreement == pytest.approx(1 - delta / expected, rel=1e-12)
    weights = res.table.set_index("group")["weight"]
    assert weights.sum() == pytest.approx(1.0)


def test_mrpp_expected_delta_is_the_mean_of_the_exact_null():
    # Theory (Mielke et al. 1976): E(delta) over all reassignments is the mean of all
    # dissimilarities. With 3 + 3 + 2 sites every one of the 8! / (3! 3! 2!) / 2! = 280
    # distinct reassignments is enumerated (the two classes of 3 interchangeable).
    rng = np.random.default_rng(3)
    y = rng.normal(size=(8, 2))
    groups = list("aaabbbcc")
    res = mrpp(DistanceMatrix(pdist(y), _sites(8)), groups, rng=0)
    assert res.exact and res.n_resamples == 280
    assert np.mean(res.null_distribution) == pytest.approx(res.expected_delta, rel=1e-12)


@pytest.mark.parametrize("method", ["anosim", "mrpp"])
def test_exact_pvalues_equal_listing_every_split(method):
    # Exact enumeration with itertools: every split of 9 sites into classes of 4 and 5
    # (C(9, 4) = 126, none interchangeable), the statistic written from its definition
    rng = np.random.default_rng(7)
    y = rng.normal(size=(9, 3))
    y[:4] += 0.8
    d = squareform(pdist(y))
    groups = np.array(list("aaaabbbbb"))
    values = []
    for first in itertools.combinations(range(9), 4):
        lab = np.where(np.isin(np.arange(9), first), "a", "b")
        values.append(_clarke_r(d, lab) if method == "anosim" else _mielke_delta(d, lab))
    values = np.array(values)
    fn = anosim if method == "anosim" else mrpp
    res = fn(DistanceMatrix.from_square(d, _sites(9)), groups, rng=0)
    assert res.exact and res.n_resamples == 126
    if method == "anosim":
        expected = np.mean(values >= res.statistic - 1e-12)
    else:
        expected = np.mean(values <= res.statistic + 1e-12)
    assert res.pvalue == pytest.approx(expected, abs=1e-12)
    np.testing.assert_allclose(np.sort(res.null_distribution), np.sort(values), rtol=1e-10)


def test_strata_restrict_the_reassignments():
    counts, groups = _counts_example(seed=5, sizes=(4, 4, 4))
    sites = _sites(12)
    strata = np.tile([0, 1], 6)
    res = mrpp(DistanceMatrix(pdist(counts, "braycurtis"), sites), groups, strata=strata,
               rng=0, n_resamples=99)
    assert "within 2 strata" in res.permutations
    assert any("strata" in n for n in res.notes)


def test_group_labels_follow_site_labels_not_positions():
    counts, groups = _counts_example(seed=6)
    sites = _sites(len(groups))
    d = DistanceMatrix(pdist(counts, "braycurtis"), sites)
    series = pd.Series(groups, index=sites)[::-1]  # same labels, other order
    a = anosim(d, series, rng=4, n_resamples=99)
    b = anosim(d, groups, rng=4, n_resamples=99)
    assert a.statistic == b.statistic and a.pvalue == b.pvalue
