"""Vector fitting checked against statsmodels OLS/WLS, exact enumeration and the F-test."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.stats.multitest import multipletests

from gradients import InputError
from gradients.fitting import fit_vectors
from gradients.permutation import permutation_plan


def _scores(n, d=2, seed=0):
    rng = np.random.default_rng(seed)
    labels = [f"s{i:03d}" for i in range(n)]
    return pd.DataFrame(rng.normal(size=(n, d)), index=labels,
                        columns=[f"axis{i + 1}" for i in range(d)])


def _environment(sc, seed=1):
    rng = np.random.default_rng(seed)
    n = len(sc)
    return pd.DataFrame({
        "pH": 2 * sc.axis1 - sc.axis2 + rng.normal(0, 1, n),
        "clay": 0.4 * sc.axis2 + rng.normal(0, 1, n),
        "noise": rng.normal(size=n),
    }, index=sc.index)


def test_r2_and_cosines_match_statsmodels_ols():
    # Reference library: statsmodels OLS R-squared of the variable on the axes (with
    # intercept); cosines are the slope coefficients divided by their length.
    sc = _scores(40, d=3)
    env = _environment(sc)
    fit = fit_vectors(sc, env, axes=3, n_resamples=99, rng=0)
    for var in env.columns:
        ols = sm.OLS(env[var].to_numpy(), sm.add_constant(sc.to_numpy())).fit()
        assert fit.table.loc[var, "r2"] == pytest.approx(ols.rsquared, abs=1e-10)
        slopes = ols.params[1:]
        np.testing.assert_allclose(fit.table.loc[var, ["axis1", "axis2", "axis3"]].to_numpy(),
                                   slopes / np.linalg.norm(slopes), atol=1e-10)
        assert fit.table.loc[var, "n_sites"] == 40


def test_weighted_r2_matches_statsmodels_wls_and_batched_null_matches_direct():
    # Reference library: statsmodels WLS R-squared (weighted, centred on the weighted mean).
    sc = _scores(35)
    env = _environment(sc)
    w = pd.Series(np.random.default_rng(5).uniform(0.2, 3, 35), index=sc.index)
    fit = fit_vectors(sc, env, weights=w, n_resamples=50, rng=3)
    xd = sm.add_constant(sc.to_numpy())
    for var in env.columns:
        wls = sm.WLS(env[var].to_numpy(), xd, weights=w.to_numpy()).fit()
        assert fit.table.loc[var, "r2"] == pytest.approx(wls.rsquared, abs=1e-10)
    # two ways agree: the batched null equals WLS refits on the permuted variable
    orders = permutation_plan(35, n_resamples=50, rng=3).batch(0)
    for b in (0, 7, 49):
        for j, var in enumerate(env.columns):
            y = env[var].to_numpy()[orders[b]]
            r2 = sm.WLS(y, xd, weights=w.to_numpy()).fit().rsquared
            assert fit.null_distribution[b, j] == pytest.approx(r2, abs=1e-10)


def test_batched_null_equals_per_permutation_lstsq():
    # Two ways agree: the BLAS batch vs one numpy.linalg.lstsq per permutation.
    sc = _scores(50)
    env = _environment(sc)
    fit = fit_vectors(sc, env, n_resamples=300, rng=11)
    orders = np.concatenate(list(permutation_plan(50, n_resamples=300, rng=11).batches()))
    xd = np.column_stack([np.ones(50), sc.to_numpy()])
    for b in (0, 1, 150, 299):
        y = env.to_numpy()[orders[b]]
        coef, *_ = np.linalg.lstsq(xd, y, rcond=None)
        resid = y - xd @ coef
        r2 = 1 - (resid**2).sum(0) / ((y - y.mean(0)) ** 2).sum(0)
        np.testing.assert_allclose(fit.null_distribution[b], r2, atol=1e-12)


def test_exact_enumeration_matches_brute_force():
    # Theory: 6 sites -> 720 permutations <= 999, so the test is exact; p = share of all
    # permutations (identity included) with r2 >= observed.
    sc = _scores(6, seed=4)
    y = pd.Series([1.0, 3.0, 2.0, 5.0, 4.0, 7.0], index=sc.index, name="Cu")
    fit = fit_vectors(sc, y, n_resamples=999, rng=0)
    xd = np.column_stack([np.ones(6), sc.to_numpy()])

    def r2(v):
        coef, *_ = np.linalg.lstsq(xd, v, rcond=None)
        return 1 - ((v - xd @ coef) ** 2).sum() / ((v - v.mean()) ** 2).sum()

    obs = r2(y.to_numpy())
    values = [r2(y.to_numpy()[list(p)]) for p in itertools.permutations(range(6))]
    expected = np.mean([v >= obs - 1e-12 for v in values])
    assert fit.exact
    assert fit.table.loc["Cu", "pvalue"] == pytest.approx(expected, abs=1e-12)


def test_permutation_pvalue_agrees_with_ols_f_test_within_monte_carlo_error():
    # Theory / reference library: with Gaussian errors the OLS F-test (statsmodels f_pvalue) is
    # exact, and the permutation test of r2 estimates nearly the same p-value. With P = 19999
    # permutations the p-value's Monte Carlo standard error is sqrt(p(1-p)/P) (binomial; at
    # most 0.0036); we allow 4 SE (a false failure about 6e-5 per variable) plus 0.002 for the
    # gap between the permutation and the normal-theory distribution at n = 60. That gap was
    # measured on these data with 199,999 permutations: every difference was within 1.2 SE
    # of 0 (the largest 0.0009), so 0.002 is more than twice what the data show. A p-value off
    # by 0.01 fails (the old allowance was 4 SE + 0.02 at P = 3999, about 0.05).
    sc = _scores(60, seed=8)
    rng = np.random.default_rng(9)
    env = pd.DataFrame({f"v{j}": 0.12 * j * sc.axis1 + rng.normal(size=60) for j in range(5)},
                       index=sc.index)
    fit = fit_vectors(sc, env, n_resamples=19999, rng=10)
    xd = sm.add_constant(sc.to_numpy())
    for var in env.columns:
        p_f = sm.OLS(env[var].to_numpy(), xd).fit().f_pvalue
        p_perm = fit.table.loc[var, "pvalue"]
        se = np.sqrt(p_f * (1 - p_f) / 19999)
        assert abs(p_perm - p_f) <= 4 * se + 0.002, (var, p_perm, p_f)


def test_holm_and_bh_adjustment_match_statsmodels():
    # Reference library: statsmodels multipletests.
    sc = _scores(30)
    env = _environment(sc)
    holm = fit_vectors(sc, env, n_resamples=199, rng=2)
    bh = fit_vectors(sc, env, n_resamples=199, rng=2, adjust="fdr_bh")
    raw = holm.table["pvalue"].to_numpy()
    np.testing.assert_allclose(holm.table["pvalue_adjusted"], multipletests(raw, method="holm")[1])
    np.testing.assert_allclose(bh.table["pvalue_adjusted"], multipletests(raw, method="fdr_bh")[1])
    none = fit_vectors(sc, env, n_resamples=199, rng=2, adjust=None)
    np.testing.assert_allclose(none.table["pvalue_adjusted"], raw)
    assert any("No multiplicity adjustment" in n for n in none.notes)


def test_strata_restrict_permutations_between_strata_signal_is_not_significant():
    # Design: the variable differs only between strata (plus small noise) and the scores
    # follow the strata. Free permutation finds a strong fit; within-strata permutation keeps
    # each stratum's values in place, so the between-strata part cannot count as evidence.
    rng = np.random.default_rng(21)
    strata = np.repeat(["A", "B", "C", "D"], 10)
    level = pd.Series(strata).map({"A": 0.0, "B": 1.0, "C": 2.0, "D": 3.0}).to_numpy()
    labels = [f"s{i}" for i in range(40)]
    sc = pd.DataFrame({"axis1": level + rng.normal(0, 0.3, 40),
                       "axis2": rng.normal(size=40)}, index=labels)
    env = pd.DataFrame({"depth": level + rng.normal(0, 0.05, 40)}, index=labels)
    free = fit_vectors(sc, env, n_resamples=499, rng=1)
    within = fit_vectors(sc, env, n_resamples=499, rng=1,
                         strata=pd.Series(strata, index=labels))
    assert free.table.loc["depth", "pvalue"] <= 0.01
    assert within.table.loc["depth", "pvalue"] > 0.05
    assert within.scheme == "strata"
    # and every permuted order kept each site within its stratum (orders recomputed)
    plan = permutation_plan(40, strata=strata, n_resamples=499, rng=1)
    orders = np.concatenate(list(plan.batches()))
    assert (strata[orders] == strata[None, :]).all()


def test_arrows_scale_rule():
    sc = _scores(40)
    env = _environment(sc)
    fit = fit_vectors(sc, env, n_resamples=19, rng=0)
    tips = fit.arrows()
    raw = fit.table[["axis1", "axis2"]].to_numpy() * np.sqrt(fit.table["r2"].to_numpy())[:, None]
    mult = tips.attrs["multiplier"]
    np.testing.assert_allclose(tips[["axis1", "axis2"]].to_numpy(), raw * mult)
    # every tip within 90 % of the sites' extent on each axis, one of them exactly at it
    hi, lo = sc.max().to_numpy(), sc.min().to_numpy()
    room = np.where(raw > 0, hi, -lo)
    used = np.abs(raw * mult) / room
    assert used.max() == pytest.approx(0.9)
    assert (used <= 0.9 + 1e-12).all()
    np.testing.assert_allclose(fit.arrows(scale=2.0)[["axis1", "axis2"]].to_numpy(), 2 * raw)
    with pytest.raises(InputError, match="`scale` must be 'auto' or a positive number"):
        fit.arrows(scale=-1)


def test_categorical_refused_with_pointer_to_fit_factors():
    sc = _scores(20)
    env = _environment(sc)
    env["habitat"] = pd.Series(["bog", "fen"] * 10, index=sc.index)  # pandas string dtype
    with pytest.raises(InputError, match=r"'habitat'.*fit_factors\(\)"):
        fit_vectors(sc, env, n_resamples=9)


def test_missing_values_error_names_variable_and_sites_or_complete_cases():
    sc = _scores(30)
    env = _environment(sc)
    env.loc[["s003", "s017"], "clay"] = np.nan
    with pytest.raises(InputError, match=r"'clay' at site\(s\) 's003', 's017'.*missing='complete'"):
        fit_vectors(sc, env, n_resamples=9)
    fit = fit_vectors(sc, env, n_resamples=99, rng=4, missing="complete")
    assert fit.table.loc["clay", "n_sites"] == 28 and fit.table.loc["pH", "n_sites"] == 30
    keep = env["clay"].notna()
    sub = fit_vectors(sc[keep], env.loc[keep, ["clay"]], n_resamples=9, rng=0)
    assert fit.table.loc["clay", "r2"] == pytest.approx(sub.table.loc["clay", "r2"], abs=1e-12)
    assert np.isfinite(fit.table["pvalue"]).all()


def test_input_errors():
    sc = _scores(20)
    env = _environment(sc)
    with pytest.raises(InputError, match="site"):
        fit_vectors(sc, env.iloc[:-1], n_resamples=9)
    with pytest.raises(InputError, match="constant"):
        fit_vectors(sc, env.assign(flat=1.0), n_resamples=9)
    with pytest.raises(InputError, match="`adjust` must be one of"):
        fit_vectors(sc, env, adjust="bonferroni", n_resamples=9)
    with pytest.raises(InputError, match="`axes` names column"):
        fit_vectors(sc, env, axes=["axis1", "axis9"], n_resamples=9)
    with pytest.raises(InputError, match="`weights` must be positive"):
        fit_vectors(sc, env, weights=np.r_[np.ones(19), 0.0], n_resamples=9)
    with pytest.raises(InputError, match="`n_resamples` must be a positive integer"):
        fit_vectors(sc, env, n_resamples=-3)


def test_same_rng_same_result_any_n_jobs_and_inputs_unchanged():
    sc = _scores(40)
    env = _environment(sc)
    before = env.copy()
    a = fit_vectors(sc, env, n_resamples=2500, rng=7)
    b = fit_vectors(sc, env, n_resamples=2500, rng=7, n_jobs=2)
    np.testing.assert_array_equal(a.null_distribution, b.null_distribution)
    pd.testing.assert_frame_equal(env, before)


def test_accepts_an_ordination_result_and_r2_is_rotation_invariant():
    # Theory: PCoA of Euclidean distances among 2-D points returns the points up to rotation,
    # reflection and centring, and r2 of a regression on them is unchanged by those
    # transformations; so r2 on the PCoA result equals statsmodels OLS on the raw points.
    from scipy.spatial.distance import pdist, squareform

    from gradients import DistanceMatrix
    from gradients.ordination import pcoa

    rng = np.random.default_rng(0)
    pts = rng.normal(size=(20, 2))
    labels = [f"s{i}" for i in range(20)]
    result = pcoa(DistanceMatrix.from_square(squareform(pdist(pts)), labels=labels))
    env = pd.DataFrame({"v": pts[:, 0] + rng.normal(0, 0.5, 20)}, index=labels)
    fit = fit_vectors(result, env, n_resamples=9, rng=0)
    ols = sm.OLS(env["v"].to_numpy(), sm.add_constant(pts)).fit()
    assert fit.table.loc["v", "r2"] == pytest.approx(ols.rsquared, abs=1e-10)


def test_shift_and_scale_invariance_with_weights():
    # Theory: r2 is unchanged by y -> a + b y (b != 0), permuted values shift alike, so the
    # whole null distribution is unchanged; a large offset (as for conductivity in uS/cm)
    # must not cost precision.
    sc = _scores(40)
    env = _environment(sc)[["pH"]]
    w = np.random.default_rng(3).uniform(0.5, 2, 40)
    base = fit_vectors(sc, env, weights=w, n_resamples=99, rng=5)
    moved = fit_vectors(sc, 1e6 + 250.0 * env, weights=w, n_resamples=99, rng=5)
    assert moved.table.loc["pH", "r2"] == pytest.approx(base.table.loc["pH", "r2"], abs=1e-10)
    np.testing.assert_allclose(moved.null_distribution, base.null_distribution, atol=1e-9)


def test_auto_arrows_need_centred_scores_and_dates_are_not_measurements():
    # Arrows start at the origin; when the sites do not surround it (uncentred scores) no
    # multiplier keeps them inside the cloud, so 'auto' says so instead of drawing them
    # outside. A datetime column gets its own message (it is neither categorical nor a
    # measurement).
    rng = np.random.default_rng(0)
    sc = pd.DataFrame(rng.uniform(1, 3, (30, 2)), columns=["axis1", "axis2"])
    env = pd.DataFrame({"a": sc.axis1 + rng.normal(0, 0.1, 30)})
    fit = fit_vectors(sc, env, n_resamples=99, rng=1)
    with pytest.raises(InputError, match="do not surround the origin on axes 'axis1', 'axis2'"):
        fit.arrows()
    assert fit.arrows(scale=1.0).attrs["multiplier"] == 1.0
    centred = fit_vectors(sc - sc.mean(), env, n_resamples=99, rng=1)
    assert np.isfinite(centred.arrows()["length"]).all()
    env["when"] = pd.date_range("2020-01-01", periods=30)
    with pytest.raises(InputError, match="dates or durations"):
        fit_vectors(sc, env)


def test_small_sample_note_counts_the_sites_each_variable_uses():
    rng = np.random.default_rng(2)
    sc = pd.DataFrame(rng.normal(size=(30, 2)), columns=["axis1", "axis2"])
    env = pd.DataFrame({"a": rng.normal(size=30), "b": rng.normal(size=30)})
    env.loc[6:, "b"] = np.nan  # b measured at 6 sites only
    fit = fit_vectors(sc, env, missing="complete", n_resamples=99, rng=1)
    assert any("Only 6 sites for some variable" in note for note in fit.notes)
    assert not any("Only" in note for note in fit_vectors(sc, env[["a"]], rng=1).notes)


def test_cyclic_design_with_gaps_says_the_gaps_are_closed():
    rng = np.random.default_rng(0)
    sc = pd.DataFrame(rng.normal(size=(20, 2)), columns=["axis1", "axis2"])
    env = pd.DataFrame({"a": rng.normal(size=20)})
    env.iloc[3, 0] = np.nan
    fit = fit_vectors(sc, env, scheme="cyclic", missing="complete", rng=1)
    assert fit.exact and fit.n_resamples == 19  # 19 shifts of the 19 sites with values
    assert any(note.startswith("Cyclic shifts run over the sites with values only")
               for note in fit.notes)
