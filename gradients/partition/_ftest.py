"""Pseudo-F tests of distance-based linear models, run through the permutation engine.

Every test of the partition stage is one shape: a *tested* set of columns given a *reduced*
model (covariables, other terms, earlier axes, other tables; possibly empty), with the residual
of the full model (reduced + tested) in the denominator. With ``G`` Gower's centred matrix,
``Qr`` an orthonormal basis of the centred reduced model, ``Mr = I - Qr Qr'`` and ``Qt`` an
orthonormal basis of the tested columns with the reduced model removed::

    Gr  = Mr G Mr                      (the residual matrix of the reduced model)
    SSt = tr(Qt' Gr Qt),  RSS = tr(Gr) - SSt
    F   = (SSt / pt) / (RSS / (n - 1 - qr - pt))

The residuals of the reduced model are permuted (Freedman & Lane 1983; on distance matrices,
Anderson & Legendre 1999 and Legendre & Anderson 1999): ``Gr`` is rearranged to ``Gr_o``, the
full model is refitted to it, which is ``SSt* = tr(Qt' Gr_o Qt)`` and
``RSS* = tr(Gr) - tr(Qr' Gr_o Qr) - SSt*`` (the refit removes the reduced model again). Both
traces come from the distance stage's batched kernel for a whole batch of orders at once.
"""

from __future__ import annotations

import contextlib
import dataclasses
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

import numba
import numpy as np
import pandas as pd

from .._errors import InputError
from ..distance._centred import PermutedTraces, permuted_products
from ..permutation import PermutationPlan, PermutationResult, permutation_plan, permutation_test

__all__ = [
    "BATCH_SIZE",
    "PseudoF",
    "adjusted_r2",
    "axis_test",
    "make_plan",
    "residual_matrix",
    "run_tests",
    "term_test",
]

#: Rearrangements per batch of the plan: small enough that 999 permutations make four batches
#: for the workers to share, large enough that each batch is one efficient kernel call. Part
#: of the plan, so p-values do not depend on ``n_jobs``.
BATCH_SIZE = 250
#: Bytes of n x n matrices (residual matrices, hat matrices) held at once by one engine run.
MEMORY_BUDGET = 400 * 2**20


def adjusted_r2(r2: float, n: int, p: int) -> float:
    """Ezekiel's adjusted R^2: ``1 - (1 - R^2)(n - 1)/(n - p - 1)`` (0 predictors: R^2 = 0)."""
    if p == 0:
        return 0.0
    return float(1.0 - (1.0 - r2) * (n - 1) / (n - p - 1))


