"""Distance decay of similarity: exponential and power models, intervals by resampling sites."""

from __future__ import annotations

import numbers
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.spatial.distance import squareform

from .._errors import InputError
from .._result import ResultMixin
from .._validation import (
    RNGLike,
    check_choice,
    check_confidence_level,
    check_n_resamples,
    check_rng,
    renamed_keywords,
)
from ..permutation import site_ranks
from ._inputs import MatrixLike, align_matrices

__all__ = ["DistanceDecayResult", "distance_decay"]

MODELS = ("exponential", "power")
SIMILARITIES = ("1-d", "as-is")
_BOOT_CHUNK = 256


@dataclass(frozen=True, repr=False)
class DistanceDecayResult(ResultMixin):
    """Outcome of :func:`distance_decay`.

    Attributes
    ----------
    model : str
        'exponential' (``ln S = a + b g``) or 'power' (``ln S = a + b ln g``).
    slope, intercept, r2 : float
        Least-squares fit on the log scale (``r2`` on that scale).
    halving : float
        Exponential model: the halving distance ``ln 2 / -b``, in the units of ``geo``.
        Power model: the halving factor ``2^(-1/b)``, by which distance must be multiplied
        for similarity to halve (dimensionless). ``inf`` when the slope is not negative.
    slope_interval, halving_interval : tuple of float
        Percentile intervals (level ``confidence_level``) from the bootstrap of sites.
    confidence_level : float
        Level of the intervals (``confidence`` before; that name still reads, with a
        DeprecationWarning, for one release).
    n_sites : int
    n_pairs : int
        Pairs used in the fit.
    n_dropped : int
        Pairs left out (zero similarity without ``offset``; zero distance in the power model).
    n_resamples : int
        Bootstrap samples of sites drawn (``n_boot`` before; still read, with a
        DeprecationWarning, for one release).
    bootstrap_distribution : ndarray, shape (n_resamples, 2)
        Bootstrap slopes and intercepts (``bootstrap`` before; still read, with a
        DeprecationWarning, for one release).
    table : DataFrame
        Rows ``slope``, ``intercept``, ``halving``; columns ``estimate``, ``lower``,
        ``upper``.
    pairs : DataFrame
        One row per pair of sites: ``site_a``, ``site_b``, ``distance``, ``similarity``,
        ``used``; the points of a distance-decay plot.
    curve : DataFrame
        The fitted similarity on a grid of distances (``distance``, ``fitted``) with
        pointwise bootstrap percentile bands (``lower``, ``upper``), for plotting.
    notes : tuple of str
    """

    model: str
    slope: float
    intercept: float
    r2: float
    halving: float
    slope_interval: tuple[float, float]
    halving_interval: tuple[float, float]
    confidence_level: float
    n_sites: int
    n_pairs: int
    n_dropped: int
    n_resamples: int
    bootstrap_distribution: np.ndarray
    table: pd.DataFrame
    pairs: pd.DataFrame
    curve: pd.DataFrame
    notes: tuple[str, ...] = ()

    @property
    def confidence(self) -> float:
        """Deprecated name of :attr:`confidence_level`."""
        _renamed_field("confidence", "confidence_level")
        return self.confidence_level

    @property
    def n_boot(self) -> int:
        """Deprecated name of :attr:`n_resamples`."""
        _renamed_field("n_boot", "n_resamples")
        return self.n_resamples

    @property
    def bootstrap(self) -> np.ndarray:
        """Deprecated name of :attr:`bootstrap_distribution`."""
        _renamed_field("bootstrap", "bootstrap_distribution")
        return self.bootstrap_distribution


def _renamed_field(old: str, new: str) -> None:
    warnings.warn(f"DistanceDecayResult.{old} is deprecated and will be removed in the next "
                  f"release; use .{new} (same value).", DeprecationWarning, stacklevel=3)


