"""Group contrasts: site classes compared on a distance matrix.

:func:`permanova` tests differences in location among classes (one- and two-way designs,
interactions, nested factors, covariates), with :func:`dispersion_test` beside it for
differences in spread; :func:`anosim` and :func:`mrpp` are the rank-based and the
mean-distance alternatives. All run through the permutation engine, which enumerates the
distinct reassignments of sites to classes when they are few. :func:`indicator_taxa` finds the
taxa that characterise each class (Dufrêne & Legendre 1997); :func:`cluster_sites` groups the
sites by their communities (hierarchical clustering, optionally constrained to contiguous
sites).
"""

from ._anosim import AnosimResult, anosim
from ._clusters import CLUSTER_METHODS, SiteClustersResult, cluster_sites
from ._dispersion import DispersionResult, dispersion_test
from ._indicators import IndicatorTaxaResult, indicator_taxa
from ._mrpp import MrppResult, mrpp
from ._permanova import PermanovaResult, permanova

__all__ = [
    "CLUSTER_METHODS",
    "AnosimResult",
    "DispersionResult",
    "IndicatorTaxaResult",
    "MrppResult",
    "PermanovaResult",
    "SiteClustersResult",
    "anosim",
    "cluster_sites",
    "dispersion_test",
    "indicator_taxa",
    "mrpp",
    "permanova",
]
