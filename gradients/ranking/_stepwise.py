"""The stepwise subset search, for more variables than can be searched exhaustively.

From the empty set, each forward step adds the variable that raises the correlation with the
community most; after each forward step, backward steps drop a variable as long as dropping
one raises the correlation above the current one. The search stops when a forward step no
longer improves the correlation (or the size limit is reached). Every accepted step raises the
correlation strictly, so no subset is returned to and the search ends. The best subset of each
size is the best *visited*.

Rows of subsets (their centred, unit-length ranks or distances) are kept in a :class:`RowCache`
shared by the observed search and by every permuted one: the permuted searches visit the same
small subsets over and over, and a row costs a sort while a correlation costs a dot product.
"""

from __future__ import annotations

from collections import OrderedDict
from typing import Any

import numpy as np

__all__ = ["CACHE_BUDGET", "RowCache", "stepwise_search"]

#: Bytes of subset rows kept between evaluations.
CACHE_BUDGET = 64 * 2**20
#: A step must raise the correlation by more than this (relative) to be taken.
IMPROVE_RTOL = 1e-12


class RowCache:
    """Rows of subsets (by bit mask), computed in parallel batches, oldest dropped first."""

    def __init__(self, problem: Any) -> None:
        self.problem = problem
        self.rows: OrderedDict[int, np.ndarray] = OrderedDict()
        self.capacity = max(8, CACHE_BUDGET // (8 * problem.m))

    def get(self, masks: list[int]) -> np.ndarray:
        todo = [m for m in dict.fromkeys(masks) if m not in self.rows]
        if todo:
            fresh, _ = self.problem.masks(todo)
            for m, row in zip(todo, fresh, strict=True):
                self.rows[m] = row
        out = np.empty((len(masks), self.problem.m))
        for i, m in enumerate(masks):
            row = self.rows[m]
            self.rows.move_to_end(m)
            out[i] = row
        while len(self.rows) > self.capacity:
            self.rows.popitem(last=False)
        return out


def stepwise_search(cache: RowCache, community: np.ndarray, p: int, max_size: int
                    ) -> tuple[dict[int, tuple[float, int]], dict[int, int]]:
    """Best (statistic, mask) of each size visited, and distinct subsets visited per size."""
    best: dict[int, tuple[float, int]] = {}
    seen: set[int] = set()

    def evaluate(masks: list[int]) -> np.ndarray:
        stats = cache.get(masks) @ community
        for mask, stat in zip(masks, stats, strict=True):
            s = mask.bit_count()
            seen.add(mask)
            old = best.get(s)
            if old is None or stat > old[0] or (stat == old[0] and mask < old[1]):
                best[s] = (float(stat), mask)
        return stats

    def better(new: float, old: float) -> bool:
        return new > old + IMPROVE_RTOL * max(abs(old), 1.0)

    current, score = 0, -np.inf
    while True:
        size = current.bit_count()
        if size >= max_size:
            break
        adds = [current | (1 << v) for v in range(p) if not (current >> v) & 1]
        stats = evaluate(adds)
        j = int(np.argmax(stats))
        if size > 0 and not better(float(stats[j]), score):
            break
        current, score = adds[j], float(stats[j])
        while current.bit_count() >= 2:
            drops = [current & ~(1 << v) for v in range(p) if (current >> v) & 1]
            stats = evaluate(drops)
            j = int(np.argmax(stats))
            if not better(float(stats[j]), score):
                break
            current, score = drops[j], float(stats[j])
    counts: dict[int, int] = {}
    for mask in seen:
        counts[mask.bit_count()] = counts.get(mask.bit_count(), 0) + 1
    return best, counts
