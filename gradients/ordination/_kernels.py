"""Compiled kernels for NMDS: distances, monotone regression, stress-1 and its gradient.

The pairs of sites are put in order of dissimilarity once (:class:`MonotoneOrder`). Each
evaluation then walks the pairs in that order, in compiled loops that read the long arrays
sequentially and release the GIL (so starts can run on threads): distances in the
configuration; inside each block of tied dissimilarities, a re-sort of the pairs by distance
(primary approach to ties; the order is kept for the next evaluation, where it is nearly right);
pool-adjacent-violators, which leaves the fit as pools (sum, count, first position) instead of
writing a fitted value per pair; stress-1 and the analytic gradient, pool by pool.

Each pair of sites is held as one integer code (first site in the high bits): the sort moves two
arrays (distances, codes) and the passes read one 4-byte index per pair instead of two 8-byte
ones. The condensed position of a pair, needed only for the Shepard data, is worked out from the
code (:func:`stress_fit`). The sums are formed in the same order as in the plain one-pair-at-a-
time algorithm, so the results do not depend on these choices.
"""

from __future__ import annotations

import dataclasses

import numba
import numpy as np

__all__ = ["MonotoneOrder", "StressFunction", "prepare_order", "stress_fit"]

_JIT = {"cache": True, "nogil": True, "fastmath": False, "boundscheck": False}
# merge sort: runs of this length are sorted by insertion first
_RUN = 32
# insertion sort of a tie block gives up (for merge sort) after this many element moves per
# pair: the order from the previous evaluation is usually nearly right, but not after long
# steps or at the first evaluation
_MOVES_PER_PAIR = 8


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

    ``order`` sorts the condensed dissimilarities (stably); ``pairs`` codes the two sites of the
    pair at each sorted position as ``first << shift | second`` (uint32 with ``shift`` 16 when
    there are at most 65,536 sites, else int64 with ``shift`` 32); ``blocks`` gives start and end
    of each block of tied values (flattened). With the primary approach the pairs of a block are
    re-sorted by distance; with the secondary one they share one fitted value.
    """

    n: int
    order: np.ndarray
    pairs: np.ndarray
    shift: int
    blocks: np.ndarray
    primary: bool

    @classmethod
    def build(cls, dissimilarities: np.ndarray, *, primary: bool = True) -> MonotoneOrder:
        delta = np.asarray(dissimilarities, dtype=np.float64)
        m = delta.size
        n = int(np.rint((1 + np.sqrt(1 + 8 * m)) / 2))
        order, blocks = prepare_order(delta)
        ii, jj = np.triu_indices(n, k=1)
        if n <= 1 << 16:
            dtype, shift = np.uint32, 16
        else:
            dtype, shift = np.int64, 32
        pairs = (ii[order].astype(dtype) << dtype(shift)) | jj[order].astype(dtype)
        return cls(n, order, pairs, shift, blocks, primary)

    @property
    def longest_block(self) -> int:
        """Number of pairs in the largest block of ties (0 without ties)."""
        spans = np.diff(self.blocks.reshape(-1, 2), axis=1)
        return int(spans.max()) if spans.size else 0


@numba.njit(**_JIT)
def _merge_sort(ds: np.ndarray, pairs: np.ndarray, lo: int, hi: int, tmp_d: np.ndarray,
                tmp_p: np.ndarray) -> None:
    """Stable sort of ``ds[lo:hi]`` (carrying ``pairs``), bottom-up, in place.

    Runs of ``_RUN`` are sorted by insertion, then neighbouring runs are merged. Each merge
    leaves in place the head of the left run that is not above the right run's first value and
    the tail of the right run that is not below the left run's last value (found by bisection),
    so nearly sorted input costs little; only the rest of the left run is copied to the scratch
    arrays (as long as the block). Equal values keep their relative order.
    """
    for r0 in range(lo, hi, _RUN):
        r1 = min(r0 + _RUN, hi)
        for t in range(r0 + 1, r1):
            key = ds[t]
            if ds[t - 1] <= key:
                continue
            p = pairs[t]
            u = t - 1
            while u >= r0 and ds[u] > key:
                ds[u + 1] = ds[u]
                pairs[u + 1] = pairs[u]
                u -= 1
            ds[u + 1] = key
            pairs[u + 1] = p
    width = _RUN
    while width < hi - lo:
        for left in range(lo, hi - width, 2 * width):
            mid = left + width
            end = min(mid + width, hi)
            if ds[mid - 1] <= ds[mid]:
                continue
            # left values <= ds[mid] stay in front (stable: equal left values come first)
            a, b = left, mid
            pivot = ds[mid]
            while a < b:
                c = (a + b) // 2
                if ds[c] <= pivot:
                    a = c + 1
                else:
                    b = c
            i = a
            # right values >= the left run's last stay behind it
            a, b = mid, end
            pivot = ds[mid - 1]
            while a < b:
                c = (a + b) // 2
                if ds[c] < pivot:
                    a = c + 1
                else:
                    b = c
            j = a
            n_left = mid - i
            for t in range(n_left):
                tmp_d[t] = ds[i + t]
                tmp_p[t] = pairs[i + t]
            u, v, out = 0, mid, i
            while u < n_left and v < j:
                if ds[v] < tmp_d[u]:
                    ds[out] = ds[v]
                    pairs[out] = pairs[v]
                    v += 1
                else:
                    ds[out] = tmp_d[u]
                    pairs[out] = tmp_p[u]
                    u += 1
                out += 1
            while u < n_left:
                ds[out] = tmp_d[u]
                pairs[out] = tmp_p[u]
                u += 1
                out += 1
        width *= 2


@numba.njit(**_JIT)
def _sort_ties(ds: np.ndarray, pairs: np.ndarray, blocks: np.ndarray, tmp_d: np.ndarray,
               tmp_p: np.ndarray) -> None:
    """Inside each tie block put the pairs in increasing order of distance, stably, in place.

    Primary approach to ties (Kruskal 1964b): the order of the distances inside a block of
    equal dissimilarities is free, and increasing order is the best one for the monotone fit.
    Equal distances keep the order they had (as in any stable sort, so the result does not
    depend on which sort runs). Insertion sort suits the nearly sorted order left by the
    previous evaluation; when it has moved too many elements in a block it hands the block over
    to merge sort. At that point the block is a sorted head followed by the untouched rest, so
    the stable result is the same. (The insertion sort is written out here rather than called
    per block: the call costs more than sorting a typical block.)
    """
    for blk in range(blocks.shape[0] // 2):
        lo = blocks[2 * blk]
        hi = blocks[2 * blk + 1]
        budget = _MOVES_PER_PAIR * (hi - lo)
        for t in range(lo + 1, hi):
            key = ds[t]
            if ds[t - 1] <= key:
                continue
            p = pairs[t]
            u = t - 1
            while u >= lo and ds[u] > key:
                ds[u + 1] = ds[u]
                pairs[u + 1] = pairs[u]
                u -= 1
            ds[u + 1] = key
            pairs[u + 1] = p
            budget -= t - 1 - u
            if budget < 0:
                _merge_sort(ds, pairs, lo, hi, tmp_d, tmp_p)
                break


@numba.njit(**_JIT)
def _distances(x: np.ndarray, pairs: np.ndarray, shift: int, ds: np.ndarray) -> None:
    """Distances of the pairs in their current order, written to ``ds``.

    Squared distances first, square roots in a second sweep: the second loop has no gathers,
    so it is vectorised (square roots are correctly rounded either way).
    """
    m = pairs.shape[0]
    n_dim = x.shape[1]
    mask = (1 << shift) - 1
    if n_dim == 2:
        # the common case spelled out (0.0 + d0 * d0 is d0 * d0, so the sum is the same)
        for t in range(m):
            code = pairs[t]
            a = code >> shift
            b = code & mask
            d0 = x[a, 0] - x[b, 0]
            d1 = x[a, 1] - x[b, 1]
            ds[t] = d0 * d0 + d1 * d1
    else:
        for t in range(m):
            code = pairs[t]
            a = code >> shift
            b = code & mask
            s = 0.0
            for c in range(n_dim):
                d = x[a, c] - x[b, c]
                s += d * d
            ds[t] = s
    for t in range(m):
        ds[t] = np.sqrt(ds[t])


@numba.njit(**_JIT)
def _pava(y: np.ndarray, total: np.ndarray, count: np.ndarray, start: np.ndarray) -> int:
    """Least-squares non-decreasing fit to ``y`` (unit weights), pool-adjacent-violators.

    The pool being built is kept in local variables as (sum, count) and finished pools on a
    stack (``total``, ``count``, ``start``); a pool is merged with the one before while its mean
    is lower, compared by cross-multiplication (counts are positive), so no division happens
    here. Returns the number of pools: the fitted value at position ``k`` is
    ``total[b] / count[b]`` for the pool ``b`` with ``start[b] <= k < start[b + 1]``.
    """
    m = y.shape[0]
    top = -1
    cur_sum = y[0]
    cur_count = 1.0
    cur_start = 0
    for k in range(1, m):
        s = y[k]
        if s * cur_count >= cur_sum:
            top += 1
            total[top] = cur_sum
            count[top] = cur_count
            start[top] = cur_start
            cur_sum, cur_count, cur_start = s, 1.0, k
        else:
            cur_sum += s
            cur_count += 1.0
            while top >= 0 and total[top] * cur_count > cur_sum * count[top]:
                cur_sum += total[top]
                cur_count += count[top]
                cur_start = start[top]
                top -= 1
    top += 1
    total[top] = cur_sum
    count[top] = cur_count
    start[top] = cur_start
    return top + 1


@numba.njit(**_JIT)
def _pava_tied(y: np.ndarray, blocks: np.ndarray, total: np.ndarray, count: np.ndarray,
               start: np.ndarray) -> int:
    """As :func:`_pava`, with each tie block entering as one element (secondary approach).

    A block enters as the sum of its values (added in order) and its size: its pairs share one
    fitted value.
    """
    m = y.shape[0]
    n_blocks = blocks.shape[0] // 2
    top = -1
    cur_sum = 0.0
    cur_count = 0.0
    cur_start = 0
    k = 0
    nb = 0
    while k < m:
        first = k
        s = y[k]
        c = 1.0
        k += 1
        if nb < n_blocks and blocks[2 * nb] == first:
            hi = blocks[2 * nb + 1]
            nb += 1
            while k < hi:
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
    return top + 1


@numba.njit(**_JIT)
def _fit_pass(x: np.ndarray, pairs: np.ndarray, shift: int, blocks: np.ndarray, primary: bool,
              ds: np.ndarray, tmp_d: np.ndarray, tmp_p: np.ndarray, total: np.ndarray,
              count: np.ndarray, start: np.ndarray) -> int:
    """Distances in dissimilarity order (``ds``) and their monotone fit; returns the pool count.

    With the primary approach the pairs of each tie block are first re-sorted by distance
    (``pairs`` is reordered with ``ds`` and kept for the next evaluation). The fit is returned
    as pools (see :func:`_pava`).
    """
    _distances(x, pairs, shift, ds)
    if primary:
        _sort_ties(ds, pairs, blocks, tmp_d, tmp_p)
        return _pava(ds, total, count, start)
    return _pava_tied(ds, blocks, total, count, start)


@numba.njit(**_JIT)
def _fitted_values(ds: np.ndarray, total: np.ndarray, count: np.ndarray, start: np.ndarray,
                   n_pools: int, fs: np.ndarray) -> None:
    """Write the fitted value of each sorted position from the pools of :func:`_fit_pass`."""
    m = ds.shape[0]
    for p in range(n_pools):
        end = start[p + 1] if p < n_pools - 1 else m
        v = total[p] / count[p]
        for t in range(start[p], end):
            fs[t] = v


@numba.njit(**_JIT)
def _stress_grad(x: np.ndarray, pairs: np.ndarray, shift: int, blocks: np.ndarray,
                 primary: bool, grad: np.ndarray, ds: np.ndarray, tmp_d: np.ndarray,
                 tmp_p: np.ndarray, total: np.ndarray, count: np.ndarray,
                 start: np.ndarray) -> float:
    """Stress-1 of ``x``; its gradient is written to ``grad``.

    With ``S**2 = raw / sq`` (raw = sum (d - fitted)**2, sq = sum d**2) and the fitted values
    held fixed (they are the projection onto the monotone cone, so this is the gradient wherever
    the order of distances inside tie blocks does not change):

    ``dS/dd_k = ((d_k - fitted_k) - S**2 d_k) / (S sq)`` and ``dd_k/dx_a = (x_a - x_b) / d_k``.

    Summed over the pairs of site ``a`` the second term is ``S**2 (n x_a - sum_b x_b)``, so one
    pass accumulates ``raw``, ``sq`` and ``sum (d_k - fitted_k) / d_k (x_a - x_b)`` together,
    pool by pool in sorted order.
    """
    n_pools = _fit_pass(x, pairs, shift, blocks, primary, ds, tmp_d, tmp_p, total, count, start)
    m = ds.shape[0]
    mask = (1 << shift) - 1
    n, n_dim = x.shape
    for a in range(n):
        for c in range(n_dim):
            grad[a, c] = 0.0
    raw = 0.0
    sq = 0.0
    for p in range(n_pools):
        end = start[p + 1] if p < n_pools - 1 else m
        v = total[p] / count[p]
        if n_dim == 2:
            # the common case spelled out; each grad entry gets the same sum in the same order
            for k in range(start[p], end):
                dk = ds[k]
                r = dk - v
                raw += r * r
                sq += dk * dk
                if dk > 0.0:
                    w = r / dk
                    code = pairs[k]
                    a = code >> shift
                    b = code & mask
                    g0 = w * (x[a, 0] - x[b, 0])
                    g1 = w * (x[a, 1] - x[b, 1])
                    grad[a, 0] += g0
                    grad[b, 0] -= g0
                    grad[a, 1] += g1
                    grad[b, 1] -= g1
        else:
            for k in range(start[p], end):
                dk = ds[k]
                r = dk - v
                raw += r * r
                sq += dk * dk
                if dk > 0.0:
                    w = r / dk
                    code = pairs[k]
                    a = code >> shift
                    b = code & mask
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


def _workspace(mono: MonotoneOrder) -> tuple[np.ndarray, ...]:
    """Scratch arrays of one evaluation: distances, merge buffers, the pool stack."""
    m = mono.order.size
    longest = max(mono.longest_block, 1) if mono.primary else 1
    return (np.empty(m), np.empty(longest), np.empty(longest, dtype=mono.pairs.dtype),
            np.empty(m), np.empty(m), np.empty(m, dtype=np.int64))


class StressFunction:
    """Stress-1 and gradient of flattened configurations, with a private workspace.

    One instance per start (per thread): the pair order inside tie blocks and the scratch
    arrays are kept between evaluations.
    """

    def __init__(self, n: int, n_dim: int, mono: MonotoneOrder) -> None:
        self.n = n
        self.n_dim = n_dim
        self.mono = mono
        self._pairs = mono.pairs.copy()
        self._work = _workspace(mono)
        self.n_eval = 0

    def __call__(self, flat: np.ndarray) -> tuple[float, np.ndarray]:
        x = np.ascontiguousarray(flat, dtype=np.float64).reshape(self.n, self.n_dim)
        grad = np.empty_like(x)
        mono = self.mono
        s = _stress_grad(x, self._pairs, mono.shift, mono.blocks, mono.primary, grad,
                         *self._work)
        self.n_eval += 1
        return float(s), grad.ravel()


def stress_fit(x: np.ndarray, mono: MonotoneOrder) -> tuple[float, np.ndarray, np.ndarray]:
    """Stress-1, configuration distances and fitted monotone values (condensed order)."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    m = mono.order.size
    pairs = mono.pairs.copy()
    work = _workspace(mono)
    ds, total, count, start = work[0], work[3], work[4], work[5]
    n_pools = _fit_pass(x, pairs, mono.shift, mono.blocks, mono.primary, *work)
    fs = np.empty(m)
    _fitted_values(ds, total, count, start, n_pools, fs)
    # condensed position of each pair (a < b) from its sites
    a = (pairs >> pairs.dtype.type(mono.shift)).astype(np.int64)
    b = (pairs & pairs.dtype.type((1 << mono.shift) - 1)).astype(np.int64)
    perm = mono.n * a - a * (a + 1) // 2 + (b - a - 1)
    d = np.empty(m)
    fitted = np.empty(m)
    d[perm] = ds
    fitted[perm] = fs
    sq = float(np.dot(ds, ds))
    raw = float(np.dot(ds - fs, ds - fs))
    return (float(np.sqrt(raw / sq)) if sq > 0 else 1.0), d, fitted
