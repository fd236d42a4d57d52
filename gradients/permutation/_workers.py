"""How many workers a permutation run uses: the size rule behind ``n_jobs=-1``, and Dask.

Every analysis's ``n_jobs`` ends up here, so the rule lives in one place:

* ``n_jobs=1``: one worker. Batches are evaluated in order in the calling thread while a helper
  thread draws the next batch (so one worker already keeps about two cores busy).
* a positive ``k``: ``k`` workers from the start (joblib workers, or ``k`` threads for the
  compiled kernels of a statistic that runs on them).
* ``n_jobs=-1`` (the default): up to all cores, by the size rule. Before the run the engine
  times the statistic on a few rearrangements on one worker (:func:`one_worker_seconds`) and
  projects the whole run; when that exceeds :data:`SERIAL_SECONDS` (threads) or
  :data:`PROCESS_SECONDS` (joblib processes) the run is spread over every core, otherwise it
  runs on one worker exactly as ``n_jobs=1`` does. Starting threads or processes, and sharing
  the cores with the drawing thread, cost more than they save on short runs (see
  ``benchmarks/bench_cores.py``).
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
import time
from collections.abc import Callable, Iterator
from typing import Any

__all__ = [
    "AUTO",
    "PROCESS_SECONDS",
    "SERIAL_SECONDS",
    "available_cores",
    "dask_client",
    "kernel_request",
    "limit_cores",
    "one_worker_seconds",
    "resolve_request",
    "set_kernel_request",
    "should_spread",
]

#: The value of ``n_jobs`` that asks for the size rule.
AUTO = -1

#: Seconds of work on one worker above which the size rule spreads a run over the cores
#: (threads: the compiled kernels' or joblib's). Measured by ``benchmarks/bench_cores.py`` on 2
#: shared cores (docs/performance.md, "Cores"): below about a second the extra threads did not
#: pay for themselves.
SERIAL_SECONDS = 1.0

#: The same for joblib worker processes (a custom statistic on the 'loky' backend), which pay
#: to start and to receive the statistic and the plan.
PROCESS_SECONDS = 3.0

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


def one_worker_seconds(statistic: Callable[[Any], Any], plan: Any) -> tuple[float, Any]:
    """Projected seconds of the whole run of ``plan`` on one worker, from a short timing.

    Batch 0 is drawn on one thread (timed; drawn again when that looked expensive, since the
    first draw in a process may load the drawing kernel), then the statistic is evaluated on
    its first 2 rows (discarded: this may load compiled kernels), on 4 rows and on 12 rows
    (each twice, the faster kept, so that a pause of a busy machine does not decide). The
    difference of the last two gives the cost of one rearrangement, the rest the fixed cost of
    a call, so a statistic with a large set-up per call is not mistaken for an expensive one.
    About 34 rearrangements of extra work; none of it reaches the result. Returns the seconds
    and batch 0 (for reuse).
    """
    nb = plan.n_batches
    rows, draw = _draw_on_one_thread(plan)
    if nb * draw > SERIAL_SECONDS / 2:  # the first draw in a process may load its kernel
        rows, draw = _draw_on_one_thread(plan)
    k = rows.shape[0]
    statistic(rows[: min(2, k)])
    if k < 16:  # a tiny batch: time it whole
        start = time.perf_counter()
        statistic(rows)
        return nb * (draw + time.perf_counter() - start), rows
    t4 = min(_seconds(statistic, rows[:4]) for _ in range(2))
    t12 = min(_seconds(statistic, rows[:12]) for _ in range(2))
    per_row = max(t12 - t4, 0.0) / 8
    per_call = max(t4 - 4 * per_row, 0.0)
    return nb * (draw + per_call) + plan.size * per_row, rows


def _draw_on_one_thread(plan: Any) -> tuple[Any, float]:
    """Batch 0 and the seconds it took, drawn on one thread as one worker draws."""
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        start = time.perf_counter()
        rows = plan.batch(0)
        return rows, time.perf_counter() - start
    finally:
        numba.set_num_threads(before)


def _seconds(statistic: Callable[[Any], Any], rows: Any) -> float:
    start = time.perf_counter()
    statistic(rows)
    return time.perf_counter() - start


def should_spread(one_worker: float, *, processes: bool = False) -> bool:
    """The size rule: spread a run over the cores when one worker would take long enough.

    ``one_worker`` is the projected time of the run on one worker (:func:`one_worker_seconds`);
    the threshold is :data:`SERIAL_SECONDS` for threads and :data:`PROCESS_SECONDS` for joblib
    processes, which cost more to start and to feed.
    """
    return one_worker > (PROCESS_SECONDS if processes else SERIAL_SECONDS)


def dask_client() -> Any | None:
    """The ``dask.distributed`` client of an enclosing ``parallel_config(backend="dask")``."""
    from joblib.parallel import get_active_backend

    backend, _ = get_active_backend()
    if type(backend).__name__ != "DaskDistributedBackend":
        return None
    return getattr(backend, "client", None)
