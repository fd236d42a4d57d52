"""The Mantel family's memory estimates against the measured peak, at two sizes.

The peak is measured by the standard library's tracemalloc (which sees every numpy array) in
a fresh interpreter per case, from after the inputs are built to the end of the call. Orders
drawn by the compiled shuffle are allocated by numba, which tracemalloc does not see, so that
part of the estimate (batch_bytes) is left out of the comparison.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap

import pytest

from gradients import InputError
from gradients.matrix._memory import (
    batch_bytes,
    mantel_memory,
    partial_mantel_memory,
    spatial_memory,
)

SCRIPT = textwrap.dedent("""
    import sys, tracemalloc
    import numpy as np
    from scipy.spatial.distance import pdist
    from gradients import DistanceMatrix, mantel, partial_mantel
    kind, dt = sys.argv[1], sys.argv[2]
    w = np.random.default_rng(1).normal(size=(12, 3, 3))  # compile the kernels first
    wx, wy, wz = (DistanceMatrix(pdist(v), range(12), dtype=dt) for v in w.transpose(1, 0, 2))
    mantel(wx, wy, n_resamples=9, rng=1, dtype=dt)
    partial_mantel(wx, wy, {"a": wz}, n_resamples=9, rng=1, dtype=dt)
    for n in map(int, sys.argv[3:]):
        rng = np.random.default_rng(0)
        a = rng.normal(size=(n, 3)); b = 0.3 * a + rng.normal(size=(n, 3))
        z = rng.normal(size=(n, 2)); xy = rng.uniform(size=(n, 2))
        lab = range(n)
        D = lambda v: DistanceMatrix(pdist(v), lab, dtype=dt)
        x, y, c1, c2 = D(a), D(b), D(z), D(z[:, :1] + rng.normal(size=(n, 1)))
        if kind == "spatial":  # run once outside the measurement (compiles the kernels)
            mantel(x, y, n_resamples=9, rng=1, spatial_null=xy, n_surrogates=2)
            # then measure a run's first spatial test, which builds the weights, the maps and
            # the principal coordinates that later tests share
            from gradients.matrix import _spatial
            for cache in (_spatial._RECENT_WEIGHTS, _spatial._RECENT_MAPS,
                          _spatial._RECENT_COORDINATES):
                cache.clear()
        tracemalloc.start()
        base = tracemalloc.get_traced_memory()[0]
        if kind == "mantel":
            mantel(x, y, n_resamples=49, rng=1, dtype=dt)
        elif kind == "spatial":
            mantel(x, y, n_resamples=49, rng=1, spatial_null=xy, n_surrogates=9)
        else:
            partial_mantel(x, y, {"a": c1, "b": c2}, n_resamples=49, rng=1, dtype=dt)
        print(tracemalloc.get_traced_memory()[1] - base)
        tracemalloc.stop()
""")


def _peaks(kind: str, dtype: str, sizes: tuple[int, ...]) -> list[int]:
    out = subprocess.run([sys.executable, "-c", SCRIPT, kind, dtype, *map(str, sizes)],
                         check=True, capture_output=True, text=True, timeout=300)
    return [int(v) for v in out.stdout.split()]


@pytest.mark.parametrize(("kind", "dtype", "sizes"), [
    ("mantel", "float64", (600, 1200)),
    ("mantel", "float32", (600, 1200)),
    ("partial", "float64", (400, 800)),
    ("partial", "float32", (400, 800)),
    ("spatial", "float64", (300, 600)),
])
def test_estimate_within_a_quarter_of_the_measured_peak(kind, dtype, sizes):
    for n, peak in zip(sizes, _peaks(kind, dtype, sizes), strict=True):
        perms = 49
        if kind == "partial":
            est = partial_mantel_memory(n, 2, n_resamples=perms, dtype=dtype)
        else:
            est = mantel_memory(n, n_resamples=perms, dtype=dtype, spatial=kind == "spatial")
        est -= batch_bytes(n, perms)
        assert abs(est - peak) <= 0.25 * peak, (kind, dtype, n, est, peak)


def test_float32_halves_the_mantel_estimate_or_better():
    assert mantel_memory(5000, dtype="float32") < 0.5 * mantel_memory(5000)


def test_estimates_grow_with_the_pairs():
    # every term is a multiple of m = n(n-1)/2 or of n^2 (apart from the batch of orders)
    a, b = mantel_memory(2000) - batch_bytes(2000, 9999), mantel_memory(4000) - batch_bytes(
        4000, 9999)
    assert b / a == pytest.approx(4000 * 3999 / (2000 * 1999))
    assert spatial_memory(1000) == 8 * 8 * 1000**2


def test_refuses_too_few_sites():
    with pytest.raises(InputError, match="at least 3"):
        mantel_memory(2)
