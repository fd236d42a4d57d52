"""Figures of the ordination's fit: a fitted surface over the ordination, the Shepard diagram.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests: ``_gr:surface``
(filled bands), ``_gr:contours`` (contour lines), ``_gr:sites``, ``_gr:pairs``, ``_gr:fit``.

References
----------
.. [1] Kruskal, J. B. (1964). Multidimensional scaling by optimizing goodness of fit to a
   nonmetric hypothesis. Psychometrika 29, 1-27. (The Shepard diagram of an NMDS.)
.. [2] Wood, S. N. (2003). Thin plate regression splines. Journal of the Royal Statistical
   Society B 65, 95-114.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.lines import Line2D
from matplotlib.ticker import MaxNLocator

from .._errors import InputError
from ._kit import (
    HasScores,
    axis_title,
    canvas,
    check_figsize,
    format_number,
    frame,
    place_legend,
    scatter_pairs,
    scores_of,
    set_title,
    text,
)
from ._style import ACCENT, HOLLOW, INK, MUTED, PALETTE, SEQUENTIAL_CMAP, SIZES

if TYPE_CHECKING:
    from ..fitting import SurfaceFitResult

__all__ = ["shepard", "surface"]


# --------------------------------------------------------------------------------------------
# fitted surface


def _lattice(grid: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The tidy prediction grid as node coordinates and a (y, x) array of fitted values."""
    gr = frame(grid, "grid", ["x", "y", "fitted"], finite=["x", "y"], numeric=["fitted"],
               min_rows=4)
    if gr.duplicated(["x", "y"]).any():
        dup = gr.loc[gr.duplicated(["x", "y"]), ["x", "y"]].head(3).to_numpy().tolist()
        raise InputError(
            f"`grid` has more than one row for node(s) {dup}; each (x, y) must appear once."
        )
    xs = np.unique(gr["x"].to_numpy())
    ys = np.unique(gr["y"].to_numpy())
    if len(xs) < 2 or len(ys) < 2:
        raise InputError(
            f"`grid` must span at least 2 distinct x and 2 distinct y values; got {len(xs)} "
            f"and {len(ys)}."
        )
    z = np.full((len(ys), len(xs)), np.nan)
    z[np.searchsorted(ys, gr["y"].to_numpy()),
      np.searchsorted(xs, gr["x"].to_numpy())] = gr["fitted"].to_numpy()
    if not np.isfinite(z).any():
        raise InputError(
            "`grid` column 'fitted' holds no finite value; the surface cannot be drawn."
        )
    return xs, ys, z


def _band_levels(levels: int | Sequence[float], z: np.ndarray) -> np.ndarray:
    finite = np.isfinite(z)
    zmin, zmax = float(z[finite].min()), float(z[finite].max())
    if isinstance(levels, int | np.integer) and not isinstance(levels, bool):
        if levels < 1:
            raise InputError(f"`levels` must be a positive integer or a sequence; got {levels}.")
        if zmax > zmin:
            lv = MaxNLocator(nbins=int(levels)).tick_values(zmin, zmax)
            return lv[(lv >= zmin - (lv[1] - lv[0])) & (lv <= zmax + (lv[1] - lv[0]))]
        pad = abs(zmin) * 0.01 or 0.5
        return np.array([zmin - pad, zmax + pad])
    try:
        lv = np.asarray([float(v) for v in levels], dtype=float)  # type: ignore[union-attr]
    except (TypeError, ValueError):
        lv = np.array([])
    if len(lv) < 2 or not np.all(np.isfinite(lv)) or np.any(np.diff(lv) <= 0):
        raise InputError(
            "`levels` must be a positive integer or at least two increasing numbers; "
            f"got {levels!r}."
        )
    return lv


def _surface_inputs(fit: object) -> tuple[str, tuple[str, str], pd.DataFrame]:
    grid = getattr(fit, "grid", None)
    axes = getattr(fit, "axes", None)
    if not isinstance(grid, pd.DataFrame) or not callable(getattr(fit, "contours", None)) \
            or axes is None or len(axes) != 2:
        raise InputError(
            "`fit` must be the result of fit_surface() (with a `.grid` table, two `.axes` and a "
            f"`.contours()` method); got {type(fit).__name__}."
        )
    return text(getattr(fit, "variable", "") or "fitted value"), (str(axes[0]), str(axes[1])), \
        grid


