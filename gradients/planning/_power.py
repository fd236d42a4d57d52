"""Survey power: how many sites it takes to detect each hypothesis, by simulation.

:func:`survey_power` draws many surveys of each size from a generating model (fitted to a
pilot survey, or stated), analyses each as ``gradients run`` would, and records the share that
detect each hypothesis at ``alpha`` (the power) and the share that detect it when its effect
is set to zero (the false detections). Below the pilot's size it also subsamples the pilot
itself without replacement, which needs no model.
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import RNGLike, check_n_jobs, check_n_resamples, seed_sequence
from ._model import GeneratingModelResult, fit_generating_model
from ._simulate import TESTS, simulated_detections, subsample_detections

__all__ = ["MIN_SITES", "SurveyPowerResult", "survey_power"]

#: Fewest sites of a planned survey.
MIN_SITES = 5
#: Confidence level of the binomial intervals of power and false detection.
INTERVAL_LEVEL = 0.95
#: Interval of a share of surveys (statsmodels ``proportion_confint`` method): Wilson's score
#: interval, which keeps its coverage near the nominal level for shares near 0 or 1.
INTERVAL_METHOD = "wilson"

_SIM, _SUB, _BOOT, _FIT = 0, 1, 2, 3  # kinds of draw, in their seeds' spawn keys


def binomial_interval(count: int, total: int) -> tuple[float, float]:
    """Wilson score interval (95 %) of a share ``count / total`` (statsmodels)."""
    from statsmodels.stats.proportion import proportion_confint

    lo, hi = proportion_confint(count, total, alpha=1 - INTERVAL_LEVEL, method=INTERVAL_METHOD)
    share = count / total  # the interval holds the share (not only up to rounding)
    return min(float(lo), share), max(float(hi), share)


@dataclass(frozen=True)
class SurveyPowerResult(ResultMixin):
    """Power of each test to detect each hypothesis, by number of sites.

    Attributes
    ----------
    table : DataFrame
        One row per hypothesis, test, number of sites and method (``'simulation'`` from the
        generating model, ``'subsample'`` of the pilot without replacement): ``power`` with
        its 95 % Wilson interval ``power_low``, ``power_high``; ``false_detection`` (the share
        of surveys detecting the hypothesis when its effect was set to zero) with
        ``false_low``, ``false_high``; ``n_surveys``; with bootstrap resamples of the pilot,
        ``bootstrap_low`` and ``bootstrap_high`` (10th and 90th percentiles of power across
        the models refitted to them).
    smallest_n : DataFrame
        Per hypothesis and test, the smallest simulated number of sites whose power reaches
        ``target_power`` (NaN when none does).
    target_power, alpha : float
    n_surveys, n_resamples, n_bootstrap : int
    tests : tuple of str
    model : GeneratingModelResult
        The generating model (its ``.table`` holds the parameters).
    bootstrap : DataFrame or None
        Power per bootstrap model (``resample`` column).
    notes : list of str
    """

    table: pd.DataFrame
    target_power: float
    alpha: float
    n_surveys: int
    n_resamples: int
    n_bootstrap: int
    tests: tuple[str, ...]
    model: GeneratingModelResult = field(repr=False)
    bootstrap: pd.DataFrame | None = field(default=None, repr=False)
    notes: list[str] = field(default_factory=list)

    @property
    def smallest_n(self) -> pd.DataFrame:
        return self.sites_needed(self.target_power)

    def sites_needed(self, target: float | None = None) -> pd.DataFrame:
        """Smallest simulated number of sites with power at least ``target`` (default the
        result's ``target_power``), per hypothesis and test; NaN when no size reaches it."""
        target = self.target_power if target is None else _share(target, "target")
        sim = self.table[self.table["method"] == "simulation"]
        rows = []
        for (h, t), g in sim.groupby(["hypothesis", "test"], sort=False):
            ok = g.loc[g["power"] >= target, "n_sites"]
            rows.append({"hypothesis": h, "test": t,
                         "n_sites": float(ok.min()) if len(ok) else np.nan,
                         "largest_simulated": int(g["n_sites"].max()),
                         "power_at_largest": float(g.loc[g["n_sites"].idxmax(), "power"])})
        return pd.DataFrame(rows).set_index(["hypothesis", "test"])


def _share(value: object, name: str) -> float:
    if not isinstance(value, numbers.Real) or isinstance(value, bool) or not 0 < value < 1:
        raise InputError(f"`{name}` must be a number between 0 and 1; got {value!r}.")
    return float(value)


def _sizes(n_sites: object) -> tuple[int, ...]:
    values = [n_sites] if isinstance(n_sites, numbers.Integral) else n_sites
    if not isinstance(values, Sequence | np.ndarray) or isinstance(values, str) \
            or len(values) == 0:
        raise InputError(f"`n_sites` must be a list of site counts, e.g. (20, 40, 60); got "
                         f"{n_sites!r}.")
    out = []
    for v in values:
        if not isinstance(v, numbers.Integral) or isinstance(v, bool):
            raise InputError(f"`n_sites` must hold whole numbers; got {v!r}.")
        out.append(int(v))
    small = [v for v in out if v < MIN_SITES]
    if small:
        raise InputError(f"`n_sites` has site counts below {MIN_SITES} ({format_items(small)}): "
                         "a survey needs at least 5 sites for a permutation test to reach "
                         "p < 0.05. Plan larger surveys.")
    return tuple(sorted(set(out)))


def _check(tests: object, n_surveys: object, n_bootstrap: object) -> tuple[tuple[str, ...], int,
                                                                           int]:
    names = (tests,) if isinstance(tests, str) else tuple(tests)  # type: ignore[arg-type]
    bad = [t for t in names if t not in TESTS]
    if not names or bad:
        raise InputError(f"`tests` must name tests among {format_items(TESTS)}; got "
                         f"{format_items(bad) if bad else 'none'}.")
    if not isinstance(n_surveys, numbers.Integral) or isinstance(n_surveys, bool) \
            or n_surveys < 1:
        raise InputError(f"`n_surveys` must be a positive integer; got {n_surveys!r}.")
    if not isinstance(n_bootstrap, numbers.Integral) or isinstance(n_bootstrap, bool) \
            or n_bootstrap < 0:
        raise InputError(f"`n_bootstrap` must be zero or a positive integer; got "
                         f"{n_bootstrap!r}.")
    return tuple(dict.fromkeys(names)), int(n_surveys), int(n_bootstrap)


def _child(root: np.random.SeedSequence, *key: int) -> np.random.SeedSequence:
    """The seed of one survey: a fixed child of the root, whatever runs before or beside it."""
    return np.random.SeedSequence(root.entropy, spawn_key=(*root.spawn_key, *key))


def survey_power(
    pilot: Any,
    hypotheses: Mapping[str, object] | None = None,
    *,
    n_sites: Sequence[int] = (20, 40, 60, 80),
    n_surveys: int = 200,
    n_resamples: int = 199,
    alpha: float = 0.05,
    tests: Sequence[str] = ("partial_mantel",),
    target_power: float = 0.8,
    settings: Mapping[str, Any] | None = None,
    subsample: bool = True,
    n_bootstrap: int = 0,
    jitter: float = 0.1,
    rng: RNGLike = None,
    n_jobs: int | None = -1,
) -> SurveyPowerResult:
    """Power to detect each hypothesis with surveys of ``n_sites`` sites, by simulation.

    Parameters
    ----------
    pilot : Survey or GeneratingModelResult
        A pilot survey (a generating model is fitted to it with
        :func:`fit_generating_model`), or a model from :func:`assumed_model` (planning
        without a pilot) or from :func:`fit_generating_model`.
    hypotheses : mapping, optional
        Hypothesis name -> variables; required with a pilot survey (a model brings its own).
    n_sites : sequence of int, default (20, 40, 60, 80)
        Numbers of sites of the planned surveys (each at least 5).
    n_surveys : int, default 200
        Surveys simulated per number of sites.
    n_resamples : int, default 199
        Permutations of each test in each survey.
    alpha : float, default 0.05
        Level at which a test detects a hypothesis.
    tests : sequence of str, default ('partial_mantel',)
        Tests to plan for: 'partial_mantel' (each hypothesis given the others, the covariables
        and space), 'mantel' (each hypothesis alone), 'vectors' (a hypothesis is detected when
        any of its variables, fitted onto the ordination, is significant after the Holm
        adjustment).
    target_power : float, default 0.8
        Power the smallest number of sites is sought for.
    settings : mapping, optional
        ``"section.key"`` project settings for analysing the surveys (with a pilot survey).
    subsample : bool, default True
        Below the pilot's size, also subsample the pilot without replacement.
    n_bootstrap : int, default 0
        Refit the model to this many bootstrap resamples of the pilot and simulate from each
        (``n_surveys`` surveys per size each), to show how uncertain the power is because the
        model was fitted to a pilot.
    jitter : float, default 0.1
        Jitter of resampled pilot sites (see :func:`fit_generating_model`).
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system. Survey ``i`` of size ``n`` draws from its own child of one
        :class:`~numpy.random.SeedSequence`, so the table does not depend on ``n_jobs``.
    n_jobs : int or None, default -1
        Workers of each permutation test, as in :func:`gradients.permutation.permutation_test`
        (-1: up to all cores by the engine's size rule, which keeps the short tests of a
        simulated survey on one worker).

    Returns
    -------
    SurveyPowerResult

    Notes
    -----
    Each simulated survey is analysed with the report's own steps and test functions
    (:mod:`gradients.report.steps`), with the project's controls, ``n_resamples`` permutations
    and no spatially constrained null. Each test stops early, by the sequential rule of Besag &
    Clifford [1]_, once ``floor(alpha * n_resamples) + 1`` permuted statistics are at least as
    extreme as the observed one: its p-value can then no longer reach ``alpha``, so stopping
    saves time without changing any detection. Each survey has a twin with the same sites whose
    counts are drawn with every hypothesis' effect set to zero: the share of twins in which a
    hypothesis is detected is its false detection rate, which should be near ``alpha``. Shares
    carry 95 % Wilson score intervals [2]_ (statsmodels ``proportion_confint``). Power is that
    of the generating model: it is only as good as the model fitted to the pilot.

    References
    ----------
    .. [1] Besag, J. & Clifford, P. (1991). Sequential Monte Carlo p-values. Biometrika 78:
       301-304.
    .. [2] Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
       inference. Journal of the American Statistical Association 22: 209-212.

    Examples
    --------
    >>> import gradients
    >>> model = gradients.assumed_model({"copper": 2.0}, n_taxa=10)
    >>> res = gradients.survey_power(model, n_sites=(10,), n_surveys=4, n_resamples=19,
    ...                              tests=("mantel",), rng=1)
    >>> res.table[["hypothesis", "n_sites", "n_surveys"]].to_dict("records")
    [{'hypothesis': 'copper', 'n_sites': 10, 'n_surveys': 4}]
    """
    from ..permutation import current_reporter, report_progress

    sizes = _sizes(n_sites)
    tests_, n_surveys, n_bootstrap = _check(tests, n_surveys, n_bootstrap)
    n_resamples = check_n_resamples(n_resamples)
    alpha = _share(alpha, "alpha")
    target_power = _share(target_power, "target_power")
    n_jobs = check_n_jobs(n_jobs)
    if isinstance(pilot, GeneratingModelResult):
        if hypotheses is not None and dict(hypotheses) != dict(pilot.hypotheses):
            raise InputError("A generating model brings its own hypotheses; leave "
                             "`hypotheses` out (or refit the model with them).")
        model, survey = pilot, None
        if n_bootstrap:
            raise InputError("`n_bootstrap` resamples a pilot survey; pass the pilot itself, "
                             "not a model.")
    else:
        if hypotheses is None:
            raise InputError("`hypotheses` is required with a pilot survey: name -> variables.")
        root = seed_sequence(rng)
        model = fit_generating_model(pilot, hypotheses, settings=settings, jitter=jitter,
                                     rng=np.random.default_rng(_child(root, _FIT)))
        survey = pilot
    root = seed_sequence(rng) if survey is None else root
    sub_sizes = [n for n in sizes if survey is not None and subsample and n < model.n_pilot]
    total = len(sizes) * n_surveys * (1 + n_bootstrap) + len(sub_sizes) * n_surveys
    reporter = current_reporter()
    done = 0

    def tick() -> None:
        nonlocal done
        done += 1
        if reporter is not None:
            reporter("simulating surveys", done, total)

    kw = {"tests": tests_, "alpha": alpha, "n_resamples": n_resamples, "n_jobs": n_jobs}
    rows = []
    with report_progress(None):  # the surveys' own tests are too short to report
        for n in sizes:
            hits, nulls = [], []
            for i in range(n_surveys):
                found, twin = simulated_detections(model, n, _child(root, _SIM, n, i), **kw)
                hits.append(found)
                nulls.append(twin)
                tick()
            rows += _rows(model, tests_, n, "simulation", hits, nulls)
        for n in sub_sizes:
            hits = []
            for i in range(n_surveys):
                hits.append(subsample_detections(model, survey, n, _child(root, _SUB, n, i),
                                                 **kw))
                tick()
            rows += _rows(model, tests_, n, "subsample", hits, None)
        boot = _bootstrap(survey, model, hypotheses, settings, jitter, sizes, n_surveys,
                          n_bootstrap, root, kw, tick) if n_bootstrap else None
    table = pd.DataFrame(rows)
    if boot is not None:
        spread = (boot.groupby(["hypothesis", "test", "n_sites"])["power"]
                  .quantile([0.1, 0.9]).unstack())
        spread.columns = ["bootstrap_low", "bootstrap_high"]
        table = table.merge(spread.reset_index(), on=["hypothesis", "test", "n_sites"],
                            how="left")
        table.loc[table["method"] != "simulation", ["bootstrap_low", "bootstrap_high"]] = np.nan
    notes = list(model.notes) + _notes(model, alpha, n_resamples, sub_sizes, n_bootstrap)
    return SurveyPowerResult(table=table, target_power=target_power, alpha=alpha,
                             n_surveys=n_surveys, n_resamples=n_resamples,
                             n_bootstrap=n_bootstrap, tests=tests_, model=model,
                             bootstrap=boot, notes=notes)


def _rows(model: GeneratingModelResult, tests: tuple[str, ...], n: int, method: str,
          hits: list[dict[tuple[str, str], bool]],
          nulls: list[dict[tuple[str, str], bool]] | None) -> list[dict[str, Any]]:
    rows = []
    for h in model.hypotheses:
        for t in tests:
            k = sum(d[(t, h)] for d in hits)
            lo, hi = binomial_interval(k, len(hits))
            row = {"hypothesis": h, "test": t, "n_sites": n, "method": method,
                   "power": k / len(hits), "power_low": lo, "power_high": hi,
                   "false_detection": np.nan, "false_low": np.nan, "false_high": np.nan,
                   "n_surveys": len(hits)}
            if nulls:
                f = sum(d[(t, h)] for d in nulls)
                flo, fhi = binomial_interval(f, len(nulls))
                row.update(false_detection=f / len(nulls), false_low=flo, false_high=fhi)
            rows.append(row)
    return rows


def _bootstrap(survey: Any, model: GeneratingModelResult, hypotheses: Any, settings: Any,
               jitter: float, sizes: tuple[int, ...], n_surveys: int, n_bootstrap: int,
               root: np.random.SeedSequence, kw: dict[str, Any],
               tick: Any) -> pd.DataFrame:
    """Power from models refitted to bootstrap resamples of the pilot's sites."""
    from ..permutation import site_ranks
    from ._sites import site_labels

    by_label = np.argsort(site_ranks(survey.community.index))
    rows = []
    for b in range(n_bootstrap):
        gen = np.random.default_rng(_child(root, _BOOT, b))
        index = by_label[gen.integers(0, model.n_pilot, size=model.n_pilot)]
        labels = pd.Index(site_labels(model.n_pilot), name="site")
        frames = {}
        for name in ("community", "environment"):
            frame = getattr(survey, name).iloc[index].copy()
            frame.index = labels
            frames[name] = frame
        loc = None
        if survey.locations is not None:
            loc = survey.locations.iloc[index].copy()
            loc.index = labels
        resample = SimpleNamespace(community=frames["community"],
                                   environment=frames["environment"], locations=loc)
        refit = fit_generating_model(resample, hypotheses, settings=settings, jitter=jitter,
                                     rng=np.random.default_rng(_child(root, _FIT, b)))
        for n in sizes:
            hits = []
            for i in range(n_surveys):
                found, _ = simulated_detections(refit, n, _child(root, _BOOT, b, n, i),
                                                null=False, **kw)
                hits.append(found)
                tick()
            for r in _rows(refit, kw["tests"], n, "simulation", hits, None):
                rows.append({"resample": b, **{k: r[k] for k in
                                               ("hypothesis", "test", "n_sites", "power")}})
    return pd.DataFrame(rows)


def _notes(model: GeneratingModelResult, alpha: float, n_resamples: int,
           sub_sizes: list[int], n_bootstrap: int) -> list[str]:
    notes = [
        f"Each simulated survey was analysed as `gradients run` analyses the project, with "
        f"{n_resamples} permutations per test and no spatially constrained null; a test "
        f"detects a hypothesis when its p-value is at most {alpha:g}.",
        "Power depends on the generating model: it is the power to detect effects of the size "
        "the model holds, under the spread the model holds. "
        + ("A model fitted to a small pilot is itself uncertain; read the bootstrap spread "
           "(bootstrap_low, bootstrap_high) beside the power." if n_bootstrap else
           ("A model fitted to a small pilot is itself uncertain; ask for bootstrap resamples "
            "of the pilot (n_bootstrap) to see how much the power could move."
            if model.source == "pilot" else "The assumptions were stated, not estimated.")),
    ]
    if sub_sizes:
        notes.append("Rows with method 'subsample' come from the pilot's own sites drawn "
                     "without replacement, with no model; they have no false detection rate "
                     "(no effect is known to be zero in real data). Subsamples of a pilot "
                     "overlap, so they agree with each other more than new surveys would, "
                     "most of all near the pilot's size.")
    return notes
