"""Pairwise comparisons of the classes of a factor: one-way PERMANOVA on every pair."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd

from .._errors import InputError
from ..distance import DistanceMatrix, gower_centred
from ..distance._class_sums import PermutedClassSums
from ..permutation import adjust_pvalues, permutation_test
from ._classes import group_plan, numba_threads, streams
from ._design import Design, Term

__all__ = ["PAIRWISE_COLUMNS", "pair_test", "pairwise_tests"]

PAIRWISE_COLUMNS = ("term", "level_1", "level_2", "n_sites", "pseudo_f", "r2", "pvalue",
                    "pvalue_adjusted", "exact")


def pair_test(dm: DistanceMatrix, codes: np.ndarray, strata: np.ndarray | None, *,
              n_resamples: int, rng: object, n_jobs: int) -> tuple[float, float, float, bool]:
    """One-way pseudo-F of two classes (codes 0 and 1): F, R2, p-value, exact."""
    gm = gower_centred(dm)
    g = np.asarray(gm.matrix)
    m = dm.n
    x = (codes == 1).astype(np.float64)
    q = (x - x.mean())[:, None]
    q /= np.sqrt(float(np.sum(q * q)))
    total = gm.total
    ss = float(q[:, 0] @ g @ q[:, 0])
    stat = ss / ((total - ss) / (m - 2))
    # tr(Q' G_o Q) = S_0 / n_0 + S_1 / n_1, and S_0 = S_1 since the rows of G sum to zero:
    # the smaller class's block alone gives it
    sizes = np.bincount(codes, minlength=2).astype(np.float64)
    small = int(np.argmin(sizes))
    kernel = PermutedClassSums(g, (codes != small).astype(np.intp), first=1)
    factor = 1.0 / sizes[0] + 1.0 / sizes[1]

    def statistic(orders: np.ndarray) -> np.ndarray:
        s = kernel(orders)[:, 0] * factor
        with np.errstate(divide="ignore", invalid="ignore"):
            return s / ((total - s) / (m - 2))

    plan = group_plan(dm.labels, codes, strata=strata, n_resamples=n_resamples, rng=rng,
                      interchangeable=True)
    with numba_threads(n_jobs):
        res = permutation_test(statistic, plan, observed=stat, alternative="greater",
                               n_jobs=n_jobs, backend="threading", task="pairwise PERMANOVA")
    return stat, ss / total, float(res.pvalue), bool(res.exact)


def pairwise_tests(dm: DistanceMatrix, design: Design, terms: list[Term],
                   strata: np.ndarray | None, *, n_resamples: int,
                   seeds: dict[str, np.random.SeedSequence], n_jobs: int,
                   adjust: str | None) -> tuple[pd.DataFrame, list[str]]:
    """Every pair of classes of each factor term, p-values adjusted within each term."""
    rows = []
    notes = []
    for term in terms:
        classes = design.factors[term.factors[0]]
        pairs = list(itertools.combinations(range(len(classes.levels)), 2))
        pair_seeds = streams(seeds[term.name], len(pairs))
        start = len(rows)
        for (a, b), seed in zip(pairs, pair_seeds, strict=True):
            keep = np.isin(classes.codes, [a, b])
            sub = dm.subset(design.labels[keep])
            codes = (classes.codes[keep] == b).astype(np.intp)
            sub_strata = None if strata is None else strata[keep]
            try:
                stat, r2, p, exact = pair_test(sub, codes, sub_strata, n_resamples=n_resamples,
                                               rng=seed, n_jobs=n_jobs)
            except InputError:
                stat, r2, p, exact = np.nan, np.nan, np.nan, False
                notes.append(f"Classes {classes.levels[a]!r} and {classes.levels[b]!r} of "
                             f"{term.name!r} never share a stratum: they cannot be compared "
                             "by rearrangements within strata.")
            rows.append({"term": term.name, "level_1": classes.levels[a],
                         "level_2": classes.levels[b], "n_sites": int(keep.sum()),
                         "pseudo_f": stat, "r2": r2, "pvalue": p, "exact": exact})
        family = np.array([r["pvalue"] for r in rows[start:]], dtype=np.float64)
        adjusted = adjust_pvalues(family, adjust)
        for r, v in zip(rows[start:], adjusted, strict=True):
            r["pvalue_adjusted"] = float(v)
    if rows:
        how = {"holm": "Holm's method", "fdr_bh": "the Benjamini-Hochberg method",
               None: "no adjustment"}[adjust]
        notes.append("Pairs of classes are compared by one-way PERMANOVA on the sites of the "
                     "two classes only (other terms ignored); p-values adjusted within each "
                     f"factor by {how}.")
    return pd.DataFrame(rows, columns=list(PAIRWISE_COLUMNS)), notes
