"""Figures of hypotheses and of the stage that ranks them.

:func:`hypotheses` draws the effect of each named hypothesis (the report's verdict figure).
:func:`ranking` and :func:`turnover_curves` are drawn from tidy tables: they were written ahead
of the ranking stage, whose result objects do not exist yet, and take the tables that stage is
planned to produce. (The partition stage's figures are in :mod:`._partition`.)

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests:
``_gr:dots-filled``, ``_gr:dots-hollow``, ``_gr:interval`` (hypotheses), ``_gr:bars`` (ranking,
on the bar container), ``_gr:curve`` (turnover).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
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
from ._style import HOLLOW, INK, MUTED, PALETTE, SIZES, group_style

__all__ = ["hypotheses", "ranking", "turnover_curves"]


def _row_labels(tb: pd.DataFrame, column: str | None) -> list[str]:
    if column is not None and column in tb.columns:
        return [text(v) for v in tb[column].tolist()]
    return [text(v) for v in tb.index.tolist()]


def _no_y_frame(ax: Axes) -> None:
    ax.tick_params(axis="y", length=0)
    ax.spines["left"].set_visible(False)


# --------------------------------------------------------------------------------------------
# hypotheses


def _result_row(name: object, res: object, method: str | None) -> dict[str, Any]:
    if not hasattr(res, "statistic") or not hasattr(res, "pvalue"):
        raise InputError(
            f"The result given for hypothesis {name!r} has no `statistic` and `pvalue`; pass "
            "test results such as those of partial_mantel() or mantel(), or a table."
        )
    row: dict[str, Any] = {"hypothesis": name, "statistic": res.statistic,  # type: ignore[attr-defined]
                           "pvalue": res.pvalue}  # type: ignore[attr-defined]
    if method is not None:
        row["method"] = method
    return row


def _tidy_hypotheses(results: object) -> pd.DataFrame:
    """A table from a mapping of hypothesis -> result, or method -> hypothesis -> result."""
    if isinstance(results, pd.DataFrame):
        return results
    if not isinstance(results, Mapping) or not results:
        raise InputError(
            "`results` must be a table (one row per hypothesis, columns `statistic` and "
            "`pvalue`) or a non-empty mapping of hypothesis name -> test result (or of method "
            f"-> such a mapping); got {type(results).__name__}."
        )
    rows = []
    for key, value in results.items():
        if isinstance(value, Mapping):
            rows += [_result_row(name, res, str(key)) for name, res in value.items()]
        else:
            rows.append(_result_row(key, value, None))
    return pd.DataFrame(rows)


def hypotheses(
    results: pd.DataFrame | Mapping[str, Any],
    *,
    effect: str = "statistic",
    pvalue: str = "pvalue",
    label: str = "hypothesis",
    method: str | None = "method",
    interval: tuple[str, str] | None = None,
    alpha: float = 0.05,
    xlabel: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Effect size of each named hypothesis as a dot, filled when significant.

    Parameters
    ----------
    results : mapping or DataFrame
        Either a mapping of hypothesis name -> test result (anything with ``statistic`` and
        ``pvalue``, e.g. the result of :func:`~gradients.partial_mantel`), or a mapping of
        method name -> such a mapping (each method gets its own colour and shape and the dots
        of one hypothesis are set side by side), or a table: one row per hypothesis (and per
        method) with numeric columns `effect` (no missing values) and `pvalue` (missing counts
        as not significant), names in column `label` (else the index) and, optionally, the
        method in column `method`.
    effect, pvalue : str
        Column names of the effect size and its p-value in a table.
    label : str, default "hypothesis"
        Column with the hypothesis names; the index is used when it is absent.
    method : str or None, default "method"
        Column naming the test (e.g. "partial Mantel"); ignored when absent or None.
    interval : (str, str), optional
        Columns of a table with the lower and upper ends of an interval for the effect, drawn
        as a whisker (``_gr:interval``).
    alpha : float, default 0.05
        Dots with ``pvalue <= alpha`` are filled (``_gr:dots-filled``), the others hollow
        (``_gr:dots-hollow``).
    xlabel : str, optional
        Default "Effect size (<effect>)".
    title : str, optional
        Default "Hypotheses against community turnover".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Default width 6.2 in, height growing with the number of hypotheses.

    Returns
    -------
    matplotlib.axes.Axes
        Hypotheses top to bottom in the order given, a zero line, and each dot annotated with
        its effect and p-value.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import plot
    >>> t = pd.DataFrame({"hypothesis": ["contamination", "texture"],
    ...                   "statistic": [0.31, 0.04], "pvalue": [0.002, 0.51]})
    >>> ax = plot.hypotheses(t)
    """
    alpha = check_alpha(alpha)
    required = [effect, pvalue]
    if interval is not None:
        if not isinstance(interval, tuple | list) or len(interval) != 2:
            raise InputError(f"`interval` must name two columns (lower, upper); got {interval!r}.")
        required += [str(interval[0]), str(interval[1])]
    tb = frame(_tidy_hypotheses(results), "table", required, finite=[effect],
               numeric=[pvalue, *(required[2:])])
    names = _row_labels(tb, label)
    order = list(dict.fromkeys(names))
    has_method = method is not None and method in tb.columns
    meth = [text(m) for m in tb[method].tolist()] if has_method else [""] * len(tb)
    methods = list(dict.fromkeys(meth))
    n_h = len(order)
    size = check_figsize(figsize, (6.2, 1.2 + 0.42 * n_h + 0.08 * n_h * (len(methods) - 1)))
    ypos = {h: n_h - 1 - i for i, h in enumerate(order)}
    step = 0.6 / max(len(methods), 1)
    offsets = {m: (len(methods) - 1) / 2 * step - j * step for j, m in enumerate(methods)}
    eff = tb[effect].to_numpy()
    sig = significant(tb[pvalue], alpha)
    ys = np.array([ypos[h] + offsets[m] for h, m in zip(names, meth, strict=True)])
    with canvas(ax, size) as ax:
        ax.grid(axis="y", visible=False)
        ax.axvline(0.0, color=MUTED, lw=0.8, zorder=1)
        handles: list[Any] = []
        for j, m in enumerate(methods):
            colour, marker = group_style(j) if has_method else (PALETTE[0], "o")
            in_m = np.array([mm == m for mm in meth], dtype=bool)
            if interval is not None:
                lo_, hi_ = tb[required[2]].to_numpy(), tb[required[3]].to_numpy()
                for k in np.flatnonzero(in_m):
                    if math.isfinite(lo_[k]) and math.isfinite(hi_[k]):
                        ax.plot([lo_[k], hi_[k]], [ys[k], ys[k]], color=colour, lw=1.0,
                                zorder=2, label="_gr:interval")
            for filled in (True, False):
                sel = in_m & (sig == filled)
                if sel.any():
                    ax.scatter(eff[sel], ys[sel], s=SIZES["dot"], marker=marker,
                               facecolor=colour if filled else HOLLOW, edgecolor=colour,
                               linewidth=1.2, zorder=3,
                               label="_gr:dots-filled" if filled else "_gr:dots-hollow")
            if has_method:
                handles.append(Line2D([], [], ls="none", marker=marker, color=colour,
                                      markersize=6, label=m))
        for e, y, p in zip(eff, ys, tb[pvalue].to_numpy(), strict=True):
            ax.annotate(f"{format_number(float(e))} ({format_p(float(p))})", (e, y),
                        xytext=(7, 0), textcoords="offset points", ha="left", va="center",
                        fontsize=6.3, color=MUTED)
        ax.set_yticks([ypos[h] for h in order], labels=order, parse_math=False)
        _no_y_frame(ax)
        ax.set_ylim(-0.7, n_h - 0.3)
        lo = min(0.0, float(np.min(eff)))
        hi = max(0.0, float(np.max(eff)))
        if interval is not None:
            ends = tb[required[2:]].to_numpy(dtype=float)
            if np.isfinite(ends).any():
                lo = min(lo, float(np.nanmin(ends)))
                hi = max(hi, float(np.nanmax(ends)))
        span = (hi - lo) or 1.0
        ax.set_xlim(lo - 0.08 * span, hi + 0.45 * span)
        ax.set_xlabel(text(xlabel, 60) if xlabel is not None
                      else f"Effect size ({VALUE_NAMES.get(effect, effect)})", parse_math=False)
        set_title(ax, title, "Hypotheses against community turnover", [f"{n_h} hypotheses"])
        handles += [
            Line2D([], [], ls="none", marker="o", markerfacecolor=INK, markeredgecolor=INK,
                   markersize=6, label=f"p ≤ {alpha:g}"),
            Line2D([], [], ls="none", marker="o", markerfacecolor=HOLLOW, markeredgecolor=INK,
                   markersize=6, label=f"p > {alpha:g}"),
        ]
        place_legend(ax, handles, outside="lower center", ncols=min(len(handles), 4))
    return ax


