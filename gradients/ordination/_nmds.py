"""Non-metric multidimensional scaling (Kruskal stress-1, many starts, Procrustes agreement)."""

from __future__ import annotations

import dataclasses
import numbers
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import scipy.optimize
from scipy.spatial import procrustes
from scipy.spatial.distance import pdist

from .._errors import InputError
from .._result import ResultMixin
from .._validation import check_choice, check_n_jobs, check_rng
from ..distance._matrix import DistanceMatrix, as_distance_matrix
from ._common import axis_names, orient_columns
from ._kernels import MonotoneOrder, StressFunction, stress_fit
from ._pcoa import pcoa
from ._scores import as_scores, taxon_scores

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

    from .._validation import RNGLike

__all__ = ["AGREE_DISPARITY", "AGREE_STRESS", "NMDSResult", "nmds", "stress_verdict"]

TIES = ("primary", "secondary")
# a start agrees with the best one when its stress is within AGREE_STRESS of the best stress
# and its configuration matches the best one after Procrustes superimposition with a disparity
# (residual sum of squares of two configurations each scaled to unit sum of squares) below
# AGREE_DISPARITY, i.e. a root-mean-square mismatch of about 3% of the configuration's spread
AGREE_STRESS = 1e-3
AGREE_DISPARITY = 1e-3

# stress-1 rule of thumb, Clarke (1993) (from memory): (upper bound, words). The 0.2-0.3 class
# ("poor") and the advice to cross-check with another ordination are our own, not Clarke's.
_VERDICTS = (
    (0.05, "excellent: an ordination with little prospect of misinterpretation (stress < 0.05)"),
    (0.10, "good: no real risk of drawing false inferences (0.05 <= stress < 0.10)"),
    (0.20, "usable with care: the broad picture holds, but do not rely on the detail, "
           "especially towards 0.2; check against another ordination (0.10 <= stress < 0.20)"),
    (0.30, "poor: interpret with great caution and cross-check with another method "
           "(0.20 <= stress < 0.30)"),
    (np.inf, "close to arbitrary: the points are not much better than placed at random "
             "(stress >= 0.30); do not interpret this ordination"),
)


def stress_verdict(stress: float) -> str:
    """Words for a stress-1 value, after the rule of thumb of Clarke (1993).

    < 0.05 excellent, < 0.10 good, < 0.20 usable with care, < 0.30 poor, otherwise close to
    arbitrary. Source of the thresholds: Clarke (1993), Aust. J. Ecol. 18, 117–143 (from
    memory), whose rule of thumb reads stress below 0.05, 0.1 and 0.2 and above 0.3. The class
    between 0.2 and 0.3 and its name *poor* are our own (the rule of thumb, as recalled, gives
    no class there), and so is the advice in the two middle classes to check the picture
    against another ordination. A boundary value belongs to the worse class.
    """
    for bound, words in _VERDICTS:
        if stress < bound:
            return words
    return _VERDICTS[-1][1]  # NaN


@dataclasses.dataclass(frozen=True, repr=False)
class NMDSResult(ResultMixin):
    """Result of :func:`nmds`.

    Attributes
    ----------
    scores : pandas.DataFrame
        Site scores of the best solution, sites x ``axis1`` ..., centred, rotated to principal
        axes and scaled (see :func:`nmds`, Notes).
    stress : float
        Kruskal stress-1 of the best solution.
    stress_verdict : str
        The stress in words (Clarke 1993 rule of thumb).
    converged : bool
        True when at least two starts reached the best stress and agree after Procrustes.
    n_agreeing : int
        Number of starts (the best included) within ``AGREE_STRESS`` of the best stress whose
        configuration agrees with the best one after Procrustes (disparity < ``AGREE_DISPARITY``).
    start_stresses : pandas.Series
        Final stress of each start, indexed ``pcoa`` (or ``init``), ``random1``, ``random2``, ...
    best_start : str
        The start that gave the best solution.
    shepard : pandas.DataFrame
        One row per pair of sites (``site_a``, ``site_b``) with ``dissimilarity``, ``distance``
        (in the final configuration) and ``fitted`` (the monotone step values), sorted by
        dissimilarity then distance: the data of a Shepard diagram.
    ties : str
        The approach to tied dissimilarities used.
    table : pandas.DataFrame
        One row per start: ``stress``, ``iterations``, ``reached_max_iter``, ``disparity``
        (Procrustes disparity between the start's solution and the best one) and ``agrees``.
    notes : tuple of str
        Warnings in words.
    """

    scores: pd.DataFrame
    stress: float
    stress_verdict: str
    converged: bool
    n_agreeing: int
    start_stresses: pd.Series
    best_start: str
    shepard: pd.DataFrame
    ties: str
    table: pd.DataFrame
    notes: tuple[str, ...] = ()

    def taxon_scores(self, community: pd.DataFrame) -> pd.DataFrame:
        """Weighted-average taxon scores on these axes; see :func:`taxon_scores`."""
        return taxon_scores(self, community)


