"""Figures of the matrix tests: the Mantel correlogram and the distance decay of similarity.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests:
``_gr:classline``, ``_gr:classes-filled``, ``_gr:classes-hollow`` (correlogram), ``_gr:pairs``,
``_gr:curve``, ``_gr:halving``, ``_gr:halving-point`` (distance decay).

References
----------
.. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier,
   Amsterdam. (Mantel correlograms, ch. 13.)
.. [2] Oden, N. L. & Sokal, R. R. (1986). Directional autocorrelation: an extension of spatial
   correlograms to two dimensions. Systematic Zoology 35, 608-617.
.. [3] Nekola, J. C. & White, P. S. (1999). The distance decay of similarity in biogeography and
   ecology. Journal of Biogeography 26, 867-878.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.lines import Line2D

from .._errors import InputError
from ._kit import (
    canvas,
    check_alpha,
    check_figsize,
    format_number,
    frame,
    place_legend,
    scatter_pairs,
    set_title,
    significant,
    text,
    with_unit,
)
from ._style import ACCENT, FADED, HOLLOW, INK, MUTED, PALETTE, SIZES

if TYPE_CHECKING:
    from ..matrix import DistanceDecayResult, MantelCorrelogramResult

__all__ = ["correlogram", "distance_decay"]


def _table_of(result: object, name: str, producer: str) -> pd.DataFrame:
    table = getattr(result, "table", None)
    if not isinstance(table, pd.DataFrame):
        raise InputError(
            f"`{name}` must be the result of {producer}; got {type(result).__name__}."
        )
    return table


# --------------------------------------------------------------------------------------------
# Mantel correlogram


def _correlogram_classes(result: object) -> pd.DataFrame:
    table = _table_of(result, "result", "mantel_correlogram()")
    cols = ["midpoint", "statistic", "pvalue", "pvalue_adjusted", "n_pairs", "tested"]
    tb = frame(table, "result.table", cols, finite=["midpoint"],
               numeric=["statistic", "pvalue", "pvalue_adjusted", "n_pairs"])
    tested = tb["tested"]
    if tested.isna().any() or not all(
        isinstance(v, bool | np.bool_) or v in (0, 1) for v in tested.tolist()
    ):
        raise InputError(
            "`result.table` column 'tested' must be True or False in every row (False for "
            "classes with too few pairs).",
            columns=["tested"],
        )
    tb["flagged"] = ~tested.astype(bool)
    return tb[tb["statistic"].notna()].sort_values("midpoint", kind="stable")


def correlogram(
    result: MantelCorrelogramResult,
    *,
    alpha: float = 0.05,
    distance_unit: str | None = None,
    statistic_label: str = "Mantel r",
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Mantel statistic per distance class, significance after correction shown by fill.

    Parameters
    ----------
    result : MantelCorrelogramResult
        The result of :func:`~gradients.mantel_correlogram`. Its ``table`` gives one point per
        distance class (``midpoint``, ``statistic``; classes without a statistic are not
        drawn), the p-value after the progressive correction (``pvalue_adjusted``), the pairs
        per class (``n_pairs``) and whether the class was tested (``tested``).
    alpha : float, default 0.05
        A class is significant when ``pvalue_adjusted <= alpha``.
    distance_unit : str, optional
        Unit of the midpoints, for the axis title (e.g. "km").
    statistic_label : str, default "Mantel r"
        Title of the vertical axis.
    title : str, optional
        Default "Mantel correlogram".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (6.2, 3.8).

    Returns
    -------
    matplotlib.axes.Axes
        A line through the classes in order of distance; filled markers
        (``_gr:classes-filled``) for classes significant after correction, hollow markers
        (``_gr:classes-hollow``) for the rest; classes not tested (too few pairs) as diamonds
        in a faded ink; a zero line; the number of pairs printed under each class.

    Notes
    -----
    Positive values: sites in that distance class have more similar communities than average
    (positive autocorrelation); negative values: less similar (Oden & Sokal 1986, [2]_;
    [1]_ ch. 13).

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.
    .. [2] Oden, N. L. & Sokal, R. R. (1986). Systematic Zoology 35, 608-617.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> d = gradients.dissimilarity(survey.community, "bray-curtis")
    >>> geo = gradients.geographic_distance(survey.locations)
    >>> ax = plot.correlogram(gradients.mantel_correlogram(d, geo, n_resamples=99, rng=1),
    ...                       distance_unit="km")
    """
    alpha = check_alpha(alpha)
    size = check_figsize(figsize, (6.2, 3.8))
    tb = _correlogram_classes(result)
    with canvas(ax, size) as ax:
        ax.axhline(0.0, color=MUTED, lw=0.8, zorder=1)
        mx, st = tb["midpoint"].to_numpy(), tb["statistic"].to_numpy()
        ax.plot(mx, st, color=MUTED, lw=SIZES["thin"], zorder=2, label="_gr:classline")
        sig = significant(tb["pvalue_adjusted"], alpha)
        flagged = tb["flagged"].to_numpy(dtype=bool)
        for filled in (True, False):
            for flag in (False, True):
                m = (sig == filled) & (flagged == flag)
                if not m.any():
                    continue
                ink = FADED if flag else PALETTE[0]
                ax.scatter(mx[m], st[m], s=SIZES["class"], marker="D" if flag else "o",
                           facecolor=ink if filled else HOLLOW, edgecolor=ink, linewidth=1.1,
                           zorder=3,
                           label="_gr:classes-filled" if filled else "_gr:classes-hollow")
        for xi, npairs in zip(mx, tb["n_pairs"].to_numpy(), strict=True):
            if math.isfinite(npairs):
                ax.annotate(f"{int(npairs)}", (xi, 0), xycoords=("data", "axes fraction"),
                            xytext=(0, 3), textcoords="offset points", ha="center",
                            va="bottom", fontsize=5.8, color=MUTED)
        lo, hi = ax.get_ylim()
        span = max(hi - lo, 1e-9)
        ax.set_ylim(lo - 0.12 * span, hi)  # room for the pair counts
        ax.set_xlabel(with_unit("Distance class (midpoint)", distance_unit), parse_math=False)
        ax.set_ylabel(text(statistic_label, 40), parse_math=False)
        set_title(ax, title, "Mantel correlogram",
                  [f"{len(tb)} classes", "numbers: pairs per class"])
        handles = [
            Line2D([], [], ls="none", marker="o", markerfacecolor=PALETTE[0],
                   markeredgecolor=PALETTE[0], markersize=6,
                   label=f"significant after correction (p ≤ {alpha:g})"),
            Line2D([], [], ls="none", marker="o", markerfacecolor=HOLLOW,
                   markeredgecolor=PALETTE[0], markersize=6, label="not significant"),
        ]
        if flagged.any():
            handles.append(Line2D([], [], ls="none", marker="D", markerfacecolor=HOLLOW,
                                  markeredgecolor=FADED, markersize=5.5, label="too few pairs"))
        place_legend(ax, handles, outside="lower center", ncols=len(handles))
    return ax


