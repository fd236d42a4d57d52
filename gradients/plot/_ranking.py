"""Figures of the ranking stage: variables ranked against turnover, and the turnover curves.

:func:`ranking` draws the ranking of a :class:`~gradients.ranking.VariableRankingResult` (or of
any table with a value per variable, such as a vector fit's); :func:`turnover_curves` draws the
fitted turnover functions of a :class:`~gradients.ranking.TurnoverModelResult` (or of a tidy
table of curves).

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests: ``_gr:bars``
(ranking, on the bar container), ``_gr:curve`` (each turnover curve), ``_gr:steepest`` (the
stretch of a curve that holds half its turnover), ``_gr:height`` (the mark of a curve's height).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure, SubFigure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from .._errors import InputError
from ._kit import (
    VALUE_NAMES,
    canvas,
    check_alpha,
    check_figsize,
    figure_canvas,
    format_number,
    format_p,
    frame,
    place_legend,
    set_title,
    significant,
    text,
)
from ._style import ACCENT, HOLLOW, INK, MUTED, PALETTE, SIZES

__all__ = ["ranking", "turnover_curves"]

#: Marks a collinear variable's label in :func:`ranking`.
COLLINEAR_MARK = " ≈"


def _row_labels(tb: pd.DataFrame, column: str | None) -> list[str]:
    if column is not None and column in tb.columns:
        return [text(v) for v in tb[column].tolist()]
    return [text(v) for v in tb.index.tolist()]


def _check_top(top: object) -> int | None:
    if top is not None and (not isinstance(top, int | np.integer) or isinstance(top, bool)
                            or top < 1):
        raise InputError(f"`top` must be a positive integer; got {top!r}.")
    return None if top is None else int(top)


# --------------------------------------------------------------------------------------------
# ranking of variables


def ranking(
    table: Any,
    *,
    value: str | None = None,
    pvalue: str | None = "pvalue",
    alpha: float = 0.05,
    label: str = "variable",
    top: int | None = None,
    xlabel: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Horizontal bars ranking variables, significant ones filled.

    Parameters
    ----------
    table : VariableRankingResult or DataFrame
        The result of :func:`gradients.rank_variables`: bars of turnover importance in the
        order of its ranking (best at the top), filled when the importance p-value is at most
        `alpha`, collinear variables marked "≈". Or a table with one row per variable (a vector
        fit's ``table``, say): names from column `label` if present, else the index; numeric
        column `value` (no missing values) and, unless `pvalue` is None, column `pvalue`
        (missing counts as not significant); bars sorted by `value`, largest at the top.
    value : str, optional
        Column of the bar lengths: default "importance" for a ranking result, "r2" for a table.
    pvalue : str or None, default "pvalue"
        Column of p-values of a table (a ranking result uses ``importance_pvalue`` unless
        another column is named here); None draws every bar filled without a legend.
    alpha : float, default 0.05
    label : str, default "variable"
        Column of a table holding the variable names (the index is used when it is absent).
    top : int, optional
        Draw only the `top` highest-ranked variables.
    xlabel, title : str, optional
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Default width 5.8 in, height growing with the number of bars.

    Returns
    -------
    matplotlib.axes.Axes
        One bar per row (``_gr:bars`` container, top to bottom in ranking order), each
        annotated with its value and p-value.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import plot
    >>> t = pd.DataFrame({"variable": ["Cu", "sand"], "r2": [0.5, 0.1], "pvalue": [0.001, 0.4]})
    >>> ax = plot.ranking(t)
    """
    alpha = check_alpha(alpha)
    top = _check_top(top)
    ranked = hasattr(table, "sort_rule") and isinstance(getattr(table, "table", None),
                                                        pd.DataFrame)
    if ranked:
        value = "importance" if value is None else value
        pvalue = "importance_pvalue" if pvalue == "pvalue" else pvalue
        source = table.table
    else:
        value = "r2" if value is None else value
        source = table
    if not isinstance(value, str):
        raise InputError(f"`value` must be a column name; got {value!r}.")
    required = [value] + ([pvalue] if pvalue is not None else [])
    tb = frame(source, "table", required, finite=[value],
               numeric=[pvalue] if pvalue is not None else [])
    if not ranked:
        tb = tb.sort_values(value, ascending=False, kind="stable")
    if top is not None:
        tb = tb.head(top)
    names = _row_labels(tb, None if ranked else label)
    flagged = tb["collinear"].to_numpy(dtype=bool) if ranked and "collinear" in tb else \
        np.zeros(len(tb), dtype=bool)
    names = [n + (COLLINEAR_MARK if f else "") for n, f in zip(names, flagged, strict=True)]
    vals = tb[value].to_numpy()
    sig = significant(tb[pvalue], alpha) if pvalue is not None else np.ones(len(tb), bool)
    n = len(tb)
    with canvas(ax, check_figsize(figsize, (5.8, 1.1 + 0.27 * n))) as ax:
        ax.grid(axis="y", visible=False)
        pos = np.arange(n)[::-1]
        colour = PALETTE[0]
        ax.barh(pos, vals, height=0.62, color=[colour if s else HOLLOW for s in sig],
                edgecolor=colour, linewidth=1.0, zorder=2, label="_gr:bars")
        ax.set_yticks(pos, labels=names, parse_math=False)
        ax.tick_params(axis="y", length=0)
        ax.spines["left"].set_visible(False)
        ax.axvline(0.0, color=MUTED, lw=0.8, zorder=3)
        span = float(np.max(np.abs(vals))) if n else 1.0
        ps = tb[pvalue] if pvalue is not None else [np.nan] * n
        for p_, v, row_p in zip(pos, vals, ps, strict=True):
            label_text = format_number(float(v))
            if pvalue is not None:
                label_text += f"  ({format_p(float(row_p))})"
            ax.annotate(label_text, (v, p_), xytext=(3 if v >= 0 else -3, 0),
                        textcoords="offset points", ha="left" if v >= 0 else "right",
                        va="center", fontsize=6.3, color=MUTED)
        lo = min(0.0, float(vals.min())) if n else 0.0
        hi = max(0.0, float(vals.max())) if n else 1.0
        pad = 0.38 * (span or 1.0)
        ax.set_xlim(lo - (pad if lo < 0 else 0.0), hi + pad)
        ax.set_ylim(-0.7, n - 0.3)
        default_x = "Turnover importance (height of the fitted function)" \
            if ranked and value == "importance" else VALUE_NAMES.get(value, value)
        ax.set_xlabel(text(xlabel, 60) if xlabel is not None else default_x, parse_math=False)
        set_title(ax, title, "Ranking of variables", [f"{n} variables"])
        handles: list[Any] = []
        if pvalue is not None:
            handles += [Patch(facecolor=colour, edgecolor=colour, label=f"p ≤ {alpha:g}"),
                        Patch(facecolor=HOLLOW, edgecolor=colour, label=f"p > {alpha:g}")]
        if flagged.any():
            handles.append(Line2D([], [], ls="none", label="≈ collinear with another variable"))
        place_legend(ax, handles, outside="lower center", ncols=min(len(handles), 3))
    return ax


