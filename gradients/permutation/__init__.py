"""The permutation engine shared by every test in the suite.

A :func:`permutation_plan` fixes which rearrangements of the sites make up the null
distribution (free, within strata, cyclic, toroidal, whole blocks; enumerated exactly when
there are few enough); :func:`permutation_test` evaluates a batched statistic over it; and
:func:`pvalue_from_counts` is the one place that turns counts into p-values
(:func:`adjust_pvalues` then adjusts a family of them for multiplicity).
"""

from ._engine import PermutationResult, permutation_test
from ._plan import (
    SCHEMES,
    PermutationPlan,
    custom_plan,
    permutation_plan,
    seed_sequence,
    site_ranks,
)
from ._progress import TerminalProgress, current_reporter, report_progress
from ._pvalue import (
    ADJUST_METHODS,
    TIE_RTOL,
    adjust_pvalues,
    count_extreme,
    extreme_mask,
    pvalue_from_counts,
)

__all__ = [
    "ADJUST_METHODS",
    "SCHEMES",
    "TIE_RTOL",
    "PermutationPlan",
    "PermutationResult",
    "TerminalProgress",
    "adjust_pvalues",
    "count_extreme",
    "current_reporter",
    "custom_plan",
    "extreme_mask",
    "permutation_plan",
    "permutation_test",
    "pvalue_from_counts",
    "report_progress",
    "seed_sequence",
    "site_ranks",
]