# --------------------------------------------------------------------------------------------
# distance decay


def _decay_inputs(result: object) -> tuple[pd.DataFrame, pd.DataFrame | None, str, float]:
    pairs = getattr(result, "pairs", None)
    if not isinstance(pairs, pd.DataFrame):
        raise InputError(
            "`result` must be the result of distance_decay() (with `.pairs` and `.curve` "
            f"tables); got {type(result).__name__}."
        )
    if "used" in pairs.columns:
        pairs = pairs[pairs["used"].astype(bool)]
    pr = frame(pairs, "pairs", ["distance", "similarity"], finite=["distance", "similarity"])
    curve = getattr(result, "curve", None)
    cv = None
    if curve is not None:
        cv = frame(curve, "curve", ["distance", "fitted"], finite=["distance", "fitted"],
                   min_rows=2).sort_values("distance", kind="stable")
    model = str(getattr(result, "model", "exponential"))
    halving = float(getattr(result, "halving", math.inf))
    return pr, cv, model, halving


def distance_decay(
    result: DistanceDecayResult,
    *,
    distance_unit: str | None = None,
    ylabel: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Similarity of communities against the distance between sites, with the fitted decay.

    Parameters
    ----------
    result : DistanceDecayResult
        The result of :func:`~gradients.distance_decay`: its ``pairs`` (the pairs used in the
        fit, one faint point each, more transparent as pairs grow in number and rasterised in
        the SVG above 1,500 pairs), its fitted ``curve`` and its ``halving`` distance.
    distance_unit : str, optional
        Unit of distance for the axis title and labels (e.g. "km").
    ylabel : str, optional
        Default "Community similarity".
    title : str, optional
        Default "Distance decay of similarity".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (5.8, 4.2).

    Returns
    -------
    matplotlib.axes.Axes
        The pairs (``_gr:pairs``), the curve (``_gr:curve``, in order of distance) and, for the
        exponential model, the halving distance as a dashed vertical line (``_gr:halving``) with
        a label, or only in the note when it lies beyond 1.5 times the largest distance (or is
        infinite: no decline). For the power model the halving is a factor by which distance
        is multiplied, not a distance, and is given in the note.

    Notes
    -----
    The halving distance of an exponential decay S = a·exp(-b·d) is ln 2 / b (Nekola & White
    1999, [1]_). Pairs share sites, so the cloud overstates the information: read the curve,
    not the number of points.

    References
    ----------
    .. [1] Nekola, J. C. & White, P. S. (1999). Journal of Biogeography 26, 867-878.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> survey = gradients.demo_survey()
    >>> d = gradients.dissimilarity(survey.community, "bray-curtis")
    >>> geo = gradients.geographic_distance(survey.locations)
    >>> ax = plot.distance_decay(gradients.distance_decay(d, geo, rng=1), distance_unit="km")
    """
    size = check_figsize(figsize, (5.8, 4.2))
    pr, cv, model, halving = _decay_inputs(result)
    unit = text(distance_unit, 20) if distance_unit else ""
    with canvas(ax, size) as ax:
        scatter_pairs(ax, pr["distance"].to_numpy(), pr["similarity"].to_numpy())
        handles: list[Any] = [Line2D([], [], ls="none", marker="o", color=PALETTE[0],
                                     markersize=4, label="site pair")]
        if cv is not None:
            ax.plot(cv["distance"].to_numpy(), cv["fitted"].to_numpy(), color=ACCENT,
                    lw=SIZES["line"] + 0.3, zorder=4, label="_gr:curve")
            handles.append(Line2D([], [], color=ACCENT, lw=SIZES["line"] + 0.3,
                                  label="fitted decay"))
        notes = [f"{len(pr)} pairs"]
        if model == "power":
            if math.isfinite(halving):
                notes.append(f"halving factor ×{format_number(halving)}")
        elif math.isfinite(halving) and halving > 0:
            _mark_halving(ax, halving, unit, pr, cv, notes)
        ax.set_xlabel(with_unit("Distance between sites", unit or None), parse_math=False)
        ax.set_ylabel(text(ylabel, 60) if ylabel is not None else "Community similarity",
                      parse_math=False)
        set_title(ax, title, "Distance decay of similarity", notes)
        place_legend(ax, handles, inside="upper right")
    return ax


def _mark_halving(ax: Axes, halving: float, unit: str, pr: pd.DataFrame,
                  cv: pd.DataFrame | None, notes: list[str]) -> None:
    label = f"halving distance {format_number(halving)}{' ' + unit if unit else ''}"
    if halving > 1.5 * float(pr["distance"].max()):
        notes.append(label + " (beyond the data)")
        return
    ax.axvline(halving, color=INK, lw=0.9, ls=(0, (4.0, 2.5)), zorder=3, label="_gr:halving")
    if cv is not None:
        yh = float(np.interp(halving, cv["distance"], cv["fitted"]))
        ax.scatter([halving], [yh], s=34, marker="o", facecolor=HOLLOW, edgecolor=INK,
                   linewidth=1.1, zorder=5, label="_gr:halving-point")
    ax.annotate(label, (halving, 1.0), xycoords=("data", "axes fraction"), xytext=(4, -4),
                textcoords="offset points", ha="left", va="top", fontsize=SIZES["label"],
                color=INK, parse_math=False)
