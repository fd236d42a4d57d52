"""Shared fixtures: real result objects from the bundled demo survey, computed once.

The demo's river network (``demo_network``) comes from the generator, which also writes the
bundled ``streams.gpkg``. Permutation counts are small: the figures only read the results,
whose numbers are checked by the analysis stages' own tests.
"""

from __future__ import annotations

from types import SimpleNamespace

import pytest

import gradients
from gradients.distance import DistanceMatrix


@pytest.fixture(scope="session")
def demo() -> SimpleNamespace:
    survey = gradients.demo_survey()
    env = survey.environment
    numeric = env.drop(columns=["habitat", "zone"])
    d = gradients.dissimilarity(survey.community, "bray-curtis")
    metres = gradients.geographic_distance(survey.locations)
    geo = DistanceMatrix(metres.condensed / 1000.0, metres.labels, metric=metres.metric,
                         validate=False)
    pcoa = gradients.pcoa(d)
    nmds = gradients.nmds(d, starts=3, rng=1)
    return SimpleNamespace(
        survey=survey,
        d=d,
        geo=geo,
        pcoa=pcoa,
        nmds=nmds,
        vectors=gradients.fit_vectors(pcoa, numeric, n_resamples=99, rng=1),
        factors=gradients.fit_factors(pcoa, env[["habitat"]], n_resamples=99, rng=1),
        surface=gradients.fit_surface(pcoa, env["Cu"], n_resamples=0),
        taxa=pcoa.taxon_scores(survey.community),
        correlogram=gradients.mantel_correlogram(d, geo, n_resamples=99, rng=1),
        clusters=gradients.cluster_sites(d, k=3),
        dispersion=gradients.dispersion_test(d, env["zone"], n_resamples=99, rng=1),
        decay=gradients.distance_decay(d, geo, rng=1),
        parts=gradients.partition_variation(
            d, numeric[["Cu", "Zn"]], numeric[["sand", "clay"]], names=["metals", "texture"],
            n_resamples=99, rng=1),
        eigenvectors=gradients.spatial_eigenvectors(geo),
        partial=gradients.partial_mantel(
            d,
            gradients.environmental_distance(numeric[["Cu", "Zn"]]),
            gradients.environmental_distance(numeric[["sand", "clay"]]),
            n_resamples=99, rng=1),
    )


@pytest.fixture(scope="session")
def demo_network():
    """The demo's river lines (UTM zone 32N) and the site points in the same CRS."""
    network = gradients.simulate_survey().network
    return network, gradients.demo_survey().locations.to_crs(network.crs)
