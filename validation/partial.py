"""Partial Mantel tests: the two permutation methods offered, compared after Legendre (2000).

The null hypothesis of a partial Mantel test is about matrices: once the control ``Z`` is
regressed out, ``X`` and ``Y`` are unrelated. Data are built at that level, from three
independent tables of two variables per site (``z``, ``u``, ``v``) and their standardised
Euclidean distance matrices ``Dz``, ``Eu``, ``Ev``:

    X = a Dz + sqrt(1 - a^2) Eu,    Y = c Dz + b Eu + sqrt(1 - c^2 - b^2) Ev

(shifted to be positive). ``b = 0`` is the null; ``a`` sets how strongly the control is
correlated with the predictor (``a = 0.8``: the confounded case), ``c`` how strongly it drives
the response. Skewed data are log-normal in the three tables; the outlier is one site of the
control's table (Legendre's worst case for permuting raw data was skewed data with outliers in
the covariable). Power: ``b`` at the planted strengths in the confounded case.

One more row shows the caution of ``docs/matrix.md``: a common cause at the level of the
sites (``x_i = z_i + e_i``, ``y_i = z_i + e'_i``, distances of each) is not a null of the
matrix test, although ``x`` and ``y`` are conditionally independent given ``z``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.matrix import partial_mantel

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

NAME = "partial"
METHODS = ("raw", "residuals")
#: scenario -> (a, c): correlation of X with the control, of Y with the control
SCENARIOS = {
    "control unrelated": (0.0, 0.0),
    "y depends on control": (0.0, 0.6),
    "confounded (x and y depend on control)": (0.8, 0.6),
}
POWER_SCENARIO = "confounded (x and y depend on control)"


def _positive(v: np.ndarray, lab: list[str]) -> DistanceMatrix:
    return DistanceMatrix(v - v.min() + 1.0, lab)


def matrices(rng: np.random.Generator, n: int, kind: str, a: float, c: float, b: float = 0.0):
    lab = labels(n)
    dz = standardised(pdist(draw(rng, kind, (n, 2), outlier=True)))
    eu = standardised(pdist(draw(rng, kind, (n, 2))))
    ev = standardised(pdist(draw(rng, kind, (n, 2))))
    x = a * dz + np.sqrt(1 - a**2) * eu
    y = c * dz + b * eu + np.sqrt(1 - c**2 - b**2) * ev
    return _positive(x, lab), _positive(y, lab), _positive(dz, lab)


def site_level_common_cause(rng: np.random.Generator, n: int):
    lab = labels(n)
    z = rng.normal(size=(n, 2))
    x = z + rng.normal(size=(n, 2))
    y = z + rng.normal(size=(n, 2))
    return tuple(DistanceMatrix(pdist(t), lab) for t in (x, y, z))


def _tests(mats, permutations: int, rng: np.random.Generator) -> dict[str, float]:
    seed = int(rng.integers(2**32))
    x, y, z = mats
    return {m: partial_mantel(x, y, z, permute=m, n_resamples=permutations, rng=seed).pvalue
            for m in METHODS}


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    null, power = [], []
    perms = budget.permutations
    for scenario, (a, c) in SCENARIOS.items():
        for n in budget.sizes:
            for kind in DATA_KINDS:
                p = collect(budget.datasets,
                            lambda rng, n=n, kind=kind, a=a, c=c:
                                _tests(matrices(rng, n, kind, a, c), perms, rng),
                            cell_rng(seed, NAME, scenario, n, kind))
                for m in METHODS:
                    null += rate_rows(p[m], test=m, scenario=scenario, n=n, data=kind)
    a, c = SCENARIOS[POWER_SCENARIO]
    for n in budget.sizes:
        for s in STRENGTHS:
            p = collect(budget.power,
                        lambda rng, n=n, s=s: _tests(matrices(rng, n, "normal", a, c, s),
                                                     perms, rng),
                        cell_rng(seed, NAME, "power", n, s))
            for m in METHODS:
                power.append(power_row(p[m], test=m, scenario=POWER_SCENARIO, n=n, strength=s))
    n = 30 if 30 in budget.sizes else budget.sizes[-1]
    p = collect(budget.datasets,
                lambda rng: _tests(site_level_common_cause(rng, n), perms, rng),
                cell_rng(seed, NAME, "site-level", n))
    caution = []
    for m in METHODS:
        caution += rate_rows(p[m], test=m, scenario="site-level common cause (not a null)",
                             n=n, data="normal")
    return {"null": pd.DataFrame(null), "power": pd.DataFrame(power),
                                     "caution": pd.DataFrame(caution)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.blocks["partial:null"] = null_markdown(res.tables["null"], keys=("scenario", "test"))
    res.blocks["partial:caution"] = null_markdown(res.tables["caution"],
                                                  keys=("scenario", "test"))
    short = res.tables["null"].replace({"scenario": {POWER_SCENARIO: "confounded"}})
    res.figures["partial_null"] = null_figure(
        short, panel=("scenario", "test"), columns=2,
        title="Partial Mantel tests: rejection rate under the null, by permutation method")
    res.figures["partial_power"] = power_figure(
        res.tables["power"], columns=2,
        title="Partial Mantel tests, confounded case: power (alpha 0.05)",
        xlabel="planted partial effect b (matrix level)")
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
