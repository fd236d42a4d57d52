"""Mantel correlogram (class counts, sign convention, Holm correction) and distance decay
(recovery of a known decay, the site bootstrap)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.spatial.distance import pdist, squareform
from statsmodels.stats.multitest import multipletests

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.matrix import distance_decay, mantel_correlogram
from gradients.matrix._correlogram import progressive_holm
from gradients.permutation import permutation_plan, site_ranks


def _field(n, seed):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 10, size=(n, 2))
    com = np.c_[np.sin(xy[:, 0] / 2), np.cos(xy[:, 1] / 2)] + rng.normal(0, 0.1, (n, 2))
    lab = [f"q{i}" for i in range(n)]
    return DistanceMatrix(pdist(com), lab), DistanceMatrix(pdist(xy), lab)


def test_class_counts_bounds_and_sign_convention():
    d, geo = _field(30, 1)
    res = mantel_correlogram(d, geo, n_resamples=99, rng=0, min_pairs=1)
    m = 435
    k = int(np.ceil(1 + np.log2(m)))  # Sturges (1926): 1 + log2(number of distances)
    t = res.table
    assert len(t) == k
    # reference counts: numpy.histogram on the same equal-width breaks (last bin closed)
    counts, edges = np.histogram(geo.condensed, bins=k)
    np.testing.assert_array_equal(t["n_pairs"], counts)
    np.testing.assert_allclose(res.breaks, edges)
    np.testing.assert_allclose(t["midpoint"], (edges[:-1] + edges[1:]) / 2)
    # Legendre & Legendre (2012, 13.1): r between d and W_k coded 0 within the class, 1
    # otherwise, so positive autocorrelation gives a positive value (scipy.stats.pearsonr)
    codes = np.clip(np.digitize(geo.condensed, edges) - 1, 0, k - 1)
    for c in range(k):
        w = (codes != c).astype(float)
        assert t["statistic"].iloc[c] == pytest.approx(
            stats.pearsonr(d.condensed, w).statistic, abs=1e-12)
    assert t["statistic"].iloc[0] > 0  # near sites alike in this smooth field


def test_progressive_holm_matches_statsmodels_on_each_prefix():
    # Progressive correction (Legendre & Legendre 2012, 13.1): class k is corrected for the
    # first k tests; reference statsmodels.stats.multitest.multipletests(method='holm').
    p = np.array([0.001, 0.04, 0.03, 0.2, 0.01, np.nan, 0.5])
    got = progressive_holm(p)
    finite = p[np.isfinite(p)]
    expected = [multipletests(finite[: j + 1], method="holm")[1][j] for j in range(finite.size)]
    np.testing.assert_allclose(got[np.isfinite(p)], expected, rtol=1e-14)
    assert np.isnan(got[5])


def test_correlogram_null_is_one_pass_over_the_same_permutations():
    # Every class from the same orders: brute force with np.ix_ and pearsonr per class.
    d, geo = _field(12, 2)
    res = mantel_correlogram(d, geo, classes=[0, 3, 6, 15], n_resamples=20, rng=4,
                             min_pairs=1)
    plan = permutation_plan(12, n_resamples=20, rng=np.random.default_rng(4),
                            site_labels=d.labels)
    orders = np.concatenate(list(plan.batches()))
    iu = np.triu_indices(12, k=1)
    codes = np.digitize(geo.condensed, [0, 3, 6, 15]) - 1
    for b, p in enumerate(orders):
        dp = d.square()[np.ix_(p, p)][iu]
        for c in range(3):
            ref = stats.pearsonr(dp, (codes != c).astype(float)).statistic
            assert res.null_distribution[b, c] == pytest.approx(ref, abs=1e-12)
    assert np.all(np.isfinite(res.table["pvalue"]))


def test_classes_with_few_pairs_are_flagged_not_tested():
    d, geo = _field(25, 3)
    res = mantel_correlogram(d, geo, classes=6, n_resamples=99, rng=0, min_pairs=40)
    t = res.table
    few = t["n_pairs"] < 40
    assert few.any() and (~few).any()
    assert t.loc[few, "pvalue"].isna().all() and not t.loc[few, "tested"].any()
    assert t.loc[~few, "pvalue"].notna().all()
    assert any("fewer than 40 pairs" in note for note in res.notes)


def test_correlogram_messages():
    d, geo = _field(10, 1)
    with pytest.raises(InputError, match="strictly increasing sequence"):
        mantel_correlogram(d, geo, classes=[0, 2, 1])
    with pytest.raises(InputError, match="`classes` must be one of 'sturges'"):
        mantel_correlogram(d, geo, classes="scott")
    with pytest.raises(InputError, match="`min_pairs` must be a positive integer"):
        mantel_correlogram(d, geo, min_pairs=0)


def _decay_data(n, seed, *, slope=-0.02, model="exponential", sigma=0.05):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, size=(n, 2))
    g = pdist(xy)
    eta = slope * (g if model == "exponential" else np.log(g))
    s = 0.8 * np.exp(eta + rng.normal(0, sigma, g.size))
    lab = [f"r{i}" for i in range(n)]
    return DistanceMatrix(np.clip(1 - s, 0, None), lab), DistanceMatrix(g, lab), g, np.log(s)


@pytest.mark.parametrize(("model", "slope"), [("exponential", -0.02), ("power", -0.4)])
def test_known_decay_is_recovered(model, slope):
    # Data generated with ln S = ln 0.8 + b g + e (or b ln g), e ~ N(0, 0.05^2) independent
    # per pair. OLS is unbiased with standard errors (theory, m pairs, u the regressor)
    # se(b) = sigma / sqrt(Sxx) and se(a) = sigma sqrt(1/m + mean(u)^2 / Sxx), Sxx =
    # sum (u - mean u)^2; each estimate must be within 4 standard errors of the truth (a false
    # failure has probability about 6e-5 each), and the halving quantity follows from the
    # slope (Nekola & White 1999: ln 2 / -b; for the power law the factor 2^(-1/b)).
    d, geo, g, _ = _decay_data(40, 1, slope=slope, model=model)
    res = distance_decay(d, geo, model=model, n_resamples=200, rng=0)
    u = g if model == "exponential" else np.log(g)
    sxx = np.sum((u - u.mean()) ** 2)
    se = 0.05 / np.sqrt(sxx)
    se_a = 0.05 * np.sqrt(1 / u.size + u.mean() ** 2 / sxx)
    assert abs(res.slope - slope) < 4 * se
    assert abs(res.intercept - np.log(0.8)) < 4 * se_a
    expected_h = np.log(2) / -res.slope if model == "exponential" else 2 ** (-1 / res.slope)
    assert res.halving == pytest.approx(expected_h, rel=1e-12)
    lo, hi = res.slope_interval
    assert lo < res.slope < hi
    assert res.table.loc["halving", "lower"] <= res.halving <= res.table.loc["halving", "upper"]
    assert len(res.pairs) == 780 and res.pairs["used"].all()
    assert len(res.curve) == 100 and (np.diff(res.curve["fitted"]) < 0).all()


@pytest.mark.parametrize("model", ["exponential", "power"])
@pytest.mark.parametrize("offset", [None, 0.01])
def test_fit_equals_scipy_linregress_on_the_same_log_similarities(model, offset):
    # Reference library: scipy.stats.linregress of ln S (or ln(S + offset)) on g (or ln g)
    # over the pairs used gives the slope, intercept and r2; the halving quantity is
    # ln 2 / -slope (exponential) or 2^(-1/slope) (power) (Nekola & White 1999). Some pairs
    # are given zero similarity so that the dropped pairs are exercised too.
    d, geo, g, _ = _decay_data(25, 8, slope=-0.02 if model == "exponential" else -0.4,
                               model=model, sigma=0.2)
    values = d.condensed.copy()
    values[::17] = 1.0  # no shared taxa: similarity 0
    d = DistanceMatrix(values, d.labels)
    res = distance_decay(d, geo, model=model, offset=offset, n_resamples=20, rng=0)
    s = 1 - values
    used = s > 0 if offset is None else np.ones(s.size, dtype=bool)
    ys = np.log(s[used] + (offset or 0.0))
    xs = g[used] if model == "exponential" else np.log(g[used])
    ref = stats.linregress(xs, ys)
    assert res.n_pairs == used.sum() and res.n_dropped == (~used).sum()
    assert res.slope == pytest.approx(ref.slope, rel=1e-10)
    assert res.intercept == pytest.approx(ref.intercept, rel=1e-10)
    assert res.r2 == pytest.approx(ref.rvalue**2, rel=1e-9)
    halving = np.log(2) / -ref.slope if model == "exponential" else 2 ** (-1 / ref.slope)
    assert res.halving == pytest.approx(halving, rel=1e-10)
    assert res.table.loc["slope", "estimate"] == res.slope


@pytest.mark.slow
def test_site_bootstrap_interval_covers_the_true_slope_at_least_at_its_level():
    # Coverage by simulation: ln S_ij = ln 0.5 + b g_ij + u_i + u_j + e_ij, site effects u and
    # pair noise e both N(0, 0.1^2), so pairs sharing a site are dependent; OLS is unbiased
    # for b (theory). 150 data sets of 20 sites, 199 bootstrap samples each: the count of 95 %
    # intervals containing b must reach the lower end of the 99 % binomial range of 150
    # trials at 0.95 (scipy.stats.binom: 136). The interval is conservative, not exact:
    # resampling sites counts each pair c_i c_j times (E[(c_i c_j)^2] = 4 for multinomial
    # counts), so the pair-level noise enters the bootstrap variance up to about four times
    # (measured: bootstrap se about 1.7 x the sd of the slopes when all noise is per pair;
    # docs/validation.md, "Distance decay intervals"); only the lower end is a requirement.
    # The intervals must stay finite and narrower than the slope itself (a test that passes
    # with infinite intervals would be no test).
    b = -np.log(2) / 0.5
    hits, widths = 0, []
    rng = np.random.default_rng(2024)
    for _ in range(150):
        xy = rng.uniform(size=(20, 2))
        g = pdist(xy)
        i, j = np.triu_indices(20, k=1)
        site = rng.normal(0, 0.1, 20)
        logs = np.log(0.5) + b * g + site[i] + site[j] + rng.normal(0, 0.1, g.size)
        lab = [f"c{k}" for k in range(20)]
        res = distance_decay(DistanceMatrix(np.exp(logs), lab), DistanceMatrix(g, lab),
                             similarity="as-is", n_resamples=199, rng=int(rng.integers(2**32)))
        lo, hi = res.slope_interval
        hits += lo <= b <= hi
        widths.append(hi - lo)
    assert hits >= stats.binom.interval(0.99, 150, 0.95)[0], hits
    assert np.all(np.isfinite(widths)) and np.median(widths) < abs(b)


def test_site_bootstrap_equals_explicit_resampling_of_sites():
    # The weighted fit with pair weights c_i c_j must equal resampling the sites explicitly,
    # taking all pairs of drawn sites except a site with its own copy, and refitting with
    # numpy.polyfit (Nekola & White 1999: resample sites, not pairs).
    d, geo, g, logs = _decay_data(15, 2)
    res = distance_decay(d, geo, n_resamples=5, rng=123)
    gen = np.random.default_rng(123)  # same stream: multinomial counts of each site, drawn
    # over the label-sorted sites (gradients.permutation.site_ranks) and mapped back
    counts = gen.multinomial(15, np.full(15, 1 / 15), size=5)[:, site_ranks(d.labels)]
    gs, ls = squareform(g), squareform(logs)
    for b in range(5):
        sites = np.repeat(np.arange(15), counts[b])
        i, j = np.triu_indices(sites.size, k=1)
        keep = sites[i] != sites[j]
        a, c = sites[i][keep], sites[j][keep]
        slope, intercept = np.polyfit(gs[a, c], ls[a, c], 1)
        assert res.bootstrap_distribution[b, 0] == pytest.approx(slope, rel=1e-9)
        assert res.bootstrap_distribution[b, 1] == pytest.approx(intercept, rel=1e-9)


def test_zero_similarities_dropped_with_a_note_or_kept_with_an_offset():
    d, geo, _, _ = _decay_data(12, 3)
    values = d.condensed.copy()
    values[:5] = 1.0  # five pairs sharing nothing
    d0 = DistanceMatrix(values, d.labels)
    dropped = distance_decay(d0, geo, n_resamples=50, rng=0)
    assert dropped.n_dropped == 5 and dropped.n_pairs == 61
    assert any("5 pair(s) of sites with zero similarity" in note for note in dropped.notes)
    kept = distance_decay(d0, geo, offset=0.01, n_resamples=50, rng=0)
    assert kept.n_dropped == 0 and kept.n_pairs == 66


def test_decay_messages():
    d, geo, _, _ = _decay_data(10, 1)
    big = DistanceMatrix(2 * d.condensed + 1, d.labels)
    with pytest.raises(InputError, match="similarity='1-d' needs dissimilarities of at most 1"):
        distance_decay(big, geo)
    with pytest.raises(InputError, match="`model` must be one of 'exponential', 'power'"):
        distance_decay(d, geo, model="linear")
    with pytest.raises(InputError, match="`offset` must be a positive number"):
        distance_decay(d, geo, offset=-1.0)
    with pytest.raises(InputError, match=r"`confidence_level` must be a number between 0 and 1"):
        distance_decay(d, geo, confidence_level=95)
    with pytest.raises(InputError, match="`n_resamples` must be a positive integer; got 0"):
        distance_decay(d, geo, n_resamples=0)


def test_decay_interval_is_the_percentile_interval_at_confidence_level():
    # Percentile interval (Efron & Tibshirani 1993, ch. 13): the (1 - level)/2 and
    # (1 + level)/2 quantiles of the bootstrap slopes.
    d, geo, _, _ = _decay_data(15, 4)
    res = distance_decay(d, geo, n_resamples=300, confidence_level=0.8, rng=7)
    assert res.confidence_level == 0.8 and res.n_resamples == 300
    assert res.bootstrap_distribution.shape == (300, 2)
    lo, hi = np.quantile(res.bootstrap_distribution[:, 0], [0.1, 0.9])
    assert res.slope_interval == pytest.approx((lo, hi), rel=1e-12)


def test_old_decay_keywords_and_fields_still_work_for_one_release():
    d, geo, _, _ = _decay_data(12, 5)
    new = distance_decay(d, geo, n_resamples=60, confidence_level=0.9, rng=3)
    with pytest.warns(DeprecationWarning, match="`n_boot` is deprecated.*use `n_resamples`") \
            as caught:
        old = distance_decay(d, geo, n_boot=60, confidence_level=0.9, rng=3)
    assert caught[0].filename == __file__  # the warning points at the caller's line
    np.testing.assert_array_equal(old.bootstrap_distribution, new.bootstrap_distribution)
    with pytest.warns(DeprecationWarning, match="`confidence` is deprecated.*"
                                                "use `confidence_level`"):
        old = distance_decay(d, geo, n_resamples=60, confidence=0.9, rng=3)
    assert old.slope_interval == new.slope_interval
    with pytest.raises(TypeError, match="got both `n_boot` and `n_resamples`"):
        distance_decay(d, geo, n_boot=60, n_resamples=60)
    with pytest.raises(TypeError, match="got both `confidence` and `confidence_level`"):
        distance_decay(d, geo, confidence=0.9, confidence_level=0.9)
    for field, value in (("n_boot", 60), ("confidence", 0.9)):
        with pytest.warns(DeprecationWarning, match=f"DistanceDecayResult.{field} is deprecated"):
            assert getattr(new, field) == value
    with pytest.warns(DeprecationWarning, match="use .bootstrap_distribution") as caught:
        assert new.bootstrap is new.bootstrap_distribution
    assert caught[0].filename == __file__


def test_spearman_correlogram_is_the_pearson_correlogram_of_ranks():
    # Spearman: d's entries ranked once (scipy.stats.rankdata), then the Pearson statistic.
    d, geo = _field(20, 5)
    ranked = DistanceMatrix(stats.rankdata(d.condensed), d.labels)
    a = mantel_correlogram(d, geo, method="spearman", classes=4, n_resamples=99, rng=2)
    b = mantel_correlogram(ranked, geo, classes=4, n_resamples=99, rng=2)
    pd.testing.assert_frame_equal(a.table, b.table)
    with pytest.raises(InputError, match="`method` must be one of 'pearson', 'spearman'"):
        mantel_correlogram(d, geo, method="kendall")
