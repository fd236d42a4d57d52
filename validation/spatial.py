"""Mantel tests of spatially autocorrelated data: the plain and the spatially constrained null.

Fifty sites at random in the unit square; two independent Gaussian random fields with
exponential covariance ``exp(-d / range)``, range 0 (no autocorrelation), 0.1, 0.3 and 0.6;
the matrices are the absolute differences of the two fields between sites, and
``mantel(x, y, spatial_null=sites)`` gives three p-values for each data set:

- ``plain``: the ordinary permutation p-value (``pvalue``);
- ``constrained``: the p-value under Moran spectral randomisation of ``x`` (``pvalue_spatial``);
- ``check first``: the verdict rule the report used before: significant only if ``pvalue``
  is and, when the spatial check finds both matrices structured, ``pvalue_spatial`` as well;
- ``report's rule``: what the report's verdict rule reads now: significant only if both
  ``pvalue`` and ``pvalue_spatial`` are (the constrained p-value is asked for whatever the
  spatial check finds, because ``check first`` was too liberal under strong autocorrelation).

Scenarios: both fields autocorrelated (Guillot & Rousset 2013: the plain test is too
liberal); only ``x`` autocorrelated, or only ``y`` (no inflation expected: Quilodrán, Currat &
Montoya-Burgos, Mol. Ecol. Resour. 25: e13898; citation from memory). Power: the second
field correlates with the first at the planted strength, without autocorrelation and with
both autocorrelated (range 0.3), for each reading.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy.spatial.distance import pdist, squareform

from gradients.distance import DistanceMatrix
from gradients.matrix import mantel
from gradients.plot import house_style
from gradients.plot._style import MUTED, SIZES, group_style

from ._common import (
    STRENGTHS,
    Budget,
    FamilyResult,
    acceptance_band,
    cell_rng,
    collect,
    labels,
    markdown,
    power_markdown,
    power_row,
    rate_rows,
)

NAME = "spatial"
RANGES = (0.0, 0.1, 0.3, 0.6)
N_SITES = 50
SCENARIOS = ("both autocorrelated", "x only", "y only")
READINGS = ("plain", "constrained", "check first", "report's rule")


def gaussian_field(rng: np.random.Generator, xy: np.ndarray, scale: float) -> np.ndarray:
    """A Gaussian random field with covariance ``exp(-d / scale)`` at the sites (white noise
    for ``scale == 0``), by the Cholesky factor of the covariance matrix."""
    if scale == 0:
        return rng.normal(size=len(xy))
    cov = np.exp(-squareform(pdist(xy)) / scale)
    chol = np.linalg.cholesky(cov + 1e-10 * np.eye(len(xy)))
    return chol @ rng.normal(size=len(xy))


def one(rng: np.random.Generator, scale: float, scenario: str, permutations: int,
        n: int = N_SITES, strength: float = 0.0) -> dict[str, float]:
    xy = rng.uniform(size=(n, 2))
    fx = gaussian_field(rng, xy, scale if scenario in ("both autocorrelated", "x only") else 0)
    fy = gaussian_field(rng, xy, scale if scenario in ("both autocorrelated", "y only") else 0)
    if strength:  # the second field correlates with the first at the strength
        fy = strength * fx + np.sqrt(1 - strength**2) * fy
    lab = labels(n)
    res = mantel(DistanceMatrix(pdist(fx[:, None]), lab), DistanceMatrix(pdist(fy[:, None]), lab),
                 n_resamples=permutations, n_surrogates=permutations, spatial_null=xy,
                 rng=int(rng.integers(2**32)))
    both = bool(res.spatial_structure["structured"].astype(bool).all())
    check_first = max(res.pvalue, res.pvalue_spatial) if both else res.pvalue
    return {"plain": res.pvalue, "constrained": res.pvalue_spatial, "check first": check_first,
            "report's rule": max(res.pvalue, res.pvalue_spatial),
            "both structured": float(both)}


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    rows, structured = [], []
    for scale in RANGES:
        for scenario in (SCENARIOS if scale else ("none autocorrelated",)):
            p = collect(budget.datasets,
                        lambda rng, s=scale, sc=scenario: one(rng, s, sc, budget.permutations),
                        cell_rng(seed, NAME, scale, scenario))
            for reading in READINGS:
                rows += rate_rows(p[reading], test=reading, scenario=scenario, range=scale,
                                  n=N_SITES, data="Gaussian field")
            structured.append({"scenario": scenario, "range": scale,
                               "both found structured": float(np.mean(p["both structured"]))})
    power = []
    for scale in (0.0, 0.3):
        scenario = "both autocorrelated" if scale else "none autocorrelated"
        for s in STRENGTHS:
            p = collect(budget.power,
                        lambda rng, sc=scale, sn=scenario, s=s: one(rng, sc, sn,
                                                                    budget.permutations,
                                                                    strength=s),
                        cell_rng(seed, NAME, "power", scale, s))
            for reading in READINGS:
                power.append(power_row(p[reading], test=reading, scenario=scenario,
                                       range=scale, n=N_SITES, strength=s))
    null = pd.DataFrame(rows)
    return {"null": null, "structure": pd.DataFrame(structured),
                                     "power": pd.DataFrame(power)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.blocks["spatial:power"] = power_markdown(res.tables["power"],
                                                 keys=("scenario", "range", "test"))
    null = tables["null"]
    res.blocks["spatial:null"] = _table(null)
    res.blocks["spatial:structure"] = markdown(
        tables["structure"].pivot_table(index="scenario", columns="range",
                                             values="both found structured", sort=False)
        .rename(columns=lambda c: f"range {c:g}").reset_index())
    res.figures["spatial_autocorrelation"] = figure(null)
    return res


def _table(null: pd.DataFrame) -> str:
    out = []
    for (scenario, scale), part in null.groupby(["scenario", "range"], sort=False):
        row = {"scenario": scenario, "range": f"{scale:g}",
               "data sets": int(part["datasets"].max())}
        for alpha in (0.01, 0.05):
            for reading in READINGS:
                r = part[(part["test"] == reading) & np.isclose(part["alpha"], alpha)].iloc[0]
                text = f"{r['rate']:.3f} ({r['lower']:.3f}-{r['upper']:.3f})"
                row[f"{reading} at {alpha:g}"] = text + ("" if r["inside"] else " **outside**")
        out.append(row)
    return markdown(pd.DataFrame(out))


def figure(null: pd.DataFrame, alpha: float = 0.05) -> Figure:
    """Rejection rate at ``alpha`` against the range of autocorrelation, plain and constrained
    null: both fields autocorrelated (left), one only (right)."""
    rows = null[np.isclose(null["alpha"], alpha)]
    base = rows[rows["scenario"] == "none autocorrelated"]
    lo, hi = acceptance_band(int(rows["datasets"].max()), alpha)
    panels = {
        "Both fields autocorrelated": [("plain", "both autocorrelated", "-", 0),
                                       ("constrained", "both autocorrelated", "-", 1),
                                       ("check first", "both autocorrelated", "--", 3),
                                       ("report's rule", "both autocorrelated", ":", 2)],
        "One field autocorrelated": [("plain", "x only", "-", 0),
                                     ("constrained", "x only", "-", 1),
                                     ("plain", "y only", "--", 0),
                                     ("constrained", "y only", "--", 1)],
    }
    with house_style():
        fig = Figure(figsize=(8.6, 3.6), layout="constrained")
        axes = fig.subplots(1, 2, sharey=True)
        top = float(rows["upper"].max()) * 1.05
        for ax, (title, lines) in zip(axes, panels.items(), strict=True):
            ax.axhspan(lo, hi, color="0.9", lw=0, zorder=0)
            ax.axhline(alpha, color=MUTED, lw=0.8)
            for k, (reading, scenario, style, colour_index) in enumerate(lines):
                part = pd.concat([base[base["test"] == reading],
                                  rows[(rows["test"] == reading)
                                       & (rows["scenario"] == scenario)]]).sort_values("range")
                colour, marker = group_style(colour_index)
                x = part["range"].to_numpy(dtype=float) + (k - (len(lines) - 1) / 2) * 0.012
                y = part["rate"].to_numpy()
                err = np.vstack([y - part["lower"].to_numpy(), part["upper"].to_numpy() - y])
                label = reading if title.startswith("Both") else f"{reading}, {scenario}"
                if scenario == "y only":  # a shape of its own (hollow marks mean "not
                    marker = group_style(colour_index + 2)[1]  # significant" in the house style)
                ax.errorbar(x, y, yerr=err, color=colour, ls=style, marker=marker, ms=4.5,
                            lw=1.3, capsize=0, label=label)
            ax.set_xlabel("range of the exponential covariance")
            ax.set_xticks(list(RANGES))
            ax.set_ylim(0, top)
            ax.set_title(title, loc="left")
            for side in ("left", "bottom"):
                ax.spines[side].set_position(("outward", 4))
            ax.legend(loc="upper left", fontsize=SIZES["note"])
        axes[0].set_ylabel(f"rejection rate at {alpha:g}")
        fig.suptitle(f"Mantel test of two independent Gaussian fields, {N_SITES} random sites "
                     "(grey: 99 % range of an exact test)", x=0.01, ha="left",
                     fontweight="bold")
        fig.draw_without_rendering()
    return fig


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
