"""How cost grows: every analysis timed at three numbers of sites, growth exponent fitted.

    python benchmarks/bench_growth.py                 # all analyses, writes results_growth.md
    python benchmarks/bench_growth.py --only mantel,pcoa
    python benchmarks/bench_growth.py --write-docs    # also rewrites the tables in
                                                      # docs/scaling.md (between the markers)

Each analysis runs once per size on a simulated survey (``simulate_survey``; invented data,
for timing only) with ``n_jobs=-1`` where it has the keyword, after a warm-up call on a small
problem (numba compiles once per process). Peak memory is tracemalloc's, from the call's start
(numpy's arrays; numba's own allocations are not seen). The growth exponent ``b`` of
``time = a n^b`` is the least-squares slope of log time on log n over the three sizes; for the
permutation tests a second run at the middle size with 10x the permutations gives the exponent
in ``P``. Analyses whose cost is cubic in ``n`` (an ``n x n`` eigenproblem, NMDS, the spatial
null, ranking's refits) use a smaller top size, said in the table.
"""

from __future__ import annotations

import argparse
import os
import platform
import re
import sys
import time
import tracemalloc
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
ROOT = HERE.parent

SMALL = (100, 1000, 5000)
CUBIC = (100, 500, 2000)
PERMS = 999


def _survey(n: int) -> dict[str, object]:
    """The inputs every analysis needs, for n sites (cached per size)."""
    from gradients import dissimilarity, environmental_distance, geographic_distance, pcoa
    from gradients.data import simulate_survey

    if n in _CACHE:
        return _CACHE[n]
    scen = simulate_survey(max(n, 9), rng=1)
    survey = scen.survey()
    com = survey.community
    env = survey.environment
    numeric = env.select_dtypes("number")
    d = dissimilarity(com, "bray-curtis")
    locs = survey.locations
    geo = geographic_distance(locs)
    metals = np.log10(numeric[["Cu", "Zn", "Pb"]])
    e1 = environmental_distance(metals)
    e2 = environmental_distance(numeric[["pH", "organic_matter"]])
    scores = pcoa(d, dimensions=2).scores
    out = {"community": com, "env": numeric, "d": d, "geo": geo, "e1": e1, "e2": e2,
           "metals": metals, "scores": scores, "groups": env["habitat"].astype(str),
           "locations": locs}
    _CACHE[n] = out
    return out


_CACHE: dict[int, dict[str, object]] = {}


def _analyses() -> dict[str, tuple[tuple[int, ...], bool, Callable[..., object]]]:
    """name -> (sizes, permutation test?, f(inputs, n_resamples))."""
    import gradients as g

    def vec(s, p):
        return g.fit_vectors(s["scores"], s["env"], n_resamples=p, rng=1, n_jobs=-1)

    small, cubic = SMALL, CUBIC
    return {
        "dissimilarity (Bray-Curtis)": (small, False,
                                        lambda s, p: g.dissimilarity(s["community"],
                                                                     "bray-curtis")),
        "pcoa (2 axes)": (cubic, False, lambda s, p: g.pcoa(s["d"], dimensions=2)),
        "nmds (2 dims, 4 starts)": (cubic if small[0] < 100 else (100, 300, 1000), False,
                                    lambda s, p: g.nmds(s["d"], starts=4, rng=1, n_jobs=-1)),
        "fit_vectors": (small, True, vec),
        "fit_factors": (small, True, lambda s, p: g.fit_factors(
            s["scores"], s["groups"], n_resamples=p, rng=1, n_jobs=-1)),
        "mantel": (small, True, lambda s, p: g.mantel(s["e1"], s["d"], n_resamples=p, rng=1,
                                                      n_jobs=-1)),
        "mantel, float32": (small, True, lambda s, p: g.mantel(
            s["e1"], s["d"], n_resamples=p, rng=1, n_jobs=-1, dtype=np.float32)),
        "mantel with spatial null": (cubic, True, lambda s, p: g.mantel(
            s["e1"], s["d"], n_resamples=p, rng=1, n_jobs=-1, spatial_null=s["geo"],
            n_surrogates=p)),
        "partial_mantel (2 controls)": (small, True, lambda s, p: g.partial_mantel(
            s["e1"], s["d"], {"e2": s["e2"], "geo": s["geo"]}, n_resamples=p, rng=1,
            n_jobs=-1)),
        "matrix_regression (3 predictors)": (small, True, lambda s, p: g.matrix_regression(
            s["d"], {"e1": s["e1"], "e2": s["e2"], "geo": s["geo"]}, n_resamples=p, rng=1,
            n_jobs=-1)),
        "mantel_correlogram": (small, True, lambda s, p: g.mantel_correlogram(
            s["d"], s["geo"], n_resamples=p, rng=1, n_jobs=-1)),
        "permanova (one factor)": (small, True, lambda s, p: g.permanova(
            s["d"], s["groups"].to_frame("habitat"), n_resamples=p, rng=1, n_jobs=-1)),
        "dispersion_test": (small, True, lambda s, p: g.dispersion_test(
            s["d"], s["groups"], n_resamples=p, rng=1, n_jobs=-1)),
        "anosim": (small, True, lambda s, p: g.anosim(s["d"], s["groups"], n_resamples=p,
                                                       rng=1, n_jobs=-1)),
        "mrpp": (small, True, lambda s, p: g.mrpp(s["d"], s["groups"], n_resamples=p, rng=1,
                                                   n_jobs=-1)),
        "indicator_taxa": (small, True, lambda s, p: g.indicator_taxa(
            s["community"], s["groups"], n_resamples=p, rng=1, n_jobs=-1)),
        "dbrda (3 predictors)": (cubic, True, lambda s, p: g.dbrda(
            s["d"], s["metals"], n_resamples=p, rng=1, n_jobs=-1)),
        "rank_variables": (cubic if small[0] < 100 else (100, 200, 400), True,
                           lambda s, p: g.rank_variables(s["d"], s["env"].iloc[:, :6],
                                                         n_resamples=p, rng=1, n_jobs=-1)),
    }


