"""Group contrasts: site classes compared on a distance matrix.

:func:`permanova` tests differences in location among classes (one- and two-way designs,
interactions, nested factors, covariates), with :func:`dispersion_test` beside it for
differences in spread; :func:`anosim` and :func:`mrpp` are the rank-based and the
mean-distance alternatives. All run through the permutation engine, which enumerates the
distinct reassignments of sites to classes when they are few.
"""

from ._anosim import AnosimResult, anosim
from ._dispersion import DispersionResult, dispersion_test
from ._mrpp import MrppResult, mrpp
from ._permanova import PermanovaResult, permanova

__all__ = [
    "AnosimResult",
    "DispersionResult",
    "MrppResult",
    "PermanovaResult",
    "anosim",
    "dispersion_test",
    "mrpp",
    "permanova",
]