def _check_positive_int(name: str, value: object, minimum: int = 1) -> int:
    if not isinstance(value, numbers.Integral) or isinstance(value, bool) or int(value) < minimum:
        raise InputError(f"`{name}` must be an integer of at least {minimum}; got {value!r}.")
    return int(value)


def _check_tol(tol: object) -> float:
    if (not isinstance(tol, numbers.Real) or isinstance(tol, bool) or not np.isfinite(tol)
            or float(tol) <= 0):
        raise InputError(f"`tol` must be a positive number; got {tol!r}.")
    return float(tol)


def _normalise(x: np.ndarray) -> np.ndarray:
    """Centre and scale a configuration to unit root-mean-square distance from the centroid."""
    x = x - x.mean(axis=0)
    rms = np.sqrt(np.mean(np.sum(x**2, axis=1)))
    return x / rms if rms > 0 else x


def _initial(dm: DistanceMatrix, init: object, p: int,
             seed: np.random.SeedSequence) -> tuple[np.ndarray, str]:
    n = dm.n
    if init is not None:
        frame = as_scores(init, sites=dm.labels)
        if frame.shape[1] < p:
            raise InputError(f"`init` has {frame.shape[1]} column(s); {p} are needed for "
                             f"dimensions={p}.", columns=list(frame.columns))
        x = frame.to_numpy(dtype=np.float64)[:, :p]
        if np.linalg.matrix_rank(x - x.mean(axis=0)) == 0:
            raise InputError("`init` places every site at the same point; give a configuration "
                             "that separates the sites.")
        return _normalise(x), "init"
    scores = pcoa(dm, dimensions=p).scores.to_numpy()
    x = np.zeros((n, p))
    x[:, :scores.shape[1]] = scores
    if scores.shape[1] < p:
        # fewer positive PCoA axes than dimensions: fill the rest with small noise
        spread = float(np.std(scores)) if scores.size else 1.0
        x[:, scores.shape[1]:] = (np.random.default_rng(seed).normal(size=(n, p - scores.shape[1]))
                                  * 1e-3 * spread)
    return _normalise(x), "pcoa"


def _run_start(x0: np.ndarray, mono: MonotoneOrder, max_iter: int,
               tol: float) -> tuple[np.ndarray, float, int, bool]:
    n, p = x0.shape
    fun = StressFunction(n, p, mono)
    res = scipy.optimize.minimize(
        fun, x0.ravel(), jac=True, method="L-BFGS-B",
        options={"maxiter": max_iter, "ftol": tol, "gtol": 0.0, "maxcor": 20},
    )
    x = res.x.reshape(n, p)
    stress, _, _ = stress_fit(x, mono)
    hit = int(res.nit) >= max_iter
    return x, stress, int(res.nit), hit


def _principal_axes(x: np.ndarray) -> np.ndarray:
    """Centre and rotate a configuration to its principal axes (largest variance first)."""
    x = x - x.mean(axis=0)
    _, _, vt = np.linalg.svd(x, full_matrices=False)
    return x @ vt.T


