"""Spatially constrained null: Moran spectral randomisation keeps Moran's I, and the spatial
p-value is calibrated where the plain Mantel test is not (Guillot & Rousset 2013)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.spatial.distance import pdist, squareform

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.matrix import mantel, partial_mantel
from gradients.matrix._spatial import (
    MoranSurrogates,
    mem_basis,
    moran_i,
    principal_coordinates,
    spatial_weights,
)


def _autocorrelated(n, seed, *, columns=2, scale=0.3):
    """Gaussian random fields with covariance exp(-(d/scale)^2) at random sites."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1, size=(n, 2))
    cov = np.exp(-(squareform(pdist(xy)) / scale) ** 2)
    chol = np.linalg.cholesky(cov + 1e-6 * np.eye(n))
    return xy, chol @ rng.normal(size=(n, columns)), chol @ rng.normal(size=(n, columns))


def test_mem_basis_is_orthonormal_centred_and_diagonalises_moran_i():
    # Theory (Dray, Legendre & Peres-Neto 2006; Wagner & Dray 2015): the eigenvectors of the
    # doubly centred W are centred and orthonormal, and the Moran's I of an eigenvector is
    # n / S0 times its eigenvalue.
    xy, _, _ = _autocorrelated(20, 1)
    w = spatial_weights(pdist(xy))
    u, vals = mem_basis(w)
    assert u.shape == (20, 19)
    np.testing.assert_allclose(u.T @ u, np.eye(19), atol=1e-10)
    np.testing.assert_allclose(u.sum(axis=0), 0, atol=1e-10)
    np.testing.assert_allclose(moran_i(u, w), 20 / w.sum() * vals, atol=1e-10)


def test_surrogates_keep_morans_i_and_covariance_of_every_coordinate():
    # Theory (Wagner & Dray 2015): randomising the signs of the projections on the MEMs keeps
    # the spectrum, hence Moran's I exactly; the same signs for every column also keep the
    # cross-products between columns (their covariance) and the mean.
    xy, a, _ = _autocorrelated(25, 2, columns=3)
    w = spatial_weights(pdist(xy))
    msr = MoranSurrogates.from_coordinates(a, w)
    gen = np.random.default_rng(0)
    target_i = moran_i(a, w)
    target_cov = np.cov(a, rowvar=False)
    for signs in msr.draw(gen, 20):
        s = msr.coordinates(signs)
        np.testing.assert_allclose(moran_i(s, w), target_i, atol=1e-10)
        np.testing.assert_allclose(np.cov(s, rowvar=False), target_cov, atol=1e-10)
        np.testing.assert_allclose(s.mean(axis=0), a.mean(axis=0), atol=1e-12)
    # the identity signs give back the data; other signs give new data
    np.testing.assert_allclose(msr.coordinates(np.ones(msr.n_mem)), a, atol=1e-10)
    assert not np.allclose(msr.coordinates(msr.draw(gen, 1)[0]), a)


def test_principal_coordinates_reproduce_a_euclidean_matrix():
    # Gower (1966): for a Euclidean matrix the principal coordinates on positive axes give back
    # every distance, with no negative eigenvalue.
    rng = np.random.default_rng(3)
    d = pdist(rng.normal(size=(15, 4)))
    coords, share = principal_coordinates(d)
    np.testing.assert_allclose(pdist(coords), d, atol=1e-10)
    assert share == pytest.approx(0.0, abs=1e-10)


def test_spatial_pvalue_calibrated_where_plain_mantel_is_not():
    # Two independent, strongly autocorrelated fields: the plain Mantel test rejects far too
    # often (Guillot & Rousset 2013). Under the Moran spectral randomisation null the
    # rejection count at alpha = 0.05 over 120 simulations must stay within the 99% binomial
    # interval of the nominal rate (scipy.stats.binom.interval); the plain test is checked to
    # be outside it, so the scenario really is autocorrelated.
    n_sim, alpha = 120, 0.05
    plain = spatial = 0
    for rep in range(n_sim):
        xy, a, b = _autocorrelated(30, 1000 + rep)
        res = mantel(pdist(a), pdist(b), n_resamples=99, n_surrogates=99, rng=rep,
                     spatial_null=xy)
        plain += res.pvalue <= alpha
        spatial += res.pvalue_spatial <= alpha
    lo, hi = stats.binom.interval(0.99, n_sim, alpha)
    assert lo <= spatial <= hi, (spatial, lo, hi)
    assert plain > hi, plain


def test_spatial_null_notes_and_structure_check():
    xy, a, b = _autocorrelated(30, 7, scale=0.5)
    lab = [f"k{i}" for i in range(30)]
    x, y = DistanceMatrix(pdist(a), lab), DistanceMatrix(pdist(b), lab)
    coords = pd.DataFrame(xy, index=lab, columns=["east", "north"]).iloc[::-1]  # by label
    res = mantel(x, y, n_resamples=199, n_surrogates=99, rng=1, spatial_null=coords)
    assert res.spatial_structure.loc[["x", "y"], "structured"].all()
    assert any("Both matrices are spatially structured" in note for note in res.notes)
    assert 0 < res.pvalue_spatial <= 1
    assert res.statistic_spatial == pytest.approx(res.statistic, abs=1e-10)  # Euclidean x
    # same spatial null from a distance matrix of the locations
    geo = DistanceMatrix(pdist(xy), lab)
    again = mantel(x, y, n_resamples=199, n_surrogates=99, rng=1, spatial_null=geo)
    assert again.pvalue_spatial == res.pvalue_spatial
    part = partial_mantel(x, y, geo, n_resamples=99, n_surrogates=49, rng=1, spatial_null=xy)
    assert part.pvalue_spatial is not None and part.null_distribution_spatial.shape == (49,)
    plain = mantel(x, y, n_resamples=99, rng=1)
    assert any("Spatial autocorrelation was not checked" in note for note in plain.notes)


def test_spatial_null_messages():
    xy, a, b = _autocorrelated(10, 1)
    lab = [f"k{i}" for i in range(10)]
    x, y = DistanceMatrix(pdist(a), lab), DistanceMatrix(pdist(b), lab)
    with pytest.raises(InputError, match=r"one row per site \(10\)"):
        mantel(x, y, n_resamples=9, spatial_null=xy[:5])
    coords = pd.DataFrame(xy, index=[*lab[:9], "elsewhere"])
    with pytest.raises(InputError, match=r"'k9'.*'elsewhere'"):
        mantel(x, y, n_resamples=9, spatial_null=coords)
    with pytest.raises(InputError, match="All sites share one location"):
        mantel(x, y, n_resamples=9, spatial_null=np.zeros((10, 2)))
