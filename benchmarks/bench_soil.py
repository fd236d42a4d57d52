"""Speed of the soil and water helpers against plain Python baselines, in the same run.

Texture classes: ``texture_class`` (the Soil Survey Manual's inequalities evaluated as integer
array comparisons over all samples at once) against a plain Python loop that tests the same
inequalities sample by sample, on 100,000 random compositions; the two must agree. Guideline
quotients: ``guideline_quotients`` (one pandas division per table) against a plain loop over
sites and variables computing each quotient, the mean quotient and the exceedance count, on
100,000 sites x 8 metals; the two must agree.

Run ``python benchmarks/bench_soil.py``; it prints a Markdown table (paste it into
``benchmarks/results_soil.md``). Invented data, for timing only.
"""

from __future__ import annotations

import os
import platform
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from gradients.data import guideline_quotients, texture_class

N = 100_000
ROOT = Path(__file__).resolve().parents[1]
SCREENING = ROOT / "examples" / "screening" / "freshwater_sediment_consensus.csv"


def plain_class(sand: float, silt: float, clay: float) -> str:
    """The Manual's inequalities, one sample at a time (the loop baseline)."""
    if sand > 85 and silt + 1.5 * clay < 15:
        return "sand"
    if 70 <= sand <= 91 and silt + 1.5 * clay >= 15 and silt + 2 * clay < 30:
        return "loamy sand"
    if (7 <= clay < 20 and sand > 52 and silt + 2 * clay >= 30) or (
            clay < 7 and silt < 50 and sand > 43 and silt + 2 * clay >= 30):
        return "sandy loam"
    if 7 <= clay < 27 and 28 <= silt < 50 and sand <= 52:
        return "loam"
    if (silt >= 50 and 12 <= clay < 27) or (50 <= silt < 80 and clay < 12):
        return "silt loam"
    if silt >= 80 and clay < 12:
        return "silt"
    if 20 <= clay < 35 and silt < 28 and sand > 45:
        return "sandy clay loam"
    if 27 <= clay < 40 and 20 < sand <= 45:
        return "clay loam"
    if 27 <= clay < 40 and sand <= 20:
        return "silty clay loam"
    if clay >= 35 and sand > 45:
        return "sandy clay"
    if clay >= 40 and silt >= 40:
        return "silty clay"
    return "clay"


def plain_quotients(values: np.ndarray, pec: np.ndarray) -> tuple[list[float], list[int]]:
    means, counts = [], []
    for row in values:
        total, n_above = 0.0, 0
        for v, s in zip(row, pec, strict=True):
            q = v / s
            total += q
            n_above += q > 1.0
        means.append(total / len(pec))
        counts.append(n_above)
    return means, counts


def best_of(fn, repeat: int = 3) -> tuple[float, object]:
    best, out = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def main() -> None:
    rng = np.random.default_rng(1)
    # whole tenths of a percent, as laboratories report, so both sides see the same numbers
    raw = rng.dirichlet([1.5, 1.5, 1.0], size=N) * 1000
    sand = np.floor(raw[:, 0])
    clay = np.floor(raw[:, 2])
    sand, clay = sand / 10, clay / 10
    silt = np.round(100 - sand - clay, 1)
    texture_class(sand[:10], silt[:10], clay[:10])  # warm up (imports)
    t_ours, ours = best_of(lambda: texture_class(sand, silt, clay))
    t_loop, loop = best_of(lambda: [plain_class(a, b, c) for a, b, c in
                                    zip(sand.tolist(), silt.tolist(), clay.tolist(),
                                        strict=True)], repeat=1)
    agree = ours.astype(str).tolist() == loop

    metals = ["As", "Cd", "Cr", "Cu", "Pb", "Hg", "Ni", "Zn"]
    table = pd.read_csv(SCREENING)
    pec = table[table["kind"] == "probable effect"].set_index("variable").loc[metals, "value"]
    env = pd.DataFrame(rng.lognormal(0, 1, size=(N, len(metals))) * pec.to_numpy() * 0.5,
                       columns=metals, index=[f"s{i}" for i in range(N)])
    units = dict.fromkeys(metals, "mg/kg")
    guideline_quotients(env.iloc[:10], SCREENING, units=units)  # warm up (pint registry)
    t_q, res = best_of(lambda: guideline_quotients(env, SCREENING, units=units))
    values = env.to_numpy()
    t_ql, (means, counts) = best_of(lambda: plain_quotients(values, pec.to_numpy()), repeat=1)
    agree_q = (np.allclose(res.table["mean_quotient"].to_numpy(), means, rtol=1e-12)
               and res.table["n_exceeded"].tolist() == counts)

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"n = {N:,} samples; {os.cpu_count()} cores, {platform.machine()}, numpy "
          f"{np.__version__}, pandas {pd.__version__}; load average {load:.2f} at start.\n")
    print("| task | ours (s) | plain Python loop (s) | ours is faster by | agree |")
    print("|---|---:|---:|---:|---|")
    print(f"| `texture_class`, {N:,} compositions | {t_ours:.3f} | {t_loop:.3f} | "
          f"**{t_loop / t_ours:.0f}x** | {agree} |")
    print(f"| `guideline_quotients`, {N:,} sites x 8 metals | {t_q:.3f} | {t_ql:.3f} | "
          f"**{t_ql / t_q:.1f}x** | {agree_q} |")
    print("\nOurs: best of 3; loops: one run. `guideline_quotients` includes reading and checking "
          "the screening table and the unit conversions.")


if __name__ == "__main__":
    main()