def nmds(
    d: DistanceMatrix | ArrayLike | pd.DataFrame,
    *,
    dimensions: int = 2,
    starts: int = 20,
    rng: RNGLike = None,
    max_iter: int = 500,
    tol: float = 1e-7,
    init: pd.DataFrame | ArrayLike | None = None,
    ties: str = "primary",
    n_jobs: int = 1,
) -> NMDSResult:
    """Non-metric multidimensional scaling by Kruskal's stress-1, from many starts.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities among sites.
    dimensions : int, default 2
        Number of axes.
    starts : int, default 20
        Number of starting configurations in all: the first is the PCoA solution (or `init`),
        the others are random (independent standard normal coordinates).
    rng : int, numpy.random.Generator or None
        Seed for the random starts. Each random start draws from its own
        ``numpy.random.SeedSequence`` child, so the result does not depend on `n_jobs`.
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    max_iter : int, default 500
        Most optimiser iterations per start.
    tol : float, default 1e-7
        A start stops when an iteration lowers the stress by less than `tol`.
    init : DataFrame or array, optional
        A starting configuration (sites x at least `dimensions` columns; a DataFrame is aligned
        by site label) used instead of the PCoA start.
    ties : {"primary", "secondary"}, default "primary"
        Approach to tied dissimilarities. Primary: tied dissimilarities may get different
        fitted values (the order of their distances is free). Secondary: tied dissimilarities
        share one fitted value.
    n_jobs : int, default 1
        Starts run in parallel on this many threads (-1: all cores).

    Returns
    -------
    NMDSResult
        ``scores``, ``stress``, ``stress_verdict``, ``converged``, ``n_agreeing``,
        ``start_stresses``, ``best_start``, ``shepard``, ``ties``, ``table``, ``notes``.

    Notes
    -----
    Stress-1 [1]_ of a configuration with inter-site distances ``d_ij`` is

    ``S = sqrt( sum (d_ij - dhat_ij)**2 / sum d_ij**2 )``,

    where ``dhat`` is the least-squares monotone (non-decreasing) regression of the distances on
    the dissimilarities, found by pool-adjacent-violators [2]_. Under the primary approach to
    ties the distances inside a block of equal dissimilarities are put in increasing order
    before the regression, which is the best arrangement for that block [2]_; dissimilarities
    within ``1e-12`` of the largest one (relative) count as tied.

    Each start is minimised by L-BFGS [4]_ with the analytic gradient of ``S``: with ``T`` the
    sum of squared distances, ``dS/dd_ij = ((d_ij - dhat_ij) - S**2 d_ij) / (S T)`` (the fitted
    values held fixed, which is exact since they are a projection onto the monotone cone) and
    ``dd_ij/dx_i = (x_i - x_j) / d_ij``. Distances, monotone regression, stress and gradient are
    one compiled pass over the ``n (n - 1) / 2`` pairs.

    The best start is kept. A start *agrees* with it when its stress is within
    ``AGREE_STRESS = 1e-3`` of the best and the Procrustes disparity
    (:func:`scipy.spatial.procrustes`: residual sum of squares after both configurations are
    centred, scaled to unit sum of squares and optimally rotated) is below
    ``AGREE_DISPARITY = 1e-3``. The solution is called converged when at least two starts, the
    best included, agree; ``n_agreeing`` says how many did.

    The final configuration is centred, rotated to principal axes (``axis1`` has the largest
    variance), and scaled so that the root-mean-square distance between sites equals the
    root-mean-square dissimilarity (the axes of the Shepard diagram are then comparable; stress
    does not depend on scale). Each axis is oriented to make its largest-magnitude score
    positive.

    The verdict follows the rule of thumb of Clarke [3]_ (from memory): stress below 0.05
    excellent, below 0.1 good, below 0.2 usable with care, below 0.3 poor, above 0.3 close to
    arbitrary.

    References
    ----------
    .. [1] Kruskal, J. B. (1964a). Multidimensional scaling by optimizing goodness of fit to a
       nonmetric hypothesis. Psychometrika 29, 1–27.
    .. [2] Kruskal, J. B. (1964b). Nonmetric multidimensional scaling: a numerical method.
       Psychometrika 29, 115–129.
    .. [3] Clarke, K. R. (1993). Non-parametric multivariate analyses of changes in community
       structure. Australian Journal of Ecology 18, 117–143.
    .. [4] Liu, D. C. & Nocedal, J. (1989). On the limited memory BFGS method for large scale
       optimization. Mathematical Programming 45, 503–528.
    .. [5] Gower, J. C. (1975). Generalized Procrustes analysis. Psychometrika 40, 33–51.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients.distance import DistanceMatrix
    >>> from gradients.ordination import nmds
    >>> x = np.random.default_rng(2).normal(size=(15, 2))
    >>> res = nmds(DistanceMatrix(pdist(x) ** 2, range(15)), starts=3, rng=1)
    >>> res.stress < 0.01
    True
    """
    dm = as_distance_matrix(d, name="d")
    p = _check_positive_int("dimensions", dimensions)
    n_starts = _check_positive_int("starts", starts)
    max_iter = _check_positive_int("max_iter", max_iter)
    tol = _check_tol(tol)
    check_choice("ties", ties, TIES)
    n_jobs = check_n_jobs(n_jobs)
    generator = check_rng(rng)
    n = dm.n
    if n < p + 2:
        raise InputError(f"NMDS in {p} dimension(s) needs at least {p + 2} sites; the distance "
                         f"matrix has {n}.")
    delta = np.asarray(dm.condensed, dtype=np.float64)
    if np.ptp(delta) <= 1e-12 * max(float(delta.max()), 1e-300):
        raise InputError("All dissimilarities are equal: their order carries no information "
                         "for NMDS. Check the dissimilarity and the input table.")
    notes: list[str] = []
    mono = MonotoneOrder.build(delta, primary=(ties == "primary"))

    seeds = np.random.SeedSequence(int(generator.integers(0, 2**63))).spawn(n_starts)
    x_first, first_name = _initial(dm, init, p, seeds[0])
    configs = [x_first]
    names = [first_name]
    for i in range(1, n_starts):
        configs.append(_normalise(np.random.default_rng(seeds[i]).normal(size=(n, p))))
        names.append(f"random{i}")

    if n_jobs == 1 or n_starts == 1:
        runs = [_run_start(x0, mono, max_iter, tol) for x0 in configs]
    else:
        from joblib import Parallel, delayed

        # threads on this machine, even inside a Dask `parallel_config`: the starts share
        # the monotone order, and their kernels release the GIL for part of the work
        runs = Parallel(n_jobs=n_jobs, backend="threading")(
            delayed(_run_start)(x0, mono, max_iter, tol) for x0 in configs
        )
    stresses = np.array([r[1] for r in runs])
    best = int(np.argmin(stresses))  # first of equal minima
    x_best = runs[best][0]

    disparity = np.zeros(n_starts)
    for i, run in enumerate(runs):
        if i != best:
            disparity[i] = procrustes(x_best, run[0])[2]
    agrees = (stresses - stresses[best] <= AGREE_STRESS) & (disparity < AGREE_DISPARITY)
    agrees[best] = True
    n_agree = int(agrees.sum())
    converged = n_agree >= 2

    # final configuration: centred, principal axes, scaled, oriented
    x = _principal_axes(x_best)
    rms_d = np.sqrt(np.mean(np.square(pdist(x))))
    rms_delta = np.sqrt(np.mean(delta**2))
    if rms_d > 0:
        x = x * (rms_delta / rms_d)
    x = x * orient_columns(x)
    stress, dist, fitted = stress_fit(x, mono)

    labels = dm.labels
    scores = pd.DataFrame(x, index=labels.copy(), columns=axis_names(p))
    ii, jj = np.triu_indices(n, k=1)
    sort = np.lexsort((dist, delta))
    shepard = pd.DataFrame({
        "site_a": labels[ii[sort]],
        "site_b": labels[jj[sort]],
        "dissimilarity": delta[sort],
        "distance": dist[sort],
        "fitted": fitted[sort],
    })
    index = pd.Index(names, name="start")
    iterations = np.array([r[2] for r in runs])
    hit = np.array([r[3] for r in runs])
    table = pd.DataFrame({"stress": stresses, "iterations": iterations,
                          "reached_max_iter": hit, "disparity": disparity, "agrees": agrees},
                         index=index)

    if not converged:
        if n_starts == 1:
            notes.append("Only one start was run, so convergence cannot be judged; use "
                         "starts=20 or more.")
        else:
            notes.append(
                f"Not converged: no other of the {n_starts} starts reached the best stress "
                f"({stress:.4g}) with the same configuration. Run more starts (starts=) or "
                "pass the best scores as init= and run again."
            )
    if hit[best]:
        notes.append(f"The best start stopped at max_iter={max_iter} iterations before the "
                     "stress settled; raise max_iter.")
    if stress < 1e-3:
        notes.append("Stress is almost 0: with few sites or sharply separated groups NMDS can "
                     "give a degenerate solution; check the Shepard diagram for a few large "
                     "steps.")
    if n < 10:
        notes.append(f"Only {n} sites: NMDS solutions with so few points are weakly "
                     "determined.")
    return NMDSResult(
        scores=scores,
        stress=float(stress),
        stress_verdict=stress_verdict(stress),
        converged=bool(converged),
        n_agreeing=n_agree,
        start_stresses=pd.Series(stresses, index=index, name="stress"),
        best_start=names[best],
        shepard=shepard,
        ties=ties,
        table=table,
        notes=tuple(notes),
    )
