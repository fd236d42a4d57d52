"""Indicator taxa: values against the published definition, exact and calibrated p-values."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from gradients import InputError, indicator_taxa
from gradients.permutation import permutation_plan


def _table(rng: np.random.Generator, n: int = 14, t: int = 6) -> pd.DataFrame:
    counts = rng.poisson(rng.gamma(1.0, 3.0, size=(n, t)))
    counts[0] += 1  # every taxon occurs somewhere
    return pd.DataFrame(counts, index=[f"s{i:02d}" for i in range(n)],
                        columns=[f"taxon{j}" for j in range(t)])


def _by_definition(x: pd.DataFrame, groups: pd.Series, candidates: list[tuple[str, ...]]):
    """Dufrêne & Legendre (1997, Ecol. Monogr. 67: 345), written out with loops: specificity
    A = mean abundance in the class / sum over classes of the class means, fidelity B = share
    of the class's sites where the taxon occurs, IndVal = A B. For a union of classes (De
    Cáceres, Legendre & Moretti 2010, Oikos 119: 1674): A = sum of the member class means / sum
    of all class means, B = share of the union's sites where the taxon occurs."""
    classes = sorted(set(groups))
    spec = pd.DataFrame(0.0, index=x.columns, columns=["+".join(c) for c in candidates])
    fid = spec.copy()
    for taxon in x.columns:
        means = {c: float(np.mean([x.loc[s, taxon] for s in x.index if groups[s] == c]))
                 for c in classes}
        total = sum(means.values())
        for cand in candidates:
            members = [s for s in x.index if groups[s] in cand]
            spec.loc[taxon, "+".join(cand)] = sum(means[c] for c in cand) / total
            fid.loc[taxon, "+".join(cand)] = sum(x.loc[s, taxon] > 0 for s in members) / len(
                members)
    return spec, fid, spec * fid


def test_values_equal_the_definition():
    rng = np.random.default_rng(3)
    x = _table(rng)
    # unequal classes (5, 6, 3 sites): the class means, not sums, enter the specificity
    groups = pd.Series(["bog"] * 5 + ["fen"] * 6 + ["heath"] * 3, index=x.index)
    res = indicator_taxa(x, groups, n_resamples=99, rng=1)
    spec, fid, iv = _by_definition(x, groups, [("bog",), ("fen",), ("heath",)])
    np.testing.assert_allclose(res.specificity.to_numpy(), spec.to_numpy(), rtol=1e-12)
    np.testing.assert_allclose(res.fidelity.to_numpy(), fid.to_numpy(), rtol=1e-12)
    np.testing.assert_allclose(res.indval.to_numpy(), iv.to_numpy(), rtol=1e-12)
    assert list(res.table["group"]) == list(iv.idxmax(axis=1))
    np.testing.assert_allclose(res.table["indval"], iv.max(axis=1), rtol=1e-12)
    assert list(res.class_sizes) == [5, 6, 3]


def test_combinations_equal_the_definition():
    rng = np.random.default_rng(4)
    x = _table(rng, n=12, t=5)
    groups = pd.Series(["a"] * 4 + ["b"] * 3 + ["c"] * 5, index=x.index)
    res = indicator_taxa(x, groups, combinations=2, n_resamples=99, rng=1)
    cands = [("a",), ("b",), ("c",), ("a", "b"), ("a", "c"), ("b", "c")]
    assert res.groups == ("a", "b", "c", "a+b", "a+c", "b+c")
    _, _, iv = _by_definition(x, groups, cands)
    np.testing.assert_allclose(res.indval.to_numpy(), iv.to_numpy(), rtol=1e-12)
    # a taxon at every site of a and b and nowhere in c is a perfect indicator of "a+b"
    x2 = x.copy()
    x2["shared"] = [2, 1, 3, 1, 4, 1, 2, 0, 0, 0, 0, 0]
    res2 = indicator_taxa(x2, groups, combinations=2, n_resamples=99, rng=1)
    row = res2.table.set_index("taxon").loc["shared"]
    assert row["group"] == "a+b" and row["indval"] == pytest.approx(1.0)
    assert row["n_sites"] == 7


