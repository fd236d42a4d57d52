"""Partition stage: community turnover split between environment and space on the raw data.

Distance-based redundancy analysis (:func:`dbrda`), forward selection with the double stopping
criterion (:func:`forward_select`), distance-based Moran's eigenvector maps
(:func:`spatial_eigenvectors`) and variation partitioning by adjusted R^2
(:func:`partition_variation`). Every test goes through the permutation engine, with the
statistics of each batch of rearrangements from the distance stage's batched trace kernel.
"""

from ._dbrda import DbRDAResult, dbrda
from ._fractions import VariationPartitionResult, partition_variation
from ._mem import SpatialEigenvectorsResult, spatial_eigenvectors
from ._select import STOP_REASONS, ForwardSelectionResult, forward_select

__all__ = [
    "STOP_REASONS",
    "DbRDAResult",
    "ForwardSelectionResult",
    "SpatialEigenvectorsResult",
    "VariationPartitionResult",
    "dbrda",
    "forward_select",
    "partition_variation",
    "spatial_eigenvectors",
]