def surface(
    fit: SurfaceFitResult,
    ordination: HasScores | pd.DataFrame | None = None,
    *,
    levels: int | Sequence[float] = 8,
    line_levels: int | Sequence[float] = 7,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """A fitted surface of one variable over the ordination, as contours under the sites.

    Parameters
    ----------
    fit : SurfaceFitResult
        The result of :func:`~gradients.fit_surface`. The filled bands come from its
        prediction grid (``fit.grid``; nothing is drawn outside the sites' hull, where the grid
        holds NaN), the contour lines from ``fit.contours(line_levels)``, the lines the report
        writes to ``surface_contours.csv``.
    ordination : ordination result or DataFrame, optional
        The scores the surface was fitted on; the sites are drawn as hollow circles. Without
        it only the surface is drawn.
    levels : int or sequence of float, default 8
        The filled bands: the approximate number of intervals (rounded levels are chosen) or the
        increasing levels themselves.
    line_levels : int or sequence of float, default 7
        The contour lines, as the `levels` of ``fit.contours``.
    title : str, optional
        Default "<variable> over the ordination".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (6.2, 4.9).

    Returns
    -------
    matplotlib.axes.Axes
        Filled contour bands (light = low, dark = high, lightness monotonic so a greyscale
        print keeps the order), labelled contour lines, the sites and a colour bar, on an
        equal-aspect axes.

    Raises
    ------
    InputError
        `fit` is not a surface fit, its grid holds no finite value, or the scores lack the
        surface's axes.

    Notes
    -----
    Evenly spaced straight contours mean the variable changes linearly across the
    ordination, which is what a fitted arrow assumes; curved or closed contours show where an
    arrow would mislead (thin plate regression splines, Wood 2003, [1]_).

    References
    ----------
    .. [1] Wood, S. N. (2003). Journal of the Royal Statistical Society B 65, 95-114.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> ordination = gradients.pcoa(gradients.dissimilarity(survey.community, "bray-curtis"))
    >>> fit = gradients.fit_surface(ordination, survey.environment["sand"], n_resamples=0)
    >>> ax = plot.surface(fit, ordination)
    """
    variable, (a1, a2), grid = _surface_inputs(fit)
    size = check_figsize(figsize, (6.2, 4.9))
    xs, ys, z = _lattice(grid)
    lv = _band_levels(levels, z)
    sc = None
    if ordination is not None:
        sc = frame(scores_of(ordination), "scores", [a1, a2], finite=[a1, a2])
    lines = frame(fit.contours(line_levels), "contours", ["level", "line", "x", "y"],
                  finite=["level", "x", "y"], min_rows=0)

    with canvas(ax, size) as ax:
        ax.set_aspect("equal", adjustable="datalim")
        ax.grid(False)
        filled = ax.contourf(xs, ys, np.ma.masked_invalid(z), levels=lv, cmap=SEQUENTIAL_CMAP,
                             extend="neither", zorder=1)
        filled.set_label("_gr:surface")
        for _, part in lines.groupby(["level", "line"], sort=False):
            px, py = part["x"].to_numpy(), part["y"].to_numpy()
            ax.plot(px, py, color=INK, lw=SIZES["thin"], zorder=2, label="_gr:contours")
            mid = len(px) // 2
            ax.text(px[mid], py[mid], format_number(float(part["level"].iloc[0])), fontsize=6.0,
                    color=INK, ha="center", va="center", zorder=2.5,
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                          "alpha": 0.8})
        notes = []
        if sc is not None:
            ax.scatter(sc[a1].to_numpy(), sc[a2].to_numpy(), s=SIZES["site"] * 0.8,
                       marker="o", facecolor=HOLLOW, edgecolor=INK, linewidth=0.8, zorder=3,
                       label="_gr:sites")
            notes.append(f"{len(sc)} sites")
        bar = ax.figure.colorbar(filled, ax=ax, shrink=0.85, aspect=24, pad=0.02)
        bar.set_label(variable, parse_math=False)
        bar.outline.set_visible(False)
        bar.ax.tick_params(length=2.5, color=MUTED)
        ax.set_xlabel(axis_title(a1), parse_math=False)
        ax.set_ylabel(axis_title(a2), parse_math=False)
        set_title(ax, title, f"{variable} over the ordination", notes)
    return ax


# --------------------------------------------------------------------------------------------
# Shepard diagram


def shepard(
    result: Any,
    *,
    xlabel: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Community dissimilarity against distance in an NMDS, with the monotone fit.

    Parameters
    ----------
    result : NMDSResult
        The result of :func:`~gradients.nmds`: its ``shepard`` table (one row per pair of
        sites: ``dissimilarity``, ``distance``, ``fitted``) and its ``stress``, shown beside the
        title.
    xlabel : str, optional
        Default "Community dissimilarity" (e.g. pass "Bray-Curtis dissimilarity").
    title : str, optional
        Default "Shepard diagram".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (4.8, 4.3).

    Returns
    -------
    matplotlib.axes.Axes
        Pairs as small points (rasterised in SVG above 1,500 pairs) and the fitted values as a
        non-decreasing step line (``_gr:fit``), drawn in order of dissimilarity.

    Notes
    -----
    Points far above or below the step line are pairs the ordination represents poorly; the
    scatter around the line is what stress summarises (Kruskal 1964, [1]_).

    References
    ----------
    .. [1] Kruskal, J. B. (1964). Psychometrika 29, 1-27.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> d = gradients.dissimilarity(survey.community, "bray-curtis")
    >>> ax = plot.shepard(gradients.nmds(d, starts=2, rng=1))
    """
    table = getattr(result, "shepard", None)
    if not isinstance(table, pd.DataFrame):
        raise InputError(
            "`result` must be the result of nmds() (anything with a `.shepard` table); got "
            f"{type(result).__name__}."
        )
    size = check_figsize(figsize, (4.8, 4.3))
    cols = ["dissimilarity", "distance", "fitted"]
    sh = frame(table, "shepard", cols, finite=cols)
    stress = getattr(result, "stress", None)
    with canvas(ax, size) as ax:
        n = len(sh)
        scatter_pairs(ax, sh["dissimilarity"].to_numpy(), sh["distance"].to_numpy())
        order = np.lexsort((sh["fitted"].to_numpy(), sh["dissimilarity"].to_numpy()))
        ax.plot(sh["dissimilarity"].to_numpy()[order], sh["fitted"].to_numpy()[order],
                drawstyle="steps-post", color=ACCENT, lw=SIZES["line"], zorder=3,
                label="_gr:fit")
        ax.set_xlabel(text(xlabel, 60) if xlabel is not None else "Community dissimilarity",
                      parse_math=False)
        ax.set_ylabel("Distance in the ordination")
        notes = [f"stress {float(stress):.3f}"] if stress is not None else []
        notes.append(f"{n} pairs")
        set_title(ax, title, "Shepard diagram", notes)
        place_legend(ax, [
            Line2D([], [], ls="none", marker="o", color=PALETTE[0], markersize=4,
                   label="site pair"),
            Line2D([], [], color=ACCENT, lw=SIZES["line"], label="monotone fit"),
        ], inside="upper left")
    return ax
