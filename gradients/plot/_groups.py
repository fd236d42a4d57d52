"""Figures of the group contrasts: the dendrogram of a site clustering, and the spreads of
site classes behind a dispersion test.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests:
``_gr:branches`` (the tree, one line collection), ``_gr:leaves`` (the sites, one collection
per cluster), ``_gr:cut`` (the height of the cut into clusters); ``_gr:distances`` (the sites'
distances to their class centroid, one collection per class), ``_gr:mean`` (each class's mean
distance, one line per class).

References
----------
.. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier,
   Amsterdam. (Ch. 8, dendrograms and their cophenetic matrices.)
.. [2] Anderson, M. J. (2006). Distance-based tests for homogeneity of multivariate
   dispersions. Biometrics 62: 245-253.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.collections import LineCollection
from matplotlib.lines import Line2D

from .._errors import InputError
from ._kit import (
    canvas,
    check_figsize,
    format_number,
    format_p,
    frame,
    place_legend,
    set_title,
    text,
)
from ._style import HOLLOW, INK, MUTED, SIZES, group_style

if TYPE_CHECKING:
    from ..groups import DispersionResult, SiteClustersResult

__all__ = ["dendrogram", "dispersion"]

#: Above this many sites the leaf labels are left out unless asked for.
LEAF_LABEL_LIMIT = 120

_METHOD_NAMES = {"average": "average linkage", "complete": "complete linkage",
                 "ward": "Ward's method"}


def _tree_layout(z: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Leaf order, and the vertical position and height of every node (leaves, then merges)."""
    from scipy.cluster.hierarchy import leaves_list

    order = leaves_list(z)
    pos = np.empty(2 * n - 1)
    pos[order] = np.arange(n)[::-1]  # first leaf at the top
    height = np.zeros(2 * n - 1)
    for i, (a, b, h, _) in enumerate(z):
        pos[n + i] = (pos[int(a)] + pos[int(b)]) / 2.0
        height[n + i] = h
    return order, pos, height


