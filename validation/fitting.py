"""Fits onto ordination space: vectors, factors (class centroids) and surfaces.

Data: two score axes per site and one environmental variable or factor.

- Vectors: scores and variable of the same kind (both log-normal when skewed); the outlier is
  one site of the variable. Power: the variable correlates with ``axis1`` at the strength.
- Factors: three classes of (nearly) equal size in random order; scores of the kind, the
  outlier one site of the scores. Power: ``axis1`` correlates with the class number (0, 1, 2)
  at the strength.
- Surfaces (``fit_surface``, its test against a flat surface and its curvature test): the
  variable of the kind, independent of the scores (flat, so also a plane: both tests are
  under their null); the outlier is one site of the variable. Power of the surface test: a
  plane, the variable correlating with ``axis1``; of the curvature test: a bowl, the variable
  correlating with ``axis1^2 + axis2^2``. The curvature test's null is also run on the
  planted planes (a plane with a slope is still no curvature).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from gradients.fitting import fit_factors, fit_surface, fit_vectors

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

NAME = "fitting"
AXES = ["axis1", "axis2"]


def _scores(rng, n, kind, outlier=False) -> pd.DataFrame:
    return pd.DataFrame(draw(rng, kind, (n, 2), outlier=outlier), index=labels(n),
                        columns=AXES)


def vectors(rng, n, kind, strength, permutations) -> dict[str, float]:
    sc = _scores(rng, n, kind)
    v = draw(rng, kind, n, outlier=True)
    if strength:
        v = mix(strength, sc["axis1"].to_numpy(), v)
    env = pd.DataFrame({"v": v}, index=sc.index)
    fit = fit_vectors(sc, env, n_resamples=permutations, rng=int(rng.integers(2**32)))
    return {"vectors": float(fit.pvalue.iloc[0])}


def factors(rng, n, kind, strength, permutations) -> dict[str, float]:
    sc = _scores(rng, n, kind, outlier=True)
    codes = rng.permutation(np.resize(np.arange(3), n))
    if strength:
        sc["axis1"] = mix(strength, codes.astype(float), sc["axis1"].to_numpy())
    fac = pd.DataFrame({"f": np.array(["a", "b", "c"])[codes]}, index=sc.index)
    fit = fit_factors(sc, fac, n_resamples=permutations, rng=int(rng.integers(2**32)))
    return {"factors": float(fit.pvalue.iloc[0])}


def surface(rng, n, kind, shape, strength, permutations) -> dict[str, float]:
    sc = _scores(rng, n, kind)
    y = draw(rng, kind, n, outlier=True)
    if shape == "plane" and strength:
        y = mix(strength, sc["axis1"].to_numpy(), y)
    elif shape == "bowl":
        y = mix(strength, (sc["axis1"] ** 2 + sc["axis2"] ** 2).to_numpy(), y)
    fit = fit_surface(sc, pd.Series(y, index=sc.index, name="y"), n_resamples=permutations,
                      rng=int(rng.integers(2**32)))
    return {"surface": fit.pvalue, "surface curvature": fit.pvalue_curvature}


def _cheap(test, n, kind, strength, permutations):
    fn = vectors if test == "vectors" else factors
    return lambda rng: fn(rng, n, kind, strength, permutations)


def simulate(budget: Budget, seed: int) -> dict[str, pd.DataFrame]:
    """The simulated rates of this family, as tidy tables."""
    null, power = [], []
    for test in ("vectors", "factors"):
        for n in budget.sizes:
            for kind in DATA_KINDS:
                p = collect(budget.datasets, _cheap(test, n, kind, 0.0, budget.permutations),
                            cell_rng(seed, NAME, test, "null", n, kind))
                null += rate_rows(p[test], test=test, scenario="independent", n=n, data=kind)
            for s in STRENGTHS:
                p = collect(budget.power, _cheap(test, n, "normal", s, budget.permutations),
                            cell_rng(seed, NAME, test, "power", n, s))
                power.append(power_row(p[test], test=test, n=n, strength=s))
    perms = budget.heavy_permutations
    for n in budget.sizes:
        for kind in DATA_KINDS:
            p = collect(budget.heavy,
                        lambda rng, n=n, kind=kind: surface(rng, n, kind, "flat", 0.0, perms),
                        cell_rng(seed, NAME, "surface", "null", n, kind))
            for test in ("surface", "surface curvature"):
                null += rate_rows(p[test], test=test, scenario="flat", n=n, data=kind)
        planes = {}
        for s in STRENGTHS:
            p = collect(budget.heavy,
                        lambda rng, n=n, s=s: surface(rng, n, "normal", "plane", s, perms),
                        cell_rng(seed, NAME, "surface", "plane", n, s))
            power.append(power_row(p["surface"], test="surface", n=n, strength=s))
            planes[s] = p["surface curvature"]
            p = collect(budget.heavy,
                        lambda rng, n=n, s=s: surface(rng, n, "normal", "bowl", s, perms),
                        cell_rng(seed, NAME, "surface", "bowl", n, s))
            power.append(power_row(p["surface curvature"], test="surface curvature", n=n,
                                   strength=s))
        null += rate_rows(np.concatenate(list(planes.values())), test="surface curvature",
                          scenario="planted planes", n=n, data="normal")
    return {"null": pd.DataFrame(null), "power": pd.DataFrame(power)}


def render(tables: dict[str, pd.DataFrame]) -> FamilyResult:
    """Markdown blocks and figures of the tables of :func:`simulate`."""
    res = FamilyResult(NAME, tables=tables)
    nt = res.tables["null"]
    res.figures["fitting_null"] = null_figure(
        nt[nt["scenario"] != "planted planes"], columns=4,
        title="Fits onto ordination space: rejection rate under the null")
    res.figures["fitting_power"] = power_figure(
        res.tables["power"], columns=4, title="Fits onto ordination space: power (alpha 0.05)")
    return res


def run(budget: Budget, seed: int) -> FamilyResult:
    return render(simulate(budget, seed))
