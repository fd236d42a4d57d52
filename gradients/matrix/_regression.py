"""Multiple regression on distance matrices, tested by permuting the response matrix."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError
from .._result import ResultMixin
from .._validation import RNGLike, check_n_jobs, check_n_resamples, check_rng
from ..permutation import PermutationPlan, permutation_test
from ._inputs import MatrixLike, align_matrices, build_plan, square_of
from ._kernels import cross_products, numba_threads

__all__ = ["VIF_WARNING", "MatrixRegressionResult", "matrix_regression"]

#: Predictors whose variance inflation factor exceeds this are named in the notes (a common
#: rule of thumb for strong collinearity).
VIF_WARNING = 10.0


@dataclass(frozen=True, repr=False)
class MatrixRegressionResult(ResultMixin):
    """Outcome of :func:`matrix_regression`.

    Attributes
    ----------
    table : DataFrame
        Indexed by predictor: ``coefficient`` (raw), ``std_coefficient`` (in standard
        deviations of response per standard deviation of predictor), ``pseudo_t``
        (coefficient over its ordinary least-squares standard error), ``pvalue`` (two-sided
        permutation p-value of ``|pseudo_t|``) and ``vif`` (variance inflation factor).
    statistic : float
        R^2 of the regression on the condensed vectors.
    pvalue : float
        Permutation p-value of R^2.
    r2, f_statistic, intercept : float
    null_distribution : ndarray, shape (n_resamples, 1 + n_predictors)
        Permuted R^2 (first column) and ``|pseudo_t|`` per predictor.
    n_resamples : int
    exact : bool
    scheme : str
    n_sites, n_pairs : int
    notes : tuple of str
    """

    table: pd.DataFrame
    statistic: float
    pvalue: float
    r2: float
    f_statistic: float
    intercept: float
    null_distribution: np.ndarray
    n_resamples: int
    exact: bool
    scheme: str
    n_sites: int
    n_pairs: int
    notes: tuple[str, ...] = ()


def matrix_regression(
    response: MatrixLike,
    predictors: Mapping[str, MatrixLike],
    *,
    n_resamples: int = 999,
    rng: RNGLike = None,
    strata: Sequence[object] | pd.Series | None = None,
    scheme: str | PermutationPlan | None = None,
    n_jobs: int | None = -1,
) -> MatrixRegressionResult:
    r"""Multiple regression of one distance matrix on several others (MRM).

    Parameters
    ----------
    response : DistanceMatrix, square array or square DataFrame
        E.g. community dissimilarity.
    predictors : mapping name -> matrix
        The explanatory matrices (environmental distances, geographic distance, ...), aligned
        with the response by site label.
    n_resamples : int, default 999
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata, scheme, n_jobs
        As in :func:`gradients.matrix.mantel`.

    Returns
    -------
    MatrixRegressionResult

    Notes
    -----
    Ordinary least squares of the ``m = n(n-1)/2`` response entries on the predictors'
    entries with an intercept [1]_, [2]_. The pairs of sites are not independent, so the
    parametric F and t distributions do not apply; significance comes from permuting the
    rows and columns of the response matrix together [1]_, which tests the null that the
    response is unrelated to all predictors. One compiled pass per permutation gives the
    cross-products ``X'y_p``, from which every statistic follows (``y``'s mean and sum of
    squares do not change under permutation):

    - R^2 (equivalently F, a monotone function of it for fixed ``m`` and ``p``), one-sided;
    - for each predictor the pseudo-t ``b_k / se(b_k)``, with ``se`` the usual OLS standard
      error, tested two-sided on ``|t|``. A pivotal (studentised) statistic rather than the
      raw coefficient is used because its permutation distribution is less affected by the
      other predictors (Anderson & Legendre 1999 [3]_).

    Permuting the response tests each coefficient under the global null (response unrelated
    to every predictor). To test one predictor while keeping the effects of the others, use
    :func:`gradients.matrix.partial_mantel` with ``permute='residuals'``. Standardised
    coefficients are ``b_k sd(x_k) / sd(y)``.

    References
    ----------
    .. [1] Lichstein, J. W. (2007). Multiple regression on distance matrices: a multivariate
       spatial analysis tool. Plant Ecology 188: 117-131.
    .. [2] Legendre, P., Lapointe, F.-J. & Casgrain, P. (1994). Modeling brain evolution from
       behavior: a permutational regression approach. Evolution 48: 1487-1499.
    .. [3] Anderson, M. J. & Legendre, P. (1999). An empirical comparison of permutation
       methods for tests of partial regression coefficients in a linear model. Journal of
       Statistical Computation and Simulation 62: 271-303.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, matrix_regression
    >>> rng = np.random.default_rng(0)
    >>> env, xy = rng.normal(size=(30, 2)), rng.uniform(size=(30, 2))
    >>> lab = [f"s{i}" for i in range(30)]
    >>> dm = lambda a: DistanceMatrix(pdist(a), lab)
    >>> com = dm(env + rng.normal(scale=0.5, size=(30, 2)))
    >>> res = matrix_regression(com, {"env": dm(env), "space": dm(xy)}, n_resamples=499, rng=1)
    >>> res.table.loc["env", "pvalue"] < 0.05
    np.True_
    """
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    gen = check_rng(rng)
    if not isinstance(predictors, Mapping) or not predictors:
        raise InputError("`predictors` must be a non-empty mapping name -> distance matrix, "
                         "e.g. {'soil': soil_d, 'space': geo_d}.")
    names = [str(k) for k in predictors]
    if "response" in names:
        raise InputError("A predictor cannot be named 'response'; rename it.")
    mats, labels = align_matrices({"response": response,
                                   **{str(k): v for k, v in predictors.items()}})
    n = len(labels)
    y = mats["response"].condensed.astype(np.float64)
    x = np.column_stack([mats[k].condensed.astype(np.float64) for k in names])
    m, q = x.shape
    if m <= q + 1:
        raise InputError(f"{m} pairs of sites cannot fit {q} predictors and an intercept; "
                         "use more sites or fewer predictors.")
    yc = y - y.mean()
    sst = float(yc @ yc)
    # relative test: a constant response centres to rounding noise, not to exact zeros
    if sst <= 1e-300 or np.sqrt(sst) <= 1e-12 * np.sqrt(m) * float(np.max(np.abs(y))):
        raise InputError("`response` has the same value for every pair of sites; there is "
                         "nothing to explain.")
    xc = x - x.mean(axis=0)
    sx = np.sqrt(np.sum(xc * xc, axis=0))
    const = np.flatnonzero(sx <= 1e-13 * np.maximum(np.abs(x).max(axis=0), 1e-300))
    if const.size:
        bad = [names[i] for i in const]
        raise InputError(f"Predictor(s) {', '.join(bad)} have the same value for every pair of "
                         "sites; drop them.", columns=bad)
    xtx = xc.T @ xc
    cond = np.linalg.cond(xtx / np.outer(sx, sx))
    if not np.isfinite(cond) or cond > 1e12:
        raise InputError("The predictors are collinear (one is a linear combination of the "
                         f"others): {', '.join(names)}. Drop one of them.", columns=names)
    inv = np.linalg.inv(xtx)
    df_resid = m - q - 1
    corr = (xtx / np.outer(sx, sx))
    vif = np.diag(np.linalg.inv(corr)) if q > 1 else np.ones(1)

    def from_cross(c: np.ndarray) -> np.ndarray:
        """R^2 and |pseudo-t| per predictor from the cross-products X_c' y (rows)."""
        b = c @ inv
        ssr = np.sum(b * c, axis=1)
        sse = np.maximum(sst - ssr, 1e-300 * sst)
        sigma2 = sse / df_resid
        t = b / np.sqrt(sigma2[:, None] * np.diag(inv)[None, :])
        return np.column_stack([ssr / sst, np.abs(t)])

    c_obs = (xc.T @ yc)[None, :]
    b_obs = (c_obs @ inv)[0]
    obs = from_cross(c_obs)[0]
    r2 = float(obs[0])
    f_stat = float((r2 / q) / max(1 - r2, 1e-300) * df_resid)
    t_signed = np.sign(b_obs) * obs[1:]
    big = square_of(yc)
    xcols = np.asfortranarray(xc)  # the kernel's layout, so batches need no copy

    plan = build_plan(n, scheme=scheme, strata=strata,
                      n_resamples=n_resamples, rng=gen, labels=labels)
    with numba_threads(n_jobs):
        res = permutation_test(lambda orders: from_cross(cross_products(xcols, big, orders)),
                               plan, observed=obs, alternative="greater",
                               task="matrix regression")
    pvals = np.asarray(res.pvalue, dtype=np.float64)
    sy = float(np.sqrt(sst))
    table = pd.DataFrame({
        "coefficient": b_obs,
        "std_coefficient": b_obs * sx / sy,
        "pseudo_t": t_signed,
        "pvalue": pvals[1:],
        "vif": vif,
    }, index=pd.Index(names, name="predictor"))
    intercept = float(y.mean() - x.mean(axis=0) @ b_obs)
    notes = [
        f"R2 and the coefficients tested by {int(np.max(res.n_resamples))} permutations of the "
        "response matrix (Lichstein 2007); coefficient p-values are two-sided, on the "
        "pseudo-t, under the global null.",
    ]
    if plan.exact:
        notes.append(f"All {plan.size} permutations of the {n} sites were enumerated: exact "
                     "p-values.")
    high = [names[i] for i in np.flatnonzero(vif > VIF_WARNING)]
    if high:
        notes.append(f"Strongly collinear predictor(s) (variance inflation factor > "
                     f"{VIF_WARNING:g}): {', '.join(high)}. Their separate coefficients are "
                     "unstable; read R2, or test them with partial_mantel().")
    return MatrixRegressionResult(
        table=table,
        statistic=r2,
        pvalue=float(pvals[0]),
        r2=r2,
        f_statistic=f_stat,
        intercept=intercept,
        null_distribution=res.null_distribution,
        n_resamples=int(np.max(res.n_resamples)),
        exact=res.exact,
        scheme=plan.scheme,
        n_sites=n,
        n_pairs=m,
        notes=tuple(notes),
    )
