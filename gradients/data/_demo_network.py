"""The river network of the demo basin: the streams the sites were sampled on.

Built by :func:`stream_network` from the site positions of
:func:`gradients.data.simulate_survey`, after every random draw of the survey; it draws nothing,
so it changes no table. Fennick Brook and Ashlow Water run from their sources through their
sites, in downstream order, to the confluence; the Corvanne main stem runs from the confluence
to the foot of the floodplain through the floodplain sites within :data:`SIDE_CHANNEL_KM` of the
valley axis, and every other floodplain site lies on a side channel (a backwater or drain) that
joins the main stem at the foot of the perpendicular from the site. Every site is a vertex of
its line, so it lies on the network.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["NETWORK_CRS", "SIDE_CHANNEL_KM", "stream_network"]

#: The projected CRS of the network (WGS 84 / UTM zone 32N, which holds the basin).
NETWORK_CRS = "EPSG:32632"
#: Floodplain sites farther than this (km) from the main stem's axis lie on a side channel.
SIDE_CHANNEL_KM = 0.25


def _lonlat(x: np.ndarray, y: np.ndarray, origin: tuple[float, float],
            km_per_degree: float) -> tuple[np.ndarray, np.ndarray]:
    """Local km to lon/lat as the simulator places the sites, rounded as they are (so a
    site's vertex coincides with the site)."""
    lon0, lat0 = origin
    lon = np.round(lon0 + x / (km_per_degree * np.cos(np.radians(lat0))), 6)
    lat = np.round(lat0 + y / km_per_degree, 6)
    return lon, lat


def stream_network(x: np.ndarray, y: np.ndarray, reach: np.ndarray, *,
                   tributaries: dict[str, tuple[float, float]], floodplain: str,
                   confluence: tuple[float, float], end: tuple[float, float],
                   origin: tuple[float, float], km_per_degree: float) -> Any:
    """The streams of the basin through the sites, as lines in UTM zone 32N.

    ``x``, ``y`` are the sites' local coordinates (km) and ``reach`` their reach, sites in
    downstream order within a reach; ``tributaries`` maps each tributary reach to its source,
    ``floodplain`` names the reach below the ``confluence``, which ends at ``end``; ``origin``
    (lon, lat) and ``km_per_degree`` place the local grid as the simulator does. The lines
    have the columns ``name`` and ``kind`` (tributary, main stem, side channel)."""
    import geopandas as gpd
    import shapely

    lines: list[np.ndarray] = []
    names: list[str] = []
    kinds: list[str] = []
    for name, source in tributaries.items():
        on = reach == name  # sites are in downstream order within a reach
        lines.append(np.vstack([source, np.column_stack([x[on], y[on]]), confluence]))
        names.append(name)
        kinds.append("tributary")
    on = reach == floodplain
    start, stop = np.asarray(confluence, float), np.asarray(end, float)
    length = float(np.hypot(*(stop - start)))
    axis = (stop - start) / length
    normal = np.array([-axis[1], axis[0]])
    rel = np.column_stack([x[on], y[on]]) - start
    along, across = rel @ axis, rel @ normal
    near = np.abs(across) <= SIDE_CHANNEL_KM
    # the main stem: through the near sites in order along the axis; a far site's side
    # channel joins it at the foot of the perpendicular, a vertex of the main stem
    stem_s = np.r_[0.0, along[near], length]
    stem_o = np.r_[0.0, across[near], 0.0]
    order = np.argsort(stem_s, kind="stable")
    stem_s, stem_o = stem_s[order], stem_o[order]
    foot_o = np.interp(along[~near], stem_s, stem_o)
    every_s = np.r_[stem_s, along[~near]]
    every_o = np.r_[stem_o, foot_o]
    order = np.argsort(every_s, kind="stable")
    lines.append(start + np.outer(every_s[order], axis) + np.outer(every_o[order], normal))
    names.append("River Corvanne")
    kinds.append("main stem")
    sites = np.column_stack([x[on], y[on]])[~near]
    feet = start + np.outer(along[~near], axis) + np.outer(foot_o, normal)
    for site, foot in zip(sites, feet, strict=True):
        lines.append(np.vstack([site, foot]))
        names.append("side channel")
        kinds.append("side channel")
    geometry = [shapely.linestrings(np.column_stack(
        _lonlat(line[:, 0], line[:, 1], origin, km_per_degree))) for line in lines]
    network = gpd.GeoDataFrame({"name": names, "kind": kinds}, geometry=geometry,
                               crs="EPSG:4326")
    return network.to_crs(NETWORK_CRS)
