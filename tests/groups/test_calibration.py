"""Null calibration, a short version of validation/groups_calibration.py (whose 1,000-data-set
results are in docs/groups.md); the simulators are that script's."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

_SCRIPT = Path(__file__).resolve().parents[2] / "validation" / "groups_calibration.py"
_spec = importlib.util.spec_from_file_location("groups_calibration", _SCRIPT)
calibration = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(calibration)


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["one-way", "interaction", "anosim", "mrpp"])
def test_type_one_error_within_the_binomial_interval(kind):
    # Theory: under the null, P(p <= 0.05) = 0.05 for (b + 1)/(P + 1) with 99 permutations
    # (Phipson & Smyth 2010); exact for reassigning sites among classes (one way, ANOSIM,
    # MRPP: Anderson 2001; Clarke 1993; Mielke et al. 1976), approximately for permuting
    # residuals (the interaction; Anderson & ter Braak 2003). Unequal class sizes throughout.
    # The count of rejections in 200 data sets must fall in the 99 % binomial interval
    # (scipy.stats.binom), and the p-values must not pile up (Kolmogorov-Smirnov, scipy).
    datasets = 200
    p = np.array([calibration.null_pvalue(919 * s + 3, kind, "euclidean", 99)
                  for s in range(datasets)])
    lo, hi = stats.binom.interval(0.99, datasets, 0.05)
    assert lo <= np.sum(p <= 0.05) <= hi, np.sum(p <= 0.05)
    assert stats.kstest(p, "uniform").pvalue > 0.001
