"""Group contrasts: how site classes (zones, habitats, periods) differ in their communities.

:func:`indicator_taxa` finds the taxa that characterise each class (Dufrêne & Legendre 1997);
:func:`cluster_sites` groups the sites by their communities (hierarchical clustering, optionally
constrained to contiguous sites). Every permutation test goes through
:mod:`gradients.permutation`.
"""

from ._clusters import CLUSTER_METHODS, SiteClustersResult, cluster_sites
from ._indicators import IndicatorTaxaResult, indicator_taxa

__all__ = [
    "CLUSTER_METHODS",
    "IndicatorTaxaResult",
    "SiteClustersResult",
    "cluster_sites",
    "indicator_taxa",
]
