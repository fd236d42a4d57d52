"""Distance stage: Bray-Curtis for 5,000 sites x 300 taxa, time and peak memory.

Compares :func:`gradients.distance.dissimilarity` (compiled loop writing straight into the
condensed vector) with ``scipy.spatial.distance.pdist(X, "braycurtis")`` and a plain numpy
baseline (one vectorised row of the upper triangle at a time) on the same table, and measures
peak memory of building one float32 matrix with ``tracemalloc`` (numpy reports its allocations
to it; the compiled kernel allocates nothing). Also times geodesic distances for 2,000 sites.
gradients and scipy run twice, alternating, and keep the faster run; the
other cases run once (the machine is shared). Run: ``python benchmarks/bench_distance.py``.
"""

from __future__ import annotations

import os
import platform
import time
import tracemalloc

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import dissimilarity, geographic_distance

N_SITES, N_TAXA = 5000, 300


def _numpy_bray_curtis(x: np.ndarray) -> np.ndarray:
    n = x.shape[0]
    tot = x.sum(axis=1)
    out = np.empty(n * (n - 1) // 2)
    pos = 0
    for i in range(n - 1):
        row = np.abs(x[i + 1 :] - x[i]).sum(axis=1) / (tot[i] + tot[i + 1 :])
        out[pos : pos + row.size] = row
        pos += row.size
    return out


def _timed(fn):
    t0 = time.perf_counter()
    value = fn()
    return time.perf_counter() - t0, value


def main() -> None:
    rng = np.random.default_rng(20261202)
    # overdispersed counts with many zeros, like survey data
    x = rng.negative_binomial(0.5, 0.2, size=(N_SITES, N_TAXA)).astype(np.float64)
    x[x.sum(axis=1) == 0, 0] = 1.0
    table = pd.DataFrame(x, index=[f"s{i}" for i in range(N_SITES)])
    dissimilarity(table.iloc[:20])  # compile (or load the cached kernel) outside the timing
    dissimilarity(table.iloc[:20], dtype=np.float32)

    load_before = os.getloadavg()[0]
    # gradients and scipy alternate twice and the faster of each pair is kept, so that a burst
    # of load from other work on the machine does not fall on one side only
    t_ours, d = _timed(lambda: dissimilarity(table, "bray-curtis"))
    t_scipy, ref = _timed(lambda: pdist(x, "braycurtis"))
    t_ours = min(t_ours, _timed(lambda: dissimilarity(table, "bray-curtis"))[0])
    t_scipy = min(t_scipy, _timed(lambda: pdist(x, "braycurtis"))[0])
    t_ours32, d32 = _timed(lambda: dissimilarity(table, "bray-curtis", dtype=np.float32))
    t_numpy, base = _timed(lambda: _numpy_bray_curtis(x))
    load_after = os.getloadavg()[0]
    err = float(np.max(np.abs(d.condensed - ref)))
    err_np = float(np.max(np.abs(base - ref)))
    err32 = float(np.max(np.abs(d32.condensed.astype(np.float64) - ref)))
    del d, d32, ref, base

    tracemalloc.start()
    m = dissimilarity(table, "bray-curtis", dtype=np.float32)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    stored = m.condensed.nbytes
    del m

    n_geo = 2000
    lon = rng.uniform(140, 150, n_geo)
    lat = rng.uniform(-40, -30, n_geo)
    import geopandas as gpd

    pts = gpd.GeoDataFrame(geometry=gpd.points_from_xy(lon, lat), crs="EPSG:4326",
                           index=[f"g{i}" for i in range(n_geo)])
    t_geo, g = _timed(lambda: geographic_distance(pts))
    pairs = g.condensed.size

    mib = 2**20
    print(f"Machine: {platform.machine()}, {os.cpu_count()} cores shared with other work "
          f"(1-minute load average {load_before:.1f} before, {load_after:.1f} after), Python "
          f"{platform.python_version()}, numpy {np.__version__}. gradients and scipy: best of two "
          "alternating runs; the others one run.\n")
    print(f"Bray-Curtis, {N_SITES:,} sites x {N_TAXA} taxa ({N_SITES * (N_SITES - 1) // 2:,} "
          "pairs)\n")
    print("| case | seconds | time relative to gradients (float64) | max abs difference vs "
          "scipy |")
    print("|---|---|---|---|")
    print(f"| gradients `dissimilarity`, float64 | {t_ours:.2f} | 1.00 | {err:.1e} |")
    print(f"| gradients `dissimilarity`, float32 storage | {t_ours32:.2f} | "
          f"{t_ours32 / t_ours:.2f} | {err32:.1e} |")
    print(f"| scipy `pdist(X, 'braycurtis')` | {t_scipy:.2f} | {t_scipy / t_ours:.2f} | 0 |")
    print(f"| plain numpy, row by row | {t_numpy:.2f} | {t_numpy / t_ours:.2f} | {err_np:.1e} |")
    print()
    print(f"Speed-up over scipy pdist: **{t_scipy / t_ours:.2f}x**; over the numpy baseline: "
          f"**{t_numpy / t_ours:.2f}x**.\n")
    print(f"Peak memory (tracemalloc) building one float32 Bray-Curtis matrix for "
          f"{N_SITES:,} sites: **{peak / mib:.0f} MiB** (stored matrix {stored / mib:.0f} MiB; "
          f"input table {x.nbytes / mib:.0f} MiB already allocated before the measurement); "
          "limit 2 GiB.\n")
    print(f"Geodesic distances (pyproj.Geod.inv, WGS84), {n_geo:,} sites ({pairs:,} pairs): "
          f"{t_geo:.2f} s ({t_geo / pairs * 1e6:.2f} us per pair).")


if __name__ == "__main__":
    main()
