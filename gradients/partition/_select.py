"""Forward selection of explanatory variables with the double stopping criterion."""

from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError
from .._result import ResultMixin
from .._validation import RNGLike, check_n_resamples
from ..distance import DistanceMatrix
from ..distance._centred import gower_centred
from ..distance._matrix import as_distance_matrix
from ..permutation import seed_sequence
from ._design import (
    align_strata,
    check_n_jobs,
    check_rank,
    check_size,
    orthonormal,
    read_block,
    residualise,
)
from ._ftest import adjusted_r2, make_plan, residual_matrix, run_tests, term_test

__all__ = ["STOP_REASONS", "ForwardSelectionResult", "forward_select"]

#: Why a selection ended, as written in ``ForwardSelectionResult.stop_reason``.
STOP_REASONS = {
    "global": "the global model is not significant, so nothing is selected",
    "pvalue": "the best remaining variable's partial test is not significant",
    "r2": "the best remaining variable would take the adjusted R2 above the global model's",
    "both": "the best remaining variable is not significant and would take the adjusted R2 "
            "above the global model's",
    "exhausted": "every candidate entered",
}


#: Adjusted R2 values this close (relative) count as equal in the second stopping rule.
R2_RTOL = 1e-10


@dataclass(frozen=True, repr=False)
class ForwardSelectionResult(ResultMixin):
    """Outcome of :func:`forward_select`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per step: ``order``, ``variable``, ``r2_adjusted`` (of the model after its
        entry, covariables partialled out), ``gain`` (over the step before), ``statistic``
        (partial pseudo-F given the covariables and the variables already in), ``pvalue`` and
        ``entered``. The last row is the variable that stopped the selection
        (``entered=False``) unless every candidate entered or the global test failed.
    selected : tuple of str
        The variables that entered, in order.
    statistic, pvalue : float
        Pseudo-F and p-value of the global model (all candidates, given the covariables).
    r2_adjusted : float
        Adjusted R2 of the global model: the second stopping threshold.
    null_distribution : ndarray
        The global pseudo-F under the rearrangements.
    n_sites, n_resamples : int
    alpha : float
    stop_reason : str
        A key of ``STOP_REASONS``.
    notes : tuple of str
    """

    table: pd.DataFrame
    selected: tuple[str, ...]
    statistic: float
    pvalue: float
    r2_adjusted: float
    null_distribution: np.ndarray
    n_sites: int
    n_resamples: int
    alpha: float
    stop_reason: str
    notes: tuple[str, ...] = ()

    def subset(self, table: pd.DataFrame) -> pd.DataFrame:
        """The selected columns of ``table`` (the candidates table, say), in selection order."""
        return table.loc[:, list(self.selected)]


def _check_alpha(alpha: object) -> float:
    ok = isinstance(alpha, numbers.Real) and not isinstance(alpha, bool)
    if not ok or not 0.0 < float(alpha) < 1.0:  # type: ignore[arg-type]
        raise InputError(f"`alpha` must be a number between 0 and 1; got {alpha!r}.")
    return float(alpha)  # type: ignore[arg-type]


