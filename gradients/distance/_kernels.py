"""Compiled pairwise loops that write straight into a condensed output vector.

Each kernel takes a C-contiguous float64 ``(n, p)`` array and fills ``out`` (float64 or float32,
length ``n (n - 1) / 2``) in scipy ``squareform`` order. Sums are accumulated in float64 whatever
the storage type. Pairs whose value is 0/0 are written as NaN; the caller decides what to do
with them (see ``empty=`` in :func:`gradients.distance.dissimilarity`). Coefficients of the form
``1 - similarity`` are clipped at 0 so that rounding in the last bit cannot make an identical pair
slightly negative.

The output is allocated by the caller with numpy, so its memory is visible to ``tracemalloc``
and there is exactly one output-sized allocation. Pairs are visited in tiles of ``BLOCK`` x
``BLOCK`` sites, so that both tiles of rows stay in cache while they are compared (about twice as
fast as row after row for 5,000 x 300 tables, where the table itself does not fit in cache).
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = [
    "bray_curtis",
    "canberra",
    "gower",
    "manhattan",
    "min_based",
    "morisita_horn",
    "squared_euclidean",
]

# Reassociation lets LLVM vectorise the reductions; no "nnan"/"ninf", so NaN stays NaN.
_FAST = {"reassoc", "contract", "nsz"}

#: rows per tile: a tile of rows stays in cache while it meets the next tile
BLOCK = 64

MIN_RUZICKA = 0
MIN_KULCZYNSKI = 1
MIN_JACCARD = 2
MIN_SORENSEN = 3


@njit(cache=True, fastmath=_FAST)
def bray_curtis(x, totals, out):  # pragma: no cover - compiled
    n, p = x.shape
    for ib in range(0, n, BLOCK):
        for jb in range(ib, n, BLOCK):
            for i in range(ib, min(ib + BLOCK, n)):
                xi = x[i]
                base = i * n - (i * (i + 1)) // 2 - i - 1
                for j in range(max(jb, i + 1), min(jb + BLOCK, n)):
                    xj = x[j]
                    k = base + j
                    s = 0.0
                    for t in range(p):
                        s += abs(xi[t] - xj[t])
                    den = totals[i] + totals[j]
                    out[k] = s / den if den > 0.0 else np.nan


@njit(cache=True, fastmath=_FAST)
def manhattan(x, out):  # pragma: no cover - compiled
    n, p = x.shape
    for ib in range(0, n, BLOCK):
        for jb in range(ib, n, BLOCK):
            for i in range(ib, min(ib + BLOCK, n)):
                xi = x[i]
                base = i * n - (i * (i + 1)) // 2 - i - 1
                for j in range(max(jb, i + 1), min(jb + BLOCK, n)):
                    xj = x[j]
                    k = base + j
                    s = 0.0
                    for t in range(p):
                        s += abs(xi[t] - xj[t])
                    out[k] = s


@njit(cache=True, fastmath=_FAST)
def squared_euclidean(x, out, take_root):  # pragma: no cover - compiled
    n, p = x.shape
    for ib in range(0, n, BLOCK):
        for jb in range(ib, n, BLOCK):
            for i in range(ib, min(ib + BLOCK, n)):
                xi = x[i]
                base = i * n - (i * (i + 1)) // 2 - i - 1
                for j in range(max(jb, i + 1), min(jb + BLOCK, n)):
                    xj = x[j]
                    k = base + j
                    s = 0.0
                    for t in range(p):
                        d = xi[t] - xj[t]
                        s += d * d
                    out[k] = np.sqrt(s) if take_root else s


@njit(cache=True)
def canberra(x, out):  # pragma: no cover - compiled
    n, p = x.shape
    for ib in range(0, n, BLOCK):
        for jb in range(ib, n, BLOCK):
            for i in range(ib, min(ib + BLOCK, n)):
                xi = x[i]
                base = i * n - (i * (i + 1)) // 2 - i - 1
                for j in range(max(jb, i + 1), min(jb + BLOCK, n)):
                    xj = x[j]
                    k = base + j
                    s = 0.0
                    for t in range(p):
                        den = abs(xi[t]) + abs(xj[t])
                        if den > 0.0:
                            s += abs(xi[t] - xj[t]) / den
                    out[k] = s


@njit(cache=True, fastmath=_FAST)
def min_based(x, totals, kind, out):  # pragma: no cover - compiled
    """Coefficients built from W = sum_k min(x_ik, x_jk) and the site totals A, B."""
    n, p = x.shape
    for ib in range(0, n, BLOCK):
        for jb in range(ib, n, BLOCK):
            for i in range(ib, min(ib + BLOCK, n)):
                xi = x[i]
                a = totals[i]
                base = i * n - (i * (i + 1)) // 2 - i - 1
                for j in range(max(jb, i + 1), min(jb + BLOCK, n)):
                    xj = x[j]
                    k = base + j
                    w = 0.0
                    for t in range(p):
                        w += min(xi[t], xj[t])
                    b = totals[j]
                    if kind == 0 or kind == 2:  # Ruzicka / Jaccard: 1 - W / (A + B - W)
                        den = a + b - w
                        out[k] = max(0.0, 1.0 - w / den) if den > 0.0 else np.nan
                    elif kind == 1:  # Kulczynski: 1 - (W/A + W/B) / 2
                        if a > 0.0 and b > 0.0:
                            out[k] = max(0.0, 1.0 - 0.5 * (w / a + w / b))
                        else:
                            out[k] = np.nan
                    else:  # Sorensen: 1 - 2W / (A + B)
                        den = a + b
                        out[k] = max(0.0, 1.0 - 2.0 * w / den) if den > 0.0 else np.nan


@njit(cache=True, fastmath=_FAST)
def morisita_horn(x, totals, lam, out):  # pragma: no cover - compiled
    """1 - 2 sum x_i y_i / ((lx + ly) X Y), lx = sum x_i^2 / X^2 (Horn 1966)."""
    n, p = x.shape
    for ib in range(0, n, BLOCK):
        for jb in range(ib, n, BLOCK):
            for i in range(ib, min(ib + BLOCK, n)):
                xi = x[i]
                base = i * n - (i * (i + 1)) // 2 - i - 1
                for j in range(max(jb, i + 1), min(jb + BLOCK, n)):
                    xj = x[j]
                    k = base + j
                    s = 0.0
                    for t in range(p):
                        s += xi[t] * xj[t]
                    den = (lam[i] + lam[j]) * totals[i] * totals[j]
                    out[k] = max(0.0, 1.0 - 2.0 * s / den) if den > 0.0 else np.nan


@njit(cache=True)
def gower(x, kind, ranges, weights, out):  # pragma: no cover - compiled
    """1 - S, Gower's (1971) similarity with missing values (NaN) left out pair by pair.

    kind: 0 quantitative (range-normalised), 1 qualitative (codes), 2 dichotomous (0/1, a pair
    of absences is not a comparison).
    """
    n, p = x.shape
    k = 0
    for i in range(n - 1):
        for j in range(i + 1, n):
            num = 0.0
            den = 0.0
            for t in range(p):
                a = x[i, t]
                b = x[j, t]
                if np.isnan(a) or np.isnan(b):
                    continue
                w = weights[t]
                if kind[t] == 0:
                    r = ranges[t]
                    if r > 0.0:
                        num += w * (1.0 - abs(a - b) / r)
                        den += w
                elif kind[t] == 1:
                    if a == b:
                        num += w
                    den += w
                else:
                    if a > 0.0 or b > 0.0:
                        den += w
                        if a > 0.0 and b > 0.0:
                            num += w
            out[k] = max(0.0, 1.0 - num / den) if den > 0.0 else np.nan
            k += 1
