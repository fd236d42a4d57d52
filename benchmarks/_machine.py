"""What the shared machine leaves free during a benchmark run (imported by the bench scripts)."""

from __future__ import annotations

import time
from concurrent.futures import ThreadPoolExecutor

import numpy as np

__all__ = ["free_cores"]


def free_cores() -> float:
    """Speed-up of two threads over one on plain BLAS products right now: how much of the
    second core the other work on this shared machine left free (2.0 = all of it)."""
    a = np.random.default_rng(0).normal(size=(500, 500))

    def work(_: int) -> None:
        for _ in range(15):
            a @ a

    start = time.perf_counter()
    for i in range(4):
        work(i)
    one = time.perf_counter() - start
    with ThreadPoolExecutor(2) as pool:
        start = time.perf_counter()
        list(pool.map(work, range(4)))
        two = time.perf_counter() - start
    return one / two
