"""Engine overhead: drawing and evaluating permutations in batches vs a plain numpy loop.

The statistic is the same cross-product for both (20 variables against one score vector,
n = 300); the baseline draws one ``rng.permutation`` at a time and evaluates it, as a
hand-written test would; the engine draws batches of 1000 orders and evaluates each batch as one
matrix product ``x[orders] @ y`` (permuting the score vector instead of the 20 variables is the
same test, and turns the batch into BLAS). Run: ``python benchmarks/bench_permutation.py``.
"""

from __future__ import annotations

import time

import numpy as np

from gradients.permutation import permutation_plan, permutation_test

N_SITES, N_VARS, N_PERM = 300, 20, 20_000


def _time(fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    rng = np.random.default_rng(0)
    x = rng.normal(size=N_SITES)
    y = rng.normal(size=(N_SITES, N_VARS))

    def baseline():
        g = np.random.default_rng(1)
        out = np.empty((N_PERM, N_VARS))
        for b in range(N_PERM):
            out[b] = x @ y[g.permutation(N_SITES)]
        return out

    def engine(n_jobs=1, backend="loky"):
        plan = permutation_plan(N_SITES, n_resamples=N_PERM, rng=1)
        return permutation_test(lambda o: x[o] @ y, plan,
                                n_jobs=n_jobs, backend=backend)

    t_base = _time(baseline)
    t_one = _time(engine)
    t_two = _time(lambda: engine(2, "threading"))
    print("| case | seconds | speed-up vs numpy loop |\n|---|---|---|")
    print(f"| numpy loop, one `rng.permutation` per draw | {t_base:.3f} | 1.0x |")
    print(f"| engine, 1 worker | {t_one:.3f} | {t_base / t_one:.1f}x |")
    print(f"| engine, 2 threads | {t_two:.3f} | {t_base / t_two:.1f}x |")
    print(f"\n{N_PERM} permutations, {N_SITES} sites, {N_VARS} statistics per permutation.")


if __name__ == "__main__":
    main()
