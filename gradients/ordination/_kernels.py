"""Compiled kernels for NMDS: distances, monotone regression, stress-1 and its gradient.

The dissimilarities are sorted once (:func:`prepare_order`); each evaluation then only re-sorts the
configuration distances inside blocks of tied dissimilarities (the primary approach to ties), runs
the pool-adjacent-violators algorithm and accumulates the analytic gradient, all in one pass of
compiled code that releases the GIL (so starts can run on threads).
"""

from __future__ import annotations

import dataclasses

import numba
import numpy as np

__all__ = ["MonotoneOrder", "StressFunction", "prepare_order", "stress_fit"]

_JIT = {"cache": True, "nogil": True, "fastmath": False, "boundscheck": False}


def prepare_order(dissimilarities: np.ndarray, *, rtol: float = 1e-12) -> tuple[np.ndarray,
                                                                                np.ndarray]:
    """Stable order of the dissimilarities and the boundaries of blocks of tied values.

    Values whose sorted neighbours differ by no more than ``rtol`` times the largest dissimilarity
    are one tie block. Returns ``order`` (positions sorted by dissimilarity) and ``starts``
    (start of each tie block of two or more values, followed by its end), as int64 arrays of
    shape ``(2 * n_blocks,)``.
    """
    delta = np.asarray(dissimilarities, dtype=np.float64)
    order = np.argsort(delta, kind="stable").astype(np.int64)
    s = delta[order]
    scale = float(s[-1]) if s.size and s[-1] > 0 else 1.0
    same = np.diff(s) <= rtol * scale
    # block boundaries where ``same`` switches
    edges = np.flatnonzero(np.diff(np.concatenate(([False], same, [False])).astype(np.int8)))
    # edges come in pairs (start of a run of True in ``same``, end); a run from a to b of
    # ``same`` means values a .. b (inclusive) are tied, i.e. block [a, b + 1)
    blocks = edges.reshape(-1, 2).copy()
    blocks[:, 1] += 1
    return order, blocks.ravel().astype(np.int64)


@numba.njit(**_JIT)
def _distances(x: np.ndarray, out: np.ndarray) -> None:
    """Euclidean distances between the rows of ``x``, condensed (squareform order)."""
    n, n_dim = x.shape
    k = 0
    for a in range(n - 1):
        for b in range(a + 1, n):
            s = 0.0
            for c in range(n_dim):
                t = x[a, c] - x[b, c]
                s += t * t
            out[k] = np.sqrt(s)
            k += 1


@numba.njit(**_JIT)
def _pava(y: np.ndarray, join: np.ndarray, out: np.ndarray, total: np.ndarray,
          count: np.ndarray, start: np.ndarray) -> None:
    """Least-squares non-decreasing fit to ``y`` (unit weights), pool-adjacent-violators.

    Where ``join[k]`` is true, ``y[k]`` and ``y[k + 1]`` are pooled before any comparison
    (they must share one fitted value: the secondary approach to ties). Blocks are kept as
    (sum, count); a block is pooled with the one before while its mean is lower, compared by
    cross-multiplication so no division happens until the end.
    """
    m = y.shape[0]
    top = -1
    k = 0
    while k < m:
        s = y[k]
        c = 1.0
        first = k
        while join[k] and k + 1 < m:
            k += 1
            s += y[k]
            c += 1.0
        k += 1
        top += 1
        total[top] = s
        count[top] = c
        start[top] = first
        while top > 0 and total[top - 1] * count[top] > total[top] * count[top - 1]:
            total[top - 1] += total[top]
            count[top - 1] += count[top]
            top -= 1
    for b in range(top + 1):
        end = start[b + 1] if b < top else m
        v = total[b] / count[b]
        for t in range(start[b], end):
            out[t] = v


