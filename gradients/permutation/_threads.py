"""Threads of the compiled kernels: how many a block of kernel calls may use."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

import numba

from ._workers import AUTO, available_cores, resolve_request, set_kernel_request

__all__ = ["numba_threads"]


@contextlib.contextmanager
def numba_threads(n_jobs: int | None) -> Iterator[int]:
    """Run the compiled kernels inside the block on ``n_jobs`` threads, then restore.

    ``-1`` means up to all cores: kernels called directly in the block use all of them, and the
    permutation engine applies its size rule (:mod:`gradients.permutation._workers`) to the
    batches it evaluates in the block. ``None`` takes the workers of an enclosing
    ``joblib.parallel_config`` (one outside any). Shared by every stage whose batched
    statistics are parallel numba kernels (matrix, partition, groups, ranking), so that
    ``n_jobs`` means the same everywhere.
    """
    top = int(numba.config.NUMBA_NUM_THREADS)
    request = resolve_request(n_jobs)
    want = available_cores() if request == AUTO else max(1, min(request, top))
    before = numba.get_num_threads()
    numba.set_num_threads(want)
    try:
        with set_kernel_request(n_jobs):
            yield want
    finally:
        numba.set_num_threads(before)
