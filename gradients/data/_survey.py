"""The survey: community, environment and locations aligned on one ordered index of site IDs.

:class:`Survey` validates tables already in memory; :func:`read_survey` reads files and applies
exactly the same rules. Every decision taken on the input (sites dropped, censored values
replaced, variables dropped, an encoding guessed) is kept in :attr:`Survey.log`, which the methods
paragraph of a report reads.
"""

from __future__ import annotations

import os
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import check_choice
from ._cells import CENSORED, MISSING, MISSING_TOKENS, NUMBER, TEXT, non_detect_hint, parse_column
from ._censored import CENSORED_POLICIES, MIN_DETECTS_ROS, ros_impute
from ._files import RawTable, read_file, table_from_frame
from ._log import Decision

__all__ = [
    "CONSTANT_POLICIES",
    "EMPTY_SITE_POLICIES",
    "EMPTY_TAXON_POLICIES",
    "MISSING_POLICIES",
    "Survey",
    "read_survey",
]

MISSING_POLICIES: dict[str, str] = {
    "error": "stop with an error listing the empty cells",
    "drop-sites": "drop every site with an empty environmental cell (from every table)",
    "drop-variables": "drop every environmental variable with an empty cell",
}
EMPTY_SITE_POLICIES = ("error", "drop")
EMPTY_TAXON_POLICIES = ("drop", "keep", "error")
CONSTANT_POLICIES = ("error", "drop")

MIN_SITES = 2

_GEO_X = {"lon", "long", "longitude", "lng", "decimallongitude", "decimal_longitude", "x_lon"}
_GEO_Y = {"lat", "latitude", "decimallatitude", "decimal_latitude", "y_lat"}
_PROJ_X = {"x", "easting", "east", "x_coord", "xcoord", "x_m", "utm_x", "utm_e", "coord_x"}
_PROJ_Y = {"y", "northing", "north", "y_coord", "ycoord", "y_m", "utm_y", "utm_n", "coord_y"}
_DEFAULT_GEO_CRS = "EPSG:4326"


# ---------------------------------------------------------------------------------------------
# options


@dataclass(frozen=True)
class _Options:
    site_column: str
    coordinates: tuple[str, str] | None
    crs: Any
    factors: tuple[str, ...]
    shared_sites_only: bool
    missing: str
    censored: str
    empty_sites: str
    empty_taxa: str
    constant: str


def _check_options(
    site_column: object,
    coordinates: object,
    crs: object,
    factors: object,
    shared_sites_only: object,
    missing: object,
    censored: object,
    empty_sites: object,
    empty_taxa: object,
    constant: object,
) -> _Options:
    if not isinstance(site_column, str) or not site_column.strip():
        raise InputError(f"`site_column` must be a column name (a non-empty str); got "
                         f"{site_column!r}.")
    coords = None
    if coordinates is not None:
        ok = (isinstance(coordinates, Sequence) and not isinstance(coordinates, str)
              and len(coordinates) == 2 and all(isinstance(c, str) for c in coordinates))
        if not ok:
            raise InputError("`coordinates` must be a pair of column names (x, y), for example "
                             f"('longitude', 'latitude'); got {coordinates!r}.")
        coords = (str(coordinates[0]), str(coordinates[1]))
    if factors is None:
        facs: tuple[str, ...] = ()
    elif isinstance(factors, str):
        facs = (factors,)
    elif isinstance(factors, Iterable) and all(isinstance(f, str) for f in factors):
        facs = tuple(factors)
    else:
        raise InputError(f"`factors` must be a list of column names; got {factors!r}.")
    if not isinstance(shared_sites_only, bool | np.bool_):
        raise InputError(f"`shared_sites_only` must be True or False; got {shared_sites_only!r}.")
    return _Options(
        site_column=site_column,
        coordinates=coords,
        crs=crs,
        factors=facs,
        shared_sites_only=bool(shared_sites_only),
        missing=check_choice("missing", missing, tuple(MISSING_POLICIES)),
        censored=check_choice("censored", censored, tuple(CENSORED_POLICIES)),
        empty_sites=check_choice("empty_sites", empty_sites, EMPTY_SITE_POLICIES),
        empty_taxa=check_choice("empty_taxa", empty_taxa, EMPTY_TAXON_POLICIES),
        constant=check_choice("constant", constant, CONSTANT_POLICIES),
    )


# ---------------------------------------------------------------------------------------------
# site IDs


