"""Permutation plans: which rearrangements of the sites make up the null distribution.

A plan fixes the scheme, the number of permutations, whether the test is exact, and the random
stream of every batch. Batch ``i`` is always drawn from the ``i``-th child of one
:class:`numpy.random.SeedSequence`, so the permutations, and hence the p-value, are the same for a
given ``rng`` however many workers evaluate the batches and in whatever order.
"""

from __future__ import annotations

import itertools
import math
import numbers
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import align_strata, check_choice, check_n_resamples, seed_sequence
from ._relabel import count_relabellings, enumerate_relabellings, group_codes
from ._shuffle import shuffle_segments

__all__ = [
    "SCHEMES",
    "PermutationPlan",
    "custom_plan",
    "permutation_plan",
    "seed_sequence",
    "site_ranks",
]

SCHEMES = ("free", "strata", "cyclic", "toroidal", "blocks", "relabel")

#: Batches are fixed by the plan, never by the number of workers.
DEFAULT_BATCH = 1000
_MAX_BATCH_CELLS = 4_000_000  # bound (batch x n_sites) so a batch of orders stays ~32 MB


@dataclass(frozen=True, eq=False)
class PermutationPlan:
    """A fixed set of site rearrangements, in batches.

    Do not build directly: use :func:`permutation_plan` (site permutations) or
    :func:`custom_plan` (any other null, such as spatially constrained surrogates).

    Attributes
    ----------
    n_sites : int
    scheme : str
    exact : bool
        True when the plan enumerates every distinct permutation (identity included).
    size : int
        Number of rearrangements the plan yields in all.
    n_distinct : int or None
        Number of distinct rearrangements the scheme allows (None when not countable).
    batch_size : int
    """

    n_sites: int
    scheme: str
    exact: bool
    size: int
    n_distinct: int | None
    batch_size: int
    _seed: np.random.SeedSequence = field(repr=False)
    _groups: tuple[np.ndarray, ...] = field(repr=False, default=())
    _shape: tuple[int, int] | None = field(repr=False, default=None)
    _enumerated: np.ndarray | None = field(repr=False, default=None)
    _draw: Callable[[np.random.Generator, int], np.ndarray] | None = field(
        repr=False, default=None
    )
    description: str = ""

    @property
    def n_batches(self) -> int:
        return -(-self.size // self.batch_size)

    def batch(self, i: int) -> np.ndarray:
        """Batch ``i``: an array ``(k, n_sites)`` of site orders (or surrogate data)."""
        if not 0 <= i < self.n_batches:
            raise IndexError(i)
        start = i * self.batch_size
        k = min(self.batch_size, self.size - start)
        if self._enumerated is not None:
            return self._enumerated[start : start + k]
        seed = _child(self._seed, i)
        if self._draw is not None:
            return self._draw(np.random.default_rng(seed), k)
        return _DRAWERS[self.scheme](self, seed, k)

    def batches(self) -> Iterator[np.ndarray]:
        """All batches in order."""
        for i in range(self.n_batches):
            yield self.batch(i)

    def identity(self) -> np.ndarray:
        """The observed arrangement, as a batch of one."""
        return np.arange(self.n_sites, dtype=np.intp)[None, :]

    def __repr__(self) -> str:
        kind = "exact, all" if self.exact else "random"
        return (f"PermutationPlan({self.scheme}, {self.n_sites} sites, {kind} {self.size} "
                f"rearrangements in {self.n_batches} batches of {self.batch_size})")


def _child(seed: np.random.SeedSequence, i: int) -> np.random.SeedSequence:
    # Equivalent to seed.spawn(i + 1)[i] without mutating the parent's spawn counter: the child
    # key is the parent's spawn key extended by i.
    return np.random.SeedSequence(
        seed.entropy, spawn_key=(*seed.spawn_key, i), pool_size=seed.pool_size
    )


# --------------------------------------------------------------------------- drawers
def _batch_key(seed: np.random.SeedSequence) -> int:
    return int(seed.generate_state(1, np.uint64)[0])


def _draw_free(plan: PermutationPlan, seed: np.random.SeedSequence, k: int) -> np.ndarray:
    n = plan.n_sites
    members = plan._groups[0] if plan._groups else np.arange(n)
    return shuffle_segments(_batch_key(seed), k, n, members, np.array([0, n]))


def _draw_strata(plan: PermutationPlan, seed: np.random.SeedSequence, k: int) -> np.ndarray:
    members = np.concatenate(plan._groups)
    bounds = np.concatenate([[0], np.cumsum([g.size for g in plan._groups])])
    return shuffle_segments(_batch_key(seed), k, plan.n_sites, members, bounds)


def _draw_cyclic(plan: PermutationPlan, seed: np.random.SeedSequence, k: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    out = np.empty((k, plan.n_sites), dtype=np.intp)
    for members in plan._groups:
        m = members.size
        shift = rng.integers(0, m, size=k)
        out[:, members] = members[(np.arange(m)[None, :] + shift[:, None]) % m]
    return out


def _draw_toroidal(plan: PermutationPlan, seed: np.random.SeedSequence, k: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    rows, cols = plan._shape  # type: ignore[misc]
    dr = rng.integers(0, rows, size=k)
    dc = rng.integers(0, cols, size=k)
    return _torus_orders(rows, cols, dr, dc)


def _torus_orders(rows: int, cols: int, dr: np.ndarray, dc: np.ndarray) -> np.ndarray:
    r = (np.arange(rows)[None, :, None] + dr[:, None, None]) % rows
    c = (np.arange(cols)[None, None, :] + dc[:, None, None]) % cols
    return (r * cols + c).reshape(len(dr), rows * cols).astype(np.intp)


def _draw_blocks(plan: PermutationPlan, seed: np.random.SeedSequence, k: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    blocks = np.stack(plan._groups)  # (n_blocks, block_size), sites in block order
    nb = blocks.shape[0]
    order = rng.permuted(np.broadcast_to(np.arange(nb), (k, nb)), axis=1)
    out = np.empty((k, plan.n_sites), dtype=np.intp)
    out[:, blocks.ravel()] = blocks[order].reshape(k, -1)
    return out


def _draw_relabel(plan: PermutationPlan, seed: np.random.SeedSequence, k: int) -> np.ndarray:
    # Uniform random orders (within strata when there are strata) give every relabelling the
    # same chance, so random draws need nothing of the groups.
    return (_draw_strata if len(plan._groups) > 1 else _draw_free)(plan, seed, k)


_DRAWERS: dict[str, Callable[[PermutationPlan, np.random.SeedSequence, int], np.ndarray]] = {
    "free": _draw_free,
    "relabel": _draw_relabel,
    "strata": _draw_strata,
    "cyclic": _draw_cyclic,
    "toroidal": _draw_toroidal,
    "blocks": _draw_blocks,
}


# --------------------------------------------------------------------------- enumeration
def _enumerate(scheme: str, n: int, groups: tuple[np.ndarray, ...],
               shape: tuple[int, int] | None) -> np.ndarray:
    """Every distinct rearrangement, identity first."""
    if scheme == "free":
        count = math.factorial(n)
        flat = itertools.chain.from_iterable(itertools.permutations(range(n)))
        return np.fromiter(flat, dtype=np.intp, count=count * n).reshape(count, n)
    if scheme == "strata":
        per_group = [list(itertools.permutations(g.tolist())) for g in groups]
        rows = []
        for combo in itertools.product(*per_group):
            order = np.empty(n, dtype=np.intp)
            for members, perm in zip(groups, combo, strict=True):
                order[members] = perm
            rows.append(order)
        return np.array(rows, dtype=np.intp)
    if scheme == "cyclic":
        per_group = [range(g.size) for g in groups]
        rows = []
        for shifts in itertools.product(*per_group):
            order = np.empty(n, dtype=np.intp)
            for members, s in zip(groups, shifts, strict=True):
                order[members] = np.roll(members, -s)
            rows.append(order)
        return np.array(rows, dtype=np.intp)
    if scheme == "toroidal":
        rows_, cols_ = shape  # type: ignore[misc]
        dr, dc = np.divmod(np.arange(rows_ * cols_), cols_)
        return _torus_orders(rows_, cols_, dr, dc)
    if scheme == "blocks":
        blocks = np.stack(groups)
        rows = []
        for perm in itertools.permutations(range(blocks.shape[0])):
            order = np.empty(n, dtype=np.intp)
            order[blocks.ravel()] = blocks[list(perm)].ravel()
            rows.append(order)
        return np.array(rows, dtype=np.intp)
    raise ValueError(scheme)  # pragma: no cover


def _capped_factorial(m: int, cap: int) -> int:
    """m!, or cap + 1 as soon as the product exceeds cap."""
    out = 1
    for i in range(2, m + 1):
        out *= i
        if out > cap:
            return cap + 1
    return out


def _count_distinct(scheme: str, n: int, groups: tuple[np.ndarray, ...],
                    shape: tuple[int, int] | None, cap: int) -> int:
    """Number of distinct rearrangements, or ``cap + 1`` when it exceeds ``cap``."""
    if scheme == "free":
        return _capped_factorial(n, cap)
    if scheme in ("strata", "cyclic"):
        total = 1
        for g in groups:
            total *= _capped_factorial(g.size, cap) if scheme == "strata" else g.size
            if total > cap:
                return cap + 1
        return total
    if scheme == "toroidal":
        return shape[0] * shape[1]  # type: ignore[index]
    if scheme == "blocks":
        return _capped_factorial(len(groups), cap)
    raise ValueError(scheme)  # pragma: no cover


# --------------------------------------------------------------------------- groups
def _groups_from_labels(labels: np.ndarray) -> tuple[np.ndarray, ...]:
    """Site positions of each group, groups in order of first appearance."""
    codes, _ = pd.factorize(pd.Series(labels), sort=False)
    return tuple(np.flatnonzero(codes == c).astype(np.intp) for c in range(codes.max() + 1))


def _sort_key(values: object) -> np.ndarray:
    """Stable ascending order of labels; labels of mixed types are compared as text."""
    arr = pd.Index(values).to_numpy()
    try:
        return np.argsort(arr, kind="stable")
    except TypeError:
        return np.argsort(arr.astype(str), kind="stable")


def site_ranks(site_labels: Sequence[object] | np.ndarray | pd.Index) -> np.ndarray:
    """Position of every site when the sites are sorted by label (0 for the first).

    Random draws made over sites in this order and mapped back with ``draws[..., ranks]`` do
    not depend on the order the sites come in (labels of mixed types sort as text).
    """
    labels = pd.Index(site_labels)
    ranks = np.empty(len(labels), dtype=np.intp)
    ranks[_sort_key(labels)] = np.arange(len(labels))
    return ranks


def _canonical_groups(scheme: str, n: int, groups: tuple[np.ndarray, ...],
                      site_labels: object, strata: np.ndarray | None) -> tuple[np.ndarray, ...]:
    """The segments to shuffle, members in ascending label order, strata by stratum label.

    Shuffling site positions listed in label order is Fisher-Yates on the label-sorted sites,
    carried back to the given order: the drawn rearrangement of the data is the same whatever
    order the sites come in.
    """
    rank = site_ranks(site_labels)  # length and uniqueness checked by permutation_plan
    if scheme == "free":
        return (np.argsort(rank).astype(np.intp),)
    first = [strata[g[0]] for g in groups]  # type: ignore[index]
    ordered = [groups[i] for i in _sort_key(first)]
    return tuple(g[np.argsort(rank[g], kind="stable")] for g in ordered)


def permutation_plan(
    n_sites: int,
    scheme: str = "free",
    *,
    strata: Sequence[object] | np.ndarray | pd.Series | None = None,
    shape: tuple[int, int] | None = None,
    blocks: Sequence[object] | np.ndarray | pd.Series | None = None,
    n_resamples: int = 999,
    rng: object = None,
    exact: bool | None = None,
    batch_size: int | None = None,
    site_labels: Sequence[object] | np.ndarray | pd.Index | None = None,
    groups: Sequence[object] | np.ndarray | pd.Series | None = None,
    interchangeable: bool = False,
) -> PermutationPlan:
    """Plan the rearrangements of sites that make up a permutation null distribution.

    Parameters
    ----------
    n_sites : int
        Number of sites (the length of every order).
    scheme : {'free', 'strata', 'cyclic', 'toroidal', 'blocks', 'relabel'}
        'free': any order of all sites. 'strata': sites exchanged only within their stratum
        (``strata``), e.g. within sampling campaigns or catchments. 'cyclic': the sites, taken in
        the order given (along a transect or a time series), shifted cyclically, within each
        stratum if ``strata`` is given. 'toroidal': sites on a regular grid of ``shape``
        (rows, columns), given in row-major order, shifted on the torus. 'blocks': whole blocks
        of equal size (``blocks``) exchanged, sites keeping their position within the block
        [2]_. 'relabel': the sites reassigned among the groups of ``groups`` (within strata
        when ``strata`` is given), for statistics that depend on the data only through which
        sites share a group: random orders are drawn as for 'free' (or 'strata'), and an exact
        test enumerates each distinct assignment once (see Notes). Passing ``strata`` with
        ``scheme='free'`` selects 'strata'; passing ``groups`` selects 'relabel'.
    strata, blocks, groups : sequence, length n_sites
        Group label of every site, in site order.
    shape : (int, int)
        Grid shape for 'toroidal'; ``rows * cols`` must equal ``n_sites``.
    n_resamples : int, default 999
        Number of random rearrangements. When the scheme allows no more distinct
        rearrangements than this, all of them are enumerated instead and the test is exact.
    rng : int, numpy.random.Generator or None
        Source of randomness. When `rng` is None, a new `numpy.random.Generator` is created
        using entropy from the operating system.
    exact : bool, optional
        Force (True) or forbid (False) full enumeration; by default enumerate whenever the
        number of distinct rearrangements does not exceed ``n_resamples``.
    batch_size : int, optional
        Rearrangements per batch (default 1000, fewer for very many sites so that a batch of
        orders stays near 32 MB). Part of the plan: results do not depend on how many workers
        evaluate the batches.
    site_labels : sequence, optional
        Label of every site, in site order. With labels, random 'free' and 'strata' orders are
        drawn over the sites sorted by label (and strata sorted by stratum label) and mapped
        back to the given order, so a given ``rng`` yields the same null distribution, and the
        same p-value, however the rows of the input tables were sorted. 'cyclic', 'toroidal'
        and 'blocks' designs are defined by the site order itself and do not use them.
    interchangeable : bool, default False
        For 'relabel' without strata: the statistic does not depend on the names of the groups
        either (a one-way pseudo-F, ANOSIM's R, MRPP's delta), so assignments that differ only
        by swapping groups of equal size are listed once.

    Returns
    -------
    PermutationPlan

    Notes
    -----
    Batch ``i`` is drawn from ``SeedSequence`` child ``i`` of the root sequence made from
    ``rng`` [1]_, so a given ``rng`` always yields the same rearrangements. Random
    rearrangements are drawn with replacement and may include the identity; the p-value
    ``(b + 1) / (P + 1)`` is valid for this sampling [3]_.

    A 'relabel' plan has ``n! / (n_1! ... n_g!)`` distinct rearrangements (the product over
    strata of such counts with strata): 70 for two groups of 4 sites, not ``8! = 40,320``
    orders. With ``interchangeable``, assignments that differ only by swapping equal-sized
    groups give the same statistic; every such set has the same size (the product of
    ``m_s!`` over the sizes ``s`` shared by ``m_s`` groups), so one representative of each
    gives the same exact p-value: 35 for two groups of 4.

    References
    ----------
    .. [1] NumPy, "Parallel random number generation" (SeedSequence spawning).
    .. [2] Anderson, M. J. & ter Braak, C. J. F. (2003). Permutation tests for multi-factorial
       analysis of variance. Journal of Statistical Computation and Simulation 73: 85-113.
    .. [3] Phipson, B. & Smyth, G. K. (2010). Permutation p-values should never be zero.
       Statistical Applications in Genetics and Molecular Biology 9(1): 39.

    Examples
    --------
    >>> from gradients.permutation import permutation_plan
    >>> permutation_plan(5, n_resamples=999, rng=1).exact  # 5! = 120 <= 999
    True
    """
    if not isinstance(n_sites, numbers.Integral) or isinstance(n_sites, bool) or n_sites < 2:
        raise InputError(f"`n_sites` must be an integer of at least 2; got {n_sites!r}.")
    n = int(n_sites)
    if scheme == "free" and groups is not None:
        scheme = "relabel"
    if scheme == "free" and strata is not None:
        scheme = "strata"
    check_choice("scheme", scheme, SCHEMES)
    n_resamples = check_n_resamples(n_resamples)
    codes = np.zeros(n, dtype=np.intp)
    grid: tuple[int, int] | None = None
    if groups is not None and scheme != "relabel":
        raise InputError(f"`groups` does not apply to scheme={scheme!r}; use scheme='relabel'.")
    group_labels, groups = groups, ()  # from here on, `groups` are the segments to shuffle
    if scheme != "strata" and strata is not None and scheme not in ("cyclic", "relabel"):
        raise InputError(f"`strata` does not apply to scheme={scheme!r}.")
    strata = align_strata(strata, n, name="strata")  # positional: one label per site, in order
    if scheme == "strata":
        if strata is None:
            raise InputError("scheme='strata' needs `strata`, one group label per site.")
        groups = _groups_from_labels(strata)
    elif scheme == "cyclic":
        groups = (_groups_from_labels(strata) if strata is not None
                  else (np.arange(n, dtype=np.intp),))
    elif scheme == "relabel":
        if group_labels is None:
            raise InputError("scheme='relabel' needs `groups`, one group label per site.")
        codes = group_codes(align_strata(group_labels, n, name="groups"))  # type: ignore[arg-type]
        groups = _groups_from_labels(strata) if strata is not None else ()
    elif scheme == "toroidal":
        if shape is None or len(shape) != 2 or int(shape[0]) * int(shape[1]) != n:
            raise InputError(f"scheme='toroidal' needs `shape=(rows, cols)` with rows x cols = "
                             f"{n} sites; got {shape!r}.")
        grid = (int(shape[0]), int(shape[1]))
    elif scheme == "blocks":
        if blocks is None:
            raise InputError("scheme='blocks' needs `blocks`, one block label per site.")
        groups = _groups_from_labels(align_strata(blocks, n, name="blocks"))  # type: ignore[arg-type]
        sizes = {g.size for g in groups}
        if len(sizes) != 1:
            raise InputError("Whole blocks can only be exchanged when all blocks have the same "
                             f"number of sites; sizes found: {sorted(sizes)}. Use "
                             "scheme='strata' to permute within blocks instead.")

    swap = bool(interchangeable) and strata is None
    if scheme == "relabel":
        n_distinct = count_relabellings(codes, groups, swap, cap=max(n_resamples, 1))
    else:
        n_distinct = _count_distinct(scheme, n, groups, grid, cap=max(n_resamples, 1))
    countable = n_distinct <= n_resamples
    if exact is None:
        exact = countable
    elif exact and not countable:
        raise InputError(f"An exact test would need more than {n_resamples} rearrangements "
                         f"under scheme={scheme!r}; raise `n_resamples` or leave `exact` unset.")
    if n_distinct == 1 and scheme == "relabel":
        raise InputError(f"Reassigning these {n} sites among their groups changes nothing (one "
                         "group, or one group per stratum): there is nothing to test.")
    if n_distinct == 1:
        raise InputError(f"Scheme {scheme!r} allows no rearrangement of these {n} sites "
                         "(every stratum or block has one member): there is nothing to test.")

    if batch_size is None:
        batch_size = max(16, min(DEFAULT_BATCH, _MAX_BATCH_CELLS // n))
    elif not isinstance(batch_size, numbers.Integral) or isinstance(batch_size, bool) \
            or batch_size < 1:
        raise InputError(f"`batch_size` must be a positive integer; got {batch_size!r}.")

    if site_labels is not None:
        labels = pd.Index(site_labels)
        if len(labels) != n:
            raise InputError(f"`site_labels` must give one label per site: {len(labels)} "
                             f"labels for {n} sites.")
        if labels.has_duplicates:
            dup = labels[labels.duplicated()].unique()
            raise InputError(f"`site_labels` repeats {format_items(list(dup))}: every site "
                             "needs a label of its own.")
    description = (_describe_relabel(codes, groups, swap) if scheme == "relabel"
                   else _describe(scheme, n, groups, grid))
    if site_labels is not None and scheme in ("free", "strata", "relabel") and not exact:
        kind = scheme if scheme != "relabel" else ("strata" if strata is not None else "free")
        groups = _canonical_groups(kind, n, groups, site_labels, strata)
    if not exact:
        enumerated = None
    elif scheme == "relabel":
        enumerated = enumerate_relabellings(codes, groups, swap)
    else:
        enumerated = _enumerate(scheme, n, groups, grid)
    size = len(enumerated) if enumerated is not None else n_resamples
    return PermutationPlan(
        n_sites=n,
        scheme=scheme,
        exact=bool(exact),
        size=int(size),
        n_distinct=int(n_distinct) if countable else None,
        batch_size=int(batch_size),
        _seed=seed_sequence(rng),
        _groups=groups,
        _shape=grid,
        _enumerated=enumerated,
        description=description,
    )


def _describe(scheme: str, n: int, groups: tuple[np.ndarray, ...],
              grid: tuple[int, int] | None) -> str:
    if scheme == "free":
        return f"free permutation of {n} sites"
    if scheme == "strata":
        return f"permutation within {len(groups)} strata"
    if scheme == "cyclic":
        where = f" within {len(groups)} strata" if len(groups) > 1 else ""
        return f"cyclic shifts along the site order{where}"
    if scheme == "toroidal":
        return f"toroidal shifts on a {grid[0]} x {grid[1]} grid"  # type: ignore[index]
    return f"exchange of {len(groups)} whole blocks of {groups[0].size} sites"


def _describe_relabel(codes: np.ndarray, strata: tuple[np.ndarray, ...], swap: bool) -> str:
    n_groups = int(codes.max()) + 1
    where = f" within {len(strata)} strata" if strata else ""
    same = ", equal-sized groups interchangeable" if swap else ""
    return f"reassignment of {codes.size} sites among {n_groups} groups{where}{same}"


def custom_plan(
    draw: Callable[[np.random.Generator, int], np.ndarray],
    n_sites: int,
    *,
    n_resamples: int = 999,
    rng: object = None,
    batch_size: int | None = None,
    scheme: str = "custom",
    description: str = "",
) -> PermutationPlan:
    """A plan whose batches come from ``draw(generator, k)``, for nulls other than permutations.

    Spatially constrained surrogates (such as Moran spectral randomisation) produce new data
    rather than site orders; they still go through the same engine, batching, seeding and
    p-value rule. ``draw`` must return an array whose first axis has length ``k``.
    """
    n_resamples = check_n_resamples(n_resamples)
    if batch_size is None:
        batch_size = max(16, min(DEFAULT_BATCH, _MAX_BATCH_CELLS // max(int(n_sites), 1)))
    return PermutationPlan(
        n_sites=int(n_sites),
        scheme=scheme,
        exact=False,
        size=n_resamples,
        n_distinct=None,
        batch_size=int(batch_size),
        _seed=seed_sequence(rng),
        _draw=draw,
        description=description or scheme,
    )

