"""Benchmark of the group tests against plain numpy baselines measured in the same run.

Run as ``python benchmarks/bench_groups.py``; prints a Markdown table and writes it to
``benchmarks/results_groups.md``.

1. One-way PERMANOVA, n = 500 sites in four zones of unequal size, Bray-Curtis dissimilarities
   of simulated counts, 999 permutations: the whole ``permanova`` call against recomputing the
   zones' sums of squares from the square matrix of squared dissimilarities for every
   permutation (``np.ix_`` on each zone's rearranged sites, Anderson 2001's
   ``SS_W = sum_g (1/n_g) sum_{i<j in g} d_ij^2``), on the same orders.
2. Two-way PERMANOVA with interaction, n = 500 (2 x 5 classes, unbalanced), sequential sums of
   squares, 999 permutations of the residuals of each term's reduced model: the whole call
   against refitting every term for every permutation (the permuted residual matrix
   ``Gr[o][:, o]`` regressed by ``numpy.linalg.lstsq`` on the reduced, reduced + term and
   full designs, whose fitted traces give the sums of squares), on the same orders.
3. ANOSIM and MRPP at n = 500, 999 permutations, for the record (no baseline target).
"""

from __future__ import annotations

import os

# Both sides run with single-threaded BLAS (the engine holds BLAS to one thread while it
# evaluates batches; the baseline gets the same). Parallelism, where used, is the engine's.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import platform
import time
from pathlib import Path

import numpy as np
import pandas as pd
from _machine import free_cores  # benchmarks/ is on the path when a script runs
from scipy.spatial.distance import pdist

from gradients import DistanceMatrix, anosim, mrpp, permanova
from gradients.distance import gower_centred
from gradients.groups._classes import streams
from gradients.groups._design import read_design
from gradients.groups._permanova import _build_tests, _plan, _run

FAST = {"pairwise": False, "dispersion": False}


def _timed(fn, repeat: int = 1) -> tuple[float, object]:
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def _counts(rng: np.random.Generator, signal: np.ndarray) -> np.ndarray:
    rate = np.exp(1.0 + signal + 0.4 * rng.normal(size=signal.shape))
    counts = rng.poisson(rate)
    counts[counts.sum(axis=1) == 0, 0] = 1
    return counts


def _orders(design_frame: pd.DataFrame, d: DistanceMatrix, terms, n_perm: int, rng: int):
    """The tests and the orders ``permanova(..., rng=rng)`` evaluates for each term."""
    design, _ = read_design(design_frame, d.labels, terms)
    tests, _, _, _ = _build_tests(design, gower_centred(d), "sequential", None)
    seed = streams(rng, 1)[0]
    return design, tests, [np.vstack(list(_plan(t, design, n_perm, seed).batches()))
                           for t in tests]


