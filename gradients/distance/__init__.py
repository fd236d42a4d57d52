"""Distance stage: dissimilarities, transforms, geographic distance, the DistanceMatrix type."""

from ._centred import GowerMatrix, gower_centred, permuted_products, permuted_traces  # noqa: F401
from ._dissimilarity import METRICS, dissimilarity, extend_dissimilarity, gower_distance
from ._environment import environmental_distance
from ._geographic import geographic_distance
from ._matrix import DistanceMatrix, as_distance_matrix
from ._transforms import TransformResult, transform_community, transform_environment

__all__ = [
    "METRICS",
    "DistanceMatrix",
    "TransformResult",
    "as_distance_matrix",
    "dissimilarity",
    "environmental_distance",
    "extend_dissimilarity",
    "geographic_distance",
    "gower_distance",
    "transform_community",
    "transform_environment",
]
