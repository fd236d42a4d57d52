"""The spatial side of the Mantel tests: a check for spatial structure and a constrained null.

Each matrix is tested against distance in space (is it spatially structured?), and ``x`` is
randomised by Moran spectral randomisation for a p-value under a spatially constrained null.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from .._errors import InputError
from ..permutation import PermutationResult, custom_plan, permutation_test
from ._inputs import build_plan
from ._kernels import numba_threads
from ._mantel_core import mantel_pearson
from ._spatial import MoranSurrogates, location_distances, principal_coordinates, spatial_weights
from ._surrogate_kernels import surrogate_moments

__all__ = ["NOT_CHECKED", "SPATIAL_ALPHA", "SPATIAL_CHECK_RESAMPLES", "PearsonForm",
           "spatial_check"]

#: Significance level of the check for spatial structure of each matrix.
SPATIAL_ALPHA = 0.05
#: Permutations of the spatial-structure check (fewer if `n_resamples` is smaller).
SPATIAL_CHECK_RESAMPLES = 999

_REFS_SPATIAL = "(Guillot & Rousset 2013)"


def _structure_check(named: Mapping[str, np.ndarray], geo: np.ndarray, n: int,
                     n_resamples: int, gen: np.random.Generator,
                     n_jobs: int, labels: pd.Index | None = None) -> pd.DataFrame:
    """Mantel test (Pearson, one-sided 'greater') of each matrix against distance in space."""
    rows = []
    for name, v in named.items():
        plan = build_plan(n, scheme=None, strata=None,
                          n_resamples=min(n_resamples, SPATIAL_CHECK_RESAMPLES), rng=gen,
                          labels=labels)
        r, res = mantel_pearson(v, geo, plan, method="pearson", alternative="greater",
                                early_stop=None, n_jobs=n_jobs, names=(name, "spatial_null"))
        rows.append({"matrix": name, "statistic": r, "pvalue": float(res.pvalue),
                     "structured": bool(res.pvalue <= SPATIAL_ALPHA)})
    return pd.DataFrame(rows).set_index("matrix")


def _structure_notes(check: pd.DataFrame) -> list[str]:
    structured = list(check.index[check["structured"].to_numpy(dtype=bool)])
    def say(name: str) -> str:
        row = check.loc[name]
        return f"{name}: r = {row['statistic']:.3f}, p = {row['pvalue']:.3g}"
    if len(structured) == len(check):
        return [
            "Both matrices are spatially structured (Mantel correlation with distance between "
            f"sites, {'; '.join(say(s) for s in structured)}). Simple and partial Mantel tests "
            "then reject a true null too often " + _REFS_SPATIAL + ": rely on pvalue_spatial, "
            "from the spatially constrained null, rather than pvalue."
        ]
    if structured:
        return [f"Only {', '.join(structured)} is spatially structured ("
                f"{'; '.join(say(s) for s in structured)}): autocorrelation in one matrix "
                "alone does not inflate the plain test, so read pvalue, with pvalue_spatial "
                "as a check. " + _MISSED]
    return ["Neither matrix shows spatial structure (Mantel correlation with distance between "
            f"sites, p > {SPATIAL_ALPHA}): read pvalue, with pvalue_spatial as a check. "
            + _MISSED]


#: The limit of the check, said where it finds at most one matrix structured.
_MISSED = ("The check can miss weak or short-range structure: where pvalue_spatial is above "
           "your level and pvalue is not, treat the association as possibly spatial.")


NOT_CHECKED = (
    "Spatial autocorrelation was not checked. When both matrices are spatially structured, "
    "Mantel p-values are too small " + _REFS_SPATIAL + "; pass spatial_null=site coordinates "
    "(or distances) for a check and a spatially constrained p-value."
)


@dataclass(frozen=True, eq=False)
class PearsonForm:
    """A Pearson statistic of a surrogate ``d`` of ``x`` written through sums over pairs.

    ``r = (d . f_0) / (norm * sqrt(|d - mean(d)|^2 - sum_{l >= 1} (d . f_l)^2))`` with the
    rows ``f_l`` of ``rows`` centred (orthogonal to the constant vector) and ``f_1 ...``
    orthonormal and orthogonal to ``f_0``. The simple Mantel test is ``rows = [y
    standardised]``, ``norm = 1``; the partial test ``rows = [e_y, Q']`` (residuals of ``y``
    on the controls, an orthonormal basis of the centred controls), ``norm = |e_y|``: the
    residual of ``d`` on the controls has the length under the square root and the same
    product with ``e_y`` as ``d``.
    """

    rows: np.ndarray  # (L, m), C-ordered float64
    norm: float = 1.0

    def values(self, moments: np.ndarray) -> np.ndarray:
        """Statistics from :func:`surrogate_moments` (one row per surrogate)."""
        n_f, m = self.rows.shape
        dots = moments[:, :n_f]
        s1 = moments[:, n_f]
        s2 = moments[:, n_f + 1]
        spread = s2 - s1 * s1 / m - np.sum(dots[:, 1:] ** 2, axis=1)
        return dots[:, 0] / (self.norm * np.sqrt(np.maximum(spread, 1e-300)))


def spatial_check(x: np.ndarray, y: np.ndarray, stat_of: Callable[[np.ndarray], float],
                  spatial_null: object, labels: pd.Index, n: int, n_resamples: int,
                  n_surrogates: int, alternative: str, gen: object, n_jobs: int,
                  notes: list[str], form: PearsonForm | None = None) -> dict[str, object]:
    """Spatial-structure check of both matrices and the spatially constrained p-value.

    Appends the notes in words to ``notes`` and returns the result's spatial fields. With
    ``form`` (Pearson statistics) the surrogates are evaluated by one compiled kernel
    (:func:`surrogate_moments`); ``stat_of`` serves the other statistics.
    """
    geo = location_distances(spatial_null, labels)
    check = _structure_check({"x": x, "y": y}, geo, n, n_resamples, gen, n_jobs, labels)
    notes.extend(_structure_notes(check))
    obs_sp, res_sp, sp_notes = _spatial_null(x, stat_of, geo, n, n_surrogates=n_surrogates,
                                             alternative=alternative, gen=gen, n_jobs=n_jobs,
                                             form=form)
    notes.extend(sp_notes)
    return {"pvalue_spatial": float(res_sp.pvalue), "statistic_spatial": obs_sp,
            "null_distribution_spatial": res_sp.null_distribution, "spatial_structure": check}


def _spatial_null(
    x: np.ndarray,
    statistic_of: Callable[[np.ndarray], float],
    geo: np.ndarray,
    n: int,
    *,
    n_surrogates: int,
    alternative: str,
    gen: np.random.Generator,
    n_jobs: int | None = 1,
    form: PearsonForm | None = None,
) -> tuple[float, PermutationResult, list[str]]:
    """Moran spectral randomisation of ``x`` (via its principal coordinates).

    With ``form``, a batch of surrogates is one matrix product for their coordinates and one
    compiled pass over the pairs of sites for the sums the statistic needs, on the kernel
    threads ``n_jobs`` allows (the engine's size rule decides for ``-1``); the observed
    statistic goes through the same two steps. Otherwise the surrogates of a batch are
    evaluated one by one on ``n_jobs`` threads (their products and distances release the
    GIL). Either way each surrogate is computed exactly as on one thread, so the result does
    not depend on ``n_jobs``.
    """
    coords, share = principal_coordinates(x)
    if coords.shape[1] == 0:
        raise InputError("`x` has no Euclidean structure (all principal coordinates vanish); "
                         "no spatial surrogates can be built.")
    w = spatial_weights(geo)
    msr = MoranSurrogates.from_coordinates(coords, w)
    plan = custom_plan(msr.draw, n, n_resamples=n_surrogates, rng=gen, scheme="custom",
                       description="Moran spectral randomisation of x")
    task = "spatial null (Moran spectral randomisation)"
    if form is not None:
        identity = msr.batch_coordinates(np.ones((1, msr.n_mem)))
        # the mean distance of the observed configuration: moments about it, not about 0
        shift = float(np.mean(pdist(identity[0])))

        def batch(signs: np.ndarray) -> np.ndarray:
            return form.values(surrogate_moments(msr.batch_coordinates(signs), form.rows,
                                                 shift))

        with numba_threads(n_jobs):
            observed = float(batch(np.ones((1, msr.n_mem)))[0])
            result = permutation_test(batch, plan, observed=observed, alternative=alternative,
                                      task=task)
        return observed, result, _null_notes(n_surrogates, msr, share, observed)
    euclid = msr.distances(np.ones(msr.n_mem))
    observed = float(statistic_of(euclid))

    workers = (os.cpu_count() or 1) if n_jobs is None or n_jobs < 0 else int(n_jobs)

    def one(signs: np.ndarray) -> float:
        return float(statistic_of(msr.distances(signs)))

    def statistic(signs: np.ndarray) -> np.ndarray:
        if workers <= 1 or len(signs) < 2:
            return np.array([one(s) for s in signs])
        with ThreadPoolExecutor(min(workers, len(signs))) as pool:
            return np.array(list(pool.map(one, signs)))

    result = permutation_test(statistic, plan, observed=observed, alternative=alternative,
                              task=task)
    return observed, result, _null_notes(n_surrogates, msr, share, observed)


def _null_notes(n_surrogates: int, msr: MoranSurrogates, share: float,
                observed: float) -> list[str]:
    notes = [
        f"pvalue_spatial: {n_surrogates} surrogates of x by Moran spectral randomisation "
        "(Wagner & Dray 2015; for Mantel tests Crabot et al. 2019): random signs on x's "
        f"projections on {msr.n_mem} Moran eigenvector maps (Gaussian weights of scale twice "
        "the longest minimum-spanning-tree edge), which keeps the Moran's I of every "
        "principal coordinate of x."
    ]
    if share > 1e-8:
        notes.append(
            f"x is not Euclidean (negative eigenvalues {100 * share:.2g}% of the positive ones): "
            "the spatial null uses its Euclidean part, the principal coordinates on positive "
            f"axes, and compares against the statistic computed there ({observed:.4f}). With "
            "large negative eigenvalues consider testing sqrt(x), Euclidean for many "
            "ecological dissimilarities."
        )
    return notes

