"""Coverage of the site-bootstrap intervals of ``distance_decay`` (nominal 95 %).

Sites at random in the unit square; similarities from the exponential model with a known
slope, ``ln S_ij = ln 0.5 + b g_ij + u_i + u_j + e_ij`` with ``b = -ln 2 / 0.5`` (similarity
halves over half the side of the square), ``e_ij ~ N(0, 0.1^2)`` independent per pair and, in
the first scenario, site effects ``u_i ~ N(0, 0.1^2)`` that make pairs sharing a site
dependent (the reason intervals come from resampling sites). Ordinary least squares is
unbiased for ``b`` and ``ln 0.5`` here, so an interval covers when it contains them. The
halving-distance interval is the slope's mapped through ``ln 2 / -b``, so it covers exactly
when the slope's does.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.matrix import distance_decay

from ._common import Budget, FamilyResult, cell_rng, clopper_pearson, collect, labels, markdown

NAME = "decay"
SLOPE = -np.log(2) / 0.5
INTERCEPT = np.log(0.5)
LEVEL = 0.95
SCENARIOS = {"site effects and pair noise": 0.1, "pair noise only": 0.0}


def one(rng: np.random.Generator, n: int, site_sd: float, resamples: int) -> dict[str, float]:
    xy = rng.uniform(size=(n, 2))
    g = pdist(xy)
    u = rng.normal(0, site_sd, n) if site_sd else np.zeros(n)
    i, j = np.triu_indices(n, k=1)
    logs = INTERCEPT + SLOPE * g + u[i] + u[j] + rng.normal(0, 0.1, g.size)
    lab = labels(n)
    res = distance_decay(DistanceMatrix(np.exp(logs), lab), DistanceMatrix(g, lab),
                         similarity="as-is", n_resamples=resamples, confidence_level=LEVEL,
                         rng=int(rng.integers(2**32)))
    t = res.table
    return {"slope": float(t.loc["slope", "lower"] <= SLOPE <= t.loc["slope", "upper"]),
            "intercept": float(t.loc["intercept", "lower"] <= INTERCEPT
                               <= t.loc["intercept", "upper"]),
            "estimate": res.slope, "bootstrap sd": float(res.bootstrap_distribution[:, 0].std())}


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    rows = []
    for scenario, site_sd in SCENARIOS.items():
        for n in budget.sizes:
            c = collect(budget.datasets,
                        lambda rng, n=n, s=site_sd: one(rng, n, s, budget.permutations),
                        cell_rng(seed, NAME, scenario, n))
            # the bootstrap's standard error against the spread of the estimates themselves
            ratio = float(np.mean(c.pop("bootstrap sd")) / np.std(c.pop("estimate"), ddof=1))
            for what, hits in c.items():
                k = int(hits.sum())
                lo, hi = clopper_pearson(k, hits.size)
                rows.append({"interval": what, "scenario": scenario, "n": n,
                             "datasets": hits.size, "bootstrap samples": budget.permutations,
                             "coverage": k / hits.size, "lower": lo, "upper": hi,
                             "inside": bool(lo <= LEVEL <= hi),
                             "bootstrap se / sd of slopes": ratio if what == "slope" else np.nan})
    table = pd.DataFrame(rows)
    return {"coverage": table}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    res.blocks["decay:coverage"] = markdown(tables["coverage"])
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
