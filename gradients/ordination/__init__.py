"""Ordination stage: PCoA, NMDS and PCA with their diagnostics, and imported site scores."""

from ._nmds import NMDSResult, nmds, stress_verdict
from ._pca import PCAResult, pca
from ._pcoa import PCoAResult, pcoa
from ._scores import as_scores, taxon_scores

__all__ = [
    "NMDSResult",
    "PCAResult",
    "PCoAResult",
    "as_scores",
    "nmds",
    "pca",
    "pcoa",
    "stress_verdict",
    "taxon_scores",
]
