"""Compiled kernel of the indicator-value permutation statistic.

For every order of a batch, the class sums of the abundances and the class counts of
occurrences are one pass over the sites (site ``i`` keeps its class and takes the data of site
``orders[b, i]``), after which each taxon's largest indicator value over the candidate classes
(single classes and unions of them) is a few operations per class. Orders are split over
threads with ``prange``; the kernel releases the GIL and is cached on disk.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

__all__ = ["largest_indval"]


@njit(parallel=True, cache=True, nogil=True)
def _largest(x: np.ndarray, codes: np.ndarray, sizes: np.ndarray, combos: np.ndarray,
             orders: np.ndarray) -> np.ndarray:  # pragma: no cover - compiled
    k, n = orders.shape
    t = x.shape[1]
    g = sizes.shape[0]
    m = combos.shape[0]
    cand_sizes = np.zeros(m)
    for c in range(m):
        for h in range(g):
            cand_sizes[c] += combos[c, h] * sizes[h]
    # the last class's sums are the column totals less the other classes' (the totals do not
    # change under permutation), so its sites are skipped
    last = g - 1
    col_sum = np.zeros(t)
    col_occ = np.zeros(t)
    for i in range(n):
        for j in range(t):
            v = x[i, j]
            col_sum[j] += v
            if v > 0.0:
                col_occ[j] += 1.0
    out = np.empty((k, t))
    for b in prange(k):
        sums = np.zeros((g, t))
        present = np.zeros((g, t))
        p = orders[b]
        for i in range(n):
            c = codes[i]
            if c == last:
                continue
            row = x[p[i]]
            s = sums[c]
            q = present[c]
            for j in range(t):
                v = row[j]
                s[j] += v
                if v > 0.0:
                    q[j] += 1.0
        for j in range(t):
            acc_s = 0.0
            acc_q = 0.0
            for h in range(last):
                acc_s += sums[h, j]
                acc_q += present[h, j]
            sums[last, j] = col_sum[j] - acc_s
            present[last, j] = col_occ[j] - acc_q
        for j in range(t):
            total = 0.0
            for h in range(g):
                sums[h, j] /= sizes[h]  # class means
                total += sums[h, j]
            best = 0.0
            for c in range(m):
                spec = 0.0
                fid = 0.0
                for h in range(g):
                    if combos[c, h] != 0.0:
                        spec += sums[h, j]
                        fid += present[h, j]
                value = (spec / total) * (fid / cand_sizes[c])
                if value > best:
                    best = value
            out[b, j] = best
    return out


def largest_indval(x: np.ndarray, codes: np.ndarray, sizes: np.ndarray, combos: np.ndarray,
                   orders: np.ndarray) -> np.ndarray:
    """Each taxon's largest indicator value under every order of a batch: ``(k, taxa)``.

    ``x`` sites x taxa (float64), ``codes`` the class of every site (0..G-1), ``sizes`` the
    sites per class, ``combos`` the 0/1 candidates x classes matrix, ``orders`` ``(k, n)``.
    """
    return _largest(np.ascontiguousarray(x, dtype=np.float64),
                    np.ascontiguousarray(codes, dtype=np.int64),
                    np.ascontiguousarray(sizes, dtype=np.float64),
                    np.ascontiguousarray(combos, dtype=np.float64),
                    np.ascontiguousarray(orders, dtype=np.int64))
