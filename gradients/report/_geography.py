"""Which distance is "space": the distance between sites a project asks for, computed once.

Every spatial analysis of a report (the Mantel test against geography, the spatial check and
the spatially constrained null, the partial tests' control for space, the regression on
distance matrices, the correlogram, the distance decay and the spatial eigenvectors) reads the
one matrix the geography step computes with :func:`site_distances`, from the keys of
``[geography]``: geodesic, straight-line in a projected CRS, or in-stream along a river network
(:func:`gradients.geographic_distance`). ``gradients check`` calls the same function, so a
network that misses a site or a method that does not suit the coordinates is reported before a
run, in the project file's words.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .._errors import InputError

__all__ = ["SiteDistances", "read_network", "site_distances"]


@dataclass(frozen=True)
class SiteDistances:
    """The distance between sites of a project.

    Attributes
    ----------
    metres : DistanceMatrix
        Distances in metres (``metric`` ``'geodesic'``, ``'euclidean'`` or ``'in-stream'``).
    method : str
        The method used (``'auto'`` resolved).
    locations : GeoDataFrame
        The site points the distances were computed from (reprojected to the network's CRS
        for in-stream distances).
    network : GeoDataFrame or None
        The river lines, for in-stream distances.
    snapped : float
        In-stream distances: the largest distance in metres from a site to the network (NaN
        otherwise).
    """

    metres: Any
    method: str
    locations: Any
    network: Any = None
    snapped: float = float("nan")

    def sentence(self, source: str | None = None) -> str:
        """The methods sentence: which distance, in which units, used by which analyses."""
        used = ("every spatial analysis (the Mantel test against geography, the spatial check "
                "and the spatially constrained null, the partial tests' and the regression's "
                "control for space, the correlogram, the distance decay and the spatial "
                "eigenvectors)")
        if self.method == "network":
            where = f" of {source}" if source else ""
            return (f"Distances between sites were in-stream distances in kilometres along the "
                    f"river network{where} ({len(self.network)} lines; each site placed at the "
                    f"nearest point of the nearest line, at most {self.snapped:.0f} m away; "
                    "shortest paths by Dijkstra's algorithm, flow direction ignored), used by "
                    f"{used}.")
        if self.method == "geodesic":
            return ("Distances between sites were geodesic distances in kilometres on the "
                    f"WGS84 ellipsoid (Karney 2013), used by {used}.")
        return ("Distances between sites were straight-line (Euclidean) distances in kilometres "
                f"in the projected coordinates of the locations, used by {used}.")


def read_network(path: str | Path) -> Any:
    """The river lines of ``geography.network``, checked: lines, with a projected CRS."""
    import geopandas as gpd

    path = Path(path)
    try:
        lines = gpd.read_file(path)
    except (OSError, RuntimeError, ValueError) as exc:  # pyogrio's errors are RuntimeErrors
        raise InputError(f"`geography.network` names {str(path)!r}, which could not be read as "
                         f"a GIS file of lines ({type(exc).__name__}: {exc}). Give a GeoPackage, "
                         "GeoJSON or Shapefile of the river lines.", file=str(path)) from None
    kinds = set(lines.geometry.geom_type.dropna()) if len(lines) else set()
    if not kinds & {"LineString", "MultiLineString"}:
        raise InputError(f"`geography.network` ({path.name}) holds no lines (found "
                         f"{', '.join(sorted(kinds)) or 'no geometries'}); in-stream distances "
                         "need the river as LineStrings.", file=str(path))
    if lines.crs is None:
        raise InputError(f"`geography.network` ({path.name}) has no coordinate reference "
                         "system; save it with the projected CRS it is drawn in (e.g. the local "
                         "UTM zone).", file=str(path))
    if lines.crs.is_geographic:
        raise InputError(f"`geography.network` ({path.name}) is in longitude/latitude "
                         f"({lines.crs.name}); in-stream lengths need a projected CRS in metres. "
                         "Reproject the file (e.g. to the local UTM zone).", file=str(path))
    return lines


def _project_words(message: str) -> str:
    """Say the distance function's advice in the project file's keys."""
    return (message.replace("raise `snap_tolerance`", "raise `geography.snap_tolerance`")
            .replace("snap_tolerance =", "`geography.snap_tolerance` ="))


def site_distances(settings: dict[str, Any], locations: Any) -> SiteDistances:
    """The distance between sites that the ``[geography]`` keys ask for, in metres.

    Parameters
    ----------
    settings : dict
        ``"section.key"`` settings of a project.
    locations : GeoDataFrame
        The survey's site points.

    Raises
    ------
    InputError
        Naming the key to change: a projected method on longitude/latitude, a network file
        that cannot be used, sites farther from the network than the snap tolerance, or
        sites on parts of the network that do not connect.
    """
    from ..distance import geographic_distance

    method = settings.get("geography.method", "auto")
    path = settings.get("geography.network")
    tolerance = float(settings.get("geography.snap_tolerance", 100.0))
    if method == "auto":
        if path is not None:
            method = "network"
        else:
            method = "geodesic" if locations.crs is None or locations.crs.is_geographic \
                else "euclidean"
    if method == "euclidean" and locations.crs is not None and locations.crs.is_geographic:
        raise InputError(
            '`geography.method = "euclidean"` measures straight lines in projected '
            f"coordinates, but the locations are longitude/latitude ({locations.crs.name}). "
            'Use method = "geodesic" (or "auto"), or give the locations in a projected CRS '
            "(`inputs.crs` for x/y columns).")
    if method != "network":
        return SiteDistances(geographic_distance(locations, method=method), method, locations)
    network = read_network(path)
    points = locations.to_crs(network.crs) if locations.crs is not None else locations
    try:
        metres = geographic_distance(points, method="network", network=network,
                                     snap_tolerance=tolerance)
    except InputError as exc:
        raise InputError(f"`geography.network` ({Path(path).name}): "
                         + _project_words(str(exc)), file=str(path), sites=exc.sites) from None
    import shapely

    lines = shapely.union_all(network.geometry.to_numpy())
    unit = network.crs.axis_info[0].unit_conversion_factor if network.crs.axis_info else 1.0
    snapped = float(points.geometry.distance(lines).max()) * float(unit or 1.0)
    return SiteDistances(metres, "network", points, network, snapped)
