"""The layers of an ordination figure: sites, taxa, fitted arrows and class centroids.

Each layer is drawn by its own small function, usable on its own axes or on top of another
layer: :func:`sites`, :func:`taxa`, :func:`arrows`, :func:`centroids`, with :func:`legend` for
the legend of whatever was drawn. :func:`gradients.plot.biplot` composes them into the figure
of the report.

The artists drawn carry labels starting with ``_gr:`` (hidden from legends), so programs and
tests can find them: ``_gr:sites``, ``_gr:taxa``, ``_gr:arrow`` (significant),
``_gr:arrow-faded`` (not significant), ``_gr:centroids``.

References
----------
.. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier,
   Amsterdam. (Biplots, ch. 9.)
.. [2] Kantvilas, G. & Minchin, P. R. (1989). An analysis of epiphytic lichen communities in
   Tasmania's cool temperate rainforest. Vegetatio 84, 99-112. (Fitted vectors.)
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrowPatch

from .._errors import InputError, format_items
from ._kit import (
    RASTER_THRESHOLD,
    HasScores,
    axis_title,
    canvas,
    check_alpha,
    check_axes,
    check_figsize,
    frame,
    place_legend,
    remember,
    remembered,
    scores_of,
    significant,
    text,
)
from ._style import FADED, HOLLOW, INK, MUTED, PALETTE, SIZES, group_style

if TYPE_CHECKING:
    from ..fitting import ClassCentroidsResult, GradientArrowsResult

__all__ = ["arrows", "centroids", "legend", "sites", "taxa"]

#: Default size of an ordination figure, inches.
BIPLOT_SIZE = (6.6, 5.0)


# --------------------------------------------------------------------------------------------
# reading the inputs


def _site_table(ordination: object, a1: str, a2: str) -> pd.DataFrame:
    return frame(scores_of(ordination), "scores", [a1, a2], finite=[a1, a2])


def _explained(ordination: object, a1: str, a2: str) -> tuple[float, float] | None:
    """Share of variation of the two plotted axes, when the ordination reports it by axis."""
    prop = getattr(ordination, "proportion_explained", None)
    if isinstance(prop, pd.Series) and a1 in prop.index and a2 in prop.index:
        return float(prop[a1]), float(prop[a2])
    return None


def _stress(ordination: object) -> float | None:
    value = getattr(ordination, "stress", None)
    if isinstance(value, int | float | np.floating) and math.isfinite(float(value)):
        return float(value)
    return None


def _groups(groups: object, sc: pd.DataFrame) -> pd.Series | None:
    if groups is None:
        return None
    if not isinstance(groups, pd.Series):
        raise InputError(
            f"`groups` must be a pandas Series indexed by site; got {type(groups).__name__}."
        )
    absent = [s for s in sc.index if s not in groups.index]
    if absent:
        raise InputError(
            f"`groups` has no group for {len(absent)} site(s) of `scores`: "
            f"{format_items(absent)}. Give every site a group (missing values are allowed "
            "and drawn as 'no group').",
            sites=absent,
        )
    if not groups.index.is_unique:
        dup = list(groups.index[groups.index.duplicated()].unique())
        raise InputError(
            f"`groups` lists site(s) {format_items(dup)} more than once; keep one row each.",
            sites=dup,
        )
    return groups.reindex(sc.index)


def _taxon_table(scores: object, a1: str, a2: str) -> pd.DataFrame:
    return frame(scores, "taxa", [a1, a2], finite=[a1, a2], min_rows=0)


def _centroid_table(factors: object, a1: str, a2: str) -> pd.DataFrame:
    table = getattr(factors, "centroids", None)
    if not isinstance(table, pd.DataFrame):
        raise InputError(
            "`factors` must be the result of fit_factors() (anything with a `.centroids` "
            f"table); got {type(factors).__name__}."
        )
    return frame(table, "centroids", ["factor", "level", a1, a2], finite=[a1, a2], min_rows=0)


def _arrow_tips(
    vectors: object, scale: object, a1: str, a2: str, pvalue: str | None, alpha: float
) -> tuple[np.ndarray, list[object], np.ndarray | None, float]:
    """Tips (as ``vectors.arrows(scale)`` gives them), names, significance and multiplier."""
    table = getattr(vectors, "table", None)
    if not callable(getattr(vectors, "arrows", None)) or not isinstance(table, pd.DataFrame):
        raise InputError(
            "`vectors` must be the result of fit_vectors() (anything with an `.arrows()` method "
            f"and a `.table`); got {type(vectors).__name__}."
        )
    tips = vectors.arrows(scale)  # type: ignore[attr-defined]
    missing = [a for a in (a1, a2) if a not in tips.columns]
    if missing:
        have = [c for c in tips.columns if c != "length"]
        raise InputError(
            f"The vectors were fitted on axes {format_items(have)}, not on "
            f"{format_items(missing)}; plot the axes they were fitted on or fit them again.",
            columns=missing,
        )
    sig = None
    if pvalue is not None:
        if pvalue not in table.columns:
            raise InputError(
                f"`pvalue` names {pvalue!r}, which the vector table does not have; it has "
                f"{format_items(map(str, table.columns))}.",
                columns=[pvalue],
            )
        sig = significant(table[pvalue].reindex(tips.index), alpha)
    xy = tips[[a1, a2]].to_numpy(dtype=float)
    return xy, list(tips.index), sig, float(tips.attrs.get("multiplier", 1.0))


# --------------------------------------------------------------------------------------------
# drawing one layer (each returns its legend entries)


def _group_levels(grp: pd.Series) -> list[Any]:
    present = grp[grp.notna()]
    if isinstance(grp.dtype, pd.CategoricalDtype):
        return [c for c in grp.cat.categories if bool((present == c).any())]
    levels = list(dict.fromkeys(present.tolist()))
    if all(isinstance(v, int | float | np.number) for v in levels):
        levels = sorted(levels)
    return levels


def _draw_sites(ax: Axes, sc: pd.DataFrame, a1: str, a2: str, grp: pd.Series | None,
                labels: bool) -> list[Any]:
    x = sc[a1].to_numpy()
    y = sc[a2].to_numpy()
    s_site = SIZES["site_dense"] if len(sc) > 300 else SIZES["site"]
    raster = len(sc) > RASTER_THRESHOLD
    handles: list[Any] = []
    if grp is None:
        ax.scatter(x, y, s=s_site, marker="o", facecolor=PALETTE[0], edgecolor="white",
                   linewidth=0.5, zorder=3, label="_gr:sites", rasterized=raster)
    else:
        missing = grp.isna().to_numpy()
        for i, level in enumerate(_group_levels(grp)):
            mask = (grp == level).fillna(False).to_numpy(dtype=bool) & ~missing
            colour, marker = group_style(i)
            ax.scatter(x[mask], y[mask], s=s_site, marker=marker, facecolor=colour,
                       edgecolor="white", linewidth=0.5, zorder=3, label="_gr:sites",
                       rasterized=raster)
            handles.append(Line2D([], [], ls="none", marker=marker, color=colour,
                                  markeredgecolor="white", markersize=6, label=text(level)))
        if missing.any():
            ax.scatter(x[missing], y[missing], s=s_site, marker="o", facecolor=HOLLOW,
                       edgecolor=MUTED, linewidth=0.8, zorder=3, label="_gr:sites")
            handles.append(Line2D([], [], ls="none", marker="o", markerfacecolor=HOLLOW,
                                  markeredgecolor=MUTED, markersize=6, label="no group"))
    if labels:
        for lab, xi, yi in zip(sc.index, x, y, strict=True):
            ax.annotate(text(lab, 24), (xi, yi), xytext=(3, 3), textcoords="offset points",
                        fontsize=6.0, color=MUTED, zorder=4, parse_math=False)
    return handles


def _draw_taxa(ax: Axes, tax: pd.DataFrame, a1: str, a2: str, labels: bool | None) -> list[Any]:
    if not len(tax):
        return []
    tx, ty = tax[a1].to_numpy(), tax[a2].to_numpy()
    ax.scatter(tx, ty, s=SIZES["taxon"], marker="+", color=MUTED, linewidth=0.8, zorder=2.5,
               label="_gr:taxa")
    if labels if labels is not None else len(tax) <= 30:
        for lab, xi, yi in zip(tax.index, tx, ty, strict=True):
            ax.annotate(text(lab, 28), (xi, yi), xytext=(2, -2), textcoords="offset points",
                        fontsize=6.0, color=MUTED, style="italic", va="top", zorder=2.5,
                        parse_math=False)
    return [Line2D([], [], ls="none", marker="+", color=MUTED, markersize=6, label="taxa")]


def _tip_groups(tips: np.ndarray, sig: np.ndarray, *, share: float = 0.12) -> list[list[int]]:
    """Arrows whose tips lie within ``share`` of the longest arrow of each other, same
    significance, grouped (single linkage), in input order."""
    n = len(tips)
    if n == 0:
        return []
    reach = share * max(float(np.max(np.hypot(tips[:, 0], tips[:, 1]))), 1e-300)
    group = list(range(n))

    def root(i: int) -> int:
        while group[i] != i:
            group[i] = group[group[i]]
            i = group[i]
        return i

    for i in range(n):
        for j in range(i + 1, n):
            if bool(sig[i]) == bool(sig[j]) and math.hypot(*(tips[i] - tips[j])) <= reach:
                group[root(j)] = root(i)
    out: dict[int, list[int]] = {}
    for i in range(n):
        out.setdefault(root(i), []).append(i)
    return list(out.values())


def _draw_arrows(ax: Axes, tips: np.ndarray, names: Sequence[object], sig: np.ndarray | None,
                 alpha: float) -> list[Any]:
    if not len(tips):
        return []
    ok_all = sig if sig is not None else np.ones(len(tips), dtype=bool)
    for (tx, ty), ok in zip(tips, ok_all, strict=True):
        ax.add_patch(FancyArrowPatch(
            (0.0, 0.0), (tx, ty),
            arrowstyle="-|>,head_length=5,head_width=2.6" if ok
            else "->,head_length=5,head_width=2.6",
            linestyle="-" if ok else (0, (3.0, 2.0)), linewidth=SIZES["arrow_width"],
            color=INK if ok else FADED, shrinkA=0, shrinkB=0, mutation_scale=1.0,
            zorder=5 if ok else 4.5, label="_gr:arrow" if ok else "_gr:arrow-faded"))
    # one label per group of arrows whose tips nearly coincide (strongly correlated
    # variables), names stacked, so that labels do not print over each other
    for members in _tip_groups(tips, ok_all):
        lead = max(members, key=lambda i: math.hypot(*tips[i]))
        tx, ty = tips[lead]
        ok = bool(ok_all[lead])
        norm = math.hypot(tx, ty) or 1.0
        ux, uy = tx / norm, ty / norm
        ax.annotate("\n".join(text(names[i], 28) for i in members), (tx, ty),
                    xytext=(5 * ux, 5 * uy), textcoords="offset points",
                    ha="left" if ux > 0.25 else "right" if ux < -0.25 else "center",
                    va="bottom" if uy > 0.25 else "top" if uy < -0.25 else "center",
                    fontsize=SIZES["label"], color=INK if ok else MUTED,
                    fontweight="bold" if ok else "normal", zorder=6, parse_math=False)
    # arrows are patches: extend the data limits by hand so every tip and label fits
    ax.update_datalim(np.vstack([tips * 1.12, [[0.0, 0.0]]]))
    if sig is None:
        return [Line2D([], [], color=INK, lw=SIZES["arrow_width"], label="vector")]
    return [
        Line2D([], [], color=INK, lw=SIZES["arrow_width"], label=f"vector, p ≤ {alpha:g}"),
        Line2D([], [], color=FADED, lw=SIZES["arrow_width"], ls=(0, (3.0, 2.0)),
               label=f"vector, p > {alpha:g}"),
    ]


def _draw_centroids(ax: Axes, cen: pd.DataFrame, a1: str, a2: str) -> list[Any]:
    if not len(cen):
        return []
    several = cen["factor"].nunique(dropna=False) > 1
    cx, cy = cen[a1].to_numpy(), cen[a2].to_numpy()
    ax.scatter(cx, cy, s=SIZES["centroid"], marker="P", facecolor=INK, edgecolor="white",
               linewidth=0.8, zorder=6, label="_gr:centroids")
    for (_, row), xi, yi in zip(cen.iterrows(), cx, cy, strict=True):
        label = (f"{text(row['factor'], 18)}: {text(row['level'], 22)}" if several
                 else text(row["level"], 28))
        ax.annotate(label, (xi, yi), xytext=(5, -5), textcoords="offset points",
                    fontsize=SIZES["label"], color=INK, va="top", zorder=6, parse_math=False)
    return [Line2D([], [], ls="none", marker="P", color=INK, markeredgecolor="white",
                   markersize=8, label="factor centroid")]


def _axis_titles(ax: Axes, a1: str, a2: str, explained: tuple[float, float] | None,
                 given: Sequence[str] | None = None) -> None:
    if given is not None:
        xt, yt = (text(t, 60) for t in given)
    elif explained is not None:
        xt = f"{axis_title(a1)} ({100 * explained[0]:.1f} %)"
        yt = f"{axis_title(a2)} ({100 * explained[1]:.1f} %)"
    else:
        xt, yt = axis_title(a1), axis_title(a2)
    ax.set_xlabel(xt, parse_math=False)
    ax.set_ylabel(yt, parse_math=False)


def _fit_labels(ax: Axes, passes: int = 2) -> None:
    """Widen the data limits so every text label drawn in the axes lies inside them."""
    texts = [t for t in ax.texts if t.get_visible() and t.get_text()]
    if not texts:
        return
    fig = ax.figure
    for _ in range(passes):
        fig.draw_without_rendering()
        inverse = ax.transData.inverted()
        corners = [inverse.transform(t.get_window_extent().get_points()) for t in texts]
        ax.update_datalim(np.vstack(corners))
        ax.autoscale_view()


# --------------------------------------------------------------------------------------------
# public layers


def sites(
    ordination: HasScores | pd.DataFrame,
    *,
    groups: pd.Series | None = None,
    labels: bool = False,
    axes: tuple[str, str] = ("axis1", "axis2"),
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Sites as points in ordination space, coloured and shaped by group.

    Parameters
    ----------
    ordination : ordination result or DataFrame
        The result of :func:`~gradients.pcoa`, :func:`~gradients.nmds`,
        :func:`~gradients.pca` (anything with a ``.scores`` table), or a DataFrame of site
        scores (index = site labels), with numeric columns named in `axes`; no missing values.
    groups : Series, optional
        Group of each site, indexed by site label; every site must be present (extra sites are
        ignored). Sites are coloured *and* shaped by group; missing values form a hollow grey
        "no group" class. Groups are listed in order of first appearance, or in category order
        for a categorical Series, or in increasing order when all are numbers.
    labels : bool, default False
        Write each site's label next to its point.
    axes : (str, str), default ("axis1", "axis2")
        The two score columns to plot.
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (6.6, 5.0). Ignored with `ax`.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into, with equal aspect ratio (distances and angles read true). Axis
        titles are set when the axes had none ("Axis 1 (24.5 %)" when the ordination reports
        the share of variation of each axis). Legend entries are kept for :func:`legend`.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import plot
    >>> s = pd.DataFrame({"axis1": [0.1, -0.2, 0.3], "axis2": [0.0, 0.2, -0.1]},
    ...                  index=["A", "B", "C"])
    >>> ax = plot.sites(s, groups=pd.Series(["up", "down", "up"], index=s.index))
    """
    a1, a2 = check_axes(axes)
    sc = _site_table(ordination, a1, a2)
    grp = _groups(groups, sc)
    with canvas(ax, check_figsize(figsize, BIPLOT_SIZE)) as ax:
        ax.set_aspect("equal", adjustable="datalim")
        remember(ax, _draw_sites(ax, sc, a1, a2, grp, labels))
        if not ax.get_xlabel() and not ax.get_ylabel():
            _axis_titles(ax, a1, a2, _explained(ordination, a1, a2))
    return ax


