"""Principal coordinates analysis (metric multidimensional scaling) of a distance matrix."""

from __future__ import annotations

import dataclasses
import numbers
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import scipy.linalg
import scipy.sparse.linalg

from .._errors import InputError
from .._result import ResultMixin
from .._validation import check_choice
from ..distance._centred import cailliez_constant, gower_centre, lingoes_constant
from ..distance._matrix import DistanceMatrix, as_distance_matrix
from ._common import axis_names, orient_columns
from ._scores import taxon_scores

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["PCoAResult", "cailliez_constant", "gower_centre", "lingoes_constant", "pcoa"]

CORRECTIONS = ("lingoes", "cailliez")

# eigenvalues within this fraction of the largest one are rounding noise, reported as 0
EIGEN_RTOL = 1e-9
# use the truncated eigen solver when only a few axes are asked of a large matrix
_TRUNCATE_MIN_N = 250
_TRUNCATE_MAX_SHARE = 0.2


@dataclasses.dataclass(frozen=True, repr=False)
class PCoAResult(ResultMixin):
    """Result of :func:`pcoa`.

    Attributes
    ----------
    scores : pandas.DataFrame
        Site scores, one row per site (labels kept), columns ``axis1``, ``axis2``, ... for the
        axes with positive eigenvalues (all of them, or the first ``dimensions``).
    eigenvalues : pandas.Series
        Eigenvalues of the Gower-centred matrix in decreasing order, indexed ``axis1`` ...,
        negative ones included (all ``n`` of them, one of which is the 0 that double-centring
        always gives). Values within ``1e-9`` of the largest (relative) are set to 0.
    proportion_explained : pandas.Series
        Each positive eigenvalue divided by the sum of the positive eigenvalues.
    correction : str or None
        ``"lingoes"``, ``"cailliez"`` or None.
    constant : float
        The correction constant applied (0.0 when none was needed or asked for).
    distances : DistanceMatrix
        The matrix that was ordinated (the corrected one when a correction was applied).
    table : pandas.DataFrame
        One row per positive axis: ``eigenvalue``, ``proportion``, ``cumulative``.
    notes : tuple of str
        Warnings in words (negative eigenvalues and the share they represent, corrections).
    """

    scores: pd.DataFrame
    eigenvalues: pd.Series
    proportion_explained: pd.Series
    correction: str | None
    constant: float
    distances: DistanceMatrix
    table: pd.DataFrame
    notes: tuple[str, ...] = ()

    def taxon_scores(self, community: pd.DataFrame) -> pd.DataFrame:
        """Weighted-average taxon scores on these axes; see :func:`taxon_scores`."""
        return taxon_scores(self, community)


def _check_dimensions(dimensions: object) -> int | None:
    if dimensions is None:
        return None
    if (not isinstance(dimensions, numbers.Integral) or isinstance(dimensions, bool)
            or int(dimensions) < 1):
        raise InputError(f"`dimensions` must be a positive integer or None; got {dimensions!r}.")
    return int(dimensions)


def _spectrum(g: np.ndarray, k: int | None) -> tuple[np.ndarray, np.ndarray, bool]:
    """All eigenvalues (decreasing) and the eigenvectors of the leading ones.

    Returns ``values, vectors, truncated``; ``vectors[:, i]`` belongs to ``values[i]``. With ``k``
    given and ``n`` large, the eigenvalues come from a values-only symmetric solver and only the
    ``k`` leading eigenvectors are computed, by Lanczos iteration
    (:func:`scipy.sparse.linalg.eigsh`), which is several times faster than the full problem.
    """
    n = g.shape[0]
    if k is not None and n >= _TRUNCATE_MIN_N and k <= _TRUNCATE_MAX_SHARE * n:
        values = np.linalg.eigvalsh(g)[::-1]
        start = np.random.default_rng(0).normal(size=n)  # fixed: results are reproducible
        try:
            top, vecs = scipy.sparse.linalg.eigsh(g, k=k, which="LA", v0=start)
        except scipy.sparse.linalg.ArpackNoConvergence:
            top, vecs = scipy.linalg.eigh(g, subset_by_index=[n - k, n - 1])
        order = np.argsort(top)[::-1]
        return values, vecs[:, order], True
    values, vecs = np.linalg.eigh(g)
    return values[::-1], vecs[:, ::-1], False


