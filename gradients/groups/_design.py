"""The design of a group comparison: a table of site classes and the terms to test.

Terms are plain strings naming columns of the design table:

``"zone"``
    a main effect: a factor (text, categorical or boolean column) or a continuous covariate
    (a numeric column);
``"zone:period"``
    an interaction: the products of the terms' contrasts (or a factor's contrasts times a
    covariate, for slopes that differ among classes);
``"zone*period"``
    shorthand for ``"zone", "period", "zone:period"`` (all main effects and interactions of the
    factors named, lower orders first);
``"site(zone)"``
    a nested term: the classes of ``site`` within each class of ``zone`` (``site`` labels may
    repeat across zones: ``site`` 1 of one zone and ``site`` 1 of another are different units).
    List every enclosing factor inside the parentheses, joined by ``:``, as in
    ``"plot(zone:site)"``. Columns named in a nested term are always read as classes, even when
    they hold numbers.

The terms are tested in the order given (this matters for sequential sums of squares); list
main effects before the interactions that contain them. By default every column of the table
is a main effect, in column order.
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import check_labels_match
from ._classes import Classes, check_classes, class_levels

__all__ = ["Design", "Term", "parse_terms", "read_design"]

_NAME = re.compile(r"^[^:()*]+$")
#: Singular values below this fraction of the columns' scale are directions the design lacks.
RANK_RTOL = 1e-9


@dataclass(frozen=True)
class Term:
    """One term of the design.

    Attributes
    ----------
    factors : tuple of str
        The columns crossed in the term (one for a main effect).
    within : tuple of str
        For a nested term, the columns it is nested in; empty otherwise.
    """

    factors: tuple[str, ...]
    within: tuple[str, ...] = ()

    @property
    def name(self) -> str:
        text = ":".join(self.factors)
        return f"{text}({':'.join(self.within)})" if self.within else text

    @property
    def columns(self) -> tuple[str, ...]:
        """Every column the term uses."""
        return (*self.factors, *self.within)

    @property
    def nested(self) -> bool:
        return bool(self.within)

    def key(self) -> tuple[frozenset[str], frozenset[str]]:
        return frozenset(self.factors), frozenset(self.within)


def _names(text: str, term: str) -> tuple[str, ...]:
    parts = tuple(p.strip() for p in text.split(":"))
    if not parts or any(not p or not _NAME.match(p) for p in parts):
        raise InputError(
            f"Cannot read the term {term!r}. Write a column name ('zone'), an interaction "
            "('zone:period'), all effects of several factors ('zone*period') or a nested term "
            "('site(zone)'); column names may not contain ':', '*' or parentheses.")
    if len(set(parts)) != len(parts):
        raise InputError(f"The term {term!r} names a column twice.")
    return parts


def parse_terms(terms: str | Sequence[str], columns: Sequence[object]) -> list[Term]:
    """Read the term strings into :class:`Term` objects, expanding ``*`` and checking names."""
    if isinstance(terms, str):
        terms = [terms]
    if not isinstance(terms, Sequence) or not terms:
        raise InputError("`terms` must be a list of term strings such as ['zone', 'period', "
                         f"'zone:period']; got {terms!r}.")
    out: list[Term] = []
    for raw in terms:
        if not isinstance(raw, str):
            raise InputError(f"Every term must be a string; got {raw!r} in `terms`.")
        text = raw.strip()
        nested = re.fullmatch(r"(.+?)\((.+)\)", text)
        if nested:
            if "*" in text:
                raise InputError(f"The nested term {raw!r} cannot also use '*'; list the "
                                 "terms one by one.")
            out.append(Term(_names(nested.group(1), raw), _names(nested.group(2), raw)))
        elif "*" in text:
            parts = tuple(p.strip() for p in text.split("*"))
            for p in parts:
                _names(p, raw)
            if len(set(parts)) != len(parts):
                raise InputError(f"The term {raw!r} names a column twice.")
            for size in range(1, len(parts) + 1):
                out.extend(Term(combo) for combo in itertools.combinations(parts, size))
        elif "(" in text or ")" in text:
            _names("(", raw)  # raises: unbalanced or misplaced parentheses
        else:
            out.append(Term(_names(text, raw)))
    seen: dict[tuple[frozenset[str], frozenset[str]], Term] = {}
    for t in out:
        seen.setdefault(t.key(), t)
    unique = list(seen.values())
    known = {str(c) for c in columns}
    for t in unique:
        missing = [c for c in t.columns if c not in known]
        if missing:
            raise InputError(
                f"The term {t.name!r} names column(s) {format_items(missing)}, which the design "
                f"table does not have; its columns are {format_items(sorted(known))}.",
                columns=missing)
        overlap = set(t.factors) & set(t.within)
        if overlap:
            raise InputError(f"The nested term {t.name!r} names {format_items(overlap)} both "
                             "inside and outside the parentheses.")
    return unique


@dataclass(frozen=True)
class Design:
    """A checked design: coded columns of every term, in site order.

    Attributes
    ----------
    labels : Index
        Site labels, in the order of the distance matrix.
    terms : tuple of Term
    coded : tuple of ndarray
        Design columns of each term (sum-to-zero contrasts for factors, centred values for
        covariates), uncentred.
    factors : dict
        Column name -> :class:`Classes` for every column read as classes.
    covariates : tuple of str
    """

    labels: pd.Index
    terms: tuple[Term, ...]
    coded: tuple[np.ndarray, ...]
    factors: dict[str, Classes] = field(default_factory=dict)
    covariates: tuple[str, ...] = ()

    @property
    def n(self) -> int:
        return len(self.labels)

    def combination(self, columns: Sequence[str]) -> np.ndarray:
        """Integer code of every site's combination of the classes of ``columns``."""
        if not columns:
            return np.zeros(self.n, dtype=np.intp)
        stacked = np.column_stack([self.factors[c].codes for c in columns])
        _, codes = np.unique(stacked, axis=0, return_inverse=True)
        return codes.reshape(-1).astype(np.intp)

    def cells(self) -> np.ndarray | None:
        """Codes of the combinations of every factor of the design; None with a covariate.

        A statistic built only from the factors' columns is the same for every order that
        keeps the sites of each cell together, so a test can enumerate reassignments of cells.
        """
        if self.covariates:
            return None
        return self.combination(list(self.factors))

    def factor_terms(self) -> list[Term]:
        """Main effects of single factors (crossed, not nested)."""
        return [t for t in self.terms
                if len(t.factors) == 1 and not t.nested and t.factors[0] in self.factors]


