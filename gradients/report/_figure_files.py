"""Writing the report's figures as PNG and SVG files with reproducible bytes.

The figures themselves are drawn by :mod:`gradients.plot`, which never writes files; this is
the one place of the suite that saves them.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from .._errors import InputError, format_items
from ..plot import house_style

__all__ = ["save_figure"]


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
        A figure, e.g. ``ax.figure`` of the axes a :mod:`gradients.plot` function returned.
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
    The same figure gives the same bytes on every run: the files are written inside the house
    style (:func:`gradients.plot.house_style`), whose fixed ``svg.hashsalt`` gives stable
    clip-path identifiers and whose glyphs are paths from the font shipped with matplotlib,
    with metadata without a date; the PNG carries no software or date text. Both files carry
    the figure's title (suptitle, else the first axes title) as their ``Title``. Byte equality
    across different matplotlib versions is not promised.

    Examples
    --------
    >>> import pandas as pd, tempfile, pathlib
    >>> from gradients import plot
    >>> ax = plot.ranking(pd.DataFrame({"r2": [0.4]}, index=["Cu"]), pvalue=None)
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     paths = save_figure(ax.figure, pathlib.Path(folder) / "ranking")
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
