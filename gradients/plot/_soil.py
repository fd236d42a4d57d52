"""Figures of soil and water inputs: the texture triangle and the map of guideline quotients.

The triangle's class boundaries are not traced from any drawing: each class region is cut out
of the triangle by the Soil Survey Manual's own inequalities (the rows of
:data:`gradients.data._texture.USDA_RULES`, the same rows the classifier evaluates), one
half-plane at a time.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests: ``_gr:frame`` (the
triangle), ``_gr:class:<name>`` (one outline per branch of a class), ``_gr:sites`` (site
points; one collection per class or group), ``_gr:quotients`` (map points, one collection per
exceedance class).

References
----------
.. [1] Soil Science Division Staff (2017). *Soil Survey Manual*. USDA Handbook 18. Government
   Printing Office, Washington, D.C.
.. [2] MacDonald, D. D., Ingersoll, C. G. & Berger, T. A. (2000). Development and evaluation of
   consensus-based sediment quality guidelines for freshwater ecosystems. *Archives of
   Environmental Contamination and Toxicology* 39, 20-31.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.colors import Normalize
from matplotlib.lines import Line2D

from .._errors import InputError, format_items
from ..data._compositions import DEFAULT_TOLERANCE
from ..data._texture import TEXTURE_SYSTEMS, Constraint, texture_class
from ._kit import (
    canvas,
    check_figsize,
    format_number,
    made_here,
    place_legend,
    set_title,
    text,
)
from ._style import FADED, GRID, INK, MUTED, SEQUENTIAL_CMAP, SIZES, group_style

if TYPE_CHECKING:
    from ..data import GuidelineQuotientsResult

__all__ = ["quotient_map", "ternary_xy", "texture_polygons", "texture_triangle"]

_H = math.sqrt(3.0) / 2.0


def ternary_xy(sand: np.ndarray, silt: np.ndarray, clay: np.ndarray) -> tuple[np.ndarray,
                                                                               np.ndarray]:
    """Plot coordinates of compositions (percentages summing to 100).

    Sand 100 % is the lower left corner (0, 0), silt 100 % the lower right (100, 0) and clay
    100 % the top (50, 86.6): x = silt + clay / 2, y = clay * sqrt(3) / 2.
    """
    silt = np.asarray(silt, dtype=float)
    clay = np.asarray(clay, dtype=float)
    return silt + clay / 2.0, clay * _H


def _half_plane(constraint: Constraint) -> tuple[float, float, float, int]:
    """``constraint`` in plot coordinates: ``(gx, gy, g0, side)`` with the kept side
    ``side * (gx x + gy y + g0) >= 0``."""
    a_s, a_z, a_c, op, bound = constraint
    # sand = 100 - x - y/sqrt(3), silt = x - y/sqrt(3), clay = 2y/sqrt(3)
    r3 = math.sqrt(3.0)
    gx = a_z - a_s
    gy = (-a_s - a_z + 2 * a_c) / r3
    g0 = 100.0 * a_s - bound
    return gx, gy, g0, (1 if op in (">", ">=") else -1)


def _clip(polygon: list[tuple[float, float]], constraint: Constraint) -> list[tuple[float, float]]:
    """Sutherland-Hodgman: the part of a convex ``polygon`` on the kept side of a half-plane."""
    gx, gy, g0, side = _half_plane(constraint)
    f = [side * (gx * x + gy * y + g0) for x, y in polygon]
    out: list[tuple[float, float]] = []
    n = len(polygon)
    for i in range(n):
        p, q = polygon[i], polygon[(i + 1) % n]
        fp, fq = f[i], f[(i + 1) % n]
        if fp >= 0:
            out.append(p)
        if (fp >= 0) != (fq >= 0):
            t = fp / (fp - fq)
            out.append((p[0] + t * (q[0] - p[0]), p[1] + t * (q[1] - p[1])))
    return out


def texture_polygons(system: str = "usda") -> dict[str, list[np.ndarray]]:
    """Class regions of a texture system in plot coordinates: class -> polygons (one per
    branch of its definition), each an ``(m, 2)`` array of vertices.

    Each polygon is the whole triangle cut by every inequality of one branch of the class.
    """
    if system not in TEXTURE_SYSTEMS:
        raise InputError(f"`system` must be one of {format_items(TEXTURE_SYSTEMS)}; got "
                         f"{system!r}.")
    rules, _ = TEXTURE_SYSTEMS[system]
    triangle = [(0.0, 0.0), (100.0, 0.0), (50.0, 100.0 * _H)]
    out: dict[str, list[np.ndarray]] = {}
    for name, branches in rules.items():
        polys = []
        for branch in branches:
            poly = list(triangle)
            for constraint in branch:
                poly = _clip(poly, constraint)
                if len(poly) < 3:
                    break
            if len(poly) >= 3:
                polys.append(np.array(poly))
        out[name] = polys
    return out


def _area(poly: np.ndarray) -> float:
    x, y = poly[:, 0], poly[:, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def _centroid(poly: np.ndarray) -> tuple[float, float]:
    x, y = poly[:, 0], poly[:, 1]
    cross = x * np.roll(y, -1) - np.roll(x, -1) * y
    a = cross.sum() / 2.0
    return (float(((x + np.roll(x, -1)) * cross).sum() / (6 * a)),
            float(((y + np.roll(y, -1)) * cross).sum() / (6 * a)))


def _draw_frame(ax: Axes) -> None:
    corners = np.array([(0.0, 0.0), (100.0, 0.0), (50.0, 100.0 * _H), (0.0, 0.0)])
    ax.plot(corners[:, 0], corners[:, 1], color=INK, lw=SIZES["thin"] + 0.3, zorder=3,
            label="_gr:frame", solid_joinstyle="miter")
    tick = 1.8
    for v in range(0, 101, 20):
        # clay on the left edge (rising upwards), silt on the right edge (rising downwards),
        # sand along the base (rising leftwards), as in the Manual's triangle
        cx, cy = ternary_xy(np.array([100.0 - v]), np.array([0.0]), np.array([v]))
        ax.text(cx[0] - tick, cy[0], f"{v}", ha="right", va="center", color=MUTED,
                fontsize=SIZES["label"], parse_math=False)
        sx, sy = ternary_xy(np.array([0.0]), np.array([v]), np.array([100.0 - v]))
        ax.text(sx[0] + tick, sy[0], f"{v}", ha="left", va="center", color=MUTED,
                fontsize=SIZES["label"], parse_math=False)
        bx, by = ternary_xy(np.array([v]), np.array([100.0 - v]), np.array([0.0]))
        ax.text(bx[0], by[0] - tick, f"{v}", ha="center", va="top", color=MUTED,
                fontsize=SIZES["label"], parse_math=False)
    ax.text(16, 48, "Clay (%)", rotation=60, ha="center", va="center", color=INK,
            fontsize=8.5, parse_math=False)
    ax.text(84, 48, "Silt (%)", rotation=-60, ha="center", va="center", color=INK,
            fontsize=8.5, parse_math=False)
    ax.text(50, -9, "Sand (%)", ha="center", va="center", color=INK, fontsize=8.5,
            parse_math=False)


def _draw_classes(ax: Axes, system: str, labels: bool) -> None:
    for name, polys in texture_polygons(system).items():
        for poly in polys:
            closed = np.vstack([poly, poly[:1]])
            ax.plot(closed[:, 0], closed[:, 1], color=FADED, lw=SIZES["thin"], zorder=2,
                    label=f"_gr:class:{name}")
        if labels and polys:
            largest = max(polys, key=_area)
            cx, cy = _centroid(largest)
            ax.text(cx, cy, name.replace(" ", "\n") if _area(largest) < 700 else name,
                    ha="center", va="center", color=MUTED, fontsize=6.3, zorder=2,
                    parse_math=False, linespacing=0.95)


def _legend_title(ax: Axes, title: str) -> None:
    """Title the legend :func:`place_legend` just drew (the figure's when the axes are ours)."""
    legend = ax.get_legend()
    if legend is None and made_here(ax) and ax.figure.legends:
        legend = ax.figure.legends[-1]
    if legend is not None:
        legend.set_title(title)


def _composition(composition: object, parts: tuple[str, str, str]) -> pd.DataFrame:
    if not isinstance(composition, pd.DataFrame):
        raise InputError(f"`composition` must be a DataFrame with columns "
                         f"{format_items(parts)} (percentages, one row per site); got "
                         f"{type(composition).__name__}.")
    if not (isinstance(parts, tuple | list) and len(parts) == 3
            and all(isinstance(p, str) for p in parts)):
        raise InputError(f"`parts` must name the sand, silt and clay columns, in this order; "
                         f"got {parts!r}.")
    absent = [p for p in parts if p not in composition.columns]
    if absent:
        raise InputError(f"`composition` has no column(s) {format_items(absent)}; its columns are "
                         f"{format_items(map(str, composition.columns))}. Pass parts=(sand, "
                         "silt, clay) with the names used in the table.", columns=absent)
    return composition.loc[:, list(parts)]


def texture_triangle(
    composition: pd.DataFrame,
    *,
    parts: tuple[str, str, str] = ("sand", "silt", "clay"),
    color: str | pd.Series | None = None,
    system: str = "usda",
    renormalise: bool = False,
    tolerance: float = DEFAULT_TOLERANCE,
    class_labels: bool = True,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Sites on the soil texture triangle, over the class boundaries of the Soil Survey Manual.

    Parameters
    ----------
    composition : DataFrame
        One row per site (labelled), with the sand, silt and clay percentages.
    parts : (str, str, str), default ("sand", "silt", "clay")
        The columns holding sand, silt and clay, in this order.
    color : str or Series, optional
        What colours the sites: by default their texture class (colour and marker shape per
        class); a column of `composition` or a Series labelled by site: numbers on the
        sequential colour map with a colour bar, categories as groups.
    system : {"usda"}, default "usda"
        The classification whose boundaries are drawn.
    renormalise, tolerance
        As for :func:`gradients.texture_class`: sums more than `tolerance` from 100 are an
        error unless `renormalise`; sites are placed after closure to 100.
    class_labels : bool, default True
        Print each class name inside its region.
    title : str, optional
        Default "Soil texture".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes (their rectangular frame is switched off); by default a new figure
        in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (6.4, 5.0).

    Returns
    -------
    matplotlib.axes.Axes
        The triangle (``_gr:frame``) with 20 % ticks on each side, one outline per class region
        (``_gr:class:<name>``), and the sites (``_gr:sites``).

    Notes
    -----
    Each class region is the triangle cut by the class's inequalities [1]_ (the rows of
    ``USDA_RULES``) with Sutherland-Hodgman clipping, one half-plane at a time; a class defined
    by two sets of inequalities (sandy loam, silt loam) is drawn as two regions.

    References
    ----------
    .. [1] Soil Science Division Staff (2017). *Soil Survey Manual*. USDA Handbook 18.
    """
    size = check_figsize(figsize, (6.4, 5.0))
    table = _composition(composition, tuple(parts))  # type: ignore[arg-type]
    classes = texture_class(table.iloc[:, 0], table.iloc[:, 1], table.iloc[:, 2], system=system,
                            renormalise=renormalise, tolerance=tolerance)
    values = table.to_numpy(dtype=float)
    keep = ~np.isnan(values).any(axis=1)
    closed = values[keep] * (100.0 / values[keep].sum(axis=1))[:, None]
    x, y = ternary_xy(closed[:, 0], closed[:, 1], closed[:, 2])
    shown = table.index[keep]
    with canvas(ax, size) as axes:
        axes.set_axis_off()
        axes.set_aspect("equal")
        axes.set_xlim(-12, 112)
        axes.set_ylim(-14, 100 * _H + 4)
        _draw_frame(axes)
        _draw_classes(axes, system, class_labels)
        handles: list[Any] = []
        if color is None:
            groups = classes[keep].astype(str)
            order = [c for c in classes.cat.categories if c in set(groups)]
            legend_title = "Texture class"
        else:
            values_c = color if isinstance(color, pd.Series) else None
            if isinstance(color, str):
                if color not in composition.columns:
                    raise InputError(f"`color` names {color!r}, which is not a column of "
                                     "`composition`; pass a Series labelled by site instead.",
                                     columns=[color])
                values_c = composition[color]
            if values_c is None:
                raise InputError(f"`color` must be a column name or a Series; got "
                                 f"{type(color).__name__}.")
            absent = [s for s in shown if s not in values_c.index]
            if absent:
                raise InputError(f"`color` has no value for site(s) {format_items(absent)}.",
                                 sites=absent)
            values_c = values_c.loc[shown]
            legend_title = text(values_c.name if values_c.name is not None else "value")
            if pd.api.types.is_numeric_dtype(values_c) and not pd.api.types.is_bool_dtype(
                    values_c):
                v = values_c.to_numpy(dtype=float)
                norm = Normalize(np.nanmin(v), np.nanmax(v) if np.nanmax(v) > np.nanmin(v)
                                 else np.nanmin(v) + 1)
                art = axes.scatter(x, y, c=v, cmap=SEQUENTIAL_CMAP, norm=norm,
                                   s=SIZES["site"] + 8, edgecolors=INK, linewidths=0.4,
                                   zorder=4, label="_gr:sites")
                bar = axes.figure.colorbar(art, ax=axes, shrink=0.7, aspect=24, pad=0.01)
                bar.set_label(legend_title, parse_math=False)
                bar.outline.set_visible(False)
                bar.ax.tick_params(length=2.5, color=MUTED)
                set_title(axes, title, "Soil texture", [f"{len(x)} sites"])
                return axes
            groups = values_c.astype(str).to_numpy()
            order = list(dict.fromkeys(sorted(set(groups))))
        groups = np.asarray(groups)
        for i, name in enumerate(order):
            colour, marker = group_style(i)
            m = groups == name
            axes.scatter(x[m], y[m], s=SIZES["site"] + 8, color=colour, marker=marker,
                         edgecolors="white", linewidths=0.5, zorder=4, label="_gr:sites")
            handles.append(Line2D([], [], linestyle="none", marker=marker, color=colour,
                                  markeredgecolor="white", markersize=6, label=text(name)))
        set_title(axes, title, "Soil texture", [f"{len(x)} sites"])
        if handles:
            place_legend(axes, handles, outside="right upper", inside="upper right")
            _legend_title(axes, legend_title)
    return axes


# --------------------------------------------------------------------------------------------
# map of guideline quotients

#: Colours of the exceedance classes, from none to several variables above their value.
_EXCEEDANCE_INK = ("#9FB8C8", "#E69F00", "#D55E00")
_EXCEEDANCE_MARKERS = ("o", "s", "^")


def _projected(locations: object) -> Any:
    import geopandas as gpd

    if not isinstance(locations, gpd.GeoDataFrame):
        raise InputError("`locations` must be a GeoDataFrame of site points (Survey.locations); "
                         f"got {type(locations).__name__}.")
    if locations.crs is None:
        raise InputError("`locations` has no CRS; set one with .set_crs(...) first.")
    if locations.crs.is_geographic:
        return locations.to_crs(locations.estimate_utm_crs())
    return locations


def quotient_map(
    result: GuidelineQuotientsResult,
    locations: Any,
    *,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Sites on a map, marked by how many variables exceed their screening value.

    Parameters
    ----------
    result : GuidelineQuotientsResult
        The result of :func:`gradients.guideline_quotients`; its ``table`` gives each site's
        ``mean_quotient`` and ``exceedance`` class.
    locations : GeoDataFrame
        Site points (``Survey.locations``), matched to the result by site label. Longitude and
        latitude are projected to their UTM zone (``estimate_utm_crs``) so that distances on
        the map are true; projected locations are drawn as they are.
    title : str, optional
        Default "Mean quotient (<kind> values)".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (6.0, 6.4).

    Returns
    -------
    matplotlib.axes.Axes
        One collection per exceedance class (``_gr:quotients``), coloured and shaped by class
        with a legend in words; point area grows with the mean quotient; kilometre axes.

    Notes
    -----
    Screening values are not site-specific criteria: the map shows where measured values stand
    against a screening table, not whether a site is contaminated. Decisions rest with the local
    regulator and licensed professionals.
    """
    size = check_figsize(figsize, (6.0, 6.4))
    table = getattr(result, "table", None)
    classes = getattr(result, "exceedance_classes", None)
    if not isinstance(table, pd.DataFrame) or classes is None:
        raise InputError("`result` must be the result of guideline_quotients(); got "
                         f"{type(result).__name__}.")
    loc = _projected(locations)
    labels = [str(i) for i in loc.index]
    absent = [s for s in table.index if str(s) not in set(labels)]
    if absent:
        raise InputError(f"`locations` has no point for site(s) {format_items(absent)}.",
                         sites=absent)
    loc.index = pd.Index(labels)
    pts = loc.loc[[str(s) for s in table.index]].geometry
    x = pts.x.to_numpy() / 1000.0
    y = pts.y.to_numpy() / 1000.0
    mq = table["mean_quotient"].to_numpy(dtype=float)
    finite = np.isfinite(mq)
    top = float(np.nanmax(mq)) if finite.any() else 1.0
    area = SIZES["site"] * (0.6 + 2.4 * np.sqrt(np.clip(np.nan_to_num(mq), 0, None)
                                               / (top if top > 0 else 1.0)))
    with canvas(ax, size) as axes:
        axes.set_aspect("equal", adjustable="datalim")
        handles = []
        for i, name in enumerate(classes):
            m = (table["exceedance"] == name).to_numpy()
            colour = _EXCEEDANCE_INK[min(i, len(_EXCEEDANCE_INK) - 1)]
            marker = _EXCEEDANCE_MARKERS[min(i, len(_EXCEEDANCE_MARKERS) - 1)]
            axes.scatter(x[m], y[m], s=area[m], color=colour, marker=marker,
                         edgecolors=INK, linewidths=0.4, zorder=3, label="_gr:quotients")
            handles.append(Line2D([], [], linestyle="none", marker=marker, color=colour,
                                  markeredgecolor=INK, markeredgewidth=0.4, markersize=6,
                                  label=f"{name} ({int(m.sum())})"))
        axes.set_xlabel("Easting (km)")
        axes.set_ylabel("Northing (km)")
        axes.grid(True, color=GRID)
        kind = getattr(result, "kind", "screening")
        set_title(axes, title, f"Mean quotient ({text(kind)} values)",
                  ["screening values only"])
        place_legend(axes, handles, outside="lower center", inside="best")
        span = (f" ({format_number(float(np.nanmin(mq)))} to {format_number(top)})"
                if finite.any() else "")
        _legend_title(axes, f"Point size: mean quotient{span}")
    return axes
