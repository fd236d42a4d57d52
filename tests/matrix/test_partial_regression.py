"""Partial Mantel test and regression on distance matrices, against closed forms, statsmodels
OLS and brute-force permutation."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from scipy.spatial.distance import pdist, squareform

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.matrix import matrix_regression, partial_mantel
from gradients.permutation import permutation_plan


def _matrices(n, seed, k=3):
    rng = np.random.default_rng(seed)
    lab = [f"p{i}" for i in range(n)]
    z = rng.uniform(size=(n, 2))
    x = z[:, :1] + rng.normal(scale=0.5, size=(n, 1))
    y = 0.5 * x + z[:, 1:] + rng.normal(scale=0.5, size=(n, 1))
    w = rng.normal(size=(n, 2))
    mats = [DistanceMatrix(pdist(a), lab) for a in (x, y, z, w)]
    return mats[:k + 1] if k < 3 else mats


def _residuals(v, controls):
    # statsmodels OLS with an intercept: the reference regression
    return sm.OLS(v, sm.add_constant(np.column_stack(controls))).fit().resid


def test_partial_statistic_equals_formula_and_statsmodels_residual_correlation():
    # Smouse, Long & Sokal (1986): r_xy.z = (r_xy - r_xz r_yz) / sqrt((1-r_xz^2)(1-r_yz^2)),
    # which is also the correlation of the OLS residuals of x and y on z (statsmodels).
    x, y, z, _ = _matrices(20, 1)
    res = partial_mantel(x, y, z, n_resamples=99, rng=0)
    r = lambda a, b: stats.pearsonr(a.condensed, b.condensed).statistic  # noqa: E731
    rxy, rxz, ryz = r(x, y), r(x, z), r(y, z)
    formula = (rxy - rxz * ryz) / np.sqrt((1 - rxz**2) * (1 - ryz**2))
    assert res.statistic == pytest.approx(formula, abs=1e-12)
    ex, ey = _residuals(x.condensed, [z.condensed]), _residuals(y.condensed, [z.condensed])
    assert res.statistic == pytest.approx(np.corrcoef(ex, ey)[0, 1], abs=1e-12)
    assert res.r_xy == pytest.approx(rxy, abs=1e-12)


def test_default_permutes_residuals_and_explicit_raw_keeps_its_old_results():
    # The default follows the validation (docs/validation.md, partial Mantel tests): residuals
    # of the reduced model (Legendre 2000, method 2). An explicit permute='raw' gives exactly
    # what the old default gave: these numbers were recorded with the old default
    # (partial_mantel(x, y, z, n_resamples=99, rng=0)) before it changed.
    x, y, z, _ = _matrices(20, 1)
    default = partial_mantel(x, y, z, n_resamples=99, rng=0)
    explicit = partial_mantel(x, y, z, permute="residuals", n_resamples=99, rng=0)
    assert default.permute == "residuals"
    np.testing.assert_array_equal(default.null_distribution, explicit.null_distribution)
    assert default.pvalue == explicit.pvalue == 0.98
    raw = partial_mantel(x, y, z, permute="raw", n_resamples=99, rng=0)
    assert raw.pvalue == 1.0
    np.testing.assert_allclose(raw.null_distribution[:3], [-0.1013556350320977,
                                                           0.18195597311975492,
                                                           -0.13475136589308745], rtol=1e-12)
    assert float(raw.null_distribution.sum()) == pytest.approx(0.48602320682671124, rel=1e-12)


def test_several_controls_use_residuals_on_all_of_them():
    # Reference: correlation of statsmodels OLS residuals of x and y on both controls.
    x, y, z, w = _matrices(18, 2)
    res = partial_mantel(x, y, {"space": z, "other": w}, n_resamples=99, rng=0)
    controls = [z.condensed, w.condensed]
    ex, ey = _residuals(x.condensed, controls), _residuals(y.condensed, controls)
    assert res.statistic == pytest.approx(np.corrcoef(ex, ey)[0, 1], abs=1e-12)
    assert res.controls == ("space", "other")
    # Spearman: the same on the ranks of every matrix (scipy.stats.rankdata)
    rk = stats.rankdata
    sp = partial_mantel(x, y, [z, w], method="spearman", n_resamples=99, rng=0)
    ranked = [rk(z.condensed), rk(w.condensed)]
    ex, ey = _residuals(rk(x.condensed), ranked), _residuals(rk(y.condensed), ranked)
    assert sp.statistic == pytest.approx(np.corrcoef(ex, ey)[0, 1], abs=1e-12)


@pytest.mark.parametrize("permute", ["raw", "residuals"])
def test_partial_null_equals_brute_force_for_each_planned_permutation(permute):
    # The permuted statistic, built the long way for each of the engine's orders:
    # raw (Mantel's approach): permute x's matrix with np.ix_, residualise on z, correlate.
    # residuals (Freedman & Lane 1983; Legendre 2000 method 2): x* = fitted(x|z) + permuted
    # residual matrix, then the partial correlation of x* and y given z (statsmodels OLS).
    x, y, z, _ = _matrices(12, 3)
    res = partial_mantel(x, y, z, permute=permute, n_resamples=40, rng=5)
    plan = permutation_plan(12, n_resamples=40, rng=np.random.default_rng(5),
                            site_labels=x.labels)
    orders = np.concatenate(list(plan.batches()))
    iu = np.triu_indices(12, k=1)
    zc = [z.condensed]
    fit = sm.OLS(x.condensed, sm.add_constant(z.condensed)).fit()
    ey = _residuals(y.condensed, zc)
    ref = []
    for p in orders:
        if permute == "raw":
            xp = x.square()[np.ix_(p, p)][iu]
        else:
            xp = fit.fittedvalues + squareform(fit.resid)[np.ix_(p, p)][iu]
        ref.append(np.corrcoef(_residuals(xp, zc), ey)[0, 1])
    np.testing.assert_allclose(res.null_distribution, ref, atol=1e-12)


@pytest.mark.parametrize("permute", ["raw", "residuals"])
def test_partial_rejection_rate_under_true_null(permute):
    # Null calibration: y independent of x and z, z strongly related to x; the partial test
    # of x and y given z rejects at about alpha (Legendre 2000 found both methods near nominal
    # for normal data). (A common cause z of x and y is not a null for distance matrices:
    # |x_i - x_j| and |y_i - y_j| share a non-linear function of z_i - z_j that the linear
    # fit on |z_i - z_j| does not remove.) Count over 200 simulations, 99% binomial interval.
    n_sim, alpha = 200, 0.05
    rng = np.random.default_rng(77)
    count = 0
    for rep in range(n_sim):
        z = rng.normal(size=(10, 1))
        x = z + 0.5 * rng.normal(size=(10, 1))
        y = rng.normal(size=(10, 1))
        res = partial_mantel(pdist(x), pdist(y), pdist(z), permute=permute,
                             n_resamples=99, rng=rep)
        count += res.pvalue <= alpha
    lo, hi = stats.binom.interval(0.99, n_sim, alpha)
    assert lo <= count <= hi, (count, lo, hi)


def test_partial_messages():
    x, y, z, _ = _matrices(10, 1)
    with pytest.raises(InputError, match="`permute` must be one of 'raw', 'residuals'"):
        partial_mantel(x, y, z, permute="both")
    with pytest.raises(InputError, match="`method` must be one of 'pearson', 'spearman'"):
        partial_mantel(x, y, z, method="kendall")
    with pytest.raises(InputError, match="collinear"):
        partial_mantel(x, y, [z, DistanceMatrix(2 * z.condensed, z.labels)], n_resamples=9)
    with pytest.raises(InputError, match="`x` is fully explained"):
        partial_mantel(z, y, z, n_resamples=9)
    with pytest.raises(InputError, match="`z` is empty"):
        partial_mantel(x, y, [], n_resamples=9)


def test_regression_equals_statsmodels_ols_on_condensed_vectors():
    # Reference: statsmodels OLS of the response entries on the predictors' entries
    # (Lichstein 2007: MRM is OLS on the unfolded matrices): coefficients, intercept, R2, F,
    # t-values and standardised coefficients (b * sd(x) / sd(y)).
    x, y, z, w = _matrices(16, 4)
    res = matrix_regression(x, {"env": y, "space": z, "noise": w}, n_resamples=99, rng=0)
    design = np.column_stack([y.condensed, z.condensed, w.condensed])
    fit = sm.OLS(x.condensed, sm.add_constant(design)).fit()
    np.testing.assert_allclose(res.table["coefficient"], fit.params[1:], rtol=1e-10)
    assert res.intercept == pytest.approx(fit.params[0], rel=1e-10)
    assert res.r2 == pytest.approx(fit.rsquared, rel=1e-12)
    assert res.f_statistic == pytest.approx(fit.fvalue, rel=1e-10)
    np.testing.assert_allclose(res.table["pseudo_t"], fit.tvalues[1:], rtol=1e-10)
    std = fit.params[1:] * design.std(axis=0) / x.condensed.std()
    np.testing.assert_allclose(res.table["std_coefficient"], std, rtol=1e-10)
    assert list(res.table.index) == ["env", "space", "noise"]


def test_regression_null_equals_refitting_each_permuted_response():
    # Brute force: permute the response matrix with np.ix_ for each planned order and refit
    # with statsmodels; R2 and |t| must equal the one-pass null distribution.
    x, y, z, _ = _matrices(10, 5)
    res = matrix_regression(x, {"a": y, "b": z}, n_resamples=30, rng=8)
    plan = permutation_plan(10, n_resamples=30, rng=np.random.default_rng(8))
    orders = np.concatenate(list(plan.batches()))
    iu = np.triu_indices(10, k=1)
    design = sm.add_constant(np.column_stack([y.condensed, z.condensed]))
    ref = []
    for p in orders:
        fit = sm.OLS(x.square()[np.ix_(p, p)][iu], design).fit()
        ref.append([fit.rsquared, *np.abs(fit.tvalues[1:])])
    np.testing.assert_allclose(res.null_distribution, ref, rtol=1e-9, atol=1e-12)


def test_regression_rejection_rate_under_true_null():
    # Null calibration of the R2 test: independent response, 200 simulations, 99 permutations.
    n_sim, alpha = 200, 0.05
    rng = np.random.default_rng(99)
    count = 0
    for rep in range(n_sim):
        mats = [pdist(rng.normal(size=(9, 2))) for _ in range(3)]
        res = matrix_regression(mats[0], {"a": mats[1], "b": mats[2]}, n_resamples=99,
                                rng=rep)
        count += res.pvalue <= alpha
    lo, hi = stats.binom.interval(0.99, n_sim, alpha)
    assert lo <= count <= hi, (count, lo, hi)


def test_regression_messages():
    x, y, z, _ = _matrices(10, 1)
    with pytest.raises(InputError, match="non-empty mapping name -> distance matrix"):
        matrix_regression(x, [y, z])
    with pytest.raises(InputError, match="collinear"):
        matrix_regression(x, {"a": y, "b": DistanceMatrix(3 * y.condensed, y.labels)})
    with pytest.raises(InputError, match=r"Predictor\(s\) c have the same value"):
        matrix_regression(x, {"a": y, "c": DistanceMatrix(np.ones(45), y.labels)})


def test_early_stop_two_sided_partial_needs_a_known_centre():
    x, y, z, _ = _matrices(10, 1)
    with pytest.raises(InputError, match="`early_stop` with alternative='two-sided' needs a "
                                         "known null mean"):
        partial_mantel(x, y, z, alternative="two-sided", early_stop=5, n_resamples=99)


def test_inputs_come_back_unchanged():
    # Common practice: analyses must not modify their inputs.
    x, y, z, _ = _matrices(10, 2)
    frames = [m.to_frame() for m in (x, y, z)]
    copies = [f.copy() for f in frames]
    partial_mantel(frames[0], frames[1], frames[2], permute="residuals", n_resamples=19, rng=0)
    matrix_regression(frames[0], {"a": frames[1], "b": frames[2]}, n_resamples=19, rng=0)
    for f, c in zip(frames, copies, strict=True):
        pd.testing.assert_frame_equal(f, c)
