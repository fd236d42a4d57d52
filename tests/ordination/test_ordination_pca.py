"""PCA against an SVD of the standardised table (ddof=1), numpy's eigen-solvers, and the biplot
scalings of Legendre & Legendre (2012, ch. 9)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.ordination import PCAResult, pca


def _table(n: int = 20, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    base = rng.normal(size=(n, 2))
    data = {
        "pH": 6.5 + 0.5 * base[:, 0] + 0.1 * rng.normal(size=n),
        "Cu": np.exp(2 + base[:, 1] + 0.3 * rng.normal(size=n)),
        "Zn": 100 + 40 * base[:, 1] - 10 * base[:, 0] + 5 * rng.normal(size=n),
        "sand": 40 + 10 * rng.normal(size=n),
    }
    return pd.DataFrame(data, index=[f"s{i}" for i in range(n)])


def test_matches_svd_of_standardised_table():
    table = _table()
    res = pca(table)
    assert isinstance(res, PCAResult)
    # standardised with ddof=1 (sample standard deviation), then SVD
    z = (table - table.mean()) / table.std(ddof=1)
    _, s, vt = np.linalg.svd(z.to_numpy(), full_matrices=False)
    n = len(table)
    np.testing.assert_allclose(res.eigenvalues.to_numpy(), s**2 / (n - 1), rtol=1e-12)
    # eigenvectors equal V up to the sign of each column
    u = res.eigenvectors.to_numpy()
    signs = np.sign(np.sum(u * vt.T, axis=0))
    np.testing.assert_allclose(u, vt.T * signs, atol=1e-12)
    assert res.eigenvalues.sum() == pytest.approx(4.0)  # trace of a correlation matrix
    np.testing.assert_allclose(res.proportion_explained.sum(), 1.0)
    # and numpy's eigenvalues of the correlation matrix
    np.testing.assert_allclose(res.eigenvalues.to_numpy(),
                               np.sort(np.linalg.eigvalsh(np.corrcoef(table.T.to_numpy())))[::-1],
                               rtol=1e-10)


def test_unscaled_is_covariance_pca():
    table = _table(seed=1)
    res = pca(table, scale=False)
    cov = np.cov(table.to_numpy(), rowvar=False, ddof=1)
    np.testing.assert_allclose(res.eigenvalues.to_numpy(), np.sort(np.linalg.eigvalsh(cov))[::-1],
                               rtol=1e-10)
    assert not res.scaled and (res.spread == 1.0).all()


def test_distance_biplot_scaling():
    # L&L 2012 sect. 9.1, scaling 1: sites F = Y U preserve Euclidean distances among sites;
    # variables are unit-length eigenvectors
    table = _table(seed=2)
    res = pca(table, scaling="distance")
    z = ((table - table.mean()) / table.std(ddof=1)).to_numpy()
    f = res.scores.to_numpy()
    np.testing.assert_allclose(pdist(f), pdist(z), rtol=1e-10)
    np.testing.assert_allclose(np.linalg.norm(res.loadings.to_numpy(), axis=0), 1.0)
    np.testing.assert_allclose(f, z @ res.eigenvectors.to_numpy(), atol=1e-12)
    np.testing.assert_allclose(f.var(axis=0, ddof=1), res.eigenvalues.to_numpy(), rtol=1e-10)


def test_correlation_biplot_scaling():
    # L&L 2012 sect. 9.1, scaling 2: sites F Lambda^-1/2 (unit variance), variables
    # U Lambda^1/2 = correlations between each standardised variable and each component
    table = _table(seed=3)
    res = pca(table, scaling="correlation")
    g = res.scores.to_numpy()
    np.testing.assert_allclose(g.var(axis=0, ddof=1), 1.0, rtol=1e-10)
    f = res.site_scores("distance").to_numpy()
    corr = np.array([[np.corrcoef(table[c], f[:, k])[0, 1] for k in range(f.shape[1])]
                     for c in table.columns])
    np.testing.assert_allclose(res.loadings.to_numpy(), corr, atol=1e-10)
    # both scalings available from either result
    other = pca(table)
    pd.testing.assert_frame_equal(other.site_scores("correlation"), res.scores)
    pd.testing.assert_frame_equal(other.variable_scores("correlation"), res.loadings)
    assert list(res.loadings.index) == list(table.columns)
    assert list(res.scores.index) == list(table.index)


def test_sign_convention_and_rank_deficiency():
    table = _table(n=3, seed=4)  # 3 sites, 4 variables: only 2 axes have variance
    res = pca(table)
    assert list(res.eigenvalues.index) == ["axis1", "axis2"]
    u = res.eigenvectors.to_numpy()
    assert np.all(u[np.argmax(np.abs(u), axis=0), np.arange(u.shape[1])] > 0)
    assert any("zero variance" in note for note in res.notes)


def test_input_errors_name_columns_and_cells():
    table = _table()
    bad = table.assign(habitat=["reed"] * len(table))
    with pytest.raises(InputError, match=r"non-numeric column.*'habitat'") as err:
        pca(bad)
    assert err.value.columns == ("habitat",)
    missing = table.copy()
    missing.loc["s3", "Cu"] = np.nan
    with pytest.raises(InputError, match=r"\('s3', 'Cu'\)"):
        pca(missing)
    const = table.assign(depth=1.5)
    with pytest.raises(InputError, match=r"'depth'.*do not vary"):
        pca(const)
    with pytest.raises(InputError, match="`scaling` must be one of"):
        pca(table, scaling="species")
    with pytest.raises(InputError, match="`scale` must be True or False"):
        pca(table, scale="yes")
    # inputs come back unchanged
    before = table.copy()
    pca(table)
    pd.testing.assert_frame_equal(table, before)
