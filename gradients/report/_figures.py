"""Figures of a ``gradients`` report, drawn from plain pandas tables.

Every function here takes :class:`pandas.DataFrame` / :class:`pandas.Series` inputs with the
columns named in its docstring (so it does not depend on the analysis result classes), builds a
:class:`matplotlib.figure.Figure` in the house style of :mod:`gradients.report._style` and returns
it. No pyplot, no global state, no GUI backend: figures are made with ``Figure(...)`` directly.
:func:`save_figure` writes a figure as PNG and SVG with byte-stable output.

Input contract shared by all functions
--------------------------------------
- Required columns must be present; a missing column raises
  :class:`gradients._errors.InputError` naming it (``err.columns`` holds the names).
- Coordinate and statistic columns must be numeric (numbers stored as text are converted); a
  value that is not a number, or a missing value where one is required, raises an
  :class:`InputError` naming the column and the rows.
- Extra columns are ignored. Row labels (the index) are kept as site, variable or taxon names.
- User text (site, variable, taxon, level names) is drawn as typed: ``$`` is never parsed as
  mathematics, line breaks become spaces and names longer than 40 characters are shortened
  with an ellipsis.
- Significance is decided as ``pvalue <= alpha``; a missing p-value counts as not significant.
  Significant marks are filled, the others hollow (white face), so the distinction survives a
  greyscale print.
- The plotted artists carry labels starting with ``_gr:`` (hidden from legends), so programs and
  tests can find them: ``_gr:sites``, ``_gr:arrow``, ``_gr:arrow-faded``, ``_gr:centroids``,
  ``_gr:taxa``, ``_gr:surface``, ``_gr:contours``, ``_gr:pairs``, ``_gr:fit``,
  ``_gr:classline``, ``_gr:classes-filled``, ``_gr:classes-hollow``, ``_gr:bars``,
  ``_gr:dots-filled``, ``_gr:dots-hollow``, ``_gr:interval``, ``_gr:halving``,
  ``_gr:halving-point``, ``_gr:curve``, ``_gr:fractions`` (bar containers carry the label
  for ``_gr:bars`` and ``_gr:fractions``).
- Every function takes keyword-only ``title=`` and ``figsize=`` (inches) besides its own
  options; axis and note text is set from the options, never from global state.

References
----------
.. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier,
   Amsterdam. (Biplots, ch. 9; Mantel correlograms, ch. 13.)
.. [2] Kruskal, J. B. (1964). Multidimensional scaling by optimizing goodness of fit to a
   nonmetric hypothesis. Psychometrika 29, 1-27. (The Shepard diagram of an NMDS.)
.. [3] Nekola, J. C. & White, P. S. (1999). The distance decay of similarity in biogeography and
   ecology. Journal of Biogeography 26, 867-878.
.. [4] Oden, N. L. & Sokal, R. R. (1986). Directional autocorrelation: an extension of spatial
   correlograms to two dimensions. Systematic Zoology 35, 608-617.
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, Literal, ParamSpec

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrowPatch, Patch
from matplotlib.ticker import MaxNLocator

from .._errors import InputError, format_items
from ..plot._style import (
    ACCENT,
    FADED,
    GRID,
    HOLLOW,
    INK,
    MUTED,
    PALETTE,
    SEQUENTIAL_CMAP,
    SIZES,
    group_style,
    house_style,
)

__all__ = [
    "correlogram",
    "distance_decay_plot",
    "hypothesis_plot",
    "ordination_biplot",
    "partition_plot",
    "ranking_plot",
    "save_figure",
    "shepard_diagram",
    "surface_contours",
    "turnover_curves",
]

P = ParamSpec("P")

#: Above this many points a scatter is rasterised inside the SVG (keeps files small).
RASTER_THRESHOLD = 1500
#: Longest user label drawn in full.
LABEL_LIMIT = 40
#: Readable axis names for common value columns.
VALUE_NAMES = {
    "r2": "r²",
    "r2_adjusted": "adjusted R²",
    "statistic": "statistic",
    "rho": "Spearman ρ",
    "r": "r",
}


# --------------------------------------------------------------------------------------------
# validation helpers


def _frame(
    obj: object,
    name: str,
    required: Sequence[str],
    *,
    numeric: Sequence[str] = (),
    finite: Sequence[str] = (),
    min_rows: int = 1,
) -> pd.DataFrame:
    """Check a table: a DataFrame with ``required`` columns; return a copy with numeric columns.

    ``numeric`` columns are converted to float (text that is not a number is an error);
    ``finite`` columns must also hold no missing or infinite value.
    """
    if not isinstance(obj, pd.DataFrame):
        raise InputError(
            f"`{name}` must be a pandas DataFrame with columns {format_items(required)}; "
            f"got {type(obj).__name__}."
        )
    missing = [c for c in required if c not in obj.columns]
    if missing:
        raise InputError(
            f"`{name}` is missing column(s) {format_items(missing)}; it needs "
            f"{format_items(required)} (found {format_items(map(str, obj.columns)) or 'none'}). "
            "Rename the columns or pass the table these columns come from.",
            columns=missing,
        )
    if len(obj) < min_rows:
        raise InputError(
            f"`{name}` has {len(obj)} row(s); at least {min_rows} are needed to draw it."
        )
    df = obj.copy()
    for col in dict.fromkeys([*numeric, *finite]):
        values = pd.to_numeric(df[col], errors="coerce")
        bad = values.isna() & df[col].notna()
        if bool(bad.any()):
            rows = list(df.index[bad.to_numpy()])
            raise InputError(
                f"`{name}` column {col!r} must hold numbers; row(s) {format_items(rows)} do not. "
                "Fix those cells or drop the rows.",
                columns=[col],
                sites=rows,
            )
        df[col] = values.astype(float)
    for col in finite:
        arr = df[col].to_numpy(dtype=float)
        bad = ~np.isfinite(arr)
        if bad.any():
            rows = list(df.index[bad])
            raise InputError(
                f"`{name}` column {col!r} has missing or infinite value(s) in row(s) "
                f"{format_items(rows)}; drop those rows before plotting.",
                columns=[col],
                sites=rows,
            )
    return df


def _check_alpha(alpha: object) -> float:
    ok = isinstance(alpha, int | float | np.floating) and not isinstance(alpha, bool)
    if not ok or not 0 < float(alpha) < 1:  # type: ignore[arg-type]
        raise InputError(f"`alpha` must be a number between 0 and 1; got {alpha!r}.")
    return float(alpha)  # type: ignore[arg-type]


def _check_axes(axes: object) -> tuple[str, str]:
    if (
        not isinstance(axes, tuple | list)
        or len(axes) != 2
        or not all(isinstance(a, str) for a in axes)
        or axes[0] == axes[1]
    ):
        raise InputError(
            f"`axes` must be two different column names such as ('axis1', 'axis2'); got {axes!r}."
        )
    return str(axes[0]), str(axes[1])


def _check_figsize(figsize: object, default: tuple[float, float]) -> tuple[float, float]:
    if figsize is None:
        return default
    try:
        w, h = (float(v) for v in figsize)  # type: ignore[union-attr]
    except (TypeError, ValueError):
        w = h = float("nan")
    if not (math.isfinite(w) and math.isfinite(h) and 0 < w <= 40 and 0 < h <= 40):
        raise InputError(
            f"`figsize` must be (width, height) in inches, each in (0, 40]; got {figsize!r}."
        )
    return w, h


def _check_number(value: object, name: str, *, positive: bool = False) -> float:
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        v = float("nan")
    if isinstance(value, bool) or not math.isfinite(v) or (positive and v <= 0):
        kind = "a positive finite number" if positive else "a finite number"
        raise InputError(f"`{name}` must be {kind}; got {value!r}.")
    return v


def _text(value: object, limit: int = LABEL_LIMIT) -> str:
    """User text as drawn: control characters become spaces, long names are shortened."""
    text = re.sub(r"[\x00-\x1f\x7f]+", " ", str(value)).strip()
    if len(text) > limit:
        text = text[: limit - 1].rstrip() + "…"
    return text


def _significant(pvalues: pd.Series | np.ndarray, alpha: float) -> np.ndarray:
    p = np.asarray(pd.to_numeric(pd.Series(pvalues), errors="coerce"), dtype=float)
    return np.nan_to_num(p, nan=np.inf) <= alpha


def _format_number(v: float) -> str:
    if not math.isfinite(v):
        return "n/a"
    if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e5):
        return f"{v:.2e}"
    return f"{v:.3g}" if abs(v) >= 1 else f"{v:.2f}" if abs(v) >= 0.095 else f"{v:.3f}"


def _format_p(p: float) -> str:
    if not math.isfinite(p):
        return "p n/a"
    return f"p = {p:.3f}" if p >= 0.001 else f"p = {p:.1e}"


def _axis_title(column: str) -> str:
    m = re.fullmatch(r"axis(\d+)", column)
    return f"Axis {m.group(1)}" if m else _text(column)


def _unit(label: str, unit: str | None) -> str:
    return f"{label} ({_text(unit, 20)})" if unit else label


# --------------------------------------------------------------------------------------------
# figure scaffolding


def _styled(func: Callable[P, Figure]) -> Callable[P, Figure]:
    """Build the figure inside the house style and lay it out once before returning it."""

    @functools.wraps(func)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> Figure:
        with house_style():
            fig = func(*args, **kwargs)
            # Tick labels are created lazily; drawing once here makes them in the house style.
            fig.draw_without_rendering()
        return fig

    return wrapper


def _new_axes(figsize: tuple[float, float]) -> tuple[Figure, Axes]:
    fig = Figure(figsize=figsize, layout="constrained")
    ax = fig.add_subplot()
    for side in ("left", "bottom"):
        ax.spines[side].set_position(("outward", 4))
    return fig, ax


def _set_title(ax: Axes, title: str | None, default: str, notes: Sequence[str] = ()) -> None:
    ax.set_title(_text(title, 90) if title is not None else default, loc="left")
    notes = [n for n in notes if n]
    if notes:
        ax.set_title(
            "  ·  ".join(notes),
            loc="right",
            fontsize=SIZES["note"],
            color=MUTED,
            fontweight="normal",
        )


def _point_alpha(n: int) -> float:
    return float(np.clip(25.0 / math.sqrt(max(n, 1)), 0.08, 0.85))


def _legend_right(fig: Figure, handles: list[Any]) -> None:
    if handles:
        fig.legend(handles=handles, loc="outside right upper")


# --------------------------------------------------------------------------------------------
# 1. ordination biplot


def _scatter_pairs(ax: Axes, x: np.ndarray, y: np.ndarray) -> None:
    """Site pairs as small translucent points, rasterised in SVG when there are many."""
    n = len(x)
    ax.scatter(x, y, s=7 if n > 300 else 12, marker="o", color=PALETTE[0],
               alpha=_point_alpha(n), linewidth=0, zorder=2, label="_gr:pairs",
               rasterized=n > RASTER_THRESHOLD)


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


@_styled
def ordination_biplot(
    scores: pd.DataFrame,
    *,
    arrows: pd.DataFrame | None = None,
    centroids: pd.DataFrame | None = None,
    groups: pd.Series | None = None,
    taxa: pd.DataFrame | None = None,
    labels: bool = False,
    title: str | None = None,
    axes: tuple[str, str] = ("axis1", "axis2"),
    explained: Sequence[float] | None = None,
    stress: float | None = None,
    axis_titles: tuple[str, str] | None = None,
    arrow_scale: float | Literal["auto"] = "auto",
    alpha: float = 0.05,
    taxon_labels: bool | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Sites in ordination space, with environmental arrows, factor centroids and taxa.

    Parameters
    ----------
    scores : DataFrame
        Site scores, one row per site (index = site labels), with numeric columns ``axis1`` and
        ``axis2`` (or the two columns named in `axes`); other columns are ignored. No missing
        values.
    arrows : DataFrame, optional
        Fitted environmental vectors, one row per variable (index = variable names, drawn at the
        arrow tips), with columns ``axis1``, ``axis2`` giving the arrow tip (e.g. direction
        cosines times sqrt(r2)) and optionally ``pvalue``: arrows with ``pvalue > alpha`` or a
        missing p-value are faded (grey, dashed, open head).
    centroids : DataFrame, optional
        Factor-level centroids with columns ``factor``, ``level``, ``axis1``, ``axis2`` (one row
        per level). Labelled by level, or ``factor: level`` when several factors are shown.
    groups : Series, optional
        Group of each site, indexed by site label; every site in `scores` must be present
        (extra sites are ignored). Sites are coloured *and* shaped by group; missing values
        form a grey "no group" class. Groups are listed in order of first appearance, or in
        category order for a categorical Series, or in increasing order when all are numbers.
    taxa : DataFrame, optional
        Taxon scores, one row per taxon (index = taxon names) with columns ``axis1``,
        ``axis2``, drawn as small grey crosses.
    labels : bool, default False
        Write each site's label next to its point.
    title : str, optional
        Figure title; default "Ordination of sites".
    axes : (str, str), default ("axis1", "axis2")
        The two score columns to plot (the same columns are read from `arrows`, `centroids`
        and `taxa`).
    explained : (float, float), optional
        Proportion of variation (0 to 1) explained by the two plotted axes, e.g. from a PCoA;
        shown in the axis titles as "Axis 1 (34.2 %)".
    stress : float, optional
        NMDS stress, shown in the note beside the title.
    axis_titles : (str, str), optional
        Axis titles to use as given (overrides `explained`).
    arrow_scale : float or "auto", default "auto"
        One common multiplier applied to every arrow tip. "auto" stretches the longest arrow to
        85 % of the farthest site from the origin (the multiplier is shown in the note); pass
        1.0 to draw the tips exactly as given.
    alpha : float, default 0.05
        Significance level for fading arrows.
    taxon_labels : bool, optional
        Write taxon names (italic) beside their crosses; default: only when there are 30 taxa
        or fewer.
    figsize : (float, float), optional
        Width and height in inches; default (6.6, 5.0).

    Returns
    -------
    matplotlib.figure.Figure
        One axes with equal aspect ratio (a unit on axis 1 has the length of a unit on axis 2,
        so distances and angles read true) and, when anything is grouped or tested, a legend on
        the right.

    Raises
    ------
    InputError
        A table lacks a required column, holds non-numeric or missing coordinates, or `groups`
        lacks some sites.

    Notes
    -----
    Arrow tips from vector fitting are conventionally the direction cosines scaled by
    sqrt(r2), then stretched by one common multiplier to fit the plot ([1]_, ch. 9; Kantvilas &
    Minchin 1989); the multiplier changes lengths on the page, never their ratios or angles.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.

    Examples
    --------
    >>> import pandas as pd
    >>> s = pd.DataFrame({"axis1": [0.1, -0.2, 0.3], "axis2": [0.0, 0.2, -0.1]},
    ...                  index=["A", "B", "C"])
    >>> fig = ordination_biplot(s, stress=0.08)
    """
    a1, a2 = _check_axes(axes)
    alpha = _check_alpha(alpha)
    size = _check_figsize(figsize, (6.6, 5.0))
    sc = _frame(scores, "scores", [a1, a2], finite=[a1, a2])
    arr = None
    if arrows is not None:
        arr = _frame(arrows, "arrows", [a1, a2], finite=[a1, a2], min_rows=0)
        if "pvalue" in arr.columns:
            arr["pvalue"] = pd.to_numeric(arr["pvalue"], errors="coerce")
    cen = None
    if centroids is not None:
        cen = _frame(
            centroids, "centroids", ["factor", "level", a1, a2], finite=[a1, a2], min_rows=0
        )
    tax = None
    if taxa is not None:
        tax = _frame(taxa, "taxa", [a1, a2], finite=[a1, a2], min_rows=0)
    grp = None
    if groups is not None:
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
        grp = groups.reindex(sc.index)
    if explained is not None:
        try:
            ex = [float(v) for v in explained]
        except (TypeError, ValueError):
            ex = []
        if len(ex) != 2 or not all(0 <= v <= 1 for v in ex):
            raise InputError(
                "`explained` must be two proportions between 0 and 1 (one per plotted axis); "
                f"got {explained!r}."
            )
    if axis_titles is not None and (
        not isinstance(axis_titles, tuple | list) or len(axis_titles) != 2
    ):
        raise InputError(f"`axis_titles` must be two strings; got {axis_titles!r}.")
    if stress is not None:
        stress = _check_number(stress, "stress")

    fig, ax = _new_axes(size)
    ax.set_aspect("equal", adjustable="datalim")
    ax.axhline(0.0, color=GRID, lw=0.9, zorder=0.6)
    ax.axvline(0.0, color=GRID, lw=0.9, zorder=0.6)
    x = sc[a1].to_numpy()
    y = sc[a2].to_numpy()
    dense = len(sc) > 300
    s_site = SIZES["site_dense"] if dense else SIZES["site"]
    handles: list[Any] = []

    # sites
    if grp is None:
        ax.scatter(
            x,
            y,
            s=s_site,
            marker="o",
            facecolor=PALETTE[0],
            edgecolor="white",
            linewidth=0.5,
            zorder=3,
            label="_gr:sites",
            rasterized=len(sc) > RASTER_THRESHOLD,
        )
    else:
        missing = grp.isna().to_numpy()
        present = grp[~missing]
        if isinstance(grp.dtype, pd.CategoricalDtype):
            levels = [c for c in grp.cat.categories if bool((present == c).any())]
        else:
            levels = list(dict.fromkeys(present.tolist()))
            if all(isinstance(v, int | float | np.number) for v in levels):
                levels = sorted(levels)
        for i, level in enumerate(levels):
            mask = (grp == level).fillna(False).to_numpy(dtype=bool) & ~missing
            colour, marker = group_style(i)
            ax.scatter(
                x[mask],
                y[mask],
                s=s_site,
                marker=marker,
                facecolor=colour,
                edgecolor="white",
                linewidth=0.5,
                zorder=3,
                label="_gr:sites",
                rasterized=len(sc) > RASTER_THRESHOLD,
            )
            handles.append(
                Line2D(
                    [],
                    [],
                    ls="none",
                    marker=marker,
                    color=colour,
                    markeredgecolor="white",
                    markersize=6,
                    label=_text(level),
                )
            )
        if missing.any():
            ax.scatter(
                x[missing],
                y[missing],
                s=s_site,
                marker="o",
                facecolor=HOLLOW,
                edgecolor=MUTED,
                linewidth=0.8,
                zorder=3,
                label="_gr:sites",
            )
            handles.append(
                Line2D(
                    [],
                    [],
                    ls="none",
                    marker="o",
                    markerfacecolor=HOLLOW,
                    markeredgecolor=MUTED,
                    markersize=6,
                    label="no group",
                )
            )
    if labels:
        for lab, xi, yi in zip(sc.index, x, y, strict=True):
            ax.annotate(
                _text(lab, 24),
                (xi, yi),
                xytext=(3, 3),
                textcoords="offset points",
                fontsize=6.0,
                color=MUTED,
                zorder=4,
            )

    # taxa
    if tax is not None and len(tax):
        tx, ty = tax[a1].to_numpy(), tax[a2].to_numpy()
        ax.scatter(
            tx,
            ty,
            s=SIZES["taxon"],
            marker="+",
            color=MUTED,
            linewidth=0.8,
            zorder=2.5,
            label="_gr:taxa",
        )
        show = taxon_labels if taxon_labels is not None else len(tax) <= 30
        if show:
            for lab, xi, yi in zip(tax.index, tx, ty, strict=True):
                ax.annotate(
                    _text(lab, 28),
                    (xi, yi),
                    xytext=(2, -2),
                    textcoords="offset points",
                    fontsize=6.0,
                    color=MUTED,
                    style="italic",
                    va="top",
                    zorder=2.5,
                )
        handles.append(
            Line2D([], [], ls="none", marker="+", color=MUTED, markersize=6, label="taxa")
        )

    notes: list[str] = []
    if stress is not None:
        notes.append(f"stress {stress:.3f}")

    # arrows
    if arr is not None and len(arr):
        tips = arr[[a1, a2]].to_numpy(dtype=float)
        if arrow_scale == "auto":
            r_sites = float(np.max(np.hypot(x, y))) if len(x) else 0.0
            r_arrows = float(np.max(np.hypot(tips[:, 0], tips[:, 1])))
            mult = 0.85 * r_sites / r_arrows if r_sites > 0 and r_arrows > 0 else 1.0
            notes.append(f"arrows ×{mult:.3g}")
        else:
            mult = _check_number(arrow_scale, "arrow_scale", positive=True)
        tips = tips * mult
        sig = (
            _significant(arr["pvalue"], alpha)
            if "pvalue" in arr.columns
            else np.ones(len(arr), dtype=bool)
        )
        for (tx_, ty_), ok in zip(tips, sig, strict=True):
            colour = INK if ok else FADED
            patch = FancyArrowPatch(
                (0.0, 0.0),
                (tx_, ty_),
                arrowstyle="-|>,head_length=5,head_width=2.6"
                if ok
                else "->,head_length=5,head_width=2.6",
                linestyle="-" if ok else (0, (3.0, 2.0)),
                linewidth=SIZES["arrow_width"],
                color=colour,
                shrinkA=0,
                shrinkB=0,
                mutation_scale=1.0,
                zorder=5 if ok else 4.5,
                label="_gr:arrow" if ok else "_gr:arrow-faded",
            )
            ax.add_patch(patch)
        # one label per group of arrows whose tips nearly coincide (strongly correlated
        # variables), names stacked, so that labels do not print over each other
        for members in _tip_groups(tips, sig):
            lead = max(members, key=lambda i: math.hypot(*tips[i]))
            tx_, ty_ = tips[lead]
            ok = bool(sig[lead])
            norm = math.hypot(tx_, ty_) or 1.0
            ux, uy = tx_ / norm, ty_ / norm
            ax.annotate(
                "\n".join(_text(arr.index[i], 28) for i in members),
                (tx_, ty_),
                xytext=(5 * ux, 5 * uy),
                textcoords="offset points",
                ha="left" if ux > 0.25 else "right" if ux < -0.25 else "center",
                va="bottom" if uy > 0.25 else "top" if uy < -0.25 else "center",
                fontsize=SIZES["label"],
                color=INK if ok else MUTED,
                fontweight="bold" if ok else "normal",
                zorder=6,
            )
        # arrows are patches: extend the data limits by hand so every tip and label fits
        ax.update_datalim(np.vstack([tips * 1.12, [[0.0, 0.0]]]))
        if "pvalue" in arr.columns:
            handles.append(
                Line2D([], [], color=INK, lw=SIZES["arrow_width"], label=f"vector, p ≤ {alpha:g}")
            )
            handles.append(
                Line2D(
                    [],
                    [],
                    color=FADED,
                    lw=SIZES["arrow_width"],
                    ls=(0, (3.0, 2.0)),
                    label=f"vector, p > {alpha:g}",
                )
            )
        else:
            handles.append(Line2D([], [], color=INK, lw=SIZES["arrow_width"], label="vector"))

    # centroids
    if cen is not None and len(cen):
        several = cen["factor"].nunique(dropna=False) > 1
        cx, cy = cen[a1].to_numpy(), cen[a2].to_numpy()
        ax.scatter(
            cx,
            cy,
            s=SIZES["centroid"],
            marker="P",
            facecolor=INK,
            edgecolor="white",
            linewidth=0.8,
            zorder=6,
            label="_gr:centroids",
        )
        for (_, row), xi, yi in zip(cen.iterrows(), cx, cy, strict=True):
            text = (
                f"{_text(row['factor'], 18)}: {_text(row['level'], 22)}"
                if several
                else _text(row["level"], 28)
            )
            ax.annotate(
                text,
                (xi, yi),
                xytext=(5, -5),
                textcoords="offset points",
                fontsize=SIZES["label"],
                color=INK,
                va="top",
                zorder=6,
            )
        handles.append(
            Line2D(
                [],
                [],
                ls="none",
                marker="P",
                color=INK,
                markeredgecolor="white",
                markersize=8,
                label="factor centroid",
            )
        )

    if axis_titles is not None:
        xt, yt = (_text(t, 60) for t in axis_titles)
    elif explained is not None:
        xt = f"{_axis_title(a1)} ({100 * float(explained[0]):.1f} %)"
        yt = f"{_axis_title(a2)} ({100 * float(explained[1]):.1f} %)"
    else:
        xt, yt = _axis_title(a1), _axis_title(a2)
    ax.set_xlabel(xt)
    ax.set_ylabel(yt)
    notes.append(f"{len(sc)} sites")
    _set_title(ax, title, "Ordination of sites", notes)
    ax.autoscale_view()
    _fit_labels(ax)
    _legend_right(fig, handles)
    return fig


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
# 2. fitted surface


