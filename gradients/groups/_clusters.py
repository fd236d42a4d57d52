"""Hierarchical clustering of sites by their communities, optionally kept contiguous.

Unconstrained trees come from :func:`scipy.cluster.hierarchy.linkage`. With a contiguity
constraint (sites along a transect, or neighbours in space) only clusters that touch may merge:
agglomeration over a graph of neighbours (Legendre & Legendre 2012, sect. 13.3), written here
with the Lance & Williams (1967) update of the dissimilarities after each merge.
"""

from __future__ import annotations

import numbers
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import check_choice
from ..distance import DistanceMatrix
from ..distance._matrix import as_distance_matrix

__all__ = ["CLUSTER_METHODS", "SiteClustersResult", "cluster_sites", "silhouette_widths"]

#: Dissimilarities known to embed in Euclidean space (Legendre & Legendre 2012, Table 7.2):
#: Ward's method is accepted on these without computing eigenvalues.
_EUCLIDEAN_METRICS = frozenset({"euclidean", "hellinger", "chord", "chi-square"})

#: Largest number of classes tried when ``k`` is chosen by the silhouette.
K_MAX = 10


# --------------------------------------------------------------------------- linkage rules
def _update_average(d_ki: np.ndarray, d_kj: np.ndarray, d_ij: float, n_i: int, n_j: int,
                    n_k: np.ndarray) -> np.ndarray:
    return (n_i * d_ki + n_j * d_kj) / (n_i + n_j)


def _update_complete(d_ki: np.ndarray, d_kj: np.ndarray, d_ij: float, n_i: int, n_j: int,
                     n_k: np.ndarray) -> np.ndarray:
    return np.maximum(d_ki, d_kj)


def _update_ward(d_ki: np.ndarray, d_kj: np.ndarray, d_ij: float, n_i: int, n_j: int,
                 n_k: np.ndarray) -> np.ndarray:
    # Lance & Williams (1967) for Ward on distances (not their squares), as in
    # scipy.cluster.hierarchy.linkage(method="ward").
    total = n_i + n_j + n_k
    sq = ((n_i + n_k) * d_ki**2 + (n_j + n_k) * d_kj**2 - n_k * d_ij**2) / total
    return np.sqrt(np.maximum(sq, 0.0))


#: Linkage methods: name -> (Lance-Williams update, description for notes and methods).
CLUSTER_METHODS: dict[str, tuple[Callable[..., np.ndarray], str]] = {
    "average": (_update_average, "average linkage (UPGMA; Sokal & Michener 1958)"),
    "complete": (_update_complete, "complete linkage"),
    "ward": (_update_ward, "Ward's minimum-variance method (Ward 1963)"),
}


# --------------------------------------------------------------------------- result
@dataclass(frozen=True, repr=False)
class SiteClustersResult(ResultMixin):
    """A hierarchical clustering of sites, cut into ``k`` classes.

    Attributes
    ----------
    table : DataFrame
        One row per site (in the order of the distance matrix): ``site``, ``cluster`` (1..k,
        numbered in the order of each cluster's first site), ``silhouette`` (Rousseeuw 1987) and
        ``neighbour`` (the nearest other cluster).
    clusters : DataFrame
        One row per cluster: ``cluster``, ``n_sites``, ``silhouette`` (mean width of its
        sites).
    linkage : ndarray, shape (n - 1, 4)
        The merges in scipy's linkage format: the two clusters joined, the height and the
        size of the new cluster (clusters ``0..n-1`` are the sites, ``n + i`` the ``i``-th
        merge).
    labels : Index
        Site labels, in the order of the distance matrix (the leaves' ids).
    method : str
    k : int
        Number of clusters of the cut.
    cophenetic_correlation : float
        Pearson correlation between the dissimilarities and the merge heights at which each
        pair of sites is first joined (Sokal & Rohlf 1962).
    silhouette : float
        Mean silhouette width of all sites for the cut into ``k`` clusters.
    widths_by_k : Series
        Mean silhouette width for each number of clusters tried (only ``k`` when ``k`` was
        given).
    contiguous : str or None
        The contiguity constraint: None, 'transect', 'space' or 'pairs'.
    edges : tuple of (str, str)
        The neighbour pairs allowed to merge under a constraint (empty without one).
    metric : str or None
        The dissimilarity of the matrix clustered.
    notes : tuple of str
    """

    table: pd.DataFrame
    clusters: pd.DataFrame
    linkage: np.ndarray
    labels: pd.Index
    method: str
    k: int
    cophenetic_correlation: float
    silhouette: float
    widths_by_k: pd.Series
    contiguous: str | None
    edges: tuple[tuple[str, str], ...]
    metric: str | None
    notes: tuple[str, ...] = ()

    @property
    def membership(self) -> pd.Series:
        """Cluster (1..k) of every site, indexed by site label."""
        return pd.Series(self.table["cluster"].to_numpy(), index=self.labels, name="cluster")

    def cut(self, k: int) -> pd.Series:
        """Cluster (1..k) of every site for another number of clusters ``k``."""
        k = _check_k(k, len(self.labels))
        return pd.Series(_cut(self.linkage, len(self.labels), k), index=self.labels,
                         name="cluster")


