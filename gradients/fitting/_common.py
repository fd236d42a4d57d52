"""Pieces shared by the three fits: scores and tables, building plans, running tests, adjusting."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import (
    align_strata,
    check_choice,
    check_labels_match,
    check_unambiguous_series,
    seed_sequence,
)
from ..ordination import as_scores
from ..ordination._scores import AxesLike
from ..permutation import ADJUST_METHODS, permutation_plan, permutation_test
from ..permutation import adjust_pvalues as _adjust

__all__ = [
    "ADJUST_METHODS",
    "DEFAULT_AXES",
    "MISSING_RULES",
    "AxesLike",
    "Design",
    "TestOutcome",
    "adjust_pvalues",
    "align_table",
    "check_weights",
    "fit_scores",
    "missing_masks",
    "run_by_pattern",
]

MISSING_RULES = ("error", "complete")
#: The vector and factor fits use the first two axes unless told otherwise.
DEFAULT_AXES = 2


def fit_scores(scores: object, axes: AxesLike) -> pd.DataFrame:
    """The site scores a fit works on: :func:`~gradients.ordination.as_scores` of the chosen axes.

    With ``axes=None`` the first ``DEFAULT_AXES`` columns (or all, when there are fewer).
    """
    frame = as_scores(scores, axes=axes)
    return frame.iloc[:, :DEFAULT_AXES] if axes is None else frame


def align_table(table: object, sites: pd.Index, *, name: str) -> pd.DataFrame:
    """``table`` (DataFrame or named Series) reordered to ``sites``, after a label check."""
    if isinstance(table, pd.Series):
        table = table.to_frame(name=table.name if table.name is not None else "value")
    if not isinstance(table, pd.DataFrame):
        raise InputError(f"`{name}` must be a pandas DataFrame (or Series) indexed by site "
                         f"label; got {type(table).__name__}.")
    if table.index.has_duplicates:
        dup = table.index[table.index.duplicated()].unique()
        raise InputError(f"Site labels in `{name}` are repeated: {format_items(dup)}.",
                         sites=list(dup))
    if table.shape[1] == 0:
        raise InputError(f"`{name}` has no columns to fit.")
    check_labels_match(sites, table.index, left_name="`scores`", right_name=f"`{name}`",
                       fix=f"Give `{name}` one row for every site of the ordination (drop the "
                           "extra sites, or subset the scores).")
    return table.loc[sites]


def check_weights(weights: object, sites: pd.Index) -> np.ndarray | None:
    """Site weights as a positive float array in site order (None stays None)."""
    if weights is None:
        return None
    if isinstance(weights, pd.Series):
        check_unambiguous_series(weights, sites, "weights")
        check_labels_match(sites, weights.index, left_name="`scores`", right_name="`weights`",
                           fix="Give one weight per site, indexed by site label.")
        w = weights.loc[sites].to_numpy(dtype=np.float64)
    else:
        w = np.asarray(weights, dtype=np.float64)
        if w.shape != (len(sites),):
            raise InputError(f"`weights` must give one weight per site: got shape {w.shape} "
                             f"for {len(sites)} sites.")
    bad = ~np.isfinite(w) | (w <= 0)
    if bad.any():
        raise InputError(f"`weights` must be positive and finite; not so for site(s) "
                         f"{format_items(sites[bad])}.", sites=list(sites[bad]))
    return w


@dataclass(frozen=True)
class Design:
    """The restricted-permutation design, kept in site order so it can be subset."""

    n_sites: int
    scheme: str | None
    strata: np.ndarray | None
    blocks: np.ndarray | None
    shape: tuple[int, int] | None
    sites: pd.Index | None = None

    @classmethod
    def build(cls, sites: pd.Index, *, scheme: str | None, strata: object, blocks: object,
              shape: tuple[int, int] | None) -> Design:
        return cls(n_sites=len(sites), scheme=scheme,
                   strata=align_strata(strata, sites, name="strata", sites_name="`scores`"),
                   blocks=align_strata(blocks, sites, name="blocks", sites_name="`scores`"),
                   shape=tuple(shape) if shape is not None else None,  # type: ignore[arg-type]
                   sites=sites)

    def gap_notes(self, masks: np.ndarray) -> list[str]:
        """Words for a cyclic design run over the sites with values only."""
        if self.scheme == "cyclic" and not masks.all():
            return ["Cyclic shifts run over the sites with values only: where a column has "
                    "gaps, its missing sites are skipped and their neighbours become adjacent "
                    "in the shifted sequence."]
        return []

    def plan(self, keep: np.ndarray | None, *, n_resamples: int, rng: object,
             batch_size: int | None = None):
        """The engine's plan on all sites, or on the sites ``keep`` (complete cases)."""
        n, strata, blocks, sites = self.n_sites, self.strata, self.blocks, self.sites
        if keep is not None and not keep.all():
            if self.scheme in ("toroidal", "blocks"):
                raise InputError(f"scheme={self.scheme!r} needs every site: it cannot be used "
                                 "with missing='complete' when a column has missing values.")
            n = int(keep.sum())
            strata = strata[keep] if strata is not None else None
            blocks = blocks[keep] if blocks is not None else None
            sites = sites[keep] if sites is not None else None
        scheme = self.scheme if self.scheme is not None else (
            "strata" if strata is not None else "free")
        return permutation_plan(n, scheme, strata=strata, shape=self.shape, blocks=blocks,
                                n_resamples=n_resamples, rng=rng, batch_size=batch_size,
                                site_labels=sites)


