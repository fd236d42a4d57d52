"""The analysis steps of a run, listed in the order they run, and the order of the sections.

Each step reads its settings, calls the analysis functions of the earlier stages and arranges
their results into a section (tables, figures, text) plus sentences for the methods paragraph.
The tests and fits themselves are the analysis functions'; the steps compute only what joins
them into a report: analysis units of the variables (log10, log-ratios, km), the Holm
adjustment across hypotheses, correlations among the predictor matrices, and the verdict per
hypothesis (see :mod:`.verdicts`). One module per stage: :mod:`.community` (community,
environment, geography), :mod:`.ordination` (ordination and fitting), :mod:`.matrix` (the
Mantel family, regression, correlogram, distance decay), :mod:`.groups` (site classes
compared), :mod:`.partition` (space and environment on the raw data), :mod:`.ranking`
(variables ranked against turnover), :mod:`.soil` (units, guideline quotients against a
screening table, texture classes) and :mod:`.verdicts`; the demo's planted-truth step lives
with the demo (``gradients.report._demo_truth``, beside the demo code).

:data:`STEPS` is the one list :func:`~gradients.report._pipeline.run_steps` runs: each step
needs what the steps before it left in the context (the community and environmental distances
first, then the ordination, the fits and the matrix tests, and the verdicts built from them).
The report shows the sections in :data:`SECTION_ORDER`, which differs from the run order.
"""

from __future__ import annotations

from .._demo_truth import planted_truth_step
from .._model import Section
from .._pipeline import Step
from .community import community_step, environment_step, geography_step
from .groups import groups_check, groups_step
from .matrix import (
    correlogram_step,
    distance_decay_check,
    distance_decay_step,
    mantel_step,
    partial_mantel_step,
    regression_step,
    spatial_check,
)
from .ordination import (
    biplot_step,
    factors_step,
    ordination_check,
    ordination_step,
    surfaces_check,
    surfaces_step,
    vectors_check,
    vectors_step,
)
from .partition import partition_check, partition_step
from .ranking import ranking_check, ranking_step
from .soil import screening_step, texture_step, units_step
from .verdicts import verdicts_step

__all__ = ["SECTION_ORDER", "STEPS", "order_sections"]

#: Every step of a run, in the order it runs. The steps marked ``prepares`` (cheap: the
#: distance matrices and the soil and water tables) run in the pre-flight itself; every other
#: step's ``check`` is its pre-flight (see :func:`~gradients.report._pipeline.preflight`).
STEPS: tuple[Step, ...] = (
    Step("community", community_step, required=True, prepares=True),
    Step("units", units_step, prepares=True),
    Step("screening", screening_step, required=True, prepares=True),  # before environment
    Step("environment", environment_step, required=True, prepares=True),
    Step("geography", geography_step, required=True, prepares=True),
    Step("texture", texture_step, required=True, prepares=True),
    Step("ordination", ordination_step, required=True, check=ordination_check),
    Step("vectors", vectors_step, "analyses.vectors", check=vectors_check),
    Step("factors", factors_step, "analyses.factors"),
    Step("biplot", biplot_step),
    Step("mantel", mantel_step, "analyses.mantel"),
    Step("partial_mantel", partial_mantel_step, "analyses.partial_mantel"),
    Step("regression", regression_step, "analyses.regression"),
    Step("correlogram", correlogram_step, "analyses.correlogram", check=spatial_check),
    Step("distance_decay", distance_decay_step, "analyses.distance_decay",
         check=distance_decay_check),
    Step("partition", partition_step, "analyses.partition", check=partition_check),
    Step("ranking", ranking_step, "analyses.ranking", check=ranking_check),
    Step("groups", groups_step, "analyses.groups", check=groups_check),
    Step("verdicts", verdicts_step, "analyses.verdicts"),
    Step("planted_truth", planted_truth_step),
    Step("surfaces", surfaces_step, "analyses.surfaces", check=surfaces_check),
)

#: Order of the sections in the report (steps run in dependency order, which differs).
SECTION_ORDER = ("verdicts", "planted_truth", "ranking", "ordination", "vectors", "surfaces",
                 "factors", "groups", "mantel", "partial_mantel", "regression", "partition",
                 "correlogram",
                 "distance_decay", "texture", "screening")


def order_sections(sections: list[Section]) -> list[Section]:
    """``sections`` sorted into :data:`SECTION_ORDER` (unknown keys last, in their order)."""
    rank = {k: i for i, k in enumerate(SECTION_ORDER)}
    return sorted(sections, key=lambda s: rank.get(s.key, len(rank)))
