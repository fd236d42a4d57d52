"""Reading and aligning the matrices given to the matrix-correlation methods."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd
from scipy import stats
from scipy.spatial.distance import squareform

from .._errors import InputError, format_items
from .._validation import align_strata, check_labels_match
from ..distance import DistanceMatrix
from ..permutation import SCHEMES, PermutationPlan, permutation_plan

__all__ = [
    "PRECISIONS",
    "MatrixLike",
    "align_matrices",
    "build_plan",
    "check_precision",
    "control_matrices",
    "rank_condensed",
    "square_of",
    "standardise",
]

MatrixLike = DistanceMatrix | np.ndarray | pd.DataFrame


def _one(value: object, name: str) -> tuple[DistanceMatrix, bool]:
    """A DistanceMatrix and whether its labels are real (False for a bare array)."""
    if isinstance(value, DistanceMatrix):
        return value, True
    if isinstance(value, pd.DataFrame):
        try:
            return DistanceMatrix.from_square(value), True
        except InputError as exc:
            raise InputError(f"`{name}`: {exc}") from None
    if isinstance(value, np.ndarray | list | tuple):
        try:
            array = np.asarray(value, dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError(f"`{name}` must hold numbers only.") from None
        try:
            if array.ndim == 1:
                m = array.size
                n = int(np.rint((1 + np.sqrt(1 + 8 * m)) / 2))
                if n * (n - 1) // 2 != m:
                    raise InputError(f"{m} values are not a condensed distance vector")
                return DistanceMatrix(array, range(n)), False
            return DistanceMatrix.from_square(array), False
        except InputError as exc:
            raise InputError(f"`{name}`: {exc}") from None
    raise InputError(
        f"`{name}` must be a DistanceMatrix, a square array or a square DataFrame labelled by "
        f"site; got {type(value).__name__}."
    )


def align_matrices(named: Mapping[str, object]) -> tuple[dict[str, DistanceMatrix], pd.Index]:
    """Turn every input into a DistanceMatrix on one common, identically ordered set of sites.

    Labelled inputs (DistanceMatrix, DataFrame) are matched by site label and reordered to the
    first labelled one; a label mismatch raises an :class:`InputError` that lists the sites
    found on only one side. Bare square arrays carry no labels: they are taken in the order of
    the labelled inputs and must have the same number of sites.
    """
    parsed = {name: _one(value, name) for name, value in named.items()}
    labelled = [(name, dm) for name, (dm, real) in parsed.items() if real]
    if labelled:
        ref_name, ref = labelled[0]
        labels = ref.labels
    else:
        ref_name, ref = next(iter(parsed.items()))[0], next(iter(parsed.values()))[0]
        labels = ref.labels
    out: dict[str, DistanceMatrix] = {}
    for name, (dm, real) in parsed.items():
        if dm.n != len(labels) and not real:
            raise InputError(
                f"`{name}` has {dm.n} sites but `{ref_name}` has {len(labels)}; an unlabelled "
                "array must list the same sites in the same order. Pass labelled DataFrames or "
                "DistanceMatrix objects to match sites by label."
            )
        if not real:
            dm = DistanceMatrix(dm.condensed, labels, validate=False)
        elif not dm.labels.equals(labels):
            check_labels_match(
                labels, dm.labels, left_name=f"`{ref_name}`", right_name=f"`{name}`",
                fix="Keep only the shared sites in both, e.g. with .subset(common_labels).",
            )
            dm = dm.subset(labels)
        out[name] = dm
    n = len(labels)
    if n < 3:
        raise InputError(f"At least 3 sites are needed to correlate distance matrices; got {n}.")
    return out, labels


def control_matrices(z: object) -> dict[str, object]:
    """Control matrices as an ordered mapping name -> matrix."""
    if isinstance(z, Mapping):
        if not z:
            raise InputError("`z` is empty: give at least one control matrix.")
        return {str(k): v for k, v in z.items()}
    if isinstance(z, DistanceMatrix | pd.DataFrame) or (
        isinstance(z, np.ndarray) and z.ndim in (1, 2)
    ):
        return {"z": z}
    if isinstance(z, Sequence) and not isinstance(z, str):
        if len(z) == 0:
            raise InputError("`z` is empty: give at least one control matrix.")
        return {f"z{i + 1}": v for i, v in enumerate(z)}
    if isinstance(z, np.ndarray) and z.ndim == 3:
        return {f"z{i + 1}": v for i, v in enumerate(z)}
    raise InputError(
        "`z` must be a matrix, a sequence of matrices or a mapping name -> matrix; got "
        f"{type(z).__name__}."
    )


def standardise(v: np.ndarray, name: str, dtype: np.dtype | type = np.float64) -> np.ndarray:
    """Centre a condensed vector and scale it to unit length (so r is a plain dot product).

    The mean and length are computed in float64; with ``dtype=np.float32`` the result is
    stored in float32, computed block by block so that no float64 copy of the whole vector
    is made (see :data:`PRECISIONS`).
    """
    if np.dtype(dtype) == np.float64:
        c = np.asarray(v, dtype=np.float64) - float(np.mean(v))
        norm = float(np.sqrt(c @ c))
        _check_spread(norm, v, name)
        return c / norm
    mean = float(np.mean(v, dtype=np.float64))
    squares = 0.0
    for lo in range(0, v.size, _BLOCK):
        c = np.asarray(v[lo:lo + _BLOCK], dtype=np.float64) - mean
        squares += float(c @ c)
    norm = float(np.sqrt(squares))
    _check_spread(norm, v, name)
    out = np.empty(v.size, dtype=dtype)
    for lo in range(0, v.size, _BLOCK):
        out[lo:lo + _BLOCK] = (np.asarray(v[lo:lo + _BLOCK], dtype=np.float64) - mean) / norm
    return out


#: Entries per block when a float32 vector is standardised without a float64 copy.
_BLOCK = 1 << 20

#: Storage types the Mantel family accepts as ``dtype``.
PRECISIONS = (np.dtype(np.float64), np.dtype(np.float32))


def check_precision(dtype: object) -> np.dtype:
    """The storage type of a Mantel-family test: float64 (default) or float32."""
    try:
        dt = np.dtype(np.float64 if dtype is None else dtype)
    except TypeError:
        raise InputError(f"`dtype` must be float64 or float32; got {dtype!r}.") from None
    if dt not in PRECISIONS:
        raise InputError(f"`dtype` must be float64 or float32; got {dt}.")
    return dt


def _check_spread(norm: float, v: np.ndarray, name: str) -> None:
    if not np.isfinite(norm) or norm <= 1e-300 or norm <= 1e-13 * float(np.max(np.abs(v))):
        raise InputError(
            f"`{name}` has the same value for every pair of sites, so no correlation with it "
            "is defined. Check that the right matrix was passed."
        )


def rank_condensed(v: np.ndarray) -> np.ndarray:
    """Average ranks of a condensed vector (ties share their mean rank), for Spearman."""
    return stats.rankdata(v, method="average").astype(np.float64)


def square_of(c: np.ndarray, dtype: np.dtype | type = np.float64) -> np.ndarray:
    """C-ordered square matrix (float64, or ``dtype``) from a condensed vector (zero
    diagonal)."""
    return np.ascontiguousarray(squareform(np.asarray(c, dtype=dtype), checks=False))


def build_plan(
    n: int,
    *,
    scheme: str | PermutationPlan | None,
    strata: object,
    n_resamples: int,
    rng: object,
    labels: pd.Index | None = None,
) -> PermutationPlan:
    """The permutation plan for a matrix test: free by default, within ``strata`` if given.

    ``strata`` is aligned to the sites' ``labels`` (a labelled Series is matched by label; see
    :func:`gradients._validation.align_strata`). With the labels, random orders do not depend
    on the order the sites come in.
    """
    if isinstance(scheme, PermutationPlan):
        if scheme.n_sites != n:
            raise InputError(f"The permutation plan given as `scheme` is for {scheme.n_sites} "
                             f"sites; the matrices have {n}.")
        if scheme._draw is not None:
            raise InputError("`scheme` must be a plan of site orders (permutation_plan()), not "
                             "a custom_plan().")
        if strata is not None:
            raise InputError("`strata` was given together with a ready plan as `scheme`; the "
                             "plan already fixes which rearrangements are allowed. Build the "
                             "plan with permutation_plan(..., strata=...) and leave `strata` "
                             "out, or pass `scheme` as a name ('strata', 'cyclic', ...).")
        return scheme
    if scheme is not None and scheme not in SCHEMES:
        raise InputError(f"`scheme` must be one of {format_items(SCHEMES)} or a plan from "
                         f"permutation_plan(); got {scheme!r}.")
    strata = align_strata(strata, labels if labels is not None else n,
                          sites_name="the matrices")
    return permutation_plan(n, scheme or ("strata" if strata is not None else "free"),
                            strata=strata, n_resamples=n_resamples, rng=rng,
                            site_labels=labels)
