"""Compiled kernels for NMDS: distances, monotone regression, stress-1 and its gradient.

The pairs of sites are put in order of dissimilarity once (:class:`MonotoneOrder`). Each
evaluation then walks the pairs in that order: it computes their distances in the configuration,
re-sorts the distances only inside blocks of tied dissimilarities (primary approach to ties),
runs pool-adjacent-violators, and accumulates the analytic gradient, in one compiled pass that
reads the long arrays sequentially and releases the GIL (so starts can run on threads).
"""

from __future__ import annotations

import dataclasses

import numba
import numpy as np

__all__ = ["MonotoneOrder", "StressFunction", "prepare_order", "stress_fit"]

_JIT = {"cache": True, "nogil": True, "fastmath": False, "boundscheck": False}
# tie blocks up to this size are re-sorted by insertion sort (nearly sorted from the previous
# evaluation), larger ones by merge sort
_INSERTION_MAX = 64


def prepare_order(dissimilarities: np.ndarray, *, rtol: float = 1e-12) -> tuple[np.ndarray,
                                                                                np.ndarray]:
    """Stable order of the dissimilarities and the boundaries of blocks of tied values.

    Sorted neighbours that differ by no more than ``rtol`` times the largest dissimilarity are
    tied. Returns ``order`` (condensed positions sorted by dissimilarity) and ``blocks``
    (``[start0, end0, start1, end1, ...]``: sorted positions ``start <= k < end`` of each block of
    two or more tied values), both int64.
    """
    delta = np.asarray(dissimilarities, dtype=np.float64)
    order = np.argsort(delta, kind="stable").astype(np.int64)
    s = delta[order]
    scale = float(s[-1]) if s.size and s[-1] > 0 else 1.0
    same = np.diff(s) <= rtol * scale  # same[k]: sorted values k and k + 1 are tied
    padded = np.concatenate(([False], same, [False])).astype(np.int8)
    edges = np.flatnonzero(np.diff(padded)).reshape(-1, 2)
    # a run same[a..b] all true is found as edges (a, b + 1); it ties values a .. b + 1
    edges[:, 1] += 1
    return order, edges.ravel().astype(np.int64)


@dataclasses.dataclass(frozen=True)
class MonotoneOrder:
    """The pairs of sites in order of dissimilarity, their tie blocks, the approach to ties.

    ``order`` sorts the condensed dissimilarities (stably); ``first`` and ``second`` are the two
    sites of the pair at each sorted position; ``blocks`` gives start and end of each block of
    tied values (flattened); ``join[k]`` is true where sorted positions ``k`` and ``k + 1`` must
    share one fitted value (secondary approach only).
    """

    order: np.ndarray
    first: np.ndarray
    second: np.ndarray
    blocks: np.ndarray
    join: np.ndarray
    primary: bool

    @classmethod
    def build(cls, dissimilarities: np.ndarray, *, primary: bool = True) -> MonotoneOrder:
        delta = np.asarray(dissimilarities, dtype=np.float64)
        m = delta.size
        n = int(np.rint((1 + np.sqrt(1 + 8 * m)) / 2))
        order, blocks = prepare_order(delta)
        ii, jj = np.triu_indices(n, k=1)
        join = np.zeros(m, dtype=np.bool_)
        if not primary:
            for lo, hi in blocks.reshape(-1, 2):
                join[lo:hi - 1] = True
        return cls(order, ii[order].astype(np.int64), jj[order].astype(np.int64), blocks, join,
                   primary)