def dendrogram(
    result: SiteClustersResult,
    *,
    show_labels: bool | None = None,
    dissimilarity_label: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """The tree of a site clustering, lying on its side, its clusters told apart.

    Parameters
    ----------
    result : SiteClustersResult
        The result of :func:`~gradients.cluster_sites`: its ``linkage`` (the merges), its
        site ``labels``, the cut into ``k`` clusters (``table``) and the cophenetic
        correlation shown beside the title.
    show_labels : bool, optional
        Write the site labels beside the leaves; by default when there are at most 120 sites.
    dissimilarity_label : str, optional
        Title of the height axis; default "Merge height" with the dissimilarity's name.
    title : str, optional
        Default "Site clusters".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default 6.2 wide and tall enough for the leaves.

    Returns
    -------
    matplotlib.axes.Axes
        Sites are leaves along the left edge, the first leaf at the top; each merge is an
        elbow at its height (the horizontal axis). Branches within a cluster of the cut take
        the cluster's colour; the branches above the cut are in ink (``_gr:branches``). Each
        site's end is marked with its cluster's colour and shape (``_gr:leaves``), so a
        greyscale print keeps the clusters apart. A dashed line marks the height of the cut
        (``_gr:cut``) when the tree has no reversals (a constrained tree may merge lower than
        the merge before it; its cut is then shown by the colours alone).

    Notes
    -----
    The horizontal distance at which two sites are joined is their cophenetic dissimilarity;
    the cophenetic correlation beside the title says how well those heights keep the
    original dissimilarities (Legendre & Legendre 2012, ch. 8, [1]_).

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> d = gradients.dissimilarity(survey.community, "bray-curtis")
    >>> ax = plot.dendrogram(gradients.cluster_sites(d, k=3))
    """
    z = getattr(result, "linkage", None)
    labels = getattr(result, "labels", None)
    table = getattr(result, "table", None)
    if not (isinstance(z, np.ndarray) and isinstance(labels, pd.Index)
            and isinstance(table, pd.DataFrame) and "cluster" in table.columns):
        raise InputError("`result` must be the result of cluster_sites(); got "
                         f"{type(result).__name__}.")
    n = len(labels)
    if z.shape != (n - 1, 4):
        raise InputError(f"`result.linkage` must have {n - 1} merges for {n} sites; got shape "
                         f"{z.shape}.")
    clusters = table["cluster"].to_numpy(dtype=np.int64)
    k = int(clusters.max())
    if show_labels is None:
        show_labels = n <= LEAF_LABEL_LIMIT
    size = check_figsize(figsize, (6.2, float(np.clip(0.13 * n + 1.2, 3.0, 16.0))))
    order, pos, height = _tree_layout(z, n)

    # cluster of every node: a leaf's own, a merge's when it lies within one cluster (the
    # first n - k merges make the cut), else 0 (above the cut)
    node_cluster = np.zeros(2 * n - 1, dtype=np.int64)
    node_cluster[:n] = clusters
    for i in range(n - 1):
        a, b = int(z[i, 0]), int(z[i, 1])
        if i < n - k and node_cluster[a] == node_cluster[b]:
            node_cluster[n + i] = node_cluster[a]

    def colour(c: int) -> str:
        return group_style(c - 1)[0] if c > 0 else INK

    segments, colours, widths = [], [], []
    for i in range(n - 1):
        node = n + i
        a, b = int(z[i, 0]), int(z[i, 1])
        h = height[node]
        segments.append([(h, pos[a]), (h, pos[b])])
        colours.append(colour(node_cluster[node]))
        for child in (a, b):  # the elbow's arms take the colour of the merge
            segments.append([(height[child], pos[child]), (h, pos[child])])
            colours.append(colour(node_cluster[node]))
        widths += [SIZES["line"] * 0.8] * 3

    with canvas(ax, size) as ax:
        ax.add_collection(LineCollection(segments, colors=colours, linewidths=widths,
                                         capstyle="round", zorder=2, label="_gr:branches"))
        handles = []
        for c in range(1, k + 1):
            members = np.flatnonzero(clusters == c)
            col, marker = group_style(c - 1)
            ax.scatter(np.zeros(members.size), pos[members], s=SIZES["site"] * 0.8,
                       marker=marker, color=col, edgecolor="white", linewidth=0.5, zorder=3,
                       label="_gr:leaves", clip_on=False)
            plural = "" if members.size == 1 else "s"
            handles.append(Line2D([], [], ls="none", marker=marker, color=col, markersize=5,
                                  label=f"cluster {c} ({members.size} site{plural})"))
        top = float(height.max()) if n > 1 else 1.0
        monotone = bool(np.all(np.diff(z[:, 2]) >= -1e-12 * max(top, 1.0)))
        if monotone and k >= 2:
            cut = (z[n - k - 1, 2] + z[n - k, 2]) / 2.0 if n - k - 1 >= 0 else z[0, 2] / 2.0
            ax.axvline(cut, color=MUTED, lw=SIZES["thin"], ls=(0, (4, 3)), zorder=1,
                       label="_gr:cut")
            ax.annotate(f"cut: {k} clusters", (cut, 1.0), xycoords=("data", "axes fraction"),
                        xytext=(3, -2), textcoords="offset points", ha="left", va="top",
                        fontsize=SIZES["label"], color=MUTED)
        ax.set_xlim(-0.02 * top, top * 1.04)
        ax.set_ylim(-0.7, n - 0.3)
        ax.tick_params(axis="y", length=0)
        ax.spines["left"].set_visible(False)
        ax.grid(False, axis="y")
        if show_labels:
            ax.set_yticks(pos[order])
            ax.set_yticklabels([text(labels[i], 24) for i in order],
                               fontsize=SIZES["label"] if n <= 60 else 5.5)
            for t in ax.get_yticklabels():
                t.set_parse_math(False)
        else:
            ax.set_yticks([])
        metric = getattr(result, "metric", None)
        if dissimilarity_label is not None:
            xlabel = text(dissimilarity_label, 60)
        else:
            xlabel = "Merge height" + (f" ({text(metric, 30)} dissimilarity)" if metric else "")
        ax.set_xlabel(xlabel, parse_math=False)
        notes = [_METHOD_NAMES.get(str(getattr(result, "method", "")), "")]
        coph = getattr(result, "cophenetic_correlation", None)
        if coph is not None and np.isfinite(coph):
            notes.append(f"cophenetic r = {format_number(float(coph))}")
        contiguous = getattr(result, "contiguous", None)
        if contiguous:
            notes.append(f"contiguous ({text(contiguous, 12)})")
        set_title(ax, title, "Site clusters", notes)
        place_legend(ax, handles, outside="right upper", inside="lower right")
    return ax


# --------------------------------------------------------------------------------------------
# spreads behind a dispersion test


def _spread_offsets(values: np.ndarray, width: float) -> np.ndarray:
    """Vertical offsets that spread overlapping points of one row, the same on every run.

    Points are taken in order of value; each goes to the first free slot (0, +1, -1, +2, ...)
    not occupied by a neighbour closer than ``width`` along the row.
    """
    order = np.argsort(values, kind="stable")
    slots = np.zeros(values.size)
    placed: list[tuple[float, int]] = []
    for i in order:
        v = values[i]
        taken = {slot for (u, slot) in placed if abs(u - v) < width}
        for step in range(values.size + 1):
            slot = (step + 1) // 2 * (1 if step % 2 else -1) if step else 0
            if slot not in taken:
                break
        slots[i] = slot
        placed.append((v, slot))
    top = max(float(np.max(np.abs(slots))), 1.0)
    return slots / top


def dispersion(
    result: DispersionResult,
    *,
    alpha: float = 0.05,
    distance_label: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Each site's distance to the centroid of its class, class by class.

    Parameters
    ----------
    result : DispersionResult
        The result of :func:`~gradients.dispersion_test` (or one of
        ``PermanovaResult.dispersion``): its ``distances`` table (``group``, ``distance`` per
        site), its F statistic and p-value, shown beside the title.
    alpha : float, default 0.05
        Classes are drawn filled when the spreads differ (``pvalue <= alpha``), hollow
        otherwise.
    distance_label : str, optional
        Title of the distance axis; default "Distance to the class centroid".
    title : str, optional
        Default "Spread within the classes of <grouping>".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default 6.2 wide, 0.55 per class tall (at least 2.6).

    Returns
    -------
    matplotlib.axes.Axes
        One row per class (in the result's order, the first at the top): every site as a
        point, spread sideways where points would overlap (``_gr:distances``), and a short
        vertical bar at the class's mean distance (``_gr:mean``). Each class has its colour
        and marker shape; the number of sites is written at the right of each row.

    Notes
    -----
    PERMANOVA compares the positions of class centroids; it also responds to classes that
    differ in spread. The dispersion test (Anderson 2006, [2]_) compares these distances among
    the classes: when it is significant, a significant PERMANOVA may come from the difference
    in spread alone, which this figure shows directly.

    References
    ----------
    .. [2] Anderson, M. J. (2006). Biometrics 62: 245-253.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> d = gradients.dissimilarity(survey.community, "bray-curtis")
    >>> res = gradients.dispersion_test(d, survey.environment["habitat"], n_resamples=99, rng=1)
    >>> ax = plot.dispersion(res)
    """
    table = getattr(result, "distances", None)
    if not isinstance(table, pd.DataFrame) or not hasattr(result, "pvalue"):
        raise InputError("`result` must be the result of dispersion_test() (or one of "
                         f"PermanovaResult.dispersion); got {type(result).__name__}.")
    from ._kit import check_alpha

    alpha = check_alpha(alpha)
    tb = frame(table, "result.distances", ["group", "distance"], finite=["distance"])
    summary = getattr(result, "table", None)
    if isinstance(summary, pd.DataFrame) and "group" in summary.columns:
        levels = [g for g in summary["group"].tolist() if (tb["group"] == g).any()]
    else:
        levels = list(dict.fromkeys(tb["group"].tolist()))
    k = len(levels)
    size = check_figsize(figsize, (6.2, max(2.6, 0.55 * k + 1.3)))
    pvalue = float(getattr(result, "pvalue", np.nan))
    differs = bool(np.isfinite(pvalue) and pvalue <= alpha)
    with canvas(ax, size) as ax:
        top = float(tb["distance"].max()) or 1.0
        for row, level in enumerate(levels):
            y0 = k - 1 - row
            values = tb.loc[tb["group"] == level, "distance"].to_numpy(dtype=float)
            col, marker = group_style(row)
            offsets = _spread_offsets(values, 0.015 * top) * 0.28
            ax.scatter(values, y0 + offsets, s=SIZES["site"] * 0.7, marker=marker,
                       facecolor=col if differs else HOLLOW, edgecolor=col, linewidth=0.8,
                       zorder=3, label="_gr:distances")
            mean = float(values.mean())
            ax.plot([mean, mean], [y0 - 0.36, y0 + 0.36], color=INK, lw=SIZES["line"] * 1.6,
                    solid_capstyle="butt", zorder=4, label="_gr:mean")
            ax.annotate(f"n = {values.size}", (1.0, y0), xycoords=("axes fraction", "data"),
                        xytext=(4, 0), textcoords="offset points", ha="left", va="center",
                        fontsize=SIZES["label"], color=MUTED, annotation_clip=False)
        ax.set_yticks(range(k))
        ax.set_yticklabels([text(v) for v in levels[::-1]])
        for t in ax.get_yticklabels():
            t.set_parse_math(False)
        ax.set_ylim(-0.6, k - 0.4)
        ax.set_xlim(left=0.0)
        ax.tick_params(axis="y", length=0)
        ax.spines["left"].set_visible(False)
        ax.grid(False, axis="y")
        ax.set_xlabel(text(distance_label, 60) if distance_label is not None
                      else "Distance to the class centroid", parse_math=False)
        notes = []
        stat = getattr(result, "statistic", None)
        if stat is not None and np.isfinite(stat):
            notes.append(f"dispersion F = {format_number(float(stat))}")
        if np.isfinite(pvalue):
            notes.append(format_p(pvalue))
        grouping = str(getattr(result, "grouping", None) or "classes")
        quoted = re.fullmatch(r"column '(.*)'", grouping)
        grouping = quoted.group(1) if quoted else grouping
        set_title(ax, title, f"Spread within the classes of {text(grouping, 30)}", notes)
        place_legend(ax, [Line2D([], [], color=INK, lw=SIZES["line"] * 1.6,
                                 label="mean distance")], inside="lower right")
    return ax
