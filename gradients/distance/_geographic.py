"""Distances between site locations in metres: geodesic, planar, and along a river network."""

from __future__ import annotations

import numbers

import numpy as np
import pandas as pd
import pyproj
import scipy.sparse
import shapely
from scipy.sparse.csgraph import connected_components, dijkstra
from scipy.spatial.distance import pdist

from .._errors import InputError, format_items
from .._validation import check_choice
from ._matrix import DistanceMatrix

__all__ = ["GEOGRAPHIC_METHODS", "geographic_distance"]

GEOGRAPHIC_METHODS = ("auto", "geodesic", "euclidean", "network")

#: default number of site pairs handed to ``pyproj.Geod.inv`` at once (about 100 MB of work space)
PAIR_CHUNK = 2_000_000


def geographic_distance(
    locations: object,
    *,
    method: str = "auto",
    network: object | None = None,
    snap_tolerance: float = 100.0,
    ellipsoid: str = "WGS84",
    dtype: type | np.dtype | None = None,
    chunk_size: int = PAIR_CHUNK,
) -> DistanceMatrix:
    """Distances in metres between site locations.

    Parameters
    ----------
    locations : geopandas.GeoDataFrame or GeoSeries, or Survey-like
        One point per site, index = site labels, with a CRS; an object with a ``.locations``
        GeoDataFrame is accepted too.
    method : {'auto', 'geodesic', 'euclidean', 'network'}, default 'auto'
        ``'geodesic'``: shortest path on the ellipsoid (Karney 2013 [1]_, via
        :class:`pyproj.Geod`); a projected CRS is first converted to its own geographic CRS.
        ``'euclidean'``: straight-line distance in a projected CRS, converted from the CRS's
        unit to metres; refused for longitude/latitude. ``'network'``: in-stream distance along
        `network`. ``'auto'``: network if `network` is given, else geodesic for a geographic
        CRS and Euclidean for a projected one.
    network : geopandas.GeoDataFrame or GeoSeries of LineStrings, optional
        The river (channel) network for ``'network'``, in a projected CRS (lengths in metres
        after the CRS's unit). Lines must meet at shared end points or vertices, or cross.
    snap_tolerance : float, default 100
        Largest distance, in metres, from a site to the network for it to be placed on it.
    ellipsoid : str, default 'WGS84'
        Ellipsoid for geodesic distance: any name :class:`pyproj.Geod` knows (``'WGS84'``,
        ``'GRS80'``, ...) or ``'crs'`` for the ellipsoid of the locations' own CRS.
    dtype : {numpy.float64, numpy.float32}, optional
    chunk_size : int
        Number of site pairs computed at once by the geodesic solver (bounds memory).

    Returns
    -------
    DistanceMatrix
        In metres, labelled by site; ``metric`` is ``'geodesic'``, ``'euclidean'`` or
        ``'in-stream'``.

    Notes
    -----
    In-stream distance: each site is snapped to the nearest point of the nearest line
    (:mod:`shapely`); lines are split at those points and at their crossings; the graph's
    nodes are line end points, shared vertices, crossings and snap points, its edges the line
    pieces between them, weighted by length; shortest paths come from
    :func:`scipy.sparse.csgraph.dijkstra`. The distance from a site to its snap point is not
    added. A site farther than `snap_tolerance` from every line, or sites on parts of the
    network that do not connect, raise an :class:`InputError` naming them. Flow direction is
    ignored (distances are symmetric).

    References
    ----------
    .. [1] Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy 87, 43-55.

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import Point
    >>> from gradients import geographic_distance
    >>> sites = gpd.GeoDataFrame(geometry=[Point(144.0, -37.0), Point(144.0, -38.0)],
    ...                          index=["a", "b"], crs="EPSG:4326")
    >>> round(geographic_distance(sites)["a", "b"])
    110987
    """
    check_choice("method", method, GEOGRAPHIC_METHODS)
    out_dtype = np.dtype(np.float64 if dtype is None else dtype)
    if out_dtype not in (np.dtype(np.float64), np.dtype(np.float32)):
        raise InputError(f"`dtype` must be float64 or float32; got {out_dtype}.")
    labels, xy, crs = _points(locations)
    if method == "auto":
        if network is not None:
            method = "network"
        else:
            method = "geodesic" if crs.is_geographic else "euclidean"
    if network is not None and method != "network":
        raise InputError(f"`network` is given but method={method!r}; use method='network'.")
    if method == "euclidean":
        if crs.is_geographic:
            raise InputError(
                f"Euclidean distance on longitude/latitude degrees is meaningless; the locations "
                f"are in {crs.name!r}. Use method='geodesic', or reproject first with "
                "locations.to_crs(...) to a projected CRS suited to the area (e.g. the local "
                "UTM zone)."
            )
        factor = _metres_per_unit(crs)
        values = pdist(xy) * factor if len(labels) > 1 else np.empty(0)
        return DistanceMatrix(values, labels, metric="euclidean", dtype=out_dtype)
    if method == "geodesic":
        geod = _geod(ellipsoid, crs)
        if not crs.is_geographic:
            to_geo = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
            lon, lat = to_geo.transform(xy[:, 0], xy[:, 1])
        else:
            lon, lat = xy[:, 0], xy[:, 1]
        bad = ~((np.abs(lat) <= 90) & np.isfinite(lon) & np.isfinite(lat))
        if bad.any():
            raise InputError(
                f"Latitude outside -90..90 at site(s) {format_items(labels[bad])}; are x and y "
                "swapped? Points must be (longitude, latitude).",
                sites=list(labels[bad]),
            )
        values = _geodesic(geod, np.asarray(lon, float), np.asarray(lat, float),
                           out_dtype, chunk_size)
        return DistanceMatrix(values, labels, metric="geodesic", dtype=out_dtype)
    if network is None:
        raise InputError(
            "method='network' needs `network=`, a GeoDataFrame of the river lines."
        )
    return _in_stream(labels, xy, crs, network, snap_tolerance, out_dtype)


