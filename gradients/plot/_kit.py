"""The shared drawing kit of :mod:`gradients.plot`: canvases, checks, text, titles and legends.

Every figure function of the stage is built from these pieces, so that all of them read their
inputs, name their errors, print user text, place titles and notes, collect legend entries and
format numbers the same way.

- :func:`canvas` gives the axes to draw into: the caller's (``ax=``), left as the caller set it
  up, or a new figure in the house style (:mod:`gradients.plot._style`), drawn once before it is
  returned so that lazily made tick labels follow the style too.
- :func:`frame` checks a table (required columns, numbers, finite values) with messages that
  name the argument, the column and the rows.
- :func:`remember` and :func:`place_legend` collect the legend entries of the marks drawn into
  one axes, so that small functions drawing one layer each (sites, arrows, centroids) can share
  one legend.
- All text drawn from user input goes through :func:`text` (control characters become spaces,
  long names are shortened) and is drawn with ``parse_math=False``: a ``$`` in a site name is
  shown as typed, whatever the caller's matplotlib settings.
"""

from __future__ import annotations

import contextlib
import math
import re
import weakref
from collections.abc import Iterator, Sequence
from typing import Any, Protocol, runtime_checkable

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure, SubFigure

from .._errors import InputError, format_items
from ._style import MUTED, PALETTE, SIZES, house_style

__all__ = [
    "LABEL_LIMIT",
    "RASTER_THRESHOLD",
    "VALUE_NAMES",
    "HasScores",
    "axis_title",
    "canvas",
    "check_alpha",
    "check_axes",
    "check_figsize",
    "check_number",
    "figure_canvas",
    "format_number",
    "format_p",
    "frame",
    "made_here",
    "place_legend",
    "point_alpha",
    "remember",
    "remembered",
    "scatter_pairs",
    "scores_of",
    "set_title",
    "significant",
    "text",
    "with_unit",
]

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


@runtime_checkable
class HasScores(Protocol):
    """Anything carrying a table of site scores (an ordination result)."""

    scores: pd.DataFrame


# --------------------------------------------------------------------------------------------
# argument checks


def frame(
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


def scores_of(obj: object, name: str = "ordination") -> pd.DataFrame:
    """The site-score table of an ordination result (its ``.scores``), or a DataFrame as given."""
    if isinstance(obj, pd.DataFrame):
        return obj
    inner = getattr(obj, "scores", None)
    if isinstance(inner, pd.DataFrame):
        return inner
    raise InputError(
        f"`{name}` must be an ordination result (anything with a `.scores` table, such as the "
        "result of pcoa(), nmds() or pca()) or a DataFrame of site scores; got "
        f"{type(obj).__name__}."
    )


def check_alpha(alpha: object) -> float:
    ok = isinstance(alpha, int | float | np.floating) and not isinstance(alpha, bool)
    if not ok or not 0 < float(alpha) < 1:  # type: ignore[arg-type]
        raise InputError(f"`alpha` must be a number between 0 and 1; got {alpha!r}.")
    return float(alpha)  # type: ignore[arg-type]


def check_axes(axes: object) -> tuple[str, str]:
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


def check_figsize(figsize: object, default: tuple[float, float]) -> tuple[float, float]:
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


def check_number(value: object, name: str, *, positive: bool = False) -> float:
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        v = float("nan")
    if isinstance(value, bool) or not math.isfinite(v) or (positive and v <= 0):
        kind = "a positive finite number" if positive else "a finite number"
        raise InputError(f"`{name}` must be {kind}; got {value!r}.")
    return v


# --------------------------------------------------------------------------------------------
# text and numbers


def text(value: object, limit: int = LABEL_LIMIT) -> str:
    """User text as drawn: control characters become spaces, long names are shortened."""
    out = re.sub(r"[\x00-\x1f\x7f]+", " ", str(value)).strip()
    if len(out) > limit:
        out = out[: limit - 1].rstrip() + "…"
    return out


def significant(pvalues: pd.Series | np.ndarray, alpha: float) -> np.ndarray:
    """``pvalue <= alpha``, a missing p-value counting as not significant."""
    p = np.asarray(pd.to_numeric(pd.Series(pvalues), errors="coerce"), dtype=float)
    return np.nan_to_num(p, nan=np.inf) <= alpha


def format_number(v: float) -> str:
    if not math.isfinite(v):
        return "n/a"
    if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e5):
        return f"{v:.2e}"
    return f"{v:.3g}" if abs(v) >= 1 else f"{v:.2f}" if abs(v) >= 0.095 else f"{v:.3f}"


def format_p(p: float) -> str:
    if not math.isfinite(p):
        return "p n/a"
    return f"p = {p:.3f}" if p >= 0.001 else f"p = {p:.1e}"


def axis_title(column: str) -> str:
    m = re.fullmatch(r"axis(\d+)", column)
    return f"Axis {m.group(1)}" if m else text(column)


def with_unit(label: str, unit: str | None) -> str:
    return f"{label} ({text(unit, 20)})" if unit else label