def _frame(design: object, labels: pd.Index) -> pd.DataFrame:
    if isinstance(design, pd.Series):
        design = design.to_frame(name=design.name if design.name is not None else "group")
    if not isinstance(design, pd.DataFrame):
        raise InputError("`design` must be a pandas DataFrame of site classes (or a Series), "
                         f"indexed by site label; got {type(design).__name__}.")
    if design.shape[1] == 0:
        raise InputError("`design` has no columns.")
    if design.columns.has_duplicates:
        dup = design.columns[design.columns.duplicated()].unique()
        raise InputError(f"Column names in `design` are repeated: {format_items(dup)}; give "
                         "each column its own name.", columns=list(dup))
    if design.index.has_duplicates:
        dup = design.index[design.index.duplicated()].unique()
        raise InputError(f"Site labels in `design` are repeated: {format_items(dup)}.",
                         sites=list(dup))
    check_labels_match(labels, design.index, left_name="the distance matrix",
                       right_name="`design`",
                       fix="Give `design` one row for every site of the distance matrix, "
                           "indexed by site label (use .subset() on the matrix to keep only "
                           "the shared sites).")
    frame = design.loc[labels].copy()
    frame.columns = [str(c) for c in frame.columns]
    return frame


def _check_missing(frame: pd.DataFrame, used: list[str]) -> None:
    isna = frame[used].isna().to_numpy()
    if not isna.any():
        return
    bad = [used[j] for j in np.flatnonzero(isna.any(axis=0))]
    parts = [f"{c!r} at site(s) {format_items(frame.index[frame[c].isna().to_numpy()])}"
             for c in bad]
    raise InputError("The design has missing values: " + "; ".join(parts) + ". Give every "
                     "site a class (or a value), or drop those sites from the design and the "
                     "distance matrix (.subset()).", columns=bad,
                     sites=list(frame.index[isna.any(axis=1)]))


