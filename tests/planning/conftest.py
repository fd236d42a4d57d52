"""Shared pieces of the planning tests: a pilot survey drawn from a known generating model."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pytest

from gradients import Survey
from gradients.planning import GeneratingModelResult


def _pilot(model: GeneratingModelResult, n: int, seed: int) -> Survey:
    gen = np.random.default_rng(seed)
    labels = [f"p{i:03d}" for i in range(n)]
    env, loc = model.sites.draw(n, labels, gen)
    z = model.standardise({g: env[list(cols)] for g, cols in model.groups.items()})
    counts = model.draw_community(z, labels, gen)
    return Survey(counts, env, loc)


@pytest.fixture
def pilot_from() -> Callable[[GeneratingModelResult, int, int], Survey]:
    """``pilot_from(model, n_sites, seed)``: a pilot survey drawn from ``model``."""
    return _pilot