def _measure(fn: Callable[[], object]) -> tuple[float, int]:
    tracemalloc.start()
    start = time.perf_counter()
    fn()
    seconds = time.perf_counter() - start
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return seconds, peak


def _slope(x: list[float], y: list[float]) -> float:
    return float(np.polyfit(np.log(x), np.log(y), 1)[0])


def run(only: set[str] | None) -> str:
    from _machine import free_cores

    analyses = _analyses()
    load0, cores = os.getloadavg()[0], free_cores()
    rows = []
    for name, (sizes, permuted, fn) in analyses.items():
        if only and not any(o in name for o in only):
            continue
        warm = _survey(60)
        fn(warm, 9)  # compile
        times, peaks = [], []
        for n in sizes:
            s = _survey(n)
            t, m = _measure(lambda s=s, fn=fn: fn(s, PERMS))
            times.append(t)
            peaks.append(m)
            print(f"{name} n={n}: {t:.2f} s, {m / 2**20:.0f} MiB", flush=True)
        p_exp = ""
        if permuted:
            s = _survey(sizes[1])
            t10, _ = _measure(lambda s=s, fn=fn: fn(s, 10 * PERMS + 9))
            p_exp = f"{_slope([PERMS + 1, 10 * PERMS + 10], [times[1], t10]):.2f}"
            print(f"{name} n={sizes[1]}, P={10 * PERMS + 9}: {t10:.2f} s", flush=True)
        rows.append((name, sizes, times, peaks, _slope(list(sizes), times), p_exp))
    load1 = os.getloadavg()[0]
    # the probe times BLAS products, which may already use both cores on one thread of ours:
    # a speed-up below 1 or above 2 says nothing about the other work, and is left out
    probe = (f" (second core {100 * (cores - 1):.0f} % free by `_machine.free_cores`)"
             if 1.0 <= cores <= 2.0 else "")
    lines = [f"{time.strftime('%Y-%m-%d %H:%M')}; {platform.machine()}, {os.cpu_count()} cores "
             f"shared{probe}; "
             f"1-minute load average {load0:.1f} before, {load1:.1f} after; Python "
             f"{platform.python_version()}, numpy {np.__version__}. P = {PERMS} permutations "
             "unless said; one run per cell.", "",
             "| analysis | n | seconds | peak MiB | exponent in n | exponent in P |",
             "|---|---|---|---|---:|---:|"]
    for name, sizes, times, peaks, b, p_exp in rows:
        lines.append(f"| {name} | {' / '.join(f'{n:,}' for n in sizes)} | "
                     f"{' / '.join(f'{t:.2f}' for t in times)} | "
                     f"{' / '.join(f'{m / 2**20:.0f}' for m in peaks)} | {b:.2f} | "
                     f"{p_exp or '-'} |")
    return "\n".join(lines) + "\n"


BEGIN, END = "<!-- growth table: begin -->", "<!-- growth table: end -->"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", default="", help="comma-separated parts of analysis names")
    parser.add_argument("--write-docs", action="store_true")
    parser.add_argument("--sizes", default="",
                        help="three sizes for the quadratic analyses (default 100,1000,5000)")
    parser.add_argument("--cubic-sizes", default="",
                        help="three sizes for the cubic ones (default 100,500,2000)")
    parser.add_argument("--quick", action="store_true",
                        help="tiny sizes and 49 permutations: checks the script, times nothing")
    a = parser.parse_args()
    global SMALL, CUBIC, PERMS
    if a.sizes:
        SMALL = tuple(int(v) for v in a.sizes.split(","))
    if a.cubic_sizes:
        CUBIC = tuple(int(v) for v in a.cubic_sizes.split(","))
    if a.quick:
        SMALL = CUBIC = (30, 45, 60)
        PERMS = 49
    only = {o.strip() for o in a.only.split(",") if o.strip()} or None
    table = run(only)
    print(table)
    if not a.quick:
        with open(HERE / "results_growth.md", "a", encoding="utf-8") as fh:
            fh.write("\n" + table)
    if a.write_docs and not a.quick:
        doc = ROOT / "docs" / "scaling.md"
        text = doc.read_text(encoding="utf-8")
        pattern = re.compile(re.escape(BEGIN) + ".*?" + re.escape(END), re.S)
        text = pattern.sub(lambda _: f"{BEGIN}\n{table}{END}", text)
        doc.write_text(text, encoding="utf-8")


if __name__ == "__main__":
    pd.set_option("display.width", 120)
    main()
