"""Figures of the validation: null rejection rates, power curves, in the house style.

Drawn on :class:`matplotlib.figure.Figure` inside :func:`gradients.plot.house_style`, as the
suite's own figures are (no pyplot, nothing global changed).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from gradients.plot import house_style
from gradients.plot._style import MUTED, SIZES, group_style

from ._common import DATA_KINDS, acceptance_band

__all__ = ["null_figure", "power_figure", "save"]


def _panels(k: int, columns: int = 3) -> tuple[int, int]:
    cols = min(columns, k)
    return int(np.ceil(k / cols)), cols


def _finish(ax) -> None:
    for side in ("left", "bottom"):
        ax.spines[side].set_position(("outward", 4))


def null_figure(null: pd.DataFrame, *, panel: Sequence[str] = ("test",), alpha: float = 0.05,
                title: str = "Rejection rate under the null", columns: int = 3) -> Figure:
    """One panel per test (``panel`` columns): rate at ``alpha`` per number of sites and kind
    of data, with 99 % intervals; the grey band is the central 99 % range of the rate of a
    test that holds its level exactly, for the number of data sets run."""
    rows = null[np.isclose(null["alpha"], alpha)]
    keys = list(dict.fromkeys(tuple(r) for r in rows[list(panel)].itertuples(index=False)))
    nr, nc = _panels(len(keys), columns)
    with house_style():
        fig = Figure(figsize=(3.0 * nc + 0.4, 2.5 * nr + 0.6), layout="constrained")
        axes = np.atleast_1d(fig.subplots(nr, nc, squeeze=False)).ravel()
        sizes = sorted(rows["n"].unique())
        top = max(2.5 * alpha, float(rows["upper"].max()) * 1.05)
        for ax, key in zip(axes, keys, strict=False):
            sub = rows[(rows[list(panel)] == pd.Series(key, index=list(panel))).all(axis=1)]
            datasets = int(sub["datasets"].max())
            lo, hi = acceptance_band(datasets, alpha)
            ax.axhspan(lo, hi, color="0.9", zorder=0, lw=0)
            ax.axhline(alpha, color=MUTED, lw=0.8, zorder=1)
            for i, kind in enumerate(DATA_KINDS):
                part = sub[sub["data"] == kind].sort_values("n")
                if part.empty:
                    continue
                colour, marker = group_style(i)
                x = np.array([sizes.index(v) for v in part["n"]]) + (i - 1) * 0.18
                y = part["rate"].to_numpy()
                err = np.vstack([y - part["lower"].to_numpy(), part["upper"].to_numpy() - y])
                ax.errorbar(x, y, yerr=err, fmt=marker, color=colour, ms=4.5, lw=1,
                            capsize=0, label=kind, zorder=3)
            ax.set_xticks(range(len(sizes)), [str(s) for s in sizes])
            ax.set_xlim(-0.6, len(sizes) - 0.4)
            ax.set_ylim(0, top)
            ax.set_title(" / ".join(str(k) for k in key), loc="left", parse_math=False)
            ax.set_xlabel("sites")
            ax.set_ylabel(f"rejection rate at {alpha:g}")
            _finish(ax)
        for ax in axes[len(keys):]:
            ax.set_visible(False)
        axes[0].legend(title="data", loc="upper right", fontsize=SIZES["note"])
        fig.suptitle(title, x=0.01, ha="left", fontweight="bold")
        fig.draw_without_rendering()
    return fig


def power_figure(power: pd.DataFrame, *, panel: Sequence[str] = ("test",),
                 title: str = "Power against a planted gradient (alpha 0.05)",
                 xlabel: str = "strength of the planted gradient (correlation)",
                 columns: int = 3) -> Figure:
    """One panel per test: share of data sets rejected at 0.05 against the strength of the
    planted gradient, one line per number of sites, with 99 % intervals."""
    keys = list(dict.fromkeys(tuple(r) for r in power[list(panel)].itertuples(index=False)))
    nr, nc = _panels(len(keys), columns)
    with house_style():
        fig = Figure(figsize=(3.0 * nc + 0.4, 2.5 * nr + 0.6), layout="constrained")
        axes = np.atleast_1d(fig.subplots(nr, nc, squeeze=False)).ravel()
        for ax, key in zip(axes, keys, strict=False):
            sub = power[(power[list(panel)] == pd.Series(key, index=list(panel))).all(axis=1)]
            for i, n in enumerate(sorted(sub["n"].unique())):
                part = sub[sub["n"] == n].sort_values("strength")
                colour, marker = group_style(i)
                x = part["strength"].to_numpy(dtype=float)
                y = part["rate"].to_numpy()
                ax.fill_between(x, part["lower"], part["upper"], color=colour, alpha=0.15, lw=0)
                ax.plot(x, y, marker=marker, color=colour, ms=4.5, lw=1.2, label=f"{n} sites")
            ax.axhline(0.05, color=MUTED, lw=0.8)
            ax.set_ylim(0, 1.02)
            ax.set_title(" / ".join(str(k) for k in key), loc="left", parse_math=False)
            ax.set_xlabel(xlabel)
            ax.set_ylabel("power")
            _finish(ax)
        for ax in axes[len(keys):]:
            ax.set_visible(False)
        axes[0].legend(loc="upper left", fontsize=SIZES["note"])
        fig.suptitle(title, x=0.01, ha="left", fontweight="bold")
        fig.draw_without_rendering()
    return fig


def save(fig: Figure, path: Path) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    with house_style():
        fig.savefig(path, dpi=110, metadata={"Software": None})
    return path
