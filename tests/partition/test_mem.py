"""Spatial eigenvectors (dbMEM) against their definition (Dray, Legendre & Peres-Neto 2006),
scipy's minimum spanning tree, and the sine waves of a regular transect."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import scipy.sparse
from scipy.sparse.csgraph import minimum_spanning_tree
from scipy.spatial.distance import pdist, squareform

from gradients.distance import DistanceMatrix, geographic_distance
from gradients.partition import spatial_eigenvectors


def _scatter(n=45, seed=0):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1000, size=(n, 2))
    return xy, DistanceMatrix(pdist(xy), [f"p{i}" for i in range(n)], metric="euclidean")


def _moran(u, w):
    # Moran's I from its definition: (n / S0) sum_ij w_ij z_i z_j / sum_i z_i^2
    z = u - u.mean()
    return len(u) / w.sum() * (z @ w @ z) / (z @ z)


def test_threshold_is_the_longest_minimum_spanning_tree_edge():
    xy, d = _scatter()
    res = spatial_eigenvectors(d)
    tree = minimum_spanning_tree(scipy.sparse.csr_matrix(squareform(pdist(xy))))
    assert res.threshold == pytest.approx(tree.data.max(), rel=1e-12)  # scipy.sparse.csgraph


def test_kept_vectors_have_moran_i_above_its_expectation_from_the_definition():
    # Dray et al. (2006): weights w_ij = 1 - (d_ij / 4t)^2 for 0 < d_ij <= t, else 0; every
    # kept eigenvector has positive autocorrelation, I > E(I) = -1/(n-1).
    xy, d = _scatter(n=50, seed=1)
    res = spatial_eigenvectors(d)
    dist = squareform(pdist(xy))
    t = res.threshold
    w = np.where((dist > 0) & (dist <= t), 1 - (dist / (4 * t)) ** 2, 0.0)
    n = 50
    assert len(res.table) > 5
    for name in res.vectors.columns:
        i = _moran(res.vectors[name].to_numpy(), w)
        assert i == pytest.approx(res.table.loc[name, "moran_i"], rel=1e-9)
        assert i > -1 / (n - 1)
        assert res.table.loc[name, "expected"] == pytest.approx(-1 / (n - 1))
    # ordered from the broadest pattern: Moran's I decreases with the eigenvalue
    assert np.all(np.diff(res.table["moran_i"].to_numpy()) <= 1e-12)
    # every eigenvector of the truncated PCoA with a positive I is kept, none with I <= 0
    trunc = np.where(dist <= t, dist, 4 * t)
    j = np.eye(n) - 1 / n
    vals, vecs = np.linalg.eigh(j @ (-0.5 * trunc**2) @ j)
    pos = vals > 1e-9 * vals.max()
    positive_i = [_moran(v, w) > 0 for v in vecs[:, pos].T]
    assert sum(positive_i) == len(res.table)


def test_vectors_are_centred_unit_variance_and_orthogonal():
    _, d = _scatter(n=40, seed=2)
    v = spatial_eigenvectors(d).vectors.to_numpy()
    np.testing.assert_allclose(v.mean(axis=0), 0.0, atol=1e-12)
    np.testing.assert_allclose(v.T @ v / 39, np.eye(v.shape[1]), atol=1e-10)


@pytest.mark.parametrize("n", [30, 80])
def test_regular_transect_gives_sine_waves(n):
    # Dray et al. (2006), Borcard & Legendre (2002): on a regular transect the eigenvectors
    # are near-sinusoidal waves of increasing frequency. With t = the spacing the weights are
    # those of the path graph, whose eigenvectors are sin(pi k i / (n + 1)) (the standard
    # result for the path graph; those with even k are exact here, odd k nearly so once the
    # mean is removed): space_j follows k = j + 1 half-waves.
    x = 10.0 * np.arange(1, n + 1)
    res = spatial_eigenvectors(DistanceMatrix(pdist(x[:, None]), [f"t{i}" for i in range(n)]))
    assert res.threshold == pytest.approx(10.0)
    i = np.arange(1, n + 1)
    for j, name in enumerate(res.vectors.columns, start=1):
        wave = np.sin(np.pi * (j + 1) * i / (n + 1))
        r = abs(np.corrcoef(wave, res.vectors[name])[0, 1])
        assert r > 0.99, (name, r)
    # the scale (twice the first zero crossing of the correlogram) is about half the
    # wavelength, 10 (n + 1) / k, for the broad waves (cos(2 pi h / L) crosses 0 at L / 4)
    half = 10.0 * (n + 1) / (np.arange(1, 7) + 1)
    ratio = res.table["scale"].to_numpy()[:6] / half
    assert np.all((ratio > 0.85) & (ratio < 1.2)), ratio


def test_locations_give_the_same_vectors_as_their_distance_matrix():
    xy, d = _scatter(n=30, seed=3)
    pts = gpd.GeoDataFrame(geometry=gpd.points_from_xy(xy[:, 0], xy[:, 1]), index=d.labels,
                           crs="EPSG:32633")
    from_locations = spatial_eigenvectors(pts)
    from_matrix = spatial_eigenvectors(geographic_distance(pts))
    np.testing.assert_allclose(from_locations.vectors, from_matrix.vectors, atol=1e-9)
    np.testing.assert_allclose(from_locations.vectors, spatial_eigenvectors(d).vectors,
                               atol=1e-8)
    assert "euclidean distances" in from_locations.notes[0]


def test_in_stream_distances_are_used_as_given():
    # a river matrix (any DistanceMatrix) is analysed as it is, its metric named in the notes
    _xy, d = _scatter(n=25, seed=4)
    river = DistanceMatrix(d.condensed * 1.3, d.labels, metric="in-stream")
    res = spatial_eigenvectors(river)
    assert "in-stream distances" in res.notes[0]
    assert res.threshold == pytest.approx(1.3 * spatial_eigenvectors(d).threshold)


def test_shared_locations_and_a_short_threshold_are_explained():
    x = np.array([0.0, 0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0])
    d = DistanceMatrix(pdist(x[:, None]), [f"s{i}" for i in range(8)])
    res = spatial_eigenvectors(d)
    assert res.threshold == pytest.approx(1.0)
    assert any("share a location" in s for s in res.notes)
    np.testing.assert_allclose(res.vectors.iloc[0], res.vectors.iloc[1], atol=1e-9)
    short = spatial_eigenvectors(d, threshold=0.5)
    assert any("shorter than the longest edge" in s for s in short.notes)
