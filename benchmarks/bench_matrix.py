"""Speed of the Mantel permutation kernels against plain numpy baselines, in one run.

Run: ``python benchmarks/bench_matrix.py > benchmarks/results_matrix.md`` (Mantel case) or
``python benchmarks/bench_matrix.py partial > benchmarks/results_matrix_partial.md`` (partial
Mantel case, described in :func:`partial_case`).

Case: n = 1,000 sites (499,500 pairs), 9,999 permutations, Pearson statistic.

- ours: :func:`gradients.matrix.mantel` end to end (plan, batches, compiled kernel on two
  threads, p-value), after one small warm-up call that loads the compiled kernel from cache;
  best of 3 runs.
- textbook: for each permutation, permute the square matrix with ``np.ix_``, take the upper
  triangle and ``np.corrcoef`` with the other condensed vector. Timed on a subset of 200
  permutations (best of 3 thirds) and scaled linearly to 9,999 (each permutation costs the
  same).
- floor: one ``np.dot`` of the two condensed vectors per permutation (what any method must at
  least stream through memory), timed on 3,000 (best of 3 thirds) and scaled linearly to
  9,999.

numpy's BLAS is held to one thread (``OPENBLAS_NUM_THREADS=1`` unless already set) so that its
thread pool does not compete with the kernel's threads; the textbook loop and the floor are
then single-threaded numpy, as most users would run them.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import platform
import sys
import time

import numpy as np
from numba import njit, prange
from scipy.spatial.distance import pdist, squareform

import gradients.matrix._partial as partial_module
from gradients.data import simulate_survey
from gradients.distance import (
    DistanceMatrix,
    dissimilarity,
    environmental_distance,
    geographic_distance,
)
from gradients.matrix import mantel, partial_mantel
from gradients.matrix._kernels import cross_products

N_SITES = 1000
N_PERM = 9999
TEXTBOOK_SUBSET = 200
FLOOR_SUBSET = 3000
REPEATS = 3  # each timing is the best of this many, so a burst of other load does not count
PARTIAL_PERM = 999
PARTIAL_TEXTBOOK_SUBSET = 30
KERNEL_ORDERS = 252


def main() -> None:
    load = os.getloadavg()[0]
    rng = np.random.default_rng(2026)
    labels = [f"s{i}" for i in range(N_SITES)]
    a = rng.normal(size=(N_SITES, 5))
    b = 0.3 * a + rng.normal(size=(N_SITES, 5))
    x = DistanceMatrix(pdist(a), labels)
    y = DistanceMatrix(pdist(b), labels)

    mantel(x, y, n_resamples=99, rng=0, n_jobs=2)  # warm-up: load the cached kernel

    t_ours = np.inf
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        res = mantel(x, y, n_resamples=N_PERM, rng=1, n_jobs=2)
        t_ours = min(t_ours, time.perf_counter() - t0)
    t0 = time.perf_counter()
    mantel(x, y, n_resamples=N_PERM, rng=1, n_jobs=1)
    t_ours_1 = time.perf_counter() - t0

    xc = x.condensed
    ysq = y.square()
    iu = np.triu_indices(N_SITES, k=1)
    orders = rng.permuted(np.broadcast_to(np.arange(N_SITES), (TEXTBOOK_SUBSET, N_SITES)),
                          axis=1)
    t_text = np.inf
    for part in np.array_split(orders, REPEATS):
        t0 = time.perf_counter()
        for p in part:
            np.corrcoef(xc, ysq[np.ix_(p, p)][iu])[0, 1]
        t_text = min(t_text, (time.perf_counter() - t0) / len(part) * N_PERM)

    xs = xc - xc.mean()
    ys = y.condensed - y.condensed.mean()
    t_floor = np.inf
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        for _ in range(FLOOR_SUBSET // REPEATS):
            np.dot(xs, ys)
        t_floor = min(t_floor, (time.perf_counter() - t0) / (FLOOR_SUBSET // REPEATS) * N_PERM)

    print("# Matrix stage benchmark: Mantel permutation kernel")
    print()
    print(f"n = {N_SITES} sites ({N_SITES * (N_SITES - 1) // 2} pairs), {N_PERM} permutations, "
          f"Pearson; {os.cpu_count()} cores, {platform.processor() or platform.machine()}, "
          f"numpy {np.__version__}; load average {load:.2f} at start; r = {res.statistic:.4f}, "
          f"p = {res.pvalue:.4g}.")
    print()
    print("| method | seconds (9,999 permutations) | ours is faster by |")
    print("|---|---:|---:|")
    print(f"| ours, `mantel(..., n_jobs=2)` (both cores) | {t_ours:.2f} | 1 |")
    print(f"| ours, `mantel(..., n_jobs=1)` | {t_ours_1:.2f} | {t_ours_1 / t_ours:.2f}x |")
    print(f"| textbook `np.ix_` + `np.corrcoef` (timed on {TEXTBOOK_SUBSET}, best third, scaled) "
          f"| {t_text:.1f} | **{t_text / t_ours:.0f}x** |")
    print(f"| floor: one `np.dot` of condensed vectors per permutation (timed on "
          f"{FLOOR_SUBSET}, best third, scaled) | {t_floor:.2f} | {t_floor / t_ours:.2f}x |")
    print()
    print(f"Ratio to the memory-bound floor: ours (both cores) takes "
          f"**{t_ours / t_floor:.2f}x** the floor's time; on one core "
          f"{t_ours_1 / t_floor:.2f}x. Target: textbook / ours >= 40, ours / floor <= 4.")
    print()
    print("The machine is shared with other work: each time is the best of 3, so that a burst "
          "of other load does not count; ratios still vary somewhat from run to run.")


# --------------------------------------------------------------------------- partial Mantel
@njit(parallel=True, cache=True, nogil=True)
def _cross_many_before(x, y, orders):  # pragma: no cover
    """The multi-column kernel as it was before the four-order, four-column passes: one order
    per pass, accumulators in a heap array. Kept here only as the before of the timing."""
    k, n = orders.shape
    q = x.shape[1]
    out = np.empty((k, q))
    for b in prange(k):
        p = orders[b]
        acc = np.zeros(q)
        t = 0
        for i in range(n - 1):
            row = y[p[i]]
            for j in range(i + 1, n):
                v = np.float64(row[p[j]])
                for c in range(q):
                    acc[c] += x[t, c] * v
                t += 1
        for c in range(q):
            out[b, c] = acc[c]
    return out


def _cross_before(x, y, orders):
    if x.ndim == 1:
        return cross_products(x, y, orders)
    return _cross_many_before(np.ascontiguousarray(x), y, np.ascontiguousarray(orders, np.uint32))


def _interleaved(fns, repeats=REPEATS):
    """Best time and last result of each function, the functions taking turns in each round
    so that a burst of other load on the shared machine does not favour one of them."""
    best = [np.inf] * len(fns)
    outs = [None] * len(fns)
    for _ in range(repeats):
        for f, fn in enumerate(fns):
            t0 = time.perf_counter()
            outs[f] = fn()
            best[f] = min(best[f], time.perf_counter() - t0)
    return best, outs


def partial_case() -> None:
    """Partial Mantel test, n = 1,000 simulated sites, 999 permutations, 3 control matrices.

    x: Bray-Curtis of the community; y: Euclidean distance of the four metals; controls: soil
    texture, water chemistry, geographic distance (``simulate_survey(1000, rng=1)``). The kernel
    then takes q = 4 fixed columns (residuals of y and the three orthonormal control columns).

    - ours: :func:`gradients.matrix.partial_mantel` end to end, ``n_jobs=2``, best of 3, after
      a small warm-up call.
    - before: the same call with the previous multi-column kernel swapped in, taking turns with
      ours in each of the 3 rounds (so that a burst of other load does not favour either).
    - kernel alone: the new and previous kernel on the call's own fixed columns and matrix for
      252 orders, best of 3 rounds taken in turn, with a check that the values are
      bit-identical.
    - textbook: per permutation, permute the residual matrix with ``np.ix_``, take the upper
      triangle, regress it on the controls with ``np.linalg.lstsq`` and correlate the residuals
      with those of y; timed on 30 permutations (best of 3 thirds), scaled to 999.
    """
    load = os.getloadavg()[0]
    sv = simulate_survey(N_SITES, rng=1).survey()
    x = dissimilarity(sv, "bray-curtis")
    y = environmental_distance(sv, variables=["Cu", "Zn", "Pb", "Cd"])
    z = [environmental_distance(sv, variables=["sand", "silt", "clay", "organic_matter"]),
         environmental_distance(sv, variables=["pH", "conductivity"]),
         geographic_distance(sv)]

    seen = {}

    def capture(fixed, big, orders):
        seen.setdefault("args", (fixed, big))
        return cross_products(fixed, big, orders)

    def run(n_resamples=PARTIAL_PERM):
        return partial_mantel(x, y, z, n_resamples=n_resamples, rng=1, n_jobs=2)

    def run_before():
        partial_module.cross_products = _cross_before
        try:
            return run()
        finally:
            partial_module.cross_products = cross_products

    partial_module.cross_products = capture
    run(99)  # warm-up: load the compiled kernels, and keep the kernel's inputs
    partial_module.cross_products = cross_products
    _cross_before(*seen["args"], np.arange(N_SITES)[None, :])
    (t_ours, t_before), (res, res_before) = _interleaved([run, run_before])
    identical = np.array_equal(res.null_distribution, res_before.null_distribution)

    fixed, big = seen["args"]
    orders = np.random.default_rng(7).permuted(
        np.broadcast_to(np.arange(N_SITES), (KERNEL_ORDERS, N_SITES)), axis=1)
    (k_new, k_old), (c_new, c_old) = _interleaved(
        [lambda: cross_products(fixed, big, orders), lambda: _cross_before(fixed, big, orders)])
    k_identical = np.array_equal(c_new, c_old)

    # textbook: y's residuals and the control design are fixed; the permuted x is refitted
    iu = np.triu_indices(N_SITES, k=1)
    design = np.column_stack([np.ones(iu[0].size)] + [m.condensed for m in z])

    def resid(v):
        return v - design @ np.linalg.lstsq(design, v, rcond=None)[0]

    e_y = resid(y.condensed)
    xsq = squareform(resid(x.condensed), checks=False)  # residuals, permuted as a matrix
    perms = np.random.default_rng(3).permuted(
        np.broadcast_to(np.arange(N_SITES), (PARTIAL_TEXTBOOK_SUBSET, N_SITES)), axis=1)
    t_text = np.inf
    for part in np.array_split(perms, REPEATS):
        t0 = time.perf_counter()
        for p in part:
            np.corrcoef(resid(xsq[np.ix_(p, p)][iu]), e_y)[0, 1]
        t_text = min(t_text, (time.perf_counter() - t0) / len(part) * PARTIAL_PERM)

    print("# Matrix stage benchmark: partial Mantel kernel")
    print()
    print(f"n = {N_SITES} simulated sites ({N_SITES * (N_SITES - 1) // 2} pairs), "
          f"{PARTIAL_PERM} permutations, 3 control matrices (q = 4 kernel columns); "
          f"{os.cpu_count()} cores, {platform.processor() or platform.machine()}, numpy "
          f"{np.__version__}; load average {load:.2f} at start; r = {res.statistic:.4f}, "
          f"p = {res.pvalue:.4g}.")
    print()
    print("| method | seconds | ours is faster by |")
    print("|---|---:|---:|")
    print(f"| ours, `partial_mantel(..., n_jobs=2)` | {t_ours:.2f} | 1 |")
    print(f"| before: same call, previous multi-column kernel | {t_before:.2f} | "
          f"**{t_before / t_ours:.1f}x** |")
    print(f"| kernel alone, {KERNEL_ORDERS} orders: new | {k_new:.3f} | |")
    print(f"| kernel alone, {KERNEL_ORDERS} orders: previous | {k_old:.3f} | "
          f"**{k_old / k_new:.1f}x** (kernel) |")
    print(f"| textbook `np.ix_` + `lstsq` + `np.corrcoef` (timed on {PARTIAL_TEXTBOOK_SUBSET}, "
          f"best third, scaled) | {t_text:.1f} | **{t_text / t_ours:.0f}x** |")
    print()
    print(f"Null distributions of ours and before bit-identical: {identical}; kernel values "
          f"bit-identical: {k_identical}. Each time is the best of {REPEATS} rounds, the "
          "methods taking turns, on a machine shared with other work.")


if __name__ == "__main__":
    if sys.argv[1:] == ["partial"]:
        partial_case()
    else:
        main()
