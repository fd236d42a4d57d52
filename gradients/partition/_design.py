"""Explanatory tables for the partition stage: numeric columns and dummy-coded factors, checked.

Every table (predictors, covariables, candidates, the tables of a variation partitioning) is read
once into a :class:`Block`: its design columns in site order with their names, and which column
of the user's table each came from. The checks that make a linear model impossible (too few
sites, a constant column, collinear columns) are refused here with messages that name the
columns and the fix, before any matrix is built.
"""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.linalg

from .._errors import InputError, format_items
from .._validation import check_labels_match, check_unambiguous_series

__all__ = [
    "Block",
    "align_strata",
    "check_n_jobs",
    "check_rank",
    "check_size",
    "combine",
    "orthonormal",
    "read_block",
    "residualise",
]

#: A column whose spread is below this fraction of its largest magnitude is constant.
CONSTANT_RTOL = 1e-12
#: A design column explained to within this relative residual by the others is collinear.
COLLINEAR_RTOL = 1e-8


@dataclass(frozen=True)
class Block:
    """One explanatory table as design columns.

    Attributes
    ----------
    name : str
        How the table is called in messages (``"predictors"``, ``"space"``, ...).
    values : ndarray, shape (n, m)
        Design columns in site order: numeric columns as given, each factor as ``levels - 1``
        indicator columns (the first level is the reference).
    columns : tuple of str
        Design column names (``"depth"``, ``"habitat=riffle"``).
    terms : tuple of str
        The user's column names, in order.
    term_index : tuple of int
        For each design column, the position of its term in ``terms``.
    """

    name: str
    values: np.ndarray
    columns: tuple[str, ...]
    terms: tuple[str, ...]
    term_index: tuple[int, ...]

    @property
    def width(self) -> int:
        return int(self.values.shape[1])

    def term_columns(self, term: int) -> np.ndarray:
        """Positions of the design columns of term number ``term``."""
        return np.flatnonzero(np.asarray(self.term_index) == term)

    def take_terms(self, terms: Sequence[int], name: str | None = None) -> Block:
        """The block restricted to some of its terms, in the order given."""
        cols = np.concatenate([self.term_columns(t) for t in terms]) if len(terms) else \
            np.empty(0, dtype=np.intp)
        index = [list(terms).index(self.term_index[c]) for c in cols]
        return Block(name or self.name, self.values[:, cols],
                     tuple(self.columns[c] for c in cols),
                     tuple(self.terms[t] for t in terms), tuple(index))


def _as_frame(table: object, name: str) -> pd.DataFrame:
    if hasattr(table, "vectors") and isinstance(table.vectors, pd.DataFrame):
        table = table.vectors  # a spatial-eigenvector result stands for its vectors
    if isinstance(table, pd.Series):
        table = table.to_frame(name=table.name if table.name is not None else name)
    if not isinstance(table, pd.DataFrame):
        raise InputError(f"`{name}` must be a pandas DataFrame (or Series) indexed by site "
                         f"label; got {type(table).__name__}.")
    if table.shape[1] == 0:
        raise InputError(f"`{name}` has no columns.")
    if table.columns.has_duplicates:
        dup = table.columns[table.columns.duplicated()].unique()
        raise InputError(f"Column names in `{name}` are repeated: {format_items(dup)}; give "
                         "each column its own name.", columns=list(dup))
    if table.index.has_duplicates:
        dup = table.index[table.index.duplicated()].unique()
        raise InputError(f"Site labels in `{name}` are repeated: {format_items(dup)}.",
                         sites=list(dup))
    return table