def _halving(slope: np.ndarray | float, model: str) -> np.ndarray:
    b = np.asarray(slope, dtype=np.float64)
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        if model == "exponential":
            h = np.log(2.0) / -b
        else:
            h = np.power(2.0, -1.0 / b)
    return np.where(b < 0, h, np.inf)


def _fit_weighted(sw: np.ndarray, sx: np.ndarray, sy: np.ndarray, sxx: np.ndarray,
                  sxy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Slope and intercept of weighted least squares from weighted sums."""
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (sw * sxy - sx * sy) / (sw * sxx - sx * sx)
        intercept = (sy - slope * sx) / sw
    return slope, intercept


@renamed_keywords({"n_boot": "n_resamples", "confidence": "confidence_level"})
def distance_decay(
    d: MatrixLike,
    geo: MatrixLike,
    *,
    model: str = "exponential",
    similarity: str = "1-d",
    offset: float | None = None,
    n_resamples: int = 999,
    confidence_level: float = 0.95,
    rng: RNGLike = None,
    grid: int = 100,
) -> DistanceDecayResult:
    r"""Distance decay: how similarity between sites falls with the distance between them.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarity in [0, 1] (Bray-Curtis, Jaccard, ...), or similarity with
        ``similarity='as-is'``.
    geo : DistanceMatrix, square array or square DataFrame
        Geographic or in-stream distance between sites.
    model : {'exponential', 'power'}, default 'exponential'
        'exponential': ``ln S = a + b g`` (log-linear); 'power': ``ln S = a + b ln g``
        (log-log) [1]_.
    similarity : {'1-d', 'as-is'}, default '1-d'
        How to get similarity ``S`` from ``d``: ``1 - d`` (``d`` must be at most 1), or
        ``d`` already holds similarities.
    offset : float, optional
        Zero similarities have no logarithm. By default those pairs are left out of the fit
        (counted in ``n_dropped`` and the notes); with ``offset`` the model is fitted to
        ``ln(S + offset)`` for every pair instead. In the power model pairs at distance 0
        are always left out.
    n_resamples : int, default 999
        Bootstrap resamples of sites for the intervals.
    confidence_level : float, default 0.95
        Level of the percentile intervals.
    rng : int, numpy.random.Generator or None
        Source of the bootstrap samples. When `rng` is None, a new `numpy.random.Generator` is
        created using entropy from the operating system.
    grid : int, default 100
        Number of distances in ``curve``.

    Returns
    -------
    DistanceDecayResult

    Other Parameters
    ----------------
    n_boot, confidence
        Deprecated names of ``n_resamples`` and ``confidence_level``, accepted with a
        DeprecationWarning for one release (giving both names is a TypeError).

    Notes
    -----
    The halving distance of the exponential model, ``ln 2 / -b``, is the distance over which
    similarity halves anywhere along the gradient [1]_. A power law has no such distance:
    similarity halves whenever distance is multiplied by ``2^(-1/b)``, reported as the
    halving factor.

    The pairs of sites are not independent (each site enters ``n - 1`` pairs), so intervals
    come from resampling **sites**, not pairs [1]_: each bootstrap sample draws ``n`` sites
    with replacement, keeps every pair of drawn sites (a site drawn ``c_i`` times and one
    drawn ``c_j`` times give ``c_i c_j`` copies of their pair), drops the pairs of a site with
    its own copies, and refits. This is computed exactly as a weighted least-squares fit with
    pair weights ``c_i c_j``. Intervals are percentile intervals; that of the halving
    quantity is the slope's interval mapped through the (monotone) halving formula.

    References
    ----------
    .. [1] Nekola, J. C. & White, P. S. (1999). The distance decay of similarity in
       biogeography and ecology. Journal of Biogeography 26: 867-878.
    .. [2] Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman &
       Hall, New York.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist, squareform
    >>> from gradients import DistanceMatrix, distance_decay
    >>> rng = np.random.default_rng(0)
    >>> xy = rng.uniform(0, 100, size=(30, 2)); g = pdist(xy)
    >>> s = 0.8 * np.exp(-0.02 * g + rng.normal(0, 0.05, g.size))
    >>> lab = [f"s{i}" for i in range(30)]
    >>> res = distance_decay(DistanceMatrix(1 - s, lab), DistanceMatrix(g, lab), rng=1)
    >>> round(res.slope, 2), round(res.halving)
    (-0.02, 35)
    """
    model = check_choice("model", model, MODELS)
    similarity = check_choice("similarity", similarity, SIMILARITIES)
    if offset is not None and not (isinstance(offset, numbers.Real) and offset > 0
                                   and np.isfinite(offset)):
        raise InputError(f"`offset` must be a positive number or None; got {offset!r}.")
    n_resamples = check_n_resamples(n_resamples)
    confidence_level = check_confidence_level(confidence_level)
    if not isinstance(grid, numbers.Integral) or grid < 2:
        raise InputError(f"`grid` must be an integer of at least 2; got {grid!r}.")
    gen = check_rng(rng)
    mats, labels = align_matrices({"d": d, "geo": geo})
    n = len(labels)
    dv = mats["d"].condensed.astype(np.float64)
    gv = mats["geo"].condensed.astype(np.float64)
    if similarity == "1-d":
        if dv.max() > 1 + 1e-12:
            raise InputError(
                f"similarity='1-d' needs dissimilarities of at most 1; the largest in `d` is "
                f"{dv.max():.6g}. Use a bounded dissimilarity (Bray-Curtis, Jaccard, ...) or "
                "pass similarities with similarity='as-is'.")
        s = np.clip(1.0 - dv, 0.0, None)
    else:
        s = dv
    notes: list[str] = []
    if offset is None:
        valid = s > 0
        n_zero = int(np.sum(~valid))
        ys = np.log(np.where(valid, s, 1.0))
        if n_zero:
            notes.append(f"{n_zero} pair(s) of sites with zero similarity (no shared taxa) were "
                         "left out of the log-scale fit; pass `offset` to keep them.")
    else:
        valid = np.ones(s.size, dtype=bool)
        ys = np.log(s + offset)
        notes.append(f"Fitted to ln(similarity + {offset:g}) so that zero similarities count.")
    if model == "power":
        at_zero = gv <= 0
        if at_zero.any():
            notes.append(f"{int(at_zero.sum())} pair(s) at distance 0 left out: the power model "
                         "needs ln(distance).")
        valid &= ~at_zero
        xs = np.log(np.where(gv > 0, gv, 1.0))
    else:
        xs = gv
    n_used = int(valid.sum())
    if n_used < 3 or np.ptp(xs[valid]) <= 0:
        raise InputError(f"Only {n_used} usable pair(s) of sites (or a single distance): no "
                         "decay can be fitted. Check for zero similarities, or pass `offset`.")
    if np.ptp(ys[valid]) <= 0:
        raise InputError(
            f"`d` gives the same similarity for every pair of sites used ({n_used} pairs): "
            "there is no decay to fit. Check that the right matrix was passed.")
    w = valid.astype(np.float64)
    sums = [np.sum(w), np.sum(w * xs), np.sum(w * ys), np.sum(w * xs * xs),
            np.sum(w * xs * ys)]
    slope, intercept = (float(v) for v in _fit_weighted(*(np.asarray(s_) for s_ in sums)))
    resid = ys[valid] - intercept - slope * xs[valid]
    tss = float(np.sum((ys[valid] - ys[valid].mean()) ** 2))
    r2 = 1.0 - float(resid @ resid) / tss if tss > 0 else float("nan")

    # bootstrap of sites: pair weights c_i c_j from multinomial site counts
    squares = [squareform(q * w, checks=False) for q in (np.ones_like(xs), xs, ys, xs * xs,
                                                          xs * ys)]
    boot = np.empty((n_resamples, 2))
    ranks = site_ranks(labels)  # counts drawn over label-sorted sites: row order does not matter
    for start in range(0, n_resamples, _BOOT_CHUNK):
        k = min(_BOOT_CHUNK, n_resamples - start)
        counts = gen.multinomial(n, np.full(n, 1.0 / n), size=k)[:, ranks].astype(np.float64)
        wsums = [0.5 * np.einsum("bi,bi->b", counts @ sq, counts) for sq in squares]
        bs, bi = _fit_weighted(*wsums)
        boot[start:start + k, 0] = bs
        boot[start:start + k, 1] = bi
    finite = np.isfinite(boot).all(axis=1)
    n_bad = int(np.sum(~finite))
    if n_bad:
        notes.append(f"{n_bad} bootstrap sample(s) had too few distinct distances to fit and "
                     "were left out of the intervals.")
    good = boot[finite]
    tail = (1.0 - confidence_level) / 2.0
    lo_s, hi_s = (float(v) for v in np.quantile(good[:, 0], [tail, 1 - tail]))
    lo_i, hi_i = (float(v) for v in np.quantile(good[:, 1], [tail, 1 - tail]))
    halving = float(_halving(slope, model))
    h_lo, h_hi = (float(v) for v in _halving(np.array([lo_s, hi_s]), model))
    if slope >= 0:
        notes.append("The fitted slope is not negative: similarity does not decay with "
                     "distance, so there is no halving distance (reported as inf).")
    elif hi_s >= 0:
        notes.append("The slope's interval reaches 0: the upper end of the halving interval "
                     "is unbounded (inf).")
    halving_name = "halving distance" if model == "exponential" else "halving factor"

    # fitted curve with pointwise bootstrap bands
    gmin = float(gv[valid].min())
    gmax = float(gv[valid].max())
    dist_grid = np.linspace(gmin if model == "exponential" else max(gmin, 1e-12), gmax,
                            int(grid))
    xg = dist_grid if model == "exponential" else np.log(dist_grid)
    shift = 0.0 if offset is None else float(offset)
    fitted = np.exp(intercept + slope * xg) - shift
    band = np.exp(good[:, 1][:, None] + good[:, 0][:, None] * xg[None, :]) - shift
    lo_band, hi_band = np.quantile(band, [tail, 1 - tail], axis=0)
    curve = pd.DataFrame({"distance": dist_grid, "fitted": fitted, "lower": lo_band,
                          "upper": hi_band})
    ii, jj = np.triu_indices(n, k=1)
    pairs = pd.DataFrame({"site_a": labels[ii], "site_b": labels[jj], "distance": gv,
                          "similarity": s, "used": valid})
    table = pd.DataFrame(
        {"estimate": [slope, intercept, halving],
         "lower": [lo_s, lo_i, h_lo],
         "upper": [hi_s, hi_i, h_hi]},
        index=pd.Index(["slope", "intercept", "halving"], name="parameter"))
    notes.insert(0, f"{model.capitalize()} model, ln(similarity) = a + b "
                    f"{'distance' if model == 'exponential' else 'ln(distance)'}; "
                    f"{halving_name} {halving:.4g}; {100 * confidence_level:g}% percentile "
                    f"intervals from {len(good)} bootstrap samples of sites (Nekola & White "
                    "1999).")
    return DistanceDecayResult(
        model=model,
        slope=slope,
        intercept=intercept,
        r2=r2,
        halving=halving,
        slope_interval=(lo_s, hi_s),
        halving_interval=(h_lo, h_hi),
        confidence_level=confidence_level,
        n_sites=n,
        n_pairs=n_used,
        n_dropped=int(s.size - n_used),
        n_resamples=n_resamples,
        bootstrap_distribution=boot,
        table=table,
        pairs=pairs,
        curve=curve,
        notes=tuple(notes),
    )
