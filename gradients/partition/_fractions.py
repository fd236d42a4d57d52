"""Variation partitioning: how much of the turnover each table explains alone, and jointly."""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import RNGLike, check_n_resamples
from ..distance import DistanceMatrix
from ..distance._centred import gower_centred
from ..distance._matrix import as_distance_matrix
from ..permutation import seed_sequence
from ._design import (
    align_strata,
    check_n_jobs,
    check_rank,
    check_size,
    orthonormal,
    read_block,
    residualise,
)
from ._ftest import PseudoF, adjusted_r2, make_plan, run_tests, term_test

__all__ = ["VariationPartitionResult", "partition_variation"]


@dataclass(frozen=True, repr=False)
class VariationPartitionResult(ResultMixin):
    """Outcome of :func:`partition_variation`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per fraction: ``fraction`` (in words), ``kind`` (``'individual'``: the part
        explained by exactly these tables; ``'residual'``; ``'combined'``: a whole model of one
        or more tables), ``tables``, ``df`` (columns of a testable fraction), ``r2`` (raw R2 of
        combined models), ``r2_adjusted``, ``testable``, ``statistic`` (pseudo-F) and
        ``pvalue``. Individual fractions first, then the residual, then the combined models.
    names : tuple of str
        The tables, in the order given.
    n_sites, n_resamples : int
    total : float
        Total inertia (sum of squares) of the dissimilarities.
    exact : bool
    scheme : str
    notes : tuple of str
    """

    table: pd.DataFrame
    names: tuple[str, ...]
    n_sites: int
    n_resamples: int
    total: float
    exact: bool
    scheme: str
    notes: tuple[str, ...] = ()

    def fraction(self, *names: str) -> float:
        """Adjusted R2 of the individual fraction explained by exactly the tables ``names``
        (one name: that table alone, given all the others)."""
        unknown = [x for x in names if x not in self.names]
        if unknown or not names:
            raise InputError(f"Name one or more of the tables {format_items(self.names)}; got "
                             f"{format_items(names) if names else 'none'}.")
        key = " & ".join(x for x in self.names if x in names)
        rows = self.table[(self.table["kind"] == "individual") & (self.table["tables"] == key)]
        return float(rows["r2_adjusted"].iloc[0])


def _names(tables: Sequence[object], names: Sequence[str] | None) -> tuple[str, ...]:
    if names is None:
        out = []
        for i, t in enumerate(tables):
            out.append("space" if hasattr(t, "vectors") else f"table{i + 1}")
        if len(set(out)) < len(out):
            out = [f"table{i + 1}" for i in range(len(tables))]
        return tuple(out)
    if isinstance(names, str) or len(names) != len(tables):
        raise InputError(f"`names` must give one name per table ({len(tables)}); got "
                         f"{names!r}.")
    out = tuple(str(x) for x in names)
    if len(set(out)) < len(out) or any(not x or "&" in x or "+" in x for x in out):
        raise InputError(f"`names` must be distinct, non-empty and free of '&' and '+'; got "
                         f"{format_items(out)}.")
    return out


