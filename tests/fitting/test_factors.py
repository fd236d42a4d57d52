"""Factor fitting checked against hand-computed sums of squares, scipy's one-way ANOVA and
exact enumeration."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from gradients import InputError
from gradients.fitting import fit_factors
from gradients.permutation import permutation_plan


def _data(n=36, seed=0):
    rng = np.random.default_rng(seed)
    labels = [f"site{i}" for i in range(n)]
    habitat = pd.Series(np.tile(["bog", "fen", "heath"], n // 3), index=labels, name="habitat")
    sc = pd.DataFrame(rng.normal(size=(n, 3)), index=labels, columns=["axis1", "axis2", "axis3"])
    sc.loc[habitat == "bog", "axis1"] += 1.5
    sc.loc[habitat == "heath", "axis2"] -= 1.0
    grazing = pd.Series(rng.choice(["yes", "no"], n), index=labels, name="grazing")
    return sc, pd.DataFrame({"habitat": habitat, "grazing": grazing})


def _between_share(x: np.ndarray, labels: np.ndarray) -> float:
    # By hand: between-class / total sum of squares of the scores, summed over axes
    total = ((x - x.mean(0)) ** 2).sum()
    between = 0.0
    for g in np.unique(labels):
        members = x[labels == g]
        between += len(members) * ((members.mean(0) - x.mean(0)) ** 2).sum()
    return between / total


def test_r2_is_between_share_and_centroids_are_class_means():
    sc, fac = _data()
    fit = fit_factors(sc, fac, n_resamples=99, rng=0)
    for name in fac.columns:
        expected = _between_share(sc[["axis1", "axis2"]].to_numpy(), fac[name].to_numpy())
        assert fit.table.loc[name, "r2"] == pytest.approx(expected, abs=1e-12)
        assert fit.table.loc[name, "n_levels"] == fac[name].nunique()
    cents = fit.centroids[fit.centroids.factor == "habitat"].set_index("level")
    means = sc.groupby(fac["habitat"])[["axis1", "axis2"]].mean()
    np.testing.assert_allclose(cents.loc[means.index, ["axis1", "axis2"]], means, atol=1e-12)
    assert (cents["n_sites"] == 12).all()


def test_one_axis_r2_matches_scipy_one_way_anova():
    # Reference library: on one axis r2 is the ANOVA eta^2, so
    # F = (r2 / (G - 1)) / ((1 - r2) / (n - G)) equals scipy.stats.f_oneway's statistic.
    sc, fac = _data(seed=3)
    fit = fit_factors(sc, fac["habitat"], axes=["axis1"], n_resamples=9, rng=0)
    r2 = fit.table.loc["habitat", "r2"]
    groups = [sc.axis1[fac.habitat == g] for g in ("bog", "fen", "heath")]
    f_ref = stats.f_oneway(*groups).statistic
    assert (r2 / 2) / ((1 - r2) / (36 - 3)) == pytest.approx(f_ref, rel=1e-10)


def test_weighted_r2_by_hand_and_batched_null_by_direct_relabelling():
    sc, fac = _data(seed=5)
    w = pd.Series(np.random.default_rng(2).uniform(0.5, 2.0, 36), index=sc.index)
    fit = fit_factors(sc, fac, weights=w, n_resamples=40, rng=8)
    x = sc[["axis1", "axis2"]].to_numpy()
    wv = w.to_numpy()

    def weighted_share(labels):
        xbar = wv @ x / wv.sum()
        total = (wv[:, None] * (x - xbar) ** 2).sum()
        between = 0.0
        for g in np.unique(labels):
            m = labels == g
            centre = wv[m] @ x[m] / wv[m].sum()
            between += wv[m].sum() * ((centre - xbar) ** 2).sum()
        return between / total

    assert fit.table.loc["habitat", "r2"] == pytest.approx(
        weighted_share(fac.habitat.to_numpy()), abs=1e-12)
    # two ways agree: batched kernel vs relabelling site i with the label of site orders[b, i]
    orders = permutation_plan(36, n_resamples=40, rng=8, site_labels=sc.index).batch(0)
    for b in (0, 13, 39):
        for j, name in enumerate(fac.columns):
            labels = fac[name].to_numpy()[orders[b]]
            assert fit.null_distribution[b, j] == pytest.approx(weighted_share(labels), abs=1e-12)


def test_exact_enumeration_matches_brute_force():
    # Theory: 7 sites -> 5040 permutations; with n_resamples=5040 all are enumerated.
    rng = np.random.default_rng(1)
    labels = [f"s{i}" for i in range(7)]
    sc = pd.DataFrame(rng.normal(size=(7, 2)), index=labels, columns=["axis1", "axis2"])
    f = pd.Series(["a", "a", "a", "b", "b", "c", "c"], index=labels, name="zone")
    fit = fit_factors(sc, f, n_resamples=5040, rng=0)
    x = sc.to_numpy()
    obs = _between_share(x, f.to_numpy())
    vals = [_between_share(x, f.to_numpy()[list(p)]) for p in itertools.permutations(range(7))]
    assert fit.exact
    assert fit.table.loc["zone", "pvalue"] == pytest.approx(
        np.mean([v >= obs - 1e-12 for v in vals]), abs=1e-12)


def test_clear_classes_significant_random_classes_not():
    sc, fac = _data(n=60, seed=9)
    fit = fit_factors(sc, fac, n_resamples=999, rng=4)
    assert fit.table.loc["habitat", "pvalue"] <= 0.002
    assert fit.table.loc["grazing", "pvalue"] > 0.05


def test_strata_restrict_permutations():
    # Classes coincide with strata (every stratum is one class): under within-strata
    # permutation the labels never move between strata, the statistic is the same under
    # every permutation, and the p-value is 1.
    rng = np.random.default_rng(3)
    labels = [f"s{i}" for i in range(30)]
    zone = np.repeat(["up", "mid", "low"], 10)
    sc = pd.DataFrame(rng.normal(size=(30, 2)), index=labels, columns=["axis1", "axis2"])
    sc.loc[zone == "up", "axis1"] += 2
    fac = pd.Series(zone, index=labels, name="zone")
    free = fit_factors(sc, fac, n_resamples=199, rng=0)
    within = fit_factors(sc, fac, n_resamples=199, rng=0, strata=zone)
    assert free.table.loc["zone", "pvalue"] == pytest.approx(1 / 200)
    assert within.table.loc["zone", "pvalue"] == pytest.approx(1.0)


def test_dtypes_accepted_and_numeric_refused():
    sc, fac = _data()
    mixed = pd.DataFrame({
        "as_str": fac.habitat.astype("str"),
        "as_object": fac.habitat.astype(object),
        "as_category": pd.Categorical(fac.habitat, categories=["bog", "fen", "heath", "dune"]),
        "flag": fac.grazing == "yes",
    }, index=fac.index)
    fit = fit_factors(sc, mixed, n_resamples=19, rng=0)
    r2 = fit.table["r2"]
    assert r2["as_str"] == pytest.approx(r2["as_object"]) == pytest.approx(r2["as_category"])
    assert any("'dune'" in n for n in fit.notes)  # unused category said in notes
    assert set(fit.centroids.loc[fit.centroids.factor == "as_category", "level"]) == {
        "bog", "fen", "heath"}
    with pytest.raises(InputError, match=r"'depth'.*fit_vectors\(\)"):
        fit_factors(sc, pd.DataFrame({"depth": np.arange(36.0)}, index=sc.index), n_resamples=9)


def test_input_errors():
    sc, fac = _data()
    with pytest.raises(InputError, match="single level"):
        fit_factors(sc, pd.Series("bog", index=sc.index, name="one"), n_resamples=9)
    broken = fac.copy()
    broken.loc["site4", "habitat"] = None
    with pytest.raises(InputError, match=r"'habitat' at site\(s\) 'site4'"):
        fit_factors(sc, broken, n_resamples=9)
    fit = fit_factors(sc, broken, n_resamples=9, rng=0, missing="complete")
    assert fit.table.loc["habitat", "n_sites"] == 35
    with pytest.raises(InputError, match="but not in"):
        fit_factors(sc.iloc[1:], fac, n_resamples=9)