def pcoa(
    d: DistanceMatrix | ArrayLike | pd.DataFrame,
    *,
    correction: str | None = None,
    dimensions: int | None = None,
) -> PCoAResult:
    """Principal coordinates analysis of a distance matrix.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities among sites.
    correction : {None, "lingoes", "cailliez"}, optional
        Make a non-Euclidean matrix Euclidean before the analysis when it has negative
        eigenvalues: Lingoes (1971) replaces ``d`` by ``sqrt(d**2 + 2 c)``, Cailliez (1983)
        by ``d + c`` (distinct sites only). Default None: analyse as given and report the
        negative eigenvalues.
    dimensions : int, optional
        Keep only the first ``dimensions`` axes in ``scores``. For large matrices (250 sites or
        more, ``dimensions`` at most a fifth of them) only those eigenvectors are computed
        (Lanczos iteration), with all eigenvalues from a values-only solver, which is faster.

    Returns
    -------
    PCoAResult
        ``scores``, ``eigenvalues``, ``proportion_explained``, ``correction``, ``constant``,
        ``distances``, ``table``, ``notes``.

    Notes
    -----
    With ``A = -d**2 / 2`` and ``G = (I - 11'/n) A (I - 11'/n)`` the Gower-centred matrix, the
    site scores on axis ``k`` are ``u_k * sqrt(lambda_k)`` for each eigenpair with
    ``lambda_k > 0`` [1]_. For Euclidean distances among points this recovers the points up
    to rotation and translation, and the eigenvalues are the squared singular values of the
    centred coordinates.

    Negative eigenvalues (a non-Euclidean matrix, common with Bray–Curtis and other
    semimetrics) are reported in ``eigenvalues`` and in ``notes``, never dropped silently; the
    note gives the sum of their magnitudes as a share of the sum of positive eigenvalues. The
    proportions explained are relative to the sum of the positive eigenvalues [4]_. Eigenvalues
    within ``1e-9`` times the largest are rounding noise and reported as 0.

    The Lingoes constant is ``c = -lambda_min`` [2]_; the Cailliez constant is the largest
    eigenvalue of the block matrix ``[[0, 2 G1], [-I, -4 G2]]``, where ``G2`` is the
    Gower-centred ``-d / 2`` [3]_.

    Sign convention: the sign of each axis is arbitrary, so each is oriented to make its
    largest-magnitude site score positive.

    References
    ----------
    .. [1] Gower, J. C. (1966). Some distance properties of latent root and vector methods used
       in multivariate analysis. Biometrika 53, 325–338.
    .. [2] Lingoes, J. C. (1971). Some boundary conditions for a monotone analysis of symmetric
       matrices. Psychometrika 36, 195–203.
    .. [3] Cailliez, F. (1983). The analytical solution of the additive constant problem.
       Psychometrika 48, 305–308.
    .. [4] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed., sect. 9.3.
       Elsevier.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients.distance import DistanceMatrix
    >>> from gradients.ordination import pcoa
    >>> x = np.random.default_rng(1).normal(size=(6, 2))
    >>> res = pcoa(DistanceMatrix(pdist(x), list("abcdef")))
    >>> list(res.scores.columns)
    ['axis1', 'axis2']
    """
    dm = as_distance_matrix(d, name="d")
    if correction is not None:
        check_choice("correction", correction, CORRECTIONS)
    k = _check_dimensions(dimensions)
    n = dm.n
    if n < 2:
        raise InputError(f"PCoA needs at least 2 sites; the distance matrix has {n}.")
    square = dm.square().astype(np.float64)
    if not np.any(square > 0):
        raise InputError("All distances are zero: there is nothing to ordinate. "
                         "Check the dissimilarity and the input table.")
    notes: list[str] = []

    values, vecs, _ = _spectrum(gower_centre(-0.5 * square**2), k)
    tol = EIGEN_RTOL * abs(float(values[0]))
    constant = 0.0
    applied = dm
    if correction is not None:
        if np.any(values < -tol):
            before = float(values.min())
            if correction == "lingoes":
                constant = -before
                fixed = np.sqrt(square**2 + 2.0 * constant)
                relation = f"d' = sqrt(d^2 + 2c), c = {constant:.6g} (Lingoes 1971)"
            else:
                constant = cailliez_constant(square)
                fixed = square + constant
                relation = f"d' = d + c, c = {constant:.6g} (Cailliez 1983)"
            np.fill_diagonal(fixed, 0.0)
            square = fixed
            applied = DistanceMatrix.from_square(fixed, dm.labels, metric=dm.metric,
                                                 transform=dm.transform)
            values, vecs, _ = _spectrum(gower_centre(-0.5 * square**2), k)
            tol = EIGEN_RTOL * abs(float(values[0]))
            notes.append(
                f"{correction.capitalize()} correction applied to every pair of distinct sites: "
                f"{relation}. Before it the smallest eigenvalue was {before:.6g}; the corrected "
                "matrix is Euclidean and is the one ordinated (see .distances)."
            )
        else:
            notes.append(f"correction={correction!r} asked, but the matrix has no negative "
                         "eigenvalues (it is Euclidean): no correction was applied.")
    values = np.where(np.abs(values) <= tol, 0.0, values)
    index = pd.Index(axis_names(n), name="axis")
    eigenvalues = pd.Series(values, index=index, name="eigenvalue")

    positive = values > 0
    n_pos = int(np.count_nonzero(positive))
    pos_sum = float(values[positive].sum())
    prop = values[positive] / pos_sum
    proportion = pd.Series(prop, index=index[positive], name="proportion")
    negative = values < 0
    if np.any(negative):
        neg_sum = float(-values[negative].sum())
        notes.append(
            f"{int(np.count_nonzero(negative))} of {n} eigenvalues are negative (largest "
            f"magnitude {-float(values[negative].min()):.6g}): the dissimilarities are not "
            "Euclidean. Their magnitudes sum to "
            f"{100 * neg_sum / pos_sum:.3g}% of the sum of positive eigenvalues; proportions "
            "explained are relative to the positive sum, and the negative axes have no "
            "scores. Consider correction='lingoes' or 'cailliez', or a square-root transform of "
            "the dissimilarities."
        )

    keep = n_pos if k is None else min(k, n_pos)
    if k is not None and k > n_pos:
        notes.append(f"{k} dimensions asked but only {n_pos} eigenvalues are positive; "
                     f"{n_pos} axes returned.")
    coords = vecs[:, :keep] * np.sqrt(values[:keep])
    coords = coords * orient_columns(coords)
    scores = pd.DataFrame(coords, index=dm.labels.copy(), columns=axis_names(keep))
    table = pd.DataFrame(
        {"eigenvalue": values[positive], "proportion": prop, "cumulative": np.cumsum(prop)},
        index=index[positive],
    )
    return PCoAResult(
        scores=scores,
        eigenvalues=eigenvalues,
        proportion_explained=proportion,
        correction=correction,
        constant=float(constant),
        distances=applied,
        table=table,
        notes=tuple(notes),
    )
