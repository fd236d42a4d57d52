"""Spatial eigenvectors: distance-based Moran's eigenvector maps of the sites."""

from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse
from scipy.sparse.csgraph import minimum_spanning_tree
from scipy.spatial.distance import squareform

from .._errors import InputError
from .._result import ResultMixin
from ..distance import DistanceMatrix, geographic_distance
from ..distance._centred import EIGEN_RTOL
from ..ordination._common import orient_columns

__all__ = ["SpatialEigenvectorsResult", "spatial_eigenvectors"]

#: At most this many distance classes in the correlogram that gives each vector's scale.
MAX_SCALE_CLASSES = 100


@dataclass(frozen=True, repr=False)
class SpatialEigenvectorsResult(ResultMixin):
    """Outcome of :func:`spatial_eigenvectors`.

    Attributes
    ----------
    vectors : pandas.DataFrame
        One column per kept eigenvector (``space1``, ``space2``, ... from the broadest to the
        finest pattern), rows labelled by site, each centred with unit variance (``ddof=1``);
        use them as explanatory variables.
    table : pandas.DataFrame
        One row per vector: ``eigenvalue`` (of the centred truncated matrix), ``moran_i``,
        ``expected`` (Moran's I expected without autocorrelation, ``-1/(n-1)``) and ``scale``:
        the typical width of the vector's patches of like values, in the units of the
        distances: twice the distance at which its correlogram first crosses zero, which for a
        regular wave is half its wavelength.
    threshold : float
        Truncation distance ``t``: pairs further apart are not neighbours.
    n_sites : int
    metric : str or None
        The distance the vectors were built from (``'geodesic'``, ``'in-stream'``, ...).
    notes : tuple of str
    """

    vectors: pd.DataFrame
    table: pd.DataFrame
    threshold: float
    n_sites: int
    metric: str | None
    notes: tuple[str, ...] = ()


def _distances(source: object, method: str, network: object, snap_tolerance: float
               ) -> DistanceMatrix:
    import geopandas as gpd

    if source is None:
        raise InputError(
            "No site locations were given, so no spatial eigenvectors can be built. Pass the "
            "sites' locations (a GeoDataFrame of points with a CRS, or a survey read with "
            "locations) or a DistanceMatrix of distances between the sites (geodesic, "
            "projected or in-stream), or leave the spatial part out.")
    if isinstance(source, DistanceMatrix):
        return source
    if isinstance(source, gpd.GeoDataFrame | gpd.GeoSeries) or hasattr(source, "locations"):
        return geographic_distance(source, method=method, network=network,
                                   snap_tolerance=snap_tolerance)
    if isinstance(source, pd.DataFrame) and source.shape[0] == source.shape[1] and \
            set(source.index) == set(source.columns):
        return DistanceMatrix.from_square(source)
    raise InputError(
        "`locations_or_distance` must be a DistanceMatrix of distances between sites, a "
        "square DataFrame of them labelled by site, or the site locations as a GeoDataFrame "
        f"of points with a CRS; got {type(source).__name__}. A table of x/y columns becomes a "
        "GeoDataFrame with geopandas.GeoDataFrame(geometry=geopandas.points_from_xy(x, y), "
        "crs=...).")


def _mst_threshold(square: np.ndarray) -> float:
    """Longest edge of a minimum spanning tree of the complete graph of the sites."""
    graph = square.copy()
    off = ~np.eye(graph.shape[0], dtype=bool)
    positive = graph[off & (graph > 0)]
    # scipy's sparse graphs read a zero as "no edge": sites at one location are joined by a
    # tiny edge instead, which changes no other edge of the tree
    graph[off & (graph == 0)] = positive.min() * 1e-9
    tree = minimum_spanning_tree(scipy.sparse.csr_matrix(graph))
    return float(tree.data.max())


