"""Threads of the compiled kernels: how many a block of kernel calls may use."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

import numba

__all__ = ["numba_threads"]


@contextlib.contextmanager
def numba_threads(n_jobs: int | None) -> Iterator[int]:
    """Run the compiled kernels inside the block on ``n_jobs`` threads (-1: all), then restore.

    Shared by every stage whose batched statistics are parallel numba kernels (matrix,
    partition), so that ``n_jobs`` means the same everywhere.
    """
    top = int(numba.config.NUMBA_NUM_THREADS)
    want = top if n_jobs is None or n_jobs < 0 else max(1, min(int(n_jobs), top))
    before = numba.get_num_threads()
    numba.set_num_threads(want)
    try:
        yield want
    finally:
        numba.set_num_threads(before)