def test_exact_pvalue_by_hand():
    # Two classes of three sites; taxon "a" occurs only at the three "pool" sites, so its
    # largest value is 1. By hand: of the C(6, 3) = 20 ways to relabel the sites, only the two
    # that put a's three sites together in one class reach 1, so p = 2 / 20 = 0.1. The largest
    # value does not depend on the classes' names, so the 10 pairs of relabellings that swap
    # the two classes are enumerated once each: p = 1 / 10, the same.
    x = pd.DataFrame({"a": [5, 3, 4, 0, 0, 0], "b": [1, 1, 0, 1, 1, 1]}, index=list("pqrstu"))
    g = pd.Series(["pool"] * 3 + ["riffle"] * 3, index=x.index)
    res = indicator_taxa(x, g, n_resamples=999, rng=1)
    assert res.exact and res.null_distribution.shape[0] == 10
    assert res.pvalue["a"] == pytest.approx(0.1, abs=1e-12)
    row = res.table.set_index("taxon").loc["a"]
    assert (row["group"], row["indval"], row["specificity"], row["fidelity"]) == (
        "pool", 1.0, 1.0, 1.0)
    # taxon b: means 2/3 and 1 -> A = 0.6 for riffle, fidelity 1 -> IndVal 0.6 (by hand)
    assert res.statistic["b"] == pytest.approx(0.6, rel=1e-12)


def test_exact_pvalue_within_strata_equals_direct_enumeration():
    # Exact enumeration written out in the test (theory: the p-value of an exact permutation
    # test is the share of rearrangements at least as extreme as the observed one).
    rng = np.random.default_rng(8)
    x = _table(rng, n=6, t=3)
    g = pd.Series(["up", "up", "down", "up", "down", "down"], index=x.index)
    strata = pd.Series(["s1"] * 3 + ["s2"] * 3, index=x.index)
    res = indicator_taxa(x, g, strata=strata, n_resamples=999, rng=1)
    # by hand: C(3, 1) ways to pick the "down" site of stratum s1 times C(3, 2) for s2 = 9
    # distinct reassignments; every one of the 3! x 3! = 36 orders gives one of them 4 times
    assert res.exact and res.null_distribution.shape[0] == 9
    labels = g.to_numpy()
    obs = res.statistic.to_numpy()
    hits = np.zeros(3)
    total = 0
    for p1 in itertools.permutations(range(3)):
        for p2 in itertools.permutations(range(3, 6)):
            order = list(p1) + list(p2)
            relabelled = pd.Series(labels[order], index=x.index)
            _, _, iv = _by_definition(x, relabelled, [("down",), ("up",)])
            hits += iv.max(axis=1).to_numpy() >= obs - 1e-12
            total += 1
    np.testing.assert_allclose(res.pvalue.to_numpy(), hits / total, rtol=1e-12)


def test_batched_null_equals_one_rearrangement_at_a_time():
    # two ways: the plan's random orders replayed one by one through the definition
    rng = np.random.default_rng(5)
    x = _table(rng, n=15, t=4)
    g = pd.Series(np.repeat(["a", "b", "c"], 5), index=x.index)
    res = indicator_taxa(x, g, n_resamples=40, rng=7)
    plan = permutation_plan(15, n_resamples=40, rng=7, site_labels=x.index)
    orders = plan.batch(0)
    codes = pd.factorize(g, sort=True)[0]
    for b in range(0, 40, 7):
        # site i keeps its class and takes the data of site orders[b, i]
        xb = pd.DataFrame(x.to_numpy()[orders[b]], index=x.index, columns=x.columns)
        _, _, iv = _by_definition(xb, pd.Series(np.array(["a", "b", "c"])[codes], index=x.index),
                                  [("a",), ("b",), ("c",)])
        np.testing.assert_allclose(res.null_distribution[b], iv.max(axis=1), rtol=1e-12)


def test_same_result_whatever_the_row_order():
    rng = np.random.default_rng(6)
    x = _table(rng, n=16, t=5)
    g = pd.Series(np.repeat(["p", "q"], 8), index=x.index)
    a = indicator_taxa(x, g, n_resamples=199, rng=11)
    perm = rng.permutation(16)
    b = indicator_taxa(x.iloc[perm], g.iloc[perm[::-1]], n_resamples=199, rng=11)
    pd.testing.assert_frame_equal(a.table, b.table)


