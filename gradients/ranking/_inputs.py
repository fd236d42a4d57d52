"""Inputs of the ranking stage: community dissimilarities and candidate variables, checked once.

Every function of the stage starts here: the dissimilarities become a :class:`DistanceMatrix`,
the candidate variables a numeric table in the order of its sites (matched by site label), and
the input rules that make a ranking impossible (fewer than five sites, a variable that is not a
number, a missing value, a constant variable) are refused with messages that say what to do.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import align_strata, check_labels_match
from ..distance import DistanceMatrix, as_distance_matrix

__all__ = ["MIN_SITES", "Candidates", "read_candidates", "read_dissimilarities", "strata_for",
           "zscores"]

#: Fewest sites a ranking accepts: with four sites there are six pairs and 4! = 24 site orders,
#: too few for a rank correlation, a spline fit or a permutation p-value to mean anything.
MIN_SITES = 5
#: A variable whose spread is below this fraction of its largest magnitude is constant.
CONSTANT_RTOL = 1e-12


@dataclass(frozen=True)
class Candidates:
    """Candidate variables in site order.

    Attributes
    ----------
    names : tuple of str
        Column names, in the order given.
    values : ndarray, shape (n, p)
        The variables as given (float64), rows in the order of the dissimilarities' sites.
    frame : DataFrame
        The same values, indexed by site label.
    """

    names: tuple[str, ...]
    values: np.ndarray
    frame: pd.DataFrame

    @property
    def width(self) -> int:
        return len(self.names)


def read_dissimilarities(d: object, *, bounded: bool = False) -> DistanceMatrix:
    """The community dissimilarities as a :class:`DistanceMatrix` of at least ``MIN_SITES`` sites.

    ``bounded`` asks for values between 0 and 1 (a turnover model predicts a proportion).
    """
    dm = as_distance_matrix(d, name="d")  # type: ignore[arg-type]
    if dm.n < MIN_SITES:
        raise InputError(
            f"Ranking variables needs at least {MIN_SITES} sites; `d` has {dm.n}. With so few "
            "sites no ranking is meaningful: add sites, or look at the variables one by one.")
    values = dm.condensed
    if np.ptp(values) == 0:
        raise InputError("Every pair of sites has the same community dissimilarity, so there "
                         "is no turnover to line variables up with.")
    if bounded and (values.min() < 0 or values.max() > 1):
        raise InputError(
            f"A turnover model needs dissimilarities between 0 and 1; `d` runs from "
            f"{values.min():.4g} to {values.max():.4g}. Use a bounded dissimilarity (Bray-Curtis, "
            "Jaccard, Sørensen) or divide by the largest possible value.")
    return dm


def read_candidates(environment: object, labels: pd.Index, *,
                    name: str = "environment") -> Candidates:
    """Numeric candidate variables, rows matched to ``labels``, with every input rule checked."""
    if isinstance(environment, pd.Series):
        environment = environment.to_frame()
    if not isinstance(environment, pd.DataFrame):
        raise InputError(f"`{name}` must be a DataFrame of variables indexed by site label; got "
                         f"{type(environment).__name__}.")
    if environment.shape[1] == 0:
        raise InputError(f"`{name}` has no columns: give at least one candidate variable.")
    names = [str(c) for c in environment.columns]
    dup = sorted({c for c in names if names.count(c) > 1})
    if dup:
        raise InputError(f"`{name}` repeats the column name(s) {format_items(dup)}; give each "
                         "variable its own name.", columns=dup)
    if environment.index.has_duplicates:
        rep = environment.index[environment.index.duplicated()].unique()
        raise InputError(f"`{name}` repeats site label(s) {format_items(list(rep))}; give each "
                         "site one row.", sites=list(rep))
    check_labels_match(labels, environment.index, left_name="the dissimilarities",
                       right_name=f"`{name}`",
                       fix="Give the dissimilarities and the variables the same sites.")
    frame = environment.loc[labels]
    bad = [c for c in frame.columns
           if not pd.api.types.is_numeric_dtype(frame[c]) or pd.api.types.is_bool_dtype(frame[c])]
    if bad:
        raise InputError(
            f"Column(s) {format_items(bad)} of `{name}` are not numbers (text, categories or "
            "true/false). Ranking compares measured gradients: leave them out, or code a "
            "category as numbers only if its classes are ordered.", columns=bad)
    values = frame.to_numpy(dtype=np.float64, na_value=np.nan)
    missing = ~np.isfinite(values)
    if missing.any():
        cols = [names[j] for j in np.flatnonzero(missing.any(axis=0))]
        sites = list(frame.index[missing.any(axis=1)])
        raise InputError(
            f"Column(s) {format_items(cols)} of `{name}` have missing or infinite values at "
            f"site(s) {format_items(sites)}. Fill them in, drop those sites from every table, or "
            "leave those variables out.", columns=cols, sites=sites)
    spread = np.ptp(values, axis=0)
    scale = np.max(np.abs(values), axis=0)
    flat = spread <= CONSTANT_RTOL * np.maximum(scale, 1e-300)
    constant = [names[j] for j in np.flatnonzero(flat)]
    if constant:
        raise InputError(
            f"Column(s) {format_items(constant)} of `{name}` have the same value at every site, "
            "so they cannot line up with turnover. Leave them out.", columns=constant)
    out = pd.DataFrame(values, index=labels, columns=names)
    return Candidates(tuple(names), np.ascontiguousarray(values), out)


def zscores(values: np.ndarray) -> np.ndarray:
    """Columns centred and scaled to unit sample standard deviation (ddof = 1), as in
    :func:`gradients.environmental_distance`."""
    centred = values - values.mean(axis=0)
    return np.ascontiguousarray(centred / values.std(axis=0, ddof=1))


def strata_for(strata: object, labels: pd.Index) -> np.ndarray | None:
    """Strata aligned to the sites (None when not given)."""
    return align_strata(strata, labels, name="strata", sites_name="the dissimilarities")
