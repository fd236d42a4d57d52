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


#: Rows per parallel task: one scratch buffer serves a run of rows.
_ROWS_PER_TASK = 64


@njit(cache=True, nogil=True, parallel=True)
def _shuffle(key, members, bounds, whole, out):  # pragma: no cover - compiled
    k, n = out.shape
    n_seg = bounds.size - 1
    m = members.size
    n_tasks = (k + _ROWS_PER_TASK - 1) // _ROWS_PER_TASK
    for task in prange(n_tasks):
        # Fisher-Yates runs on positions in the list ``members`` (a scratch row), then one pass
        # carries it to sites: site members[p] takes the data of site members[scratch[p]].
        # Swapping sites members[i] and members[j] directly gives the same orders, slower.
        scratch = np.empty(m, dtype=np.uint64)
        for b in range(task * _ROWS_PER_TASK, min(k, (task + 1) * _ROWS_PER_TASK)):
            base = key + uint64(4) * uint64(b) * _GOLDEN
            s0 = _splitmix(base + _GOLDEN)
            s1 = _splitmix(base + uint64(2) * _GOLDEN)
            s2 = _splitmix(base + uint64(3) * _GOLDEN)
            s3 = _splitmix(base + uint64(4) * _GOLDEN)
            row = out[b]
            for p in range(n):
                row[p] = p
            if whole:
                # every site in one segment, members 0..n-1: shuffle the row itself
                for i in range(n - 1, 0, -1):
                    j, s0, s1, s2, s3 = _bounded(s0, s1, s2, s3, uint64(i + 1))
                    tmp = row[i]
                    row[i] = row[j]
                    row[j] = tmp
                continue
            for p in range(m):
                scratch[p] = uint64(p)
            for g in range(n_seg):
                # a view per segment, indexed from 0: no negative-index checks in the loop
                seg = scratch[bounds[g] : bounds[g + 1]]
                for i in range(seg.size - 1, 0, -1):
                    j, s0, s1, s2, s3 = _bounded(s0, s1, s2, s3, uint64(i + 1))
                    tmp = seg[i]
                    seg[i] = seg[j]
                    seg[j] = tmp
            for p in range(m):  # unsigned indices: no negative-index checks either
                row[members[p]] = members[scratch[p]]
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
    return _shuffle(np.uint64(key), members.astype(np.uint64), bounds, whole, out)
