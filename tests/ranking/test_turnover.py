"""The turnover model: I-splines against Ramsay's recursion, the constrained maximum likelihood
against KKT, scipy's nnls and statsmodels' GLM, planted truth, predictions, elimination and
input errors."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.integrate import quad
from scipy.optimize import nnls
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.ranking import turnover_model
from gradients.ranking._gdm import deviance, fit_nonnegative, gradient, null_deviance
from gradients.ranking._splines import ISplineBasis
from gradients.ranking._turnover import _design


# ------------------------------------------------------------------------------ I-splines
def _m_spline(i, k, x, t):
    """Ramsay (1988, Statistical Science 3: 425, eq. 2.1-2.2), written out: M-spline ``i`` of
    order ``k`` on the knot sequence ``t``, each integrating to 1."""
    if k == 1:
        return 1.0 / (t[i + 1] - t[i]) if t[i] <= x < t[i + 1] else 0.0
    if t[i + k] == t[i]:
        return 0.0
    return k * ((x - t[i]) * _m_spline(i, k - 1, x, t)
                + (t[i + k] - x) * _m_spline(i + 1, k - 1, x, t)) / ((k - 1) * (t[i + k] - t[i]))


@pytest.mark.parametrize("knots", [[0.0, 1.0, 4.0], [2.0, 2.5, 3.0, 7.0, 8.0], [-1.0, 3.0]])
def test_ispline_values_follow_the_published_recursion(knots):
    # I_i(x) = integral from the lowest knot of Ramsay's M_i(u | 2), the boundary knots
    # repeated twice (order 2); scipy.integrate.quad of the recursion above
    basis = ISplineBasis(np.array(knots))
    t = [knots[0], *knots, knots[-1]]
    xs = np.linspace(knots[0], knots[-1], 9)[1:-1]
    values = basis(xs)
    assert values.shape == (xs.size, len(knots))
    for a, x in enumerate(xs):
        for i in range(len(knots)):
            expected = quad(lambda u, i=i: _m_spline(i, 2, u, t), knots[0], x,
                            points=knots[1:-1], limit=200)[0]
            assert values[a, i] == pytest.approx(expected, abs=1e-10)


def test_isplines_rise_from_zero_to_one_and_never_fall():
    # Ramsay (1988): each I-spline is monotone from 0 at the lowest knot to 1 at the highest
    basis = ISplineBasis(np.array([0.0, 0.3, 2.0, 2.1, 9.0]))
    grid = np.linspace(-1.0, 10.0, 4001)  # beyond the knots: held at 0 and 1
    values = basis(grid)
    assert np.all(np.diff(values, axis=0) >= -1e-15)
    np.testing.assert_allclose(values[grid <= 0.0], 0.0, atol=1e-15)
    np.testing.assert_allclose(values[grid >= 9.0], 1.0, atol=1e-15)
    with pytest.raises(InputError, match="strictly increasing"):
        ISplineBasis(np.array([1.0, 1.0]))


# ------------------------------------------------------------------------------ the fit
def _planted(n=80, seed=0, noise=0.03):
    """Two of eight variables drive turnover through known monotone functions."""
    rng = np.random.default_rng(seed)
    env = pd.DataFrame(rng.uniform(0, 10, size=(n, 8)), columns=[f"v{j}" for j in range(8)],
                       index=[f"s{i:02d}" for i in range(n)])
    truth = {"v2": lambda x: 1.2 / (1 + np.exp(-1.4 * (x - 5))),  # sigmoid, steep near 5
             "v6": lambda x: 0.06 * x}  # straight line
    eta = 0.15 + sum(pdist(f(env[[v]].to_numpy())) for v, f in truth.items())
    y = np.clip(-np.expm1(-eta) + rng.normal(0, noise, eta.size), 0.0, 1.0)
    return DistanceMatrix(y, env.index), env, truth


def test_fit_satisfies_kkt_and_matches_nnls_on_the_linearised_problem():
    d, env, _ = _planted()
    design = _design(list(env.columns), env.to_numpy(), None, 3, None)
    y = d.condensed
    fit = fit_nonnegative(design.x, y)
    assert fit.converged
    # Karush-Kuhn-Tucker (common practice for bound constraints): zero gradient of the
    # negative log-likelihood where a > 0, non-negative where a = 0
    g = gradient(design.x, y, fit.eta)
    scale = np.abs(design.x).sum(axis=0)
    active = fit.coef > 0
    assert np.all(np.abs(g[active]) <= 1e-7 * scale[active])
    assert np.all(g[~active] >= -1e-7 * scale[~active])
    assert (~active).sum() >= 5  # the bounds do bind
    # scipy.optimize.nnls (Lawson-Hanson) on the weighted least-squares problem of the last
    # IRLS step (weights and working response at the fit) returns the fit itself
    mu = fit.mu
    w = (1 - mu) / mu
    z = fit.eta + (y - mu) / (1 - mu)
    sw = np.sqrt(w)
    reference = nnls(sw[:, None] * design.x, sw * z, maxiter=10_000)[0]
    np.testing.assert_allclose(reference, fit.coef, atol=1e-6)


def test_deviance_is_the_binomial_deviance_of_statsmodels():
    # statsmodels' Binomial family deviance of the same fitted values; its GLM with the
    # log-complement link log(1 - mu) = -eta refitted on the active columns alone (where the
    # constraint does not bind) reaches the same coefficients (negated) and deviance
    import statsmodels.api as sm
    from statsmodels.genmod.families import links

    d, env, _ = _planted(seed=3)
    res = turnover_model(d, env, n_resamples=0)
    y = d.condensed
    mu = res.fitted.condensed
    family = sm.families.Binomial()
    assert res.deviance == pytest.approx(family.deviance(y, mu), rel=1e-9)
    null = sm.GLM(y, np.ones((y.size, 1)), family=family).fit()
    assert res.null_deviance == pytest.approx(null.deviance, rel=1e-9)
    assert res.deviance_explained == pytest.approx(1 - res.deviance / null.deviance, rel=1e-12)
    design = _design(list(env.columns), env.to_numpy(), None, 3, None)
    coef = np.concatenate([[res.intercept], *[res._coef[v] for v in env.columns]])
    active = coef > 0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # proportions, not counts: statsmodels says so
        glm = sm.GLM(y, design.x[:, active], family=sm.families.Binomial(link=links.LogC()))
        out = glm.fit(start_params=-coef[active], tol=1e-13, maxiter=200)
    np.testing.assert_allclose(-out.params, coef[active], rtol=1e-5, atol=1e-7)
    assert out.deviance == pytest.approx(res.deviance, rel=1e-9)


def test_planted_turnover_functions_are_recovered():
    # the simulated functions (known): the two drivers rank first at the defaults, with
    # p <= 0.05; every fitted function is monotone; with five knots per predictor (enough to
    # bend like a sigmoid) each driver's function is within 0.15 of the simulated one (heights
    # 1.2 and 0.6), both measured from the lowest value seen
    d, env, truth = _planted(n=100, seed=5)
    res = turnover_model(d, env, n_resamples=19, rng=2)
    assert set(res.table.index[:2]) == set(truth)
    assert (res.table.loc[list(truth), "pvalue"] <= 0.05).all()
    assert res.kkt_violation < 1e-7 and res.converged
    for seed in (5, 6):
        d, env, truth = _planted(n=100, seed=seed)
        res = turnover_model(d, env, n_splines=5, n_resamples=0)
        for v, f in truth.items():
            curve = res.curves[res.curves["variable"] == v]
            values = curve["value"].to_numpy()
            expected = f(values) - f(values[0])
            assert np.max(np.abs(curve["turnover"].to_numpy() - expected)) < 0.15
        for _, curve in res.curves.groupby("variable"):
            assert np.all(np.diff(curve["turnover"].to_numpy()) >= -1e-12)
        # by hand: the sigmoid gains half its height over 5 -+ h with tanh(0.7 h) = 1/2, i.e.
        # between 4.22 and 5.78; the fitted interval holds the midpoint and each end is within
        # a tenth of the range (1.0) of the true one
        h = np.arctanh(0.5) / 0.7
        low, high = res.table.loc["v2", ["low", "high"]]
        assert low < 5.0 < high
        assert abs(low - (5 - h)) < 1.0 and abs(high - (5 + h)) < 1.0


def test_predict_reproduces_the_fit_and_pairs():
    d, env, _ = _planted(seed=7)
    res = turnover_model(d, env, n_resamples=0)
    again = res.predict(env)
    np.testing.assert_allclose(again.condensed, res.fitted.condensed, rtol=1e-10)
    first, second = env.iloc[:5], env.iloc[5:10]
    pairs = res.predict(first, second)
    square = res.fitted.square()
    np.testing.assert_allclose(pairs.to_numpy(), square[np.arange(5), np.arange(5, 10)],
                               rtol=1e-10)
    # beyond the range seen, turnover is held at its end
    far, edge = env.iloc[:2].copy(), env.iloc[:2].copy()
    far.iloc[0] = 1e6
    edge.iloc[0] = env.max()
    pair = (env.index[0], env.index[1])
    assert res.predict(far)[pair] == pytest.approx(res.predict(edge)[pair], rel=1e-12)
    with pytest.raises(InputError, match=r"`sites` lacks the predictor column\(s\) 'v0'"):
        res.predict(env.drop(columns="v0"))


def test_geography_is_one_more_predictor():
    rng = np.random.default_rng(4)
    n = 60
    xy = rng.uniform(0, 20, size=(n, 2))
    env = pd.DataFrame({"a": rng.uniform(0, 5, n), "b": rng.uniform(0, 5, n)})
    g = DistanceMatrix(pdist(xy), env.index)
    eta = 0.1 + 0.3 * pdist(env[["a"]]) + 0.05 * g.condensed
    d = DistanceMatrix(np.clip(-np.expm1(-eta) + rng.normal(0, 0.02, eta.size), 0, 1), env.index)
    res = turnover_model(d, env, geo=g, n_resamples=19, rng=1)
    assert "geography" in res.table.index
    assert res.table.loc["geography", "importance"] == pytest.approx(
        0.05 * (g.condensed.max() - g.condensed.min()), rel=0.15)
    assert res.table.loc["geography", "pvalue"] <= 0.05
    assert res.table.loc["b", "importance"] < 0.1
    # predictions need the distances of the new pairs
    np.testing.assert_allclose(res.predict(env, geo=g).condensed, res.fitted.condensed,
                               rtol=1e-10)
    with pytest.raises(InputError, match="pass `geo`"):
        res.predict(env)


def test_backward_elimination_drops_what_contributes_nothing():
    d, env, truth = _planted(n=60, seed=9)
    res = turnover_model(d, env, n_resamples=19, rng=3, backward=True)
    assert set(res.table.index) == set(truth)
    assert res.elimination is not None and set(res.elimination["dropped"]) == \
        set(env.columns) - set(truth)
    assert (res.table["pvalue"] <= 0.05).all()


def test_warm_started_permutation_refits_reach_the_cold_fit():
    # two ways: a refit started from the observed coefficients and one from the intercept
    # alone reach the same maximum of the likelihood
    d, env, _ = _planted(seed=2)
    design = _design(list(env.columns), env.to_numpy(), None, 3, None)
    y = d.condensed
    fit = fit_nonnegative(design.x, y)
    order = np.random.default_rng(0).permutation(design.n)
    x = design.x.copy()
    x[:, design.columns[2]] = design.permuted(2, order)
    warm = fit_nonnegative(x, y, fit.coef)
    cold = fit_nonnegative(x, y)
    assert warm.deviance == pytest.approx(cold.deviance, rel=1e-9)
    assert deviance(y, warm.eta) == pytest.approx(warm.deviance, rel=1e-12)
    assert null_deviance(y) > warm.deviance


def test_bad_input_is_explained():
    d, env, _ = _planted(n=30)
    with pytest.raises(InputError, match=r"needs dissimilarities between 0 and 1; `d` runs "
                                         r"from 0.3899 to 2.694. Use a bounded dissimilarity"):
        turnover_model(DistanceMatrix(d.condensed * 3, d.labels), env)
    with pytest.raises(InputError, match=r"`knots` for 'v1' must be at least two increasing "
                                         r"values from at most the smallest"):
        turnover_model(d, env, knots={"v1": [2.0, 5.0]})
    with pytest.raises(InputError, match=r"`knots` names 'zz', which are not predictors"):
        turnover_model(d, env, knots={"zz": [0, 10]})
    with pytest.raises(InputError, match=r"`n_splines` must be an integer of at least 2"):
        turnover_model(d, env, n_splines=1)
    with pytest.raises(InputError, match=r"'v0' of `environment` have the same value"):
        turnover_model(d, env.assign(v0=1.0))
    with pytest.raises(InputError, match=r"at least 5 sites"):
        turnover_model(d.subset(d.labels[:3]), env.iloc[:3])
    missing = env.copy()
    missing.iloc[0, 0] = np.nan
    with pytest.raises(InputError, match=r"missing or infinite values at site\(s\) 's00'"):
        turnover_model(d, missing)