def spatial_eigenvectors(
    locations_or_distance: object,
    *,
    threshold: float | None = None,
    method: str = "auto",
    network: object | None = None,
    snap_tolerance: float = 100.0,
) -> SpatialEigenvectorsResult:
    """Distance-based Moran's eigenvector maps (dbMEM) of the sites.

    Parameters
    ----------
    locations_or_distance : DistanceMatrix, square DataFrame, GeoDataFrame or survey
        Distances between the sites (geodesic, projected, in-stream along a river network:
        any :func:`gradients.geographic_distance` output), or the sites' locations, from
        which :func:`gradients.geographic_distance` computes them.
    threshold : float, optional
        Truncation distance ``t``. Default: the longest edge of a minimum spanning tree of the
        sites, the smallest distance that keeps every site connected.
    method, network, snap_tolerance
        Passed to :func:`gradients.geographic_distance` when locations are given (``method=
        'network'`` with ``network=`` for in-stream distances).

    Returns
    -------
    SpatialEigenvectorsResult

    Notes
    -----
    Dray, Legendre & Peres-Neto (2006) [1]_, after Borcard & Legendre (2002) [2]_: distances
    larger than ``t`` are replaced by ``4t``, the truncated matrix is analysed by principal
    coordinates, and the eigenvectors are kept whose Moran's I is positive (positive spatial
    autocorrelation: broad to fine patterns of the sampling design). Moran's I of a vector
    ``u`` is ``(n / S0) sum_ij w_ij (u_i - m)(u_j - m) / sum_i (u_i - m)^2`` with the weights of
    the truncated matrix, ``w_ij = 1 - (d_ij / 4t)^2`` for ``0 < d_ij <= t`` and 0 otherwise,
    ``S0 = sum_ij w_ij``; its expectation without autocorrelation is ``-1/(n-1)``. On that
    weight matrix the eigenvalue of each vector is an increasing function of its Moran's I,
    so the vectors come ordered from the broadest pattern to the finest.

    References
    ----------
    .. [1] Dray, S., Legendre, P. & Peres-Neto, P. R. (2006). Spatial modelling: a
       comprehensive framework for principal coordinate analysis of neighbour matrices (PCNM).
       Ecological Modelling 196: 483-493.
    .. [2] Borcard, D. & Legendre, P. (2002). All-scale spatial analysis of ecological data by
       means of principal coordinates of neighbour matrices. Ecological Modelling 153: 51-68.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients.distance import DistanceMatrix
    >>> from gradients.partition import spatial_eigenvectors
    >>> x = np.arange(20.0)[:, None]
    >>> res = spatial_eigenvectors(DistanceMatrix(pdist(x), [f"s{i}" for i in range(20)]))
    >>> res.threshold, list(res.vectors.columns[:3])
    (1.0, ['space1', 'space2', 'space3'])
    """
    dm = _distances(locations_or_distance, method, network, snap_tolerance)
    n = dm.n
    if n < 3:
        raise InputError(f"Spatial eigenvectors need at least 3 sites; there are {n}.")
    square = dm.square().astype(np.float64, copy=False)
    if not np.any(square > 0):
        raise InputError("Every site is at the same location (all distances are zero): there "
                         "is no spatial pattern to describe.")
    notes: list[str] = []
    if threshold is None:
        t = _mst_threshold(square)
        how = "the longest edge of a minimum spanning tree of the sites"
    else:
        if not isinstance(threshold, numbers.Real) or isinstance(threshold, bool) or \
                not np.isfinite(threshold) or threshold <= 0:
            raise InputError(f"`threshold` must be a positive distance; got {threshold!r}.")
        t = float(threshold)
        how = "given"
        if t < _mst_threshold(square):
            notes.append("The threshold given is shorter than the longest edge of a minimum "
                         "spanning tree: some sites have no neighbour path to the others, and "
                         "the vectors describe the groups separately.")
    off = ~np.eye(n, dtype=bool)
    near = off & (square <= t)
    truncated = np.where(near | ~off, square, 4.0 * t)
    a = -0.5 * truncated * truncated
    row = a.mean(axis=1, keepdims=True)
    values, vecs = np.linalg.eigh(a - row - row.T + row.mean())
    values, vecs = values[::-1], vecs[:, ::-1]
    weights = np.where(near, 1.0 - (square / (4.0 * t)) ** 2, 0.0)
    s0 = float(weights.sum())
    tol = EIGEN_RTOL * float(np.max(np.abs(values)))
    candidate = np.flatnonzero(values > tol)
    u = vecs[:, candidate]
    u = u - u.mean(axis=0)
    moran = (n / s0) * np.sum(u * (weights @ u), axis=0) / np.sum(u * u, axis=0)
    keep = moran > 1e-10 * max(float(np.max(np.abs(moran))), 1e-300) if moran.size else moran > 0
    u, moran, lam = u[:, keep], moran[keep], values[candidate][keep]
    u = u / np.sqrt(np.sum(u * u, axis=0) / (n - 1)) * orient_columns(u)
    names = [f"space{i}" for i in range(1, u.shape[1] + 1)]
    vectors = pd.DataFrame(u, index=dm.labels.copy(), columns=names)
    table = pd.DataFrame({"eigenvalue": lam, "moran_i": moran, "expected": -1.0 / (n - 1),
                          "scale": _scales(u, square, t)},
                         index=pd.Index(names, name="vector"))
    where = f"{dm.metric} distances" if dm.metric else "the distances given"
    notes.insert(0, f"Built from {where} (Dray, Legendre & Peres-Neto 2006): threshold t = "
                    f"{t:.6g} ({how}); distances above it set to 4t; {u.shape[1]} of "
                    f"{candidate.size} eigenvectors with positive eigenvalues have positive "
                    "Moran's I and were kept.")
    if not u.shape[1]:
        notes.append("No eigenvector has positive spatial autocorrelation: these sites carry "
                     "no spatial pattern for the analysis to use.")
    if (square[off] == 0).any():
        notes.append("Some sites share a location (distance 0): they are neighbours of each "
                     "other and get the same values.")
    return SpatialEigenvectorsResult(vectors=vectors, table=table, threshold=t, n_sites=n,
                                     metric=dm.metric, notes=tuple(notes))


