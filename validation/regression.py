"""Multiple regression on distance matrices: the test of R2 and of each coefficient.

Data at the level of the matrices, from three tables of two variables per site (``a``, ``b``,
``y``) and their standardised Euclidean distances ``Da``, ``Eb``, ``Ey``: predictors
``A = Da`` and ``B = 0.6 Da + 0.8 Eb`` (correlated, r about 0.6) and response
``Y = c A + sqrt(1 - c^2) Ey``. Skewed: log-normal tables; outlier: one site of the response's
table.

- ``c = 0``, the global null: R2 and both coefficients (pseudo-t) are under their null.
- ``c = 0.6``, the response depends on ``A`` only: ``B``'s coefficient has no effect given
  ``A``, but the permutations of the response test the global null, so its test is shown to
  say what it is not; beside it, the same question asked by
  ``partial_mantel(Y, B, A, permute='residuals')``.

Power: ``c`` at the planted strengths, the R2 test and ``A``'s coefficient.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.matrix import matrix_regression, partial_mantel

from ._common import (
    DATA_KINDS,
    STRENGTHS,
    Budget,
    FamilyResult,
    cell_rng,
    collect,
    draw,
    labels,
    null_markdown,
    power_row,
    rate_rows,
    standardised,
)
from ._figures import null_figure, power_figure

NAME = "regression"


def matrices(rng: np.random.Generator, n: int, kind: str, c: float):
    lab = labels(n)
    da = standardised(pdist(draw(rng, kind, (n, 2))))
    eb = standardised(pdist(draw(rng, kind, (n, 2))))
    ey = standardised(pdist(draw(rng, kind, (n, 2), outlier=True)))
    b = 0.6 * da + 0.8 * eb
    y = c * da + np.sqrt(1 - c**2) * ey
    return tuple(DistanceMatrix(v - v.min() + 1.0, lab) for v in (y, da, b))


def one(rng: np.random.Generator, n: int, kind: str, c: float, permutations: int,
        with_partial: bool = False) -> dict[str, float]:
    y, a, b = matrices(rng, n, kind, c)
    seed = int(rng.integers(2**32))
    res = matrix_regression(y, {"A": a, "B": b}, n_resamples=permutations, rng=seed)
    out = {"R2": res.pvalue, "coefficient A": float(res.table.loc["A", "pvalue"]),
           "coefficient B": float(res.table.loc["B", "pvalue"])}
    if with_partial:
        pm = partial_mantel(b, y, a, permute="residuals", alternative="two-sided",
                            n_resamples=permutations, rng=seed)
        out["B given A: partial Mantel, residuals"] = pm.pvalue
    return out


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    null, power = [], []
    perms = budget.permutations
    for n in budget.sizes:
        for kind in DATA_KINDS:
            p = collect(budget.datasets,
                        lambda rng, n=n, kind=kind: one(rng, n, kind, 0.0, perms),
                        cell_rng(seed, NAME, "global", n, kind))
            for test in ("R2", "coefficient A", "coefficient B"):
                null += rate_rows(p[test], test=test, scenario="global null", n=n, data=kind)
            p = collect(budget.datasets,
                        lambda rng, n=n, kind=kind: one(rng, n, kind, 0.6, perms, True),
                        cell_rng(seed, NAME, "given A", n, kind))
            for test in ("coefficient B", "B given A: partial Mantel, residuals"):
                null += rate_rows(p[test], test=test, scenario="y depends on A only", n=n,
                                  data=kind)
        for s in STRENGTHS:
            p = collect(budget.power, lambda rng, n=n, s=s: one(rng, n, "normal", s, perms),
                        cell_rng(seed, NAME, "power", n, s))
            for test in ("R2", "coefficient A"):
                power.append(power_row(p[test], test=test, n=n, strength=s))
    return {"null": pd.DataFrame(null), "power": pd.DataFrame(power)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.blocks["regression:null"] = null_markdown(res.tables["null"], keys=("scenario", "test"))
    res.figures["regression_null"] = null_figure(
        res.tables["null"], panel=("scenario", "test"), columns=3,
        title="Regression on distance matrices: rejection rate under the null")
    res.figures["regression_power"] = power_figure(
        res.tables["power"], columns=2,
        title="Regression on distance matrices: power (alpha 0.05)",
        xlabel="planted correlation of the response with A (matrix level)")
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