@_styled
def surface_contours(
    scores: pd.DataFrame,
    grid: pd.DataFrame,
    *,
    variable: str,
    levels: int | Sequence[float] = 8,
    contours: pd.DataFrame | None = None,
    axes: tuple[str, str] = ("axis1", "axis2"),
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """A fitted surface of one variable over the ordination, as contours under the sites.

    Parameters
    ----------
    scores : DataFrame
        Site scores (index = site labels) with numeric columns ``axis1``, ``axis2`` (or those
        named in `axes`); no missing values.
    grid : DataFrame
        The fitted surface on a rectangular lattice, tidy: one row per grid node with numeric
        columns ``x`` (position on the first plotted axis), ``y`` (on the second) and
        ``fitted`` (the fitted value; NaN outside the convex hull of the sites, where nothing
        is drawn). Each (x, y) pair appears once; lattice nodes that are absent count as NaN.
        At least two distinct x and two distinct y values are needed.
    variable : str
        Name of the fitted variable, for the title and the colour bar.
    levels : int or sequence of float, default 8
        Either the approximate number of contour intervals (rounded levels are chosen) or the
        increasing contour levels themselves.
    contours : DataFrame, optional
        Contour lines computed elsewhere (e.g. the contour-line table of the report), with
        columns ``level`` (value of the line), ``path`` (identifier of one connected line) and
        ``x``, ``y`` (its vertices, in drawing order). When given, these lines are drawn
        instead of lines traced from `grid`; the filled bands still come from `grid`.
    axes : (str, str), default ("axis1", "axis2")
        The score columns matching the grid's ``x`` and ``y``.
    title : str, optional
        Default "<variable> over the ordination".
    figsize : (float, float), optional
        Default (6.2, 4.9).

    Returns
    -------
    matplotlib.figure.Figure
        Filled contour bands (light = low, dark = high, lightness monotonic so a greyscale
        print keeps the order), labelled contour lines, the sites as hollow circles and a
        colour bar, on an equal-aspect axes.

    Raises
    ------
    InputError
        Missing columns, non-numeric values, duplicate grid nodes, too small a grid, or no
        fitted value at all.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> s = pd.DataFrame({"axis1": [-1.0, 0.0, 1.0], "axis2": [0.0, 1.0, -1.0]})
    >>> x, y = np.meshgrid(np.linspace(-1, 1, 5), np.linspace(-1, 1, 5))
    >>> g = pd.DataFrame({"x": x.ravel(), "y": y.ravel(), "fitted": (x + y).ravel()})
    >>> fig = surface_contours(s, g, variable="Cu", levels=4)
    """
    a1, a2 = _check_axes(axes)
    size = _check_figsize(figsize, (6.2, 4.9))
    if not isinstance(variable, str) or not variable:
        raise InputError(f"`variable` must be the name of the fitted variable; got {variable!r}.")
    sc = _frame(scores, "scores", [a1, a2], finite=[a1, a2])
    gr = _frame(
        grid, "grid", ["x", "y", "fitted"], finite=["x", "y"], numeric=["fitted"], min_rows=4
    )
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
    z[np.searchsorted(ys, gr["y"].to_numpy()), np.searchsorted(xs, gr["x"].to_numpy())] = gr[
        "fitted"
    ].to_numpy()
    finite = np.isfinite(z)
    if not finite.any():
        raise InputError(
            "`grid` column 'fitted' holds no finite value; the surface cannot be drawn."
        )
    zmin, zmax = float(z[finite].min()), float(z[finite].max())
    if isinstance(levels, int | np.integer) and not isinstance(levels, bool):
        if levels < 1:
            raise InputError(f"`levels` must be a positive integer or a sequence; got {levels}.")
        if zmax > zmin:
            lv = MaxNLocator(nbins=int(levels)).tick_values(zmin, zmax)
            lv = lv[(lv >= zmin - (lv[1] - lv[0])) & (lv <= zmax + (lv[1] - lv[0]))]
        else:
            pad = abs(zmin) * 0.01 or 0.5
            lv = np.array([zmin - pad, zmax + pad])
    else:
        try:
            lv = np.asarray([float(v) for v in levels], dtype=float)  # type: ignore[union-attr]
        except (TypeError, ValueError):
            lv = np.array([])
        if len(lv) < 2 or not np.all(np.isfinite(lv)) or np.any(np.diff(lv) <= 0):
            raise InputError(
                "`levels` must be a positive integer or at least two increasing numbers; "
                f"got {levels!r}."
            )
    con = None
    if contours is not None:
        con = _frame(
            contours,
            "contours",
            ["level", "path", "x", "y"],
            finite=["level", "x", "y"],
            min_rows=0,
        )

    fig, ax = _new_axes(size)
    ax.set_aspect("equal", adjustable="datalim")
    ax.grid(False)
    zm = np.ma.masked_invalid(z)
    filled = ax.contourf(xs, ys, zm, levels=lv, cmap=SEQUENTIAL_CMAP, extend="neither", zorder=1)
    filled.set_label("_gr:surface")
    fmt = _format_number
    if con is None:
        lines = ax.contour(xs, ys, zm, levels=lv, colors=INK, linewidths=SIZES["thin"], zorder=2)
        lines.set_label("_gr:contours")
        ax.clabel(lines, fmt=fmt, fontsize=6.0, inline=True, inline_spacing=2)
    else:
        for _, part in con.groupby("path", sort=False):
            px, py = part["x"].to_numpy(), part["y"].to_numpy()
            ax.plot(px, py, color=INK, lw=SIZES["thin"], zorder=2, label="_gr:contours")
            mid = len(px) // 2
            ax.text(
                px[mid],
                py[mid],
                fmt(float(part["level"].iloc[0])),
                fontsize=6.0,
                color=INK,
                ha="center",
                va="center",
                zorder=2.5,
                bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.8},
            )
    ax.scatter(
        sc[a1].to_numpy(),
        sc[a2].to_numpy(),
        s=SIZES["site"] * 0.8,
        marker="o",
        facecolor=HOLLOW,
        edgecolor=INK,
        linewidth=0.8,
        zorder=3,
        label="_gr:sites",
    )
    bar = fig.colorbar(filled, ax=ax, shrink=0.85, aspect=24, pad=0.02)
    bar.set_label(_text(variable, 40))
    bar.outline.set_visible(False)
    bar.ax.tick_params(length=2.5, color=MUTED)
    ax.set_xlabel(_axis_title(a1))
    ax.set_ylabel(_axis_title(a2))
    _set_title(ax, title, f"{_text(variable)} over the ordination", [f"{len(sc)} sites"])
    return fig


