"""The verdict rule: from what the matrix tests found for one hypothesis to one verdict.

A pure function of numbers, so that the rule can be read and tested on its own. The verdict
step (:mod:`.verdicts`) gathers the numbers and states this rule in the report; the user guide
states it too. Keep the three in step.

The rule
--------
Two tests speak for a hypothesis: the partial Mantel test (the simple Mantel test when no
partial test was run) and its coefficient in the multiple regression on distance matrices. A
test *is significant* when its effect is positive and its p-value is at most ``level``:

- the Mantel-type test by its p-value Holm-adjusted across hypotheses; and wherever a
  spatially constrained p-value was computed (the sites have locations), also by that p-value.
  Ordinary Mantel-type p-values are too small when both matrices (hypothesis distance and
  community dissimilarity) are spatially structured (Guillot & Rousset 2013). The spatial check
  says whether they are, but it is itself a test and misses structure often enough that asking
  for the constrained p-value only where it finds structure rejected a true null 8 % of the time
  at level 0.05 under strong autocorrelation (validation/spatial.py), while asking for it
  always held the level in every scenario simulated, at the cost of a few points of power
  where there is no structure. It is asked for always. It is used as
  it is, not adjusted across hypotheses: a guard that each hypothesis must pass on its own;
- the regression coefficient by its permutation p-value (there is no spatially constrained
  version of it).

A significant effect *is negligible* when it is below :data:`NEGLIGIBLE_EFFECT` (0.1): Cohen's
(1988) threshold for a small correlation, applied here to the Mantel r and to the standardised
regression coefficient. That use of the threshold is this report's own rule.

Verdicts, the first that applies:

1. **associated, but not separable from spatial structure**: the Mantel-type test is
   significant by its Holm-adjusted p-value and the spatially constrained p-value is above
   ``level``. Whatever the regression says: its p-value has no spatial guard.
2. **supported**: every test that was run is significant and not negligible.
3. **partly supported**: at least one is.
4. **significant but negligible**: some test is significant, but each significant effect is
   below the threshold.
5. **not supported**: no test is significant (or none was run).

The raw-data answer joins them in one direction only. Where the report has a "Space and
environment" section, each hypothesis also has a *pure fraction*: the adjusted R2 of its
variables given the other hypotheses, the covariables and the selected spatial eigenvectors,
tested by permutation (its p-value Holm-adjusted across hypotheses). It counts as evidence
when it is positive, significant and at least :data:`NEGLIGIBLE_FRACTION` (0.02):

6. a verdict of **not supported** or **significant but negligible** from the tests above
   becomes **partly supported** when the pure fraction counts as evidence;
7. it never lowers a verdict. Spatial eigenvectors selected on the same community describe a
   spatially structured gradient as well as its own variables do, so the pure fraction of a
   real driver can vanish into the fraction it shares with space; a pure fraction that does
   not count means "not separable from space on the raw data", which the report gives as a
   caveat, not as evidence against the hypothesis. Nor does it lift the verdict "associated,
   but not separable from spatial structure": its permutation test, like the plain Mantel
   test, assumes exchangeable sites.

The 0.02 threshold is Cohen's (1988) small effect size for a set of predictors in multiple
regression (f2 = 0.02), read here as a share of the variation: this report's own rule.

References
----------
Cohen, J. (1988). Statistical power analysis for the behavioral sciences, 2nd ed. Erlbaum.
Guillot, G. & Rousset, F. (2013). Dismantling the Mantel tests. Methods in Ecology and
Evolution 4: 336-344.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = [
    "NEGLIGIBLE",
    "NEGLIGIBLE_EFFECT",
    "NEGLIGIBLE_FRACTION",
    "NOT_SEPARABLE",
    "NOT_SUPPORTED",
    "PARTLY",
    "SUPPORTED",
    "VERDICTS",
    "Evidence",
    "decide_verdict",
    "fraction_counts",
]

SUPPORTED = "supported"
PARTLY = "partly supported"
NOT_SEPARABLE = "associated, but not separable from spatial structure"
NEGLIGIBLE = "significant but negligible"
NOT_SUPPORTED = "not supported"
#: Every verdict, strongest evidence first.
VERDICTS = (SUPPORTED, PARTLY, NOT_SEPARABLE, NEGLIGIBLE, NOT_SUPPORTED)

#: Effects (Mantel r, standardised regression coefficient) below this are negligible: Cohen's
#: (1988) small correlation, applied to these statistics as this report's own rule.
NEGLIGIBLE_EFFECT = 0.1
#: Pure fractions (adjusted R2) below this are negligible: Cohen's (1988) small effect size for
#: a set of predictors (f2 = 0.02), read as a share of the variation: this report's own rule.
NEGLIGIBLE_FRACTION = 0.02


def _number(value: float | None) -> float:
    return math.nan if value is None else float(value)


@dataclass(frozen=True)
class Evidence:
    """What the tests found for one hypothesis; None (or NaN) where a number is missing.

    Attributes
    ----------
    mantel_r : float or None
        Partial Mantel r (simple Mantel r when no partial test was run).
    mantel_pvalue : float or None
        Its permutation p-value, Holm-adjusted across hypotheses.
    mantel_pvalue_spatial : float or None
        Its p-value against the spatially constrained null (not adjusted).
    spatially_structured : bool
        The spatial check found both matrices spatially structured. Reported beside the
        verdict; the rule asks for the constrained p-value wherever it was computed, whatever
        the check found.
    regression_coefficient, regression_pvalue : float or None
        Standardised coefficient of the hypothesis in the regression on distance matrices,
        and its permutation p-value.
    pure_fraction, pure_fraction_pvalue : float or None
        Adjusted R2 of the hypothesis' variables given the other hypotheses, the covariables
        and the selected spatial eigenvectors (raw data), and its permutation p-value,
        Holm-adjusted across hypotheses.
    """

    mantel_r: float | None = None
    mantel_pvalue: float | None = None
    mantel_pvalue_spatial: float | None = None
    spatially_structured: bool = False
    regression_coefficient: float | None = None
    regression_pvalue: float | None = None
    pure_fraction: float | None = None
    pure_fraction_pvalue: float | None = None


def fraction_counts(evidence: Evidence, *, level: float = 0.05,
                    negligible: float = NEGLIGIBLE_FRACTION) -> bool:
    """Whether the pure fraction is evidence: positive, significant and not negligible."""
    f, p = _number(evidence.pure_fraction), _number(evidence.pure_fraction_pvalue)
    return not (math.isnan(f) or math.isnan(p)) and f > 0 and p <= level and f >= negligible


def decide_verdict(evidence: Evidence, *, level: float = 0.05,
                   negligible: float = NEGLIGIBLE_EFFECT,
                   negligible_fraction: float = NEGLIGIBLE_FRACTION) -> str:
    """The verdict for one hypothesis (one of :data:`VERDICTS`); the rule is in the module notes.

    Parameters
    ----------
    evidence : Evidence
    level : float, default 0.05
        Significance level (the project's ``output.level``).
    negligible : float, default NEGLIGIBLE_EFFECT
        Significant effects below this are negligible.
    negligible_fraction : float, default NEGLIGIBLE_FRACTION
        Pure fractions below this are negligible.
    """
    verdict = _matrix_verdict(evidence, level, negligible)
    if verdict in (NOT_SUPPORTED, NEGLIGIBLE) and fraction_counts(
            evidence, level=level, negligible=negligible_fraction):
        return PARTLY
    return verdict


def _matrix_verdict(evidence: Evidence, level: float, negligible: float) -> str:
    """Rules 1-5: the verdict of the Mantel-type test and the regression."""
    r, p, p_spatial = (_number(evidence.mantel_r), _number(evidence.mantel_pvalue),
                       _number(evidence.mantel_pvalue_spatial))
    b, p_b = _number(evidence.regression_coefficient), _number(evidence.regression_pvalue)
    checks: list[tuple[bool, bool]] = []  # (significant, not negligible) per test run
    if not (math.isnan(r) or math.isnan(p)):
        significant = r > 0 and p <= level
        if significant and p_spatial > level:
            return NOT_SEPARABLE  # (a missing constrained p-value, NaN, is never > level)
        checks.append((significant, r >= negligible))
    if not (math.isnan(b) or math.isnan(p_b)):
        checks.append((b > 0 and p_b <= level, b >= negligible))
    passed = [significant and large for significant, large in checks]
    if passed and all(passed):
        return SUPPORTED
    if any(passed):
        return PARTLY
    if any(significant for significant, _ in checks):
        return NEGLIGIBLE
    return NOT_SUPPORTED