# ---------------------------------------------------------------- inputs
def _points(locations: object) -> tuple[pd.Index, np.ndarray, pyproj.CRS]:
    import geopandas as gpd

    if not isinstance(locations, gpd.GeoDataFrame | gpd.GeoSeries) and hasattr(
        locations, "locations"
    ):
        owner = type(locations).__name__
        locations = locations.locations
        if locations is None:
            raise InputError(f"This {owner} has no `.locations`; site locations are needed for "
                             "geographic distance.")
    if not isinstance(locations, gpd.GeoDataFrame | gpd.GeoSeries):
        raise InputError(
            "`locations` must be a geopandas GeoDataFrame (or GeoSeries) of points, index = "
            f"site labels; got {type(locations).__name__}."
        )
    geom = locations.geometry
    labels = pd.Index(locations.index)
    if labels.has_duplicates:
        dup = labels[labels.duplicated()].unique()
        raise InputError(f"Site labels in `locations` must be unique; repeated: "
                         f"{format_items(dup)}.", sites=list(dup))
    if locations.crs is None:
        raise InputError(
            "The locations have no coordinate reference system; set it with "
            "locations.set_crs('EPSG:4326') for longitude/latitude (or the CRS they are in)."
        )
    crs = pyproj.CRS.from_user_input(locations.crs)
    arr = geom.to_numpy()
    missing = shapely.is_missing(arr) | shapely.is_empty(arr)
    if missing.any():
        raise InputError(f"Site(s) {format_items(labels[missing])} have no location.",
                         sites=list(labels[missing]))
    kinds = shapely.get_type_id(arr)
    not_point = kinds != shapely.GeometryType.POINT
    if not_point.any():
        raise InputError(
            f"Locations must be points; site(s) {format_items(labels[not_point])} are not. "
            "Use .centroid or .representative_point() if that is what you mean.",
            sites=list(labels[not_point]),
        )
    xy = shapely.get_coordinates(arr)
    bad = ~np.isfinite(xy).all(axis=1)
    if bad.any():
        raise InputError(f"Site(s) {format_items(labels[bad])} have non-finite coordinates.",
                         sites=list(labels[bad]))
    return labels, xy, crs


def _metres_per_unit(crs: pyproj.CRS) -> float:
    axes = crs.axis_info
    if not axes:
        raise InputError(f"The CRS {crs.name!r} has no axis information; cannot tell its unit.")
    factor = axes[0].unit_conversion_factor
    if not factor or not np.isfinite(factor):
        raise InputError(f"The CRS {crs.name!r} has no linear unit convertible to metres.")
    return float(factor)


def _geod(ellipsoid: str, crs: pyproj.CRS) -> pyproj.Geod:
    if ellipsoid == "crs":
        return crs.get_geod()
    try:
        return pyproj.Geod(ellps=ellipsoid)
    except pyproj.exceptions.GeodError:
        raise InputError(f"Unknown ellipsoid {ellipsoid!r}; try 'WGS84' or 'GRS80'.") from None