@numba.njit(**_JIT)
def _fit(d: np.ndarray, order: np.ndarray, blocks: np.ndarray, join: np.ndarray,
         primary: bool, perm: np.ndarray, ys: np.ndarray, fs: np.ndarray, total: np.ndarray,
         count: np.ndarray, start: np.ndarray, fitted: np.ndarray) -> None:
    """Monotone regression of distances ``d`` on the order of the dissimilarities.

    ``perm`` must hold a permutation of ``order`` that differs from it only inside tie blocks
    (``order`` itself on the first call); it is updated in place.
    """
    m = d.shape[0]
    if primary:
        # primary approach: inside a block of tied dissimilarities the order of the distances
        # is free, so put them in increasing order of the current distance before the
        # monotone fit (Kruskal 1964b). ``perm`` holds the order of the previous evaluation,
        # so small blocks are nearly sorted and insertion sort is quick; equal distances may
        # stay in any order without changing the fit.
        for b in range(blocks.shape[0] // 2):
            lo = blocks[2 * b]
            hi = blocks[2 * b + 1]
            if hi - lo <= 64:
                for t in range(lo + 1, hi):
                    item = perm[t]
                    key = d[item]
                    u = t - 1
                    while u >= lo and d[perm[u]] > key:
                        perm[u + 1] = perm[u]
                        u -= 1
                    perm[u + 1] = item
            else:
                seg = perm[lo:hi].copy()
                vals = np.empty(hi - lo)
                for t in range(hi - lo):
                    vals[t] = d[seg[t]]
                idx = np.argsort(vals, kind="mergesort")
                for t in range(hi - lo):
                    perm[lo + t] = seg[idx[t]]
    for k in range(m):
        ys[k] = d[perm[k]]
    _pava(ys, join, fs, total, count, start)
    for k in range(m):
        fitted[perm[k]] = fs[k]


@numba.njit(**_JIT)
def _stress_grad(x: np.ndarray, order: np.ndarray, blocks: np.ndarray, join: np.ndarray,
                 primary: bool, grad: np.ndarray, d: np.ndarray, fitted: np.ndarray,
                 perm: np.ndarray, ys: np.ndarray,
                 fs: np.ndarray, total: np.ndarray, count: np.ndarray,
                 start: np.ndarray) -> float:
    _distances(x, d)
    _fit(d, order, blocks, join, primary, perm, ys, fs, total, count, start, fitted)
    m = d.shape[0]
    raw = 0.0
    sq = 0.0
    for k in range(m):
        r = d[k] - fitted[k]
        raw += r * r
        sq += d[k] * d[k]
    n, n_dim = x.shape
    for a in range(n):
        for c in range(n_dim):
            grad[a, c] = 0.0
    if sq <= 0.0:
        return 1.0
    if raw <= 0.0:
        return 0.0
    s2 = raw / sq
    s = np.sqrt(s2)
    # S = sqrt(raw / sq): dS/dd_k = ((d_k - fitted_k) - S^2 d_k) / (S sq), fitted values held
    # fixed (they are the projection onto the monotone cone, so this is the exact gradient
    # wherever the order of distances inside tie blocks does not change);
    # dd_k/dx_a = (x_a - x_b) / d_k
    scale = 1.0 / (s * sq)
    k = 0
    for a in range(n - 1):
        for b in range(a + 1, n):
            dk = d[k]
            if dk > 0.0:
                w = scale * ((dk - fitted[k]) - s2 * dk) / dk
                for c in range(n_dim):
                    g = w * (x[a, c] - x[b, c])
                    grad[a, c] += g
                    grad[b, c] -= g
            k += 1
    return s


@dataclasses.dataclass(frozen=True)
class MonotoneOrder:
    """The sorted dissimilarities, their tie blocks and the approach to ties.

    ``order`` sorts the condensed dissimilarities (stably); ``blocks`` holds start and end of
    each block of two or more tied values, flattened; ``join[k]`` is true where sorted
    positions ``k`` and ``k + 1`` must share a fitted value (secondary approach only).
    """

    order: np.ndarray
    blocks: np.ndarray
    join: np.ndarray
    primary: bool

    @classmethod
    def build(cls, dissimilarities: np.ndarray, *, primary: bool = True) -> MonotoneOrder:
        order, blocks = prepare_order(dissimilarities)
        join = np.zeros(order.size, dtype=np.bool_)
        if not primary:
            for lo, hi in blocks.reshape(-1, 2):
                join[lo:hi - 1] = True
        return cls(order, blocks, join, primary)


class StressFunction:
    """Stress-1 and gradient of flattened configurations, with a private workspace.

    One instance per start (per thread): the scratch arrays are reused between evaluations.
    """

    def __init__(self, n: int, n_dim: int, mono: MonotoneOrder) -> None:
        m = n * (n - 1) // 2
        self.n = n
        self.n_dim = n_dim
        self.mono = mono
        self._work = (np.empty(m), np.empty(m), mono.order.copy(), np.empty(m),
                      np.empty(m), np.empty(m), np.empty(m), np.empty(m, dtype=np.int64))
        self.n_eval = 0

    def __call__(self, flat: np.ndarray) -> tuple[float, np.ndarray]:
        x = np.ascontiguousarray(flat, dtype=np.float64).reshape(self.n, self.n_dim)
        grad = np.empty_like(x)
        mono = self.mono
        s = _stress_grad(x, mono.order, mono.blocks, mono.join, mono.primary, grad, *self._work)
        self.n_eval += 1
        return float(s), grad.ravel()


def stress_fit(x: np.ndarray, mono: MonotoneOrder) -> tuple[float, np.ndarray, np.ndarray]:
    """Stress-1, configuration distances and fitted monotone values (condensed order)."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    n = x.shape[0]
    m = n * (n - 1) // 2
    d = np.empty(m)
    fitted = np.empty(m)
    _distances(x, d)
    _fit(d, mono.order, mono.blocks, mono.join, mono.primary, mono.order.copy(),
         np.empty(m), np.empty(m), np.empty(m), np.empty(m), np.empty(m, dtype=np.int64), fitted)
    sq = float(np.dot(d, d))
    raw = float(np.dot(d - fitted, d - fitted))
    return (float(np.sqrt(raw / sq)) if sq > 0 else 1.0), d, fitted
