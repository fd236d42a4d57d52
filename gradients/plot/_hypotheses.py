"""Figures of hypotheses: the effect of each named hypothesis (the report's verdict figure).

The ranking stage's figures are in :mod:`._ranking`, the partition stage's in
:mod:`._partition`.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests:
``_gr:dots-filled``, ``_gr:dots-hollow``, ``_gr:interval``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.lines import Line2D

from .._errors import InputError
from ._kit import (
    VALUE_NAMES,
    canvas,
    check_alpha,
    check_figsize,
    format_number,
    format_p,
    frame,
    place_legend,
    set_title,
    significant,
    text,
)
from ._style import HOLLOW, INK, MUTED, PALETTE, SIZES, group_style

__all__ = ["hypotheses"]


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