# --------------------------------------------------------------------------------------------
# 3. Shepard diagram


@_styled
def shepard_diagram(
    shepard: pd.DataFrame,
    *,
    stress: float | None = None,
    title: str | None = None,
    xlabel: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Community dissimilarity against distance in the ordination, with the monotone fit.

    Parameters
    ----------
    shepard : DataFrame
        One row per pair of sites, numeric columns ``dissimilarity`` (input dissimilarity),
        ``distance`` (distance between the two sites in the ordination) and ``fitted`` (the
        monotone-regression value for the pair); no missing values.
    stress : float, optional
        Stress of the solution, shown beside the title.
    title : str, optional
        Default "Shepard diagram".
    xlabel : str, optional
        Default "Community dissimilarity" (e.g. pass "Bray-Curtis dissimilarity").
    figsize : (float, float), optional
        Default (4.8, 4.3).

    Returns
    -------
    matplotlib.figure.Figure
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
    >>> import pandas as pd
    >>> t = pd.DataFrame({"dissimilarity": [0.2, 0.5, 0.9], "distance": [0.3, 0.4, 1.1],
    ...                   "fitted": [0.3, 0.4, 1.1]})
    >>> fig = shepard_diagram(t, stress=0.05)
    """
    size = _check_figsize(figsize, (4.8, 4.3))
    sh = _frame(
        shepard,
        "shepard",
        ["dissimilarity", "distance", "fitted"],
        finite=["dissimilarity", "distance", "fitted"],
    )
    if stress is not None:
        stress = _check_number(stress, "stress")
    fig, ax = _new_axes(size)
    n = len(sh)
    _scatter_pairs(ax, sh["dissimilarity"].to_numpy(), sh["distance"].to_numpy())
    order = np.lexsort((sh["fitted"].to_numpy(), sh["dissimilarity"].to_numpy()))
    ax.plot(
        sh["dissimilarity"].to_numpy()[order],
        sh["fitted"].to_numpy()[order],
        drawstyle="steps-post",
        color=ACCENT,
        lw=SIZES["line"],
        zorder=3,
        label="_gr:fit",
    )
    ax.set_xlabel(_text(xlabel, 60) if xlabel is not None else "Community dissimilarity")
    ax.set_ylabel("Distance in the ordination")
    notes = [f"stress {stress:.3f}"] if stress is not None else []
    notes.append(f"{n} pairs")
    _set_title(ax, title, "Shepard diagram", notes)
    ax.legend(
        handles=[
            Line2D(
                [], [], ls="none", marker="o", color=PALETTE[0], markersize=4, label="site pair"
            ),
            Line2D([], [], color=ACCENT, lw=SIZES["line"], label="monotone fit"),
        ],
        loc="upper left",
    )
    return fig


# --------------------------------------------------------------------------------------------
# 4. Mantel correlogram


@_styled
def correlogram(
    table: pd.DataFrame,
    *,
    alpha: float = 0.05,
    distance_unit: str | None = None,
    statistic_label: str = "Mantel r",
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Mantel statistic per distance class, significance after correction shown by fill.

    Parameters
    ----------
    table : DataFrame
        One row per distance class with columns ``midpoint`` (class centre, numeric),
        ``statistic`` (Mantel statistic of the class; rows where it is missing are not drawn),
        ``pvalue``, ``pvalue_adjusted`` (after the multiple-testing correction; may be missing
        for classes not tested), ``n_pairs`` (pairs of sites in the class) and ``flagged``
        (boolean: True for classes with too few pairs to trust).
    alpha : float, default 0.05
        A class is significant when ``pvalue_adjusted <= alpha``.
    distance_unit : str, optional
        Unit of the midpoints, for the axis title (e.g. "km").
    statistic_label : str, default "Mantel r"
        Title of the vertical axis.
    title : str, optional
        Default "Mantel correlogram".
    figsize : (float, float), optional
        Default (6.2, 3.8).

    Returns
    -------
    matplotlib.figure.Figure
        A line through the classes in order of distance; filled markers
        (``_gr:classes-filled``) for classes significant after correction, hollow markers
        (``_gr:classes-hollow``) for the rest; flagged classes are drawn as diamonds in a faded
        ink; a zero line; the number of pairs printed under each class.

    Notes
    -----
    Positive values: sites in that distance class have more similar communities than average
    (positive autocorrelation); negative values: less similar (Oden & Sokal 1986; [1]_ ch. 13).

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.DataFrame({"midpoint": [5.0, 15.0], "statistic": [0.2, -0.1],
    ...                   "pvalue": [0.01, 0.3], "pvalue_adjusted": [0.02, 0.3],
    ...                   "n_pairs": [40, 12], "flagged": [False, True]})
    >>> fig = correlogram(t, distance_unit="km")
    """
    alpha = _check_alpha(alpha)
    size = _check_figsize(figsize, (6.2, 3.8))
    cols = ["midpoint", "statistic", "pvalue", "pvalue_adjusted", "n_pairs", "flagged"]
    tb = _frame(
        table,
        "table",
        cols,
        finite=["midpoint"],
        numeric=["statistic", "pvalue", "pvalue_adjusted", "n_pairs"],
    )
    flag_raw = tb["flagged"]
    if flag_raw.isna().any() or not all(
        isinstance(v, bool | np.bool_) or v in (0, 1) for v in flag_raw.tolist()
    ):
        raise InputError(
            "`table` column 'flagged' must be True or False in every row (True for classes "
            "with too few pairs).",
            columns=["flagged"],
        )
    tb["flagged"] = flag_raw.astype(bool)
    tb = tb[tb["statistic"].notna()].sort_values("midpoint", kind="stable")
    fig, ax = _new_axes(size)
    ax.axhline(0.0, color=MUTED, lw=0.8, zorder=1)
    mx, st = tb["midpoint"].to_numpy(), tb["statistic"].to_numpy()
    ax.plot(mx, st, color=MUTED, lw=SIZES["thin"], zorder=2, label="_gr:classline")
    sig = _significant(tb["pvalue_adjusted"], alpha)
    flagged = tb["flagged"].to_numpy(dtype=bool)
    for filled in (True, False):
        for flag in (False, True):
            m = (sig == filled) & (flagged == flag)
            if not m.any():
                continue
            ink = FADED if flag else PALETTE[0]
            ax.scatter(
                mx[m],
                st[m],
                s=SIZES["class"],
                marker="D" if flag else "o",
                facecolor=ink if filled else HOLLOW,
                edgecolor=ink,
                linewidth=1.1,
                zorder=3,
                label="_gr:classes-filled" if filled else "_gr:classes-hollow",
            )
    for xi, npairs in zip(mx, tb["n_pairs"].to_numpy(), strict=True):
        if math.isfinite(npairs):
            ax.annotate(
                f"{int(npairs)}",
                (xi, 0),
                xycoords=("data", "axes fraction"),
                xytext=(0, 3),
                textcoords="offset points",
                ha="center",
                va="bottom",
                fontsize=5.8,
                color=MUTED,
            )
    lo, hi = ax.get_ylim()
    span = max(hi - lo, 1e-9)
    ax.set_ylim(lo - 0.12 * span, hi)  # room for the pair counts
    ax.set_xlabel(_unit("Distance class (midpoint)", distance_unit))
    ax.set_ylabel(_text(statistic_label, 40))
    _set_title(ax, title, "Mantel correlogram", [f"{len(tb)} classes", "numbers: pairs per class"])
    handles = [
        Line2D(
            [],
            [],
            ls="none",
            marker="o",
            markerfacecolor=PALETTE[0],
            markeredgecolor=PALETTE[0],
            markersize=6,
            label=f"significant after correction (p ≤ {alpha:g})",
        ),
        Line2D(
            [],
            [],
            ls="none",
            marker="o",
            markerfacecolor=HOLLOW,
            markeredgecolor=PALETTE[0],
            markersize=6,
            label="not significant",
        ),
    ]
    if flagged.any():
        handles.append(
            Line2D(
                [],
                [],
                ls="none",
                marker="D",
                markerfacecolor=HOLLOW,
                markeredgecolor=FADED,
                markersize=5.5,
                label="too few pairs",
            )
        )
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles))
    return fig


