"""dbRDA against statsmodels OLS, redundancy analysis computed directly with numpy, brute-force
refits of every permutation, and exact enumeration."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.partition import dbrda
from gradients.partition._design import orthonormal, residualise
from gradients.partition._ftest import axis_test, term_test


def _survey(n=30, seed=0, responses=1):
    rng = np.random.default_rng(seed)
    lab = [f"site{i:02d}" for i in range(n)]
    env = pd.DataFrame({"depth": rng.normal(size=n), "flow": rng.normal(size=n),
                        "habitat": rng.choice(["pool", "riffle", "run"], size=n)}, index=lab)
    cov = pd.DataFrame({"year": rng.normal(size=n)}, index=lab)
    hab = (env["habitat"] == "riffle").to_numpy(float)
    beta = rng.normal(size=(4, responses))
    signal = np.column_stack([env["depth"], env["flow"], hab, cov["year"]]) @ beta
    y = signal + rng.normal(size=(n, responses))
    return env, cov, y, lab


def _design(env, cov=None):
    # statsmodels-style design with treatment coding (first level reference), intercept first
    x = pd.get_dummies(env, columns=["habitat"], drop_first=True, dtype=float)
    if cov is not None:
        x = pd.concat([cov, x], axis=1)
    return sm.add_constant(x)


def test_one_response_euclidean_equals_ols_r2_f_and_partial_f():
    # McArdle & Anderson (2001): with one response and Euclidean distance, dbRDA is OLS.
    env, _cov, y, lab = _survey(responses=1)
    d = DistanceMatrix(pdist(y), lab)
    res = dbrda(d, env, n_resamples=0)
    ols = sm.OLS(y[:, 0], _design(env)).fit()  # statsmodels reference
    assert res.r2 == pytest.approx(ols.rsquared, rel=1e-10)
    assert res.statistic == pytest.approx(ols.fvalue, rel=1e-9)
    assert res.r2_adjusted == pytest.approx(ols.rsquared_adj, rel=1e-9)  # Ezekiel's formula
    assert res.df == 4 and res.df_residual == int(ols.df_resid)
    # marginal term tests: the partial F of dropping the term (statsmodels compare_f_test)
    table = res.table.set_index("effect")
    for term, drop in (("depth", ["depth"]), ("habitat", ["habitat_riffle", "habitat_run"])):
        reduced = sm.OLS(y[:, 0], _design(env).drop(columns=drop)).fit()
        f, _, df = ols.compare_f_test(reduced)
        assert table.loc[term, "statistic"] == pytest.approx(f, rel=1e-9)
        assert table.loc[term, "df"] == df


def test_one_response_with_covariables_equals_the_ols_partial_f_test():
    # Partial dbRDA of X given Z on one Euclidean response = OLS F-test of [Z X] against [Z]
    # (statsmodels compare_f_test); adjusted R2 of the fraction = adj(X+Z) - adj(Z)
    # (Peres-Neto et al. 2006).
    env, cov, y, lab = _survey(responses=1, seed=3)
    d = DistanceMatrix(pdist(y), lab)
    res = dbrda(d, env, covariables=cov, n_resamples=0)
    full = sm.OLS(y[:, 0], _design(env, cov)).fit()
    reduced = sm.OLS(y[:, 0], sm.add_constant(cov)).fit()
    f, _, df = full.compare_f_test(reduced)
    assert res.statistic == pytest.approx(f, rel=1e-9)
    assert res.df == df
    assert res.r2 == pytest.approx(full.rsquared - reduced.rsquared, rel=1e-9)
    assert res.r2_adjusted == pytest.approx(full.rsquared_adj - reduced.rsquared_adj, rel=1e-9)
    assert res.inertia["covariables"] == pytest.approx(reduced.ess, rel=1e-9)


def _rda(y, x):
    # Redundancy analysis the plain way (Legendre & Legendre 2012, sect. 11.1): centre Y,
    # fitted values Yhat = X (X'X)^-1 X' Y, PCA of Yhat: eigenvalues of Yhat'Yhat/(n-1) and
    # eigenvectors U; fitted site scores Yhat U, site scores Y U; residual eigenvalues of the
    # residuals' covariance.
    n = y.shape[0]
    yc = y - y.mean(axis=0)
    xc = x - x.mean(axis=0)
    yhat = xc @ np.linalg.lstsq(xc, yc, rcond=None)[0]
    vals, u = np.linalg.eigh(yhat.T @ yhat / (n - 1))
    vals, u = vals[::-1], u[:, ::-1]
    resid = yc - yhat
    rvals = np.linalg.eigvalsh(resid.T @ resid / (n - 1))[::-1]
    return vals, u, yhat @ u, yc @ u, rvals


def test_several_responses_euclidean_equal_rda_computed_directly():
    env, _cov, y, lab = _survey(n=35, responses=6, seed=1)
    d = DistanceMatrix(pdist(y), lab)
    res = dbrda(d, env, n_resamples=0)
    x = _design(env).drop(columns="const").to_numpy()
    vals, _u, fitted, site, rvals = _rda(y, x)
    n = y.shape[0]
    k = res.fitted_scores.shape[1]
    assert k == 4  # four predictor columns, six responses
    # our eigenvalues are sums of squares (the scale of pcoa); RDA's are variances (n - 1)
    np.testing.assert_allclose(res.constrained.to_numpy(), vals[:4] * (n - 1), rtol=1e-9)
    np.testing.assert_allclose(res.unconstrained.to_numpy(), rvals * (n - 1), rtol=1e-9)
    for j in range(k):  # scores agree up to the sign of each axis
        a, b = res.fitted_scores.iloc[:, j].to_numpy(), fitted[:, j]
        s = np.sign(a @ b)
        np.testing.assert_allclose(a, s * b, atol=1e-9)
        np.testing.assert_allclose(res.site_scores.iloc[:, j].to_numpy(), s * site[:, j],
                                   atol=1e-9)
        # biplot scores: correlation of each predictor with the fitted site scores
        ref = [np.corrcoef(x[:, c], b)[0, 1] * s for c in range(x.shape[1])]
        np.testing.assert_allclose(res.biplot_scores.iloc[:, j].to_numpy(), ref, atol=1e-9)
    assert list(res.site_scores.index) == lab


def test_partial_rda_equals_rda_of_residualised_tables():
    # Partial RDA (Legendre & Legendre 2012, sect. 11.1.10): RDA of Y|W on X|W.
    env, cov, y, lab = _survey(n=32, responses=5, seed=2)
    res = dbrda(DistanceMatrix(pdist(y), lab), env, covariables=cov, n_resamples=0)
    w = sm.add_constant(cov.to_numpy())
    x = _design(env).drop(columns="const").to_numpy()
    resid = lambda a: a - w @ np.linalg.lstsq(w, a, rcond=None)[0]  # noqa: E731
    vals, *_ = _rda(resid(y), resid(x))
    np.testing.assert_allclose(res.constrained.to_numpy(), vals[:4] * 31, rtol=1e-9)
    parts = res.inertia
    assert parts["covariables"] + parts["constrained"] + parts["unconstrained"] == \
        pytest.approx(parts["total"], rel=1e-12)


def test_axis_statistics_follow_the_sequential_formula():
    # Legendre, Oksanen & ter Braak (2011): F_j = lambda_j / (RSS / (n - p - q - 1)), the
    # residual of the full model in every denominator.
    env, cov, y, lab = _survey(n=30, responses=5, seed=4)
    res = dbrda(DistanceMatrix(pdist(y), lab), env, covariables=cov, n_resamples=0)
    rss = res.inertia["unconstrained"]
    axes = res.table[res.table["test"] == "axis"]
    expected = res.constrained.to_numpy()[: len(axes)] / (rss / res.df_residual)
    np.testing.assert_allclose(axes["statistic"].to_numpy(), expected, rtol=1e-9)
    total_row = res.table[res.table["test"] == "residual"].iloc[0]
    assert total_row["df"] == 30 - 4 - 1 - 1


# --------------------------------------------------------------------------- permutations
def _freedman_lane_f(y, z, x, order, *, axis=False):
    # The plain refit for one permutation (Freedman & Lane 1983; Anderson & Legendre 1999):
    # residuals of Y on [1, Z] permuted and added to the fitted values, then Y* refitted on
    # [1, Z, X] by least squares; F from the tested and residual sums of squares.
    n = y.shape[0]
    a_z = np.column_stack([np.ones(n), z])
    fit_z = a_z @ np.linalg.lstsq(a_z, y, rcond=None)[0]
    ystar = fit_z + (y - fit_z)[order]
    a_full = np.column_stack([a_z, x])
    fz = a_z @ np.linalg.lstsq(a_z, ystar, rcond=None)[0]
    ff = a_full @ np.linalg.lstsq(a_full, ystar, rcond=None)[0]
    rss = float(np.sum((ystar - ff) ** 2))
    df_res = n - np.linalg.matrix_rank(a_full)  # earlier axes lie in the span of X
    explained = ff - fz
    if axis:
        top = float(np.linalg.eigvalsh(explained.T @ explained)[-1])
        return top / (rss / df_res)
    return float(np.sum(explained**2)) / x.shape[1] / (rss / df_res)


def test_batched_pseudo_f_equals_a_refit_of_every_permutation():
    # Two ways that must agree: the trace kernel and an explicit least-squares refit.
    rng = np.random.default_rng(5)
    n = 18
    y = rng.normal(size=(n, 4))
    z = rng.normal(size=(n, 2))
    x = rng.normal(size=(n, 3)) + z[:, :1]
    yc = y - y.mean(axis=0)
    g = yc @ yc.T
    qz = orthonormal(z)
    qx = residualise(x, qz)
    orders = np.array([rng.permutation(n) for _ in range(9)])
    test = term_test("x", g, qz, qx)
    got = test.batch(orders)
    ref = [_freedman_lane_f(y, z, x, o) for o in orders]
    np.testing.assert_allclose(got, ref, rtol=1e-9)
    assert test.batch(np.arange(n)[None, :])[0] == pytest.approx(test.statistic, rel=1e-10)
    # the test of the second axis: earlier axis' fitted scores join the covariables
    gr = g - qz @ (qz.T @ g) - (g @ qz) @ qz.T + qz @ (qz.T @ g @ qz) @ qz.T
    lam, w = np.linalg.eigh(qx.T @ gr @ qx)
    vecs = qx @ w[:, ::-1]
    lam = lam[::-1]
    second = axis_test("axis 2", g, np.hstack([qz, vecs[:, :1]]), vecs[:, 1:], float(lam[1]))
    lc1 = vecs[:, :1]
    ref2 = [_freedman_lane_f(y, np.column_stack([z, lc1]), x, o, axis=True) for o in orders]
    np.testing.assert_allclose(second.batch(orders), ref2, rtol=1e-8)


def test_exact_enumeration_matches_counting_all_orders():
    # n = 6, one predictor: all 720 orders are enumerated; p = b / N with b counted here by
    # refitting OLS on every permuted response (itertools).
    rng = np.random.default_rng(6)
    lab = list("abcdef")
    x = pd.DataFrame({"x": rng.normal(size=6)}, index=lab)
    y = (x["x"].to_numpy() + rng.normal(size=6))[:, None]
    res = dbrda(DistanceMatrix(pdist(y), lab), x, n_resamples=999, rng=0)
    assert res.exact and res.n_resamples == 720
    design = sm.add_constant(x["x"].to_numpy())
    f_obs = sm.OLS(y[:, 0], design).fit().fvalue
    count = sum(sm.OLS(y[list(p), 0], design).fit().fvalue >= f_obs * (1 - 1e-10)
                for p in itertools.permutations(range(6)))
    assert res.pvalue == pytest.approx(count / 720, abs=1e-12)


def test_pvalues_do_not_depend_on_n_jobs_or_site_order():
    env, cov, y, lab = _survey(n=40, responses=3, seed=7)
    d = DistanceMatrix(pdist(y), lab)
    one = dbrda(d, env, covariables=cov, n_resamples=499, rng=11, n_jobs=1)
    two = dbrda(d, env, covariables=cov, n_resamples=499, rng=11, n_jobs=2)
    pd.testing.assert_frame_equal(one.table, two.table)
    np.testing.assert_array_equal(one.null_distribution, two.null_distribution)
    order = list(np.random.default_rng(1).permutation(lab))
    moved = dbrda(d.subset(order), env.loc[order[::-1]], covariables=cov.loc[order],
                  n_resamples=499, rng=11)
    np.testing.assert_allclose(moved.table["pvalue"], one.table["pvalue"])
    np.testing.assert_allclose(moved.table["statistic"], one.table["statistic"], rtol=1e-9)


def test_strata_restrict_the_permutations():
    env, _cov, y, lab = _survey(n=24, responses=2, seed=8)
    d = DistanceMatrix(pdist(y), lab)
    strata = pd.Series(np.repeat(["a", "b", "c"], 8), index=lab)
    res = dbrda(d, env[["depth"]], n_resamples=199, rng=3, strata=strata)
    assert res.scheme == "strata"
    # the same labels given as a Series in another order give the same test
    again = dbrda(d, env[["depth"]], n_resamples=199, rng=3, strata=strata.iloc[::-1])
    assert again.pvalue == res.pvalue
    assert "within 3 strata" in res.notes[0]


def test_non_euclidean_matrix_reports_negative_eigenvalues_and_corrections_remove_them():
    rng = np.random.default_rng(9)
    n = 30
    lab = [f"s{i}" for i in range(n)]
    env = pd.DataFrame({"ph": rng.normal(size=n)}, index=lab)
    lam = np.exp(np.outer(env["ph"], rng.normal(size=10)) * 0.8)
    counts = rng.poisson(lam * 3)
    counts[:, 0] += 1
    d = DistanceMatrix(pdist(counts, "braycurtis"), lab, metric="bray-curtis")
    res = dbrda(d, env, n_resamples=99, rng=1)
    assert any("not Euclidean" in s for s in res.notes)
    parts = res.inertia
    assert res.constrained.sum() + res.unconstrained.sum() == pytest.approx(
        parts["constrained"] + parts["unconstrained"], rel=1e-9)
    assert (res.unconstrained < 0).any()
    fixed = dbrda(d, env, n_resamples=99, rng=1, correction="lingoes")
    assert fixed.correction == "lingoes" and fixed.constant > 0
    assert not any("not Euclidean" in s for s in fixed.notes)
    assert (fixed.unconstrained >= -1e-9 * fixed.unconstrained.max()).all()


def test_tests_run_in_memory_bounded_groups_give_the_same_pvalues(monkeypatch):
    # grouping the tests to bound memory must not change a single p-value: every group runs
    # the same plan (same rearrangements)
    from gradients.partition import _ftest

    env, cov, y, lab = _survey(n=30, responses=3, seed=10)
    d = DistanceMatrix(pdist(y), lab)
    whole = dbrda(d, env, covariables=cov, n_resamples=199, rng=5)
    monkeypatch.setattr(_ftest, "MEMORY_BUDGET", 1)  # one test per engine run
    split = dbrda(d, env, covariables=cov, n_resamples=199, rng=5)
    pd.testing.assert_frame_equal(whole.table, split.table)
    np.testing.assert_array_equal(whole.null_distribution, split.null_distribution)