def partition_variation(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    *tables: pd.DataFrame | pd.Series | object,
    names: Sequence[str] | None = None,
    n_resamples: int = 999,
    rng: RNGLike = None,
    strata: object = None,
    n_jobs: int | None = -1,
) -> VariationPartitionResult:
    """Partition the variation of community dissimilarities among two to four tables.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarities.
    *tables : DataFrame, Series or SpatialEigenvectorsResult
        Two, three or four explanatory tables indexed by site label (environment, spatial
        eigenvectors, habitat factors, ...); factors are dummy-coded as in :func:`dbrda`. A
        :class:`SpatialEigenvectorsResult` stands for its vectors (keep only forward-selected
        ones, e.g. ``sev.vectors[list(sel.selected)]``).
    names : sequence of str, optional
        A name per table (default ``table1`` ..., or ``space`` for spatial eigenvectors).
    n_resamples : int, default 999
        Permutations for each testable fraction (0: fractions only).
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system. Every test uses the same rearrangements.
    strata, n_jobs
        As in :func:`dbrda`.

    Returns
    -------
    VariationPartitionResult

    Notes
    -----
    Every union of tables is fitted by dbRDA and its adjusted R2 (Ezekiel) computed
    (Peres-Neto et al. 2006 [3]_). With two tables X and W, after Borcard, Legendre & Drapeau
    (1992) [1]_: ``[a+b] = R2adj(X)``, ``[b+c] = R2adj(W)``, ``[a+b+c] = R2adj(X, W)``, and
    ``[a] = [a+b+c] - [b+c]`` (X alone), ``[c] = [a+b+c] - [a+b]`` (W alone), ``[b] = [a+b] +
    [b+c] - [a+b+c]`` (shared), ``[d] = 1 - [a+b+c]`` (unexplained). With three or four tables
    every individual fraction, the part explained by exactly one set of tables, follows from
    the unions by inclusion and exclusion (Legendre & Legendre 2012, sect. 10.3.5 [2]_).

    The combined models and each table alone given all the others are testable (partial
    dbRDA, residuals of the reduced model permuted); shared fractions are not models and have
    no test. Adjusted fractions can be negative: a small negative value is read as zero; a
    clearly negative shared fraction means the tables explain more together than the sum of
    what they explain apart (their effects partly cancel when taken one at a time) [2]_.

    References
    ----------
    .. [1] Borcard, D., Legendre, P. & Drapeau, P. (1992). Partialling out the spatial
       component of ecological variation. Ecology 73: 1045-1055.
    .. [2] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.
    .. [3] Peres-Neto, P. R., Legendre, P., Dray, S. & Borcard, D. (2006). Variation
       partitioning of species data matrices: estimation and comparison of fractions. Ecology
       87: 2614-2625.
    """
    dm = as_distance_matrix(d, name="d")
    if not 2 <= len(tables) <= 4:
        raise InputError(f"partition_variation() takes two, three or four explanatory tables; "
                         f"got {len(tables)}.")
    labels_ = _names(tables, names)
    n_resamples = check_n_resamples(n_resamples, allow_zero=True)
    n_jobs = check_n_jobs(n_jobs)
    seed = seed_sequence(rng)
    labels, n = dm.labels, dm.n
    blocks = [read_block(t, labels, name=nm) for t, nm in zip(tables, labels_, strict=True)]
    check_size(n, {f"`{b.name}`": b.width for b in blocks})
    check_rank(blocks)
    strata_v = align_strata(strata, labels)
    gm = gower_centred(dm)
    g, total = gm.matrix, gm.total
    k = len(blocks)
    full = (1 << k) - 1
    adj: dict[int, float] = {0: 0.0}
    raw: dict[int, float] = {0: 0.0}
    tests: list[tuple[int, str, PseudoF]] = []  # (subset mask, kind, test)
    for mask in range(1, full + 1):
        members = [i for i in range(k) if mask >> i & 1]
        q = orthonormal(np.column_stack([blocks[i].values for i in members]))
        ss = float(np.sum((g @ q) * q))
        raw[mask], adj[mask] = ss / total, adjusted_r2(ss / total, n, q.shape[1])
        tests.append((mask, "combined", term_test(_join(labels_, members, " + "), g,
                                                  np.empty((n, 0)), q)))
    for i in range(k):
        others = [j for j in range(k) if j != i]
        reduced = orthonormal(np.column_stack([blocks[j].values for j in others]))
        tested = residualise(blocks[i].values, reduced)
        tests.append((1 << i, "individual",
                      term_test(f"{labels_[i]} alone", g, reduced, tested)))

    def left(mask: int) -> float:  # variation in the tables of `mask` and in no other
        return adj[full] - adj[full & ~mask]

    atoms: dict[int, float] = {}
    for mask in range(1, full + 1):
        subs = [s for s in range(mask + 1) if s & mask == s]
        atoms[mask] = sum((-1) ** (bin(mask).count("1") - bin(s).count("1"))
                          * (left(s) if s else 0.0) for s in subs)

    rows = []
    for size in range(1, k + 1):
        for members in itertools.combinations(range(k), size):
            mask = sum(1 << i for i in members)
            rows.append({"fraction": (f"{labels_[members[0]]} only" if size == 1 else
                                      "shared by " + _join(labels_, members, " & ")),
                         "kind": "individual", "tables": _join(labels_, members, " & "),
                         "r2_adjusted": atoms[mask], "mask": mask, "testable": size == 1})
    rows.append({"fraction": "unexplained", "kind": "residual", "tables": "",
                 "r2_adjusted": 1.0 - adj[full], "mask": 0, "testable": False})
    for size in range(1, k + 1):
        for members in itertools.combinations(range(k), size):
            mask = sum(1 << i for i in members)
            rows.append({"fraction": _join(labels_, members, " + ") + (" (whole table)" if
                                                                       size == 1 else ""),
                         "kind": "combined", "tables": _join(labels_, members, " + "),
                         "r2": raw[mask], "r2_adjusted": adj[mask], "mask": mask,
                         "testable": True})
    table = pd.DataFrame(rows)
    where = {(mask, kind): t for mask, kind, t in tests}
    keyed = [where.get((r["mask"], r["kind"])) for r in rows]
    table["df"] = [t.df if t is not None else np.nan for t in keyed]
    table["statistic"] = [t.statistic if t is not None else np.nan for t in keyed]
    table["pvalue"] = np.nan
    exact, scheme, used = False, "none", 0
    notes = _notes(table, gm.spectrum_notes())
    if n_resamples:
        plan = make_plan(labels, strata=strata_v, n_resamples=n_resamples, rng=seed)
        res = run_tests([t for _, _, t in tests], plan, n_jobs=n_jobs,
                        task="variation partitioning")
        pv = dict(zip([(m, kd) for m, kd, _ in tests], np.asarray(res.pvalue), strict=True))
        table["pvalue"] = [pv.get((r["mask"], r["kind"]), np.nan) for r in rows]
        exact, scheme, used = res.exact, res.scheme, int(np.max(res.n_resamples))
        notes.insert(1, f"Testable fractions tested by {'all' if exact else used} "
                        f"permutations ({plan.description}); a table alone is tested given "
                        "all the others, permuting the residuals of the model of the others.")
    else:
        notes.append("No permutation test was run (n_resamples=0): p-values are missing.")
    table = table[["fraction", "kind", "tables", "df", "r2", "r2_adjusted", "testable",
                   "statistic", "pvalue"]]
    table = table.astype({"df": "Int64", "testable": bool})
    return VariationPartitionResult(table=table, names=labels_, n_sites=n, n_resamples=used,
                                    total=float(total), exact=exact, scheme=scheme,
                                    notes=tuple(notes))


