"""The Mantel machinery shared by the simple and partial tests: one engine run, two kernels.

The Pearson (and Spearman) statistic of a batch of site orders is one compiled cross-product
of the standardised condensed vectors; Kendall's tau-b has a kernel of its own. Both run
through the permutation engine with the kernels' threads set from ``n_jobs``.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from .._errors import InputError
from .._validation import check_alternative, check_n_jobs, check_n_resamples
from ..permutation import PermutationPlan, PermutationResult, permutation_test
from ._inputs import rank_condensed, square_of, standardise
from ._kernels import cross_products, kendall_batch, kendall_prepare, numba_threads

__all__ = [
    "KENDALL_MAX_WORK",
    "check_common",
    "early_stop_note",
    "exact_note",
    "mantel_kendall",
    "mantel_pearson",
    "pearson_side",
    "run_engine",
]

#: Kendall's tau costs O(m log m) per permutation (m pairs of sites). Runs with more than this
#: many pair-permutations (m x n_resamples) are refused; about a minute on two cores.
KENDALL_MAX_WORK = 2.5e8


def check_common(alternative: str, n_resamples: int, n_jobs: int,
                 n_surrogates: int) -> tuple[str, int, int, int]:
    return (check_alternative(alternative), check_n_resamples(n_resamples), check_n_jobs(n_jobs),
            check_n_resamples(n_surrogates))


def run_engine(statistic: Callable[[np.ndarray], np.ndarray], plan: PermutationPlan, *,
               observed: float | np.ndarray, alternative: str, center: float | None,
               early_stop: int | None, n_jobs: int, task: str) -> PermutationResult:
    """One engine run with the numba kernels on ``n_jobs`` threads."""
    if early_stop is not None and alternative == "two-sided" and center is None \
            and not plan.exact:
        raise InputError(
            "`early_stop` with alternative='two-sided' needs a known null mean. It is known "
            "only for mantel() with method='pearson' or 'spearman' under free permutation "
            f"(this is {task!r}); use a one-sided alternative or leave `early_stop` unset."
        )
    with numba_threads(n_jobs):
        return permutation_test(statistic, plan, observed=observed, alternative=alternative,
                                center=center, early_stop=early_stop, task=task)


def exact_note(plan: PermutationPlan, n: int) -> list[str]:
    if plan.exact:
        return [f"All {plan.size} permutations of the {n} sites were enumerated, so the "
                "p-value is exact (identity included)."]
    return []


def pearson_side(v: np.ndarray, method: str, name: str,
                 dtype: np.dtype | type = np.float64) -> np.ndarray:
    """Condensed vector made ready for a Pearson kernel: ranked for Spearman, standardised
    (stored as ``dtype``)."""
    return standardise(rank_condensed(v) if method == "spearman" else v, name, dtype)


def mantel_pearson(x: np.ndarray, y: np.ndarray, plan: PermutationPlan, *, method: str,
                   alternative: str, early_stop: int | None, n_jobs: int,
                   names: tuple[str, str] = ("x", "y"),
                   dtype: np.dtype | type = np.float64) -> tuple[float, PermutationResult]:
    """Pearson or Spearman Mantel test of condensed x and y, permuting y.

    With ``dtype=np.float32`` the standardised vectors and the square matrix are stored in
    float32 (half the memory); products and sums stay float64 (the kernel's).
    """
    xs = pearson_side(x, method, names[0], dtype)
    ys = pearson_side(y, method, names[1], dtype)
    big = square_of(ys, dtype)
    if np.dtype(dtype) == np.float64:
        observed = float(np.clip(xs @ ys, -1.0, 1.0))
    else:  # the identity order through the kernel: float64 products of the stored values
        observed = float(np.clip(cross_products(xs, big, np.arange(big.shape[0])[None, :])[0],
                                 -1.0, 1.0))
    del ys
    # Over all n! orders each pair of sites is mapped to every other pair equally often, so
    # the permutation mean of sum x_c y_perm is 0 exactly (Mantel 1967): the known centre.
    center = 0.0 if plan.scheme == "free" else None
    result = run_engine(lambda orders: cross_products(xs, big, orders), plan, observed=observed,
                        alternative=alternative, center=center, early_stop=early_stop,
                        n_jobs=n_jobs, task="Mantel test")
    return observed, result


def mantel_kendall(x: np.ndarray, y: np.ndarray, n: int, plan: PermutationPlan, *,
                   alternative: str, early_stop: int | None,
                   n_jobs: int) -> tuple[float, PermutationResult]:
    m = x.size
    work = float(m) * plan.size
    if work > KENDALL_MAX_WORK:
        raise InputError(
            f"A Kendall Mantel test with {plan.size} permutations of {n} sites "
            f"({m} pairs) needs {work:.3g} pair-permutations at O(log m) each, more than the "
            f"limit of {KENDALL_MAX_WORK:.3g} (about a minute on two cores). Use "
            "method='spearman' (rank correlation at the cost of a Pearson test), or lower "
            f"`n_resamples` to at most {int(KENDALL_MAX_WORK // m)}."
        )
    for v, name in ((x, "x"), (y, "y")):
        if np.all(v == v[0]):
            raise InputError(f"`{name}` has the same value for every pair of sites, so no "
                             "correlation with it is defined.")
    prep = kendall_prepare(x, y, n)
    with numba_threads(n_jobs):
        observed = float(kendall_batch(prep, np.arange(n)[None, :])[0])
    result = run_engine(lambda orders: kendall_batch(prep, orders), plan, observed=observed,
                        alternative=alternative, center=None, early_stop=early_stop, n_jobs=n_jobs,
                        task="Mantel test (Kendall)")
    return observed, result



def early_stop_note(result: PermutationResult, early_stop: int | None) -> list[str]:
    """The note of a run stopped under ``early_stop`` (none otherwise)."""
    if not result.stopped_early:
        return []
    return [f"Stopped early after {result.n_resamples} permutations "
            f"({early_stop} at least as extreme): p = {early_stop}/{result.n_resamples} "
            "(Besag & Clifford 1991)."]
