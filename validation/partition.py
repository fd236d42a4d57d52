"""The partition stage: dbRDA tests (model, first axis, marginal term, partial model) and the
global test of forward selection, at 10, 30 and 100 sites and three kinds of data.

The designs are those of ``validation/partition_calibration.py`` (whose 1,000 data sets of 30
sites, with Euclidean and Bray-Curtis dissimilarities, and whose planted-truth runs of the
report's pipeline are quoted in ``docs/partition.md``), extended here over the numbers of
sites and kinds of data: community dissimilarities are Euclidean distances of six response
variables per site; their noise is of the kind (log-normal when skewed; the outlier is one
site of the responses).

- model: a numeric predictor and a three-level factor, nothing planted (rows: the model and
  its first constrained axis);
- marginal term: a driver with an effect and an idle predictor correlated with it (0.5) that
  has none (row: the idle term, residuals of the reduced model permuted);
- partial model: the idle and a noise predictor given the driver as covariable;
- forward selection: five candidates, none with an effect (its global test).

Power: each response variable correlates with one predictor (the model test's numeric
predictor, forward selection's first candidate) at the planted strength.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.partition import dbrda, forward_select

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
    null_markdown,
    power_row,
    rate_rows,
)
from ._figures import null_figure, power_figure

NAME = "partition"
RESPONSES = 6


def _row(table: pd.DataFrame, test: str, effect: str) -> float:
    return float(table[(table["test"] == test) & (table["effect"] == effect)]["pvalue"].iloc[0])


def _community(rng, n, kind, signal=None, strength=0.0, effects=None):
    noise = draw(rng, kind, (n, RESPONSES), outlier=True)
    if signal is not None and effects is not None:  # a driver with an effect
        y = np.outer(signal, effects) + noise
    elif signal is not None and strength:
        y = np.column_stack([mix(strength, signal, noise[:, j]) for j in range(RESPONSES)])
    else:
        y = noise
    return DistanceMatrix(pdist(y), labels(n))


def one(rng: np.random.Generator, n: int, kind: str, permutations: int,
        strength: float = 0.0) -> dict[str, float]:
    lab = labels(n)
    seed = int(rng.integers(2**32))
    out = {}
    # model, nothing planted (or, for power, a gradient along x)
    x = pd.DataFrame({"x": rng.normal(size=n), "f": rng.choice(list("abc"), n)}, index=lab)
    d = _community(rng, n, kind, x["x"].to_numpy(), strength)
    t = dbrda(d, x, n_resamples=permutations, rng=seed).table
    out["model"], out["first axis"] = _row(t, "model", "all predictors"), _row(t, "axis", "axis1")
    # forward selection, nothing planted (or a gradient along the first candidate)
    cand = pd.DataFrame(rng.normal(size=(n, 5)), index=lab, columns=list("abcde"))
    d = _community(rng, n, kind, cand["a"].to_numpy(), strength)
    out["forward selection (global test)"] = forward_select(d, cand, n_resamples=permutations,
                                                            rng=seed).pvalue
    if strength:
        return out
    # marginal term without effect beside a driver, and the partial model given the driver
    driver = rng.normal(size=n)
    idle = 0.5 * driver + np.sqrt(0.75) * rng.normal(size=n)
    d = _community(rng, n, kind, driver, effects=rng.normal(size=RESPONSES))
    both = pd.DataFrame({"driver": driver, "idle": idle}, index=lab)
    out["marginal term"] = _row(dbrda(d, both, n_resamples=permutations, rng=seed).table,
                                "term", "idle")
    pred = pd.DataFrame({"idle": idle, "noise": rng.normal(size=n)}, index=lab)
    out["partial model"] = dbrda(d, pred, covariables=both[["driver"]],
                                 n_resamples=permutations, rng=seed).pvalue
    return out


TESTS = ("model", "first axis", "marginal term", "partial model",
         "forward selection (global test)")


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    null, power = [], []
    perms = budget.permutations
    for n in budget.sizes:
        for kind in DATA_KINDS:
            p = collect(budget.datasets, lambda rng, n=n, kind=kind: one(rng, n, kind, perms),
                        cell_rng(seed, NAME, "null", n, kind))
            for test in TESTS:
                null += rate_rows(p[test], test=test, scenario="no effect", n=n, data=kind)
        for s in STRENGTHS:
            p = collect(budget.power, lambda rng, n=n, s=s: one(rng, n, "normal", perms, s),
                        cell_rng(seed, NAME, "power", n, s))
            for test in ("model", "forward selection (global test)"):
                power.append(power_row(p[test], test=test, n=n, strength=s))
    return {"null": pd.DataFrame(null), "power": pd.DataFrame(power)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.blocks["partition:null"] = null_markdown(res.tables["null"], keys=("test",))
    res.figures["partition_null"] = null_figure(
        res.tables["null"], columns=3, title="Partition stage: rejection rate under the null")
    res.figures["partition_power"] = power_figure(
        res.tables["power"], columns=2, title="Partition stage: power (alpha 0.05)")
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