def _read_factor(series: pd.Series, name: str, labels: pd.Index) -> Classes:
    if isinstance(series.dtype, pd.CategoricalDtype):
        empty = [c for c in series.cat.categories if c not in set(series)]
        if empty:
            raise InputError(
                f"Class(es) {format_items(empty)} of design column {name!r} have no sites: a "
                "class with no sites cannot be compared or estimated. Remove the unused "
                f"categories (design[{name!r}].cat.remove_unused_categories()) or add sites of "
                "those classes.", columns=[name])
    levels = class_levels(series)
    lookup = {v: i for i, v in enumerate(levels)}
    codes = np.array([lookup[v] for v in series.to_numpy()], dtype=np.intp)
    classes = Classes(f"design column {name!r}", series.to_numpy(dtype=object), tuple(levels),
                      codes, column=name)
    if len(levels) < 2:
        check_classes(classes, labels)  # raises: one class only
    return classes


def _contrasts(codes: np.ndarray, k: int) -> np.ndarray:
    """Sum-to-zero contrasts: column j is 1 for class j, -1 for the last class, 0 otherwise."""
    out = np.zeros((codes.size, k - 1))
    for j in range(k - 1):
        out[codes == j, j] = 1.0
    out[codes == k - 1, :] = -1.0
    return out


def _cross(parts: list[np.ndarray]) -> np.ndarray:
    out = parts[0]
    for p in parts[1:]:
        out = (out[:, :, None] * p[:, None, :]).reshape(out.shape[0], -1)
    return out


def _nested_columns(units: np.ndarray, parents: np.ndarray) -> np.ndarray:
    """Contrasts among the units within each parent class (sum to zero within the parent)."""
    cols = []
    for p in np.unique(parents):
        inside = parents == p
        present = np.unique(units[inside])
        for u in present[:-1]:
            col = np.zeros(units.size)
            col[inside & (units == u)] = 1.0
            col[inside & (units == present[-1])] = -1.0
            cols.append(col)
    return np.column_stack(cols) if cols else np.empty((units.size, 0))


def read_design(design: object, labels: pd.Index,
                terms: str | Sequence[str] | None) -> tuple[Design, list[str]]:
    """Check the design table and code its terms; returns the design and notes on it."""
    frame = _frame(design, labels)
    parsed = parse_terms(list(frame.columns) if terms is None else terms, frame.columns)
    used = list(dict.fromkeys(c for t in parsed for c in t.columns))
    _check_missing(frame, used)
    in_nested = {c for t in parsed if t.nested for c in t.columns}
    factors: dict[str, Classes] = {}
    covariates: dict[str, np.ndarray] = {}
    for c in used:
        s = frame[c]
        numeric = pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s)
        if numeric and c not in in_nested:
            x = s.to_numpy(dtype=np.float64)
            bad = ~np.isfinite(x)
            if bad.any():
                raise InputError(f"Design column {c!r} is infinite at site(s) "
                                 f"{format_items(labels[bad])}.", columns=[c],
                                 sites=list(labels[bad]))
            if np.ptp(x) <= 1e-12 * max(float(np.max(np.abs(x))), 1e-300):
                raise InputError(f"Design column {c!r} has the same value at every site: it "
                                 "cannot explain any difference between sites. Drop it from "
                                 "the terms.", columns=[c])
            covariates[c] = x - x.mean()
        else:
            factors[c] = _read_factor(s, c, labels)
    for t in parsed:
        if len(t.factors) == 1 and not t.nested and t.factors[0] in factors:
            check_classes(factors[t.factors[0]], labels)
    base = Design(labels, tuple(parsed), (), factors, tuple(covariates))
    coded = []
    for t in parsed:
        if t.nested:
            coded.append(_nested_columns(base.combination(list(t.factors)),
                                         base.combination(list(t.within))))
            continue
        parts = [covariates[c][:, None] if c in covariates
                 else _contrasts(factors[c].codes, len(factors[c].levels)) for c in t.factors]
        coded.append(_cross(parts))
    notes = []
    for t, x in zip(parsed, coded, strict=True):
        if x.shape[1] == 0:
            raise InputError(f"The nested term {t.name!r} has one unit in every class of "
                             f"{format_items(t.within)}: there is nothing to compare within "
                             "them. Drop the term.", columns=list(t.columns))
    for t in parsed:
        if len(t.factors) > 1 and not t.nested:
            missing = [f for f in itertools.chain.from_iterable(
                itertools.combinations(t.factors, k) for k in range(1, len(t.factors)))
                if Term(tuple(f)).key() not in {s.key() for s in parsed}]
            if missing:
                notes.append(f"The interaction {t.name!r} is tested without "
                             f"{format_items([':'.join(f) for f in missing])}: its columns are "
                             "products of contrasts, so without the terms it contains it does "
                             "not span the whole interaction.")
    return Design(labels, tuple(parsed), tuple(coded), factors, tuple(covariates)), notes