# --------------------------------------------------------------------------- pieces
def silhouette_widths(d: np.ndarray, clusters: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Silhouette width of every site and its nearest other cluster (Rousseeuw 1987).

    ``a(i)`` is the mean dissimilarity of site ``i`` to the other sites of its cluster,
    ``b(i)`` the smallest mean dissimilarity to the sites of another cluster, and
    ``s(i) = (b - a) / max(a, b)``; a site alone in its cluster has ``s(i) = 0``.
    ``d`` is the square matrix, ``clusters`` integer labels (at least two distinct).
    """
    levels, codes = np.unique(clusters, return_inverse=True)
    n, g = len(codes), len(levels)
    onehot = np.zeros((n, g))
    onehot[np.arange(n), codes] = 1.0
    sizes = onehot.sum(axis=0)
    sums = d @ onehot  # (n, g): total dissimilarity of each site to each cluster
    own = sizes[codes] - 1.0
    with np.errstate(invalid="ignore", divide="ignore"):
        a = sums[np.arange(n), codes] / own
        means = sums / sizes[None, :]
    means[np.arange(n), codes] = np.inf
    nearest = np.argmin(means, axis=1)
    b = means[np.arange(n), nearest]
    top = np.maximum(a, b)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = np.where(own > 0, (b - a) / top, 0.0)
    s = np.where((own > 0) & (top == 0), 0.0, s)
    return s, levels[nearest]


def _cut(z: np.ndarray, n: int, k: int) -> np.ndarray:
    """Clusters after the first ``n - k`` merges, numbered 1..k in order of their first site."""
    parent = np.arange(2 * n - 1)

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for step in range(n - k):
        a, b = int(z[step, 0]), int(z[step, 1])
        parent[find(a)] = n + step
        parent[find(b)] = n + step
    roots = np.array([find(i) for i in range(n)])
    number: dict[int, int] = {}
    for root in roots:
        number.setdefault(int(root), len(number) + 1)
    return np.array([number[int(r)] for r in roots], dtype=np.int64)


def _cophenetic(z: np.ndarray, n: int) -> np.ndarray:
    """Square matrix of the height at which each pair of sites is first joined."""
    members: dict[int, list[int]] = {i: [i] for i in range(n)}
    out = np.zeros((n, n))
    for step in range(n - 1):
        a, b = members.pop(int(z[step, 0])), members.pop(int(z[step, 1]))
        out[np.ix_(a, b)] = z[step, 2]
        out[np.ix_(b, a)] = z[step, 2]
        members[n + step] = a + b
    return out


def _check_k(k: object, n: int) -> int:
    if not isinstance(k, numbers.Integral) or isinstance(k, bool) or not 2 <= k <= n - 1:
        raise InputError(f"`k` must be a whole number of clusters from 2 to {n - 1} (one less "
                         f"than the {n} sites); got {k!r}.")
    return int(k)


# --------------------------------------------------------------------------- neighbours
def _transect_edges(labels: pd.Index, locations: object) -> np.ndarray:
    if locations is None:
        order = np.arange(len(labels))
    else:
        if not isinstance(locations, pd.Series):
            raise InputError("For contiguous='transect', `locations` must be a Series of "
                             "positions along the transect (e.g. distance from the source), "
                             "indexed by site label; or None to take the sites in the order of "
                             "the distance matrix.")
        pos = _aligned(locations, labels, "locations")
        try:
            values = pos.to_numpy(dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError("Transect positions in `locations` must be numbers.") from None
        if not np.isfinite(values).all():
            bad = labels[~np.isfinite(values)]
            raise InputError(f"Transect positions are missing for {format_items(bad)}.",
                             sites=list(bad))
        order = np.argsort(values, kind="stable")
    return np.column_stack([order[:-1], order[1:]])


def _planar_points(labels: pd.Index, locations: object) -> np.ndarray:
    """Site coordinates in a plane (metres for located points), in the order of ``labels``."""
    if isinstance(locations, pd.DataFrame) and not hasattr(locations, "geometry"):
        table = _aligned(locations, labels, "locations")
        if table.shape[1] != 2:
            raise InputError("A table of `locations` must have two columns, x and y "
                             f"(planar coordinates); got {table.shape[1]}.")
        try:
            xy = table.to_numpy(dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError("The x and y columns of `locations` must be numbers.") from None
        if not np.isfinite(xy).all():
            bad = labels[~np.isfinite(xy).all(axis=1)]
            raise InputError(f"Coordinates are missing for {format_items(bad)}.",
                             sites=list(bad))
        return xy
    import pyproj

    from ..distance._geographic import _points

    site_labels, xy, crs = _points(locations)
    where = pd.Index(site_labels)
    missing = [s for s in labels if s not in set(where)]
    if missing:
        raise InputError(f"No location for site(s) {format_items(missing)}.", sites=missing)
    xy = xy[where.get_indexer(labels)]
    if crs.is_geographic:
        # an azimuthal equidistant plane centred on the sites: distances from the centre are
        # true, and over a survey area neighbour relations are those on the ground
        lon0, lat0 = float(np.mean(xy[:, 0])), float(np.mean(xy[:, 1]))
        plane = pyproj.CRS.from_proj4(f"+proj=aeqd +lat_0={lat0} +lon_0={lon0} +datum=WGS84 "
                                      "+units=m")
        to_plane = pyproj.Transformer.from_crs(crs, plane, always_xy=True)
        x, y = to_plane.transform(xy[:, 0], xy[:, 1])
        xy = np.column_stack([x, y])
    return xy


def _space_edges(labels: pd.Index, locations: object, neighbours: object) -> np.ndarray:
    if locations is None:
        raise InputError("contiguous='space' needs `locations`: the site points (a "
                         "GeoDataFrame, or a Survey with locations) or a table of x and y.")
    xy = _planar_points(labels, locations)
    n = len(labels)
    if neighbours == "delaunay":
        if n < 4 or np.linalg.matrix_rank(xy - xy.mean(axis=0)) < 2:
            # too few or collinear points: no triangulation; neighbours along the line
            order = np.lexsort((xy[:, 1], xy[:, 0]))
            return np.column_stack([order[:-1], order[1:]])
        from scipy.spatial import Delaunay, QhullError

        try:
            tri = Delaunay(xy)
        except QhullError as exc:  # pragma: no cover - coincident points
            raise InputError(f"The site locations cannot be triangulated ({exc}); are several "
                             "sites at the same place?") from None
        simplices = tri.simplices
        pairs = np.concatenate([simplices[:, [0, 1]], simplices[:, [1, 2]],
                                simplices[:, [0, 2]]])
        return np.unique(np.sort(pairs, axis=1), axis=0)
    if isinstance(neighbours, numbers.Integral) and not isinstance(neighbours, bool) \
            and 1 <= neighbours < n:
        from scipy.spatial import cKDTree

        _, idx = cKDTree(xy).query(xy, k=int(neighbours) + 1)
        pairs = np.column_stack([np.repeat(np.arange(n), int(neighbours)),
                                 idx[:, 1:].ravel()])
        return np.unique(np.sort(pairs, axis=1), axis=0)
    raise InputError(f"`neighbours` must be 'delaunay' or a number of nearest neighbours from 1 "
                     f"to {n - 1}; got {neighbours!r}.")


def _pair_edges(labels: pd.Index, pairs: object) -> np.ndarray:
    try:
        rows = [tuple(p) for p in pairs]  # type: ignore[union-attr]
    except TypeError:
        rows = []
    if not rows or any(len(r) != 2 for r in rows):
        raise InputError("`contiguous` given as pairs must be a sequence of (site, site) pairs "
                         "that may merge, e.g. [('S1', 'S2'), ('S2', 'S3')].")
    known = set(labels)
    unknown = sorted({str(s) for r in rows for s in r if s not in known})
    if unknown:
        raise InputError(f"`contiguous` pairs name site(s) not in the distance matrix: "
                         f"{format_items(unknown)}.", sites=unknown)
    idx = labels.get_indexer([s for r in rows for s in r]).reshape(-1, 2)
    idx = idx[idx[:, 0] != idx[:, 1]]
    return np.unique(np.sort(idx, axis=1), axis=0)


def _aligned(obj: pd.Series | pd.DataFrame, labels: pd.Index, name: str):
    from .._validation import check_labels_match

    if obj.index.has_duplicates:
        dup = obj.index[obj.index.duplicated()].unique()
        raise InputError(f"Site labels in `{name}` are repeated: {format_items(dup)}.",
                         sites=list(dup))
    check_labels_match(labels, obj.index, left_name="the distance matrix",
                       right_name=f"`{name}`", fix=f"Give `{name}` one row per site.")
    return obj.loc[labels]


def _check_connected(edges: np.ndarray, labels: pd.Index) -> None:
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = len(labels)
    graph = coo_matrix((np.ones(len(edges)), (edges[:, 0], edges[:, 1])), shape=(n, n))
    count, comp = connected_components(graph, directed=False)
    if count > 1:
        parts = [format_items(labels[comp == c], limit=4) for c in range(min(count, 3))]
        raise InputError(
            f"The neighbour graph falls into {count} separate parts ({'; '.join(parts)}"
            f"{'; ...' if count > 3 else ''}): contiguous clusters could never join them into "
            "one tree. Add pairs that link the parts, use more neighbours, or cluster each "
            "part on its own.")


# --------------------------------------------------------------------------- agglomeration
def constrained_linkage(d: np.ndarray, edges: np.ndarray, method: str) -> np.ndarray:
    """Agglomerate sites, merging at each step the closest pair of *adjacent* clusters.

    ``d`` is the square dissimilarity matrix, ``edges`` the neighbour pairs (site indices);
    the graph must be connected. After each merge the dissimilarities to the new cluster follow
    the Lance & Williams (1967) update of ``method`` and its neighbours are the union of the
    two clusters' neighbours. Returns the merges in scipy's linkage format. Ties go to the pair
    with the smallest cluster ids.
    """
    update = CLUSTER_METHODS[method][0]
    n = d.shape[0]
    size = 2 * n - 1
    dist = np.full((size, size), np.inf)
    dist[:n, :n] = d
    adj = np.zeros((size, size), dtype=bool)
    adj[edges[:, 0], edges[:, 1]] = True
    adj[edges[:, 1], edges[:, 0]] = True
    np.fill_diagonal(adj, False)
    counts = np.zeros(size, dtype=np.int64)
    counts[:n] = 1
    active = np.zeros(size, dtype=bool)
    active[:n] = True
    z = np.empty((n - 1, 4))
    for step in range(n - 1):
        ids = np.flatnonzero(active)
        sub = np.where(adj[np.ix_(ids, ids)], dist[np.ix_(ids, ids)], np.inf)
        sub = np.triu(sub, k=1) + np.tril(np.full_like(sub, np.inf))
        flat = int(np.argmin(sub))
        r, c = divmod(flat, len(ids))
        if not np.isfinite(sub[r, c]):  # pragma: no cover - connectedness is checked first
            raise InputError("No two neighbouring clusters are left to merge.")
        i, j = int(ids[r]), int(ids[c])
        new = n + step
        others = ids[(ids != i) & (ids != j)]
        d_ij = float(dist[i, j])
        values = update(dist[i, others], dist[j, others], d_ij, counts[i], counts[j],
                        counts[others])
        dist[new, others] = values
        dist[others, new] = values
        adj[new, others] = adj[i, others] | adj[j, others]
        adj[others, new] = adj[new, others]
        counts[new] = counts[i] + counts[j]
        active[[i, j]] = False
        active[new] = True
        z[step] = (i, j, d_ij, counts[new])
    return z


# --------------------------------------------------------------------------- entry point
def cluster_sites(
    d: DistanceMatrix,
    method: str = "average",
    *,
    k: int | None = None,
    contiguous: str | Sequence[tuple[object, object]] | None = None,
    locations: object = None,
    neighbours: str | int = "delaunay",
    check_euclidean: bool = True,
) -> SiteClustersResult:
    """Hierarchical clustering of sites by their dissimilarities, cut into ``k`` clusters.

    Parameters
    ----------
    d : DistanceMatrix
        Community dissimilarities among the sites (or a square array / labelled DataFrame).
    method : {'average', 'complete', 'ward'}, default 'average'
        Linkage: average (UPGMA), complete, or Ward's minimum-variance method. Ward's
        criterion is a sum of squares and needs dissimilarities that embed in Euclidean space
        (Euclidean, Hellinger, chord, chi-square, or the square root of Bray-Curtis, for
        example); other matrices are refused unless ``check_euclidean=False``.
    k : int, optional
        Number of clusters of the cut. By default the number from 2 to 10 with the largest mean
        silhouette width (Rousseeuw 1987).
    contiguous : {'transect', 'space'} or sequence of pairs, optional
        Keep the clusters contiguous: only neighbouring clusters merge. 'transect': sites are
        neighbours along a line, in the order of the distance matrix or of the positions given
        as ``locations`` (a Series). 'space': neighbours in the plane, from ``locations`` (site
        points, or a table of x and y) by a Delaunay triangulation or the ``neighbours``
        nearest sites. A sequence of ``(site, site)`` pairs gives the neighbours directly
        (reaches joined along a stream, for example).
    locations : GeoDataFrame, Survey, DataFrame or Series, optional
        Where the sites are, for a contiguity constraint (see ``contiguous``). Longitude and
        latitude are projected to an azimuthal equidistant plane centred on the sites.
    neighbours : 'delaunay' or int, default 'delaunay'
        For contiguous='space': Delaunay neighbours, or that many nearest sites (the graph
        made symmetric).
    check_euclidean : bool, default True
        For Ward's method, check that the dissimilarities embed in Euclidean space (Gower
        1966; ``O(n^3)``) unless their metric is known to.

    Returns
    -------
    SiteClustersResult

    Notes
    -----
    Without a constraint the tree is :func:`scipy.cluster.hierarchy.linkage` of the condensed
    dissimilarities. With one, the agglomeration is the same except that each step merges the
    closest pair of clusters joined by at least one neighbour pair (Legendre & Legendre 2012,
    sect. 13.3); the new cluster's dissimilarities follow the Lance & Williams (1967) update of
    the method. Constrained trees may have reversals (a merge lower than the one before):
    the notes say so. The cophenetic correlation (Sokal & Rohlf 1962) says how faithfully the
    tree's merge heights keep the dissimilarities. The cut keeps the clusters present after the
    first ``n - k`` merges (the same as cutting the tree at a height when there is no
    reversal), numbered 1..k in the order of each cluster's first site.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier,
       Amsterdam. (Ch. 8, clustering; sect. 13.3, clustering with constraints.)
    .. [2] Lance, G. N. & Williams, W. T. (1967). A general theory of classificatory sorting
       strategies. I. Hierarchical systems. The Computer Journal 9: 373-380.
    .. [3] Rousseeuw, P. J. (1987). Silhouettes: a graphical aid to the interpretation and
       validation of cluster analysis. Journal of Computational and Applied Mathematics 20:
       53-65.
    .. [4] Sokal, R. R. & Rohlf, F. J. (1962). The comparison of dendrograms by objective
       methods. Taxon 11: 33-40.
    .. [5] Kaufman, L. & Rousseeuw, P. J. (1990). Finding Groups in Data: An Introduction to
       Cluster Analysis. Wiley, New York.
    .. [6] Ward, J. H. (1963). Hierarchical grouping to optimize an objective function.
       Journal of the American Statistical Association 58: 236-244.

    Examples
    --------
    >>> import numpy as np
    >>> from gradients import DistanceMatrix, cluster_sites
    >>> x = np.array([0.0, 1.0, 1.5, 9.0, 10.0, 10.2])
    >>> d = DistanceMatrix.from_square(np.abs(x[:, None] - x[None, :]), labels=list("abcdef"))
    >>> res = cluster_sites(d, k=2)
    >>> res.membership.tolist()
    [1, 1, 1, 2, 2, 2]
    """
    check_choice("method", method, tuple(CLUSTER_METHODS))
    dm = as_distance_matrix(d, name="d")
    labels = pd.Index(dm.labels)
    n = len(labels)
    if n < 3:
        raise InputError(f"Clustering needs at least 3 sites; the matrix has {n}.")
    notes: list[str] = []
    square = dm.square().astype(np.float64)
    if method == "ward" and check_euclidean and dm.metric not in _EUCLIDEAN_METRICS:
        if not dm.is_euclidean():
            name = dm.metric or "given"
            raise InputError(
                f"Ward's method needs dissimilarities that embed in Euclidean space, and the "
                f"{name} dissimilarities do not (Gower's centred matrix has negative "
                "eigenvalues). Use method='average' or 'complete', cluster the square root of "
                "the dissimilarities (Euclidean for Bray-Curtis, Legendre & Legendre 2012, "
                "Table 7.2), or pass check_euclidean=False to go ahead knowingly.")
    kind: str | None
    edges = np.empty((0, 2), dtype=np.intp)
    if contiguous is None:
        kind = None
        from scipy.cluster.hierarchy import linkage

        z = linkage(np.asarray(dm.condensed, dtype=np.float64), method=method)
    else:
        if isinstance(contiguous, str):
            kind = check_choice("contiguous", contiguous, ("transect", "space"))
            edges = (_transect_edges(labels, locations) if kind == "transect"
                     else _space_edges(labels, locations, neighbours))
        else:
            kind = "pairs"
            edges = _pair_edges(labels, contiguous)
        _check_connected(edges, labels)
        z = constrained_linkage(square, edges, method)
        drops = int(np.sum(np.diff(z[:, 2]) < -1e-12 * max(float(z[:, 2].max()), 1.0)))
        if drops:
            notes.append(f"The contiguity constraint made {drops} reversal(s): merges lower "
                         "than the merge before them. Heights of a constrained tree need not "
                         "increase; read the tree from its merge order.")
    coph = _cophenetic(z, n)
    iu = np.triu_indices(n, k=1)
    a, b = square[iu], coph[iu]
    if np.std(a) == 0 or np.std(b) == 0:
        cophenetic = float("nan")
        notes.append("All dissimilarities (or all merge heights) are equal: the cophenetic "
                     "correlation is undefined.")
    else:
        cophenetic = float(np.corrcoef(a, b)[0, 1])
    if k is None:
        tried = range(2, min(K_MAX, n - 1) + 1)
        widths = {kk: float(np.mean(silhouette_widths(square, _cut(z, n, kk))[0]))
                  for kk in tried}
        k_used = max(widths, key=lambda kk: (widths[kk], -kk))
        notes.append(f"k = {k_used} clusters: the largest mean silhouette width among "
                     f"k = 2..{max(tried)} (Rousseeuw 1987).")
    else:
        k_used = _check_k(k, n)
        widths = {}
    membership = _cut(z, n, k_used)
    s, nearest = silhouette_widths(square, membership)
    widths[k_used] = float(np.mean(s))
    table = pd.DataFrame({"site": list(labels), "cluster": membership, "silhouette": s,
                          "neighbour": nearest.astype(np.int64)})
    clusters = (table.groupby("cluster", sort=True)
                .agg(n_sites=("site", "size"), silhouette=("silhouette", "mean"))
                .reset_index())
    poor = clusters.loc[clusters["silhouette"] <= 0.25, "cluster"].tolist()
    if poor:
        notes.append(f"Cluster(s) {format_items(poor, quote=False)} have a mean silhouette "
                     "width of 0.25 or less, which Kaufman & Rousseeuw (1990) read as no "
                     "substantial structure.")
    return SiteClustersResult(
        table=table,
        clusters=clusters,
        linkage=z,
        labels=labels,
        method=method,
        k=k_used,
        cophenetic_correlation=cophenetic,
        silhouette=widths[k_used],
        widths_by_k=pd.Series(widths, name="silhouette").sort_index().rename_axis("k"),
        contiguous=kind,
        edges=tuple((str(labels[i]), str(labels[j])) for i, j in edges),
        metric=dm.metric,
        notes=tuple(notes),
    )