def test_pvalues_calibrated_on_null_data():
    # Theory: under exchangeable labels a permutation p-value (b + 1) / (P + 1) with P = 99
    # rejects at 0.05 with probability 5/100; 300 independent null data sets must reject a
    # number of times inside the 99 % binomial interval.
    rng = np.random.default_rng(12)
    trials = 300
    rejected = 0
    for i in range(trials):
        n = 18
        x = pd.DataFrame({"t": rng.lognormal(0.0, 1.0, size=n) * (rng.random(n) < 0.6)})
        x.iloc[0, 0] = 1.0
        g = pd.Series(np.array(["a", "b", "c"])[np.arange(n) % 3], index=x.index)
        res = indicator_taxa(x, g, n_resamples=99, rng=i)
        rejected += res.pvalue.iloc[0] <= 0.05
    lo, hi = stats.binom.interval(0.99, trials, 0.05)
    assert lo <= rejected <= hi


def test_power_against_a_planted_indicator():
    rng = np.random.default_rng(13)
    x = _table(rng, n=24, t=4)
    g = pd.Series(np.repeat(["a", "b"], 12), index=x.index)
    x["planted"] = np.r_[rng.poisson(6, 12) + 1, np.zeros(12, dtype=int)]
    res = indicator_taxa(x, g, n_resamples=199, rng=1)
    row = res.table.set_index("taxon").loc["planted"]
    assert row["group"] == "a" and row["pvalue"] == pytest.approx(1 / 200)
    assert res.top(1).set_index("group").loc["a", "taxon"] == "planted"
    assert set(res.top(2, alpha=0.05)["taxon"]) == {"planted"}


@pytest.mark.parametrize(("change", "message"), [
    (lambda x, g: (x, g.where(g.index != "s03")), "no class for site"),
    (lambda x, g: (x, pd.Series("a", index=g.index)), "one class only"),
    (lambda x, g: (x, g.iloc[1:]), "only in `community`|`groups`"),
    (lambda x, g: (x.assign(taxon0=-1), g), "non-negative"),
    (lambda x, g: (x.assign(taxon0=0), g), "occur at no site"),
    (lambda x, g: (x, g.to_numpy()[:-1]), "groups"),
])
def test_bad_input_is_a_clear_error(change, message):
    rng = np.random.default_rng(1)
    x = _table(rng, n=8, t=3)
    g = pd.Series(np.repeat(["a", "b"], 4), index=x.index)
    xx, gg = change(x, g)
    with pytest.raises(InputError, match=message):
        indicator_taxa(xx, gg, n_resamples=9, rng=1)


def test_bad_options_are_clear_errors():
    rng = np.random.default_rng(1)
    x = _table(rng, n=8, t=3)
    g = pd.Series(np.repeat(["a", "b"], 4), index=x.index)
    with pytest.raises(InputError, match="`combinations` must be a positive integer"):
        indicator_taxa(x, g, combinations=0)
    with pytest.raises(InputError, match="`adjust` must be one of"):
        indicator_taxa(x, g, adjust="bonferroni")
    with pytest.raises(InputError, match="`n` must be a positive integer"):
        indicator_taxa(x, g, n_resamples=9, rng=1).top(0)


def test_empty_classes_are_refused_and_single_site_classes_noted():
    # the same reading of classes as every group test (an empty category is an error); a class
    # of one site can still be scored, and the notes say what that means
    rng = np.random.default_rng(2)
    x = _table(rng, n=7, t=3)
    g = pd.Series(pd.Categorical(["a"] * 3 + ["b"] * 3 + ["c"], categories=["a", "b", "c", "d"]),
                  index=x.index)
    with pytest.raises(InputError, match="'d' of `groups` have no sites"):
        indicator_taxa(x, g, n_resamples=99, rng=1)
    res = indicator_taxa(x, g.cat.remove_unused_categories(), n_resamples=99, rng=1)
    assert res.groups == ("a", "b", "c")
    assert any("'c' have a single site" in n for n in res.notes)
    # a sequence is taken in the order of the community table
    same = indicator_taxa(x, list(g.astype(str)), n_resamples=99, rng=1)
    pd.testing.assert_frame_equal(same.table, res.table)