def point_alpha(n: int) -> float:
    """Opacity of one point in a cloud of ``n``: fainter as the cloud grows."""
    return float(np.clip(25.0 / math.sqrt(max(n, 1)), 0.08, 0.85))


def scatter_pairs(ax: Axes, x: np.ndarray, y: np.ndarray) -> None:
    """Pairs of sites as small translucent points (``_gr:pairs``), rasterised in SVG when there
    are many."""
    n = len(x)
    ax.scatter(x, y, s=7 if n > 300 else 12, marker="o", color=PALETTE[0],
               alpha=point_alpha(n), linewidth=0, zorder=2, label="_gr:pairs",
               rasterized=n > RASTER_THRESHOLD)


# --------------------------------------------------------------------------------------------
# canvases

#: Axes and figures made by this stage (not the caller's): their layout is ours to decide.
_MADE: weakref.WeakSet[Any] = weakref.WeakSet()


def made_here(obj: Axes | Figure | SubFigure) -> bool:
    """True for axes (or a figure) that a :mod:`gradients.plot` function made itself."""
    return obj in _MADE


def _offset_spines(ax: Axes, points: float = 4) -> None:
    for side in ("left", "bottom"):
        ax.spines[side].set_position(("outward", points))


@contextlib.contextmanager
def canvas(ax: Axes | None, figsize: tuple[float, float]) -> Iterator[Axes]:
    """The axes to draw into: ``ax`` as given, or one new axes in a house-style figure.

    A new figure is built inside :func:`house_style` (constrained layout, the left and bottom
    spines set slightly apart from the data) and drawn once, without rendering, when the block
    ends, so that tick labels, made lazily by matplotlib, follow the house style as well.
    Axes given by the caller are drawn into as they are: their frame and style are the caller's.
    """
    if ax is not None:
        if not isinstance(ax, Axes):
            raise InputError(f"`ax` must be a matplotlib Axes; got {type(ax).__name__}.")
        yield ax
        return
    with house_style():
        fig = Figure(figsize=figsize, layout="constrained")
        new = fig.add_subplot()
        _offset_spines(new)
        _MADE.add(new)
        _MADE.add(fig)
        yield new
        fig.draw_without_rendering()


@contextlib.contextmanager
def figure_canvas(fig: Figure | SubFigure | None,
                  figsize: tuple[float, float]) -> Iterator[Figure | SubFigure]:
    """Like :func:`canvas` for figures of several panels: ``fig`` as given, or a new figure."""
    if fig is not None:
        if not isinstance(fig, Figure | SubFigure):
            raise InputError(
                f"`fig` must be a matplotlib Figure or SubFigure; got {type(fig).__name__}."
            )
        yield fig
        return
    with house_style():
        new = Figure(figsize=figsize, layout="constrained")
        _MADE.add(new)
        yield new
        new.draw_without_rendering()


# --------------------------------------------------------------------------------------------
# titles and legends


def set_title(ax: Axes, title: str | None, default: str, notes: Sequence[str] = ()) -> None:
    """Bold title flush left (``title``, else ``default``); short grey notes flush right."""
    ax.set_title(text(title, 90) if title is not None else default, loc="left",
                 parse_math=False)
    notes = [n for n in notes if n]
    if notes:
        ax.set_title(
            "  ·  ".join(notes),
            loc="right",
            fontsize=SIZES["note"],
            color=MUTED,
            fontweight="normal",
            parse_math=False,
        )


#: Legend entries of the marks drawn into each axes, in drawing order.
_HANDLES: weakref.WeakKeyDictionary[Axes, list[Any]] = weakref.WeakKeyDictionary()


def remember(ax: Axes, handles: Sequence[Any]) -> None:
    """Keep legend entries for the marks just drawn into ``ax`` (one per label)."""
    kept = _HANDLES.setdefault(ax, [])
    seen = {h.get_label() for h in kept}
    for h in handles:
        if h.get_label() not in seen:
            kept.append(h)
            seen.add(h.get_label())


def remembered(ax: Axes) -> list[Any]:
    """The legend entries kept for ``ax``."""
    return list(_HANDLES.get(ax, []))


def place_legend(ax: Axes, handles: Sequence[Any], *, outside: str | None = None,
                 inside: str = "best", ncols: int = 1) -> None:
    """Draw a legend of ``handles``.

    On a figure made here with ``outside`` given (e.g. ``"right upper"``), the legend goes
    outside the axes at that side of the figure (constrained layout makes room); on axes given
    by the caller, whose figure may hold other axes, it goes inside the axes at ``inside``, in
    one column (``ncols`` applies outside only).
    """
    if not handles:
        return
    if outside is not None and made_here(ax):
        legend = ax.figure.legend(handles=list(handles), loc=f"outside {outside}", ncols=ncols)
    else:
        legend = ax.legend(handles=list(handles), loc=inside)
    for t in legend.get_texts():
        t.set_parse_math(False)
