"""Matrix stage: correlating whole distance matrices.

Simple and partial Mantel tests (with a spatially constrained null), Mantel correlograms,
multiple regression on distance matrices and distance-decay models. Every p-value comes from
the permutation engine (:mod:`gradients.permutation`); the permuted cross-products are
evaluated by compiled kernels (:mod:`gradients.matrix._kernels`).
"""

from ._correlogram import MantelCorrelogramResult, mantel_correlogram
from ._decay import DistanceDecayResult, distance_decay
from ._mantel import MantelResult, mantel
from ._partial import PartialMantelResult, partial_mantel
from ._regression import MatrixRegressionResult, matrix_regression

__all__ = [
    "DistanceDecayResult",
    "MantelCorrelogramResult",
    "MantelResult",
    "MatrixRegressionResult",
    "PartialMantelResult",
    "distance_decay",
    "mantel",
    "mantel_correlogram",
    "matrix_regression",
    "partial_mantel",
]
