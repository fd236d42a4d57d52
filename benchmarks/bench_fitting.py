"""Benchmark of the fitting stage against plain numpy loops measured in the same run.

Run as ``python benchmarks/bench_fitting.py``; prints a Markdown table (and writes nothing).

1. Vectors: 20 variables x 99,999 permutations at n = 300 sites on 2 axes, ``fit_vectors``
   end to end, against one ``numpy.linalg.lstsq`` per permutation (all 20 variables as the
   right-hand sides of one call). The loop is timed on the first 500 permutations of the same
   plan and scaled linearly to 99,999. Drawing the permutations (the engine's job, the same for
   both) is timed on its own, so two ratios are shown: the whole test (drawing included on
   both sides) and the statistic alone (drawing excluded on both sides).
2. Surface: 999 permutations at n = 200 with the smoothing parameter re-selected (GCV over
   120 values) on every permutation, ``fit_surface`` on 2 threads, against a loop that solves
   the penalised normal equations for every lambda of the grid for each permutation, timed on
   5 permutations and scaled.
"""

from __future__ import annotations

import os

# Both sides run with single-threaded BLAS: the problems are small (a few hundred rows), where
# BLAS threads only add start-up cost, and on a shared 2-core machine they oversubscribe the cores.
# Parallelism, where used, is the engine's (joblib threads over batches, ``n_jobs=2``).
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import platform
import time

import numpy as np
import pandas as pd

from gradients.fitting import fit_surface, fit_vectors
from gradients.fitting._vectors import _statistic_factory
from gradients.permutation import permutation_plan


def _timed(fn, repeat: int = 1) -> float:
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def bench_vectors(n: int = 300, p: int = 20, n_perm: int = 99_999, loop_perm: int = 500):
    rng = np.random.default_rng(0)
    sites = [f"s{i}" for i in range(n)]
    sc = pd.DataFrame(rng.normal(size=(n, 2)), index=sites, columns=["axis1", "axis2"])
    env = pd.DataFrame(rng.normal(size=(n, p)) + 0.2 * sc.axis1.to_numpy()[:, None],
                       index=sites, columns=[f"v{j}" for j in range(p)])
    fit_vectors(sc.iloc[:50], env.iloc[:50], n_resamples=99, rng=0)  # compile kernels
    plan = permutation_plan(n, n_resamples=n_perm, rng=1, site_labels=sc.index)
    t_draw = _timed(lambda: [None for _ in plan.batches()], repeat=2)
    t_ours = _timed(lambda: fit_vectors(sc, env, n_resamples=n_perm, rng=1), repeat=5)
    t_ours2 = _timed(lambda: fit_vectors(sc, env, n_resamples=n_perm, rng=1, n_jobs=2),
                     repeat=5)
    # the statistic alone, on 10 stored batches of 1000 orders, scaled to n_perm
    batches = [plan.batch(i) for i in range(10)]
    statistic = _statistic_factory(sc.to_numpy(), env.to_numpy(), None)(
        np.ones(n, dtype=bool), np.arange(p))
    t_stat = _timed(lambda: [statistic(b) for b in batches], repeat=5) * n_perm / 10_000
    orders = plan.batch(0)[:loop_perm]
    xd = np.column_stack([np.ones(n), sc.to_numpy()])
    y = env.to_numpy()

    def loop():
        out = np.empty((loop_perm, p))
        for b in range(loop_perm):
            yb = y[orders[b]]
            coef, *_ = np.linalg.lstsq(xd, yb, rcond=None)
            resid = yb - xd @ coef
            out[b] = 1 - (resid**2).sum(0) / ((yb - yb.mean(0)) ** 2).sum(0)
        return out

    t_loop = _timed(loop, repeat=5) * n_perm / loop_perm
    # agreement of the two ways on the loop's permutations
    check = loop()
    ours = fit_vectors(sc, env, n_resamples=n_perm, rng=1).null_distribution[:loop_perm]
    err = float(np.abs(check - ours).max())
    return {"draw": t_draw, "ours": t_ours, "ours2": t_ours2, "loop": t_loop, "err": err,
            "stat": t_stat}


