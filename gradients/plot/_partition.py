"""Figures of the partition stage: the fractions of a variation partitioning, and maps of
spatial eigenvectors over the sites.

:func:`partition` draws a :class:`~gradients.partition.VariationPartitionResult` as one
horizontal bar from 0 to 1 split into its fractions, with the numbers printed;
:func:`spatial_eigenvector_map` draws spatial eigenvectors (a
:class:`~gradients.partition.SpatialEigenvectorsResult`) as maps of the sites, one panel per
vector, over the river network when one is given.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests: ``_gr:fractions``
(the bar containers of the partition, one per drawn fraction, in drawing order),
``_gr:sites-positive``, ``_gr:sites-negative`` (site marks of a map panel) and ``_gr:network``
(its river lines).

References
----------
.. [1] Borcard, D., Legendre, P. & Drapeau, P. (1992). Partialling out the spatial component
   of ecological variation. Ecology 73: 1045-1055.
.. [2] Dray, S., Legendre, P. & Peres-Neto, P. R. (2006). Spatial modelling: a comprehensive
   framework for principal coordinate analysis of neighbour matrices (PCNM). Ecological
   Modelling 196: 483-493.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure, SubFigure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from .._errors import InputError, format_items
from ._kit import (
    canvas,
    check_figsize,
    figure_canvas,
    format_number,
    format_p,
    place_legend,
    set_title,
    text,
)
from ._style import GRID, HOLLOW, INK, MUTED, PALETTE, SIZES

if TYPE_CHECKING:
    from ..partition import SpatialEigenvectorsResult, VariationPartitionResult

__all__ = ["partition", "spatial_eigenvector_map"]

#: Fractions narrower than this (share of the bar) have their number printed above the bar.
NARROW = 0.06
#: Most panels a map draws by default.
DEFAULT_VECTORS = 4


# --------------------------------------------------------------------------------------------
# the fractions bar


def _fractions_of(result: object) -> tuple[pd.DataFrame, tuple[str, ...]]:
    table = getattr(result, "table", None)
    names = getattr(result, "names", None)
    needed = {"fraction", "kind", "tables", "r2_adjusted", "pvalue", "testable"}
    if not isinstance(table, pd.DataFrame) or not needed <= set(table.columns) or not names:
        raise InputError(
            "`result` must be the result of partition_variation (a VariationPartitionResult); "
            f"got {type(result).__name__}.")
    return table, tuple(names)


def _bar_order(rows: pd.DataFrame, names: tuple[str, ...]) -> pd.DataFrame:
    """The first table alone, its share with the second, the second alone, then the rest."""
    first = names[0]
    second = names[1]
    lead = [first, f"{first} & {second}", second]

    def rank(key: str) -> tuple[int, int]:
        if key in lead:
            return (0, lead.index(key))
        return (1, key.count("&"))

    keys = [rank(k) for k in rows["tables"]]
    return rows.iloc[sorted(range(len(rows)), key=lambda i: (keys[i], i))]


def _style_of(tables: str, names: tuple[str, ...]) -> tuple[str, str | None]:
    """Face colour and hatch of a fraction: a colour per table, shared fractions hatched."""
    parts = tables.split(" & ")
    colour = PALETTE[names.index(parts[0]) % len(PALETTE)]
    if len(parts) == 1:
        return colour, None
    return PALETTE[(len(names) + sum(names.index(p) for p in parts)) % len(PALETTE)], "////"


def partition(
    result: VariationPartitionResult,
    *,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """A variation partitioning as one bar from 0 to 1 split into its fractions.

    Parameters
    ----------
    result : VariationPartitionResult
        The result of :func:`gradients.partition_variation`.
    title : str, optional
        Default "Partition of community variation".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Default (6.6, 2.4).

    Returns
    -------
    matplotlib.axes.Axes
        One horizontal bar (``_gr:fractions``, one container per fraction): with two tables
        X and W, X alone, the share of X and W (hatched: it cannot be credited to either), W
        alone and the unexplained part (white), each with its adjusted R² printed in percent,
        on the bar or above it where the piece is narrow. With three or four tables every
        individual fraction is drawn, the pure ones first. The legend names each fraction with
        its share and, for the testable pure fractions, its p-value.

    Notes
    -----
    Fractions are adjusted R² (Borcard, Legendre & Drapeau 1992 [1]_); a fraction at or below
    zero is not drawn and is listed beside the title, so the drawn pieces may then add up to
    slightly more than 1.

    Examples
    --------
    >>> import gradients as gr
    >>> from gradients import plot
    >>> s = gr.demo_survey()
    >>> d = gr.dissimilarity(s.community, "bray-curtis")
    >>> parts = gr.partition_variation(d, s.environment[["Cu", "sand"]],
    ...                                s.environment[["pH"]], names=["metals", "acidity"],
    ...                                n_resamples=99, rng=1)
    >>> ax = plot.partition(parts)
    """
    table, names = _fractions_of(result)
    size = check_figsize(figsize, (6.6, 2.4))
    pieces = _bar_order(table[table["kind"] == "individual"], names)
    residual = table[table["kind"] == "residual"]
    drawn, negative = [], []
    for row in pieces.itertuples():
        value = float(row.r2_adjusted)
        (drawn if value > 0 else negative).append(row)
    unexplained = float(residual["r2_adjusted"].iloc[0]) if len(residual) else math.nan
    with canvas(ax, size) as ax:
        ax.grid(False)
        ax.spines["left"].set_visible(False)
        ax.set_yticks([])
        left = 0.0
        handles: list[Any] = []
        narrow = 0
        entries = [(r.fraction, float(r.r2_adjusted), r.tables, r.pvalue, bool(r.testable))
                   for r in drawn]
        if math.isfinite(unexplained) and unexplained > 0:
            entries.append(("unexplained", unexplained, "", math.nan, False))
        for name, value, tables, pvalue, testable in entries:
            face, hatch = (HOLLOW, None) if not tables else _style_of(tables, names)
            ax.barh([0], [value], left=left, height=0.5, color=face, edgecolor=INK,
                    linewidth=0.7, hatch=hatch, zorder=2, label="_gr:fractions")
            share = f"{100 * value:.1f} %"
            if value >= NARROW:
                light = face in (HOLLOW, PALETTE[4], PALETTE[5], PALETTE[6]) or hatch
                ax.text(left + value / 2, 0, share, ha="center", va="center",
                        fontsize=SIZES["label"], fontweight="bold", zorder=3,
                        color=INK if light else "white",
                        bbox=({"boxstyle": "round,pad=0.15", "facecolor": "white",
                               "edgecolor": "none", "alpha": 0.85} if hatch else None))
            else:
                ax.text(left + value / 2, 0.3 + 0.14 * (narrow % 2), share, ha="center",
                        va="bottom", fontsize=SIZES["label"], color=INK, zorder=3)
                narrow += 1
            tested = f", {format_p(float(pvalue))}" if testable and pd.notna(pvalue) else ""
            handles.append(Patch(facecolor=face, edgecolor=INK, hatch=hatch,
                                 label=f"{text(name, 48)} ({share}{tested})"))
            left += value
        ax.set_xlim(0, max(1.0, left))
        ax.set_ylim(-0.5, 0.75)
        ax.set_xlabel("Share of community variation (adjusted R²)", parse_math=False)
        notes = []
        if negative:
            notes.append("not drawn (≤ 0): " + ", ".join(
                f"{text(r.fraction, 40)} {format_number(float(r.r2_adjusted))}"
                for r in negative))
        set_title(ax, title, "Partition of community variation", notes)
        place_legend(ax, handles, outside="lower center", ncols=min(len(handles), 2))
    return ax


# --------------------------------------------------------------------------------------------
# maps of spatial eigenvectors


def _xy(locations: object, labels: pd.Index) -> tuple[np.ndarray, Any]:
    """Site coordinates in the order of ``labels`` and the CRS of the locations."""
    import geopandas as gpd

    if not isinstance(locations, gpd.GeoDataFrame | gpd.GeoSeries):
        raise InputError("`locations` must be a GeoDataFrame (or GeoSeries) of site points "
                         f"indexed by site label; got {type(locations).__name__}.")
    missing = [s for s in labels if s not in locations.index]
    if missing:
        raise InputError(f"`locations` has no point for site(s) {format_items(missing)}; give "
                         "the locations of every site of the eigenvectors.", sites=missing)
    geom = locations.geometry.loc[labels]
    if not (geom.geom_type == "Point").all():
        raise InputError("`locations` must hold points (one per site).")
    return np.column_stack([geom.x.to_numpy(), geom.y.to_numpy()]), locations.crs


def _network_lines(network: object, crs: Any) -> list[np.ndarray]:
    import geopandas as gpd
    import shapely

    if not isinstance(network, gpd.GeoDataFrame | gpd.GeoSeries):
        raise InputError("`network` must be a GeoDataFrame (or GeoSeries) of lines; got "
                         f"{type(network).__name__}.")
    if crs is not None and network.crs is not None and network.crs != crs:
        network = network.to_crs(crs)
    parts = shapely.get_parts(np.asarray(network.geometry.to_numpy()))
    lines = parts[shapely.get_type_id(parts) == shapely.GeometryType.LINESTRING]
    return [shapely.get_coordinates(line) for line in lines]


def _axis_units(crs: Any) -> tuple[float, str, str, float]:
    """(divisor, x label, y label, aspect) for drawing in the CRS of the locations."""
    if crs is None:
        return 1.0, "x", "y", 1.0
    if crs.is_geographic:
        return 1.0, "Longitude (°)", "Latitude (°)", math.nan  # aspect set from the latitude
    unit = crs.axis_info[0].unit_name if crs.axis_info else ""
    if unit in ("metre", "meter"):
        return 1000.0, "Easting (km)", "Northing (km)", 1.0
    return 1.0, f"Easting ({unit or 'CRS units'})", f"Northing ({unit or 'CRS units'})", 1.0


def spatial_eigenvector_map(
    eigenvectors: SpatialEigenvectorsResult,
    locations: object,
    *,
    vectors: Sequence[str] | None = None,
    network: object | None = None,
    ncols: int = 2,
    distance_unit: str | None = None,
    title: str | None = None,
    fig: Figure | SubFigure | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure | SubFigure:
    """Maps of spatial eigenvectors: each site drawn where it lies, sized by its value.

    Parameters
    ----------
    eigenvectors : SpatialEigenvectorsResult
        The result of :func:`gradients.spatial_eigenvectors`.
    locations : GeoDataFrame or GeoSeries
        The site points, indexed by site label (every site of the eigenvectors).
    vectors : sequence of str, optional
        The vectors to draw (names of ``eigenvectors.vectors`` columns, e.g. the
        forward-selected ones), one panel each; default the first four (the broadest).
    network : GeoDataFrame or GeoSeries of lines, optional
        River lines drawn faintly under the sites (reprojected to the CRS of `locations`).
    ncols : int, default 2
        Panels per row.
    distance_unit : str, optional
        Unit of the distances the vectors were built from, printed after each vector's scale
        (e.g. "km").
    title : str, optional
        Default "Spatial eigenvectors over the sites".
    fig : matplotlib Figure or SubFigure, optional
        Draw the panels into this (sub)figure; by default a new figure in the house style is
        made.
    figsize : (float, float), optional
        Default 3.1 in per panel across, 2.9 in per row.

    Returns
    -------
    matplotlib.figure.Figure or SubFigure
        One map per vector, in the coordinates of `locations` (km for a projected CRS in
        metres; longitude and latitude drawn at the local scale otherwise): a filled blue
        circle for a positive value (``_gr:sites-positive``), a vermillion one for a negative
        value (``_gr:sites-negative``), its area proportional to the absolute value, so
        patches of like colour are the pattern the vector describes. Each panel's title gives
        the vector's Moran's I and its scale (the typical width of its patches).

    Examples
    --------
    >>> import gradients as gr
    >>> from gradients import plot
    >>> s = gr.demo_survey()
    >>> sev = gr.spatial_eigenvectors(s)
    >>> fig = plot.spatial_eigenvector_map(sev, s.locations)
    """
    values = getattr(eigenvectors, "vectors", None)
    table = getattr(eigenvectors, "table", None)
    if not isinstance(values, pd.DataFrame) or not isinstance(table, pd.DataFrame):
        raise InputError("`eigenvectors` must be the result of spatial_eigenvectors (a "
                         f"SpatialEigenvectorsResult); got {type(eigenvectors).__name__}.")
    if vectors is None:
        chosen = list(values.columns[:DEFAULT_VECTORS])
    else:
        if isinstance(vectors, str):
            vectors = [vectors]
        chosen = list(vectors)
        unknown = [v for v in chosen if v not in values.columns]
        if unknown:
            raise InputError(f"`vectors` names {format_items(unknown)}, which are not among the "
                             f"eigenvectors ({format_items(values.columns, limit=12)}).")
    if not chosen:
        raise InputError("There is no spatial eigenvector to draw (none has positive spatial "
                         "autocorrelation, or `vectors` is empty).")
    if not isinstance(ncols, int | np.integer) or isinstance(ncols, bool) or ncols < 1:
        raise InputError(f"`ncols` must be a positive integer; got {ncols!r}.")
    xy, crs = _xy(locations, values.index)
    lines = _network_lines(network, crs) if network is not None else []
    divisor, xlabel, ylabel, aspect = _axis_units(crs)
    if math.isnan(aspect):
        aspect = 1.0 / max(math.cos(math.radians(float(np.mean(xy[:, 1])))), 1e-6)
    xy = xy / divisor
    n = len(chosen)
    nc = min(int(ncols), n)
    nr = math.ceil(n / nc)
    size = check_figsize(figsize, (0.5 + 3.1 * nc, 0.9 + 2.9 * nr))
    top = float(np.max(np.abs(values[chosen].to_numpy()))) or 1.0
    scale = getattr(eigenvectors, "metric", None)
    with figure_canvas(fig, size) as fig:
        axs = fig.subplots(nr, nc, squeeze=False, sharex=True, sharey=True)
        for i, ax in enumerate(axs.flat):
            if i >= n:
                ax.set_visible(False)
                continue
            name = chosen[i]
            v = values[name].to_numpy(dtype=float)
            if lines:
                ax.add_collection(LineCollection([ln / divisor for ln in lines], colors=GRID,
                                                 linewidths=1.1, zorder=1, label="_gr:network"))
            area = 4.0 + 70.0 * np.abs(v) / top
            for mask, colour, tag in ((v >= 0, PALETTE[0], "positive"),
                                      (v < 0, PALETTE[1], "negative")):
                ax.scatter(xy[mask, 0], xy[mask, 1], s=area[mask], color=colour,
                           edgecolor="white", linewidth=0.4, alpha=0.9, zorder=3,
                           label=f"_gr:sites-{tag}")
            ax.set_aspect(aspect, adjustable="box")
            ax.grid(False)
            ax.tick_params(labelsize=6.8)
            info = []
            if name in table.index:
                row = table.loc[name]
                if "moran_i" in row and pd.notna(row["moran_i"]):
                    info.append(f"I = {format_number(float(row['moran_i']))}")
                if "scale" in row and pd.notna(row["scale"]):
                    unit = f" {text(distance_unit, 12)}" if distance_unit else ""
                    info.append(f"scale {format_number(float(row['scale']))}{unit}")
            ax.set_title(text(name, 24), loc="left", fontsize=8.5, parse_math=False)
            ax.set_title(", ".join(info), loc="right", fontsize=6.8, color=MUTED,
                         fontweight="normal")
            if i % nc == 0:
                ax.set_ylabel(ylabel, parse_math=False)
            if i // nc == nr - 1:
                ax.set_xlabel(xlabel, parse_math=False)
        handles = [Line2D([], [], ls="none", marker="o", color=PALETTE[0], label="above 0"),
                   Line2D([], [], ls="none", marker="o", color=PALETTE[1], label="below 0")]
        if lines:
            handles.append(Line2D([], [], color=GRID, lw=1.1, label="river network"))
        legend = fig.legend(handles=handles, loc="outside lower center", ncols=len(handles),
                            title="value at the site (area: size)")
        for t in legend.get_texts():
            t.set_parse_math(False)
        head = text(title, 90) if title is not None else "Spatial eigenvectors over the sites"
        fig.suptitle(head + (f" ({scale} distances)" if scale and title is None else ""),
                     x=0.012, ha="left", fontsize=10.0, fontweight="bold", color=INK,
                     parse_math=False)
    return fig
