"""One Mantel test at a large number of sites: time, peak memory and the estimate before it.

    python benchmarks/bench_large.py --sites 20000 --permutations 99 --dtype float32

The two matrices are Euclidean distances among invented points (three coordinates each, the
second correlated with the first), stored as ``--dtype``. Peak memory is the process's
``ru_maxrss`` after the test, less the resident size just before it (inputs built): the
test's own peak, compared with :func:`gradients.matrix._memory.mantel_memory`. Appends to
``benchmarks/results_large.md`` with the load average.
"""

from __future__ import annotations

import argparse
import os
import platform
import resource
import time
from pathlib import Path

import numpy as np
from scipy.spatial.distance import pdist

HERE = Path(__file__).resolve().parent


def _rss_peak() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _rss_now() -> int:
    """Resident size now (Linux ``/proc/self/status``; the peak so far elsewhere)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return _rss_peak()


def main() -> None:
    from gradients import DistanceMatrix, mantel
    from gradients.matrix._memory import mantel_memory

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, default=20_000)
    parser.add_argument("--permutations", type=int, default=99)
    parser.add_argument("--dtype", default="float32", choices=("float32", "float64"))
    a = parser.parse_args()
    n = a.sites
    rng = np.random.default_rng(0)
    pts = rng.normal(size=(n, 3))
    other = 0.3 * pts + rng.normal(size=(n, 3))
    labels = [f"s{i}" for i in range(n)]
    small = range(30)  # compile outside the measurement
    mantel(DistanceMatrix(pdist(pts[:30]), small, dtype=a.dtype),
           DistanceMatrix(pdist(other[:30]), small, dtype=a.dtype), n_resamples=9, rng=1,
           dtype=a.dtype, n_jobs=-1)
    x = DistanceMatrix(pdist(pts), labels, dtype=a.dtype, metric="euclidean")
    y = DistanceMatrix(pdist(other), labels, dtype=a.dtype, metric="euclidean")
    load0 = os.getloadavg()[0]
    before = _rss_now()
    start = time.perf_counter()
    res = mantel(x, y, n_resamples=a.permutations, rng=1, dtype=a.dtype, n_jobs=-1)
    seconds = time.perf_counter() - start
    after = _rss_peak()
    load1 = os.getloadavg()[0]
    estimate = mantel_memory(n, n_resamples=a.permutations, dtype=a.dtype)
    gib = 2.0**30
    text = (f"\n| {n:,} | {a.permutations} | {a.dtype} | {seconds:.0f} | {after / gib:.2f} | "
            f"{max(after - before, 0) / gib:.2f} | {estimate / gib:.2f} | r = {res.statistic:.4f},"
            f" p = {res.pvalue:.3g} | {load0:.1f} / {load1:.1f} | "
            f"{time.strftime('%Y-%m-%d %H:%M')}, {platform.machine()}, {os.cpu_count()} cores |")
    print(text)
    out = HERE / "results_large.md"
    if not out.exists():
        out.write_text(
            "# Large Mantel tests (`benchmarks/bench_large.py`)\n\n"
            "| sites | permutations | storage | seconds | process peak (GiB) | the test's own "
            "peak (GiB) | estimate (GiB) | result | load before / after | when, host |\n"
            "|---:|---:|---|---:|---:|---:|---:|---|---|---|", encoding="utf-8")
    with open(out, "a", encoding="utf-8") as fh:
        fh.write(text)


if __name__ == "__main__":
    main()
