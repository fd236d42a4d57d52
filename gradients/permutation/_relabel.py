"""Distinct relabellings of sites among groups: the exact null of a test that compares groups.

A statistic that depends on the data only through which sites share a group (a pseudo-F of
group sums of squares, ANOSIM's R, MRPP's delta, a one-way F) takes the same value for every
order of the sites that keeps the same sites together. Its exact null distribution is therefore
over the distinct *assignments* of the data to the groups, the multinomial coefficient
``n! / (n_1! ... n_g!)``, not over all ``n!`` orders: 70 for two groups of 4 sites. When the
statistic does not depend on the names of the groups either, assignments that differ only by
swapping the labels of groups of equal size give the same value, and one of each such set is
enough: 35 for two groups of 4. Every set (orbit) holds the same number of assignments, so
``b / N`` over the representatives equals ``b / N`` over all assignments.

Each assignment is returned as a site order in the engine's convention (site ``i`` takes the
data of site ``order[i]``): the sites of group ``g``, in position order, take the data of the
sites chosen for ``g``, in position order.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterator

import numpy as np
import pandas as pd

__all__ = ["count_relabellings", "enumerate_relabellings", "group_codes"]


def group_codes(labels: np.ndarray) -> np.ndarray:
    """Integer code of every site's group, groups numbered in order of first appearance."""
    codes, _ = pd.factorize(pd.Series(labels, dtype=object), sort=False)
    return codes.astype(np.intp)


def _sizes(codes: np.ndarray, members: np.ndarray) -> list[int]:
    return np.bincount(codes[members]).tolist()


def _log_multinomial(sizes: list[int]) -> float:
    return math.lgamma(sum(sizes) + 1) - sum(math.lgamma(s + 1) for s in sizes)


def count_relabellings(codes: np.ndarray, strata: tuple[np.ndarray, ...],
                       interchangeable: bool, cap: int) -> int:
    """Number of distinct relabellings, or ``cap + 1`` as soon as it exceeds ``cap``.

    ``strata`` holds the site positions of each stratum (one stratum of all sites when empty);
    ``interchangeable`` divides by the swaps of equal-sized groups (only without strata).
    """
    segments = strata if strata else (np.arange(codes.size, dtype=np.intp),)
    per = [[s for s in _sizes(codes, members) if s] for members in segments]
    log_total = sum(_log_multinomial(sizes) for sizes in per)
    swaps = pd.Series(per[0]).value_counts().tolist() if interchangeable and not strata else []
    log_total -= sum(math.lgamma(m + 1) for m in swaps)
    if log_total > math.log(cap + 1) + 1.0:
        return cap + 1
    total = 1
    for sizes in per:
        remaining = sum(sizes)
        for s in sizes:
            total *= math.comb(remaining, s)
            remaining -= s
    for m in swaps:
        total //= math.factorial(m)
    return total if total <= cap else cap + 1


def _without(left: tuple[int, ...], taken: tuple[int, ...]) -> tuple[int, ...]:
    drop = set(taken)
    return tuple(p for p in left if p not in drop)


def _equal_blocks(pool: tuple[int, ...], count: int,
                  size: int) -> Iterator[list[tuple[int, ...]]]:
    """Every split of ``pool`` into ``count`` unlabelled blocks of ``size``, blocks in order of
    their smallest member (each block takes the smallest site not yet placed)."""
    if count == 0:
        yield []
        return
    first, rest = pool[0], pool[1:]
    for others in itertools.combinations(rest, size - 1):
        block = (first, *others)
        for tail in _equal_blocks(_without(rest, others), count - 1, size):
            yield [block, *tail]


def _assignments(positions: np.ndarray, groups: list[np.ndarray],
                 interchangeable: bool) -> Iterator[list[tuple[int, ...]]]:
    """Every way to split ``positions`` into sets of the sizes of ``groups``, in group order.

    With ``interchangeable``, groups of one size form a run: the run's sites are chosen first,
    then split into unlabelled blocks, given to the run's groups in order of their smallest
    members (the observed split has that order, groups being numbered by first appearance).
    Each split up to swapping equal-sized groups is then produced once, with no rejected or
    dead-end branch.
    """
    if interchangeable:
        by_size: dict[int, list[int]] = {}
        for g, members in enumerate(groups):
            by_size.setdefault(int(members.size), []).append(g)
        runs = list(by_size.values())
    else:
        runs = [[g] for g in range(len(groups))]

    def extend(r: int, left: tuple[int, ...],
               chosen: dict[int, tuple[int, ...]]) -> Iterator[list[tuple[int, ...]]]:
        if r == len(runs):
            yield [chosen[g] for g in range(len(groups))]
            return
        run = runs[r]
        size = int(groups[run[0]].size)
        for pool in itertools.combinations(left, size * len(run)):
            rest = _without(left, pool)
            for blocks in _equal_blocks(pool, len(run), size):
                yield from extend(r + 1, rest, {**chosen, **dict(zip(run, blocks, strict=True))})

    yield from extend(0, tuple(int(p) for p in positions), {})


def _stratum_orders(codes: np.ndarray, members: np.ndarray,
                    interchangeable: bool) -> list[np.ndarray]:
    """Assignments within one stratum as ``(positions, sources)`` pairs; identity first."""
    local = codes[members]
    order_of_groups = list(dict.fromkeys(local.tolist()))  # first appearance in the stratum
    groups = [members[local == c] for c in order_of_groups]
    rows = []
    identity_at = None
    for chosen in _assignments(np.sort(members), groups, interchangeable):
        sources = np.concatenate([np.asarray(c, dtype=np.intp) for c in chosen])
        if identity_at is None and all(
                np.array_equal(np.asarray(c), g) for c, g in zip(chosen, groups, strict=True)):
            identity_at = len(rows)
        rows.append(sources)
    if identity_at is None:  # pragma: no cover - the identity is always a canonical split
        raise AssertionError("the observed assignment was not enumerated")
    rows.insert(0, rows.pop(identity_at))
    targets = np.concatenate(groups)
    return [np.stack([targets, r]) for r in rows]


def enumerate_relabellings(codes: np.ndarray, strata: tuple[np.ndarray, ...],
                           interchangeable: bool) -> np.ndarray:
    """Every distinct relabelling as a site order, the identity first: shape ``(N, n)``."""
    n = codes.size
    segments = strata if strata else (np.arange(n, dtype=np.intp),)
    swap = interchangeable and not strata
    per_stratum = [_stratum_orders(codes, np.sort(m), swap) for m in segments]
    total = math.prod(len(p) for p in per_stratum)
    out = np.empty((total, n), dtype=np.intp)
    for row, combo in enumerate(itertools.product(*per_stratum)):
        for pair in combo:
            out[row, pair[0]] = pair[1]
    return out
