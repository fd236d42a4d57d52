"""How many workers a permutation run uses: the size rule behind ``n_jobs=-1``, and Dask.

Every analysis's ``n_jobs`` ends up here, so the rule lives in one place:

* ``n_jobs=1``: one worker. Batches are evaluated in order in the calling thread while a helper
  thread draws the next batch (so one worker already keeps about two cores busy).
* a positive ``k``: ``k`` workers from the start (joblib workers, or ``k`` threads for the
  compiled kernels of a statistic that runs on them).
* ``n_jobs=-1`` (the default): up to all cores, by the size rule. The run starts on one worker
  and times its batches; as soon as the batches left would take longer than
  :data:`SERIAL_SECONDS` on one worker, the rest are spread over the cores. A short run
  therefore costs exactly what ``n_jobs=1`` costs (starting threads or processes and sharing
  the cores with the drawing thread would cost more than they save; see
  ``benchmarks/bench_cores.py``), and a long one pays at most :data:`SERIAL_SECONDS` of work
  on one worker before the others join. The first batch counts on its own only when it took
  at least half of :data:`SERIAL_SECONDS`, because it may include loading compiled kernels.
* ``n_jobs=None``: joblib's meaning. The workers of an enclosing ``joblib.parallel_config``
  context decide; outside any context that is one worker.

Inside ``joblib.parallel_config(backend="dask")`` with a ``dask.distributed`` client, any
``n_jobs`` other than 1 sends the batches to the cluster's workers instead (no size rule: the
cluster was asked for). Each batch carries its own ``SeedSequence`` child (a property of the
plan), so the p-values are the same for every setting.
"""

from __future__ import annotations

import contextlib
import contextvars
from collections.abc import Iterator
from typing import Any

__all__ = [
    "AUTO",
    "SERIAL_SECONDS",
    "available_cores",
    "dask_client",
    "kernel_request",
    "limit_cores",
    "resolve_request",
    "set_kernel_request",
    "should_spread",
]

#: The value of ``n_jobs`` that asks for the size rule.
AUTO = -1

#: Seconds of work left on one worker above which the size rule spreads a run over the cores.
#: Measured by ``benchmarks/bench_cores.py`` on 2 cores (docs/performance.md, "Cores"): below
#: about a second of work the extra threads do not pay for themselves.
SERIAL_SECONDS = 1.0

_UNSET = object()

#: The ``n_jobs`` of the analysis whose batched statistic runs compiled parallel kernels, set
#: by :func:`gradients.permutation._threads.numba_threads` around its engine runs.
_KERNELS: contextvars.ContextVar[Any] = contextvars.ContextVar("gradients_kernels",
                                                               default=_UNSET)

#: An upper bound on what ``n_jobs=-1`` may use (the project file's ``cores``).
_LIMIT: contextvars.ContextVar[int | None] = contextvars.ContextVar("gradients_cores",
                                                                   default=None)


@contextlib.contextmanager
def limit_cores(cores: int | None) -> Iterator[None]:
    """Inside the block ``n_jobs=-1`` uses at most ``cores`` cores (None: no bound)."""
    token = _LIMIT.set(None if cores is None else max(1, int(cores)))
    try:
        yield
    finally:
        _LIMIT.reset(token)


def available_cores() -> int:
    """The cores ``n_jobs=-1`` may use: numba's thread count, within :func:`limit_cores`."""
    import numba

    top = max(1, int(numba.config.NUMBA_NUM_THREADS))
    limit = _LIMIT.get()
    return top if limit is None else min(top, limit)


def resolve_request(n_jobs: int | None) -> int:
    """``n_jobs`` as a number of workers, :data:`AUTO` left for the size rule.

    ``None`` takes the workers of the enclosing ``joblib.parallel_config`` (one outside any).
    """
    if n_jobs is None:
        from joblib import effective_n_jobs

        return max(1, int(effective_n_jobs(None)))
    if n_jobs < 0:
        return AUTO
    return int(n_jobs)


@contextlib.contextmanager
def set_kernel_request(n_jobs: int | None) -> Iterator[None]:
    """Tell the engine that the statistics in the block run on compiled parallel kernels."""
    token = _KERNELS.set(n_jobs)
    try:
        yield
    finally:
        _KERNELS.reset(token)


def kernel_request() -> tuple[bool, int | None]:
    """(inside a kernel block, the ``n_jobs`` it was given)."""
    value = _KERNELS.get()
    return (False, None) if value is _UNSET else (True, value)


def should_spread(batch_seconds: float, batches_left: int, *, first: bool) -> bool:
    """The size rule: True once the batches left would take over :data:`SERIAL_SECONDS`.

    ``batch_seconds`` is the time of the batch just evaluated on one worker; ``first`` says it
    was the run's first batch, which counts only when it took half of :data:`SERIAL_SECONDS`
    or more (a first batch may include loading compiled kernels).
    """
    if batches_left < 1:
        return False
    if first and batch_seconds < SERIAL_SECONDS / 2:
        return False
    return batch_seconds * batches_left > SERIAL_SECONDS


def dask_client() -> Any | None:
    """The ``dask.distributed`` client of an enclosing ``parallel_config(backend="dask")``."""
    from joblib.parallel import get_active_backend

    backend, _ = get_active_backend()
    if type(backend).__name__ != "DaskDistributedBackend":
        return None
    return getattr(backend, "client", None)
