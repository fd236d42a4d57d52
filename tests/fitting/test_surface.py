"""Surface fitting checked against direct penalised least squares, the thin plate spline
equations of Green & Silverman (1994), statsmodels GLM, and null calibration."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.linalg
import statsmodels.api as sm
from scipy import stats
from scipy.spatial import Delaunay
from scipy.spatial.distance import cdist

from gradients import InputError
from gradients.fitting import fit_surface
from gradients.permutation import permutation_plan


def _cloud(n=60, seed=0):
    rng = np.random.default_rng(seed)
    labels = [f"p{i}" for i in range(n)]
    return pd.DataFrame(rng.uniform(-2, 2, size=(n, 2)), index=labels,
                        columns=["axis1", "axis2"]), rng


def _scaled(sc):
    # The documented rule: centre, divide by the root mean squared distance from the centroid.
    x = sc.to_numpy()
    c = x - x.mean(0)
    return c / np.sqrt((c**2).sum(1).mean())


def test_fixed_smoothing_equals_direct_penalised_least_squares():
    # Solve (X'X + lambda S) beta = X'y directly for the same basis; compare fitted values,
    # and the edf with the trace of the hat matrix X (X'X + lambda S)^-1 X' minus 1.
    sc, rng = _cloud()
    y = pd.Series(np.sin(sc.axis1) + sc.axis2 + rng.normal(0, 0.3, 60), index=sc.index, name="y")
    lam = 0.05
    fit = fit_surface(sc, y, smoothing=lam, n_resamples=0)
    x, s = fit._basis.model_matrix, fit._basis.penalty
    a = x.T @ x + lam * s
    beta = np.linalg.solve(a, x.T @ y.to_numpy())
    np.testing.assert_allclose(fit.fitted.to_numpy(), x @ beta, atol=1e-8)
    hat = x @ np.linalg.solve(a, x.T)
    assert fit.edf == pytest.approx(np.trace(hat) - 1, abs=1e-8)
    rss = ((y.to_numpy() - x @ beta) ** 2).sum()
    tss = ((y - y.mean()) ** 2).sum()
    assert fit.deviance_explained == pytest.approx(1 - rss / tss, abs=1e-10)
    np.testing.assert_allclose(fit.predict(sc), fit.fitted, atol=1e-8)


def test_full_basis_equals_green_silverman_thin_plate_spline():
    # Green & Silverman (1994, ch. 7): the thin plate spline minimising
    # sum (y - g)^2 + lambda J(g) has g = E delta + T a with (E + lambda I) delta + T a = y,
    # T' delta = 0, E_ij = eta(|u_i - u_j|), eta(r) = r^2 log r / (8 pi) (m = 2, d = 2).
    sc, rng = _cloud(n=25, seed=2)
    y = sc.axis1**2 - sc.axis2 + rng.normal(0, 0.2, 25)
    lam = 0.02
    fit = fit_surface(sc, y.rename("y"), smoothing=lam, basis_size=40, n_resamples=0)
    assert fit.basis_size == 25
    u = _scaled(sc)
    r = cdist(u, u)
    with np.errstate(divide="ignore", invalid="ignore"):
        e = np.where(r > 0, r**2 * np.log(r) / (8 * np.pi), 0.0)
    t = np.column_stack([np.ones(25), u])
    system = np.block([[e + lam * np.eye(25), t], [t.T, np.zeros((3, 3))]])
    sol = np.linalg.solve(system, np.r_[y.to_numpy(), np.zeros(3)])
    g = e @ sol[:25] + t @ sol[25:]
    np.testing.assert_allclose(fit.fitted.to_numpy(), g, atol=1e-7)
    # prediction off the sites follows the same spline: g(x) = sum delta_i eta(|x - x_i|) + T a
    new = np.array([[0.3, -0.4], [1.1, 1.2]])
    unew = (new - sc.to_numpy().mean(0)) / np.sqrt(((sc.to_numpy() - sc.to_numpy().mean(0)) ** 2)
                                                   .sum(1).mean())
    rn = cdist(unew, u)
    en = np.where(rn > 0, rn**2 * np.log(np.where(rn > 0, rn, 1)) / (8 * np.pi), 0.0)
    gnew = en @ sol[:25] + np.column_stack([np.ones(2), unew]) @ sol[25:]
    np.testing.assert_allclose(fit.predict(new), gnew, atol=1e-7)


def test_gcv_choice_minimises_directly_computed_gcv():
    # Craven & Wahba (1979): GCV(lambda) = n RSS / (n - tr A)^2, computed here by direct solves.
    sc, rng = _cloud(n=70, seed=4)
    y = pd.Series(np.cos(sc.axis1 * 1.5) + rng.normal(0, 0.3, 70), index=sc.index, name="y")
    fit = fit_surface(sc, y, n_resamples=0)
    x, s = fit._basis.model_matrix, fit._basis.penalty

    def gcv(lam):
        a = x.T @ x + lam * s
        hat = x @ np.linalg.solve(a, x.T)
        rss = ((y.to_numpy() - hat @ y.to_numpy()) ** 2).sum()
        return 70 * rss / (70 - np.trace(hat)) ** 2

    best = gcv(fit.smoothing)
    for factor in (0.5, 0.8, 1.25, 2.0):
        assert best <= gcv(fit.smoothing * factor) + 1e-12


def test_quadratic_surface_is_curved_and_plane_is_a_vector():
    sc, rng = _cloud(n=80, seed=5)
    quad = pd.Series(sc.axis1**2 + sc.axis2**2 + rng.normal(0, 0.3, 80), index=sc.index,
                     name="depth")
    fit = fit_surface(sc, quad, n_resamples=199, rng=1)
    assert fit.deviance_explained > 0.8 and fit.edf > 2.5
    assert fit.verdict.startswith("curved response")
    assert fit.pvalue == pytest.approx(1 / 200)
    plane = pd.Series(0.8 * sc.axis1 - 0.5 * sc.axis2 + rng.normal(0, 0.5, 80), index=sc.index,
                      name="slope")
    fitp = fit_surface(sc, plane, n_resamples=199, rng=1)
    assert fitp.verdict.startswith("a straight vector would do")


@pytest.mark.slow
def test_noise_pvalues_not_systematically_small():
    # Null calibration (theory): with pure noise the response is flat, and a flat surface is
    # also a plane, so both permutation p-values (against a constant; the curvature test,
    # plane residuals permuted, Freedman & Lane 1983) are under their null. 100 data sets of
    # 20 sites with 49 permutations: P(p <= 0.06) = 3/50 exactly for the (b + 1)/(P + 1)
    # rule, so the count of p <= 0.06 must fall in the 99 % binomial range of 100 trials at
    # 0.06 (scipy.stats.binom: 1-13), and the p-values must not pile up anywhere
    # (Kolmogorov-Smirnov against the uniform law on the grid k/50, p > 0.001). A test
    # rejecting 15 % of true nulls fails the count with probability about 0.9; the old check
    # (20 p-values, at most 4 below 0.05) let a rate of 10 % pass nine times out of ten.
    sc, _ = _cloud(n=20, seed=6)
    pvals, curv = [], []
    for seed in range(100):
        noise = pd.Series(np.random.default_rng(100 + seed).normal(size=20), index=sc.index,
                          name="noise")
        fit = fit_surface(sc, noise, n_resamples=49, rng=seed)
        pvals.append(fit.pvalue)
        curv.append(fit.pvalue_curvature)
    lo, hi = stats.binom.interval(0.99, 100, 0.06)
    grid = stats.randint(1, 51)  # p = k / 50, k = 1..50, equally likely under the null
    for p in (np.array(pvals), np.array(curv)):
        assert lo <= np.sum(p <= 0.06 + 1e-12) <= hi, np.sum(p <= 0.06 + 1e-12)
        assert stats.kstest(np.rint(p * 50), grid.cdf).pvalue > 0.001


def test_batched_permutation_statistic_equals_refits():
    # Two ways agree: the batched Demmler-Reinsch statistic for a permutation equals a fresh
    # fit of the permuted data (smoothing re-selected), up to the lambda grid's resolution.
    # The statistic is the pseudo-F ((D0 - D) / edf) / (D / (n - edf - 1)) of the REML fit,
    # computed here from the deviance explained and edf that a REML fit reports.
    sc, rng = _cloud(n=50, seed=7)
    y = pd.Series(np.sin(2 * sc.axis1) + rng.normal(0, 0.4, 50), index=sc.index, name="y")
    fit = fit_surface(sc, y, n_resamples=30, rng=3)
    orders = permutation_plan(50, n_resamples=30, rng=3, site_labels=sc.index).batch(0)

    def pseudo_f(surface, values):
        d0 = float(((values - values.mean()) ** 2).sum())
        d = (1 - surface.deviance_explained) * d0
        return ((d0 - d) / surface.edf) / (d / (50 - surface.edf - 1))

    for b in (0, 11, 29):
        permuted = pd.Series(y.to_numpy()[orders[b]], index=sc.index, name="y")
        # a fresh test of the permuted data selects lambda on the same grid: equal to rounding
        refit = fit_surface(sc, permuted, n_resamples=9, rng=0)
        assert fit.null_distribution[b] == pytest.approx(refit.statistic, rel=1e-9)
        # the reported REML fit refines lambda between grid points (one grid step is ~1.3x in
        # lambda), which moves the pseudo-F by a few per cent on a flat REML curve
        refined = fit_surface(sc, permuted, method="reml", n_resamples=0)
        assert fit.null_distribution[b] == pytest.approx(pseudo_f(refined, permuted), rel=0.05)
    reml = fit_surface(sc, y, method="reml", n_resamples=0)
    assert fit.statistic == pytest.approx(pseudo_f(reml, y), rel=0.05)


def test_poisson_unpenalised_limit_matches_statsmodels_glm():
    # Reference library: with smoothing = 0 the penalised IRLS is the Poisson GLM on the same
    # model matrix; statsmodels GLM gives the deviance (and so the deviance explained).
    sc, rng = _cloud(n=60, seed=8)
    counts = pd.Series(rng.poisson(np.exp(0.5 + 0.6 * sc.axis1 - 0.3 * sc.axis2**2)),
                       index=sc.index, name="count")
    fit = fit_surface(sc, counts, family="poisson", smoothing=0.0, basis_size=6, n_resamples=0)
    glm = sm.GLM(counts.to_numpy(), fit._basis.model_matrix, family=sm.families.Poisson()).fit()
    assert fit.deviance_explained == pytest.approx(1 - glm.deviance / glm.null_deviance,
                                                   abs=1e-8)
    np.testing.assert_allclose(fit.fitted.to_numpy(), glm.fittedvalues, rtol=1e-6)


def test_binomial_unpenalised_limit_matches_statsmodels_glm_and_smooth_fit_works():
    sc, rng = _cloud(n=80, seed=9)
    prob = 1 / (1 + np.exp(-(1.5 * sc.axis1 - sc.axis2**2 + 1)))
    pres = pd.Series((rng.random(80) < prob).astype(int), index=sc.index, name="present")
    fit = fit_surface(sc, pres, family="binomial", smoothing=0.0, basis_size=6, n_resamples=0)
    glm = sm.GLM(pres.to_numpy(), fit._basis.model_matrix, family=sm.families.Binomial()).fit()
    assert fit.deviance_explained == pytest.approx(1 - glm.deviance / glm.null_deviance,
                                                   abs=1e-7)
    smooth = fit_surface(sc, pres, family="binomial", n_resamples=49, rng=0)
    assert smooth.method == "ubre" and 0 < smooth.deviance_explained < 1
    assert smooth.pvalue <= 0.05
    assert ((smooth.fitted > 0) & (smooth.fitted < 1)).all()


def test_strata_restrict_surface_permutations():
    # The response differs only between strata, which also separate the sites along axis1;
    # within-strata permutation cannot move that difference, so the p-value is large.
    rng = np.random.default_rng(12)
    zone = np.repeat([0, 1, 2, 3], 12)
    labels = [f"q{i}" for i in range(48)]
    sc = pd.DataFrame({"axis1": zone + rng.uniform(-0.3, 0.3, 48),
                       "axis2": rng.uniform(-1, 1, 48)}, index=labels)
    y = pd.Series(zone**2 + rng.normal(0, 0.05, 48), index=labels, name="y")
    free = fit_surface(sc, y, n_resamples=199, rng=2)
    within = fit_surface(sc, y, n_resamples=199, rng=2, strata=pd.Series(zone, index=labels))
    assert free.pvalue <= 0.01
    assert within.pvalue > 0.05 and within.scheme == "strata"


def test_grid_is_clipped_to_convex_hull_and_contours_stay_inside():
    sc, rng = _cloud(n=40, seed=10)
    y = pd.Series(sc.axis1 * sc.axis2 + rng.normal(0, 0.2, 40), index=sc.index, name="y")
    fit = fit_surface(sc, y, n_resamples=0, grid_size=30)
    g = fit.grid
    assert len(g) == 900
    # independent check of the hull: scipy Delaunay triangulation of the sites
    tri = Delaunay(sc.to_numpy())
    inside = tri.find_simplex(g[["x", "y"]].to_numpy(), tol=1e-9) >= 0
    np.testing.assert_array_equal(g["inside"].to_numpy(), inside)
    assert g.loc[~g.inside, "fitted"].isna().all() and g.loc[g.inside, "fitted"].notna().all()
    np.testing.assert_allclose(g.loc[g.inside, "fitted"],
                               fit.predict(g.loc[g.inside, ["x", "y"]].to_numpy()), atol=1e-10)
    lines = fit.contours(levels=[0.0])
    assert len(lines) > 0
    assert (tri.find_simplex(lines[["x", "y"]].to_numpy(), tol=1e-6) >= 0).all()


def test_approximate_pvalue_is_an_f_test_on_the_linear_limit():
    # Theory: as lambda -> infinity the surface is the plane and the approximate F test is the
    # OLS F test of the two slopes (statsmodels f_pvalue), df (2, n - 3).
    sc, rng = _cloud(n=30, seed=11)
    y = pd.Series(0.3 * sc.axis1 + rng.normal(size=30), index=sc.index, name="y")
    fit = fit_surface(sc, y, smoothing=1e9, n_resamples=0)
    ols = sm.OLS(y.to_numpy(), sm.add_constant(sc.to_numpy())).fit()
    assert fit.edf == pytest.approx(2.0, abs=1e-4)
    assert fit.pvalue_approx == pytest.approx(ols.f_pvalue, rel=1e-3)


def test_input_errors():
    sc, rng = _cloud(n=30)
    y = pd.Series(rng.normal(size=30), index=sc.index, name="y")
    with pytest.raises(InputError, match="presences coded 0/1"):
        fit_surface(sc, y, family="binomial", n_resamples=0)
    with pytest.raises(InputError, match="counts >= 0"):
        fit_surface(sc, y, family="poisson", n_resamples=0)
    with pytest.raises(InputError, match="known scale"):
        fit_surface(sc, y, method="ubre", n_resamples=0)
    with pytest.raises(InputError, match="exactly two"):
        fit_surface(sc, y, axes=("axis1",), n_resamples=0)
    with pytest.raises(InputError, match="straight line"):
        line = sc.assign(axis2=2 * sc.axis1)
        fit_surface(line, y, n_resamples=0)
    with pytest.raises(InputError, match="one variable"):
        fit_surface(sc, pd.DataFrame({"a": y, "b": y}), n_resamples=0)
    gap = y.copy()
    gap.iloc[3] = np.nan
    with pytest.raises(InputError, match="missing"):
        fit_surface(sc, gap, n_resamples=0)
    fit = fit_surface(sc, gap, n_resamples=0, missing="complete")
    assert fit.n_sites == 29
    with pytest.warns(DeprecationWarning, match="SurfaceFitResult.n is deprecated.*use .n_sites"):
        assert fit.n == 29


def test_reml_choice_minimises_directly_computed_restricted_likelihood():
    # Wood (2011, 2017): with the scale profiled out, -2 x restricted log-likelihood is, up to
    # a constant, (n - 3) log(||y - X b||^2 + lambda b'S b) + log|X'X + lambda S| - r log lambda
    # (r = rank of S, 3 = unpenalised plane); computed here with direct solves and slogdet.
    sc, rng = _cloud(n=70, seed=13)
    y = pd.Series(np.sin(1.5 * sc.axis1) * sc.axis2 + rng.normal(0, 0.3, 70), index=sc.index,
                  name="y")
    fit = fit_surface(sc, y, method="reml", n_resamples=0)
    assert fit.method == "reml"
    x, s = fit._basis.model_matrix, fit._basis.penalty
    r = np.linalg.matrix_rank(s)

    def reml(lam):
        a = x.T @ x + lam * s
        beta = np.linalg.solve(a, x.T @ y.to_numpy())
        prss = ((y.to_numpy() - x @ beta) ** 2).sum() + lam * beta @ s @ beta
        return (70 - 3) * np.log(prss) + np.linalg.slogdet(a)[1] - r * np.log(lam)

    best = reml(fit.smoothing)
    for factor in (0.5, 0.8, 1.25, 2.0):
        assert best <= reml(fit.smoothing * factor) + 1e-9


def test_gaussian_surface_is_shift_equivariant():
    # Theory: the unpenalised constant absorbs a shift, so y + c fits as f + c with the same
    # smoothing, edf and deviance explained (large offsets must not cost precision).
    sc, rng = _cloud(n=50, seed=14)
    y = pd.Series(np.sin(sc.axis1) + rng.normal(0, 0.3, 50), index=sc.index, name="y")
    a = fit_surface(sc, y, n_resamples=20, rng=1)
    b = fit_surface(sc, y + 1e5, n_resamples=20, rng=1)
    assert b.edf == pytest.approx(a.edf, abs=1e-6)
    assert b.deviance_explained == pytest.approx(a.deviance_explained, abs=1e-8)
    np.testing.assert_allclose(b.fitted - 1e5, a.fitted, atol=1e-6)
    np.testing.assert_allclose(b.null_distribution, a.null_distribution, atol=1e-8)


def test_curvature_test_is_calibrated_on_planes_and_finds_a_bend():
    # Null calibration (theory): data on a plane plus noise have no curvature, so the
    # curvature p-values (plane residuals permuted, Freedman & Lane 1983) are close to
    # uniform; a KS test against the uniform law is kept loose (p > 0.01), and at most a few
    # of the 30 verdicts call such a surface curved. A clear bend is found.
    pvals, curved = [], 0
    for seed in range(30):
        sc, rng = _cloud(n=40, seed=100 + seed)
        y = pd.Series(0.8 * sc.axis2 + rng.normal(0, 0.5, 40), index=sc.index, name="y")
        fit = fit_surface(sc, y, n_resamples=199, rng=seed)
        pvals.append(fit.pvalue_curvature)
        curved += fit.verdict.startswith("curved")
    assert stats.kstest(pvals, "uniform").pvalue > 0.01
    assert curved <= 5
    sc, rng = _cloud(n=40, seed=7)
    bent = pd.Series(0.8 * sc.axis2 + 0.5 * sc.axis1**2 + rng.normal(0, 0.5, 40),
                     index=sc.index, name="y")
    fit = fit_surface(sc, bent, n_resamples=199, rng=1)
    assert fit.pvalue_curvature <= 0.01 and fit.verdict.startswith("curved")


def test_curvature_statistic_is_the_share_of_the_plane_residuals_removed():
    # Direct computation: statsmodels OLS gives the plane's residual sum of squares; the
    # smooth's comes from a fit of the same data with the same fixed lambda; the observed
    # curvature statistic is 1 - RSS_smooth / RSS_plane. With lambda chosen on the test's
    # grid it is close to the refined REML fit's value.
    from gradients.fitting._surface_stats import curvature_statistic
    from gradients.fitting._tprs import demmler_reinsch_svd, lambda_grid

    sc, rng = _cloud(n=50, seed=11)
    y = pd.Series(np.sin(sc.axis1) + sc.axis2 + rng.normal(0, 0.3, 50), index=sc.index,
                  name="y")
    fit = fit_surface(sc, y, method="reml", n_resamples=0)
    x, s = fit._basis.model_matrix, fit._basis.penalty
    grid = lambda_grid(demmler_reinsch_svd(x, s)[1][0], 120)
    stat = curvature_statistic(x, s, y.to_numpy(), x[:, -3:], "reml", grid, None)
    observed = float(stat(np.arange(50)[None, :])[0])
    rss_plane = sm.OLS(y.to_numpy(), sm.add_constant(sc.to_numpy())).fit().ssr
    rss_smooth = float(((y - fit.fitted) ** 2).sum())
    assert observed == pytest.approx(1 - rss_smooth / rss_plane, abs=1e-2)
    fixed = fit_surface(sc, y, smoothing=fit.smoothing, n_resamples=0)
    stat_fixed = curvature_statistic(x, s, y.to_numpy(), x[:, -3:], "reml", grid,
                                      fit.smoothing)
    rss_fixed = float(((y - fixed.fitted) ** 2).sum())
    assert float(stat_fixed(np.arange(50)[None, :])[0]) == pytest.approx(
        1 - rss_fixed / rss_plane, abs=1e-10)
    # a shifted plane added to the data leaves the statistic unchanged (theory: the plane is
    # the unpenalised part of the basis)
    tilted = y.to_numpy() + 3.0 - 2.0 * sc.axis1.to_numpy() + sc.axis2.to_numpy()
    stat2 = curvature_statistic(x, s, tilted, x[:, -3:], "reml", grid, None)
    orders = permutation_plan(50, n_resamples=20, rng=0).batch(0)
    np.testing.assert_allclose(stat2(orders), stat(orders), atol=1e-10)


def test_permutation_test_keeps_its_power_for_counts_and_small_gcv_samples():
    # Regression checks for two losses of power (validity is the permutation's; these are
    # about the statistic). A clear Poisson gradient (log-slope 0.8, n = 30): with a known
    # scale the permuted counts, which keep their spread, looked like signal and p was 0.85.
    # A clear plane at n = 40 under the default GCV: permuted noise fitted by near-interpolating
    # surfaces gave p = 0.06. REML with the scale estimated gives small p-values for both.
    rng = np.random.default_rng(0)
    sc = pd.DataFrame(rng.uniform(-2, 2, (30, 2)), columns=["axis1", "axis2"])
    counts = pd.Series(rng.poisson(np.exp(1 + 0.8 * sc.axis1)), name="count")
    fit = fit_surface(sc, counts, family="poisson", n_resamples=199, rng=1)
    assert fit.pvalue <= 0.01 and not fit.verdict.startswith("no clear")
    rng = np.random.default_rng(2051)
    sc = pd.DataFrame(rng.uniform(-2, 2, (40, 2)), columns=["axis1", "axis2"])
    y = pd.Series(2 * sc.axis1 + sc.axis2 + rng.normal(0, 1, 40), name="y")
    fit = fit_surface(sc, y, n_resamples=199, rng=51)
    assert fit.method == "gcv" and fit.pvalue <= 0.01
    assert fit.verdict.startswith("a straight vector would do")


def test_note_when_gcv_chooses_a_much_wigglier_surface_than_reml():
    # A plane plus noise at n = 40 on which GCV's minimum lies near interpolation (edf about
    # 19; the GCV curve was checked by direct solves like those of the GCV test above) while
    # REML finds the plane: the GCV result says so, the REML result does not.
    rng = np.random.default_rng(1)
    sc = pd.DataFrame(rng.normal(size=(40, 3)), columns=["axis1", "axis2", "axis3"])
    rng.normal(0, 0.5, 40)  # keeps the draws of the original example
    y = pd.Series(sc.axis2 + rng.normal(0, 0.3, 40), name="y")
    gcv = fit_surface(sc, y, n_resamples=0)
    reml = fit_surface(sc, y, method="reml", n_resamples=0)
    assert gcv.edf > reml.edf + 3 and reml.edf < 2.5
    assert any("consider method='reml'" in note for note in gcv.notes)
    assert not any("consider method='reml'" in note for note in reml.notes)


def _wood_truncated_tprs(points, y, k, lam):
    """Wood's (2003, J. R. Stat. Soc. B 65:95, section 3) truncated eigen-basis, built here
    without the suite's code: eta(r) = r^2 log r / (8 pi) (m = 2, d = 2) on the scaled sites,
    E = U D U' with the k eigenpairs of largest |eigenvalue| kept, the penalised problem

        min ||y - U_k D_k d - T a||^2 + lam d' D_k d   subject to  T' U_k d = 0

    solved as one Karush-Kuhn-Tucker system (no QR reparametrisation, unlike the suite). The
    hat matrix comes from the same system with the identity on the right. Returns the fitted
    values and the edf without the intercept (trace of the hat matrix minus 1)."""
    u = _scaled(pd.DataFrame(points))
    n = len(u)
    r = cdist(u, u)
    e = np.zeros_like(r)
    pos = r > 0
    e[pos] = r[pos] ** 2 * np.log(r[pos]) / (8 * np.pi)
    vals, vecs = scipy.linalg.eigh(e)
    keep = np.argsort(-np.abs(vals))[:k]
    uk, dk = vecs[:, keep], vals[keep]
    t = np.column_stack([np.ones(n), u])
    x = np.column_stack([uk * dk, t])  # design [U_k D_k, T]
    pen = np.zeros((k + 3, k + 3))
    pen[:k, :k] = np.diag(dk)
    con = np.zeros((3, k + 3))
    con[:, :k] = t.T @ uk
    kkt = np.block([[x.T @ x + lam * pen, con.T], [con, np.zeros((3, 3))]])
    rhs = np.vstack([x.T, np.zeros((3, n))])
    coef = np.linalg.solve(kkt, rhs)[: k + 3]  # (k + 3, n): coefficients per unit response
    hat = x @ coef
    return hat @ np.asarray(y, dtype=float), float(np.trace(hat)) - 1.0


@pytest.mark.parametrize(("n", "k", "lam"), [(60, 20, 0.01), (45, 12, 0.3), (80, 30, 1e-3)])
def test_truncated_basis_equals_an_independent_construction_of_wood_2003(n, k, lam):
    # Fitted values and edf at a fixed smoothing parameter agree with the construction above;
    # the fitted values do not depend on how the side condition is absorbed, so two different
    # routes must give the same numbers up to rounding.
    sc, rng = _cloud(n=n, seed=n)
    y = pd.Series(np.sin(1.3 * sc.axis1) * sc.axis2 + rng.normal(0, 0.3, n), index=sc.index,
                  name="y")
    fit = fit_surface(sc, y, smoothing=lam, basis_size=k, n_resamples=0)
    assert fit.basis_size == k
    fitted, edf = _wood_truncated_tprs(sc.to_numpy(), y, k, lam)
    np.testing.assert_allclose(fit.fitted.to_numpy(), fitted, atol=1e-8)
    assert fit.edf == pytest.approx(edf, abs=1e-8)


def test_gcv_choice_minimises_gcv_of_the_independent_wood_construction():
    # Craven & Wahba (1979): GCV(lam) = n RSS / (n - tr A)^2, here on the independent
    # construction of Wood's basis above (default rank 30); the suite's choice must be at
    # least as good as the best of a fine log grid of 241 values over eight decades, to
    # within 1e-6 (relative; the grid's own minimum is never below the true one).
    sc, rng = _cloud(n=70, seed=4)
    y = pd.Series(np.cos(sc.axis1 * 1.5) + rng.normal(0, 0.3, 70), index=sc.index, name="y")
    fit = fit_surface(sc, y, n_resamples=0)

    def gcv(lam):
        f, edf = _wood_truncated_tprs(sc.to_numpy(), y, 30, lam)
        return 70 * float(((y.to_numpy() - f) ** 2).sum()) / (70 - (edf + 1)) ** 2

    grid = min(gcv(lam) for lam in np.logspace(-6, 2, 241))
    assert gcv(fit.smoothing) <= grid * (1 + 1e-6)
