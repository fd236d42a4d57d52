"""Compiled kernels of the subset search: subset distances, their ranks, permuted community rows.

Squared Euclidean distances of z-scored variables add over variables: with ``T[v]`` the
condensed vector of ``(z_iv - z_jv)^2``, a subset's squared distances are the sum of its
``T[v]``. The terms are held as 64-bit integers (fixed point, scaled so that the sum of all of
them stays below 2^61: a resolution of about 1e-18 of the largest distance, finer than a
double's rounding), so that adding and removing a variable is exact: the sums of a subset do
not depend on the path that reached it, and pairs whose distances are equal stay tied, as they
are in :func:`scipy.spatial.distance.pdist`.

:func:`gray_rows` visits subsets in binary-reflected Gray-code order (Gray index ``i`` is the
subset ``i ^ (i >> 1)``, which differs from the one before by the variable at the lowest set
bit of ``i``), so each subset costs one vector addition or subtraction plus its ranks. Each
subset becomes one *row*: its centred ranks (Spearman) or distances (Pearson) and the factor
that makes them unit-length, so that its correlation with a unit-length community vector is
one dot product, and its correlations with a whole batch of permuted community vectors one
matrix product.

Ranks come from a least-significant-digit radix sort (11-bit digits) of the float32 bit
patterns of the squared distances, less the smallest: rounding to float32 keeps the order, so
only runs of equal float32 keys (rare and short) are then sorted by the integers themselves.
The order is exact, and three passes usually suffice. Ties get the average of their ranks, as
:func:`scipy.stats.rankdata` gives them. The square root is not taken for ranks: it does not
change the order.

Work is split into fixed pieces of :data:`PIECE` consecutive Gray indices, each piece starting
from sums computed afresh; pieces run in parallel (``prange``) and do not depend on the number
of threads, so results are the same on every thread count. Every kernel releases the GIL and is
cached on disk.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

__all__ = ["PIECE", "gray_rows", "mask_rows", "permuted_rows", "popcounts"]

_OPTIONS = {"cache": True, "nogil": True}

#: Consecutive Gray indices handled by one thread from one fresh start.
PIECE = 64
_BITS = 11
_BINS = 1 << _BITS
_PASSES = 3  # 3 x 11 = 33 >= 32 bits of a float32 key


@njit(**_OPTIONS)
def _sorted_order(x: np.ndarray, f32: np.ndarray, order: np.ndarray, packed: np.ndarray,
                  packed2: np.ndarray, hist: np.ndarray) -> None:  # pragma: no cover
    """Ascending order of the non-negative integers ``x`` into ``order``; ``packed`` ends
    holding the sorted 32-bit keys in its high halves.

    Rounding to float32 keeps the order (it is monotone), so a radix sort of the float32 bit
    patterns, less the smallest, orders ``x`` up to runs of equal float32 keys; each such run
    (rare and short: float32 resolves 6e-8 of a value) is then sorted by ``x`` itself. Each key
    is packed with its position into one 64-bit word (key high, position low), so that a pass
    moves one array. The result is the exact ascending order of ``x``.
    """
    m = x.size
    bits = f32.view(np.uint32)
    for i in range(m):
        f32[i] = x[i]
    lo = bits[0]
    hi = bits[0]
    for i in range(1, m):
        k = bits[i]
        if k < lo:
            lo = k
        if k > hi:
            hi = k
    span = hi - lo
    passes = 0
    while span > 0:
        passes += 1
        span >>= np.uint32(_BITS)
    hist[:passes, :] = 0
    digit = np.uint64(_BINS - 1)
    high = np.uint64(32)
    for i in range(m):
        v = (np.uint64(bits[i] - lo) << high) | np.uint64(i)
        packed[i] = v
        for p in range(passes):
            hist[p, (v >> (high + np.uint64(p * _BITS))) & digit] += 1
    src, dst = packed, packed2
    for p in range(passes):
        total = 0
        for b in range(_BINS):
            c = hist[p, b]
            hist[p, b] = total
            total += c
        shift = high + np.uint64(p * _BITS)
        for i in range(m):
            v = src[i]
            b = (v >> shift) & digit
            pos = hist[p, b]
            hist[p, b] = pos + 1
            dst[pos] = v
        src, dst = dst, src
    if passes % 2 == 1:
        for i in range(m):
            packed[i] = src[i]
    low = np.uint64(0xFFFFFFFF)
    for i in range(m):
        order[i] = np.int64(packed[i] & low)
    # runs of equal float32 keys: insertion sort by the integers
    i = 0
    while i < m - 1:
        if (packed[i + 1] >> high) != (packed[i] >> high):
            i += 1
            continue
        j = i + 1
        while j < m and (packed[j] >> high) == (packed[i] >> high):
            j += 1
        for a in range(i + 1, j):
            o = order[a]
            v = x[o]
            b = a - 1
            while b >= i and x[order[b]] > v:
                order[b + 1] = order[b]
                b -= 1
            order[b + 1] = o
        i = j


@njit(**_OPTIONS)
def _rank_pass(x: np.ndarray, community: np.ndarray, row: np.ndarray, write: bool,
               f32: np.ndarray, order: np.ndarray, packed: np.ndarray, packed2: np.ndarray,
               hist: np.ndarray) -> tuple[float, float]:  # pragma: no cover
    """Centred average ranks ``r`` of the integers ``x`` (into ``row`` when ``write``): returns
    ``(sum r^2, sum r * community)``."""
    m = x.size
    _sorted_order(x, f32, order, packed, packed2, hist)
    high = np.uint64(32)
    centre = (m + 1) / 2.0
    ss = 0.0
    dot = 0.0
    i = 0
    while i < m:
        j = i + 1
        if j < m and (packed[j] >> high) == (packed[i] >> high):  # equal integers: equal keys
            v = x[order[i]]
            while j < m and x[order[j]] == v:
                j += 1
        r = (i + 1 + j) / 2.0 - centre  # the mean of ranks i+1 .. j
        for t in range(i, j):
            o = order[t]
            dot += r * community[o]
            if write:
                row[o] = r
        ss += (j - i) * r * r
        i = j
    return ss, dot


@njit(**_OPTIONS)
def _distance_pass(x: np.ndarray, community: np.ndarray, row: np.ndarray,
                   write: bool) -> tuple[float, float]:  # pragma: no cover
    """Centred Euclidean distances ``e`` (square roots of ``x``, up to the fixed-point scale;
    into ``row`` when ``write``): returns ``(sum e^2, sum e * community)``."""
    m = x.size
    mean = 0.0
    for t in range(m):
        mean += np.sqrt(np.float64(x[t]))
    mean /= m
    ss = 0.0
    dot = 0.0
    for t in range(m):
        e = np.sqrt(np.float64(x[t])) - mean
        ss += e * e
        dot += e * community[t]
        if write:
            row[t] = e
    return ss, dot


@njit(**_OPTIONS)
def _popcount(x: int) -> int:  # pragma: no cover
    c = 0
    while x:
        x &= x - 1
        c += 1
    return c


@njit(**_OPTIONS)
def _lowest_bit(x: int) -> int:  # pragma: no cover
    v = 0
    while not (x >> v) & 1:
        v += 1
    return v


@njit(parallel=True, **_OPTIONS)
def gray_rows(terms: np.ndarray, start: int, stop: int, max_size: int, ranks: bool,
              community: np.ndarray, rows: np.ndarray, write: bool, stats: np.ndarray,
              scales: np.ndarray, sizes: np.ndarray) -> None:  # pragma: no cover
    """The subsets at Gray indices ``start .. stop - 1`` (``start`` >= 1), one slot each.

    ``terms`` is ``(p, m)`` int64; slot ``i - start`` is the subset ``i ^ (i >> 1)``: its size in
    ``sizes``, its correlation with the unit-length centred ``community`` in ``stats``, the
    factor that makes its row unit-length in ``scales`` and, when ``write``, its row
    (centred ranks or distances, not yet scaled) in ``rows``. Subsets larger than
    ``max_size`` get size ``-1``, statistic 0 and scale 0. Pieces start at multiples of
    :data:`PIECE`, so results do not depend on where the range was cut.
    """
    p, m = terms.shape
    first_piece = start // PIECE
    last_piece = (stop - 1) // PIECE
    for q in prange(first_piece, last_piece + 1):
        a = max(q * PIECE, start)
        b = min((q + 1) * PIECE, stop)
        sums = np.zeros(m, dtype=np.int64)
        own = np.empty(m)
        f32 = np.empty(m, dtype=np.float32)
        order = np.empty(m, dtype=np.int64)
        packed = np.empty(m, dtype=np.uint64)
        packed2 = np.empty(m, dtype=np.uint64)
        hist = np.empty((_PASSES, _BINS), dtype=np.int64)
        mask = q * PIECE ^ ((q * PIECE) >> 1)
        for v in range(p):
            if (mask >> v) & 1:
                for t in range(m):
                    sums[t] += terms[v, t]
        for i in range(q * PIECE, b):
            if i > q * PIECE:
                v = _lowest_bit(i)
                if (mask >> v) & 1:
                    for t in range(m):
                        sums[t] -= terms[v, t]
                else:
                    for t in range(m):
                        sums[t] += terms[v, t]
                mask ^= 1 << v
            if i < a:
                continue
            slot = i - start
            size = _popcount(mask)
            if size == 0 or size > max_size:
                sizes[slot] = -1
                stats[slot] = 0.0
                scales[slot] = 0.0
                continue
            sizes[slot] = size
            row = rows[slot] if write else own
            if ranks:
                ss, dot = _rank_pass(sums, community, row, write, f32, order, packed,
                                     packed2, hist)
            else:
                ss, dot = _distance_pass(sums, community, row, write)
            scale = 1.0 / np.sqrt(ss) if ss > 0 else 0.0
            scales[slot] = scale
            stats[slot] = dot * scale


@njit(parallel=True, **_OPTIONS)
def mask_rows(terms: np.ndarray, members: np.ndarray, ranks: bool, community: np.ndarray,
              rows: np.ndarray, stats: np.ndarray, scales: np.ndarray) -> None:  # pragma: no cover
    """Rows (unscaled), scales and statistics of arbitrary subsets: ``members`` is ``(k, p)``
    (1 where the variable is in)."""
    k, p = members.shape
    m = terms.shape[1]
    for s in prange(k):
        sums = np.zeros(m, dtype=np.int64)
        for v in range(p):
            if members[s, v]:
                for t in range(m):
                    sums[t] += terms[v, t]
        if ranks:
            f32 = np.empty(m, dtype=np.float32)
            order = np.empty(m, dtype=np.int64)
            packed = np.empty(m, dtype=np.uint64)
            packed2 = np.empty(m, dtype=np.uint64)
            hist = np.empty((_PASSES, _BINS), dtype=np.int64)
            ss, dot = _rank_pass(sums, community, rows[s], True, f32, order, packed, packed2,
                                 hist)
        else:
            ss, dot = _distance_pass(sums, community, rows[s], True)
        scale = 1.0 / np.sqrt(ss) if ss > 0 else 0.0
        scales[s] = scale
        stats[s] = dot * scale


@njit(parallel=True, **_OPTIONS)
def permuted_rows(square: np.ndarray, orders: np.ndarray,
                  out: np.ndarray) -> None:  # pragma: no cover
    """Condensed rows of ``square`` with its sites rearranged by each order.

    Row ``b`` of ``out`` is ``square[o[i], o[j]]`` over the pairs ``i < j`` in condensed
    (scipy ``squareform``) order, ``o = orders[b]``.
    """
    k, n = orders.shape
    for b in prange(k):
        pos = 0
        for i in range(n - 1):
            oi = orders[b, i]
            for j in range(i + 1, n):
                out[b, pos] = square[oi, orders[b, j]]
                pos += 1


def popcounts(indices: np.ndarray) -> np.ndarray:
    """Subset sizes of Gray indices (numpy, for tables)."""
    masks = indices ^ (indices >> 1)
    out = np.zeros(masks.shape, dtype=np.int64)
    work = masks.copy()
    while np.any(work):
        out += (work & 1).astype(np.int64)
        work >>= 1
    return out