def _label(value: object) -> str | None:
    """A site ID or factor level as text: stripped, whole floats without '.0', blanks as None."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, float | np.floating):
        if np.isnan(value):
            return None
        if float(value).is_integer():
            value = int(value)
    text = str(value).strip()
    if _WHOLE_DECIMAL.fullmatch(text):  # "12.0" as written by a spreadsheet's CSV export
        text = text.split(".")[0]
    return text or None


_WHOLE_DECIMAL = re.compile(r"[+-]?\d+\.0+")


@dataclass
class _Table:
    raw: RawTable
    data: pd.DataFrame  # cells without the site column, indexed by site ID
    positions: dict[str, int] = field(default_factory=dict)  # site -> row position in raw

    def where(self, site: str) -> str:
        if self.raw.rows is None:
            return ""
        return f", {self.raw.where(self.positions[site])}"


def _default_index(index: pd.Index) -> bool:
    return isinstance(index, pd.RangeIndex) and index.name is None


def _locate_site_column(raw: RawTable, site_column: str) -> str | None:
    columns = [str(c).strip() for c in raw.frame.columns]
    if site_column in columns:
        return site_column
    folded = [c for c in columns if c.strip().casefold() == site_column.strip().casefold()]
    if len(folded) == 1:
        raw.log.append(Decision(
            "site-column",
            f"In {raw.source}, the column {folded[0]!r} was taken as the site column "
            f"{site_column!r} (names differ only in case or spaces).",
            0, columns=(folded[0],),
        ))
        return folded[0]
    return None


def _column_names(raw: RawTable) -> pd.DataFrame:
    """The raw frame with str column names, refusing repeated or blank names."""
    frame = raw.frame
    names = [str(c).strip() for c in frame.columns]
    if len(set(names)) < len(names):
        dupes = sorted({n for n in names if names.count(n) > 1})
        raise InputError(
            f"{_cap(raw.source)} repeats column name(s) {format_items(dupes)}. Each column needs "
            "its own name; merge or rename the repeated columns.",
            file=raw.path, columns=dupes,
        )
    if "" in names:
        raise InputError(f"{_cap(raw.source)} has a column with no name; name every column.",
                         file=raw.path)
    frame = frame.copy()
    frame.columns = names
    return frame


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:]


def _extract_sites(raw: RawTable, column: str | None) -> _Table:
    frame = _column_names(raw)
    if raw.geo is not None and getattr(raw.geo, "geometry", None) is not None:
        geometry_name = raw.geo.geometry.name
        if geometry_name in frame.columns:
            frame = frame.drop(columns=geometry_name)
    if column is not None:
        values = list(frame[column])
        data = frame.drop(columns=column)
    else:
        values = list(frame.index)
        data = frame
    if len(values) == 0:
        raise InputError(f"{_cap(raw.source)} is empty: it holds no rows.", file=raw.path)
    labels = [_label(v) for v in values]
    blank = [i for i, s in enumerate(labels) if s is None]
    if blank:
        where = ", ".join(raw.where(i) for i in blank[:10])
        more = f" and {len(blank) - 10} more" if len(blank) > 10 else ""
        raise InputError(
            f"{_cap(raw.source)} has {len(blank)} row(s) with no site ID ({where}{more}). "
            "Give every row a site ID, or delete the rows.",
            file=raw.path,
        )
    positions: dict[str, list[int]] = {}
    for i, s in enumerate(labels):
        positions.setdefault(s, []).append(i)  # type: ignore[arg-type]
    dupes = {s: p for s, p in positions.items() if len(p) > 1}
    if dupes:
        shown = "; ".join(
            f"{s!r} ({', '.join(raw.where(i) for i in p)})" for s, p in list(dupes.items())[:10]
        )
        more = f" and {len(dupes) - 10} more" if len(dupes) > 10 else ""
        raise InputError(
            f"{_cap(raw.source)} repeats site ID(s): {shown}{more}. Each site must appear once; "
            "merge the repeated rows (e.g. sum or average replicates) or give them distinct IDs.",
            file=raw.path, sites=list(dupes),
        )
    data = data.copy()
    data.index = pd.Index(labels, name="site", dtype=object)
    return _Table(raw=raw, data=data, positions={s: p[0] for s, p in positions.items()})


def _missing_site_column(raw: RawTable, site_column: str, others: list[_Table],
                         other_raws: list[RawTable]) -> InputError:
    columns = [str(c) for c in raw.frame.columns]
    message = (f"{_cap(raw.source)} has no site column {site_column!r}; columns found: "
               f"{format_items(columns)}.")
    other_sites: set[str] = set()
    for t in others:
        other_sites |= set(t.data.index)
    other_headers: set[str] = set()
    for r in other_raws:
        other_headers |= {str(c).strip() for c in r.frame.columns}
    header_rest = {c.strip() for c in columns[1:]}
    first = {_label(v) for v in raw.frame.iloc[:, 0]} - {None} if columns else set()
    hint = ""
    if other_sites and len(header_rest & other_sites) >= max(1, len(header_rest) // 2):
        example = format_items(sorted(header_rest & other_sites), limit=3)
        hint = (f" The table looks transposed: its column headers are site IDs found in "
                f"{others[0].raw.source} (e.g. {example}). Put one row per site and one column per "
                "taxon or variable (pandas: "
                "`df.set_index(df.columns[0]).T`; spreadsheet: copy, Paste Special, Transpose).")
    elif other_headers and len(first & other_headers) >= max(1, len(first) // 2):
        example = format_items(sorted(first & other_headers), limit=3)
        hint = (f" The table looks transposed: the values of its first column {columns[0]!r} "
                f"are column headers of another table (e.g. {example}). Put one row per site "
                "and one column per taxon or variable.")
    else:
        for c in columns:
            values = {_label(v) for v in raw.frame[c]} - {None}
            if other_sites and values and len(values & other_sites) >= max(1, len(values) // 2):
                hint = (f" Column {c!r} holds the site IDs of {others[0].raw.source}; pass "
                        f"site_column={c!r} or rename the column to {site_column!r}.")
                break
        else:
            example = f" (for example site_column={columns[0]!r})" if columns else ""
            hint = (" Pass site_column= with the name of the column that holds the site IDs"
                    f"{example}, or rename that column to {site_column!r}.")
    return InputError(message + hint, file=raw.path, columns=[site_column])


def _site_tables(raws: dict[str, RawTable], opts: _Options) -> dict[str, _Table]:
    tables: dict[str, _Table] = {}
    failed: list[str] = []
    for role, raw in raws.items():
        column = _locate_site_column(raw, opts.site_column)
        if column is None and (raw.from_file or _default_index(raw.frame.index)):
            failed.append(role)
            continue
        tables[role] = _extract_sites(raw, column)
    for role in failed:
        raise _missing_site_column(
            raws[role], opts.site_column, list(tables.values()),
            [r for k, r in raws.items() if k != role],
        )
    return tables


# ---------------------------------------------------------------------------------------------
# community


def _cells(table: _Table, cells: list[tuple[int, str, str]], what: str) -> str:
    sites = table.data.index
    shown = [f"site {sites[i]!r}, {what} {col!r}: {text!r}{table.where(sites[i])}"
             for i, col, text in cells[:10]]
    more = f"; and {len(cells) - 10} more" if len(cells) > 10 else ""
    return "; ".join(shown) + more


def _parse_community(table: _Table) -> pd.DataFrame:
    data = table.data
    raw = table.raw
    if data.shape[1] == 0:
        raise InputError(
            f"{_cap(raw.source)} holds only the site column; a community table needs one column "
            "per taxon.", file=raw.path,
        )
    values = np.empty(data.shape)
    text_cells: list[tuple[int, str, str]] = []
    censored: list[tuple[int, str, str]] = []
    missing: list[tuple[int, str, str]] = []
    negative: list[tuple[int, str, str]] = []
    for j, col in enumerate(data.columns):
        pc = parse_column(data[col], decimal_comma=raw.decimal_comma)
        values[:, j] = pc.values
        for kind, bucket in ((TEXT, text_cells), (CENSORED, censored), (MISSING, missing)):
            bucket.extend((int(i), col, str(pc.text[i])) for i in np.flatnonzero(pc.kinds == kind))
        neg = np.flatnonzero((pc.kinds == NUMBER) & (pc.values < 0))
        negative.extend((int(i), col, str(pc.text[i])) for i in neg)
    columns = lambda cells: sorted({c for _, c, _ in cells})  # noqa: E731
    sites = lambda cells: [data.index[i] for i, _, _ in cells]  # noqa: E731
    if text_cells:
        raise InputError(
            f"{_cap(raw.source)}: {len(text_cells)} abundance cell(s) are not numbers: "
            f"{_cells(table, text_cells, 'taxon')}. Abundances must be non-negative numbers "
            "(counts, cover, biomass); write 0 where a taxon was not found."
            + non_detect_hint([t for _, _, t in text_cells]),
            file=raw.path, sites=sites(text_cells), columns=columns(text_cells),
        )
    if censored:
        raise InputError(
            f"{_cap(raw.source)}: {len(censored)} abundance cell(s) are written as below a "
            f"detection limit: {_cells(table, censored, 'taxon')}. Abundances cannot be censored; "
            "write the count (0 if the taxon was not found).",
            file=raw.path, sites=sites(censored), columns=columns(censored),
        )
    if missing:
        raise InputError(
            f"{_cap(raw.source)}: {len(missing)} abundance cell(s) are empty: "
            f"{_cells(table, missing, 'taxon')}. Write 0 where a taxon was looked for and not "
            "found; remove sites that were not sampled.",
            file=raw.path, sites=sites(missing), columns=columns(missing),
        )
    if negative:
        raise InputError(
            f"{_cap(raw.source)}: {len(negative)} abundance(s) are negative: "
            f"{_cells(table, negative, 'taxon')}. Abundances must be 0 or more; check for a sign "
            "error or a code for 'not recorded' such as -9 or -999 (write 0, or remove the site).",
            file=raw.path, sites=sites(negative), columns=columns(negative),
        )
    community = pd.DataFrame(values, index=data.index.copy(), columns=pd.Index(data.columns))
    if np.all(values == np.round(values)) and np.all(values < 2.0**53):
        community = community.astype(np.int64)
    community.columns.name = "taxon"
    return community


# ---------------------------------------------------------------------------------------------
# environment


def _as_factor(series: pd.Series) -> pd.Series:
    if isinstance(series.dtype, pd.CategoricalDtype):
        labels = [_label(v) for v in series.astype(object)]
    else:
        labels = []
        for v in series.astype(object):
            label = _label(v)
            labels.append(None if label is not None and label.lower() in MISSING_TOKENS else label)
    return pd.Series(pd.Categorical(labels), index=series.index, name=series.name)


def _parse_environment(table: _Table, opts: _Options
                       ) -> tuple[pd.DataFrame, pd.DataFrame, list[Decision]]:
    data = table.data
    raw = table.raw
    log: list[Decision] = []
    unknown = [f for f in opts.factors if f not in data.columns]
    if unknown:
        raise InputError(
            f"`factors` names column(s) {format_items(unknown)} that are not in "
            f"{raw.source}; its columns are {format_items(list(data.columns))}.",
            file=raw.path, columns=unknown,
        )
    columns: dict[str, pd.Series] = {}
    censored: dict[str, np.ndarray] = {}
    for col in data.columns:
        s = data[col]
        if (col in opts.factors or isinstance(s.dtype, pd.CategoricalDtype)
                or pd.api.types.is_bool_dtype(s.dtype)):
            columns[col] = _as_factor(s)
            censored[col] = np.zeros(len(s), dtype=bool)
            continue
        pc = parse_column(s, decimal_comma=raw.decimal_comma)
        n_num = pc.count(NUMBER) + pc.count(CENSORED)
        n_text = pc.count(TEXT)
        if n_text == 0 or (n_num > 0 and n_num >= n_text):
            if n_text:
                cells = [(int(i), col, str(pc.text[i])) for i in np.flatnonzero(pc.kinds == TEXT)]
                raise InputError(
                    f"{_cap(raw.source)}: column {col!r} holds numbers but {n_text} cell(s) are "
                    f"not numbers: {_cells(table, cells, 'column')}. Correct these cells, leave "
                    "them empty and choose a `missing=` policy, or list the column in `factors=` "
                    "if it is categorical." + non_detect_hint([t for _, _, t in cells]),
                    file=raw.path, sites=[data.index[i] for i, _, _ in cells], columns=[col],
                )
            columns[col] = pd.Series(pc.values, index=data.index, name=col, dtype=float)
            censored[col] = pc.kinds == CENSORED
        else:
            columns[col] = _as_factor(s)
            censored[col] = np.zeros(len(s), dtype=bool)
            if n_num:
                log.append(Decision(
                    "factor",
                    f"Column {col!r} of {raw.source} was read as categorical: {n_text} of its "
                    f"cells are text and {n_num} are numbers.",
                    n_num, columns=(col,),
                ))
    env = pd.DataFrame(columns, index=data.index.copy())
    env.columns = pd.Index(list(data.columns), dtype=object)
    mask = pd.DataFrame(censored, index=data.index.copy())
    mask.columns = env.columns.copy()
    return env, mask, log


# ---------------------------------------------------------------------------------------------
# locations


def _norm_name(name: str) -> str:
    name = re.split(r"[(\[]", name, maxsplit=1)[0]
    return re.sub(r"[\s.\-]+", "_", name.strip().casefold()).strip("_")


def _coordinate_columns(table: _Table, opts: _Options) -> tuple[str, str, bool]:
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
            f"{_cap(raw.source)}: the coordinate columns are ambiguous (found "
            f"{format_items(found)}). Pass coordinates=('x column', 'y column'), for example "
            f"coordinates={(found[0], found[-1])!r}.",
            file=raw.path, columns=found,
        )
    raise InputError(
        f"{_cap(raw.source)} has no coordinate columns; columns found: {format_items(columns)}. "
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


def _check_geographic(table: _Table, x: np.ndarray, y: np.ndarray, xname: str, yname: str,
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
            f"{_cap(raw.source)}: the coordinates in {xname!r}/{yname!r} look like projected "
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
            f"{_cap(raw.source)}: the coordinates look swapped: {ylabel} column {yname!r} holds "
            f"values outside [-90, 90] at {listing(bad_y, y)}, while {xname!r} stays within "
            "[-90, 90]. Swap the column names (longitude is x, latitude is y), or pass "
            f"coordinates=({yname!r}, {xname!r}).",
            file=raw.path, sites=[sites[i] for i in bad_y], columns=[xname, yname],
        )
    if len(bad_y):
        raise InputError(
            f"{_cap(raw.source)}: latitude ({yname!r}) outside [-90, 90] at "
            f"{listing(bad_y, y)}. Correct these values (degrees, decimal).",
            file=raw.path, sites=[sites[i] for i in bad_y], columns=[yname],
        )
    if len(bad_x):
        raise InputError(
            f"{_cap(raw.source)}: longitude ({xname!r}) outside [-180, 180] at "
            f"{listing(bad_x, x)}. Correct these values (degrees, decimal).",
            file=raw.path, sites=[sites[i] for i in bad_x], columns=[xname],
        )


def _parse_locations(table: _Table, opts: _Options
                     ) -> tuple[Any, list[Decision], tuple[str, str] | None]:
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
                f"{_cap(raw.source)} has no coordinate reference system (CRS). Pass crs= (for "
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
                f"{_cap(raw.source)} is already in {crs.to_string()}; crs={opts.crs!r} only sets "
                "a missing CRS. Reproject the layer first (GeoDataFrame.to_crs) or drop crs=.",
                file=raw.path,
            )
        missing = [s for s, g in zip(sites, geometry, strict=True) if g is None or g.is_empty]
        if missing:
            raise InputError(
                f"{_cap(raw.source)}: site(s) {format_items(missing)} have no geometry. Give "
                "every site a point, or remove the site from every table.",
                file=raw.path, sites=missing,
            )
        kinds = np.asarray(geometry.geom_type)
        not_points = [s for s, k in zip(sites, kinds, strict=True) if k != "Point"]
        if not_points:
            types = sorted(set(kinds[kinds != "Point"]))
            raise InputError(
                f"{_cap(raw.source)}: locations must be points, but site(s) "
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
                    f"{_cap(raw.source)}: coordinate column {col!r} has {len(bad)} cell(s) that "
                    f"are not numbers: {_cells(table, bad, 'column')}. Every site needs numeric "
                    "coordinates (decimal degrees, not degrees-minutes-seconds).",
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
                f"{_cap(raw.source)}: the coordinates {xname!r}/{yname!r} need a coordinate "
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


# ---------------------------------------------------------------------------------------------
# alignment and policies


def _zero_pad_hint(a: Iterable[str], b: Iterable[str]) -> str:
    def norm(s: str) -> str:
        return re.sub(r"(?<!\d)0+(?=\d)", "", s.casefold().replace(" ", "").replace("_", "-"))

    a, b = set(a), set(b)
    if len({norm(s) for s in a} & {norm(s) for s in b}) > len(a & b):
        return (" Some IDs differ only in case, spaces or leading zeros (e.g. 'S01' and 's1'); "
                "make them identical in every table.")
    return ""


def _align(tables: dict[str, _Table], opts: _Options, log: list[Decision]) -> pd.Index:
    reference = tables["community"]
    order = reference.data.index
    others = {r: t for r, t in tables.items() if r != "community"}
    problems = []
    sites_involved: list[str] = []
    for t in others.values():
        ref_set, other_set = set(order), set(t.data.index)
        if ref_set == other_set:
            continue
        only_ref = [s for s in order if s not in other_set]
        only_other = [s for s in t.data.index if s not in ref_set]
        parts = []
        if only_ref:
            parts.append(f"{len(only_ref)} site(s) in {reference.raw.source} but not in "
                         f"{t.raw.source}: {format_items(only_ref)}")
        if only_other:
            parts.append(f"{len(only_other)} site(s) in {t.raw.source} but not in "
                         f"{reference.raw.source}: {format_items(only_other)}")
        problems.append("; ".join(parts) + "." + _zero_pad_hint(ref_set, other_set))
        sites_involved += only_ref + only_other
    if problems and not opts.shared_sites_only:
        raise InputError(
            "The tables do not hold the same sites. " + " ".join(_cap(p) for p in problems)
            + " Correct the site IDs, or pass shared_sites_only=True to keep only the sites "
            "found in every table (the dropped sites are recorded in Survey.log).",
            file=reference.raw.path, sites=sites_involved,
        )
    shared = [s for s in order if all(s in t.data.index for t in others.values())]
    if problems:
        if len(shared) < MIN_SITES:
            raise InputError(
                f"Only {len(shared)} site(s) are found in every table; at least {MIN_SITES} are "
                "needed. " + " ".join(_cap(p) for p in problems),
                sites=sites_involved,
            )
        for t in tables.values():
            dropped = [s for s in t.data.index if s not in set(shared)]
            if dropped:
                log.append(Decision(
                    "drop-sites",
                    f"{len(dropped)} site(s) of {t.raw.source} not found in every table were "
                    f"dropped (shared_sites_only=True): {format_items(dropped, limit=20)}.",
                    len(dropped), sites=tuple(dropped),
                ))
    index = pd.Index(shared, name="site", dtype=object)
    for t in others.values():
        kept = [s for s in t.data.index if s in set(shared)]
        if kept != shared:
            log.append(Decision(
                "reorder",
                f"The rows of {t.raw.source} were put in the site order of "
                f"{reference.raw.source}.", 0,
            ))
    return index


def _describe_cells(env: pd.DataFrame, mask: np.ndarray, where: dict[str, str]) -> str:
    rows, cols = np.nonzero(mask)
    shown = [f"site {env.index[i]!r}, column {env.columns[j]!r}{where.get(env.index[i], '')}"
             for i, j in zip(rows[:10], cols[:10], strict=True)]
    more = f"; and {len(rows) - 10} more" if len(rows) > 10 else ""
    return "; ".join(shown) + more


def _apply_missing(env: pd.DataFrame, censored: pd.DataFrame, table: _Table, opts: _Options,
                   log: list[Decision]) -> tuple[pd.DataFrame, list[str]]:
    """Returns the environment after the missing policy and the sites to drop everywhere."""
    miss = env.isna().to_numpy() & ~censored.to_numpy()
    if not miss.any():
        return env, []
    raw = table.raw
    per_column = {c: int(n) for c, n in zip(env.columns, miss.sum(axis=0), strict=True) if n}
    site_mask = miss.any(axis=1)
    bad_sites = [s for s, m in zip(env.index, site_mask, strict=True) if m]
    where = {s: table.where(s) for s in env.index}
    if opts.missing == "error":
        counts = ", ".join(f"{c!r} ({n})" for c, n in per_column.items())
        raise InputError(
            f"{_cap(raw.source)} has {int(miss.sum())} empty environmental cell(s): "
            f"{_describe_cells(env, miss, where)}. Empty cells per column: {counts}. Fill them, "
            f"or choose a policy: missing='drop-sites' drops the {len(bad_sites)} site(s) "
            f"concerned from every table; missing='drop-variables' drops the {len(per_column)} "
            "column(s) concerned. Each choice is recorded in Survey.log.",
            file=raw.path, sites=bad_sites, columns=list(per_column),
        )
    if opts.missing == "drop-sites":
        empty = [c for c, n in per_column.items() if n == len(env)]
        if empty:
            raise InputError(
                f"{_cap(raw.source)}: column(s) {format_items(empty)} are empty for every site, "
                "so missing='drop-sites' would drop every site. Remove the column(s), or use "
                "missing='drop-variables'.",
                file=raw.path, columns=empty,
            )
        log.append(Decision(
            "drop-sites",
            f"{len(bad_sites)} site(s) with empty environmental values were dropped from every "
            f"table (missing='drop-sites'): {format_items(bad_sites, limit=20)}; empty cells per "
            f"column: {', '.join(f'{c} {n}' for c, n in per_column.items())}.",
            len(bad_sites), sites=tuple(bad_sites), columns=tuple(per_column),
        ))
        return env.loc[~site_mask], bad_sites
    dropped = list(per_column)
    log.append(Decision(
        "drop-variables",
        f"{len(dropped)} environmental variable(s) with empty values were dropped "
        f"(missing='drop-variables'): "
        f"{', '.join(f'{c} ({n} empty)' for c, n in per_column.items())}.",
        len(dropped), sites=tuple(bad_sites), columns=tuple(dropped),
    ))
    return env.drop(columns=dropped), []


_POLICY_WORDS = {
    "half-limit": "replaced by half the detection limit (substitution, common practice; biased, "
                  "Helsel 2012)",
    "limit": "replaced by the detection limit (substitution; an upper bound, biased upwards; "
             "Helsel 2012)",
    "zero": "replaced by 0 (substitution; a lower bound, biased downwards; Helsel 2012)",
}


def _apply_censored(env: pd.DataFrame, censored: pd.DataFrame, table: _Table, opts: _Options,
                    log: list[Decision]) -> pd.DataFrame:
    mask = censored.to_numpy()
    if not mask.any():
        return env
    raw = table.raw
    per_column = {c: int(n) for c, n in zip(env.columns, mask.sum(axis=0), strict=True) if n}
    if opts.censored == "error":
        options = "; ".join(f"censored={k!r}: {v}" for k, v in CENSORED_POLICIES.items()
                            if k != "error")
        where = {s: table.where(s) for s in env.index}
        cells = _describe_cells(env, mask, where)
        raise InputError(
            f"{_cap(raw.source)} has {int(mask.sum())} value(s) below a detection limit "
            f"(written like '<0.5'): {cells}. Per column: "
            f"{', '.join(f'{c!r} ({n})' for c, n in per_column.items())}. Choose a policy with "
            f"censored=: {options}. The choice and its effect are recorded in Survey.log.",
            file=raw.path, sites=sorted({env.index[i] for i in np.nonzero(mask)[0]}),
            columns=list(per_column),
        )
    env = env.copy()
    for col, n in per_column.items():
        c = censored[col].to_numpy()
        values = env[col].to_numpy(dtype=float).copy()
        limits = values[c]
        limit_text = format_items(sorted({f"<{v:g}" for v in limits}), quote=False)
        sites = tuple(env.index[c])
        if opts.censored == "half-limit":
            values[c] = limits / 2
            words = _POLICY_WORDS["half-limit"]
        elif opts.censored == "limit":
            words = _POLICY_WORDS["limit"]
        elif opts.censored == "zero":
            values[c] = 0.0
            words = _POLICY_WORDS["zero"]
        else:
            detected = values[~c]
            if len(detected) < MIN_DETECTS_ROS:
                raise InputError(
                    f"{_cap(raw.source)}: column {col!r} has only {len(detected)} detected "
                    f"value(s) and {n} below a detection limit; censored='ros' needs at least "
                    f"{MIN_DETECTS_ROS} detected values to fit its line. Use a substitution "
                    "policy (censored='half-limit', 'limit' or 'zero') and say so in the report, "
                    "or drop the column.",
                    file=raw.path, columns=[col],
                )
            if np.any(detected <= 0) or np.any(limits <= 0):
                raise InputError(
                    f"{_cap(raw.source)}: column {col!r} holds zero or negative values, which "
                    "censored='ros' cannot fit on a log scale. Use a substitution policy "
                    "(censored='half-limit', 'limit' or 'zero') for this table.",
                    file=raw.path, columns=[col],
                )
            values, n_capped = ros_impute(values, c)
            words = ("imputed by robust regression on order statistics (log-normal fit to the "
                     f"{len(detected)} detected values; Helsel 2012)")
            if n_capped:
                words += (f"; {n_capped} imputed value(s) above their own limit were set to the "
                          "limit")
        env[col] = values
        log.append(Decision(
            "censored",
            f"{col}: {n} of {len(values)} values were below a detection limit ({limit_text}) and "
            f"were {words}.",
            n, sites=sites, columns=(col,),
        ))
    return env


def _show(value: object) -> str:
    if isinstance(value, float | np.floating):
        return f"{float(value):g}"
    return repr(str(value))


def _constant_columns(env: pd.DataFrame) -> list[str]:
    out = []
    for col in env.columns:
        s = env[col]
        if isinstance(s.dtype, pd.CategoricalDtype):
            if s.nunique(dropna=True) <= 1:
                out.append(col)
        else:
            v = s.to_numpy(dtype=float)
            if len(v) and np.nanmax(v) == np.nanmin(v):
                out.append(col)
    return out


# ---------------------------------------------------------------------------------------------
# building


@dataclass
class _Parts:
    community: pd.DataFrame
    environment: pd.DataFrame
    locations: Any
    censored: pd.DataFrame
    limits: pd.DataFrame
    log: tuple[Decision, ...]
    sources: dict[str, str | None]


def _build(raws: dict[str, RawTable], opts: _Options, *, shared_table: bool = False) -> _Parts:
    tables = _site_tables(raws, opts)
    log: list[Decision] = [d for raw in raws.values() for d in raw.log]
    community = _parse_community(tables["community"])
    locations = None
    if "locations" in tables:
        locations, loc_log, used = _parse_locations(tables["locations"], opts)
        log.extend(loc_log)
        if shared_table and used and "environment" in tables:
            env_table = tables["environment"]
            env_table.data = env_table.data.drop(columns=list(used))
            log.append(Decision(
                "coordinates",
                f"The columns {used[0]!r} and {used[1]!r} of {env_table.raw.source} were used as "
                "site locations, not as environmental variables.",
                2, columns=used,
            ))
    if "environment" in tables:
        env, cens, env_log = _parse_environment(tables["environment"], opts)
        log.extend(env_log)
    else:
        env = pd.DataFrame(index=community.index.copy())
        cens = pd.DataFrame(index=community.index.copy())

    index = _align(tables, opts, log)
    community = community.loc[index]
    env = env.loc[index]
    cens = cens.loc[index]
    if locations is not None:
        locations = locations.loc[index]

    source = tables["community"].raw.source
    totals = community.sum(axis=1).to_numpy()
    empty = [s for s, t in zip(community.index, totals, strict=True) if t == 0]
    if empty:
        if opts.empty_sites == "error":
            where = tables["community"]
            shown = ", ".join(f"{s!r}{where.where(s)}" for s in empty[:10])
            more = f" and {len(empty) - 10} more" if len(empty) > 10 else ""
            raise InputError(
                f"{_cap(source)}: {len(empty)} site(s) have no taxa at all (every abundance is 0):"
                f" {shown}{more}. Dissimilarities between empty sites are undefined. Remove these "
                "sites from every table, or pass empty_sites='drop' to drop them (recorded in "
                "Survey.log).",
                file=where.raw.path, sites=empty,
            )
        log.append(Decision(
            "drop-sites",
            f"{len(empty)} site(s) with no taxa at all were dropped (empty_sites='drop'): "
            f"{format_items(empty, limit=20)}.",
            len(empty), sites=tuple(empty),
        ))
        keep = community.index[totals > 0]
        community, env, cens = (t.loc[keep] for t in (community, env, cens))
        if locations is not None:
            locations = locations.loc[keep]

    if "environment" in tables:
        env, dropped_sites = _apply_missing(env, cens, tables["environment"], opts, log)
        cens = cens.loc[env.index, list(env.columns)]
        if dropped_sites:
            keep = env.index
            community = community.loc[keep]
            if locations is not None:
                locations = locations.loc[keep]
        limits = env.select_dtypes("number").where(cens[env.select_dtypes("number").columns])
        limits = limits.reindex(columns=env.columns)
        env = _apply_censored(env, cens, tables["environment"], opts, log)
    else:
        limits = pd.DataFrame(index=community.index.copy())

    if len(community) < MIN_SITES:
        raise InputError(
            f"Only {len(community)} site(s) are left after the checks; at least {MIN_SITES} are "
            "needed to compare communities. See Survey.log decisions above: "
            + " ".join(d.detail for d in log),
            file=tables["community"].raw.path,
        )

    zero_taxa = [c for c, t in zip(community.columns, community.sum(axis=0), strict=True)
                 if t == 0]
    if zero_taxa:
        if opts.empty_taxa == "error":
            raise InputError(
                f"{_cap(source)}: {len(zero_taxa)} taxon column(s) are 0 at every site: "
                f"{format_items(zero_taxa)}. Remove them, or pass empty_taxa='drop' (the "
                "default), which drops them and records it in Survey.log.",
                file=tables["community"].raw.path, columns=zero_taxa,
            )
        if opts.empty_taxa == "drop":
            if len(zero_taxa) == community.shape[1]:
                raise InputError(f"{_cap(source)}: every taxon is 0 at every site.",
                                 file=tables["community"].raw.path)
            community = community.drop(columns=zero_taxa)
            log.append(Decision(
                "drop-taxa",
                f"{len(zero_taxa)} taxon column(s) that are 0 at every site were dropped "
                f"(empty_taxa='drop'): {format_items(zero_taxa, limit=20)}.",
                len(zero_taxa), columns=tuple(zero_taxa),
            ))

    constant = _constant_columns(env)
    if constant:
        env_table = tables["environment"]
        if opts.constant == "error":
            values = ", ".join(
                f"{c!r} (every site = {_show(env[c].dropna().iloc[0])})" for c in constant[:10]
            )
            raise InputError(
                f"{_cap(env_table.raw.source)}: {len(constant)} column(s) take the same value at "
                f"every site: {values}. A constant variable cannot explain turnover. Remove it, "
                "or pass constant='drop' to drop such columns (recorded in Survey.log).",
                file=env_table.raw.path, columns=constant,
            )
        env = env.drop(columns=constant)
        cens = cens.drop(columns=constant)
        limits = limits.drop(columns=constant)
        log.append(Decision(
            "drop-variables",
            f"{len(constant)} environmental variable(s) constant over the sites were dropped "
            f"(constant='drop'): {format_items(constant, limit=20)}.",
            len(constant), columns=tuple(constant),
        ))

    for frame in (community, env, cens, limits):
        frame.index = pd.Index(list(community.index), name="site", dtype=object)
    if locations is not None:
        locations.index = pd.Index(list(community.index), name="site", dtype=object)
    cens = cens.astype(bool)
    sources = {role: (raws[role].path if role in raws else None)
               for role in ("community", "environment", "locations")}
    return _Parts(community, env, locations, cens, limits, tuple(log), sources)


def _raw(obj: object, role: str, *, sheet: Any = None, layer: Any = None,
         allow_paths: bool) -> RawTable:
    import geopandas as gpd

    if isinstance(obj, RawTable):
        return obj
    if isinstance(obj, gpd.GeoDataFrame):
        raw = table_from_frame(pd.DataFrame(obj), role)
        raw.geo = obj if role == "locations" else None
        if role != "locations":
            raw.frame = pd.DataFrame(obj.drop(columns=obj.geometry.name))
        if len(obj) == 0:
            raise InputError(f"The {role} GeoDataFrame is empty: it holds no rows.")
        return raw
    if isinstance(obj, pd.DataFrame):
        if obj.shape[0] == 0:
            raise InputError(f"The {role} DataFrame is empty: it holds no rows.")
        return table_from_frame(obj, role)
    if isinstance(obj, str | os.PathLike):
        if allow_paths:
            if isinstance(sheet, Mapping):
                sheet = sheet.get(role)
            if isinstance(layer, Mapping):
                layer = layer.get(role)
            return read_file(obj, role, sheet=sheet, layer=layer)
        raise InputError(
            f"Survey() takes DataFrames; the {role} was given as a path ({str(obj)!r}). Use "
            "gradients.read_survey(...) to read files.",
            file=str(obj),
        )
    raise InputError(
        f"The {role} must be a pandas DataFrame{' or a file path' if allow_paths else ''}; got "
        f"{type(obj).__name__}.",
    )


def _same_table(environment: object, locations: object) -> bool:
    """True when the environment and the locations are the same table (or the same file)."""
    if environment is None or locations is None:
        return False
    if environment is locations:
        return True
    if isinstance(environment, str | os.PathLike) and isinstance(locations, str | os.PathLike):
        try:
            return os.path.samefile(environment, locations)
        except OSError:
            return False
    return False


# ---------------------------------------------------------------------------------------------
# the public class


class Survey:
    """Community, environment and locations of one survey, aligned on one ordered set of sites.

    Parameters
    ----------
    community : DataFrame
        Sites x taxa abundances (counts, cover, biomass; non-negative numbers). Site IDs are
        taken from the column named `site_column`, or from the index when there is no such
        column and the index is not a plain 0..n-1 range.
    environment : DataFrame, optional
        Sites x environmental variables. Numeric columns stay numeric; text columns (and those
        named in `factors`) become pandas ``category`` columns. Cells written like ``<0.5`` are
        values below a detection limit, handled by `censored`.
    locations : GeoDataFrame or DataFrame, optional
        Site points with a CRS, or a table with coordinate columns (see `coordinates`, `crs`).
    site_column : str, default "site"
        Name of the column holding site IDs in every table (matched ignoring case and spaces
        when no column has exactly this name; recorded in the log).
    coordinates : (str, str), optional
        The x and y columns of a locations table. By default found from common names:
        lon/long/longitude/lng and lat/latitude (degrees, default CRS EPSG:4326), or
        x/easting and y/northing (projected; `crs` required).
    crs : str, int or pyproj.CRS, optional
        CRS of coordinate columns, or of a GeoDataFrame or GIS layer that has none.
    factors : list of str, optional
        Environmental columns to treat as categorical even if they hold numbers (e.g. habitat
        codes 1, 2, 3).
    shared_sites_only : bool, default False
        When the tables hold different sites: False stops with an error listing them both ways;
        True keeps the sites found in every table and records what was dropped.
    missing : {"error", "drop-sites", "drop-variables"}, default "error"
        What to do with empty environmental cells.
    censored : {"error", "half-limit", "limit", "zero", "ros"}, default "error"
        What to do with values below a detection limit; see Notes.
    empty_sites : {"error", "drop"}, default "error"
        What to do with sites where every abundance is 0.
    empty_taxa : {"drop", "keep", "error"}, default "drop"
        What to do with taxa that are 0 at every site (after any sites are dropped). They carry
        no information about turnover, so by default they are dropped and the log says so.
    constant : {"error", "drop"}, default "error"
        What to do with environmental columns that take one value at every site.

    Attributes
    ----------
    community : DataFrame
        Sites x taxa, int64 when every abundance is a whole number, float64 otherwise.
    environment : DataFrame
        Sites x variables, float64 and ``category`` columns (no columns when none was given).
    locations : GeoDataFrame or None
        One point per site, with a CRS.
    censored : DataFrame of bool
        Like `environment`: True where the value was below a detection limit and was replaced
        by the `censored` policy.
    detection_limits : DataFrame of float
        Like `environment`: the detection limit of each censored cell, NaN elsewhere.
    log : tuple of Decision
        Every decision taken on the input, in order.
    sources : dict
        The file each table was read from (None for DataFrames).

    Notes
    -----
    Checks, in order: site IDs (present, unique); abundances (numbers, not censored, not empty,
    not negative); environmental columns (numeric or categorical, no stray text in numeric
    columns); locations (points, CRS, latitude within [-90, 90], longitude within [-180, 180],
    swapped axes); the same sites in every table (`shared_sites_only`); sites with no taxa
    (`empty_sites`); empty cells (`missing`); censored values (`censored`, applied to the sites
    that remain); taxa absent everywhere (`empty_taxa`); constant variables (`constant`).
    Every problem raises :class:`gradients.InputError` naming the file, sites, columns and the
    fix.

    Substituting half the detection limit for censored values is common practice but biased;
    robust regression on order statistics (``censored="ros"``) imputes them from a log-normal
    fit to the detected values and is the better-founded choice when there are enough detected
    values [1]_. The number of values replaced per column and the policy are recorded in `log`.

    References
    ----------
    .. [1] Helsel, D. R. (2012). *Statistics for Censored Environmental Data Using Minitab and
       R*, 2nd ed. Wiley.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients.data import Survey
    >>> community = pd.DataFrame({"site": ["a", "b", "c"], "Taxon 1": [3, 0, 1],
    ...                           "Taxon 2": [0, 5, 2]})
    >>> environment = pd.DataFrame({"site": ["c", "b", "a"], "Cu": ["12", "<5", "40"]})
    >>> s = Survey(community, environment, censored="half-limit")
    >>> s.environment["Cu"].tolist()
    [40.0, 2.5, 12.0]
    >>> print(s.log[-1])
    Cu: 1 of 3 values were below a detection limit (<5) and were replaced by half the detection \
