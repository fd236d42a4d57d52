"""Simple Mantel test: statistic against scipy, exact enumeration, kernel against the textbook
formula, null calibration, inputs and messages."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.spatial.distance import pdist, squareform

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.matrix import mantel
from gradients.matrix._kernels import class_sums, cross_products, kendall_batch, kendall_prepare
from gradients.permutation import permutation_plan


def _labels(n):
    return [f"site{i:02d}" for i in range(n)]


def _pair(n, seed, *, rho=0.5, decimals=None):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(n, 3))
    b = rho * a + rng.normal(size=(n, 3))
    x, y = pdist(a), pdist(b)
    if decimals is not None:  # ties, for the rank methods
        x, y = np.round(x, decimals), np.round(y, decimals)
    lab = _labels(n)
    return DistanceMatrix(x, lab), DistanceMatrix(y, lab)


@pytest.mark.parametrize(
    ("method", "reference"),
    [
        ("pearson", stats.pearsonr),
        ("spearman", stats.spearmanr),
        ("kendall", stats.kendalltau),  # tau-b, scipy's default variant
    ],
)
def test_statistic_equals_scipy_on_condensed_vectors(method, reference):
    # Reference: scipy.stats correlation of the two condensed vectors (Mantel 1967: the
    # Mantel r is the correlation of the off-diagonal entries). Ties (rounding) exercise the
    # average-rank and tau-b tie corrections.
    x, y = _pair(25, 1, decimals=1)
    res = mantel(x, y, method=method, n_resamples=99, rng=0)
    expected = reference(x.condensed, y.condensed).statistic
    assert res.statistic == pytest.approx(expected, abs=1e-12)
    assert res.method == method and res.n_pairs == 300 and res.n_sites == 25


@pytest.mark.parametrize("alternative", ["greater", "less", "two-sided"])
def test_exact_enumeration_n6_matches_listing_all_720_permutations(alternative):
    # Theory: with 6! = 720 <= n_resamples every permutation is enumerated and
    # p = #(permuted r at least as extreme as observed, identity included) / 720. Each permuted
    # matrix is built here the textbook way, with np.ix_.
    x, y = _pair(6, 7)
    res = mantel(x, y, n_resamples=999, rng=0, alternative=alternative)
    assert res.exact and res.n_resamples == 720
    xs, ys = x.condensed, y.square()
    iu = np.triu_indices(6, k=1)
    listed = np.array([np.corrcoef(xs, ys[np.ix_(p, p)][iu])[0, 1]
                       for p in itertools.permutations(range(6))])
    obs = res.statistic
    tol = 1e-12
    if alternative == "greater":
        count = np.sum(listed >= obs - tol)
    elif alternative == "less":
        count = np.sum(listed <= obs + tol)
    else:  # centred on the exact permutation mean, which is 0 (next test)
        count = np.sum(np.abs(listed) >= abs(obs) - tol)
    assert res.pvalue == pytest.approx(count / 720, abs=1e-15)
    np.testing.assert_allclose(np.sort(res.null_distribution), np.sort(listed), atol=1e-12)


def test_exact_null_mean_of_pearson_statistic_is_zero():
    # Theory (Mantel 1967, Cancer Res. 27:209): over all n! permutations the mean cross-product is
    # (sum x)(sum y)/m, so the mean of the centred statistic r is exactly 0.
    for seed in range(3):
        x, y = _pair(7, seed)  # 7! = 5040 permutations, all enumerated
        res = mantel(x, y, n_resamples=5040, rng=0)
        assert res.exact and res.n_resamples == 5040
        assert np.mean(res.null_distribution) == pytest.approx(0.0, abs=1e-13)


def test_exact_kendall_n6_matches_listing_with_scipy():
    # Reference: scipy.stats.kendalltau on every one of the 720 permuted matrices.
    x, y = _pair(6, 3, decimals=1)
    res = mantel(x, y, method="kendall", n_resamples=720, rng=0)
    ys = y.square()
    iu = np.triu_indices(6, k=1)
    listed = np.array([stats.kendalltau(x.condensed, ys[np.ix_(p, p)][iu]).statistic
                       for p in itertools.permutations(range(6))])
    assert res.exact
    assert res.pvalue == pytest.approx(np.mean(listed >= res.statistic - 1e-12), abs=1e-15)


def test_many_column_kernel_any_width_layout_and_batch_split():
    # The multi-column kernel works in groups of four orders and four columns: every width and
    # batch size (partial groups included) must give the textbook values, and the same bits
    # whatever the memory layout of x, the split of the orders into batches or the storage.
    rng = np.random.default_rng(12)
    n = 23
    big = squareform(pdist(rng.normal(size=(n, 2))))
    orders = rng.permuted(np.broadcast_to(np.arange(n), (11, n)), axis=1)
    iu = np.triu_indices(n, k=1)
    permuted = np.array([big[np.ix_(p, p)][iu] for p in orders])
    for q in range(1, 10):
        many = rng.normal(size=(iu[0].size, q))
        whole = cross_products(many, big, orders)
        np.testing.assert_allclose(whole, permuted @ many, rtol=1e-12)
        assert np.array_equal(cross_products(np.asfortranarray(many), big, orders), whole)
        split = np.vstack([cross_products(many, big, part) for part in (orders[:1], orders[1:6],
                                                                          orders[6:])])
        assert np.array_equal(split, whole)
        f32 = cross_products(many.astype(np.float32), big.astype(np.float32), orders)
        assert f32.dtype == np.float64
        np.testing.assert_allclose(f32, permuted @ many, rtol=1e-5, atol=1e-5)


def test_kernels_equal_the_textbook_one_permutation_formula():
    # Two ways of computing the same thing must agree (common practice): the batched kernels against
    # building each permuted matrix with np.ix_ for random orders.
    rng = np.random.default_rng(11)
    n = 40
    x = pdist(rng.normal(size=(n, 2)))
    y = np.round(pdist(rng.normal(size=(n, 2))), 1)
    big = squareform(y)
    orders = rng.permuted(np.broadcast_to(np.arange(n), (25, n)), axis=1)
    iu = np.triu_indices(n, k=1)
    permuted = np.array([big[np.ix_(p, p)][iu] for p in orders])
    np.testing.assert_allclose(cross_products(x, big, orders), permuted @ x, rtol=1e-12)
    many = np.column_stack([x, x**2, np.sqrt(x)])
    np.testing.assert_allclose(cross_products(many, big, orders), permuted @ many, rtol=1e-12)
    codes = np.digitize(x, np.quantile(x, [0.2, 0.5, 0.9])).astype(np.int32) - 1  # -1..2
    sums = class_sums(codes, 3, big, orders)
    for c in range(3):
        np.testing.assert_allclose(sums[:, c], permuted[:, codes == c].sum(axis=1), rtol=1e-12)
    prep = kendall_prepare(x, y, n)
    taus = kendall_batch(prep, orders[:8])
    ref = [stats.kendalltau(x, v).statistic for v in permuted[:8]]
    np.testing.assert_allclose(taus, ref, atol=1e-13)


def test_null_distribution_is_the_statistic_of_each_planned_permutation():
    # The test's null values are the Pearson r of y permuted by the engine's orders (same
    # seed, same plan), computed here with np.ix_ and np.corrcoef.
    x, y = _pair(15, 5)
    res = mantel(x, y, n_resamples=60, rng=42)
    plan = permutation_plan(15, n_resamples=60, rng=np.random.default_rng(42))
    orders = np.concatenate(list(plan.batches()))
    iu = np.triu_indices(15, k=1)
    ys = y.square()
    ref = [np.corrcoef(x.condensed, ys[np.ix_(p, p)][iu])[0, 1] for p in orders]
    np.testing.assert_allclose(res.null_distribution, ref, atol=1e-13)


def test_rejection_rate_under_true_null_within_binomial_interval():
    # Null calibration (theory): with independent matrices, P(p <= 0.05) = 0.05 for the
    # (b + 1)/(P + 1) rule with P = 199; the count of rejections over 300 simulations must
    # fall in the central 99% binomial interval (scipy.stats.binom.interval).
    n_sim, alpha = 300, 0.05
    rng = np.random.default_rng(2026)
    rejections = {"pearson": 0, "spearman": 0}
    for rep in range(n_sim):
        a, b = rng.normal(size=(10, 2)), rng.normal(size=(10, 2))
        for method in rejections:
            res = mantel(pdist(a), pdist(b), method=method, n_resamples=199, rng=rep)
            rejections[method] += res.pvalue <= alpha
    lo, hi = stats.binom.interval(0.99, n_sim, alpha)
    for method, count in rejections.items():
        assert lo <= count <= hi, (method, count, (lo, hi))


def test_same_seed_same_result_with_one_or_two_threads():
    x, y = _pair(60, 2)
    one = mantel(x, y, n_resamples=2000, rng=9, n_jobs=1)
    two = mantel(x, y, n_resamples=2000, rng=9, n_jobs=2)
    np.testing.assert_array_equal(one.null_distribution, two.null_distribution)
    assert one.pvalue == two.pvalue


def test_labelled_frames_are_aligned_by_site_label():
    x, y = _pair(12, 4)
    shuffled = y.to_frame().iloc[::-1, ::-1]
    a = mantel(x.to_frame(), shuffled, n_resamples=99, rng=1)
    b = mantel(x, y, n_resamples=99, rng=1)
    assert a.statistic == pytest.approx(b.statistic, abs=1e-14)
    assert a.pvalue == b.pvalue
    # a bare square array is read in the order of the labelled input
    c = mantel(x, y.square(), n_resamples=99, rng=1)
    assert c.statistic == pytest.approx(b.statistic, abs=1e-14)


def test_label_mismatch_lists_the_sites_on_each_side():
    x, y = _pair(8, 4)
    other = DistanceMatrix(y.condensed, [*_labels(7), "extra"])
    with pytest.raises(InputError, match=r"in `x` but not in `y`: 'site07'.*in `y` but not in "
                                         r"`x`: 'extra'"):
        mantel(x, other, n_resamples=99)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"method": "cosine"}, r"`method` must be one of 'pearson', 'spearman', 'kendall'"),
        ({"alternative": "bigger"}, r"`alternative` must be one of"),
        ({"n_resamples": 0}, r"`n_resamples` must be a positive integer; got 0"),
        ({"n_jobs": 0}, r"`n_jobs` must be a positive integer or -1"),
        ({"scheme": "spiral"}, r"`scheme` must be one of"),
    ],
)
def test_argument_messages(kwargs, message):
    x, y = _pair(8, 1)
    with pytest.raises(InputError, match=message):
        mantel(x, y, **kwargs)


def test_constant_matrix_and_size_mismatch_messages():
    x, _ = _pair(8, 1)
    with pytest.raises(InputError, match="same value for every pair of sites"):
        mantel(x, np.ones((8, 8)) - np.eye(8), n_resamples=9)
    with pytest.raises(InputError, match="`y` has 5 sites but `x` has 8"):
        mantel(x, squareform(pdist(np.arange(5.0)[:, None])), n_resamples=9)
    with pytest.raises(InputError, match="must be square"):
        mantel(x, np.ones((8, 3)))


def test_kendall_refuses_too_many_pair_permutations_with_the_fix():
    x, y = _pair(300, 1)  # 44,850 pairs
    with pytest.raises(InputError, match=r"method='spearman'.*lower `n_resamples` to at most"):
        mantel(x, y, method="kendall", n_resamples=9999)


def test_strata_keep_permutations_within_groups_and_notes_exactness():
    x, y = _pair(9, 6)
    strata = pd.Series(np.repeat(["a", "b", "c"], 3), index=x.labels[::-1])  # by label
    res = mantel(x, y, strata=strata, n_resamples=999, rng=0)
    assert res.scheme == "strata"
    assert res.exact and res.n_resamples == 6**3  # 3! per stratum (theory)
    assert any("exact" in note for note in res.notes)


def test_early_stop_gives_besag_clifford_pvalue():
    # Besag & Clifford (1991): stop after h extremes; p = h / L.
    x, y = _pair(30, 8, rho=0.0)
    res = mantel(x, y, n_resamples=9999, rng=3, early_stop=10)
    assert res.stopped_early
    assert res.pvalue == pytest.approx(10 / res.n_resamples)


def test_a_ready_plan_can_be_passed_as_scheme():
    # A toroidal design needs the grid shape: pass the plan itself (engine, 3 x 4 grid: 12
    # distinct shifts, theory), and the test is exact over those 12.
    x, y = _pair(12, 9)
    plan = permutation_plan(12, "toroidal", shape=(3, 4), n_resamples=999, rng=0)
    res = mantel(x, y, scheme=plan)
    assert res.exact and res.n_resamples == 12 and res.scheme == "toroidal"
    assert (res.pvalue * 12) == pytest.approx(round(res.pvalue * 12))
    with pytest.raises(InputError, match="plan given as `scheme` is for 12 sites"):
        mantel(*_pair(10, 1), scheme=plan)
    # A plan fixes its design: strata given beside it would be silently ignored, so it is an
    # error that says how to combine them.
    with pytest.raises(InputError, match="`strata` was given together with a ready plan"):
        mantel(x, y, scheme=plan, strata=[0, 1] * 6)
