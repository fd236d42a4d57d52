"""Site classes for the group tests: read once, checked, with the plan that reassigns them.

Every group test (PERMANOVA's pairwise comparisons, the dispersion test, ANOSIM, MRPP) takes a
class label per site. They are read here, aligned to the distance matrix by site label, and
refused with a message that names the column, the class and the sites when a comparison cannot
be made: a missing label, a class with no site or with one site, a single class.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import align_strata, seed_sequence
from ..distance import DistanceMatrix, as_distance_matrix
from ..permutation import PermutationPlan, permutation_plan
from ..permutation._threads import numba_threads as _engine_threads

__all__ = [
    "BATCH_SIZE",
    "Classes",
    "check_classes",
    "check_distances",
    "class_levels",
    "group_plan",
    "numba_threads",
    "read_classes",
    "read_strata",
    "streams",
]

#: Rearrangements per batch: 999 permutations make four batches for the workers to share.
#: Part of the plan, so p-values do not depend on ``n_jobs``.
BATCH_SIZE = 250


@dataclass(frozen=True)
class Classes:
    """Class labels of the sites, in site order.

    Attributes
    ----------
    name : str
        What the classes are called in messages and tables (the column's name).
    values : ndarray of object
        The class of every site, in the order of the distance matrix.
    levels : tuple
        The classes, in category order for a categorical, else sorted.
    codes : ndarray of int
        Position of every site's class in ``levels``.
    column : str or None
        The column's own name, for :attr:`InputError.columns`.
    """

    name: str
    values: np.ndarray
    levels: tuple[object, ...]
    codes: np.ndarray
    column: str | None = None

    @property
    def columns(self) -> list[str]:
        return [self.column] if self.column is not None else []

    @property
    def sizes(self) -> np.ndarray:
        return np.bincount(self.codes, minlength=len(self.levels))

    def indicators(self) -> np.ndarray:
        """``(n, g)`` matrix of 0/1: site ``i`` is in class ``j``."""
        out = np.zeros((self.codes.size, len(self.levels)))
        out[np.arange(self.codes.size), self.codes] = 1.0
        return out


def class_levels(series: pd.Series) -> list[object]:
    """The classes of a column: category order for a categorical, else sorted (as text when
    the labels do not compare)."""
    if isinstance(series.dtype, pd.CategoricalDtype):
        return list(series.cat.categories)
    unique = pd.unique(series.dropna())
    try:
        return sorted(unique)
    except TypeError:
        return sorted(unique, key=str)


def _empty_classes(series: pd.Series, name: str) -> None:
    if not isinstance(series.dtype, pd.CategoricalDtype):
        return
    present = set(series.dropna())
    empty = [c for c in series.cat.categories if c not in present]
    if empty:
        raise InputError(
            f"Class(es) {format_items(empty)} of {name} have no sites: a class with no sites "
            "cannot be compared. Remove the unused categories "
            f"(`.cat.remove_unused_categories()` on {name}) or add sites of those classes.",
            columns=[] if series.name is None else [str(series.name)])


def read_classes(groups: object, labels: pd.Index, *, name: str | None = None,
                 min_size: int = 2) -> Classes:
    """The class of every site of the distance matrix, checked.

    ``groups`` is a Series indexed by site label (matched by label), a one-column DataFrame,
    or a sequence in site order. Refused: a missing label (the sites named), a categorical
    class with no sites, a class with fewer than ``min_size`` sites (the class and its sites
    named), fewer than two classes.
    """
    if isinstance(groups, pd.DataFrame):
        if groups.shape[1] != 1:
            raise InputError(f"`groups` must be one column of class labels; got a table with "
                             f"{groups.shape[1]} columns ({format_items(groups.columns)}). Pass "
                             "one of them, e.g. design['zone'].")
        groups = groups.iloc[:, 0]
    column = (str(groups.name) if isinstance(groups, pd.Series) and groups.name is not None
              else None)
    if name is None:
        name = f"column {column!r}" if column is not None else "`groups`"
    if isinstance(groups, pd.Series):
        _empty_classes(groups, name)
        levels = class_levels(groups)
    else:
        levels = None
    try:
        values = align_strata(groups, labels, name="groups", sites_name="the distance matrix")
    except InputError as err:
        if "is missing for site" in str(err):
            raise InputError(
                f"{name[0].upper() + name[1:]} has no class for site(s) "
                f"{format_items(err.sites)}. Give every site a class, or drop those sites from "
                "the distance matrix and the classes (.subset()).", sites=err.sites,
                columns=[] if column is None else [column]) from None
        raise
    if values is None:
        raise InputError("`groups` is required: one class label per site.")
    if levels is None:
        levels = class_levels(pd.Series(values, dtype=object))
    lookup = {level: i for i, level in enumerate(levels)}
    codes = np.array([lookup[v] for v in values], dtype=np.intp)
    out = Classes(name=name, values=values, levels=tuple(levels), codes=codes, column=column)
    check_classes(out, labels, min_size=min_size)
    return out


def check_classes(classes: Classes, labels: pd.Index, *, min_size: int = 2) -> None:
    """Refuse fewer than two classes, or a class with fewer than ``min_size`` sites."""
    if len(classes.levels) < 2:
        raise InputError(
            f"{classes.name[0].upper() + classes.name[1:]} has one class only "
            f"({format_items(classes.levels)}) at all {len(labels)} sites: there is nothing to "
            "compare. Give at least two classes.",
            columns=classes.columns)
    small = [i for i, s in enumerate(classes.sizes) if s < min_size]
    if small:
        parts = [f"{str(classes.levels[i])!r} ({format_items(labels[classes.codes == i])})"
                 for i in small]
        sites = [s for i in small for s in labels[classes.codes == i]]
        raise InputError(
            f"Class(es) of {classes.name} with fewer than {min_size} sites: "
            + "; ".join(parts) + ". A class needs at least two sites to have a spread of its "
            "own to compare. Merge each with a similar class, or drop those sites (use "
            ".subset() on the distance matrix and the table).",
            sites=sites, columns=classes.columns)


def group_plan(labels: pd.Index, codes: np.ndarray, *, strata: np.ndarray | None,
               n_resamples: int, rng: object, interchangeable: bool) -> PermutationPlan:
    """The sites reassigned among their classes (within strata), exact when few enough."""
    return permutation_plan(len(labels), "relabel", groups=codes, strata=strata,
                            interchangeable=interchangeable, n_resamples=n_resamples, rng=rng,
                            batch_size=BATCH_SIZE, site_labels=labels)


def read_strata(strata: object, labels: pd.Index) -> np.ndarray | None:
    """Strata in site order (a Series matched by site label)."""
    return align_strata(strata, labels, name="strata", sites_name="the distance matrix")


def streams(rng: object, k: int) -> list[np.random.SeedSequence]:
    """``k`` independent seed sequences from ``rng``, the same ones for the same ``rng``.

    Children of the root sequence, built without advancing a sequence the caller passed.
    """
    root = seed_sequence(rng)  # type: ignore[arg-type]
    return [np.random.SeedSequence(root.entropy, spawn_key=(*root.spawn_key, i),
                                   pool_size=root.pool_size) for i in range(k)]


@contextlib.contextmanager
def numba_threads(n_jobs: int | None) -> Iterator[None]:
    """The compiled kernels in the block follow ``n_jobs`` (the engine's rule), then restore."""
    with _engine_threads(n_jobs):
        yield


def check_distances(d: object) -> DistanceMatrix:
    """The distance matrix of a group test, with at least 3 sites."""
    dm = as_distance_matrix(d, name="d")
    if dm.n < 3:
        raise InputError(f"A group comparison needs at least 3 sites; the distance matrix has "
                         f"{dm.n}.")
    return dm
