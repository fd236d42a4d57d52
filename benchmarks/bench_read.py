"""Reading the input tables: a large community CSV through the suite's reader, against
``pandas.read_csv`` alone on the same file in the same run.

    python benchmarks/bench_read.py [--sites 10000] [--taxa 2000]

The suite's reader does more than parse: it decodes and checks the text (encoding, control
characters), sniffs the delimiter, keeps the line number of every row for its messages,
checks site labels, counts and empty rows and columns, and logs its decisions. The table is
invented (negative-binomial counts, mostly zeros, as a metabarcoding table). Writes
``benchmarks/results_read.md``.
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def _table(n_sites: int, n_taxa: int) -> pd.DataFrame:
    rng = np.random.default_rng(0)
    mean = rng.lognormal(-1.5, 1.5, size=n_taxa)
    counts = rng.negative_binomial(0.5, 0.5 / (0.5 + mean), size=(n_sites, n_taxa))
    counts[:, counts.sum(axis=0) == 0] = 1  # no empty taxon
    counts[counts.sum(axis=1) == 0, 0] = 1  # no empty site
    return pd.DataFrame(counts, index=pd.Index([f"S{i:05d}" for i in range(n_sites)],
                                               name="site"),
                        columns=[f"taxon_{j:04d}" for j in range(n_taxa)])


def _timed(fn, repeats: int = 2) -> tuple[float, object]:
    best, out = float("inf"), None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def main() -> None:
    from gradients.data import read_survey

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, default=10_000)
    parser.add_argument("--taxa", type=int, default=2_000)
    a = parser.parse_args()
    load0 = os.getloadavg()[0]
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "community.csv"
        _table(a.sites, a.taxa).to_csv(path, lineterminator="\n")
        size = path.stat().st_size
        t_pd, frame = _timed(lambda: pd.read_csv(path, index_col="site"))
        t_ours, survey = _timed(lambda: read_survey(path))
        same = np.array_equal(survey.community.to_numpy(), frame.to_numpy())  # type: ignore[union-attr]
        tracemalloc.start()
        read_survey(path)
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    load1 = os.getloadavg()[0]
    text = "\n".join([
        "# Reading input tables (`benchmarks/bench_read.py`)", "",
        f"{time.strftime('%Y-%m-%d %H:%M')}; {platform.machine()}, {os.cpu_count()} cores "
        f"shared; 1-minute load average {load0:.1f} before, {load1:.1f} after. Best of two "
        "runs each.", "",
        f"Community table {a.sites:,} sites x {a.taxa:,} taxa, CSV of {size / 2**20:.0f} MiB.",
        "",
        "| reader | seconds | relative to pandas.read_csv |", "|---|---:|---:|",
        f"| `pandas.read_csv(path, index_col='site')` | {t_pd:.2f} | 1.0 |",
        f"| `gradients.read_survey(path)` (checks and log included) | {t_ours:.2f} | "
        f"{t_ours / t_pd:.1f} |", "",
        f"Same counts: {same}. Peak memory of `read_survey` (tracemalloc): "
        f"{peak / 2**20:.0f} MiB (the table itself: {a.sites * a.taxa * 8 / 2**20:.0f} MiB as "
        "int64).", ""])
    print(text)
    (HERE / "results_read.md").write_text(text, encoding="utf-8")


if __name__ == "__main__":
    main()
