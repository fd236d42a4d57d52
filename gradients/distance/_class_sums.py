"""Sums of a rearranged symmetric matrix over the blocks of a partition of the sites.

The one-way and group statistics of the suite (a one-factor pseudo-F, ANOSIM's within-class
ranks, MRPP's within-class distances) are traces of a permuted matrix against a block-diagonal
hat matrix. This kernel evaluates them over the blocks only, for a whole batch of site orders;
designs with several terms use the general trace kernel in :mod:`gradients.distance._centred`.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from .._errors import InputError
from ._centred import _FAST, _OPTIONS, _orders, _square_float

__all__ = ["PermutedClassSums"]


@njit(inline="always")
def _sorted_blocks(o: np.ndarray, codes: np.ndarray,
                   bounds: np.ndarray) -> np.ndarray:  # pragma: no cover
    # The rows of g each class reads under the order o (site i reads row o_i), grouped by
    # class, ascending within each class. A block's sum does not depend on the order of its
    # sites; sorted, each row is read left to right, which the cache prefetches. One pass
    # over the positions (a bucket sort) instead of sorting every block.
    n = o.size
    label = np.empty(n, dtype=np.intp)
    for i in range(n):
        label[o[i]] = codes[i]
    idx = np.empty(n, dtype=np.intp)
    fill = bounds[:-1].copy()
    for p in range(n):
        cls = label[p]
        idx[fill[cls]] = p
        fill[cls] += 1
    return idx


@njit(parallel=True, fastmath=_FAST, **_OPTIONS)
def _class_sums(g: np.ndarray, codes: np.ndarray, bounds: np.ndarray, c: int,
                orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    # sum_{i, j in class c} g[o_i, o_j] for the first c classes and every order o: the diagonal
    # plus twice the upper triangle of each class's block, nothing outside the blocks.
    k = orders.shape[0]
    out = np.empty((k, c))
    for b in prange(k):
        idx = _sorted_blocks(orders[b], codes, bounds)
        for cls in range(c):
            lo = bounds[cls]
            hi = bounds[cls + 1]
            total = 0.0
            for a in range(lo, hi):
                row = g[idx[a]]
                acc = 0.0
                for e in range(a + 1, hi):
                    acc += row[idx[e]]
                total += 2.0 * acc + row[idx[a]]
            out[b, cls] = total
    return out


@njit(parallel=True, fastmath=_FAST, **_OPTIONS)
def _class_rows(g: np.ndarray, codes: np.ndarray, bounds: np.ndarray,
                orders: np.ndarray) -> tuple[np.ndarray, np.ndarray]:  # pragma: no cover
    # For every slot a of class c: sum_{e in c} g[idx_a, idx_e] and g[idx_a, idx_a], with the
    # class's rearranged sites idx sorted (slots follow that order, not the sites').
    k = orders.shape[0]
    n = codes.size
    c = bounds.size - 1
    rows = np.zeros((k, n))
    diag = np.empty((k, n))
    for b in prange(k):
        idx = _sorted_blocks(orders[b], codes, bounds)
        for cls in range(c):
            lo = bounds[cls]
            hi = bounds[cls + 1]
            for a in range(lo, hi):
                row = g[idx[a]]
                acc = 0.0
                for e in range(a + 1, hi):
                    x = row[idx[e]]
                    acc += x
                    rows[b, e] += x
                d = row[idx[a]]
                diag[b, a] = d
                rows[b, a] += acc + d
    return rows, diag


class PermutedClassSums:
    """``1_c' M[o][:, o] 1_c`` for every class ``c`` of a fixed partition of the sites.

    The trace of a rearranged symmetric matrix against a block-diagonal hat matrix (one block
    of ones per class), evaluated only over the blocks: ``sum_c n_c^2 / 2`` reads per order
    instead of the ``n^2 / 2`` of :class:`PermutedTraces`. For Gower's centred matrix ``G``
    (rows summing to zero), ``sum_c S_c / n_c`` is the between-class sum of squares
    ``tr(Q' G_o Q)`` of a one-way design; for ranks or raw dissimilarities with a zero
    diagonal, ``S_c / 2`` is the sum over the pairs within class ``c`` (ANOSIM, MRPP).

    Parameters
    ----------
    m : ndarray (n, n) or GowerMatrix
        A symmetric matrix.
    codes : ndarray of int, shape (n,)
        Class of every site, ``0 .. c - 1``.
    first : int, optional
        Sum over the first ``first`` classes only (all by default). With two classes and a
        matrix whose rows sum to zero, ``S_0 = S_1``: one block is enough.

    Notes
    -----
    Row ``b`` of a batch of orders moves the data of site ``orders[b, i]`` to site ``i``, so
    ``S_c = sum_{i, j in c} M[o_i, o_j]``. The compiled loop runs its orders on numba's threads
    and releases the GIL, as :class:`PermutedTraces` does.
    """

    def __init__(self, m: object, codes: np.ndarray, *, first: int | None = None) -> None:
        self.m = _square_float(m, "m")
        n = self.m.shape[0]
        codes = np.asarray(codes)
        if codes.shape != (n,) or codes.size == 0 or codes.min() < 0:
            raise InputError(f"`codes` must give a class number 0, 1, ... for each of the {n} "
                             "sites.")
        self.n_classes = int(codes.max()) + 1
        self.codes = np.ascontiguousarray(codes, dtype=np.intp)
        self.first = self.n_classes if first is None else int(first)
        if not 1 <= self.first <= self.n_classes:
            raise InputError(f"`first` must be between 1 and {self.n_classes}; got {first!r}.")
        counts = np.bincount(codes, minlength=self.n_classes)
        self.bounds = np.concatenate([[0], np.cumsum(counts)]).astype(np.intp)

    def __call__(self, orders: np.ndarray) -> np.ndarray:
        """Class sums for a batch of orders: shape ``(k, first)``."""
        o = np.ascontiguousarray(_orders(orders, self.m.shape[0]), dtype=np.intp)
        return _class_sums(self.m, self.codes, self.bounds, self.first, o)

    def rows(self, orders: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Row sums within the class blocks, and the diagonal, for a batch of orders.

        Returns two arrays of shape ``(k, n)``: for each slot ``a`` (slots grouped by class,
        ``bounds`` giving each class's range) ``sum_{j in c} M[o_i, o_j]`` and ``M[o_i, o_i]``
        for one site ``i`` of the class. Within a class the slots do not follow the sites'
        order, so use them only for statistics that treat a class's sites alike.
        """
        o = np.ascontiguousarray(_orders(orders, self.m.shape[0]), dtype=np.intp)
        return _class_rows(self.m, self.codes, self.bounds, o)
