"""A generating model from stated assumptions, for planning a survey without a pilot.

The user states the number of taxa, the strength of each gradient, the niche width, the
abundance level, the overdispersion and the spatial range of the gradients; sites are placed
at random in a square survey area and each gradient is a Gaussian random field over it.
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError
from ._model import GeneratingModelResult, _settings

__all__ = ["AssumedSites", "assumed_model"]

#: A projected CRS in metres for the invented survey area (UTM zone 30N).
ASSUMED_CRS = "EPSG:32630"


@dataclass(frozen=True)
class AssumedSites:
    """Sites at random in a square of side ``extent`` km; each gradient a Gaussian random field
    (mean 0, variance 1, exponential correlation ``exp(-d / spatial_range)``)."""

    gradients: tuple[str, ...]
    extent: float
    spatial_range: float

    n = 0  # no pilot to subsample

    @property
    def description(self) -> str:
        space = ("independent between sites (no spatial structure)" if self.spatial_range == 0
                 else f"a Gaussian random field with exponential correlation of range "
                      f"{self.spatial_range:g} km")
        return (f"Sites were placed uniformly at random in a square of {self.extent:g} km; each "
                f"gradient was standard normal, {space}; gradients were independent of each "
                "other.")

    def draw(self, n: int, labels: list[str], rng: np.random.Generator) -> tuple[pd.DataFrame,
                                                                                  Any]:
        import geopandas as gpd

        xy = rng.uniform(0.0, self.extent * 1000.0, size=(n, 2))
        k = len(self.gradients)
        if self.spatial_range > 0:
            d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1)) / 1000.0
            corr = np.exp(-d / self.spatial_range) + 1e-9 * np.eye(n)
            values = np.linalg.cholesky(corr) @ rng.standard_normal((n, k))
        else:
            values = rng.standard_normal((n, k))
        index = pd.Index(labels, name="site")
        env = pd.DataFrame(values, index=index, columns=list(self.gradients))
        geom = gpd.points_from_xy(xy[:, 0] + 500000.0, xy[:, 1] + 5500000.0)
        return env, gpd.GeoDataFrame(geometry=geom, index=index, crs=ASSUMED_CRS)


def _positive(value: object, name: str, *, zero: bool = False) -> float:
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    if not ok or value < 0 or (value == 0 and not zero):
        kind = "a non-negative" if zero else "a positive"
        raise InputError(f"`{name}` must be {kind} number; got {value!r}.")
    return float(value)


def assumed_model(
    strengths: Mapping[str, float],
    *,
    n_taxa: int = 30,
    niche_width: float = 1.0,
    abundance: float = 20.0,
    dispersion: float = 0.5,
    spatial_range: float = 0.0,
    extent: float = 10.0,
    optima: np.ndarray | None = None,
    settings: Mapping[str, Any] | None = None,
) -> GeneratingModelResult:
    """A generating model from stated assumptions, for planning without a pilot survey.

    Parameters
    ----------
    strengths : mapping
        Gradient name -> strength ``s`` (0: no effect). Each gradient is its own hypothesis.
    n_taxa : int, default 30
    niche_width : float, default 1.0
        Tolerance ``t`` of every taxon's Gaussian response.
    abundance : float, default 20.0
        Mean count of a taxon at its optimum.
    dispersion : float, default 0.5
        Negative binomial overdispersion (variance ``mu + dispersion * mu**2``).
    spatial_range : float, default 0
        Range in km of the exponential spatial correlation of each gradient (0: none).
    extent : float, default 10
        Side in km of the square survey area.
    optima : array (n_taxa, n_gradients), optional
        Each taxon's optimum ``u`` on each gradient; by default spread evenly over -2 to 2,
        in a different order on each gradient.
    settings : mapping, optional
        ``"section.key"`` settings the surveys are analysed with; by default the project
        defaults with a PCoA ordination.

    Returns
    -------
    GeneratingModelResult

    Notes
    -----
    The log mean count of taxon ``k`` at a site with gradient values ``z`` (standard normal)
    is ``log(abundance) - sum_j (s_j z_j - u_kj)^2 / (2 t^2)``, a Gaussian response with
    optimum ``u_kj / s_j`` and tolerance ``t / s_j`` on gradient ``j`` (ter Braak & Looman
    1986 [1]_); a strength of 0 gives no response. Expanded, it is the quadratic in ``z`` that
    :func:`fit_generating_model` fits to a pilot.

    References
    ----------
    .. [1] ter Braak, C. J. F. & Looman, C. W. N. (1986). Weighted averaging, logistic
       regression and the Gaussian response model. Vegetatio 65: 3-11.

    Examples
    --------
    >>> import gradients
    >>> model = gradients.assumed_model({"copper": 1.0, "depth": 0.0}, n_taxa=10)
    >>> model.predictors
    ('copper', 'depth')
    """
    if not isinstance(strengths, Mapping) or not strengths:
        raise InputError("`strengths` must be a mapping of gradient name -> strength, e.g. "
                         f"{{\"copper\": 1.0}}; got {strengths!r}.")
    names = tuple(str(g) for g in strengths)
    s = np.array([_positive(v, f"strengths[{g!r}]", zero=True) for g, v in strengths.items()])
    if not isinstance(n_taxa, numbers.Integral) or isinstance(n_taxa, bool) or n_taxa < 1:
        raise InputError(f"`n_taxa` must be a positive integer; got {n_taxa!r}.")
    t = _positive(niche_width, "niche_width")
    a = _positive(abundance, "abundance")
    disp = _positive(dispersion, "dispersion")
    rng_km = _positive(spatial_range, "spatial_range", zero=True)
    ext = _positive(extent, "extent")
    m, k = int(n_taxa), len(names)
    if optima is None:
        grid = -2.0 + 4.0 * (np.arange(m) + 0.5) / m
        step = max(1, m // (k + 1))
        u = np.column_stack([grid[(np.arange(m) * (1 + 2 * j) + j * step) % m]
                             for j in range(k)])
    else:
        u = np.asarray(optima, dtype=float)
        if u.shape != (m, k) or not np.all(np.isfinite(u)):
            raise InputError(f"`optima` must be a finite array of shape (n_taxa, n_gradients) "
                             f"= ({m}, {k}); got shape {u.shape}.")
    full = _settings({"analyses.ordination": "pcoa", **dict(settings or {})})
    hypotheses = {g: (g,) for g in names}
    return GeneratingModelResult(
        taxa=tuple(f"taxon{i + 1:02d}" for i in range(m)), predictors=names,
        groups={g: (g,) for g in names},
        intercept=np.log(a) - (u ** 2).sum(axis=1) / (2 * t * t),
        linear=s * u / (t * t), quadratic=np.tile(-(s ** 2) / (2 * t * t), (m, 1)),
        dispersion=np.full(m, disp), shrinkage=np.ones((m, k)), fitted=np.ones(m, dtype=bool),
        centre=np.zeros(k), scale=np.ones(k), cap=np.full(m, 10.0 * a), source="assumed",
        n_pilot=0, settings=full, hypotheses=hypotheses,
        sites=AssumedSites(names, ext, rng_km),
        notes=[f"Stated assumptions: {m} taxa, Gaussian responses of niche width {t:g} and "
               f"abundance {a:g} at the optimum, negative binomial overdispersion {disp:g}; "
               "strengths " + ", ".join(f"{g} {v:g}" for g, v in zip(names, s, strict=True))
               + ".", AssumedSites(names, ext, rng_km).description])