# --------------------------------------------------------------------------- bases
def _centre(x: np.ndarray) -> np.ndarray:
    return x - x.mean(axis=0)


def span(x: np.ndarray, scale: float) -> np.ndarray:
    """Orthonormal basis of the columns of ``x`` (directions above ``RANK_RTOL * scale``)."""
    if x.shape[1] == 0:
        return np.empty((x.shape[0], 0))
    u, s, _ = np.linalg.svd(x, full_matrices=False)
    return np.ascontiguousarray(u[:, s > RANK_RTOL * max(scale, 1e-300)])


def remove(x: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """``x`` with the span of the orthonormal ``basis`` removed (two passes, for accuracy)."""
    if basis.shape[1] == 0 or x.shape[1] == 0:
        return x
    x = x - basis @ (basis.T @ x)
    return x - basis @ (basis.T @ x)


def _scale(x: np.ndarray) -> float:
    return float(np.sqrt(np.max(np.sum(x * x, axis=0)))) if x.size else 0.0


def model_bases(design: Design, kind: str) -> tuple[list[np.ndarray], list[np.ndarray],
                                                    np.ndarray, list[str]]:
    """Tested and reduced bases of every term, the full model's basis, and notes.

    ``kind='sequential'``: term ``t`` given the terms before it (Type I); ``'marginal'``: given
    all the other terms (Type III, with the sum-to-zero contrasts of :func:`read_design`).
    Bases are orthonormal and orthogonal to the constant (the intercept is in every model).
    """
    cols = [_centre(x) for x in design.coded]
    names = [t.name for t in design.terms]
    notes: list[str] = []
    tested: list[np.ndarray] = []
    reduced: list[np.ndarray] = []
    if kind == "sequential":
        so_far = np.empty((design.n, 0))
        for term, x in zip(design.terms, cols, strict=True):
            name = term.name
            q = span(remove(x, so_far), _scale(x))
            if q.shape[1] == 0:
                earlier = names[: len(tested)]
                raise InputError(
                    f"The term {name!r} adds nothing given the terms before it "
                    f"({format_items(earlier)}): its classes coincide with theirs. Drop it, "
                    "or write it as nested (e.g. 'site(zone)') if its units sit inside "
                    "another factor's classes.", columns=list(term.columns))
            if q.shape[1] < x.shape[1]:
                notes.append(f"Only {q.shape[1]} of the {x.shape[1]} columns of {name!r} are "
                             "estimable given the terms before it (empty cells, or classes "
                             f"that coincide with earlier terms): its df is {q.shape[1]}.")
            tested.append(q)
            reduced.append(so_far)
            so_far = np.column_stack([so_far, q])
        full = so_far
    else:
        everything = np.column_stack(cols)
        full = span(everything, _scale(everything))
        for i, x in enumerate(cols):
            others = [c for j, c in enumerate(cols) if j != i]
            rest = np.column_stack(others) if others else np.empty((design.n, 0))
            r = span(rest, _scale(rest))
            tested.append(span(remove(x, r), _scale(x)))
            reduced.append(r)
        short = [t for t, q, x in zip(design.terms, tested, cols, strict=True)
                 if q.shape[1] < x.shape[1]]
        if short:
            raise InputError(
                "Marginal sums of squares need every column of every term to be estimable "
                f"given all the others, and {format_items([t.name for t in short])} "
                f"{'is' if len(short) == 1 else 'are'} not (empty cells of an interaction, or "
                "terms whose classes coincide). Use sums_of_squares='sequential', or drop the "
                "interaction.", columns=list(dict.fromkeys(c for t in short for c in t.columns)))
    df_res = design.n - 1 - full.shape[1]
    if df_res < 1:
        widths = ", ".join(f"{n} ({q.shape[1]} df)" for n, q in zip(names, tested, strict=True))
        raise InputError(
            f"More terms than the design can estimate: {design.n} sites give {design.n - 1} "
            f"degrees of freedom, and the terms {widths} use {full.shape[1]}, leaving no "
            "residual to test them against. Drop terms (an interaction first), merge classes, "
            "or add sites.", columns=names)
    return tested, reduced, full, notes