# --------------------------------------------------------------------------------------------
# turnover curves


def _curve_parts(model: Any) -> tuple[dict[str, pd.DataFrame], pd.DataFrame | None]:
    """Curves by variable, and the model's per-predictor table (None for a plain table)."""
    if hasattr(model, "turnover") and hasattr(model.turnover, "curves"):
        model = model.turnover  # a ranking result: its turnover model
    if hasattr(model, "curves") and isinstance(getattr(model, "table", None), pd.DataFrame):
        curves, table = model.curves, model.table
    else:
        curves, table = model, None
    cv = frame(curves, "curves", ["variable", "value", "turnover"],
               finite=["value", "turnover"])
    parts = {str(k): g.sort_values("value", kind="stable")
             for k, g in cv.groupby("variable", sort=False)}
    return parts, table


def _mark_steepest(ax: Axes, g: pd.DataFrame, low: float, high: float, colour: str) -> None:
    """The stretch holding half the curve's turnover: a band, a bold segment, its ends."""
    if not (math.isfinite(low) and math.isfinite(high)):
        return
    x, y = g["value"].to_numpy(), g["turnover"].to_numpy()
    ax.axvspan(low, high, color=ACCENT, alpha=0.10, linewidth=0, zorder=0.5)
    inside = (x >= low) & (x <= high)
    xs = np.concatenate([[low], x[inside], [high]])
    ys = np.interp(xs, x, y)
    ax.plot(xs, ys, color=ACCENT, lw=SIZES["line"] * 2.2, solid_capstyle="butt", zorder=3,
            label="_gr:steepest")


