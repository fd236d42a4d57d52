"""Mantel correlogram classes (two-sided, the default), with the progressive Holm correction.

Data: sites at random in the unit square (the classes are of their distances); the community
matrix is the Euclidean distance of two site variables of the kind, unrelated to the
locations; the outlier is one site of the community variables. Classes by Sturges' rule with
the default ``min_pairs=30``, except at 10 sites (45 pairs in 7 classes, none with 30 pairs)
where ``min_pairs=1`` so that the classes are tested at all.

Rows: the first class (shortest distances; its progressive Holm p-value is its raw p-value),
one tested class drawn at random in each data set (so that the data sets stay independent),
and the family-wise rate, the share of data sets in which any class is significant after the
progressive correction. Power: the first community variable correlates with the first
coordinate at the strength (positive autocorrelation at short distances).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.matrix import mantel_correlogram

from ._common import (
    DATA_KINDS,
    STRENGTHS,
    Budget,
    FamilyResult,
    cell_rng,
    collect,
    draw,
    labels,
    mix,
    power_row,
    rate_rows,
)
from ._figures import null_figure, power_figure

NAME = "correlogram"
TESTS = ("first class", "a random class", "any class (family-wise)")


def one(rng: np.random.Generator, n: int, kind: str, strength: float,
        permutations: int) -> dict[str, float]:
    lab = labels(n)
    xy = rng.uniform(size=(n, 2))
    com = draw(rng, kind, (n, 2), outlier=True)
    if strength:
        com[:, 0] = mix(strength, xy[:, 0], com[:, 0])
    res = mantel_correlogram(DistanceMatrix(pdist(com), lab), DistanceMatrix(pdist(xy), lab),
                             n_resamples=permutations, rng=int(rng.integers(2**32)),
                             min_pairs=1 if n < 20 else 30)
    t = res.table[res.table["tested"].astype(bool)]
    p = t["pvalue"].to_numpy(dtype=float)
    pick = int(rng.integers(len(p)))
    return {"first class": p[0], "a random class": p[pick],
            "any class (family-wise)": float(t["pvalue_adjusted"].min())}


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    null, power = [], []
    perms = budget.permutations
    for n in budget.sizes:
        for kind in DATA_KINDS:
            p = collect(budget.datasets, lambda rng, n=n, kind=kind: one(rng, n, kind, 0.0, perms),
                        cell_rng(seed, NAME, "null", n, kind))
            for test in TESTS:
                null += rate_rows(p[test], test=test, scenario="unrelated to space", n=n,
                                  data=kind)
        for s in STRENGTHS:
            p = collect(budget.power, lambda rng, n=n, s=s: one(rng, n, "normal", s, perms),
                        cell_rng(seed, NAME, "power", n, s))
            power.append(power_row(p["first class"], test="first class", n=n, strength=s))
    return {"null": pd.DataFrame(null), "power": pd.DataFrame(power)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.figures["correlogram_null"] = null_figure(
        res.tables["null"], columns=3, title="Mantel correlogram: rejection rate under the null")
    res.figures["correlogram_power"] = power_figure(
        res.tables["power"], columns=1, title="Mantel correlogram, first class: power")
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
