"""Null calibration and planted truth, short versions of validation/partition_calibration.py
(whose 1,000-data-set results are in docs/partition.md); the simulators are that script's."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

_SCRIPT = Path(__file__).resolve().parents[2] / "validation" / "partition_calibration.py"
_spec = importlib.util.spec_from_file_location("partition_calibration", _SCRIPT)
calibration = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(calibration)


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["marginal", "partial"])
def test_type_one_error_of_marginal_and_partial_tests(kind):
    # Theory: under the null, P(p <= 0.05) = 0.05 for (b + 1)/(P + 1) with 99 permutations
    # (Phipson & Smyth 2010), approximately for residual permutation (Anderson & Legendre
    # 1999); the count of rejections in 200 data sets must fall in the 99 % binomial interval
    # (scipy.stats.binom).
    datasets = 200
    p = np.array([calibration.null_pvalue(777 * s + 1, kind, "euclidean", 99)
                  for s in range(datasets)])
    lo, hi = stats.binom.interval(0.99, datasets, 0.05)
    assert lo <= np.sum(p <= 0.05) <= hi, np.sum(p <= 0.05)
    # and the p-values are spread over (0, 1], not piled up (Kolmogorov-Smirnov, scipy)
    assert stats.kstest(p, "uniform").pvalue > 0.001


def test_planted_spatial_community():
    # a community driven only by a smooth spatial process: space-only well above zero,
    # environment-only near zero (adjusted R2 is unbiased; Peres-Neto et al. 2006)
    out = calibration.planted_run(501, "space", 199)
    assert out["selected"] >= 3
    assert out["space_only"] > 0.2 and out["p_space"] <= 0.01
    assert abs(out["env_only"]) < 0.03


def test_planted_environmental_community():
    # the reverse: environment only, without spatial structure in it. The forward selection
    # finds no spatial vector; with the ten broadest vectors kept anyway, their fraction is
    # estimated near zero.
    out = calibration.planted_run(502, "environment", 199)
    assert out["env_only"] > 0.2 and out["p_env"] <= 0.01
    assert out["selected"] == 0 and out["space_only"] == 0.0
    out = calibration.planted_run(502, "environment", 199, broadest=10)
    assert out["env_only"] > 0.2 and out["p_env"] <= 0.01
    assert abs(out["space_only"]) < 0.03 and out["p_space"] > 0.01
