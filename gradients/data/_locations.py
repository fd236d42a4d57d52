"""Locations and CRS: one point per site from a GIS layer or coordinate columns, with a known CRS.

Coordinate columns are found from common names (or ``coordinates=``); a CRS comes from the layer,
``crs=``, or the EPSG:4326 default for longitude/latitude names (recorded in the log); degrees are
checked for range and for swapped axes.
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np

from .._errors import InputError, format_items
from ._cells import NUMBER, parse_column
from ._files import RawTable
from ._log import Decision
from ._options import Options
from ._sites import SiteTable, cap, cell_listing

__all__ = ["parse_locations"]

_GEO_X = {"lon", "long", "longitude", "lng", "decimallongitude", "decimal_longitude", "x_lon"}
_GEO_Y = {"lat", "latitude", "decimallatitude", "decimal_latitude", "y_lat"}
_PROJ_X = {"x", "easting", "east", "x_coord", "xcoord", "x_m", "utm_x", "utm_e", "coord_x"}
_PROJ_Y = {"y", "northing", "north", "y_coord", "ycoord", "y_m", "utm_y", "utm_n", "coord_y"}
_DEFAULT_GEO_CRS = "EPSG:4326"


def _norm_name(name: str) -> str:
    name = re.split(r"[(\[]", name, maxsplit=1)[0]
    return re.sub(r"[\s.\-]+", "_", name.strip().casefold()).strip("_")


def _coordinate_columns(table: SiteTable, opts: Options) -> tuple[str, str, bool]:
    """(x column, y column, named as longitude/latitude)."""
    columns = list(table.data.columns)
    raw = table.raw
    if opts.coordinates is not None:
        absent = [c for c in opts.coordinates if c not in columns]
        if absent:
            raise InputError(
                f"`coordinates` names column(s) {format_items(absent)} that are not in "
                f"{raw.source}; its columns are {format_items(columns)}.",
                file=raw.path, columns=absent,
            )
        x, y = opts.coordinates
        return x, y, _norm_name(x) in _GEO_X and _norm_name(y) in _GEO_Y
    norm = {c: _norm_name(c) for c in columns}
    gx = [c for c in columns if norm[c] in _GEO_X]
    gy = [c for c in columns if norm[c] in _GEO_Y]
    px = [c for c in columns if norm[c] in _PROJ_X]
    py = [c for c in columns if norm[c] in _PROJ_Y]
    geo_pair = len(gx) == 1 and len(gy) == 1
    proj_pair = len(px) == 1 and len(py) == 1
    if geo_pair and not proj_pair and not (len(gx) > 1 or len(gy) > 1):
        return gx[0], gy[0], True
    if proj_pair and not geo_pair and not gx and not gy:
        return px[0], py[0], False
    found = gx + gy + px + py
    if found:
        raise InputError(
            f"{cap(raw.source)}: the coordinate columns are ambiguous (found "
            f"{format_items(found)}). Pass coordinates=('x column', 'y column'), for example "
            f"coordinates={(found[0], found[-1])!r}.",
            file=raw.path, columns=found,
        )
    raise InputError(
        f"{cap(raw.source)} has no coordinate columns; columns found: {format_items(columns)}. "
        "Name them longitude/latitude (or lon/lat) for degrees, x/y or easting/northing for "
        "projected coordinates, or pass coordinates=('x column', 'y column') and crs=.",
        file=raw.path,
    )


def _as_crs(crs: object, raw: RawTable) -> Any:
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        return CRS.from_user_input(crs)
    except CRSError as exc:
        raise InputError(
            f"`crs` for {raw.source} is not a coordinate reference system pyproj knows "
            f"({crs!r}: {exc}). Pass an EPSG code such as 'EPSG:4326' (longitude/latitude) or "
            "the projected CRS of your x/y coordinates, e.g. 'EPSG:32632' (UTM 32N).",
            file=raw.path,
        ) from None


def _check_geographic(table: SiteTable, x: np.ndarray, y: np.ndarray, xname: str, yname: str,
                      named: bool) -> None:
    raw = table.raw
    sites = list(table.data.index)
    bad_y = np.flatnonzero(np.abs(y) > 90)
    bad_x = np.flatnonzero(np.abs(x) > 180)

    def listing(idx: np.ndarray, values: np.ndarray) -> str:
        shown = [f"{sites[i]!r} ({values[i]:g}{table.where(sites[i])})" for i in idx[:10]]
        more = f" and {len(idx) - 10} more" if len(idx) > 10 else ""
        return ", ".join(shown) + more

    if len(bad_x) and np.all(np.abs(x) > 1000):
        raise InputError(
            f"{cap(raw.source)}: the coordinates in {xname!r}/{yname!r} look like projected "
            "coordinates (metres), not degrees of longitude and latitude. Pass crs= with the "
            "projected CRS they are in (for example crs='EPSG:32632' for UTM zone 32N) and "
            f"coordinates=({xname!r}, {yname!r}) if the names suggest degrees.",
            file=raw.path, columns=[xname, yname],
        )
    # swapped: most latitudes are impossible and swapping the columns makes every value valid
    # (a single typo such as 95 for 59 is reported as out of range instead)
    if (len(bad_y) >= max(1, len(y) / 2) and np.all(np.abs(x) <= 90)
            and np.all(np.abs(y) <= 180)):
        ylabel = "latitude" if named else "y (latitude)"
        raise InputError(
            f"{cap(raw.source)}: the coordinates look swapped: {ylabel} column {yname!r} holds "
            f"values outside [-90, 90] at {listing(bad_y, y)}, while {xname!r} stays within "
            "[-90, 90]. Swap the column names (longitude is x, latitude is y), or pass "
            f"coordinates=({yname!r}, {xname!r}).",
            file=raw.path, sites=[sites[i] for i in bad_y], columns=[xname, yname],
        )
    if len(bad_y):
        raise InputError(
            f"{cap(raw.source)}: latitude ({yname!r}) outside [-90, 90] at "
            f"{listing(bad_y, y)}. Correct these values (degrees, decimal).",
            file=raw.path, sites=[sites[i] for i in bad_y], columns=[yname],
        )
    if len(bad_x):
        raise InputError(
            f"{cap(raw.source)}: longitude ({xname!r}) outside [-180, 180] at "
            f"{listing(bad_x, x)}. Correct these values (degrees, decimal).",
            file=raw.path, sites=[sites[i] for i in bad_x], columns=[xname],
        )


def parse_locations(table: SiteTable, opts: Options
                    ) -> tuple[Any, list[Decision], tuple[str, str] | None]:
    """(GeoDataFrame of one point per site, decisions, coordinate columns used or None)."""
    import geopandas as gpd

    raw = table.raw
    log: list[Decision] = []
    sites = table.data.index
    used: tuple[str, str] | None = None
    if raw.geo is not None:
        geo = raw.geo
        order = [table.positions[s] for s in sites]
        geometry = geo.geometry.iloc[order]
        crs = geo.crs
        if crs is None and opts.crs is None:
            raise InputError(
                f"{cap(raw.source)} has no coordinate reference system (CRS). Pass crs= (for "
                "example crs='EPSG:4326' for longitude/latitude in degrees), or set it in the "
                "GIS (for a GeoDataFrame: gdf.set_crs(...)).",
                file=raw.path,
            )
        if crs is None:
            crs = _as_crs(opts.crs, raw)
            log.append(Decision("crs", f"The locations in {raw.source} had no CRS; it was set to "
                                f"{crs.to_string()} as given by crs=.", 0))
        elif opts.crs is not None and not _as_crs(opts.crs, raw).equals(crs):
            raise InputError(
                f"{cap(raw.source)} is already in {crs.to_string()}; crs={opts.crs!r} only sets "
                "a missing CRS. Reproject the layer first (GeoDataFrame.to_crs) or drop crs=.",
                file=raw.path,
            )
        missing = [s for s, g in zip(sites, geometry, strict=True) if g is None or g.is_empty]
        if missing:
            raise InputError(
                f"{cap(raw.source)}: site(s) {format_items(missing)} have no geometry. Give "
                "every site a point, or remove the site from every table.",
                file=raw.path, sites=missing,
            )
        kinds = np.asarray(geometry.geom_type)
        not_points = [s for s, k in zip(sites, kinds, strict=True) if k != "Point"]
        if not_points:
            types = sorted(set(kinds[kinds != "Point"]))
            raise InputError(
                f"{cap(raw.source)}: locations must be points, but site(s) "
                f"{format_items(not_points)} are {format_items(types, quote=False)}. Use one "
                "point per site (e.g. gdf.representative_point() for polygons).",
                file=raw.path, sites=not_points,
            )
        x = np.asarray(geometry.x, dtype=float)
        y = np.asarray(geometry.y, dtype=float)
        xname, yname, named = "x", "y", True
        points = gpd.GeoSeries(list(geometry), index=sites, crs=crs)
    else:
        xname, yname, named = _coordinate_columns(table, opts)
        used = (xname, yname)
        numbers = []
        for col in (xname, yname):
            pc = parse_column(table.data[col], decimal_comma=raw.decimal_comma)
            bad = [(int(i), col, str(pc.text[i])) for i in np.flatnonzero(pc.kinds != NUMBER)]
            if bad:
                raise InputError(
                    f"{cap(raw.source)}: coordinate column {col!r} has {len(bad)} cell(s) that "
                    f"are not numbers: {cell_listing(table, bad, 'column')}. Every site needs "
                    "numeric coordinates (decimal degrees, not degrees-minutes-seconds).",
                    file=raw.path, sites=[sites[i] for i, _, _ in bad], columns=[col],
                )
            numbers.append(pc.values)
        x, y = numbers
        if opts.crs is not None:
            crs = _as_crs(opts.crs, raw)
        elif named:
            crs = _as_crs(_DEFAULT_GEO_CRS, raw)
            log.append(Decision(
                "crs",
                f"The coordinates {xname!r}/{yname!r} in {raw.source} were read as longitude/"
                "latitude in EPSG:4326 (WGS 84), the default for columns with these names.",
                0, columns=(xname, yname),
            ))
        else:
            raise InputError(
                f"{cap(raw.source)}: the coordinates {xname!r}/{yname!r} need a coordinate "
                "reference system. Pass crs= (for example crs='EPSG:32632' for UTM zone 32N, or "
                "crs='EPSG:4326' if they are longitude/latitude in degrees).",
                file=raw.path, columns=[xname, yname],
            )
        points = gpd.GeoSeries(gpd.points_from_xy(x, y), index=sites, crs=crs)
    if crs.is_geographic:
        _check_geographic(table, x, y, xname, yname, named)
    gdf = gpd.GeoDataFrame(geometry=points, crs=points.crs)
    gdf.index.name = "site"
    return gdf, log, used

