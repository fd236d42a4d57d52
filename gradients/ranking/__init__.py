"""Ranking stage: which variables line up with community turnover, and in what order.

Best-subset rank matching (:func:`subset_search`), generalized dissimilarity modelling
(:func:`turnover_model`) and one table that lines the measures up per variable
(:func:`rank_variables`).
"""

from ._rank import SORT_RULE, VariableRankingResult, collinearity, rank_variables
from ._subsets import EXHAUSTIVE_LIMIT, SubsetSearchResult, subset_search
from ._turnover import turnover_model
from ._turnover_result import TurnoverModelResult

__all__ = [
    "EXHAUSTIVE_LIMIT",
    "SORT_RULE",
    "SubsetSearchResult",
    "TurnoverModelResult",
    "VariableRankingResult",
    "collinearity",
    "rank_variables",
    "subset_search",
    "turnover_model",
]