def bench_surface(n: int = 200, n_perm: int = 999, loop_perm: int = 5):
    rng = np.random.default_rng(2)
    sites = [f"s{i}" for i in range(n)]
    sc = pd.DataFrame(rng.uniform(-2, 2, size=(n, 2)), index=sites, columns=["axis1", "axis2"])
    y = pd.Series(np.sin(sc.axis1) * sc.axis2 + rng.normal(0, 0.5, n), index=sites, name="y")
    counts = pd.Series(rng.poisson(np.exp(0.5 + np.sin(sc.axis1))), index=sites, name="count")
    fit_surface(sc.iloc[:40], y.iloc[:40], n_resamples=20, rng=0)  # compile kernels
    fit_surface(sc.iloc[:40], counts.iloc[:40], family="poisson", n_resamples=20, rng=0)
    t_g = _timed(lambda: fit_surface(sc, y, n_resamples=n_perm, rng=1, n_jobs=2), repeat=2)
    t_g1 = _timed(lambda: fit_surface(sc, y, n_resamples=n_perm, rng=1, n_jobs=1), repeat=2)
    t_p = _timed(lambda: fit_surface(sc, counts, family="poisson", n_resamples=n_perm, rng=1,
                                     n_jobs=2))
    t_n = _timed(lambda: fit_surface(sc, y, n_resamples=0))
    fit = fit_surface(sc, y, n_resamples=0)
    x, s = fit._basis.model_matrix, fit._basis.penalty
    from gradients.fitting._tprs import demmler_reinsch_svd, lambda_grid

    grid = lambda_grid(demmler_reinsch_svd(x, s)[1][0])
    orders = permutation_plan(n, n_resamples=n_perm, rng=1).batch(0)[:loop_perm]
    yv = y.to_numpy()

    def loop():
        for b in range(loop_perm):
            yb = yv[orders[b]]
            best = np.inf
            for lam in grid:
                a = x.T @ x + lam * s
                hat = x @ np.linalg.solve(a, x.T)
                rss = ((yb - hat @ yb) ** 2).sum()
                best = min(best, n * rss / (n - np.trace(hat)) ** 2)

    t_loop = _timed(loop, repeat=5) * n_perm / loop_perm + t_n
    return {"gauss2": t_g, "gauss1": t_g1, "poisson2": t_p, "loop": t_loop}


def main() -> None:
    load_before = os.getloadavg()[0]
    v = bench_vectors()
    s = bench_surface()
    load_after = os.getloadavg()[0]
    lines = [
        "## Fitting stage benchmark",
        "",
        f"Machine: {platform.processor() or platform.machine()}, {os.cpu_count()} cores, "
        f"numpy {np.__version__}, BLAS single-threaded (OPENBLAS_NUM_THREADS="
        f"{os.environ.get('OPENBLAS_NUM_THREADS')}). Times in seconds; vectors: best of 5 runs "
        "on both sides, surfaces: best of 2 (the loop best of 3); the machine is shared, so "
        "ratios matter more than times. 1-minute load average "
        f"{load_before:.1f} before, {load_after:.1f} after. With `n_jobs=1` the engine still "
        "draws the orders on both cores (compiled kernel); `n_jobs` adds threads evaluating "
        "batches.",
        "",
        "| task | plain numpy loop | gradients | ratio |",
        "|---|---:|---:|---:|",
        f"| vectors, 20 vars x 99,999 perms, n=300: statistic only (drawing excluded) | "
        f"{v['loop']:.2f} | {v['stat']:.2f} | {v['loop'] / v['stat']:.0f}x |",
        f"| vectors, same, whole `fit_vectors` call incl. drawing, `n_jobs=1` | "
        f"{v['loop'] + v['draw']:.2f} | "
        f"{v['ours']:.2f} | {(v['loop'] + v['draw']) / v['ours']:.0f}x |",
        f"| vectors, same, whole `fit_vectors` call incl. drawing, `n_jobs=2` | "
        f"{v['loop'] + v['draw']:.2f} | "
        f"{v['ours2']:.2f} | {(v['loop'] + v['draw']) / v['ours2']:.0f}x |",
        f"| surface, Gaussian, 999 perms with GCV re-selection, n=200, `n_jobs=2` | "
        f"{s['loop']:.1f} | {s['gauss2']:.2f} | {s['loop'] / s['gauss2']:.0f}x |",
        f"| surface, Gaussian, same, `n_jobs=1` | {s['loop']:.1f} | {s['gauss1']:.2f} | "
        f"{s['loop'] / s['gauss1']:.0f}x |",
        f"| surface, Poisson (PIRLS), 999 perms with UBRE re-selection, n=200, `n_jobs=2` | - | "
        f"{s['poisson2']:.2f} | - |",
        "",
        f"Statistic only: the batched r2 evaluated on 10 stored batches of 1,000 orders, "
        f"scaled to 99,999. Drawing the 99,999 permutations of 300 sites (engine, common to "
        f"both sides): {v['draw']:.2f} s. The lstsq loop was timed on 500 permutations and "
        "scaled to 99,999; "
        f"the largest difference between its r2 and the batched r2 was {v['err']:.1e}. The "
        "surface loop (penalised normal equations for each of the 120 lambda values of the "
        "grid, GCV minimum kept) was timed on 5 permutations and scaled to 999.",
    ]
    print("\n".join(lines))


if __name__ == "__main__":
    main()
