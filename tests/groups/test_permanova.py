"""PERMANOVA against outside references: scipy's one-way F, statsmodels' ANOVA tables (sequential
and marginal sums of squares), the sums of squared distances of Anderson (2001), and exact
enumeration of every reassignment."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from scipy.spatial.distance import pdist, squareform
from statsmodels.stats.anova import anova_lm

from gradients import DistanceMatrix, permanova
from gradients.distance import gower_centred
from gradients.groups._design import read_design
from gradients.groups._permanova import TABLE_COLUMNS, _build_tests, _plan

FAST = {"pairwise": False, "dispersion": False}


def _sites(n):
    return [f"s{i:02d}" for i in range(n)]


def _euclid(y, sites):
    y = np.asarray(y, dtype=float)
    return DistanceMatrix(pdist(y.reshape(len(sites), -1)), sites)


@pytest.mark.parametrize("sizes", [(6, 6, 6), (4, 7, 11)])
def test_one_way_pseudo_f_equals_scipy_f_oneway(sizes):
    # Anderson (2001, Austral Ecol. 26:32): with Euclidean distance on one variable the
    # pseudo-F is Fisher's F; reference value from scipy.stats.f_oneway.
    rng = np.random.default_rng(1)
    groups = np.repeat(["a", "b", "c"], sizes)
    y = rng.normal(size=len(groups)) + (groups == "b") * 0.7
    sites = _sites(len(groups))
    res = permanova(_euclid(y, sites), pd.DataFrame({"zone": groups}, index=sites), rng=2, **FAST)
    ref = stats.f_oneway(*[y[groups == g] for g in "abc"])
    assert res.statistic["zone"] == pytest.approx(ref.statistic, rel=1e-10)
    row = res.table.set_index("term").loc["zone"]
    assert row["df"] == 2
    assert res.table.set_index("term").loc["residual", "df"] == len(groups) - 3
    assert list(res.table.columns) == list(TABLE_COLUMNS)


def _two_way_data(balanced, seed=3):
    rng = np.random.default_rng(seed)
    if balanced:
        a = np.repeat(["p", "q"], 12)
        b = np.tile(np.repeat(["u", "v", "w"], 4), 2)
    else:
        a = rng.choice(["p", "q"], 40)
        b = rng.choice(["u", "v", "w"], 40)
    y = (rng.normal(size=len(a)) + 0.8 * (a == "p") + 0.5 * (b == "u")
         + 0.9 * (a == "q") * (b == "w"))
    sites = _sites(len(a))
    frame = pd.DataFrame({"A": a, "B": b, "y": y}, index=sites)
    return frame, _euclid(y, sites)


@pytest.mark.parametrize("balanced", [True, False])
def test_two_way_sequential_table_equals_statsmodels_anova_lm(balanced):
    # McArdle & Anderson (2001, Ecology 82:290): on Euclidean distances of one variable the
    # sums of squares are those of the linear model; reference: statsmodels anova_lm (typ=1).
    frame, d = _two_way_data(balanced)
    res = permanova(d, frame[["A", "B"]], terms=["A", "B", "A:B"], rng=1, **FAST)
    ref = anova_lm(smf.ols("y ~ C(A) * C(B)", frame).fit(), typ=1)
    table = res.table.set_index("term")
    for ours, theirs in [("A", "C(A)"), ("B", "C(B)"), ("A:B", "C(A):C(B)"),
                         ("residual", "Residual")]:
        assert table.loc[ours, "sum_of_squares"] == pytest.approx(ref.loc[theirs, "sum_sq"],
                                                                   rel=1e-10)
        assert table.loc[ours, "df"] == ref.loc[theirs, "df"]
        if ours != "residual":
            assert table.loc[ours, "pseudo_f"] == pytest.approx(ref.loc[theirs, "F"], rel=1e-10)
    assert set(table.loc[["A", "B", "A:B"], "sums_of_squares"]) == {"sequential"}
    # the star shorthand is the same three terms
    star = permanova(d, frame[["A", "B"]], terms=["A*B"], rng=1, **FAST)
    pd.testing.assert_frame_equal(star.table, res.table)


def test_marginal_table_equals_statsmodels_type_three_with_sum_contrasts():
    # statsmodels anova_lm(typ=3) of the model with Sum (sum-to-zero) contrasts: the marginal
    # sums of squares of each term given all others (unbalanced design, where they differ
    # from the sequential ones).
    frame, d = _two_way_data(False)
    res = permanova(d, frame[["A", "B"]], terms=["A*B"], rng=1, sums_of_squares="marginal",
                    **FAST)
    ref = anova_lm(smf.ols("y ~ C(A, Sum) * C(B, Sum)", frame).fit(), typ=3)
    table = res.table.set_index("term")
    for ours, theirs in [("A", "C(A, Sum)"), ("B", "C(B, Sum)"),
                         ("A:B", "C(A, Sum):C(B, Sum)"), ("residual", "Residual")]:
        assert table.loc[ours, "sum_of_squares"] == pytest.approx(ref.loc[theirs, "sum_sq"],
                                                                   rel=1e-9)
        if ours != "residual":
            assert table.loc[ours, "pseudo_f"] == pytest.approx(ref.loc[theirs, "F"], rel=1e-9)
    assert set(table.loc[["A", "B", "A:B"], "sums_of_squares"]) == {"marginal"}
    assert any("marginal (Type III)" in n for n in res.notes)
    seq = permanova(d, frame[["A", "B"]], terms=["A*B"], rng=1, **FAST)
    assert seq.table.loc[0, "sum_of_squares"] != pytest.approx(table.loc["A", "sum_of_squares"])


def test_covariate_and_slopes_equal_statsmodels():
    # ANCOVA with a factor-by-covariate interaction (different slopes), statsmodels typ=1
    rng = np.random.default_rng(8)
    n = 30
    a = rng.choice(["r", "s", "t"], n)
    x = rng.normal(size=n)
    y = x * (1 + (a == "r")) + rng.normal(size=n)
    sites = _sites(n)
    frame = pd.DataFrame({"depth": x, "habitat": a, "y": y}, index=sites)
    res = permanova(_euclid(y, sites), frame[["depth", "habitat"]],
                    terms=["habitat", "depth", "habitat:depth"], rng=1, **FAST)
    # (patsy puts terms without a numeric column first: the same order is used here)
    ref = anova_lm(smf.ols("y ~ C(habitat) + depth + C(habitat):depth", frame).fit(), typ=1)
    assert list(ref.index[:3]) == ["C(habitat)", "depth", "C(habitat):depth"]
    got = res.table.set_index("term")["sum_of_squares"]
    assert got["depth"] == pytest.approx(ref.loc["depth", "sum_sq"], rel=1e-10)
    assert got["habitat"] == pytest.approx(ref.loc["C(habitat)", "sum_sq"], rel=1e-10)
    assert got["habitat:depth"] == pytest.approx(ref.loc["C(habitat):depth", "sum_sq"], rel=1e-9)
    assert res.table.set_index("term").loc["habitat:depth", "df"] == 2


def test_multivariate_euclidean_sums_add_over_variables():
    # McArdle & Anderson (2001): for Euclidean distances among rows of Y the sums of squares
    # are the sums over the columns of Y of the univariate ones (statsmodels per column)
    frame, _ = _two_way_data(False, seed=11)
    rng = np.random.default_rng(12)
    y = np.column_stack([frame["y"], rng.normal(size=len(frame)), rng.normal(size=len(frame))])
    res = permanova(_euclid(y, list(frame.index)), frame[["A", "B"]], terms=["A*B"], rng=1,
                    **FAST)
    expected = np.zeros(4)
    for j in range(3):
        f = frame.assign(v=y[:, j])
        ref = anova_lm(smf.ols("v ~ C(A) * C(B)", f).fit(), typ=1)
        expected += ref["sum_sq"].to_numpy()
    assert res.table["sum_of_squares"].to_numpy()[:4] == pytest.approx(expected, rel=1e-10)


def test_sums_of_squared_distances_of_anderson_2001_on_bray_curtis():
    # Anderson (2001), eqs 1-3, written out: SS_T = (1/N) sum_{i<j} d_ij^2,
    # SS_W = sum_g (1/n_g) sum_{i<j in g} d_ij^2, F = (SS_A / (g - 1)) / (SS_W / (N - g)),
    # on a non-Euclidean (Bray-Curtis) matrix of counts
    rng = np.random.default_rng(4)
    counts = rng.poisson(3.0, size=(15, 12))
    groups = np.repeat(["x", "y", "z"], [4, 5, 6])
    d2 = squareform(pdist(counts, "braycurtis")) ** 2
    n = len(groups)
    sst = d2[np.triu_indices(n, 1)].sum() / n
    ssw = 0.0
    for g in "xyz":
        idx = np.flatnonzero(groups == g)
        ssw += d2[np.ix_(idx, idx)][np.triu_indices(idx.size, 1)].sum() / idx.size
    f = ((sst - ssw) / 2) / (ssw / (n - 3))
    sites = _sites(n)
    d = DistanceMatrix(pdist(counts, "braycurtis"), sites)
    res = permanova(d, pd.DataFrame({"g": groups}, index=sites), rng=1, **FAST)
    assert res.statistic["g"] == pytest.approx(f, rel=1e-10)
    assert res.table.loc[2, "sum_of_squares"] == pytest.approx(sst, rel=1e-12)
    assert any("not Euclidean" in note for note in res.notes)


def test_exact_one_way_test_enumerates_35_reassignments():
    # Exact enumeration: two classes of 4 sites have C(8, 4) / 2 = 35 distinct splits; the
    # p-value is the share of splits, listed here with itertools, whose F is at least the
    # observed one (each split once; the two labellings of a split give the same F).
    y = np.array([0.3, 1.9, 0.1, 2.4, 0.7, 2.2, 0.2, 1.7])
    groups = np.array(list("abababab"))
    sites = _sites(8)
    res = permanova(_euclid(y, sites), pd.DataFrame({"g": groups}, index=sites), rng=1, **FAST)
    assert res.exact and len(res.null_distribution["g"]) == 35
    assert "all rearrangements" in res.table.loc[0, "permutations"]
    fs = []
    for first in itertools.combinations(range(8), 4):
        lab = np.isin(np.arange(8), first)
        fs.append(stats.f_oneway(y[lab], y[~lab]).statistic)
    observed = stats.f_oneway(y[groups == "a"], y[groups == "b"]).statistic
    assert res.pvalue["g"] == pytest.approx(np.mean(np.array(fs) >= observed - 1e-9), abs=1e-12)


def _plain_null(d, frame, terms, kind, n_resamples=49):
    """The permuted pseudo-F of every term refitted per order (Freedman & Lane 1983): the
    residual matrix of the reduced model rearranged with np.ix_, then the full and reduced
    models fitted by least squares to it."""
    design, _ = read_design(frame, d.labels, terms)
    gm = gower_centred(d)
    tests, _, _, _ = _build_tests(design, gm, kind, None)
    out = {}
    for t in tests:
        plan = _plan(t, design, n_resamples, np.random.SeedSequence(7))
        orders = np.concatenate(list(plan.batches()))
        batched = t.batch(orders)
        plain = []
        for o in orders:
            gp = t.g[np.ix_(o, o)]
            ss = float(np.trace(t.tested.T @ gp @ t.tested))
            explained = ss if t.second is None else float(np.trace(t.second.T @ gp @ t.second))
            plain.append((ss / t.df) / ((t.total - explained) / t.den_df))
        out[t.term.name] = (batched, np.array(plain))
    return out


@pytest.mark.parametrize("kind", ["sequential", "marginal"])
def test_batched_null_equals_refitting_each_permutation(kind):
    # two ways: the kernel's permuted pseudo-F against the plain refit of each rearrangement
    frame, _ = _two_way_data(False, seed=21)
    rng = np.random.default_rng(2)
    counts = rng.poisson(2.0, size=(len(frame), 10))
    counts[counts.sum(axis=1) == 0, 0] = 1
    d = DistanceMatrix(pdist(counts, "braycurtis"), list(frame.index))
    for name, (batched, plain) in _plain_null(d, frame[["A", "B"]], ["A*B"], kind).items():
        np.testing.assert_allclose(batched, plain, rtol=1e-9, err_msg=name)


def test_nested_design_tests_zone_against_sites_by_whole_units():
    # A nested ANOVA (sites within zones, samples within sites), balanced: zone is tested
    # against the mean square of site(zone) (Anderson 2001; Sokal & Rohlf 1995, ch. 10, from
    # memory), sums of squares as statsmodels' C(zone) + C(zone):C(site).
    rng = np.random.default_rng(6)
    zone = np.repeat(["north", "south"], 6)
    site = np.tile(np.repeat(["1", "2", "3"], 2), 2)
    y = rng.normal(size=12) + rng.normal(size=6)[np.repeat(np.arange(6), 2)]
    sites = _sites(12)
    frame = pd.DataFrame({"zone": zone, "site": site, "y": y}, index=sites)
    res = permanova(_euclid(y, sites), frame[["zone", "site"]], terms=["zone", "site(zone)"],
                    rng=1, **FAST)
    ref = anova_lm(smf.ols("y ~ C(zone) + C(zone):C(site)", frame).fit(), typ=1)
    table = res.table.set_index("term")
    ms_site = ref.loc["C(zone):C(site)", "sum_sq"] / ref.loc["C(zone):C(site)", "df"]
    assert table.loc["site(zone)", "df"] == 4
    assert table.loc["zone", "pseudo_f"] == pytest.approx(
        ref.loc["C(zone)", "sum_sq"] / ms_site, rel=1e-10)
    assert table.loc["site(zone)", "pseudo_f"] == pytest.approx(ref.loc["C(zone):C(site)", "F"],
                                                                rel=1e-10)
    assert table.loc["zone", "tested_against"] == "site(zone)"
    # 6 whole units of 2 samples: 6! = 720 <= 999 exchanges, enumerated (exact)
    assert "whole units of site(zone)" in table.loc["zone", "permutations"]
    assert len(res.null_distribution["zone"]) == 720
    # the zone F takes only C(6, 3) / 2 = 10 distinct values under unit exchange (theory)
    assert len(np.unique(np.round(res.null_distribution["zone"], 9))) == 10
    # site(zone) rearranged only within zones: (6! / (2!)^3)^2 = 8100 > 999 random
    assert "within 2 strata" in table.loc["site(zone)", "permutations"]


def test_whole_units_never_split_and_within_zone_orders_stay_in_zone():
    rng = np.random.default_rng(9)
    zone = np.repeat(["a", "b", "c"], 8)
    site = np.tile(np.repeat(list("1234"), 2), 3)
    y = rng.normal(size=(24, 2))
    sites = _sites(24)
    frame = pd.DataFrame({"zone": zone, "site": site}, index=sites)
    d = _euclid(y, sites)
    design, _ = read_design(frame, d.labels, ["zone", "site(zone)"])
    tests, _, _, _ = _build_tests(design, gower_centred(d), "sequential", None)
    unit = np.array([f"{a}{b}" for a, b in zip(zone, site, strict=True)])
    zone_plan = _plan(tests[0], design, 99, np.random.SeedSequence(1))
    for o in np.concatenate(list(zone_plan.batches())):
        moved = unit[o]  # every unit's sites come from one unit
        assert all(len(set(moved[unit == u])) == 1 for u in np.unique(unit))
    site_plan = _plan(tests[1], design, 99, np.random.SeedSequence(1))
    for o in np.concatenate(list(site_plan.batches())):
        assert (zone[o] == zone).all()


def test_terms_constant_within_strata_are_not_tested():
    # before/after at control and impact sites, sites as strata: period and the interaction
    # vary within sites, treatment does not, so no within-site rearrangement can test it
    rng = np.random.default_rng(10)
    site = np.repeat([f"k{i}" for i in range(8)], 2)
    period = np.tile(["before", "after"], 8)
    treatment = np.repeat(["control"] * 4 + ["impact"] * 4, 2)
    y = rng.normal(size=(16, 3))
    y[(treatment == "impact") & (period == "after")] += 2.5
    sites = _sites(16)
    frame = pd.DataFrame({"period": period, "treatment": treatment}, index=sites)
    res = permanova(_euclid(y, sites), frame, terms=["period*treatment"],
                    strata=pd.Series(site, index=sites), rng=1)
    assert np.isnan(res.pvalue["treatment"])
    assert res.pvalue["period:treatment"] < 0.05
    # 2 orders within each of 8 sites: 2^8 = 256 rearrangements, all enumerated
    assert len(res.null_distribution["period"]) == 256 and res.exact
    assert any("'treatment' do(es) not vary within the strata" in n for n in res.notes)
    assert "treatment" not in res.dispersion


def test_pairwise_comparisons_use_the_pairs_sites_and_adjust_within_the_factor():
    rng = np.random.default_rng(13)
    groups = np.repeat(["a", "b", "c"], [5, 6, 7])
    y = rng.normal(size=18) + (groups == "c") * 3.0
    sites = _sites(18)
    res = permanova(_euclid(y, sites), pd.DataFrame({"zone": groups}, index=sites), rng=3,
                    dispersion=False)
    pairs = res.pairwise.set_index(["level_1", "level_2"])
    assert list(pairs.index) == [("a", "b"), ("a", "c"), ("b", "c")]
    # each pair's F is scipy's two-sample F on the two classes' sites
    for (u, v), row in pairs.iterrows():
        ref = stats.f_oneway(y[groups == u], y[groups == v]).statistic
        assert row["pseudo_f"] == pytest.approx(ref, rel=1e-10)
        assert row["n_sites"] == np.sum(np.isin(groups, [u, v]))
    # Holm's adjustment of the three (statsmodels multipletests, reference library)
    from statsmodels.stats.multitest import multipletests

    expected = multipletests(pairs["pvalue"].to_numpy(), method="holm")[1]
    np.testing.assert_allclose(pairs["pvalue_adjusted"].to_numpy(), expected, rtol=1e-12)
    assert pairs.loc[("a", "b"), "exact"]  # C(11, 5) = 462 <= 999
    assert pairs.loc[("a", "c"), "pvalue_adjusted"] < 0.05


def test_same_result_whatever_n_jobs():
    frame, d = _two_way_data(False, seed=30)
    one = permanova(d, frame[["A", "B"]], terms=["A*B"], rng=5)
    two = permanova(d, frame[["A", "B"]], terms=["A*B"], rng=5, n_jobs=2)
    pd.testing.assert_frame_equal(one.table, two.table)
    pd.testing.assert_frame_equal(one.pairwise, two.pairwise)
    assert one.dispersion_table.equals(two.dispersion_table)