# --------------------------------------------------------------------------------------------
# ranking of variables


def ranking(
    table: pd.DataFrame,
    *,
    value: str = "r2",
    pvalue: str | None = "pvalue",
    alpha: float = 0.05,
    label: str = "variable",
    top: int | None = None,
    xlabel: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Horizontal bars ranking variables by a value, significant ones filled.

    Parameters
    ----------
    table : DataFrame
        One row per variable, e.g. the ``table`` of a vector fit; the names come from column
        `label` if present, else from the index. Numeric column `value` (no missing values)
        and, unless `pvalue` is None, numeric column `pvalue` (missing counts as not
        significant).
    value : str, default "r2"
        Column to rank by (largest at the top).
    pvalue : str or None, default "pvalue"
        Column of p-values; pass e.g. "pvalue_adjusted" to use corrected ones, or None to
        draw every bar filled without a significance legend.
    alpha : float, default 0.05
        Bars with ``pvalue <= alpha`` are filled, the others hollow.
    label : str, default "variable"
        Column holding the variable names (the index is used when it is absent).
    top : int, optional
        Draw only the `top` highest-ranked variables.
    xlabel : str, optional
        Default: a readable name of `value` ("r²" for ``r2``).
    title : str, optional
        Default "Ranking of variables".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Default width 5.8 in, height growing with the number of bars.

    Returns
    -------
    matplotlib.axes.Axes
        One bar per row (``_gr:bars`` container, top to bottom in decreasing `value`), each
        annotated with its value and p-value.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import plot
    >>> t = pd.DataFrame({"variable": ["Cu", "sand"], "r2": [0.5, 0.1], "pvalue": [0.001, 0.4]})
    >>> ax = plot.ranking(t)
    """
    alpha = check_alpha(alpha)
    if not isinstance(value, str):
        raise InputError(f"`value` must be a column name; got {value!r}.")
    required = [value] + ([pvalue] if pvalue is not None else [])
    tb = frame(table, "table", required, finite=[value],
               numeric=[pvalue] if pvalue is not None else [])
    if top is not None and (not isinstance(top, int | np.integer) or isinstance(top, bool)
                            or top < 1):
        raise InputError(f"`top` must be a positive integer; got {top!r}.")
    tb = tb.sort_values(value, ascending=False, kind="stable")
    if top is not None:
        tb = tb.head(int(top))
    names = _row_labels(tb, label)
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
        _no_y_frame(ax)
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
        ax.set_xlabel(text(xlabel, 60) if xlabel is not None else VALUE_NAMES.get(value, value),
                      parse_math=False)
        set_title(ax, title, "Ranking of variables", [f"{n} variables"])
        if pvalue is not None:
            place_legend(ax, [
                Patch(facecolor=colour, edgecolor=colour, label=f"p ≤ {alpha:g}"),
                Patch(facecolor=HOLLOW, edgecolor=colour, label=f"p > {alpha:g}"),
            ], outside="lower center", ncols=2)
    return ax


# --------------------------------------------------------------------------------------------
# turnover curves and partitions


def turnover_curves(
    curves: pd.DataFrame,
    *,
    ncols: int = 3,
    ylabel: str = "Cumulative turnover",
    title: str | None = None,
    fig: Figure | SubFigure | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure | SubFigure:
    """Fitted turnover along each environmental gradient, one small panel per variable.

    Parameters
    ----------
    curves : DataFrame
        Tidy curves with columns ``variable`` (name of the gradient), ``value`` (position along
        it, in the variable's own units) and ``turnover`` (fitted cumulative turnover at that
        position, numeric); rows of one variable are drawn in order of ``value``. Panels come
        in order of decreasing total turnover (the height reached at the end of the gradient),
        a usual measure of a variable's importance.
    ncols : int, default 3
        Panels per row.
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
        Panels sharing the vertical scale (so heights compare across variables), each with its
        curve (``_gr:curve``) and the total turnover in its title.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import plot
    >>> c = pd.DataFrame({"variable": ["Cu"] * 3, "value": [0.0, 5.0, 10.0],
    ...                   "turnover": [0.0, 0.4, 0.5]})
    >>> fig = plot.turnover_curves(c)
    """
    cv = frame(curves, "curves", ["variable", "value", "turnover"], finite=["value", "turnover"])
    if not isinstance(ncols, int | np.integer) or isinstance(ncols, bool) or ncols < 1:
        raise InputError(f"`ncols` must be a positive integer; got {ncols!r}.")
    parts = {
        k: g.sort_values("value", kind="stable") for k, g in cv.groupby("variable", sort=False)
    }
    total = {k: float(g["turnover"].max() - g["turnover"].min()) for k, g in parts.items()}
    order = sorted(parts, key=lambda k: -total[k])
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
            for side in ("left", "bottom"):
                ax.spines[side].set_position(("outward", 3))
            ax.fill_between(g["value"].to_numpy(), g["turnover"].min(), g["turnover"].to_numpy(),
                            color=PALETTE[0], alpha=0.12, linewidth=0, zorder=1)
            ax.plot(g["value"].to_numpy(), g["turnover"].to_numpy(), color=PALETTE[0],
                    lw=SIZES["line"], zorder=2, label="_gr:curve")
            ax.set_title(f"{text(key, 28)}", loc="left", fontsize=8.5, parse_math=False)
            ax.set_title(f"total {format_number(total[key])}", loc="right", fontsize=6.8,
                         color=MUTED, fontweight="normal")
            ax.tick_params(labelsize=6.8)
            if i % nc == 0:
                ax.set_ylabel(text(ylabel, 40), parse_math=False)
        fig.suptitle(text(title, 90) if title is not None else "Turnover along each gradient",
                     x=0.012, ha="left", fontsize=10.0, fontweight="bold", color=INK,
                     parse_math=False)
    return fig