def read_block(table: object, labels: pd.Index, *, name: str) -> Block:
    """A user table as design columns in the order of ``labels``, after checking its cells.

    Numeric columns are used as they are; any other column (text, categorical, boolean) is a
    factor, coded as indicators of every level but the first (levels in category order, else
    sorted). Missing values, infinite values and constant columns are refused.
    """
    frame = _as_frame(table, name)
    check_labels_match(labels, frame.index, left_name="the distance matrix",
                       right_name=f"`{name}`",
                       fix=f"Give `{name}` one row for every site of the distance matrix "
                           "(use .subset() on the matrix to keep only the shared sites).")
    frame = frame.loc[labels]
    isna = frame.isna().to_numpy()
    if isna.any():
        parts = [f"{frame.columns[j]!r} at site(s) {format_items(labels[isna[:, j]])}"
                 for j in np.flatnonzero(isna.any(axis=0))]
        raise InputError(f"`{name}` has missing values: " + "; ".join(parts) + ". Fill them, "
                         "or drop those sites from the table and the distance matrix.",
                         columns=[frame.columns[j] for j in np.flatnonzero(isna.any(axis=0))],
                         sites=list(labels[isna.any(axis=1)]))
    values: list[np.ndarray] = []
    columns: list[str] = []
    index: list[int] = []
    constant: list[str] = []
    for t, col in enumerate(frame.columns):
        series = frame[col]
        if pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
            x = series.to_numpy(dtype=np.float64)
            bad = ~np.isfinite(x)
            if bad.any():
                raise InputError(f"`{name}` column {str(col)!r} is infinite at site(s) "
                                 f"{format_items(labels[bad])}.", columns=[col],
                                 sites=list(labels[bad]))
            if np.ptp(x) <= CONSTANT_RTOL * max(float(np.max(np.abs(x))), 1e-300):
                constant.append(str(col))
                continue
            values.append(x)
            columns.append(str(col))
            index.append(t)
            continue
        levels = _levels(series)
        if len(levels) < 2:
            constant.append(str(col))
            continue
        codes = pd.Categorical(series, categories=levels).codes
        for lv in range(1, len(levels)):
            values.append((codes == lv).astype(np.float64))
            columns.append(f"{col}={levels[lv]}")
            index.append(t)
    if constant:
        raise InputError(f"`{name}` column(s) {format_items(constant)} have the same value at "
                         "every site: they cannot explain any difference between sites. Drop "
                         "them.", columns=constant)
    terms = tuple(str(c) for c in frame.columns)
    return Block(name, np.column_stack(values), tuple(columns), terms, tuple(index))


def _levels(series: pd.Series) -> list[object]:
    if isinstance(series.dtype, pd.CategoricalDtype):
        present = set(series.dropna())
        return [c for c in series.cat.categories if c in present]
    unique = pd.unique(series.dropna())
    try:
        return sorted(unique)
    except TypeError:
        return sorted(unique, key=str)


def combine(blocks: Sequence[Block], name: str = "model") -> Block:
    """Several blocks side by side (terms keep their names; their order is the blocks')."""
    blocks = [b for b in blocks if b is not None]
    if not blocks:
        return Block(name, np.empty((0, 0)), (), (), ())
    values = np.column_stack([b.values for b in blocks])
    offset = 0
    index: list[int] = []
    for b in blocks:
        index.extend(i + offset for i in b.term_index)
        offset += len(b.terms)
    return Block(name, values, tuple(c for b in blocks for c in b.columns),
                 tuple(t for b in blocks for t in b.terms), tuple(index))


def check_size(n: int, widths: dict[str, int]) -> None:
    """Refuse a model with no residual degree of freedom: ``n >= columns + 2``."""
    total = sum(widths.values())
    if n < total + 2:
        what = " and ".join(f"{w} {k} column(s)" for k, w in widths.items() if w)
        raise InputError(
            f"{n} sites cannot fit {what} with an intercept and leave any residual variation: "
            f"at least {total + 2} sites are needed (columns + 2; a factor counts one column "
            "per level but the first). Use fewer variables (forward_select() picks a subset), "
            "merge rare factor levels, or add sites.")