def _scales(u: np.ndarray, square: np.ndarray, t: float) -> np.ndarray:
    """Twice the distance of the first zero crossing of each column's correlogram.

    Pairs of sites are put in classes of width ``t`` (wider if that gives more than
    ``MAX_SCALE_CLASSES``); in each class the mean of ``u_i u_j`` over ``u'u / n`` is the
    vector's autocorrelation at the class's mean distance (1 at distance 0). The crossing is
    interpolated linearly between the last positive class and the first non-positive one. For
    ``sin(2 pi x / L)`` the autocorrelation at lag ``h`` is ``cos(2 pi h / L)``, which crosses
    zero at ``L / 4``: twice that, ``L / 2``, is the width of one patch.
    """
    n, m = u.shape
    out = np.full(m, np.nan)
    if m == 0:
        return out
    dist = squareform(square, checks=False)
    top = float(dist.max())
    width = max(t, top / MAX_SCALE_CLASSES)
    cls = np.minimum(np.ceil(dist / width).astype(np.int64), int(np.ceil(top / width)))
    cls = np.maximum(cls, 1)
    order = np.argsort(cls, kind="stable")
    ii, jj = np.triu_indices(n, k=1)
    ii, jj, cls_sorted = ii[order], jj[order], cls[order]
    starts = np.flatnonzero(np.r_[True, cls_sorted[1:] != cls_sorted[:-1]])
    counts = np.diff(np.r_[starts, cls_sorted.size])
    where = np.r_[0.0, np.add.reduceat(dist[order], starts) / counts]
    norm = np.sum(u * u, axis=0) / n
    step = max(1, 4_000_000 // max(ii.size, 1))
    for s in range(0, m, step):
        block = u[:, s : s + step]
        sums = np.add.reduceat(block[ii] * block[jj], starts, axis=0)
        r = np.vstack([np.ones((1, block.shape[1])), sums / counts[:, None] / norm[s : s + step]])
        for c in range(block.shape[1]):
            below = np.flatnonzero(r[:, c] <= 0)
            if below.size == 0:
                out[s + c] = 2.0 * top
                continue
            k = below[0]
            r0, r1, x0, x1 = r[k - 1, c], r[k, c], where[k - 1], where[k]
            out[s + c] = 2.0 * (x0 + (x1 - x0) * r0 / (r0 - r1))
    return out
