"""Compiled drawing of random site orders for the engine's permutation plans.

Each row of a batch is shuffled by Fisher–Yates [1]_ from its own xoshiro256** stream [2]_,
whose state is four outputs of splitmix64 [3]_ started from the batch key (the batch's
``SeedSequence`` child) and the row number, as the xoshiro authors recommend for seeding. Bounded
integers use Lemire's multiply-and-reject method [4]_, so every order is exactly equally likely.
Rows are independent streams, so they are drawn on all cores (numba ``prange``) and the result
does not depend on the number of threads.

References
----------
.. [1] Durstenfeld, R. (1964). Algorithm 235: Random permutation. Communications of the ACM 7: 420.
.. [2] Blackman, D. & Vigna, S. (2021). Scrambled linear pseudorandom number generators. ACM
   Transactions on Mathematical Software 47(4): 36.
.. [3] Steele, G. L., Lea, D. & Flood, C. H. (2014). Fast splittable pseudorandom number
   generators. OOPSLA 2014: 453-472.
.. [4] Lemire, D. (2019). Fast random integer generation in an interval. ACM Transactions on
   Modeling and Computer Simulation 29(1): 3.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange, uint64

__all__ = ["shuffle_segments"]

_GOLDEN = uint64(0x9E3779B97F4A7C15)


@njit(inline="always")
def _splitmix(z):  # pragma: no cover - compiled
    z = (z ^ (z >> uint64(30))) * uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> uint64(27))) * uint64(0x94D049BB133111EB)
    return z ^ (z >> uint64(31))


@njit(inline="always")
def _rotl(x, k):  # pragma: no cover - compiled
    return (x << uint64(k)) | (x >> uint64(64 - k))


@njit(inline="always")
def _bounded(s0, s1, s2, s3, span):  # pragma: no cover - compiled
    # One xoshiro256** step per try; Lemire's rejection keeps the draw in [0, span) unbiased.
    while True:
        result = _rotl(s1 * uint64(5), 7) * uint64(9)
        t = s1 << uint64(17)
        s2 ^= s0
        s3 ^= s1
        s1 ^= s2
        s0 ^= s3
        s2 ^= t
        s3 = _rotl(s3, 45)
        m = (result >> uint64(32)) * span
        low = m & uint64(0xFFFFFFFF)
        if low >= span or low >= (uint64(0x100000000) - span) % span:
            return np.intp(m >> uint64(32)), s0, s1, s2, s3


@njit(cache=True, nogil=True, parallel=True)
def _shuffle(key, members, bounds, whole, out):  # pragma: no cover - compiled
    k = out.shape[0]
    n_seg = bounds.size - 1
    for b in prange(k):
        base = key + uint64(4) * uint64(b) * _GOLDEN
        s0 = _splitmix(base + _GOLDEN)
        s1 = _splitmix(base + uint64(2) * _GOLDEN)
        s2 = _splitmix(base + uint64(3) * _GOLDEN)
        s3 = _splitmix(base + uint64(4) * _GOLDEN)
        row = out[b]
        for p in range(row.size):
            row[p] = p
        if whole:
            # every site in one segment, members 0..n-1: no indirection (the same draws)
            for i in range(row.size - 1, 0, -1):
                j, s0, s1, s2, s3 = _bounded(s0, s1, s2, s3, uint64(i + 1))
                tmp = row[i]
                row[i] = row[j]
                row[j] = tmp
            continue
        for g in range(n_seg):
            lo = bounds[g]
            for i in range(bounds[g + 1] - 1, lo, -1):
                j, s0, s1, s2, s3 = _bounded(s0, s1, s2, s3, uint64(i - lo + 1))
                a = members[i]
                c = members[lo + j]
                tmp = row[a]
                row[a] = row[c]
                row[c] = tmp
    return out


def shuffle_segments(key: int, k: int, n_sites: int, members: np.ndarray,
                     bounds: np.ndarray) -> np.ndarray:
    """``k`` random orders of ``n_sites`` sites, each segment of ``members`` shuffled alone.

    ``members`` lists site indices segment by segment and ``bounds`` the segment offsets
    (``bounds[0] = 0``, ``bounds[-1] = len(members)``). Sites not listed stay in place. Row
    ``b`` is the same for a given ``key`` however many threads run.
    """
    members = np.asarray(members, dtype=np.intp)
    bounds = np.asarray(bounds, dtype=np.intp)
    whole = bool(bounds.size == 2 and members.size == n_sites
                 and np.array_equal(members, np.arange(n_sites)))
    out = np.empty((k, n_sites), dtype=np.intp)
    return _shuffle(np.uint64(key), members, bounds, whole, out)