# --------------------------------------------------------------------------------------------
# 5. distance decay


@_styled
def distance_decay_plot(
    pairs: pd.DataFrame,
    curve: pd.DataFrame | None = None,
    *,
    halving: float | None = None,
    distance_unit: str | None = None,
    ylabel: str | None = None,
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Similarity of communities against the distance between sites, with the fitted decay.

    Parameters
    ----------
    pairs : DataFrame
        One row per pair of sites, numeric columns ``distance`` (geographic or environmental)
        and ``similarity``; no missing values. Points get more transparent as pairs grow in
        number and are rasterised in the SVG above 1,500 pairs.
    curve : DataFrame, optional
        The fitted curve, numeric columns ``distance`` and ``fitted`` (drawn in order of
        distance, ``_gr:curve``).
    halving : float, optional
        Halving distance (distance at which the fitted similarity falls to half its value at
        distance zero), marked with a dashed vertical line (``_gr:halving``) and a label; when
        it lies beyond 1.5 times the largest distance it is only given in the note.
    distance_unit : str, optional
        Unit of distance for the axis title and labels (e.g. "km").
    ylabel : str, optional
        Default "Community similarity".
    title : str, optional
        Default "Distance decay of similarity".
    figsize : (float, float), optional
        Default (5.8, 4.2).

    Returns
    -------
    matplotlib.figure.Figure

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
    >>> import numpy as np, pandas as pd
    >>> d = np.linspace(0, 30, 50)
    >>> pairs = pd.DataFrame({"distance": d, "similarity": 0.8 * np.exp(-d / 10)})
    >>> curve = pd.DataFrame({"distance": d, "fitted": 0.8 * np.exp(-d / 10)})
    >>> fig = distance_decay_plot(pairs, curve, halving=10 * np.log(2), distance_unit="km")
    """
    size = _check_figsize(figsize, (5.8, 4.2))
    pr = _frame(pairs, "pairs", ["distance", "similarity"], finite=["distance", "similarity"])
    cv = None
    if curve is not None:
        cv = _frame(
            curve, "curve", ["distance", "fitted"], finite=["distance", "fitted"], min_rows=2
        ).sort_values("distance", kind="stable")
    if halving is not None:
        halving = _check_number(halving, "halving", positive=True)
    unit = _text(distance_unit, 20) if distance_unit else ""
    fig, ax = _new_axes(size)
    n = len(pr)
    _scatter_pairs(ax, pr["distance"].to_numpy(), pr["similarity"].to_numpy())
    handles: list[Any] = [
        Line2D([], [], ls="none", marker="o", color=PALETTE[0], markersize=4, label="site pair")
    ]
    if cv is not None:
        ax.plot(
            cv["distance"].to_numpy(),
            cv["fitted"].to_numpy(),
            color=ACCENT,
            lw=SIZES["line"] + 0.3,
            zorder=4,
            label="_gr:curve",
        )
        handles.append(Line2D([], [], color=ACCENT, lw=SIZES["line"] + 0.3, label="fitted decay"))
    notes = [f"{n} pairs"]
    if halving is not None:
        text = f"halving distance {_format_number(halving)}{' ' + unit if unit else ''}"
        if halving <= 1.5 * float(pr["distance"].max()):
            ax.axvline(
                halving, color=INK, lw=0.9, ls=(0, (4.0, 2.5)), zorder=3, label="_gr:halving"
            )
            if cv is not None:
                yh = float(np.interp(halving, cv["distance"], cv["fitted"]))
                ax.scatter(
                    [halving],
                    [yh],
                    s=34,
                    marker="o",
                    facecolor=HOLLOW,
                    edgecolor=INK,
                    linewidth=1.1,
                    zorder=5,
                    label="_gr:halving-point",
                )
            ax.annotate(
                text,
                (halving, 1.0),
                xycoords=("data", "axes fraction"),
                xytext=(4, -4),
                textcoords="offset points",
                ha="left",
                va="top",
                fontsize=SIZES["label"],
                color=INK,
            )
        else:
            notes.append(text + " (beyond the data)")
    ax.set_xlabel(_unit("Distance between sites", unit or None))
    ax.set_ylabel(_text(ylabel, 60) if ylabel is not None else "Community similarity")
    _set_title(ax, title, "Distance decay of similarity", notes)
    ax.legend(handles=handles, loc="upper right")
    return fig


# --------------------------------------------------------------------------------------------
# 6. ranking of variables


def _row_labels(tb: pd.DataFrame, column: str | None) -> list[str]:
    if column is not None and column in tb.columns:
        return [_text(v) for v in tb[column].tolist()]
    return [_text(v) for v in tb.index.tolist()]


@_styled
def ranking_plot(
    table: pd.DataFrame,
    *,
    value: str = "r2",
    pvalue: str | None = "pvalue",
    alpha: float = 0.05,
    label: str = "variable",
    top: int | None = None,
    xlabel: str | None = None,
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Horizontal bars ranking variables by a value, significant ones filled.

    Parameters
    ----------
    table : DataFrame
        One row per variable; the names come from column ``variable`` (or the column named in
        `label`) if present, else from the index. Numeric column `value` (default ``r2``; no
        missing values) and, unless `pvalue` is None, numeric column `pvalue` (default
        ``pvalue``; missing counts as not significant).
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
    figsize : (float, float), optional
        Default width 5.8 in, height growing with the number of bars.

    Returns
    -------
    matplotlib.figure.Figure
        One bar per row (``_gr:bars`` container, top to bottom in decreasing `value`); filled
        bars are significant, hollow (white) bars are not; each bar is annotated with its
        value and p-value.

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.DataFrame({"variable": ["Cu", "sand"], "r2": [0.5, 0.1], "pvalue": [0.001, 0.4]})
    >>> fig = ranking_plot(t)
    """
    alpha = _check_alpha(alpha)
    if not isinstance(value, str):
        raise InputError(f"`value` must be a column name; got {value!r}.")
    required = [value] + ([pvalue] if pvalue is not None else [])
    tb = _frame(
        table, "table", required, finite=[value], numeric=[pvalue] if pvalue is not None else []
    )
    if top is not None:
        if not isinstance(top, int | np.integer) or isinstance(top, bool) or top < 1:
            raise InputError(f"`top` must be a positive integer; got {top!r}.")
    tb = tb.sort_values(value, ascending=False, kind="stable")
    if top is not None:
        tb = tb.head(int(top))
    names = _row_labels(tb, label)
    vals = tb[value].to_numpy()
    sig = _significant(tb[pvalue], alpha) if pvalue is not None else np.ones(len(tb), bool)
    n = len(tb)
    size = _check_figsize(figsize, (5.8, 1.1 + 0.27 * n))
    fig, ax = _new_axes(size)
    ax.grid(axis="y", visible=False)
    pos = np.arange(n)[::-1]
    colour = PALETTE[0]
    bars = ax.barh(
        pos,
        vals,
        height=0.62,
        color=[colour if s else HOLLOW for s in sig],
        edgecolor=colour,
        linewidth=1.0,
        zorder=2,
        label="_gr:bars",
    )
    ax.set_yticks(pos, labels=names)
    ax.tick_params(axis="y", length=0)
    ax.spines["left"].set_visible(False)
    ax.axvline(0.0, color=MUTED, lw=0.8, zorder=3)
    span = float(np.max(np.abs(vals))) if n else 1.0
    for p_, v, row_p in zip(
        pos, vals, (tb[pvalue] if pvalue is not None else [np.nan] * n), strict=True
    ):
        text = _format_number(float(v))
        if pvalue is not None:
            text += f"  ({_format_p(float(row_p))})"
        ax.annotate(
            text,
            (v, p_),
            xytext=(3 if v >= 0 else -3, 0),
            textcoords="offset points",
            ha="left" if v >= 0 else "right",
            va="center",
            fontsize=6.3,
            color=MUTED,
        )
    lo = min(0.0, float(vals.min())) if n else 0.0
    hi = max(0.0, float(vals.max())) if n else 1.0
    pad = 0.38 * (span or 1.0)
    ax.set_xlim(lo - (pad if lo < 0 else 0.0), hi + pad)
    ax.set_ylim(-0.7, n - 0.3)
    ax.set_xlabel(_text(xlabel, 60) if xlabel is not None else VALUE_NAMES.get(value, value))
    _set_title(ax, title, "Ranking of variables", [f"{n} variables"])
    if pvalue is not None:
        fig.legend(
            handles=[
                Patch(facecolor=colour, edgecolor=colour, label=f"p ≤ {alpha:g}"),
                Patch(facecolor=HOLLOW, edgecolor=colour, label=f"p > {alpha:g}"),
            ],
            loc="outside lower center",
            ncols=2,
        )
    del bars
    return fig


# --------------------------------------------------------------------------------------------
# 7. hypotheses


@_styled
def hypothesis_plot(
    table: pd.DataFrame,
    *,
    effect: str = "statistic",
    pvalue: str = "pvalue",
    label: str = "hypothesis",
    method: str | None = "method",
    interval: tuple[str, str] | None = None,
    alpha: float = 0.05,
    xlabel: str | None = None,
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Effect size of each named hypothesis as a dot, filled when significant.

    Parameters
    ----------
    table : DataFrame
        One row per hypothesis (and per method, when several tests were run), with numeric
        columns `effect` (default ``statistic``, e.g. partial Mantel r; no missing values) and
        `pvalue` (default ``pvalue``; missing counts as not significant). Hypothesis names come
        from column `label` (default ``hypothesis``) if present, else from the index. If
        column `method` (default ``method``) is present, each method gets its own colour and
        shape and the dots of one hypothesis are set side by side.
    effect, pvalue : str
        Column names of the effect size and its p-value.
    label : str, default "hypothesis"
        Column with the hypothesis names; the index is used when it is absent.
    method : str or None, default "method"
        Column naming the test (e.g. "partial Mantel", "dbRDA"); ignored when absent or None.
    interval : (str, str), optional
        Columns with the lower and upper ends of an interval for the effect, drawn as a
        whisker.
    alpha : float, default 0.05
        Dots with ``pvalue <= alpha`` are filled (``_gr:dots-filled``), the others hollow
        (``_gr:dots-hollow``).
    xlabel : str, optional
        Default "Effect size (<effect>)".
    title : str, optional
        Default "Hypotheses against community turnover".
    figsize : (float, float), optional
        Default width 6.2 in, height growing with the number of hypotheses.

    Returns
    -------
    matplotlib.figure.Figure
        Hypotheses top to bottom in the order of the table, a zero line, and each dot annotated
        with its effect and p-value.

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.DataFrame({"hypothesis": ["contamination", "texture"],
    ...                   "statistic": [0.31, 0.04], "pvalue": [0.002, 0.51]})
    >>> fig = hypothesis_plot(t)
    """
    alpha = _check_alpha(alpha)
    required = [effect, pvalue]
    if interval is not None:
        if not isinstance(interval, tuple | list) or len(interval) != 2:
            raise InputError(f"`interval` must name two columns (lower, upper); got {interval!r}.")
        required += [str(interval[0]), str(interval[1])]
    tb = _frame(table, "table", required, finite=[effect], numeric=[pvalue, *(required[2:])])
    names = _row_labels(tb, label)
    order = list(dict.fromkeys(names))
    has_method = method is not None and method in tb.columns
    methods = list(dict.fromkeys(_text(m) for m in tb[method].tolist())) if has_method else [""]
    n_h = len(order)
    size = _check_figsize(figsize, (6.2, 1.2 + 0.42 * n_h + 0.08 * n_h * (len(methods) - 1)))
    fig, ax = _new_axes(size)
    ax.grid(axis="y", visible=False)
    ax.axvline(0.0, color=MUTED, lw=0.8, zorder=1)
    ypos = {h: n_h - 1 - i for i, h in enumerate(order)}
    step = 0.6 / max(len(methods), 1)
    offsets = {m: (len(methods) - 1) / 2 * step - j * step for j, m in enumerate(methods)}
    eff = tb[effect].to_numpy()
    sig = _significant(tb[pvalue], alpha)
    meth = [_text(m) for m in tb[method].tolist()] if has_method else [""] * len(tb)
    ys = np.array([ypos[h] + offsets[m] for h, m in zip(names, meth, strict=True)])
    handles: list[Any] = []
    for j, m in enumerate(methods):
        colour, marker = group_style(j) if has_method else (PALETTE[0], "o")
        in_m = np.array([mm == m for mm in meth], dtype=bool)
        if interval is not None:
            lo_, hi_ = tb[required[2]].to_numpy(), tb[required[3]].to_numpy()
            for k in np.flatnonzero(in_m):
                if math.isfinite(lo_[k]) and math.isfinite(hi_[k]):
                    ax.plot(
                        [lo_[k], hi_[k]],
                        [ys[k], ys[k]],
                        color=colour,
                        lw=1.0,
                        zorder=2,
                        label="_gr:interval",
                    )
        for filled in (True, False):
            sel = in_m & (sig == filled)
            if sel.any():
                ax.scatter(
                    eff[sel],
                    ys[sel],
                    s=SIZES["dot"],
                    marker=marker,
                    facecolor=colour if filled else HOLLOW,
                    edgecolor=colour,
                    linewidth=1.2,
                    zorder=3,
                    label="_gr:dots-filled" if filled else "_gr:dots-hollow",
                )
        if has_method:
            handles.append(
                Line2D([], [], ls="none", marker=marker, color=colour, markersize=6, label=m)
            )
    pv = tb[pvalue].to_numpy()
    for e, y, p in zip(eff, ys, pv, strict=True):
        ax.annotate(
            f"{_format_number(float(e))} ({_format_p(float(p))})",
            (e, y),
            xytext=(7, 0),
            textcoords="offset points",
            ha="left",
            va="center",
            fontsize=6.3,
            color=MUTED,
        )
    ax.set_yticks([ypos[h] for h in order], labels=order)
    ax.tick_params(axis="y", length=0)
    ax.spines["left"].set_visible(False)
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
    ax.set_xlabel(
        _text(xlabel, 60)
        if xlabel is not None
        else f"Effect size ({VALUE_NAMES.get(effect, effect)})"
    )
    _set_title(ax, title, "Hypotheses against community turnover", [f"{n_h} hypotheses"])
    handles += [
        Line2D(
            [],
            [],
            ls="none",
            marker="o",
            markerfacecolor=INK,
            markeredgecolor=INK,
            markersize=6,
            label=f"p ≤ {alpha:g}",
        ),
        Line2D(
            [],
            [],
            ls="none",
            marker="o",
            markerfacecolor=HOLLOW,
            markeredgecolor=INK,
            markersize=6,
            label=f"p > {alpha:g}",
        ),
    ]
    fig.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 4))
    return fig


# --------------------------------------------------------------------------------------------
# turnover curves and partitions


@_styled
def turnover_curves(
    curves: pd.DataFrame,
    *,
    ncols: int = 3,
    ylabel: str = "Cumulative turnover",
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Fitted turnover along each environmental gradient, one small panel per variable.

    Parameters
    ----------
    curves : DataFrame
        Tidy curves with columns ``variable`` (name of the gradient), ``value`` (position along
        it, in the variable's own units) and ``turnover`` (fitted cumulative turnover at that
        position, numeric); rows of one variable are drawn in order of ``value``. Panels come
        in order of decreasing total turnover (the height reached at the end of the gradient),
        which is a usual measure of a variable's importance.
    ncols : int, default 3
        Panels per row.
    ylabel : str, default "Cumulative turnover"
    title : str, optional
        Default "Turnover along each gradient".
    figsize : (float, float), optional
        Default 2.3 in per panel across, 2.0 in per row.

    Returns
    -------
    matplotlib.figure.Figure
        Panels sharing the vertical scale (so heights compare across variables), each with its
        curve (``_gr:curve``) and the total turnover in its title.

    Examples
    --------
    >>> import pandas as pd
    >>> c = pd.DataFrame({"variable": ["Cu"] * 3, "value": [0.0, 5.0, 10.0],
    ...                   "turnover": [0.0, 0.4, 0.5]})
    >>> fig = turnover_curves(c)
    """
    cv = _frame(curves, "curves", ["variable", "value", "turnover"], finite=["value", "turnover"])
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
    size = _check_figsize(figsize, (0.4 + 2.3 * nc, 0.7 + 2.0 * nr))
    fig = Figure(figsize=size, layout="constrained")
    axs = fig.subplots(nr, nc, sharey=True, squeeze=False)
    for i, ax in enumerate(axs.flat):
        if i >= n:
            ax.set_visible(False)
            continue
        key = order[i]
        g = parts[key]
        for side in ("left", "bottom"):
            ax.spines[side].set_position(("outward", 3))
        ax.fill_between(
            g["value"].to_numpy(),
            g["turnover"].min(),
            g["turnover"].to_numpy(),
            color=PALETTE[0],
            alpha=0.12,
            linewidth=0,
            zorder=1,
        )
        ax.plot(
            g["value"].to_numpy(),
            g["turnover"].to_numpy(),
            color=PALETTE[0],
            lw=SIZES["line"],
            zorder=2,
            label="_gr:curve",
        )
        ax.set_title(f"{_text(key, 28)}", loc="left", fontsize=8.5)
        ax.set_title(
            f"total {_format_number(total[key])}",
            loc="right",
            fontsize=6.8,
            color=MUTED,
            fontweight="normal",
        )
        ax.tick_params(labelsize=6.8)
        if i % nc == 0:
            ax.set_ylabel(_text(ylabel, 40))
    fig.suptitle(
        _text(title, 90) if title is not None else "Turnover along each gradient",
        x=0.012,
        ha="left",
        fontsize=10.0,
        fontweight="bold",
        color=INK,
    )
    return fig


@_styled
def partition_plot(
    fractions: pd.DataFrame,
    *,
    value: str = "r2_adjusted",
    label: str = "fraction",
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Variation partitioning as one stacked bar of explained fractions plus the residual.

    Parameters
    ----------
    fractions : DataFrame
        One row per fraction of variation (unique to one set of variables, shared between
        sets, and optionally the residual), with a text column `label` (default
        ``fraction``; the index is used when absent) and a numeric column `value` (default
        ``r2_adjusted``: the fraction's adjusted R², no missing values). Negative adjusted
        fractions (possible when a fraction explains less than chance) are listed under the
        bar but not drawn. Rows whose label contains "shared" or "&" are drawn hatched; a row
        whose label is "residual" (any case) is drawn in white; if none is given, the
        residual is 1 minus the sum of the positive fractions.
    value : str, default "r2_adjusted"
    label : str, default "fraction"
    title : str, optional
        Default "Partition of community variation".
    figsize : (float, float), optional
        Default (6.6, 2.6).

    Returns
    -------
    matplotlib.figure.Figure
        A horizontal bar from 0 to 1 split into the fractions (``_gr:fractions``), each labelled
        with its share in percent, and a legend naming them.

    Examples
    --------
    >>> import pandas as pd
    >>> f = pd.DataFrame({"fraction": ["contamination only", "space only", "shared"],
    ...                   "r2_adjusted": [0.2, 0.1, 0.05]})
    >>> fig = partition_plot(f)
    """
    size = _check_figsize(figsize, (6.6, 2.6))
    tb = _frame(fractions, "fractions", [value], finite=[value])
    names = _row_labels(tb, label)
    vals = tb[value].to_numpy()
    is_resid = np.array([n.strip().lower() == "residual" for n in names])
    drawn = [
        (n, float(v)) for n, v, r in zip(names, vals, is_resid, strict=True) if v > 0 and not r
    ]
    negative = [
        (n, float(v)) for n, v, r in zip(names, vals, is_resid, strict=True) if v <= 0 and not r
    ]
    resid = float(vals[is_resid][0]) if is_resid.any() else 1.0 - sum(v for _, v in drawn)
    fig, ax = _new_axes(size)
    ax.grid(False)
    ax.spines["left"].set_visible(False)
    ax.set_yticks([])
    left = 0.0
    handles: list[Any] = []
    colour_i = 0
    for name, v in [*drawn, ("residual", max(resid, 0.0))]:
        if name == "residual":
            face, hatch = HOLLOW, None
        else:
            face = PALETTE[colour_i % len(PALETTE)]
            colour_i += 1
            hatch = "////" if ("shared" in name.lower() or "&" in name) else None
        ax.barh(
            [0],
            [v],
            left=left,
            height=0.55,
            color=face,
            edgecolor=INK,
            linewidth=0.7,
            hatch=hatch,
            zorder=2,
            label="_gr:fractions",
        )
        if v >= 0.04:
            ax.text(
                left + v / 2,
                0,
                f"{100 * v:.0f} %",
                ha="center",
                va="center",
                fontsize=7.0,
                color=INK if face in (HOLLOW, PALETTE[5], PALETTE[6], PALETTE[4]) else "white",
                fontweight="bold",
                zorder=3,
            )
        handles.append(
            Patch(facecolor=face, edgecolor=INK, hatch=hatch, label=f"{name} ({100 * v:.1f} %)")
        )
        left += v
    ax.set_xlim(0, max(1.0, left))
    ax.set_ylim(-0.6, 0.6)
    ax.set_xlabel(f"Share of community variation ({VALUE_NAMES.get(value, value)})")
    notes = []
    if negative:
        notes.append("not drawn (≤ 0): " + ", ".join(f"{n} {v:.3f}" for n, v in negative))
    _set_title(ax, title, "Partition of community variation", notes)
    fig.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 3))
    return fig


# --------------------------------------------------------------------------------------------
# saving


def _figure_title(fig: Figure) -> str:
    """The figure's title for the file metadata: the suptitle, else the first axes title."""
    sup = getattr(fig, "_suptitle", None)
    if sup is not None and sup.get_text():
        return str(sup.get_text())
    for ax in fig.axes:
        for loc in ("left", "center"):
            text = ax.get_title(loc=loc)
            if text:
                return str(text)
    return ""


def save_figure(
    fig: Figure,
    path_stem: str | Path,
    *,
    formats: Sequence[str] = ("png", "svg"),
    dpi: int = 200,
) -> list[Path]:
    """Write a figure as PNG and SVG with reproducible bytes.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure, e.g. from one of the functions in this module.
    path_stem : str or Path
        Path without extension; ``.png`` and ``.svg`` are appended (a trailing ``.png`` or
        ``.svg`` in the stem is dropped first). The folder must exist. The caller decides the
        name: this function does not sanitise it.
    formats : sequence of {"png", "svg"}, default ("png", "svg")
    dpi : int, default 200
        Resolution of the PNG and of points rasterised inside the SVG.

    Returns
    -------
    list of Path
        The files written, in the order of `formats`.

    Notes
    -----
    The same figure gives the same bytes on every run: the SVG is written with a fixed
    ``svg.hashsalt`` (stable clip-path identifiers), glyphs as paths from the font shipped with
    matplotlib, and metadata without a date; the PNG carries no software or date text. Both
    files carry the figure's title (suptitle, else the first axes title) as their ``Title``. Byte
    equality across different matplotlib versions is not promised.

    Examples
    --------
    >>> import pandas as pd, tempfile, pathlib
    >>> fig = ranking_plot(pd.DataFrame({"r2": [0.4]}, index=["Cu"]), pvalue=None)
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     paths = save_figure(fig, pathlib.Path(folder) / "ranking")
    ...     [p.name for p in paths]
    ['ranking.png', 'ranking.svg']
    """
    if not isinstance(fig, Figure):
        raise InputError(f"`fig` must be a matplotlib Figure; got {type(fig).__name__}.")
    allowed = ("png", "svg")
    fmts = [formats] if isinstance(formats, str) else list(formats)
    bad = [f for f in fmts if f not in allowed]
    if bad or not fmts:
        raise InputError(f"`formats` must be chosen from {format_items(allowed)}; got {formats!r}.")
    if not isinstance(dpi, int | np.integer) or isinstance(dpi, bool) or not 30 <= dpi <= 1200:
        raise InputError(f"`dpi` must be an integer between 30 and 1200; got {dpi!r}.")
    stem = Path(path_stem)
    if stem.suffix.lower() in (".png", ".svg"):
        stem = stem.with_suffix("")
    if not stem.name:
        raise InputError(f"`path_stem` must end in a file name; got {str(path_stem)!r}.")
    if not stem.parent.is_dir():
        raise InputError(
            f"The folder {str(stem.parent)!r} for `path_stem` does not exist; create it first."
        )
    title = _figure_title(fig)
    written: list[Path] = []
    with house_style():
        for fmt in fmts:
            path = stem.parent / f"{stem.name}.{fmt}"
            if fmt == "png":
                meta: dict[str, str | None] = {"Software": None}
                if title:
                    meta["Title"] = title
                fig.savefig(path, format="png", dpi=int(dpi), metadata=meta)
            else:
                meta = {"Date": None, "Creator": "gradients"}
                if title:
                    meta["Title"] = title
                fig.savefig(path, format="svg", dpi=int(dpi), metadata=meta)
            written.append(path)
    return written