def _join(names: Sequence[str], members: Sequence[int], sep: str) -> str:
    return sep.join(names[i] for i in members)


def _notes(table: pd.DataFrame, spectrum: tuple[str, ...]) -> list[str]:
    notes = [
        "Fractions are adjusted R2 (Ezekiel) of distance-based redundancy models, combined as "
        "in Borcard, Legendre & Drapeau (1992) and Legendre & Legendre (2012); they are "
        "estimates, and only the whole-table models and each table alone (given the others) "
        "can be tested.",
        "A shared fraction is variation the tables explain together because they are "
        "correlated with each other (for instance an environment that is itself spatially "
        "structured): it cannot be attributed to either table.",
        "When a table holds forward-selected variables (spatial eigenvectors or environmental "
        "variables chosen with forward_select), the tests of its fractions are conditional on "
        "that selection: the double stopping criterion limits, but does not remove, the "
        "optimism.",
    ]
    ind = table[table["kind"] == "individual"]
    negative = ind[ind["r2_adjusted"] < 0]
    if len(negative):
        parts = [f"{r.fraction} ({r.r2_adjusted:.3g})" for r in negative.itertuples()]
        notes.append("Negative fraction(s): " + "; ".join(parts) + ". An adjusted fraction "
                     "slightly below zero is read as zero (no variation explained); a clearly "
                     "negative shared fraction means the tables explain more together than "
                     "the sum of what they explain apart, their effects partly cancelling "
                     "when each is taken alone (Legendre & Legendre 2012).")
    notes.extend(spectrum)
    return notes