def bench_one_way(n: int = 500, n_perm: int = 999, rounds: int = 7) -> tuple[list[str], float]:
    rng = np.random.default_rng(0)
    sizes = [100, 125, 125, 150]
    zone = np.repeat(["reference", "near", "middle", "far"], sizes)
    signal = 0.3 * (zone == "near")[:, None] * rng.normal(size=40) + np.zeros((n, 40))
    lab = [f"s{i:03d}" for i in range(n)]
    d = DistanceMatrix(pdist(_counts(rng, signal), "braycurtis"), lab, metric="bray-curtis")
    frame = pd.DataFrame({"zone": zone}, index=lab)
    permanova(d, frame, n_resamples=99, rng=0, **FAST)  # warm-up: load the compiled kernels

    design, tests, (orders,) = _orders(frame, d, None, n_perm, 1)
    seed = streams(1, 1)[0]
    d2 = d.square() ** 2
    members = [np.flatnonzero(zone == z) for z in pd.unique(zone)]
    sst = d2[np.triu_indices(n, 1)].sum() / n
    k = len(members)

    def loop() -> np.ndarray:
        out = np.empty(len(orders))
        for b, o in enumerate(orders):
            ssw = 0.0
            for m in members:
                block = d2[np.ix_(o[m], o[m])]
                ssw += block.sum() / (2.0 * m.size)  # both triangles, zero diagonal
            out[b] = ((sst - ssw) / (k - 1)) / (ssw / (n - k))
        return out

    # The machine is shared: the sides are timed in turn, round after round, and the best
    # round of each is kept, so that a busy moment does not land on one side only.
    times = {"loop": [], "test": [], "call": [], "call2": []}
    for _ in range(rounds):
        t, ref = _timed(loop)
        times["loop"].append(t)
        t, alone = _timed(lambda: _run(tests, design, n_perm, seed, 1))
        times["test"].append(t)
        t, res1 = _timed(lambda: permanova(d, frame, n_resamples=n_perm, rng=1, **FAST))
        times["call"].append(t)
        t, res2 = _timed(lambda: permanova(d, frame, n_resamples=n_perm, rng=1, n_jobs=2,
                                           **FAST))
        times["call2"].append(t)
    assert res1.pvalue.equals(res2.pvalue) and alone["zone"][0] == res1.pvalue["zone"]
    t_loop, t_test, t1, t2 = (min(times[key]) for key in ("loop", "test", "call", "call2"))
    t_all, _ = _timed(lambda: permanova(d, frame, n_resamples=n_perm, rng=1))
    diff = float(np.max(np.abs(ref - res1.null_distribution["zone"]) / np.abs(ref)))
    return [
        f"| one-way PERMANOVA, n={n}, 4 zones, {n_perm} perms: the permutation test (drawing "
        f"the orders, the kernel, the p-value), `n_jobs=1` | {t_loop:.3f} | {t_test:.3f} | "
        f"{t_loop / t_test:.1f}x |",
        f"| same, whole `permanova` call (design, centred matrix, its eigenvalues for the "
        f"notes, the test), `n_jobs=1` | {t_loop:.3f} | {t1:.3f} | {t_loop / t1:.1f}x |",
        f"| same, `n_jobs=2` | {t_loop:.3f} | {t2:.3f} | {t_loop / t2:.1f}x |",
        f"| same with the dispersion test and the 6 pairwise comparisons, `n_jobs=1` | - | "
        f"{t_all:.2f} | - |",
    ], diff


def bench_two_way(n: int = 500, n_perm: int = 999) -> tuple[list[str], float]:
    rng = np.random.default_rng(1)
    a = rng.choice(["control", "impact"], n, p=[0.45, 0.55])
    b = rng.choice([f"y{j}" for j in range(5)], n, p=[0.15, 0.2, 0.2, 0.2, 0.25])
    signal = (0.3 * (a == "impact")[:, None] * rng.normal(size=40)
              + 0.2 * (b == "y4")[:, None] * rng.normal(size=40)
              + 0.2 * ((a == "impact") & (b == "y0"))[:, None] * rng.normal(size=40))
    lab = [f"s{i:03d}" for i in range(n)]
    d = DistanceMatrix(pdist(_counts(rng, signal), "braycurtis"), lab, metric="bray-curtis")
    frame = pd.DataFrame({"treatment": a, "year": b}, index=lab)
    terms = ["treatment*year"]
    permanova(d, frame, terms=terms, n_resamples=99, rng=0, **FAST)  # warm-up
    t1, res1 = _timed(lambda: permanova(d, frame, terms=terms, n_resamples=n_perm, rng=1,
                                        **FAST), 3)
    t2, res2 = _timed(lambda: permanova(d, frame, terms=terms, n_resamples=n_perm, rng=1,
                                        n_jobs=2, **FAST), 3)
    assert res1.pvalue.equals(res2.pvalue)

    design, tests, orders = _orders(frame, d, terms, n_perm, 1)
    coded = [x - x.mean(axis=0) for x in design.coded]
    ones = np.ones((n, 1))
    full = np.column_stack([ones, *coded])
    df_res = n - 1 - sum(t.df for t in tests)

    def loop() -> list[np.ndarray]:
        out = []
        for i, (t, ords) in enumerate(zip(tests, orders, strict=True)):
            reduced = np.column_stack([ones, *coded[:i]])
            with_term = np.column_stack([reduced, coded[i]])
            gr = t.g  # the residual matrix of the reduced model, built once
            total = float(np.trace(gr))
            values = np.empty(len(ords))
            for k, o in enumerate(ords):
                gp = gr[np.ix_(o, o)]
                fits = [np.einsum("ij,ji->", x, np.linalg.lstsq(x, gp, rcond=None)[0])
                        for x in (reduced, with_term, full)]
                values[k] = ((fits[1] - fits[0]) / t.df) / ((total - fits[2]) / df_res)
            out.append(values)
        return out

    t_loop, ref = _timed(loop)
    diff = max(float(np.max(np.abs(r - res1.null_distribution[t.term.name]) / np.abs(r)))
               for r, t in zip(ref, tests, strict=True))
    return [
        f"| two-way PERMANOVA with interaction, n={n}, 2 x 5 classes, 3 terms, {n_perm} perms, "
        f"whole call, `n_jobs=1` | {t_loop:.2f} | {t1:.3f} | {t_loop / t1:.0f}x |",
        f"| same, `n_jobs=2` | {t_loop:.2f} | {t2:.3f} | {t_loop / t2:.0f}x |",
    ], diff


