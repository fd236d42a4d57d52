"""The generating model of a survey plan: each taxon's response to the hypothesis gradients.

Fitted to a pilot survey (:func:`fit_generating_model`) or built from stated assumptions
(:func:`assumed_model`, in :mod:`._assumed`): every taxon's count at a site is negative
binomial with a log mean that is a quadratic in each standardised predictor, a Gaussian
response curve (ter Braak & Looman 1986). New surveys are drawn from it by
:meth:`GeneratingModelResult.draw_community`; the sites come from the model's site source.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import RNGLike, check_rng

__all__ = ["MIN_OCCUPIED", "MIN_PILOT_SITES", "GeneratingModelResult", "fit_generating_model"]

#: Fewest pilot sites a generating model is fitted to.
MIN_PILOT_SITES = 8
#: A taxon found at fewer pilot sites than this is given no response (only its mean and spread).
MIN_OCCUPIED = 5
#: Range of the negative binomial overdispersion (variance = mu + dispersion mu^2).
DISPERSION_RANGE = (1e-4, 20.0)


@dataclass(frozen=True)
class GeneratingModelResult(ResultMixin):
    """How counts of each taxon respond to the predictors, for drawing new surveys.

    The log mean count of taxon ``k`` at a site with standardised predictors ``z`` is
    ``intercept[k] + linear[k] @ z + quadratic[k] @ z**2``; counts are negative binomial with
    variance ``mu + dispersion[k] * mu**2``.

    Attributes
    ----------
    taxa : tuple of str
    predictors : tuple of str
        The model's predictors: the hypotheses' (and covariables') variables in analysis units
        (``log10(Cu)``, log-ratio balances of a composition), standardised by ``centre`` and
        ``scale``.
    groups : dict
        Hypothesis name (or ``"covariables"``) -> its predictors.
    intercept, dispersion : ndarray (n_taxa,)
    linear, quadratic : ndarray (n_taxa, n_predictors)
    shrinkage : ndarray (n_taxa, n_groups)
        Factor each group's coefficients were multiplied by (1: kept, 0: no effect).
    fitted : ndarray of bool (n_taxa,)
        False for taxa too rare to fit (no response, only their mean and spread).
    centre, scale : ndarray (n_predictors,)
    cap : ndarray (n_taxa,)
        Largest mean count drawn for each taxon (a guard against extrapolating a fitted curve).
    source : {'pilot', 'assumed'}
    n_pilot : int
        Sites of the pilot (0 for an assumed model).
    settings, hypotheses : dict
        The project settings and hypotheses the simulated surveys are analysed with.
    sites : object
        Where new sites come from (resampled pilot sites, or the assumed area).
    notes : list of str
        What was estimated and how.
    """

    taxa: tuple[str, ...]
    predictors: tuple[str, ...]
    groups: dict[str, tuple[str, ...]]
    intercept: np.ndarray
    linear: np.ndarray
    quadratic: np.ndarray
    dispersion: np.ndarray
    shrinkage: np.ndarray
    fitted: np.ndarray
    centre: np.ndarray
    scale: np.ndarray
    cap: np.ndarray
    source: str
    n_pilot: int
    settings: dict[str, Any] = field(repr=False)
    hypotheses: dict[str, tuple[str, ...]] = field(repr=False)
    sites: Any = field(repr=False)
    notes: list[str] = field(default_factory=list)

    @property
    def table(self) -> pd.DataFrame:
        """One row per taxon and predictor: group, linear and quadratic coefficient, shrinkage."""
        rows = []
        gnames = list(self.groups)
        for k, taxon in enumerate(self.taxa):
            for j, pred in enumerate(self.predictors):
                g = next(n for n, cols in self.groups.items() if pred in cols)
                rows.append({"taxon": taxon, "group": g, "predictor": pred,
                             "linear": float(self.linear[k, j]),
                             "quadratic": float(self.quadratic[k, j]),
                             "shrinkage": float(self.shrinkage[k, gnames.index(g)]),
                             "fitted": bool(self.fitted[k])})
        return pd.DataFrame(rows)

    @property
    def taxa_table(self) -> pd.DataFrame:
        """One row per taxon: intercept, dispersion, mean cap and whether it was fitted."""
        return pd.DataFrame({"intercept": self.intercept, "dispersion": self.dispersion,
                             "cap": self.cap, "fitted": self.fitted},
                            index=pd.Index(self.taxa, name="taxon"))

    def log_mean(self, z: np.ndarray, *, null: tuple[str, ...] = ()) -> np.ndarray:
        """Log mean counts ``(n_sites, n_taxa)`` at standardised predictors ``z``.

        The groups named in ``null`` are given no effect (their coefficients set to zero).
        """
        lin, quad = self.linear, self.quadratic
        if null:
            off = np.array([any(p in self.groups[g] for g in null) for p in self.predictors])
            lin = np.where(off, 0.0, lin)
            quad = np.where(off, 0.0, quad)
        return self.intercept + z @ lin.T + (z * z) @ quad.T

    def draw_community(self, z: np.ndarray, labels: list[str], rng: np.random.Generator, *,
                       null: tuple[str, ...] = ()) -> pd.DataFrame:
        """Counts of every taxon at sites with standardised predictors ``z``.

        Gamma-Poisson draws (negative binomial, [2]_); a site left with no individual at all is
        drawn again (up to 50 times), since a survey records no empty sample.
        """
        mu = np.minimum(np.exp(self.log_mean(z, null=null)), self.cap)
        out = _negative_binomial(mu, self.dispersion, rng)
        for _ in range(50):
            empty = out.sum(axis=1) == 0
            if not empty.any():
                break
            out[empty] = _negative_binomial(mu[empty], self.dispersion, rng)
        empty = out.sum(axis=1) == 0
        if empty.any():  # a last resort: one individual of the site's most likely taxon
            out[empty, np.argmax(mu[empty], axis=1)] = 1
        return pd.DataFrame(out, index=pd.Index(labels, name="site"), columns=list(self.taxa))

    def standardise(self, tables: Mapping[str, pd.DataFrame]) -> np.ndarray:
        """Standardised predictors ``(n_sites, n_predictors)`` from analysis-unit tables."""
        cols = []
        for g, names in self.groups.items():
            t = tables[g]
            cols += [t[c].to_numpy(dtype=float) for c in names]
        z = np.column_stack(cols) if cols else np.zeros((0, 0))
        return (z - self.centre) / self.scale


def _negative_binomial(mu: np.ndarray, dispersion: np.ndarray,
                       rng: np.random.Generator) -> np.ndarray:
    shape = 1.0 / dispersion
    lam = rng.gamma(shape, mu / shape)
    return rng.poisson(lam).astype(np.int64)


# ---------------------------------------------------------------------------- fitting


def _design(z: np.ndarray) -> np.ndarray:
    return np.column_stack([np.ones(len(z)), z, z * z])


def _dispersion_moments(y: np.ndarray, mu: np.ndarray) -> float:
    """Cameron & Trivedi's (1990) regression estimate of the NB2 overdispersion."""
    den = float(np.sum(mu * mu))
    a = float(np.sum((y - mu) ** 2 - y)) / den if den > 0 else DISPERSION_RANGE[0]
    return float(np.clip(a, *DISPERSION_RANGE))


def _fit_taxon(y: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, float] | None:
    """NB GLM fit of one taxon: coefficients, their covariance and the dispersion (None if the
    fit fails or does not converge)."""
    import statsmodels.api as sm

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            pois = sm.GLM(y, x, family=sm.families.Poisson()).fit(maxiter=100)
            alpha = _dispersion_moments(y, pois.fittedvalues)
            nb = sm.GLM(y, x, family=sm.families.NegativeBinomial(alpha=alpha)).fit(maxiter=100)
        except (ValueError, np.linalg.LinAlgError, FloatingPointError,
                OverflowError):  # separation, singular design
            return None
        if not nb.converged or not np.all(np.isfinite(nb.params)):
            return None
        cov = np.asarray(nb.cov_params())
        if not np.all(np.isfinite(cov)):
            return None
        alpha = _dispersion_moments(y, nb.fittedvalues)
    return np.asarray(nb.params), cov, alpha


def _wald(beta: np.ndarray, cov: np.ndarray, idx: np.ndarray) -> float:
    """Wald statistic of the coefficients ``idx`` (0 when it cannot be computed)."""
    b = beta[idx]
    try:
        w = float(b @ np.linalg.solve(cov[np.ix_(idx, idx)], b))
    except np.linalg.LinAlgError:
        return 0.0
    return w if np.isfinite(w) and w > 0 else 0.0


def _group_index(cols: list[int], p: int) -> np.ndarray:
    """Columns of the design (intercept, linear, quadratic) holding one group's terms."""
    c = np.asarray(cols)
    return np.r_[c + 1, c + 1 + p]


def _fit_all(counts: np.ndarray, z: np.ndarray, min_occupied: int) -> list[Any]:
    n = counts.shape[0]
    x = _design(z)
    fits = []
    for k in range(counts.shape[1]):
        y = counts[:, k].astype(float)
        ok = np.count_nonzero(y) >= max(min_occupied, 1) and n > x.shape[1]
        fits.append(_fit_taxon(y, x) if ok else None)
    return fits


def _null_wald(counts: np.ndarray, z: np.ndarray, groups: list[list[int]], min_occupied: int,
               order: np.ndarray, rng: np.random.Generator, repeats: int) -> np.ndarray:
    """Mean Wald statistic per coefficient of each group when it has no effect: the group's
    predictors permuted among the sites (``order``: sites sorted by label) and every taxon
    refitted, ``repeats`` times."""
    p = z.shape[1]
    out = np.ones(len(groups))
    for gi, cols in enumerate(groups):
        total, dof = 0.0, 0
        for _ in range(repeats):
            zp = z.copy()
            perm = np.empty(len(order), dtype=np.intp)
            perm[order] = order[rng.permutation(len(order))]
            zp[:, cols] = z[perm][:, cols]
            idx = _group_index(cols, p)
            for fit in _fit_all(counts, zp, min_occupied):
                if fit is not None:
                    total += _wald(fit[0], fit[1], idx)
                    dof += len(idx)
        out[gi] = max(1.0, total / dof) if dof else 1.0
    return out


def fit_counts(counts: np.ndarray, z: np.ndarray, groups: list[list[int]], *,
               min_occupied: int = MIN_OCCUPIED, order: np.ndarray | None = None,
               rng: np.random.Generator | None = None,
               calibration: int = 2) -> dict[str, np.ndarray]:
    """Fit the generating model's coefficients to a count table ``(n_sites, n_taxa)``.

    ``z`` holds the standardised predictors and ``groups`` the predictor columns of each
    group. Each group's coefficients of each taxon are multiplied by ``max(0, 1 - c k / W)``:
    ``W`` their Wald statistic, ``k`` their number and ``c`` the mean Wald statistic per
    coefficient with the group's predictors permuted among sites (``calibration`` times; at
    least 1, the heuristic's own value). Returns intercepts, linear and quadratic
    coefficients, dispersions, shrinkage factors, null inflation ``c``, fitted flags, caps.
    """
    n, m = counts.shape
    p = z.shape[1]
    order = np.arange(n) if order is None else np.asarray(order)
    rng = np.random.default_rng(0) if rng is None else rng
    inflation = (_null_wald(counts, z, groups, min_occupied, order, rng, calibration)
                 if calibration else np.ones(len(groups)))
    out = {"intercept": np.zeros(m), "linear": np.zeros((m, p)), "quadratic": np.zeros((m, p)),
           "dispersion": np.zeros(m), "shrinkage": np.zeros((m, len(groups))),
           "fitted": np.zeros(m, dtype=bool), "cap": np.zeros(m), "inflation": inflation}
    for k, fit in enumerate(_fit_all(counts, z, min_occupied)):
        y = counts[:, k].astype(float)
        mean = max(float(y.mean()), 1e-3)
        out["cap"][k] = max(2.0 * float(y.max()), 1.0)
        if fit is None:
            out["intercept"][k] = np.log(mean)
            out["dispersion"][k] = _dispersion_moments(y, np.full(n, mean))
            continue
        beta, cov, alpha = fit
        lin, quad = beta[1:1 + p].copy(), beta[1 + p:].copy()
        for gi, cols in enumerate(groups):
            idx = _group_index(cols, p)
            w = _wald(beta, cov, idx)
            f = max(0.0, 1.0 - inflation[gi] * len(idx) / w) if w > 0 else 0.0
            out["shrinkage"][k, gi] = f
            lin[cols] *= f
            quad[cols] *= f
        eta = z @ lin + (z * z) @ quad
        top = float(eta.max())  # log of the mean of exp(eta), computed safely
        # the intercept keeps the taxon's mean count over the pilot sites
        out["intercept"][k] = np.log(mean) - (top + np.log(np.mean(np.exp(eta - top))))
        out["linear"][k], out["quadratic"][k] = lin, quad
        out["dispersion"][k] = alpha
        out["fitted"][k] = True
    return out


def _pilot_frames(pilot: Any) -> tuple[pd.DataFrame, pd.DataFrame, Any]:
    for attr in ("community", "environment"):
        if not isinstance(getattr(pilot, attr, None), pd.DataFrame):
            raise InputError(f"`pilot` must be a Survey (with .community and .environment "
                             f"tables); got {type(pilot).__name__}.")
    return pilot.community, pilot.environment, getattr(pilot, "locations", None)


def check_hypotheses(hypotheses: object, environment: pd.DataFrame,
                     covariables: tuple[str, ...] = ()) -> dict[str, tuple[str, ...]]:
    """The hypotheses as name -> variables, every variable a numeric pilot column."""
    if not isinstance(hypotheses, Mapping) or not hypotheses:
        raise InputError("`hypotheses` must be a mapping of hypothesis name -> list of "
                         "variables, e.g. {\"contamination\": [\"Cu\", \"Zn\"]}; got "
                         f"{hypotheses!r}.")
    out: dict[str, tuple[str, ...]] = {}
    for name, variables in hypotheses.items():
        vs = (variables,) if isinstance(variables, str) else tuple(variables)
        if not vs:
            raise InputError(f"Hypothesis {name!r} lists no variables.")
        out[str(name)] = vs
    named = [v for vs in out.values() for v in vs] + list(covariables)
    absent = [v for v in named if v not in environment.columns]
    if absent:
        raise InputError(
            f"The hypotheses name {format_items(absent)}, which the pilot's environmental "
            f"table does not have (it has {format_items(environment.columns, limit=30)}). Fix "
            "the names, or measure those variables in the pilot.", columns=absent)
    text = [v for v in named if not pd.api.types.is_numeric_dtype(environment[v])
            or pd.api.types.is_bool_dtype(environment[v])]
    if text:
        raise InputError(f"{format_items(text)} are categorical; the generating model of a "
                         "survey plan responds to numeric gradients only. Leave them out of "
                         "the hypotheses of the plan.", columns=text)
    return out


def fit_generating_model(
    pilot: Any,
    hypotheses: Mapping[str, object],
    *,
    settings: Mapping[str, Any] | None = None,
    jitter: float = 0.1,
    min_occupied: int = MIN_OCCUPIED,
    rng: RNGLike = None,
) -> GeneratingModelResult:
    """Fit the generating model of a survey plan to a pilot survey.

    Parameters
    ----------
    pilot : Survey
        The pilot survey: counts of each taxon, the environment and (optionally) locations.
    hypotheses : mapping
        Hypothesis name -> its variables (columns of the pilot's environmental table).
    settings : mapping, optional
        ``"section.key"`` project settings (transforms, dissimilarity, covariables, geography);
        the simulated surveys are analysed with them. Defaults for those not given.
    jitter : float, default 0.1
        Spread of the jitter given to resampled sites, as a share of each variable's spread
        (and of the median distance to the nearest pilot site).
    min_occupied : int, default 5
        Taxa found at fewer pilot sites are given no response to the predictors.
    rng : int, numpy.random.Generator or None
        Source of the permutations that calibrate the shrinkage. When `rng` is None, a new
        `numpy.random.Generator` is created using entropy from the operating system.

    Returns
    -------
    GeneratingModelResult

    Notes
    -----
    Each hypothesis' variables are taken in the report's analysis units (``environment.log10``
    as log10, a composition as isometric log-ratio balances) and standardised. Each taxon's
    counts are fitted by a negative binomial GLM (log link) with a linear and a quadratic term
    in every predictor: a Gaussian response curve when the quadratic coefficient is negative
    [1]_. The overdispersion comes from a Poisson fit by the regression estimate of Cameron &
    Trivedi [2]_, the GLM is refitted with it, and it is estimated again from the final means.
    A pilot of a few dozen sites cannot pin down a dozen coefficients per taxon, and chance
    fits would plant effects that are not there; so each hypothesis' coefficients of each taxon
    are shrunk towards no effect by the heuristic factor ``max(0, 1 - c k/W)`` [3]_ (``W`` the
    Wald statistic of its ``k`` coefficients), and the intercept is then set so that the
    taxon's mean count over the pilot sites is kept. The heuristic takes ``c = 1``, the mean of
    ``W / k`` under no effect in large samples; with few sites and many terms the Wald
    statistic runs larger, so ``c`` is estimated: the mean of ``W / k`` over all taxa refitted
    with the hypothesis' predictors permuted among the sites (twice; never below 1). Taxa
    found at fewer than ``min_occupied`` sites, and fits that fail, get no response (their
    mean and spread only).

    References
    ----------
    .. [1] ter Braak, C. J. F. & Looman, C. W. N. (1986). Weighted averaging, logistic
       regression and the Gaussian response model. Vegetatio 65: 3-11.
    .. [2] Cameron, A. C. & Trivedi, P. K. (1990). Regression-based tests for overdispersion
       in the Poisson model. Journal of Econometrics 46: 347-364.
    .. [3] Van Houwelingen, J. C. & le Cessie, S. (1990). Predictive value of statistical
       models. Statistics in Medicine 9: 1303-1325.

    Examples
    --------
    >>> import gradients
    >>> pilot = gradients.simulate_survey(rng=3, n_sites=30)
    >>> model = gradients.fit_generating_model(pilot, {"metals": ["Cu", "Zn"]})
    >>> model.predictors
    ('Cu', 'Zn')
    """
    from ._sites import PilotSites, analysis_context

    community, environment, locations = _pilot_frames(pilot)
    full = _settings(settings)
    hyps = check_hypotheses(hypotheses, environment, tuple(full["design.covariables"]))
    n = community.shape[0]
    if n < MIN_PILOT_SITES:
        raise InputError(f"The pilot has {n} sites; a generating model needs at least "
                         f"{MIN_PILOT_SITES}. Plan from stated assumptions (assumed_model) "
                         "instead, or survey more pilot sites.")
    if not (isinstance(jitter, int | float) and 0 <= jitter <= 1):
        raise InputError(f"`jitter` must be a number from 0 to 1; got {jitter!r}.")
    values = community.to_numpy(dtype=float)
    notes = []
    counts = np.rint(values)
    if not np.allclose(values, counts):
        notes.append("The pilot's abundances are not whole numbers; they were rounded for the "
                     "count model.")
    ctx = analysis_context(community, environment, locations, full, hyps)
    tables = dict(ctx.results["hypothesis_tables"])
    groups: dict[str, tuple[str, ...]] = {g: tuple(map(str, t.columns)) for g, t in tables.items()}
    if full["design.covariables"]:
        from ..report.steps.community import _hypothesis_table

        tables["covariables"] = _hypothesis_table(ctx, tuple(full["design.covariables"]))
        groups["covariables"] = tuple(map(str, tables["covariables"].columns))
    raw = np.column_stack([tables[g][c].to_numpy(dtype=float)
                           for g, cols in groups.items() for c in cols])
    centre = raw.mean(axis=0)
    scale = raw.std(axis=0)
    scale[scale == 0] = 1.0
    z = (raw - centre) / scale
    names = [c for cols in groups.values() for c in cols]
    col_groups, start = [], 0
    for cols in groups.values():
        col_groups.append(list(range(start, start + len(cols))))
        start += len(cols)
    from ..permutation import site_ranks

    order = np.argsort(site_ranks(community.index))  # permutations over label-sorted sites
    coef = fit_counts(counts, z, col_groups, min_occupied=min_occupied, order=order,
                      rng=check_rng(rng))
    n_fit = int(coef["fitted"].sum())
    notes.append(
        f"Estimated from the {n}-site pilot: each of {n_fit} of {len(community.columns)} taxa "
        "was fitted by a negative binomial GLM (statsmodels) with a linear and a quadratic term "
        f"in each of the {len(names)} standardised predictors; each hypothesis' coefficients "
        "were shrunk towards no effect by the factor max(0, 1 - c k/W) of Van Houwelingen & le "
        "Cessie (1990), with c the mean Wald statistic per coefficient when the hypothesis' "
        "predictors were permuted among the sites ("
        + ", ".join(f"{g} {c:.2f}" for g, c in zip(groups, coef["inflation"], strict=True))
        + "), and the intercept reset to keep the taxon's mean count; the overdispersion of "
        "each taxon came from its fit (Cameron & Trivedi 1990).")
    rare = len(community.columns) - n_fit
    if rare:
        notes.append(f"{rare} taxa were too rare to fit (found at fewer than {min_occupied} "
                     "pilot sites) or their fit failed: they were given no response to the "
                     "predictors, only their mean count and its spread.")
    site_source = PilotSites.from_pilot(environment, ctx, full, jitter=float(jitter))
    notes.append(site_source.description)
    notes.append("Counts at different sites were drawn independently given the environment: "
                 "community structure in space beyond what the environment carries is not "
                 "modelled.")
    return GeneratingModelResult(
        taxa=tuple(map(str, community.columns)), predictors=tuple(names), groups=groups,
        intercept=coef["intercept"], linear=coef["linear"], quadratic=coef["quadratic"],
        dispersion=coef["dispersion"], shrinkage=coef["shrinkage"], fitted=coef["fitted"],
        centre=centre, scale=scale, cap=coef["cap"], source="pilot", n_pilot=n,
        settings=full, hypotheses=hyps, sites=site_source, notes=notes)


def _settings(settings: Mapping[str, Any] | None) -> dict[str, Any]:
    from ..report._project import defaults

    full = defaults()
    if settings is not None:
        unknown = sorted(set(settings) - set(full))
        if unknown:
            raise InputError(f"`settings` has unknown keys {format_items(unknown)}; keys are "
                             "\"section.key\" names of docs/project-file.md.")
        full.update(settings)
    return full
