"""The house style of every figure drawn by :mod:`gradients.plot` (and so of the report).

One place decides how every figure looks: palette, fonts, sizes, line widths, grid and title
placement. The style is a plain dictionary of matplotlib ``rcParams`` (:data:`HOUSE_RC`) applied
through :func:`house_style`, a context manager built on :func:`matplotlib.rc_context`, so it never
changes matplotlib's global state outside the ``with`` block.

Design choices, made for reading in print and on a laptop screen:

- **Palette** (:data:`PALETTE`): the eight colours of Okabe & Ito [1]_ without black, ordered so
  that the first six stay well apart (CIE 1976 colour difference above 15) for readers with
  protanopia, deuteranopia or tritanopia as simulated by Machado et al. [2]_; the test suite
  checks this. Yellow comes last because it is faint on white paper.
- **Significance is never colour alone**: filled marks mean significant, hollow (white-faced)
  marks mean not significant, and faded arrows are also dashed with an open head. A greyscale
  print keeps every distinction.
- **Sequential colour map** (:data:`SEQUENTIAL_CMAP`) for fitted surfaces: pale sand to deep ink
  blue, with CIE L* lightness falling monotonically, so a greyscale print keeps the ordering.
- **Typography**: DejaVu Sans, the font shipped inside matplotlib itself, so the same glyphs are
  drawn on every machine and the SVG output is byte-stable. Titles are set flush left in a
  bold weight, with a short grey note (stress, number of sites) flush right on the same line.
- **Frame**: an open frame (left and bottom spines only, set slightly apart from the data),
  short outward ticks, a faint dotted grid behind the data, slate-grey ink instead of pure black.

Notes
-----
Matplotlib reads some ``rcParams`` when an artist is created and others when a figure is drawn
(tick labels are made lazily at draw time, SVG identifiers at save time). The functions of
:mod:`gradients.plot` therefore build each figure they make inside :func:`house_style` and draw
it once before returning, and the report saves its figures inside the same context.

References
----------
.. [1] Okabe, M. & Ito, K. (2008). Color Universal Design (CUD): how to make figures and
   presentations that are friendly to colorblind people. J*Fly Data Depository for Drosophila
   Researchers. https://jfly.uni-koeln.de/color/
.. [2] Machado, G. M., Oliveira, M. M. & Fernandes, L. A. F. (2009). A physiologically-based model
   for simulation of color vision deficiency. IEEE Transactions on Visualization and Computer
   Graphics 15(6), 1291-1298.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import Any

import matplotlib as mpl
from matplotlib.colors import LinearSegmentedColormap

__all__ = [
    "ACCENT",
    "FADED",
    "GRID",
    "HOLLOW",
    "HOUSE_RC",
    "INK",
    "MARKERS",
    "MUTED",
    "PALETTE",
    "SEQUENTIAL_CMAP",
    "SIZES",
    "group_style",
    "house_style",
]

#: Qualitative colours for groups, in the order they are used (Okabe & Ito 2008, without black).
PALETTE: tuple[str, ...] = (
    "#0072B2",  # blue
    "#D55E00",  # vermillion
    "#009E73",  # bluish green
    "#CC79A7",  # reddish purple
    "#E69F00",  # orange
    "#56B4E9",  # sky blue
    "#F0E442",  # yellow (faint on paper: last)
)

#: Marker shapes paired with :data:`PALETTE`, so groups differ by shape as well as colour.
MARKERS: tuple[str, ...] = ("o", "s", "^", "D", "v", "P", "X", "h")

#: Main ink for text, axes, arrows and single-series marks.
INK = "#252A33"
#: Secondary ink: tick labels, notes, taxon scores.
MUTED = "#6B7280"
#: Ink for non-significant arrows and classes flagged as unreliable.
FADED = "#A3A9B3"
#: Faint grid and reference lines.
GRID = "#D9DCE1"
#: Face colour of hollow (not significant) marks.
HOLLOW = "#FFFFFF"
#: Accent for fitted lines drawn over data (the monotone step, the decay curve).
ACCENT = PALETTE[1]

#: Marker areas (points squared) and line widths used across figures.
SIZES: dict[str, float] = {
    "site": 26.0,
    "site_dense": 12.0,
    "centroid": 70.0,
    "taxon": 14.0,
    "class": 46.0,
    "dot": 52.0,
    "arrow_width": 1.3,
    "line": 1.4,
    "thin": 0.7,
    "label": 7.0,
    "note": 7.5,
}

#: Sequential colour map for fitted surfaces; lightness falls monotonically from low to high.
SEQUENTIAL_CMAP = LinearSegmentedColormap.from_list(
    "gradients_sand_to_ink",
    ["#F6F2E4", "#D5E6C8", "#97C9B3", "#56A2A8", "#2F7193", "#1F4068"],
)

#: The ``rcParams`` of the house style.
HOUSE_RC: dict[str, Any] = {
    # fonts: the font shipped with matplotlib, so glyphs are the same everywhere
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 8.0,
    "mathtext.fontset": "dejavusans",
    "text.parse_math": False,  # user labels with '$' are shown as typed, never parsed
    "text.usetex": False,
    "text.color": INK,
    # figure
    "figure.facecolor": "white",
    "figure.edgecolor": "white",
    "figure.dpi": 100,
    "figure.constrained_layout.use": True,
    "figure.constrained_layout.h_pad": 0.06,
    "figure.constrained_layout.w_pad": 0.06,
    "savefig.facecolor": "white",
    "savefig.edgecolor": "white",
    "savefig.dpi": 200,
    # axes: open frame, offset spines, left-set titles
    "axes.facecolor": "white",
    "axes.edgecolor": MUTED,
    "axes.linewidth": 0.7,
    "axes.labelcolor": INK,
    "axes.labelsize": 8.5,
    "axes.labelpad": 5.0,
    "axes.titlesize": 10.0,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlepad": 9.0,
    "axes.titlecolor": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.which": "major",
    "axes.axisbelow": True,
    "axes.prop_cycle": mpl.cycler(color=list(PALETTE)),
    "axes.formatter.use_mathtext": False,
    "axes.formatter.limits": (-4, 5),
    "axes.unicode_minus": True,
    "axes.xmargin": 0.04,
    "axes.ymargin": 0.06,
    "grid.color": GRID,
    "grid.linestyle": ":",
    "grid.linewidth": 0.7,
    "grid.alpha": 1.0,
    # ticks: short, outward, muted
    "xtick.direction": "out",
    "ytick.direction": "out",
    "xtick.major.size": 3.0,
    "ytick.major.size": 3.0,
    "xtick.major.width": 0.7,
    "ytick.major.width": 0.7,
    "xtick.minor.visible": False,
    "ytick.minor.visible": False,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "xtick.major.pad": 2.5,
    "ytick.major.pad": 2.5,
    # lines, markers, patches
    "lines.linewidth": SIZES["line"],
    "lines.markersize": 5.0,
    "lines.markeredgewidth": 0.8,
    "lines.solid_capstyle": "round",
    "lines.dash_capstyle": "round",
    "patch.linewidth": 0.8,
    "patch.edgecolor": INK,
    "hatch.color": MUTED,
    "hatch.linewidth": 0.6,
    "scatter.edgecolors": "face",
    # legends: no frame, small, square handles
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "legend.title_fontsize": 7.5,
    "legend.handlelength": 1.6,
    "legend.handletextpad": 0.5,
    "legend.borderaxespad": 0.4,
    "legend.labelspacing": 0.45,
    "legend.scatterpoints": 1,
    "legend.numpoints": 1,
    # output: stable bytes
    "svg.fonttype": "path",
    "svg.hashsalt": "gradients-figure",
    "svg.image_inline": True,
    "pdf.fonttype": 42,
    "path.simplify": True,
}


@contextlib.contextmanager
def house_style(**overrides: Any) -> Iterator[None]:
    """Apply the house style (:data:`HOUSE_RC`) inside a ``with`` block.

    Parameters
    ----------
    **overrides
        ``rcParams`` to change on top of the house style, with dots written as double
        underscores or passed through a dict: ``house_style(**{"font.size": 9})``.

    Yields
    ------
    None
        Matplotlib's global ``rcParams`` are restored when the block ends.

    Notes
    -----
    Built on :func:`matplotlib.rc_context`; nothing outside the block is touched.

    Examples
    --------
    >>> from matplotlib.figure import Figure
    >>> with house_style():
    ...     fig = Figure()
    ...     ax = fig.add_subplot()
    """
    params = dict(HOUSE_RC)
    params.update({key.replace("__", "."): value for key, value in overrides.items()})
    with mpl.rc_context(params):
        yield


def group_style(i: int) -> tuple[str, str]:
    """Colour and marker shape of the ``i``-th group (0-based), cycling when groups run out.

    Colours cycle through :data:`PALETTE` and shapes through :data:`MARKERS`; as the two tuples
    have different lengths (7 and 8), the first 56 groups all get a distinct pair.
    """
    return PALETTE[i % len(PALETTE)], MARKERS[i % len(MARKERS)]
