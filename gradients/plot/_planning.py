"""Figures of the planning stage: the power curve of a survey plan.

Artists carry ``_gr:`` labels (hidden from legends) for programs and tests: ``_gr:power-<h>``
(the line of hypothesis ``h``), ``_gr:band-<h>`` (its interval), ``_gr:subsample-<h>``,
``_gr:target`` and ``_gr:alpha``.
"""

from __future__ import annotations

import numpy as np
from matplotlib.axes import Axes
from matplotlib.lines import Line2D

from .._errors import InputError, format_items
from ._kit import canvas, check_figsize, frame, place_legend, set_title, text
from ._style import HOLLOW, INK, MUTED, PALETTE, SIZES

__all__ = ["power_curve"]

_COLUMNS = ["hypothesis", "test", "n_sites", "method", "power", "power_low", "power_high"]


def power_curve(
    result: object,
    *,
    test: str | None = None,
    title: str | None = None,
    ax: Axes | None = None,
    figsize: tuple[float, float] | None = None,
) -> Axes:
    """Power against the number of sites, one line per hypothesis, with the target marked.

    Parameters
    ----------
    result : SurveyPowerResult
        The result of :func:`~gradients.survey_power` (the planning stage comes after this
        one, so the figure reads its ``table``, ``target_power`` and ``alpha`` by name).
    test : str, optional
        Which test to draw (default: the first of ``result.tests``).
    title : str, optional
        Default "Power to detect each hypothesis".
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; by default a new figure in the house style is made.
    figsize : (float, float), optional
        Size of the new figure, inches; default (5.8, 4.0).

    Returns
    -------
    matplotlib.axes.Axes
        Each hypothesis' simulated power as a line with points (``_gr:power-<h>``) over a
        shaded 95 % interval (``_gr:band-<h>``); power from subsamples of the pilot as hollow
        diamonds with their intervals (``_gr:subsample-<h>``), set a little to the right of
        the simulated point of the same size; the target power as a dashed line (``_gr:target``)
        and the level ``alpha`` as a dotted one (``_gr:alpha``), the power a test has when
        there is nothing to find.

    Examples
    --------
    >>> import gradients
    >>> from gradients import plot
    >>> model = gradients.assumed_model({"copper": 2.0}, n_taxa=10)
    >>> res = gradients.survey_power(model, n_sites=(10, 15), n_surveys=4, n_resamples=19,
    ...                              tests=("mantel",), rng=1)
    >>> ax = plot.power_curve(res)
    """
    table = getattr(result, "table", None)
    tb = frame(table, "result.table", _COLUMNS,
               numeric=["n_sites", "power", "power_low", "power_high"])
    tests = list(dict.fromkeys(tb["test"]))
    test = tests[0] if test is None else test
    if test not in tests:
        raise InputError(f"`test` must be one of the tests of the plan ({format_items(tests)}); "
                         f"got {test!r}.")
    target = float(getattr(result, "target_power", 0.8))
    alpha = float(getattr(result, "alpha", 0.05))
    tb = tb[tb["test"] == test]
    # subsamples are drawn a little to the right of the simulated points at the same size
    nudge = 0.012 * max(float(tb["n_sites"].max() - tb["n_sites"].min()), 1.0)
    with canvas(ax, check_figsize(figsize, (5.8, 4.0))) as ax:
        handles = []
        for i, (h, g) in enumerate(tb.groupby("hypothesis", sort=False)):
            colour = PALETTE[i % len(PALETTE)]
            sim = g[g["method"] == "simulation"].sort_values("n_sites")
            n = sim["n_sites"].to_numpy()
            ax.fill_between(n, sim["power_low"].to_numpy(), sim["power_high"].to_numpy(),
                            color=colour, alpha=0.16, linewidth=0, label=f"_gr:band-{h}")
            ax.plot(n, sim["power"].to_numpy(), color=colour, lw=SIZES["line"], marker="o",
                    markersize=4.5, label=f"_gr:power-{h}")
            handles.append(Line2D([], [], color=colour, lw=SIZES["line"], marker="o",
                                  markersize=4.5, label=text(h, 30)))
            sub = g[g["method"] == "subsample"].sort_values("n_sites")
            if len(sub):
                ax.errorbar(sub["n_sites"].to_numpy() + nudge, sub["power"].to_numpy(),
                            yerr=np.clip(np.vstack([sub["power"] - sub["power_low"],
                                                    sub["power_high"] - sub["power"]]),
                                         0.0, None),
                            fmt="D", markersize=5, markerfacecolor=HOLLOW,
                            markeredgecolor=colour, ecolor=colour, elinewidth=0.8,
                            capsize=2, label=f"_gr:subsample-{h}")
        ax.axhline(target, color=INK, lw=0.9, ls="--", label="_gr:target")
        ax.axhline(alpha, color=MUTED, lw=0.9, ls=":", label="_gr:alpha")
        ax.annotate(f"target {target:g}", (1, target), xycoords=("axes fraction", "data"),
                    xytext=(-2, 3), textcoords="offset points", ha="right", va="bottom",
                    fontsize=SIZES["note"], color=INK)
        ax.annotate(f"α = {alpha:g}", (1, alpha), xycoords=("axes fraction", "data"),
                    xytext=(-2, 3), textcoords="offset points", ha="right", va="bottom",
                    fontsize=SIZES["note"], color=MUTED)
        ax.set_ylim(0, 1.02)
        ax.set_xlabel("Number of sites", parse_math=False)
        ax.set_ylabel("Power (share of surveys detecting)", parse_math=False)
        if (tb["method"] == "subsample").any():
            handles.append(Line2D([], [], ls="none", marker="D", markerfacecolor=HOLLOW,
                                  markeredgecolor=MUTED, markersize=5,
                                  label="subsample of the pilot"))
        set_title(ax, title, "Power to detect each hypothesis",
                  [test.replace("_", " "), "bands: 95 % intervals"])
        place_legend(ax, handles, outside="lower center", ncols=min(len(handles), 4))
    return ax
