"""gradients: which environmental gradients line up with turnover in biological communities.

The one place users import from. Names are loaded on first use, so ``import gradients`` and the
command line start fast even though the stages pull in geopandas, statsmodels and numba.

Stages, one subpackage each, in the order data flows through them; each imports only from the
stages before it, and the analysis stages in braces never import each other::

    data -> distance -> ordination -> permutation -> {fitting, matrix, partition, groups}
         -> plot -> report

``data`` reads and checks the survey; ``distance`` builds dissimilarities and distances;
``ordination`` gives site scores (PCoA, NMDS, PCA); ``permutation`` is the one engine behind
every permutation test; ``fitting`` puts environmental variables onto ordination space;
``matrix`` holds the Mantel family; ``partition`` separates space from environment on the raw
data (dbRDA, forward selection, spatial eigenvectors, variation partitioning); ``groups``
compares site classes (PERMANOVA, dispersions, ANOSIM, MRPP, indicator taxa, site clustering);
``ranking`` weighs the variables against each other (best subsets, turnover models, one ranking
table); ``plot`` draws figures from result objects; ``report`` runs a project and writes its
folder. ``gradients.cli`` parses the command line and calls ``report``.
"""

from __future__ import annotations

import importlib
from typing import Any

from ._errors import InputError

__version__ = "0.1.0"

# public name -> subpackage that defines it
_EXPORTS: dict[str, str] = {
    # data
    "Survey": "data",
    "read_survey": "data",
    "demo_survey": "data",
    "simulate_survey": "data",
    "Decision": "data",
    "texture_class": "data",
    "guideline_quotients": "data",
    "GuidelineQuotientsResult": "data",
    # distance
    "DistanceMatrix": "distance",
    "dissimilarity": "distance",
    "environmental_distance": "distance",
    "geographic_distance": "distance",
    "transform_community": "distance",
    "transform_environment": "distance",
    "gower_distance": "distance",
    "extend_dissimilarity": "distance",
    "TransformResult": "distance",
    # ordination
    "pcoa": "ordination",
    "nmds": "ordination",
    "pca": "ordination",
    "as_scores": "ordination",
    "taxon_scores": "ordination",
    "stress_verdict": "ordination",
    # permutation engine
    "permutation_plan": "permutation",
    "permutation_test": "permutation",
    # fitting
    "fit_vectors": "fitting",
    "fit_factors": "fitting",
    "fit_surface": "fitting",
    # matrix
    "mantel": "matrix",
    "partial_mantel": "matrix",
    "mantel_correlogram": "matrix",
    "matrix_regression": "matrix",
    "distance_decay": "matrix",
    # partition
    "dbrda": "partition",
    "forward_select": "partition",
    "spatial_eigenvectors": "partition",
    "partition_variation": "partition",
    "DbRDAResult": "partition",
    "ForwardSelectionResult": "partition",
    "SpatialEigenvectorsResult": "partition",
    "VariationPartitionResult": "partition",
    # ranking
    "subset_search": "ranking",
    "turnover_model": "ranking",
    "rank_variables": "ranking",
    "SubsetSearchResult": "ranking",
    "TurnoverModelResult": "ranking",
    "VariableRankingResult": "ranking",
    # groups
    "permanova": "groups",
    "dispersion_test": "groups",
    "anosim": "groups",
    "mrpp": "groups",
    "PermanovaResult": "groups",
    "DispersionResult": "groups",
    "AnosimResult": "groups",
    "MrppResult": "groups",
    "indicator_taxa": "groups",
    "IndicatorTaxaResult": "groups",
    "cluster_sites": "groups",
    "SiteClustersResult": "groups",
    # report
    "load_project": "report",
    "init_project": "report",
    "run_project": "report",
    "run_demo": "report",
    # planning
    "survey_power": "planning",
    "SurveyPowerResult": "planning",
    "fit_generating_model": "planning",
    "assumed_model": "planning",
    "GeneratingModelResult": "planning",
    "plan_project": "planning",
}

#: Subpackages reached as attributes (``gradients.plot.biplot(...)``), loaded on first use.
_SUBPACKAGES = ("plot",)

__all__ = ["InputError", "__version__", *_EXPORTS, *_SUBPACKAGES]


def __getattr__(name: str) -> Any:
    if name in _SUBPACKAGES:
        return importlib.import_module(f"gradients.{name}")
    try:
        stage = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'gradients' has no attribute {name!r}") from None
    module = importlib.import_module(f"gradients.{stage}")
    value = getattr(module, name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