def turnover_curves(
    model: Any,
    *,
    top: int | None = 6,
    ncols: int = 3,
    alpha: float = 0.05,
    ylabel: str = "Cumulative turnover",
    title: str | None = None,
    fig: Figure | SubFigure | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure | SubFigure:
    """Fitted turnover along each gradient, one small panel per predictor, on one scale.

    Parameters
    ----------
    model : TurnoverModelResult, VariableRankingResult or DataFrame
        The result of :func:`gradients.turnover_model` (or of :func:`gradients.rank_variables`,
        whose turnover model is drawn), or a tidy table of curves with columns ``variable``,
        ``value`` (position along the gradient, in its own units) and ``turnover`` (cumulative
        turnover there).
    top : int or None, default 6
        Panels for the `top` predictors of largest importance (None: all).
    ncols : int, default 3
        Panels per row.
    alpha : float, default 0.05
        A model's predictors with p-value at most `alpha` are drawn in full colour, the others
        faded.
    ylabel : str, default "Cumulative turnover"
    title : str, optional
        Default "Turnover along each gradient".
    fig : matplotlib Figure or SubFigure, optional
        Draw the panels into this (sub)figure; by default a new figure in the house style is
        made.
    figsize : (float, float), optional
        Default 2.3 in per panel across, 2.0 in per row.

    Returns
    -------
    matplotlib.figure.Figure or SubFigure
        Panels in order of decreasing importance (the height a curve reaches, its total
        turnover), sharing the vertical scale so that heights compare across predictors. Each
        curve (``_gr:curve``) ends at a tick marking its height (``_gr:height``); for a model,
        the stretch of the gradient that holds half of the curve's turnover (the shortest such
        interval) is shaded and drawn bold (``_gr:steepest``), and the panel's title gives the
        importance and its p-value.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import plot
    >>> c = pd.DataFrame({"variable": ["Cu"] * 3, "value": [0.0, 5.0, 10.0],
    ...                   "turnover": [0.0, 0.4, 0.5]})
    >>> fig = plot.turnover_curves(c)
    """
    alpha = check_alpha(alpha)
    top = _check_top(top)
    parts, table = _curve_parts(model)
    if not isinstance(ncols, int | np.integer) or isinstance(ncols, bool) or ncols < 1:
        raise InputError(f"`ncols` must be a positive integer; got {ncols!r}.")
    total = {k: float(g["turnover"].max() - g["turnover"].min()) for k, g in parts.items()}
    order = sorted(parts, key=lambda k: -total[k])
    if top is not None:
        order = order[:top]
    n = len(order)
    nc = min(int(ncols), n)
    nr = math.ceil(n / nc)
    size = check_figsize(figsize, (0.4 + 2.3 * nc, 0.7 + 2.0 * nr))
    with figure_canvas(fig, size) as fig:
        axs = fig.subplots(nr, nc, sharey=True, squeeze=False)
        for i, ax in enumerate(axs.flat):
            if i >= n:
                ax.set_visible(False)
                continue
            key = order[i]
            g = parts[key]
            row = table.loc[key] if table is not None and key in table.index else None
            strong = row is None or bool(significant(pd.Series([row["pvalue"]]), alpha)[0]) \
                or not math.isfinite(float(row["pvalue"]))
            colour = PALETTE[0] if strong else MUTED
            _panel(ax, g, key, total[key], row, colour)
            if i % nc == 0:
                ax.set_ylabel(text(ylabel, 40), parse_math=False)
        fig.suptitle(text(title, 90) if title is not None else "Turnover along each gradient",
                     x=0.012, ha="left", fontsize=10.0, fontweight="bold", color=INK,
                     parse_math=False)
    return fig


def _panel(ax: Axes, g: pd.DataFrame, key: str, height: float, row: pd.Series | None,
           colour: str) -> None:
    for side in ("left", "bottom"):
        ax.spines[side].set_position(("outward", 3))
    x, y = g["value"].to_numpy(), g["turnover"].to_numpy()
    ax.fill_between(x, y.min(), y, color=colour, alpha=0.12, linewidth=0, zorder=1)
    ax.plot(x, y, color=colour, lw=SIZES["line"], zorder=2, label="_gr:curve")
    if row is not None:
        _mark_steepest(ax, g, float(row["low"]), float(row["high"]), colour)
    # the height: a short tick at the end of the curve, level with its top
    ax.plot([x[-1]], [y.max()], marker=0, markersize=6, color=INK, ls="none", zorder=4,
            label="_gr:height", clip_on=False)
    ax.set_title(f"{text(key, 28)}", loc="left", fontsize=8.5, parse_math=False)
    right = f"height {format_number(height)}"
    if row is not None and math.isfinite(float(row["pvalue"])):
        right += f" · {format_p(float(row['pvalue']))}"
    ax.set_title(right, loc="right", fontsize=6.8, color=MUTED, fontweight="normal",
                 parse_math=False)
    ax.tick_params(labelsize=6.8)