def residual_matrix(g: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """``M G M`` with ``M = I - Q Q'`` for an orthonormal ``Q`` (``G`` itself when Q is empty)."""
    if basis.shape[1] == 0:
        return g
    gq = g @ basis
    qgq = basis.T @ gq
    out = g - gq @ basis.T - basis @ gq.T + basis @ qgq @ basis.T
    return (out + out.T) / 2.0


@dataclass
class PseudoF:
    """One pseudo-F test, ready to evaluate batches of site orders.

    ``kind='trace'`` tests the whole tested space (numerator df = its width); ``kind='axis'``
    tests only its first eigenvalue (one canonical axis, Legendre, Oksanen & ter Braak 2011),
    numerator df 1. The residual matrix and the kernel's hat matrices (``n x n`` each) are
    built by :meth:`prepare` and dropped by :meth:`release`, so that many tests of a large
    survey need not hold all of them at once.
    """

    name: str
    kind: str
    df: int
    df_residual: int
    ss: float
    rss: float
    statistic: float
    total_reduced: float
    _g: np.ndarray = field(repr=False)
    _reduced: np.ndarray = field(repr=False)
    _tested: np.ndarray = field(repr=False)
    _gr: np.ndarray | None = field(default=None, repr=False)
    _kernel: PermutedTraces | None = field(default=None, repr=False)

    @property
    def matrices(self) -> int:
        """How many n x n arrays :meth:`prepare` builds."""
        return 1 + (2 if self.kind == "trace" and self._reduced.shape[1] else 1)

    def prepare(self) -> None:
        if self._gr is None:
            self._gr = residual_matrix(self._g, self._reduced)
        if self._kernel is None:
            bases = [self._tested, self._reduced] if self.kind == "trace" else [self._reduced]
            self._kernel = PermutedTraces(self._gr, bases)

    def release(self) -> None:
        self._gr = None
        self._kernel = None

    def batch(self, orders: np.ndarray) -> np.ndarray:
        """Pseudo-F for every order of a batch (the residual matrix permuted)."""
        self.prepare()
        kernel = self._kernel
        if self.kind == "trace":
            traces = kernel(orders)  # type: ignore[misc]
            tested, reduced = traces[:, 0], traces[:, 1]
            numerator = tested / self.df
        else:
            prods = permuted_products(self._gr, self._tested, orders)
            tested = np.trace(prods, axis1=1, axis2=2)
            numerator = np.linalg.eigvalsh(prods)[:, -1]
            reduced = kernel(orders)[:, 0] if self._reduced.shape[1] else 0.0  # type: ignore[misc]
        rss = self.total_reduced - reduced - tested
        return numerator / (rss / self.df_residual)


def _finish(name: str, kind: str, g: np.ndarray, reduced: np.ndarray, tested: np.ndarray,
            numerator: float | None, df: int) -> PseudoF:
    n = g.shape[0]
    df_res = n - 1 - reduced.shape[1] - tested.shape[1]
    if df_res < 1:
        raise InputError(f"The test of {name} leaves no residual degree of freedom "
                         f"({n} sites, {reduced.shape[1] + tested.shape[1]} columns); use fewer "
                         "variables.")
    gr = residual_matrix(g, reduced)
    total = float(np.trace(gr))
    ss = float(np.sum((gr @ tested) * tested))
    rss = total - ss
    if not rss > 1e-12 * max(abs(total), 1e-300):
        raise InputError(f"The model of {name} leaves no residual variation (it reproduces the "
                         "dissimilarities exactly), so no pseudo-F can be formed; use fewer "
                         "variables or more sites.")
    top = ss if numerator is None else numerator
    stat = (top / df) / (rss / df_res)
    return PseudoF(name=name, kind=kind, df=df, df_residual=df_res, ss=ss, rss=rss,
                   statistic=float(stat), total_reduced=total, _g=g, _reduced=reduced,
                   _tested=tested)


def term_test(name: str, g: np.ndarray, reduced: np.ndarray, tested: np.ndarray) -> PseudoF:
    """The test of the tested basis (reduced model already removed from it) given ``reduced``."""
    return _finish(name, "trace", g, reduced, tested, None, tested.shape[1])


def axis_test(name: str, g: np.ndarray, reduced: np.ndarray, remaining: np.ndarray,
              eigenvalue: float) -> PseudoF:
    """The test of the first canonical axis of ``remaining`` given ``reduced``.

    ``remaining`` holds the constrained directions not yet tested (eigenvectors of the fitted
    matrix, in decreasing order), ``reduced`` the covariables and the earlier axes; the
    statistic is ``eigenvalue / (RSS / df)`` with the residual of the full model.
    """
    return _finish(name, "axis", g, reduced, remaining, eigenvalue, 1)


# --------------------------------------------------------------------------- running
@contextlib.contextmanager
def numba_threads(n_jobs: int) -> Iterator[None]:
    """The compiled kernels in the block use ``n_jobs`` threads (-1: all), then restore."""
    top = int(numba.config.NUMBA_NUM_THREADS)
    want = top if n_jobs < 0 else max(1, min(int(n_jobs), top))
    before = numba.get_num_threads()
    numba.set_num_threads(want)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def make_plan(labels: pd.Index, *, strata: np.ndarray | None, n_resamples: int,
              rng: object) -> PermutationPlan:
    """Free permutation of the sites, or within ``strata``; random orders keyed by label."""
    return permutation_plan(len(labels), "strata" if strata is not None else "free",
                            strata=strata, n_resamples=n_resamples, rng=rng,
                            batch_size=BATCH_SIZE, site_labels=labels)


def run_tests(tests: Sequence[PseudoF], plan: PermutationPlan, *, n_jobs: int,
              task: str) -> PermutationResult:
    """All ``tests`` in one engine run: the same rearrangements for every one of them."""
    groups = _memory_groups(tests)
    results = []
    for group in groups:
        for t in group:  # build the matrices here, once, not in every worker
            t.prepare()
        observed = np.array([t.statistic for t in group])

        def statistic(orders: np.ndarray, group: Sequence[PseudoF] = group) -> np.ndarray:
            return np.column_stack([t.batch(orders) for t in group])

        try:
            with numba_threads(n_jobs):
                results.append(permutation_test(statistic, plan, observed=observed,
                                                alternative="greater", n_jobs=n_jobs,
                                                backend="threading", task=task))
        finally:
            for t in group:
                t.release()
    if len(results) == 1:
        return results[0]
    first = results[0]
    return dataclasses.replace(
        first,
        statistic=np.concatenate([np.atleast_1d(r.statistic) for r in results]),
        pvalue=np.concatenate([np.atleast_1d(r.pvalue) for r in results]),
        null_distribution=np.column_stack([r.null_distribution.reshape(
            r.null_distribution.shape[0], -1) for r in results]),
        n_resamples=np.concatenate([np.atleast_1d(r.n_resamples) for r in results]),
        stopped_early=np.concatenate([np.atleast_1d(r.stopped_early) for r in results]))


def _memory_groups(tests: Sequence[PseudoF]) -> list[list[PseudoF]]:
    """Consecutive tests whose n x n matrices together stay within ``MEMORY_BUDGET``.

    Every group runs the same plan, so the rearrangements, and the p-values, are those of a
    single run; grouping only bounds memory on large surveys.
    """
    groups: list[list[PseudoF]] = []
    used = 0
    for t in tests:
        size = t.matrices * t._g.shape[0] ** 2 * 8
        if groups and used + size <= MEMORY_BUDGET:
            groups[-1].append(t)
            used += size
        else:
            groups.append([t])
            used = size
    return groups
