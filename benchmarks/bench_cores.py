"""Benchmark of the engine's workers: where more cores start to pay, and the default's rule.

Run as ``python benchmarks/bench_cores.py``; prints Markdown tables (and writes nothing).

The plain baseline is ``n_jobs=1`` (one worker: batches in order in the calling thread while a
helper thread draws the next batch), measured in the same run as ``n_jobs=2`` (two workers
from the start) and the default ``n_jobs=-1`` (the size rule: start on one worker and spread
the whole run over the cores when a short timing projects more than ``SERIAL_SECONDS`` of work
on one worker, ``PROCESS_SECONDS`` for joblib processes).
Three kinds of workers, one table each:

1. compiled-kernel threads (the Mantel test: the cross-product kernel on 1 or 2 threads);
2. joblib threads (the vector fit, 20 variables, the statistic is a BLAS product);
3. joblib processes (``permutation_test`` with the default 'loky' backend on a numpy
   statistic holding a 300 x 300 matrix: a 30 x 30 block of it rearranged per permutation).

Each cell is the best of a few repeats. ``serial s`` is the n_jobs=1 time, the ratios are
time / serial time (below 1: faster than one worker). The column ``rule`` says what the
default did: ``1`` stayed on one worker, ``spread`` went to every core. The free share of the
second core (other work on the machine takes the rest) is printed first.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import time

import numpy as np
import pandas as pd
from _machine import free_cores
from scipy.spatial.distance import pdist

from gradients.fitting import fit_vectors
from gradients.matrix import mantel
from gradients.permutation import _engine, _workers, permutation_plan, permutation_test


def _best(fn, repeat: int) -> float:
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


class _Spread:
    """Notes whether the default spread a run (kernels: more threads; pools: workers)."""

    def __init__(self) -> None:
        self.spread = False
        self.real = _workers.should_spread

    def __call__(self, *args, **kwargs) -> bool:
        out = self.real(*args, **kwargs)
        self.spread |= out
        return out


def _row(label: str, run, repeat: int) -> dict[str, object]:
    run(1)  # load compiled kernels and start pools once
    one = _best(lambda: run(1), repeat)
    two = _best(lambda: run(2), repeat)
    spy = _Spread()
    _engine.should_spread = spy
    try:
        auto = _best(lambda: run(-1), repeat)
    finally:
        _engine.should_spread = spy.real
    return {"problem": label, "serial s": round(one, 3), "n_jobs=2 / serial": round(two / one, 2),
            "default / serial": round(auto / one, 2), "rule": "spread" if spy.spread else "1"}


def bench_kernels() -> pd.DataFrame:
    rng = np.random.default_rng(0)
    rows = []
    for n, perms in [(30, 999), (100, 999), (300, 999), (300, 9_999), (600, 9_999),
                     (1000, 9_999)]:
        x, y = pdist(rng.normal(size=(n, 3))), pdist(rng.normal(size=(n, 3)))
        rows.append(_row(f"Mantel n={n}, {perms} perms",
                         lambda j, x=x, y=y, p=perms: mantel(x, y, n_resamples=p, rng=1,
                                                             n_jobs=j),
                         repeat=3 if n < 600 else 2))
    return pd.DataFrame(rows)


def bench_threads() -> pd.DataFrame:
    rng = np.random.default_rng(1)
    rows = []
    for n, perms in [(50, 999), (300, 9_999), (300, 99_999), (1000, 99_999)]:
        sc = pd.DataFrame(rng.normal(size=(n, 2)), columns=["axis1", "axis2"])
        env = pd.DataFrame(rng.normal(size=(n, 20)) + 0.2 * sc.axis1.to_numpy()[:, None])
        rows.append(_row(f"vectors n={n}, 20 vars, {perms} perms",
                         lambda j, sc=sc, env=env, p=perms: fit_vectors(
                             sc, env, n_resamples=p, rng=1, n_jobs=j), repeat=3))
    return pd.DataFrame(rows)


def bench_processes() -> pd.DataFrame:
    rng = np.random.default_rng(2)
    a = rng.normal(size=(300, 300))
    cols, block = np.arange(30), a[:30, :30]
    rows = []
    for perms in (999, 9_999, 49_999, 199_999):
        plan = permutation_plan(300, n_resamples=perms, rng=3)

        def run(j, plan=plan):
            return permutation_test(lambda o: (a[o[:, :30, None], cols] * block).sum(axis=(1, 2)),
                                    plan, observed=0.0, n_jobs=j)

        rows.append(_row(f"loky, numpy statistic, {perms} perms", run, repeat=2))
    return pd.DataFrame(rows)


def _markdown(frame: pd.DataFrame) -> str:
    head = "| " + " | ".join(frame.columns) + " |"
    rule = "|" + "---|" * frame.shape[1]
    rows = ["| " + " | ".join(str(v) for v in row) + " |" for row in frame.itertuples(index=False)]
    return "\n".join([head, rule, *rows])


def main() -> None:
    print(f"Free share of the second core: {free_cores():.2f} (2.00 = all of it); "
          f"SERIAL_SECONDS = {_workers.SERIAL_SECONDS}, "
          f"PROCESS_SECONDS = {_workers.PROCESS_SECONDS}\n")
    for title, fn in (("Compiled-kernel threads", bench_kernels),
                      ("joblib threads", bench_threads),
                      ("joblib processes", bench_processes)):
        print(f"### {title}\n")
        print(_markdown(fn()), flush=True)
        print()


if __name__ == "__main__":
    main()