@numba.njit(**_JIT)
def _pava(y: np.ndarray, join: np.ndarray, out: np.ndarray, total: np.ndarray,
          count: np.ndarray, start: np.ndarray) -> None:
    """Least-squares non-decreasing fit to ``y`` (unit weights), pool-adjacent-violators.

    Where ``join[k]`` is true, ``y[k]`` and ``y[k + 1]`` are pooled before any comparison (they
    must share one fitted value: the secondary approach to ties). The block being built is kept
    in local variables as (sum, count) and finished blocks on a stack; a block is pooled with the
    one before while its mean is lower, compared by cross-multiplication (counts are positive),
    so no division happens until the end.
    """
    m = y.shape[0]
    top = -1
    cur_sum = 0.0
    cur_count = 0.0
    cur_start = 0
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
        if cur_count == 0.0:
            cur_sum, cur_count, cur_start = s, c, first
        elif s * cur_count >= cur_sum * c:
            top += 1
            total[top] = cur_sum
            count[top] = cur_count
            start[top] = cur_start
            cur_sum, cur_count, cur_start = s, c, first
        else:
            cur_sum += s
            cur_count += c
            while top >= 0 and total[top] * cur_count > cur_sum * count[top]:
                cur_sum += total[top]
                cur_count += count[top]
                cur_start = start[top]
                top -= 1
    top += 1
    total[top] = cur_sum
    count[top] = cur_count
    start[top] = cur_start
    for b in range(top + 1):
        end = start[b + 1] if b < top else m
        v = total[b] / count[b]
        for t in range(start[b], end):
            out[t] = v