@dataclass(frozen=True)
class TestOutcome:
    """Per-column results of one or several engine runs."""

    statistic: np.ndarray
    pvalue: np.ndarray
    null: np.ndarray
    n_resamples: np.ndarray
    exact: bool
    scheme: str
    description: str


Factory = Callable[[np.ndarray, np.ndarray], Callable[[np.ndarray], np.ndarray]]


def run_by_pattern(
    factory: Factory,
    masks: np.ndarray,
    design: Design,
    *,
    n_resamples: int,
    rng: object,
    alternative: str,
    n_jobs: int,
    batch_size: int | None = None,
) -> TestOutcome:
    """Test every column, grouping columns that share the same set of usable sites.

    ``masks`` is a boolean (n_sites, m) array of usable sites per column; ``factory(keep,
    columns)`` returns the batched statistic for those columns on the sites ``keep``. Columns
    with the same sites are tested together in one engine run. Columns measured at every site
    use the root seed itself; a group with gaps gets a random stream of its own, keyed by the
    labels of its sites, so that a column's p-value does not depend on the order of the
    columns or on which other columns are in the call. Null distributions of different lengths
    (possible only with exact enumeration on different subsets) are padded with NaN.
    """
    m = masks.shape[1]
    patterns: dict[bytes, list[int]] = {}
    for j in range(m):
        patterns.setdefault(masks[:, j].tobytes(), []).append(j)
    groups = list(patterns.values())
    if len(groups) == 1 and masks[:, groups[0][0]].all():
        seeds: Sequence[object] = [rng]
    else:
        root = seed_sequence(rng)
        seeds = [root if masks[:, cols[0]].all() else
                 _subset_stream(root, design.sites, masks[:, cols[0]]) for cols in groups]
    stat = np.empty(m)
    pval = np.empty(m)
    used = np.empty(m, dtype=np.int64)
    nulls: list[tuple[list[int], np.ndarray]] = []
    exact_all = True
    scheme = description = ""
    for cols, seed in zip(groups, seeds, strict=True):
        keep = masks[:, cols[0]]
        plan = design.plan(keep, n_resamples=n_resamples, rng=seed, batch_size=batch_size)
        res = permutation_test(factory(keep, np.asarray(cols)), plan, alternative=alternative,
                               n_jobs=n_jobs, backend="threading", task="fitting permutations")
        stat[cols] = np.atleast_1d(res.statistic)
        pval[cols] = np.atleast_1d(res.pvalue)
        used[cols] = np.atleast_1d(res.n_resamples)
        null = res.null_distribution
        nulls.append((cols, null.reshape(null.shape[0], -1)))
        exact_all &= res.exact
        scheme, description = res.scheme, res.description
    if len(nulls) == 1:
        null_all = nulls[0][1]  # one group holds every column, in order
    else:
        length = max(v.shape[0] for _, v in nulls)
        null_all = np.full((length, m), np.nan)
        for cols, v in nulls:
            null_all[: v.shape[0], cols] = v
    return TestOutcome(stat, pval, null_all, used, exact_all, scheme, description)


#: First spawn-key word of the streams of site subsets (far beyond any batch number).
_SUBSET_STREAM = 0x73756273


def _subset_stream(root: np.random.SeedSequence, sites: pd.Index | None,
                   keep: np.ndarray) -> np.random.SeedSequence:
    """A random stream for the sites ``keep``, keyed by their labels (in sorted order)."""
    import hashlib

    labels = sorted(map(str, sites[keep])) if sites is not None else \
        [str(i) for i in np.flatnonzero(keep)]
    digest = hashlib.sha256("\x1f".join(labels).encode("utf-8")).digest()
    words = [int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4)]
    return np.random.SeedSequence(root.entropy, spawn_key=(*root.spawn_key, _SUBSET_STREAM,
                                                          *words), pool_size=root.pool_size)


def adjust_pvalues(pvalues: np.ndarray, adjust: str | None) -> np.ndarray:
    """Multiplicity adjustment across the tested columns (NaN p-values stay NaN)."""
    if adjust is not None:
        check_choice("adjust", adjust, ADJUST_METHODS)
    return _adjust(pvalues, adjust)


def missing_masks(values: pd.DataFrame, missing: str, *, what: str) -> np.ndarray:
    """Usable-site mask per column; with ``missing='error'`` refuse any gap, naming it."""
    check_choice("missing", missing, MISSING_RULES)
    isna = values.isna().to_numpy()
    if missing == "error" and isna.any():
        parts = []
        for j in np.flatnonzero(isna.any(axis=0)):
            sites = values.index[isna[:, j]]
            parts.append(f"{values.columns[j]!r} at site(s) {format_items(sites)}")
        raise InputError(f"{what} values are missing: " + "; ".join(parts) + ". Fill them, drop "
                         "those sites, or pass missing='complete' to use the complete cases of "
                         "each column (n then varies by column).",
                         columns=[values.columns[j] for j in np.flatnonzero(isna.any(axis=0))])
    return ~isna
