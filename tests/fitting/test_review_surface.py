"""Review checks of the surface fit: the default basis keeps residual degrees of freedom, and the
smoothing-parameter grid reaches the plane for Poisson counts of any size."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from gradients.fitting import fit_surface


def _noise(n, seed):
    rng = np.random.default_rng(seed)
    sc = pd.DataFrame(rng.normal(size=(n, 2)), columns=["axis1", "axis2"])
    return sc, pd.Series(rng.normal(size=n), name="y")


@pytest.mark.parametrize(("n", "seed"), [(20, 1), (20, 2), (12, 3), (9, 2)])
def test_default_basis_does_not_interpolate_pure_noise(n, seed):
    # Theory (Craven & Wahba 1979; Wood 2017, ch. 4): with as many basis functions as sites,
    # n - tr(A) and the residual sum of squares vanish together as lambda -> 0, so the GCV
    # score has a finite limit at interpolation; for these noise data sets (checked by direct
    # hat-matrix solves during review) that limit is its global minimum: edf n - 1, deviance
    # explained 1. The default basis keeps n - k >= 3 residual degrees of freedom, so a fit of
    # noise cannot reproduce the data.
    sc, y = _noise(n, seed)
    full = fit_surface(sc, y, n_resamples=0, basis_size=n)  # the full thin plate spline
    assert full.edf > n - 1.5 and full.deviance_explained > 0.999  # the pathology exists
    for method in ("gcv", "reml"):
        fit = fit_surface(sc, y, n_resamples=0, method=method)
        assert fit.basis_size <= n - 3
        assert fit.edf <= n - 4 + 1e-9
        assert fit.deviance_explained < 0.99


def test_default_basis_rank_is_30_for_larger_surveys():
    sc, y = _noise(40, 0)
    assert fit_surface(sc, y, n_resamples=0).basis_size == 30
    sc, y = _noise(25, 0)
    assert fit_surface(sc, y, n_resamples=0).basis_size == 22


@pytest.mark.parametrize("scale", [1e4, 1e6])
def test_poisson_plane_of_large_counts_is_a_plane(scale):
    # The working weights of Poisson PIRLS are the fitted means, which divide the
    # Demmler-Reinsch eigenvalues of X'WX by about mu; the grid of lambda must reach the plane
    # for large counts too. Counts drawn from an exact log-linear plane: the selected surface is
    # the plane, whose fit equals the Poisson GLM on [1, axis1, axis2] (statsmodels, reference
    # library).
    rng = np.random.default_rng(0)
    sc = pd.DataFrame(rng.uniform(-2, 2, size=(60, 2)), columns=["axis1", "axis2"])
    counts = pd.Series(rng.poisson(scale * np.exp(0.3 * sc.axis1)).astype(float), name="n")
    fit = fit_surface(sc, counts, family="poisson", n_resamples=0)
    assert fit.edf == pytest.approx(2.0, abs=0.05)
    glm = sm.GLM(counts.to_numpy(), sm.add_constant(sc.to_numpy()),
                 family=sm.families.Poisson()).fit()
    assert fit.deviance_explained == pytest.approx(1 - glm.deviance / glm.null_deviance,
                                                   abs=1e-4)