limit (substitution, common practice; biased, Helsel 2012).
    """

    __slots__ = ("_censored", "_community", "_environment", "_frozen", "_limits", "_locations",
                 "_log", "_sources")

    def __init__(
        self,
        community: pd.DataFrame,
        environment: pd.DataFrame | None = None,
        locations: pd.DataFrame | None = None,
        *,
        site_column: str = "site",
        coordinates: tuple[str, str] | None = None,
        crs: Any = None,
        factors: Sequence[str] | None = None,
        shared_sites_only: bool = False,
        missing: str = "error",
        censored: str = "error",
        empty_sites: str = "error",
        empty_taxa: str = "drop",
        constant: str = "error",
    ) -> None:
        opts = _check_options(site_column, coordinates, crs, factors, shared_sites_only, missing,
                              censored, empty_sites, empty_taxa, constant)
        raws = {"community": _raw(community, "community", allow_paths=False)}
        if environment is not None:
            raws["environment"] = _raw(environment, "environment", allow_paths=False)
        if locations is not None:
            raws["locations"] = _raw(locations, "locations", allow_paths=False)
        self._set(_build(raws, opts, shared_table=_same_table(environment, locations)))

    def _set(self, parts: _Parts) -> None:
        object.__setattr__(self, "_community", parts.community)
        object.__setattr__(self, "_environment", parts.environment)
        object.__setattr__(self, "_locations", parts.locations)
        object.__setattr__(self, "_censored", parts.censored)
        object.__setattr__(self, "_limits", parts.limits)
        object.__setattr__(self, "_log", parts.log)
        object.__setattr__(self, "_sources", dict(parts.sources))
        object.__setattr__(self, "_frozen", True)

    @classmethod
    def _from_parts(cls, parts: _Parts) -> Survey:
        obj = object.__new__(cls)
        obj._set(parts)
        return obj

    def __getstate__(self) -> dict[str, object]:
        return {name: getattr(self, name) for name in self.__slots__}

    def __setstate__(self, state: dict[str, object]) -> None:
        for name, value in state.items():
            object.__setattr__(self, name, value)

    def __setattr__(self, name: str, value: object) -> None:
        raise AttributeError(f"Survey is read-only; cannot set {name!r}. Build a new Survey "
                             "(or use .subset()) instead.")

    # -- tables ---------------------------------------------------------------------------
    @property
    def community(self) -> pd.DataFrame:
        """Sites x taxa abundances."""
        return self._community

    @property
    def environment(self) -> pd.DataFrame:
        """Sites x environmental variables (float64 and category columns)."""
        return self._environment

    @property
    def locations(self) -> Any:
        """GeoDataFrame of one point per site with a CRS, or None."""
        return self._locations

    @property
    def censored(self) -> pd.DataFrame:
        """Boolean mask like `environment`: True where a value was below a detection limit."""
        return self._censored

    @property
    def detection_limits(self) -> pd.DataFrame:
        """Detection limit of each censored cell (NaN elsewhere), like `environment`."""
        return self._limits

    @property
    def log(self) -> tuple[Decision, ...]:
        """Every decision taken on the input, in order."""
        return self._log

    @property
    def sources(self) -> dict[str, str | None]:
        """File each table was read from (None for tables given as DataFrames or absent)."""
        return dict(self._sources)

    @property
    def sites(self) -> pd.Index:
        """The ordered site IDs shared by every table."""
        return self._community.index

    @property
    def taxa(self) -> pd.Index:
        """The taxon names (community columns)."""
        return self._community.columns

    @property
    def n_sites(self) -> int:
        return int(self._community.shape[0])

    @property
    def n_taxa(self) -> int:
        return int(self._community.shape[1])

    # -- helpers --------------------------------------------------------------------------
    def numeric_environment(self) -> pd.DataFrame:
        """The numeric environmental columns (float64)."""
        return self._environment.select_dtypes("number")

    def factors(self) -> pd.DataFrame:
        """The categorical environmental columns (pandas ``category``)."""
        return self._environment.select_dtypes("category")

    def subset(self, sites: Iterable[object]) -> Survey:
        """A new Survey holding only `sites`, in the order given.

        Taxa that become 0 at every remaining site are kept (the subset is a view of the same
        survey); the log gains one ``"subset"`` record.
        """
        if isinstance(sites, str):
            sites = [sites]
        wanted = [_label(s) for s in sites]
        unknown = [s for s in wanted if s not in set(self.sites)]
        if unknown:
            raise InputError(f"Survey.subset: site(s) {format_items(unknown)} are not in the "
                             f"survey; its sites are {format_items(list(self.sites))}.",
                             sites=[str(s) for s in unknown])
        repeated = sorted({s for s in wanted if wanted.count(s) > 1})
        if repeated:
            raise InputError(f"Survey.subset: site(s) {format_items(repeated)} are repeated.",
                             sites=repeated)
        if len(wanted) < MIN_SITES:
            raise InputError(f"Survey.subset needs at least {MIN_SITES} sites; got "
                             f"{len(wanted)}.")
        index = pd.Index(wanted, name="site", dtype=object)
        dropped = [s for s in self.sites if s not in set(wanted)]
        record = Decision("subset", f"A subset of {len(wanted)} of the {self.n_sites} sites was "
                          f"kept; {len(dropped)} dropped: {format_items(dropped, limit=20)}.",
                          len(dropped), sites=tuple(dropped))
        parts = _Parts(
            community=self._community.loc[index],
            environment=self._environment.loc[index],
            locations=None if self._locations is None else self._locations.loc[index],
            censored=self._censored.loc[index],
            limits=self._limits.loc[index],
            log=(*self._log, record),
            sources=self._sources,
        )
        return Survey._from_parts(parts)

    def describe(self) -> pd.DataFrame:
        """One row per table: its source, sites, columns, kinds of columns and a short note.

        Used by ``gradients check`` to show what would be analysed.
        """
        c = self._community
        values = c.to_numpy()
        zeros = float(np.mean(values == 0)) * 100 if values.size else 0.0
        kind = "whole numbers (counts)" if c.dtypes.eq(np.int64).all() else "decimals"
        rows = [{
            "table": "community", "source": self._sources.get("community") or "DataFrame",
            "sites": self.n_sites, "columns": self.n_taxa, "numeric": self.n_taxa,
            "categorical": 0, "censored": 0,
            "note": f"abundances as {kind}; {zeros:.0f}% zeros; total {values.sum():g}",
        }]
        num = self.numeric_environment()
        fac = self.factors()
        if self._environment.shape[1] or self._sources.get("environment"):
            levels = ", ".join(f"{k} ({fac[k].cat.categories.size} levels)" for k in fac.columns)
            n_cens = int(self._censored.to_numpy().sum())
            note = f"categorical: {levels}" if levels else "all numeric"
            if n_cens:
                cols = [k for k in self._censored.columns if self._censored[k].any()]
                note += f"; censored values in {', '.join(cols)}"
            rows.append({
                "table": "environment",
                "source": self._sources.get("environment") or "DataFrame",
                "sites": self.n_sites, "columns": self._environment.shape[1],
                "numeric": num.shape[1], "categorical": fac.shape[1], "censored": n_cens,
                "note": note,
            })
        if self._locations is not None:
            loc = self._locations
            xmin, ymin, xmax, ymax = loc.total_bounds
            rows.append({
                "table": "locations", "source": self._sources.get("locations") or "DataFrame",
                "sites": len(loc), "columns": 2, "numeric": 2, "categorical": 0, "censored": 0,
                "note": f"points in {loc.crs.to_string()}; x {xmin:g} to {xmax:g}, y {ymin:g} to "
                        f"{ymax:g}",
            })
        return pd.DataFrame(rows).set_index("table")

    def equals(self, other: object) -> bool:
        """True if `other` is a Survey with the same tables (the logs may differ)."""
        if not isinstance(other, Survey):
            return False
        same = (self._community.equals(other._community)
                and self._environment.equals(other._environment)
                and self._censored.equals(other._censored))
        if self._locations is None or other._locations is None:
            return same and self._locations is None and other._locations is None
        return (same and self._locations.crs == other._locations.crs
                and bool(self._locations.geometry.geom_equals_exact(
                    other._locations.geometry, tolerance=1e-9).all()))

    def __repr__(self) -> str:
        env = self._environment
        lines = [f"Survey: {self.n_sites} sites x {self.n_taxa} taxa"]
        if env.shape[1]:
            num, fac = self.numeric_environment().shape[1], self.factors().shape[1]
            lines.append(f"  environment: {env.shape[1]} variables ({num} numeric, "
                         f"{fac} categorical): {format_items(list(env.columns), quote=False)}")
        else:
            lines.append("  environment: none")
        if self._locations is not None:
            lines.append(f"  locations: {len(self._locations)} points in "
                         f"{self._locations.crs.to_string()}")
        else:
            lines.append("  locations: none")
        if self._log:
            lines.append("  decisions:")
            lines.extend(f"    [{i}] {d.detail}" for i, d in enumerate(self._log, start=1))
        return "\n".join(lines)


def read_survey(
    community: str | os.PathLike[str] | pd.DataFrame,
    environment: str | os.PathLike[str] | pd.DataFrame | None = None,
    locations: str | os.PathLike[str] | pd.DataFrame | None = None,
    *,
    site_column: str = "site",
    sheet: str | int | Mapping[str, str | int] | None = None,
    layer: str | int | Mapping[str, str | int] | None = None,
    coordinates: tuple[str, str] | None = None,
    crs: Any = None,
    factors: Sequence[str] | None = None,
    shared_sites_only: bool = False,
    missing: str = "error",
    censored: str = "error",
    empty_sites: str = "error",
    empty_taxa: str = "drop",
    constant: str = "error",
) -> Survey:
    """Read a survey from files (or DataFrames) and validate it.

    Parameters
    ----------
    community, environment, locations : path or DataFrame
        Paths (str or Path) or DataFrames. Tables: CSV, TSV, semicolon- or '|'-separated text
        (delimiter found with :class:`csv.Sniffer`; decimal commas read in files not separated
        by commas), Excel ``.xlsx``. Locations also: GeoPackage ``.gpkg``, GeoJSON, Shapefile,
        or a table with coordinate columns. Text is read as UTF-8 (with or without a byte-order
        mark), UTF-16 with a byte-order mark, and otherwise as Latin-1 with a record in the log.
    site_column : str, default "site"
        The column holding site IDs in every table.
    sheet : str, int or mapping, optional
        Sheet of an ``.xlsx`` file, by name or 0-based index; a mapping such as
        ``{"community": "counts", "environment": "chemistry"}`` chooses per table. Default:
        the first sheet (recorded in the log when there are several).
    layer : str, int or mapping, optional
        Layer of a GeoPackage, as for `sheet`.
    coordinates, crs, factors, shared_sites_only, missing, censored, empty_sites, empty_taxa, \
