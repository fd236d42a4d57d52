"""Compiled kernels for permuted matrix cross-products (the heaviest loop in the suite).

Every Mantel-type statistic reduces to cross-products between fixed condensed vectors ``x`` and
a symmetric matrix ``Y`` whose rows and columns are permuted together::

    sum_{i<j} x[ij] * Y[p[i], p[j]]

The kernels evaluate this for a whole batch of site orders ``p`` without building any permuted
matrix: ``Y`` stays one square C-ordered array, the loop walks the upper triangle in the
condensed (scipy ``squareform``) order of ``x`` and, for each row ``i``, reads row ``p[i]`` of
``Y`` at the columns ``p[j]``. Batches are split over threads with ``prange``; the functions
release the GIL and are cached on disk (``cache=True``) so that only the first run compiles.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..permutation._threads import numba_threads

__all__ = [
    "class_sums",
    "cross_products",
    "kendall_batch",
    "kendall_prepare",
    "numba_threads",
]

_OPTIONS = {"cache": True, "nogil": True}


# --------------------------------------------------------------------------- cross-products
def _unsigned(orders: np.ndarray) -> np.ndarray:
    """Site orders as C-contiguous uint32: unsigned indices spare the loops the code for
    negative-index wraparound, and halve the memory of a batch."""
    return np.ascontiguousarray(orders, dtype=np.uint32)


# Fused multiply-adds only, no reassociation: with reassociation LLVM vectorises the inner
# reduction into AVX2 gathers, which measured 3x slower than scalar loads on an AMD EPYC (Zen 4)
# host, where gathers are microcoded; the four independent accumulators below already keep
# the loads in flight. The summation order is fixed, so results are the same on every run and
# thread count.
_FAST = {"contract"}


@njit(parallel=True, fastmath=_FAST, **_OPTIONS)
def _cross_one(x: np.ndarray, y: np.ndarray, orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    # Four permutations share each pass over x: x is streamed once per four orders, and the
    # four independent gathers keep more loads in flight. (A last, partial group repeats the
    # final order; it writes the same value.)
    k, n = orders.shape
    out = np.empty(k)
    groups = (k + 3) // 4
    for g in prange(groups):
        b0 = 4 * g
        b1 = min(b0 + 1, k - 1)
        b2 = min(b0 + 2, k - 1)
        b3 = min(b0 + 3, k - 1)
        p0 = orders[b0]
        p1 = orders[b1]
        p2 = orders[b2]
        p3 = orders[b3]
        a0 = 0.0
        a1 = 0.0
        a2 = 0.0
        a3 = 0.0
        t = 0
        for i in range(n - 1):
            r0 = y[p0[i]]
            r1 = y[p1[i]]
            r2 = y[p2[i]]
            r3 = y[p3[i]]
            off = t - i - 1  # x[off + j] is x_ij in condensed order
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            s3 = 0.0
            for j in range(i + 1, n):
                # float64 product even for float32 storage: the product of two float32
                # values is exact in float64, so storage rounding is the only error
                xv = np.float64(x[off + j])
                s0 += xv * r0[p0[j]]
                s1 += xv * r1[p1[j]]
                s2 += xv * r2[p2[j]]
                s3 += xv * r3[p3[j]]
            t += n - i - 1
            a0 += s0
            a1 += s1
            a2 += s2
            a3 += s3
        out[b0] = a0
        out[b1] = a1
        out[b2] = a2
        out[b3] = a3
    return out


@njit(parallel=True, **_OPTIONS)
def _cross_many(xt: np.ndarray, y: np.ndarray,
                orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    # ``xt`` is x transposed, (q, m) C-ordered, so that each column streams contiguously. A pass
    # over the triangle serves four orders and four columns with sixteen scalar accumulators
    # that stay in registers: each gathered value of y is used for four columns and each value
    # of x for four orders. Wider inputs take one pass per group of four columns; a last,
    # partial group of orders or columns repeats the final one (it writes the same value).
    # No fastmath and one running sum per (order, column) in pair order: exactly the sums of a
    # plain loop, so results do not depend on the grouping, the batch split or thread count.
    # (Fused multiply-adds would change those bits for a gain of about 15% here.)
    k, n = orders.shape
    q = xt.shape[0]
    out = np.empty((k, q))
    order_groups = (k + 3) // 4
    col_groups = (q + 3) // 4
    for g in prange(order_groups * col_groups):
        go = g // col_groups
        b0 = 4 * go
        b1 = min(b0 + 1, k - 1)
        b2 = min(b0 + 2, k - 1)
        b3 = min(b0 + 3, k - 1)
        c0 = 4 * (g - go * col_groups)
        c1 = min(c0 + 1, q - 1)
        c2 = min(c0 + 2, q - 1)
        c3 = min(c0 + 3, q - 1)
        p0 = orders[b0]
        p1 = orders[b1]
        p2 = orders[b2]
        p3 = orders[b3]
        x0 = xt[c0]
        x1 = xt[c1]
        x2 = xt[c2]
        x3 = xt[c3]
        a00 = a01 = a02 = a03 = 0.0  # a<order><column>
        a10 = a11 = a12 = a13 = 0.0
        a20 = a21 = a22 = a23 = 0.0
        a30 = a31 = a32 = a33 = 0.0
        t = 0
        for i in range(n - 1):
            r0 = y[p0[i]]
            r1 = y[p1[i]]
            r2 = y[p2[i]]
            r3 = y[p3[i]]
            off = t - i - 1  # x[off + j] is x_ij in condensed order
            for j in range(i + 1, n):
                # float64 products even for float32 storage (exact; see _cross_one)
                v0 = np.float64(r0[p0[j]])
                v1 = np.float64(r1[p1[j]])
                v2 = np.float64(r2[p2[j]])
                v3 = np.float64(r3[p3[j]])
                e0 = np.float64(x0[off + j])
                e1 = np.float64(x1[off + j])
                e2 = np.float64(x2[off + j])
                e3 = np.float64(x3[off + j])
                a00 += e0 * v0
                a01 += e1 * v0
                a02 += e2 * v0
                a03 += e3 * v0
                a10 += e0 * v1
                a11 += e1 * v1
                a12 += e2 * v1
                a13 += e3 * v1
                a20 += e0 * v2
                a21 += e1 * v2
                a22 += e2 * v2
                a23 += e3 * v2
                a30 += e0 * v3
                a31 += e1 * v3
                a32 += e2 * v3
                a33 += e3 * v3
            t += n - i - 1
        out[b0, c0] = a00
        out[b0, c1] = a01
        out[b0, c2] = a02
        out[b0, c3] = a03
        out[b1, c0] = a10
        out[b1, c1] = a11
        out[b1, c2] = a12
        out[b1, c3] = a13
        out[b2, c0] = a20
        out[b2, c1] = a21
        out[b2, c2] = a22
        out[b2, c3] = a23
        out[b3, c0] = a30
        out[b3, c1] = a31
        out[b3, c2] = a32
        out[b3, c3] = a33
    return out


def cross_products(x: np.ndarray, y: np.ndarray, orders: np.ndarray) -> np.ndarray:
    """Permuted cross-products ``sum_{i<j} x[ij, c] * y[o[i], o[j]]`` for a batch of orders.

    Parameters
    ----------
    x : ndarray, shape (m,) or (m, q)
        Fixed condensed vector(s), ``m = n (n - 1) / 2``, squareform order. A 2-D ``x`` in
        Fortran order (``np.asfortranarray``) is used without a copy; any other is copied
        into that layout on each call.
    y : ndarray, shape (n, n)
        Symmetric square matrix (C order) whose rows and columns are permuted. ``x`` and
        ``y`` are float64, or both float32 to halve their memory; the products and sums
        are float64 either way.
    orders : ndarray, shape (k, n)
        Site orders from the permutation engine.

    Returns
    -------
    ndarray, shape (k,) for 1-D ``x``, else (k, q)
    """
    orders = _unsigned(orders)
    if x.ndim == 1:
        return _cross_one(x, y, orders)
    return _cross_many(np.ascontiguousarray(x.T), y, orders)


@njit(parallel=True, **_OPTIONS)
def _class_sums(codes: np.ndarray, n_classes: int, y: np.ndarray,
                orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    k, n = orders.shape
    out = np.zeros((k, n_classes))
    for b in prange(k):
        p = orders[b]
        acc = np.zeros(n_classes)
        t = 0
        for i in range(n - 1):
            row = y[p[i]]
            for j in range(i + 1, n):
                c = codes[t]
                if c >= 0:
                    acc[c] += row[p[j]]
                t += 1
        for c in range(n_classes):
            out[b, c] = acc[c]
    return out


def class_sums(codes: np.ndarray, n_classes: int, y: np.ndarray,
               orders: np.ndarray) -> np.ndarray:
    """Per-class sums ``sum_{i<j, class(ij)=c} y[o[i], o[j]]`` for a batch of orders.

    ``codes`` (int32, condensed order) gives each pair's class, -1 for pairs in no class. One
    pass over the triangle serves every class: the statistic of a whole correlogram.
    """
    orders = _unsigned(orders)
    return _class_sums(np.ascontiguousarray(codes, dtype=np.int32), int(n_classes), y, orders)


# --------------------------------------------------------------------------- Kendall tau-b
def kendall_prepare(x: np.ndarray, y: np.ndarray, n: int) -> dict[str, object]:
    """Everything fixed across permutations for Kendall's tau-b between condensed vectors.

    Pairs are put in ascending order of ``x`` (so that the ``x`` side is sorted once); ``y`` is
    replaced by dense integer ranks in a square array, read through each site order.
    """
    m = x.size
    order = np.argsort(x, kind="stable")
    xs = x[order]
    starts = np.flatnonzero(np.r_[True, xs[1:] != xs[:-1], True]).astype(np.int64)
    ii, jj = np.triu_indices(n, k=1)
    _, ycodes = np.unique(y, return_inverse=True)
    ysq = np.zeros((n, n), dtype=np.int32)
    ysq[ii, jj] = ycodes
    ysq[jj, ii] = ycodes
    _, xcounts = np.unique(x, return_counts=True)
    _, ycounts = np.unique(y, return_counts=True)
    n0 = m * (m - 1) / 2.0
    n1 = float(np.sum(xcounts * (xcounts - 1.0) / 2.0))
    n2 = float(np.sum(ycounts * (ycounts - 1.0) / 2.0))
    return {
        "rows": ii[order].astype(np.int32),
        "cols": jj[order].astype(np.int32),
        "starts": starts,
        "ysq": ysq,
        "n0": n0,
        "n1": n1,
        "n2": n2,
    }


@njit(**_OPTIONS)
def _count_inversions(v: np.ndarray, buf: np.ndarray) -> float:  # pragma: no cover
    """Pairs t < u with v[t] > v[u] (bottom-up merge sort; sorts ``v`` in place)."""
    m = v.size
    inv = 0.0
    width = 1
    src = v
    dst = buf
    while width < m:
        lo = 0
        while lo < m:
            mid = min(lo + width, m)
            hi = min(lo + 2 * width, m)
            a = lo
            b = mid
            o = lo
            while a < mid and b < hi:
                if src[a] <= src[b]:
                    dst[o] = src[a]
                    a += 1
                else:
                    dst[o] = src[b]
                    inv += mid - a
                    b += 1
                o += 1
            while a < mid:
                dst[o] = src[a]
                a += 1
                o += 1
            while b < hi:
                dst[o] = src[b]
                b += 1
                o += 1
            lo += 2 * width
        src, dst = dst, src
        width *= 2
    return inv


@njit(parallel=True, **_OPTIONS)
def _kendall(rows: np.ndarray, cols: np.ndarray, starts: np.ndarray, ysq: np.ndarray,
             n0: float, n1: float, n2: float, orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    k = orders.shape[0]
    m = rows.size
    g = starts.size - 1
    out = np.empty(k)
    denom = np.sqrt((n0 - n1) * (n0 - n2))
    for b in prange(k):
        p = orders[b]
        v = np.empty(m, dtype=np.int32)
        buf = np.empty(m, dtype=np.int32)
        for t in range(m):
            v[t] = ysq[p[rows[t]], p[cols[t]]]
        # within each run of tied x, sort y and count the joint ties
        n3 = 0.0
        for h in range(g):
            s = starts[h]
            e = starts[h + 1]
            if e - s > 1:
                v[s:e] = np.sort(v[s:e])
                run = 1
                for t in range(s + 1, e):
                    if v[t] == v[t - 1]:
                        run += 1
                    else:
                        n3 += run * (run - 1) / 2.0
                        run = 1
                n3 += run * (run - 1) / 2.0
        swaps = _count_inversions(v, buf)
        s_stat = n0 - n1 - n2 + n3 - 2.0 * swaps
        out[b] = s_stat / denom
    return out


def kendall_batch(prep: dict[str, object], orders: np.ndarray) -> np.ndarray:
    """Kendall's tau-b between condensed ``x`` and ``y`` permuted by each order.

    Knight's (1966) algorithm: with pairs sorted by ``x`` and, within ties of ``x``, by ``y``,
    the discordant pairs are the inversions of ``y``, counted by merge sort in
    ``O(m log m)``; ``tau_b = (n0 - n1 - n2 + n3 - 2 swaps) / sqrt((n0 - n1)(n0 - n2))``.
    """
    orders = _unsigned(orders)
    return _kendall(prep["rows"], prep["cols"], prep["starts"], prep["ysq"],  # type: ignore[arg-type]
                    float(prep["n0"]), float(prep["n1"]), float(prep["n2"]), orders)  # type: ignore[arg-type]
