"""Distance stage: dissimilarities, transforms, geographic distance, the DistanceMatrix type."""

from ._matrix import DistanceMatrix, as_distance_matrix

__all__ = ["DistanceMatrix", "as_distance_matrix"]