constant
        As for :class:`Survey`.

    Returns
    -------
    Survey

    Raises
    ------
    gradients.InputError
        For any problem with the files or their content; the message names the file, the sites,
        the columns and the fix.

    Notes
    -----
    The file is checked before its content: it must exist, not be empty, hold what its
    extension says (an ``.xlsx`` that is really CSV text, or a ``.gpkg`` that is not an SQLite
    database, is refused with a message saying what it holds), and decode as text without
    control characters. Then the rules of :class:`Survey` apply, with line (text) or row
    (spreadsheet) numbers in the messages. See ``docs/data.md``.

    Examples
    --------
    >>> from importlib.resources import files
    >>> from gradients.data import read_survey
    >>> demo = files("gradients.data") / "demo"
    >>> s = read_survey(demo / "community.csv", demo / "environment.csv",
    ...                 demo / "locations.gpkg", censored="ros")
    >>> s.n_sites, s.n_taxa
    (60, 40)
    """
    opts = _check_options(site_column, coordinates, crs, factors, shared_sites_only, missing,
                          censored, empty_sites, empty_taxa, constant)
    raws = {"community": _raw(community, "community", sheet=sheet, layer=layer,
                              allow_paths=True)}
    if environment is not None:
        raws["environment"] = _raw(environment, "environment", sheet=sheet, layer=layer,
                                   allow_paths=True)
    if locations is not None:
        raws["locations"] = _raw(locations, "locations", sheet=sheet, layer=layer,
                                 allow_paths=True)
    def pick(option: object, role: str) -> object:
        return option.get(role) if isinstance(option, Mapping) else option

    shared = (_same_table(environment, locations)
              and pick(sheet, "environment") == pick(sheet, "locations")
              and pick(layer, "environment") == pick(layer, "locations"))
    return Survey._from_parts(_build(raws, opts, shared_table=shared))