def forward_select(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    candidates: pd.DataFrame,
    *,
    covariables: pd.DataFrame | pd.Series | None = None,
    alpha: float = 0.05,
    n_resamples: int = 999,
    rng: RNGLike = None,
    strata: object = None,
    n_jobs: int | None = -1,
) -> ForwardSelectionResult:
    """Forward selection of explanatory variables for a dbRDA, with the double stopping rule.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarities.
    candidates : DataFrame indexed by site label
        One candidate per column (a factor column is one candidate of ``levels - 1`` design
        columns), e.g. environmental variables or spatial eigenvectors.
    covariables : DataFrame or Series, optional
        Variables partialled out of every model and test.
    alpha : float, default 0.05
        Significance level of the global test and of each step.
    n_resamples : int, default 999
        Permutations of each test.
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system. Every test uses the same rearrangements.
    strata, n_jobs
        As in :func:`dbrda`.

    Returns
    -------
    ForwardSelectionResult

    Notes
    -----
    Blanchet, Legendre & Borcard (2008) [1]_: the global model with every candidate is tested
    first, and nothing is selected unless it is significant. Then, step by step, the candidate
    that gives the largest adjusted R2 together with those already in is tested given them
    (and the covariables), permuting the residuals of that reduced model; it enters only if
    its p-value is at most ``alpha`` *and* the adjusted R2 does not exceed that of the global
    model. The first candidate failing either rule ends the selection. Adjusted R2 is
    Ezekiel's; with covariables it is ``adj(variables + covariables) - adj(covariables)``.

    The second rule curbs the inflated type I error and the overestimated explained variation
    of classical forward selection, but a selected set is still chosen on these data: tests
    and fractions computed afterwards with the selected variables are conditional on the
    selection.

    References
    ----------
    .. [1] Blanchet, F. G., Legendre, P. & Borcard, D. (2008). Forward selection of explanatory
       variables. Ecology 89: 2623-2632.
    """
    dm = as_distance_matrix(d, name="d")
    alpha = _check_alpha(alpha)
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    seed = seed_sequence(rng)
    labels, n = dm.labels, dm.n
    x = read_block(candidates, labels, name="candidates")
    z = read_block(covariables, labels, name="covariables") if covariables is not None else None
    nz_cols = z.width if z is not None else 0
    try:
        check_size(n, {"candidate": x.width, "covariable": nz_cols})
    except InputError as exc:
        raise InputError(f"{exc} Forward selection first fits the global model with every "
                         "candidate (Blanchet et al. 2008), so the candidates must fit "
                         "together: pre-select them, or keep the broadest spatial "
                         "eigenvectors only.") from None
    check_rank([z, x] if z is not None else [x])
    strata_v = align_strata(strata, labels)
    gm = gower_centred(dm)
    g, total = gm.matrix, gm.total
    qz = orthonormal(z.values) if z is not None else np.empty((n, 0))
    nz = qz.shape[1]
    adj_z = adjusted_r2((total - float(np.trace(residual_matrix(g, qz)))) / total, n, nz)
    plan = make_plan(labels, strata=strata_v, n_resamples=n_resamples, rng=seed)

    global_test = term_test("the global model", g, qz, residualise(x.values, qz))
    global_res = run_tests([global_test], plan, n_jobs=n_jobs, task="forward selection")
    global_p = float(np.asarray(global_res.pvalue)[0])
    ss_z = total - global_test.total_reduced
    adj_global = adjusted_r2((ss_z + global_test.ss) / total, n, nz + x.width) - adj_z
    used = int(np.max(global_res.n_resamples))

    rows: list[dict[str, object]] = []
    selected: list[int] = []
    reason = "global" if global_p > alpha else "exhausted"
    basis = qz
    adj_prev = 0.0
    while reason != "global" and len(selected) < len(x.terms):
        gr = residual_matrix(g, basis)
        ss_in = total - float(np.trace(gr))
        best, best_adj, best_q = -1, -np.inf, None
        for t in range(len(x.terms)):
            if t in selected:
                continue
            qt = residualise(x.take_terms([t]).values, basis)
            ss = float(np.sum((gr @ qt) * qt))
            adj = adjusted_r2((ss_in + ss) / total, n, basis.shape[1] + qt.shape[1]) - adj_z
            if adj > best_adj:
                best, best_adj, best_q = t, adj, qt
        name = x.terms[best]
        test = term_test(f"candidate {name!r}", g, basis, best_q)  # type: ignore[arg-type]
        p = float(np.asarray(run_tests([test], plan, n_jobs=n_jobs,
                                       task="forward selection").pvalue)[0])
        # the last candidate's model is the global model: equal up to rounding
        significant = p <= alpha
        below = best_adj <= adj_global + R2_RTOL * max(abs(adj_global), 1.0)
        rows.append({"order": len(rows) + 1, "variable": name, "r2_adjusted": best_adj,
                     "gain": best_adj - adj_prev, "statistic": test.statistic, "pvalue": p,
                     "entered": significant and below})
        if not (significant and below):
            reason = "both" if not (significant or below) else ("pvalue" if below else "r2")
            break
        selected.append(best)
        basis = np.hstack([basis, best_q])  # type: ignore[list-item]
        adj_prev = best_adj

    table = pd.DataFrame(rows, columns=["order", "variable", "r2_adjusted", "gain",
                                        "statistic", "pvalue", "entered"])
    table = table.astype({"order": int, "entered": bool})
    chosen = tuple(x.terms[t] for t in selected)
    return ForwardSelectionResult(
        table=table, selected=chosen, statistic=global_test.statistic, pvalue=global_p,
        r2_adjusted=float(adj_global), null_distribution=np.asarray(
            global_res.null_distribution)[:, 0], n_sites=n, n_resamples=used, alpha=alpha,
        stop_reason=reason,
        notes=tuple(_notes(reason, chosen, len(x.terms), global_p, adj_global, alpha, used,
                           plan.description, z is not None) + list(gm.spectrum_notes())))


def _notes(reason: str, chosen: tuple[str, ...], n_candidates: int, global_p: float,
           adj_global: float, alpha: float, used: int, description: str,
           partial: bool) -> list[str]:
    notes = [
        f"Forward selection with the double stopping criterion (Blanchet, Legendre & Borcard "
        f"2008): global model of all {n_candidates} candidates p = {global_p:.4g}, adjusted "
        f"R2 = {adj_global:.4g}; each step tested by {used} permutations ({description}) of "
        "the residuals of the model with the variables already in"
        + (" and the covariables" if partial else "") + f", at alpha = {alpha:g}.",
        f"Stopped because {STOP_REASONS[reason]}; {len(chosen)} variable(s) selected.",
        "Tests and variation fractions computed afterwards with the selected variables are "
        "conditional on this selection: the double criterion limits, but does not remove, "
        "their optimism.",
    ]
    return notes
