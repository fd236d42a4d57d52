"""The ordination biplot: sites, fitted arrows, class centroids and taxa in one figure.

:func:`biplot` composes the layers of :mod:`gradients.plot._ordination` (each usable on its own)
into the figure of the report.

References
----------
.. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier,
   Amsterdam. (Biplots, ch. 9.)
.. [2] Kantvilas, G. & Minchin, P. R. (1989). An analysis of epiphytic lichen communities in
   Tasmania's cool temperate rainforest. Vegetatio 84, 99-112. (Fitted vectors.)
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Literal

import pandas as pd
from matplotlib.axes import Axes

from .._errors import InputError
from ._kit import HasScores, canvas, check_alpha, check_axes, check_figsize, remember, set_title
from ._ordination import (
    BIPLOT_SIZE,
    _arrow_tips,
    _axis_titles,
    _centroid_table,
    _draw_arrows,
    _draw_centroids,
    _draw_sites,
    _draw_taxa,
    _explained,
    _fit_labels,
    _groups,
    _site_table,
    _stress,
    _taxon_table,
    legend,
)
from ._style import GRID

if TYPE_CHECKING:
    from ..fitting import ClassCentroidsResult, GradientArrowsResult

__all__ = ["biplot"]


def biplot(
    ordination: HasScores | pd.DataFrame,
    *,
    vectors: GradientArrowsResult | None = None,
    factors: ClassCentroidsResult | None = None,
    groups: pd.Series | None = None,
    taxa: pd.DataFrame | None = None,
    site_labels: bool = False,
    taxon_labels: bool | None = None,
    axes: tuple[str, str] = ("axis1", "axis2"),
    arrow_scale: float | Literal["auto"] = "auto",
    alpha: float = 0.05,
    pvalue: str | None = "pvalue",
    axis_titles: tuple[str, str] | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Sites in ordination space, with fitted environmental arrows, class centroids and taxa.

    Parameters
    ----------
    ordination : ordination result or DataFrame
        As in :func:`sites`. The stress of an NMDS is shown in the note beside the title; an
        ordination reporting ``proportion_explained`` by axis (PCoA, PCA) puts the share of each
        plotted axis in its title.
    vectors : GradientArrowsResult, optional
        Fitted vectors, drawn by :func:`arrows` (the tips of ``vectors.arrows(arrow_scale)``);
        the multiplier is shown in the note ("arrows ×0.821").
    factors : ClassCentroidsResult, optional
        Fitted factors, whose class centroids are drawn by :func:`centroids`.
    groups : Series, optional
        Group of each site (e.g. the classes of the first factor), as in :func:`sites`.
    taxa : DataFrame, optional
        Taxon scores, drawn by :func:`taxa`.
    site_labels : bool, default False
        Write each site's label next to its point.
    taxon_labels : bool, optional
        As `labels` of :func:`taxa`.
    axes : (str, str), default ("axis1", "axis2")
        The two axes to plot (read from the scores, the vectors, the centroids and the taxa).
    arrow_scale : "auto" or float, default "auto"
        The `scale` of :func:`arrows`.
    alpha : float, default 0.05
        Significance level for fading arrows.
    pvalue : str or None, default "pvalue"
        As in :func:`arrows`.
    axis_titles : (str, str), optional
        Axis titles to use as given.
    title : str, optional
        Default "Ordination of sites".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (6.6, 5.0).

    Returns
    -------
    matplotlib.axes.Axes
        Equal aspect ratio, a faint cross through the origin, and, when anything is grouped or
        tested, a legend (outside on the right of a figure made here).

    Raises
    ------
    InputError
        A table lacks a required column, holds non-numeric or missing coordinates, `groups`
        lacks some sites, or the vectors were not fitted on the plotted axes.

    Notes
    -----
    Arrow tips from vector fitting are the direction cosines scaled by sqrt(r2), then stretched
    by one common multiplier to fit the plot ([1]_, ch. 9; [2]_). The multiplier is the one of
    the vector table, so a figure redrawn from ``vector_fits.csv`` (its ``plot_*`` columns)
    shows the same arrows.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.
    .. [2] Kantvilas, G. & Minchin, P. R. (1989). Vegetatio 84, 99-112.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> d = gradients.dissimilarity(survey.community, "bray-curtis")
    >>> ordination = gradients.pcoa(d)
    >>> fit = gradients.fit_vectors(ordination, survey.environment[["sand", "pH"]],
    ...                             n_resamples=99, rng=1)
    >>> ax = plot.biplot(ordination, vectors=fit)
    >>> ax.get_xlabel()
    'Axis 1 (24.5 %)'
    """
    a1, a2 = check_axes(axes)
    alpha = check_alpha(alpha)
    sc = _site_table(ordination, a1, a2)
    grp = _groups(groups, sc)
    tax = _taxon_table(taxa, a1, a2) if taxa is not None else None
    cen = _centroid_table(factors, a1, a2) if factors is not None else None
    tips = (_arrow_tips(vectors, arrow_scale, a1, a2, pvalue, alpha)
            if vectors is not None else None)
    if axis_titles is not None and (
        not isinstance(axis_titles, tuple | list) or len(axis_titles) != 2
    ):
        raise InputError(f"`axis_titles` must be two strings; got {axis_titles!r}.")
    stress = _stress(ordination)
    notes = [f"stress {stress:.3f}"] if stress is not None else []

    with canvas(ax, check_figsize(figsize, BIPLOT_SIZE)) as ax:
        ax.set_aspect("equal", adjustable="datalim")
        ax.axhline(0.0, color=GRID, lw=0.9, zorder=0.6)
        ax.axvline(0.0, color=GRID, lw=0.9, zorder=0.6)
        remember(ax, _draw_sites(ax, sc, a1, a2, grp, site_labels))
        if tax is not None:
            remember(ax, _draw_taxa(ax, tax, a1, a2, taxon_labels))
        if tips is not None and len(tips[0]):
            xy, names, sig, multiplier = tips
            if multiplier != 1.0:
                notes.append(f"arrows ×{multiplier:.3g}")
            remember(ax, _draw_arrows(ax, xy, names, sig, alpha))
        if cen is not None:
            remember(ax, _draw_centroids(ax, cen, a1, a2))
        _axis_titles(ax, a1, a2, _explained(ordination, a1, a2), axis_titles)
        notes.append(f"{len(sc)} sites")
        set_title(ax, title, "Ordination of sites", notes)
        ax.autoscale_view()
        _fit_labels(ax)
        legend(ax)
    return ax
