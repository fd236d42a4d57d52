"""Shared fixtures: one quick demo report for the tests that only read it."""

from __future__ import annotations

from pathlib import Path

import pytest

from gradients.report import run_demo

#: Small permutation counts and few NMDS starts keep the whole-job tests fast; the numbers
#: themselves are checked by the analysis stages' own tests.
QUICK = {"analyses.starts": 4}
QUICK_PERMUTATIONS = 99


@pytest.fixture(scope="session")
def quick() -> dict[str, object]:
    """Arguments of :func:`run_demo` for a quick run."""
    return {"n_resamples": QUICK_PERMUTATIONS, "rng": 7, "overrides": dict(QUICK)}


@pytest.fixture(scope="session")
def demo_report(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "report"
    return run_demo(out, n_resamples=QUICK_PERMUTATIONS, rng=7, overrides=QUICK)