def _geodesic(geod: pyproj.Geod, lon: np.ndarray, lat: np.ndarray, dtype: np.dtype,
              chunk_size: int) -> np.ndarray:
    if not isinstance(chunk_size, numbers.Integral) or chunk_size < 1:
        raise InputError(f"`chunk_size` must be a positive integer; got {chunk_size!r}.")
    n = lon.size
    out = np.empty(n * (n - 1) // 2, dtype=dtype)
    i = 0
    pos = 0
    while i < n - 1:
        # whole rows i..i2-1 of the upper triangle, at most chunk_size pairs (at least one row)
        rows = []
        count = 0
        i2 = i
        while i2 < n - 1 and (count == 0 or count + (n - 1 - i2) <= chunk_size):
            count += n - 1 - i2
            rows.append(i2)
            i2 += 1
        a = np.repeat(np.array(rows), [n - 1 - r for r in rows])
        b = np.concatenate([np.arange(r + 1, n) for r in rows])
        _, _, dist = geod.inv(lon[a], lat[a], lon[b], lat[b])
        out[pos : pos + count] = dist
        pos += count
        i = i2
    return out


# ---------------------------------------------------------------- in-stream distance
def _in_stream(labels: pd.Index, xy: np.ndarray, crs: pyproj.CRS, network: object,
               snap_tolerance: float, dtype: np.dtype) -> DistanceMatrix:
    import geopandas as gpd

    if not isinstance(network, gpd.GeoDataFrame | gpd.GeoSeries):
        raise InputError(
            "`network` must be a GeoDataFrame (or GeoSeries) of LineStrings; got "
            f"{type(network).__name__}."
        )
    if network.crs is None:
        raise InputError("The network has no CRS; set it with network.set_crs(...).")
    ncrs = pyproj.CRS.from_user_input(network.crs)
    if ncrs.is_geographic:
        raise InputError(
            f"In-stream distance needs the network in a projected CRS (lengths in metres); it is "
            f"in {ncrs.name!r}. Reproject both with .to_crs(...) to a projected CRS for the area "
            "(e.g. the local UTM zone)."
        )
    if ncrs != crs:
        raise InputError(
            f"The locations ({crs.name!r}) and the network ({ncrs.name!r}) are in different "
            "CRSs; reproject the locations with locations.to_crs(network.crs)."
        )
    if not (isinstance(snap_tolerance, numbers.Real) and snap_tolerance >= 0):
        raise InputError(f"`snap_tolerance` must be a non-negative number of metres; got "
                         f"{snap_tolerance!r}.")
    factor = _metres_per_unit(ncrs)
    geoms = shapely.get_parts(np.asarray(network.geometry.to_numpy()))
    geoms = geoms[~(shapely.is_missing(geoms) | shapely.is_empty(geoms))]
    lines = geoms[shapely.get_type_id(geoms) == shapely.GeometryType.LINESTRING]
    if lines.size == 0:
        raise InputError("The network holds no LineStrings.")
    # node the network: split at crossings and where an end point lies on another line
    noded = shapely.get_parts(shapely.node(shapely.multilinestrings(lines)))
    noded = noded[shapely.length(noded) > 0]
    points = shapely.points(xy)
    tree = shapely.STRtree(noded)
    tol = snap_tolerance / factor
    (site_idx, line_idx), dist = tree.query_nearest(points, all_matches=False, return_distance=True)
    nearest = np.full(len(labels), -1)
    nearest_d = np.full(len(labels), np.inf)
    nearest[site_idx] = line_idx
    nearest_d[site_idx] = dist
    far = nearest_d > tol
    if far.any():
        shown = ", ".join(f"{labels[k]!r} ({nearest_d[k] * factor:.1f} m)"
                          for k in np.flatnonzero(far)[:10])
        raise InputError(
            f"{int(far.sum())} site(s) lie farther than snap_tolerance = {snap_tolerance:g} m "
            f"from every line of the network: {shown}. Check their coordinates, add the missing "
            "channel to the network, or raise `snap_tolerance`.",
            sites=list(labels[far]),
        )
    along = shapely.line_locate_point(noded[nearest], points)
    graph, site_node = _network_graph(noded, nearest, along)
    _, comp = connected_components(graph, directed=False)
    site_comp = comp[site_node]
    groups = pd.unique(site_comp)
    if groups.size > 1:
        parts = [list(labels[site_comp == g]) for g in groups]
        shown = "; ".join(f"[{format_items(p, limit=5)}]" for p in parts[:5])
        raise InputError(
            f"The sites lie on {groups.size} parts of the network that do not connect: {shown}. "
            "Join the lines where they meet (shared end points), or analyse the parts "
            "separately.",
            sites=[p[0] for p in parts],
        )
    uniq, inv = np.unique(site_node, return_inverse=True)
    # one Dijkstra search per distinct site node, in chunks so that the (chunk x nodes) work
    # array stays near 128 MB whatever the size of the network
    m = graph.shape[0]
    step = max(1, (2**27 // 8) // max(m, 1))
    among = np.empty((uniq.size, uniq.size))
    for a in range(0, uniq.size, step):
        rows = dijkstra(graph, directed=False, indices=uniq[a : a + step])
        among[a : a + step] = rows[:, uniq] * factor
    n = len(labels)
    out = np.empty(n * (n - 1) // 2, dtype=dtype)
    pos = 0
    for i in range(n - 1):
        out[pos : pos + n - 1 - i] = among[inv[i], inv[i + 1 :]]
        pos += n - 1 - i
    return DistanceMatrix(out, labels, metric="in-stream", dtype=dtype)


def _network_graph(
    noded: np.ndarray, nearest: np.ndarray, along: np.ndarray
) -> tuple[scipy.sparse.csr_matrix, np.ndarray]:
    """Graph of a noded network with the sites inserted; edge weights in CRS units.

    After noding, pieces meet only at their end points, so the nodes are the distinct end
    points (matched to 1e-9 of the coordinate scale) plus one node per distinct snap position;
    a piece with sites on it becomes a chain end - site - ... - end, weighted by the distance
    along the piece.
    """
    length = shapely.length(noded)
    ends = np.vstack([shapely.get_coordinates(shapely.get_point(noded, 0)),
                      shapely.get_coordinates(shapely.get_point(noded, -1))])
    prec = 1e-9 * max(1.0, float(np.max(np.abs(ends))))
    _, ids = np.unique(np.round(ends / prec).astype(np.int64), axis=0, return_inverse=True)
    ids = ids.reshape(-1)
    k = noded.size
    first, last = ids[:k], ids[k:]
    n_nodes = int(ids.max()) + 1
    with_sites = np.zeros(k, dtype=bool)
    with_sites[nearest] = True
    u = [first[~with_sites]]
    v = [last[~with_sites]]
    w = [length[~with_sites]]
    site_node = np.empty(nearest.size, dtype=np.int64)
    order = np.lexsort((along, nearest))
    start = 0
    while start < order.size:
        line = nearest[order[start]]
        stop = start
        while stop < order.size and nearest[order[stop]] == line:
            stop += 1
        chain_pos = [0.0]
        chain_node = [int(first[line])]
        for s_idx in order[start:stop]:
            s = float(along[s_idx])
            if s <= prec:
                site_node[s_idx] = first[line]
            elif s >= length[line] - prec:
                site_node[s_idx] = last[line]
            elif s - chain_pos[-1] <= prec and len(chain_pos) > 1:
                site_node[s_idx] = chain_node[-1]  # same place as the previous site
            else:
                chain_pos.append(s)
                chain_node.append(n_nodes)
                site_node[s_idx] = n_nodes
                n_nodes += 1
        chain_pos.append(float(length[line]))
        chain_node.append(int(last[line]))
        u.append(np.asarray(chain_node[:-1]))
        v.append(np.asarray(chain_node[1:]))
        w.append(np.diff(chain_pos))
        start = stop
    uu = np.concatenate(u).astype(np.int64)
    vv = np.concatenate(v).astype(np.int64)
    ww = np.concatenate(w).astype(np.float64)
    keep = uu != vv
    uu, vv, ww = np.minimum(uu[keep], vv[keep]), np.maximum(uu[keep], vv[keep]), ww[keep]
    # parallel pieces between the same two nodes: keep the shortest
    srt = np.lexsort((ww, vv, uu))
    uu, vv, ww = uu[srt], vv[srt], ww[srt]
    first_of_pair = np.ones(uu.size, dtype=bool)
    first_of_pair[1:] = (uu[1:] != uu[:-1]) | (vv[1:] != vv[:-1])
    uu, vv, ww = uu[first_of_pair], vv[first_of_pair], ww[first_of_pair]
    graph = scipy.sparse.csr_matrix((ww, (uu, vv)), shape=(n_nodes, n_nodes))
    return graph, site_node