def check_rank(blocks: Sequence[Block]) -> None:
    """Refuse design columns that are linear combinations of others, naming them all.

    Columns are centred (the intercept is always in the model) and scaled to unit length; a
    pivoted QR finds the rank and the columns left over, and a least-squares fit of each of
    those on the independent ones names the columns it depends on.
    """
    blocks = [b for b in blocks if b is not None and b.width]
    if not blocks:
        return
    x = np.column_stack([b.values for b in blocks])
    owner = [b.name for b in blocks for _ in b.columns]
    names = [c for b in blocks for c in b.columns]
    xc = x - x.mean(axis=0)
    xc = xc / np.sqrt(np.sum(xc * xc, axis=0))
    _, r, piv = scipy.linalg.qr(xc, mode="economic", pivoting=True)
    diag = np.abs(np.diag(r))
    rank = int(np.sum(diag > COLLINEAR_RTOL * max(diag[0], 1e-300))) if diag.size else 0
    if rank == x.shape[1]:
        return
    independent = piv[:rank]
    several = len(blocks) > 1
    label = (lambda j: f"{names[j]!r} ({owner[j]})") if several else (lambda j: repr(names[j]))
    parts = []
    for j in piv[rank:]:
        coef = np.linalg.lstsq(xc[:, independent], xc[:, j], rcond=None)[0]
        used = [int(independent[i]) for i in np.flatnonzero(np.abs(coef) > 1e-6)]
        if used:
            parts.append(f"{label(j)} is a linear combination of "
                         f"{_and([label(i) for i in used])}")
        else:  # pragma: no cover - a centred non-constant column has some direction
            parts.append(f"{label(j)} adds no direction of its own")
    where = "the tables" if several else f"`{blocks[0].name}`"
    raise InputError(
        f"Collinear columns in {where}: " + "; ".join(parts) + ". A linear model cannot "
        "separate them: drop one of each group (or combine them into one variable). Parts of a "
        "composition that sum to a constant (sand, silt and clay; drop one part), a factor "
        "whose levels match another factor's, or a variable given in two tables do this.",
        columns=[names[j] for j in piv[rank:]])


def _and(items: list[str]) -> str:
    """``'a'``, ``'a' and 'b'``, ``'a', 'b' and 'c'``."""
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def orthonormal(x: np.ndarray) -> np.ndarray:
    """Orthonormal basis of the centred columns of ``x`` (full column rank, checked before)."""
    if x.size == 0:
        return np.empty((x.shape[0], 0))
    xc = x - x.mean(axis=0)
    q, _ = np.linalg.qr(xc)
    return np.ascontiguousarray(q)


def residualise(x: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """Orthonormal basis of the centred columns of ``x`` with ``basis``'s span removed."""
    if x.size == 0:
        return np.empty((x.shape[0], 0))
    xc = x - x.mean(axis=0)
    if basis.shape[1]:
        xc = xc - basis @ (basis.T @ xc)
        xc = xc - basis @ (basis.T @ xc)  # a second pass for accuracy
    q, _ = np.linalg.qr(xc)
    return np.ascontiguousarray(q)


# --------------------------------------------------------------------------- arguments
def check_n_jobs(n_jobs: object) -> int:
    """``n_jobs`` as an int: a positive number of workers, or -1 for all cores."""
    if not isinstance(n_jobs, numbers.Integral) or isinstance(n_jobs, bool) or n_jobs == 0 \
            or n_jobs < -1:
        raise InputError(f"`n_jobs` must be a positive integer or -1 (all cores); got {n_jobs!r}.")
    return int(n_jobs)


def align_strata(strata: object, labels: pd.Index) -> np.ndarray | None:
    """Strata in site order: a Series is matched by site label, other sequences by position."""
    if strata is None:
        return None
    if isinstance(strata, pd.Series):
        check_unambiguous_series(strata, labels, "strata")
        default = isinstance(strata.index, pd.RangeIndex) and set(strata.index) != set(labels)
        if not default:
            check_labels_match(labels, strata.index, left_name="the distance matrix",
                               right_name="`strata`",
                               fix="Give one stratum label for every site, indexed by site.")
            return strata.loc[labels].to_numpy(dtype=object)
        strata = strata.to_numpy(dtype=object)
    values = np.asarray(list(strata) if not isinstance(strata, np.ndarray) else strata,
                        dtype=object)
    if values.ndim != 1 or len(values) != len(labels):
        raise InputError(f"`strata` must give one label per site: {len(values)} labels for "
                         f"{len(labels)} sites.")
    return values