@numba.njit(**_JIT)
def _sort_ties(ds: np.ndarray, first: np.ndarray, second: np.ndarray, perm: np.ndarray,
               blocks: np.ndarray) -> None:
    """Inside each tie block put the pairs in increasing order of distance (in place).

    Primary approach to ties (Kruskal 1964b): the order of the distances inside a block of
    equal dissimilarities is free, and increasing order is the best one for the monotone fit.
    Pairs with equal distances may end in any order without changing the fit.
    """
    for b in range(blocks.shape[0] // 2):
        lo = blocks[2 * b]
        hi = blocks[2 * b + 1]
        if hi - lo <= _INSERTION_MAX:
            for t in range(lo + 1, hi):
                key = ds[t]
                if ds[t - 1] <= key:
                    continue
                f, s, p = first[t], second[t], perm[t]
                u = t - 1
                while u >= lo and ds[u] > key:
                    ds[u + 1] = ds[u]
                    first[u + 1] = first[u]
                    second[u + 1] = second[u]
                    perm[u + 1] = perm[u]
                    u -= 1
                ds[u + 1] = key
                first[u + 1] = f
                second[u + 1] = s
                perm[u + 1] = p
        else:
            idx = np.argsort(ds[lo:hi], kind="mergesort")
            d_seg = ds[lo:hi].copy()
            f_seg = first[lo:hi].copy()
            s_seg = second[lo:hi].copy()
            p_seg = perm[lo:hi].copy()
            for t in range(hi - lo):
                ds[lo + t] = d_seg[idx[t]]
                first[lo + t] = f_seg[idx[t]]
                second[lo + t] = s_seg[idx[t]]
                perm[lo + t] = p_seg[idx[t]]


@numba.njit(**_JIT)
def _fit_sorted(x: np.ndarray, first: np.ndarray, second: np.ndarray, perm: np.ndarray,
                blocks: np.ndarray, join: np.ndarray, primary: bool, ds: np.ndarray,
                fs: np.ndarray, total: np.ndarray, count: np.ndarray,
                start: np.ndarray) -> None:
    """Distances in dissimilarity order (``ds``) and their monotone fit (``fs``)."""
    n_dim = x.shape[1]
    for k in range(first.shape[0]):
        a = first[k]
        b = second[k]
        s = 0.0
        for c in range(n_dim):
            t = x[a, c] - x[b, c]
            s += t * t
        ds[k] = np.sqrt(s)
    if primary:
        _sort_ties(ds, first, second, perm, blocks)
    _pava(ds, join, fs, total, count, start)


@numba.njit(**_JIT)
def _stress_grad(x: np.ndarray, first: np.ndarray, second: np.ndarray, perm: np.ndarray,
                 blocks: np.ndarray, join: np.ndarray, primary: bool, grad: np.ndarray,
                 ds: np.ndarray, fs: np.ndarray, total: np.ndarray, count: np.ndarray,
                 start: np.ndarray) -> float:
    """Stress-1 of ``x``; its gradient is written to ``grad``.

    With ``S**2 = raw / sq`` (raw = sum (d - fitted)**2, sq = sum d**2) and the fitted values
    held fixed (they are the projection onto the monotone cone, so this is the gradient wherever
    the order of distances inside tie blocks does not change):

    ``dS/dd_k = ((d_k - fitted_k) - S**2 d_k) / (S sq)`` and ``dd_k/dx_a = (x_a - x_b) / d_k``.

    Summed over the pairs of site ``a`` the second term is ``S**2 (n x_a - sum_b x_b)``, so one
    pass accumulates ``raw``, ``sq`` and ``sum (d_k - fitted_k) / d_k (x_a - x_b)`` together.
    """
    _fit_sorted(x, first, second, perm, blocks, join, primary, ds, fs, total, count, start)
    n, n_dim = x.shape
    for a in range(n):
        for c in range(n_dim):
            grad[a, c] = 0.0
    raw = 0.0
    sq = 0.0
    for k in range(ds.shape[0]):
        dk = ds[k]
        r = dk - fs[k]
        raw += r * r
        sq += dk * dk
        if dk > 0.0:
            w = r / dk
            a = first[k]
            b = second[k]
            for c in range(n_dim):
                g = w * (x[a, c] - x[b, c])
                grad[a, c] += g
                grad[b, c] -= g
    if sq <= 0.0:
        for a in range(n):
            for c in range(n_dim):
                grad[a, c] = 0.0
        return 1.0
    if raw <= 0.0:
        for a in range(n):
            for c in range(n_dim):
                grad[a, c] = 0.0
        return 0.0
    s2 = raw / sq
    s = np.sqrt(s2)
    scale = 1.0 / (s * sq)
    for c in range(n_dim):
        col = 0.0
        for a in range(n):
            col += x[a, c]
        for a in range(n):
            grad[a, c] = scale * (grad[a, c] - s2 * (n * x[a, c] - col))
    return s


class StressFunction:
    """Stress-1 and gradient of flattened configurations, with a private workspace.

    One instance per start (per thread): the pair order inside tie blocks and the scratch
    arrays are kept between evaluations.
    """

    def __init__(self, n: int, n_dim: int, mono: MonotoneOrder) -> None:
        m = n * (n - 1) // 2
        self.n = n
        self.n_dim = n_dim
        self.mono = mono
        self._pairs = (mono.first.copy(), mono.second.copy(), mono.order.copy())
        self._work = (np.empty(m), np.empty(m), np.empty(m), np.empty(m),
                      np.empty(m, dtype=np.int64))
        self.n_eval = 0

    def __call__(self, flat: np.ndarray) -> tuple[float, np.ndarray]:
        x = np.ascontiguousarray(flat, dtype=np.float64).reshape(self.n, self.n_dim)
        grad = np.empty_like(x)
        mono = self.mono
        s = _stress_grad(x, *self._pairs, mono.blocks, mono.join, mono.primary, grad,
                         *self._work)
        self.n_eval += 1
        return float(s), grad.ravel()


def stress_fit(x: np.ndarray, mono: MonotoneOrder) -> tuple[float, np.ndarray, np.ndarray]:
    """Stress-1, configuration distances and fitted monotone values (condensed order)."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    m = mono.order.size
    first, second, perm = mono.first.copy(), mono.second.copy(), mono.order.copy()
    ds, fs = np.empty(m), np.empty(m)
    _fit_sorted(x, first, second, perm, mono.blocks, mono.join, mono.primary, ds, fs,
                np.empty(m), np.empty(m), np.empty(m, dtype=np.int64))
    d = np.empty(m)
    fitted = np.empty(m)
    d[perm] = ds
    fitted[perm] = fs
    sq = float(np.dot(ds, ds))
    raw = float(np.dot(ds - fs, ds - fs))
    return (float(np.sqrt(raw / sq)) if sq > 0 else 1.0), d, fitted