def bench_ranks(n: int = 500, n_perm: int = 999) -> list[str]:
    rng = np.random.default_rng(2)
    zone = np.repeat(["reference", "near", "middle", "far"], [100, 125, 125, 150])
    lab = [f"s{i:03d}" for i in range(n)]
    d = DistanceMatrix(pdist(_counts(rng, np.zeros((n, 40))), "braycurtis"), lab)
    anosim(d, zone, n_resamples=99, rng=0)
    mrpp(d, zone, n_resamples=99, rng=0)
    t_a, _ = _timed(lambda: anosim(d, zone, n_resamples=n_perm, rng=1), 3)
    t_m, _ = _timed(lambda: mrpp(d, zone, n_resamples=n_perm, rng=1), 3)
    return [f"| ANOSIM, n={n}, 4 zones, {n_perm} perms, `n_jobs=1` | - | {t_a:.3f} | - |",
            f"| MRPP, same | - | {t_m:.3f} | - |"]


def main() -> None:
    before = os.getloadavg()[0]
    free = free_cores()
    rows, diff1 = bench_one_way()
    more, diff2 = bench_two_way()
    rows += more
    rows += bench_ranks()
    after = os.getloadavg()[0]
    head = [
        "## Group tests benchmark (`benchmarks/bench_groups.py`)",
        "",
        f"Machine: {platform.machine()}, {os.cpu_count()} cores shared with other work "
        f"(1-minute load average {before:.1f} before, {after:.1f} after), Python "
        f"{platform.python_version()}, numpy {np.__version__}, BLAS single-threaded. Times in "
        "seconds; one way: the best of 7 rounds, the sides timed in turn; two way and the "
        "rest: best of 3 (the two-way loop: one run). Two threads ran plain BLAS "
        f"products {free:.2f}x as fast as one at the start (2.00 = both cores free): "
        "`n_jobs=2` can gain only that much.",
        "",
        "| task | plain numpy per permutation | gradients | ratio |",
        "|---|---:|---:|---:|",
    ]
    tail = [
        "",
        "Baselines: one way, the zones' sums of squares recomputed from the square matrix of "
        "squared dissimilarities (`np.ix_` per zone) for each permutation; two way, every "
        "term refitted by `numpy.linalg.lstsq` to the rearranged residual matrix for each "
        "permutation. Both evaluate the same orders as the `permanova` call. Largest relative "
        f"difference between the baseline's and the call's pseudo-F: {diff1:.1e} (one way), "
        f"{diff2:.1e} (two way).",
    ]
    text = "\n".join(head + rows + tail) + "\n"
    print(text)
    Path(__file__).with_name("results_groups.md").write_text(text, encoding="utf-8")


if __name__ == "__main__":
    main()