def taxa(
    scores: pd.DataFrame,
    *,
    labels: bool | None = None,
    axes: tuple[str, str] = ("axis1", "axis2"),
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Taxon scores as small grey crosses, names in italics.

    Parameters
    ----------
    scores : DataFrame
        Taxon scores, one row per taxon (index = taxon names) with the columns named in
        `axes`, e.g. from the ``taxon_scores`` method of an ordination result or
        :func:`~gradients.taxon_scores`.
    labels : bool, optional
        Write taxon names beside their crosses; default: only when there are 30 taxa or fewer.
    axes, ax, figsize
        As in :func:`sites`.

    Returns
    -------
    matplotlib.axes.Axes
    """
    a1, a2 = check_axes(axes)
    tax = _taxon_table(scores, a1, a2)
    with canvas(ax, check_figsize(figsize, BIPLOT_SIZE)) as ax:
        remember(ax, _draw_taxa(ax, tax, a1, a2, labels))
    return ax


def arrows(
    vectors: GradientArrowsResult,
    *,
    scale: float | Literal["auto"] = "auto",
    alpha: float = 0.05,
    pvalue: str | None = "pvalue",
    axes: tuple[str, str] = ("axis1", "axis2"),
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Fitted environmental vectors as arrows from the origin, faded when not significant.

    Parameters
    ----------
    vectors : GradientArrowsResult
        The result of :func:`~gradients.fit_vectors`. The arrows drawn are exactly
        ``vectors.arrows(scale)``: direction cosines times sqrt(r2) times one common
        multiplier, the same tips as the ``plot_*`` columns of the report's
        ``vector_fits.csv``.
    scale : "auto" or float, default "auto"
        Passed to ``vectors.arrows``: "auto" takes the largest multiplier with which every tip
        stays within 90 % of the sites' extent on each axis; a number is the multiplier.
    alpha : float, default 0.05
        Arrows with ``pvalue > alpha`` (or a missing p-value) are grey and dashed with an open
        head.
    pvalue : str or None, default "pvalue"
        Column of ``vectors.table`` deciding significance (e.g. "pvalue_adjusted"); None
        draws every arrow solid.
    axes, ax, figsize
        As in :func:`sites`; `axes` must be among the axes the vectors were fitted on.

    Returns
    -------
    matplotlib.axes.Axes
        Variables are named at their tips; arrows whose tips nearly coincide (strongly
        correlated variables) share one label with the names stacked.

    Notes
    -----
    The multiplier changes lengths on the page, never their ratios or angles ([1]_, ch. 9;
    Kantvilas & Minchin 1989, [2]_).

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.
    .. [2] Kantvilas, G. & Minchin, P. R. (1989). Vegetatio 84, 99-112.
    """
    a1, a2 = check_axes(axes)
    alpha = check_alpha(alpha)
    tips, names, sig, _ = _arrow_tips(vectors, scale, a1, a2, pvalue, alpha)
    with canvas(ax, check_figsize(figsize, BIPLOT_SIZE)) as ax:
        remember(ax, _draw_arrows(ax, tips, names, sig, alpha))
        ax.autoscale_view()
    return ax


def centroids(
    factors: ClassCentroidsResult,
    *,
    axes: tuple[str, str] = ("axis1", "axis2"),
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Class centroids of fitted factors as bold plus signs, labelled by class.

    Parameters
    ----------
    factors : ClassCentroidsResult
        The result of :func:`~gradients.fit_factors` (its ``centroids`` table). Centroids are
        labelled by level, or ``factor: level`` when several factors were fitted.
    axes, ax, figsize
        As in :func:`sites`.

    Returns
    -------
    matplotlib.axes.Axes
    """
    a1, a2 = check_axes(axes)
    cen = _centroid_table(factors, a1, a2)
    with canvas(ax, check_figsize(figsize, BIPLOT_SIZE)) as ax:
        remember(ax, _draw_centroids(ax, cen, a1, a2))
    return ax


def legend(ax: Axes) -> Axes:
    """The legend of the layers drawn into `ax` by :func:`sites`, :func:`taxa`, :func:`arrows`
    and :func:`centroids`, in the order they were drawn.

    On a figure made by :mod:`gradients.plot` the legend goes outside the axes on the right;
    on axes of the caller's, inside them. Nothing is drawn when no layer left an entry.

    Returns
    -------
    matplotlib.axes.Axes
    """
    if not isinstance(ax, Axes):
        raise InputError(f"`ax` must be a matplotlib Axes; got {type(ax).__name__}.")
    place_legend(ax, remembered(ax), outside="right upper")
    return ax
