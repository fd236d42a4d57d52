"""Simple Mantel tests: each correlation (Pearson, Spearman, Kendall), one- and two-sided.

Data: two independent tables of two variables per site; the matrices are their Euclidean
distances. Skewed data are log-normal in both tables; the outlier is one site of the second
table (``y``). Power: each variable of ``y`` correlates with the matching variable of ``x``
at the planted strength (normal data).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.matrix import mantel

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

NAME = "mantel"
TESTS = {"pearson": ("pearson", "greater"), "pearson, two-sided": ("pearson", "two-sided"),
         "spearman": ("spearman", "greater"), "kendall": ("kendall", "greater")}
#: Kendall's tau costs O(m log m) per permutation: half the data sets.
KENDALL_SHARE = 2


def dataset(rng: np.random.Generator, n: int, kind: str, strength: float = 0.0):
    x = draw(rng, kind, (n, 2))
    y = draw(rng, kind, (n, 2), outlier=True)
    if strength:
        y = np.column_stack([mix(strength, x[:, j], y[:, j]) for j in range(2)])
    lab = labels(n)
    return DistanceMatrix(pdist(x), lab), DistanceMatrix(pdist(y), lab)


def _one(n: int, kind: str, permutations: int, strength: float, counter: list[int]):
    def one(rng: np.random.Generator) -> dict[str, float]:
        dx, dy = dataset(rng, n, kind, strength)
        seed = int(rng.integers(2**32))
        out = {}
        for test, (method, alternative) in TESTS.items():
            if method == "kendall" and counter[0] % KENDALL_SHARE:
                continue
            out[test] = mantel(dx, dy, method=method, alternative=alternative,
                               n_resamples=permutations, rng=seed).pvalue
        counter[0] += 1
        return out
    return one


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    null, power = [], []
    for n in budget.sizes:
        for kind in DATA_KINDS:
            p = collect(budget.datasets, _one(n, kind, budget.permutations, 0.0, [0]),
                        cell_rng(seed, NAME, "null", n, kind))
            for test in TESTS:
                null += rate_rows(p[test], test=test, scenario="independent", n=n, data=kind)
        for s in STRENGTHS:
            p = collect(budget.power, _one(n, "normal", budget.permutations, s, [0]),
                        cell_rng(seed, NAME, "power", n, s))
            for test in TESTS:
                power.append(power_row(p[test], test=test, n=n, strength=s))
    return {"null": pd.DataFrame(null), "power": pd.DataFrame(power)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.figures["mantel_null"] = null_figure(res.tables["null"], columns=4,
                                             title="Mantel tests: rejection rate under the null")
    res.figures["mantel_power"] = power_figure(res.tables["power"], columns=4,
                                               title="Mantel tests: power (alpha 0.05)")
    res.notes.append(f"Kendall: every {KENDALL_SHARE}nd data set (its cost is O(m log m) per "
                     "permutation).")
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
