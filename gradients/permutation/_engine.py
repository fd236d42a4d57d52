"""The permutation engine: evaluate a batched statistic over a plan and report p-values."""

from __future__ import annotations

import contextlib
import functools
import itertools
import numbers
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from .._result import ResultMixin
from .._validation import check_alternative, check_n_jobs
from ._plan import PermutationPlan
from ._progress import current_reporter
from ._pvalue import count_extreme, extreme_mask, pvalue_from_counts
from ._workers import (
    AUTO,
    available_cores,
    dask_client,
    kernel_request,
    one_worker_seconds,
    resolve_request,
    should_spread,
)

__all__ = ["PermutationResult", "permutation_test"]

Statistic = Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True, repr=False)
class PermutationResult(ResultMixin):
    """Outcome of a permutation test of one or several statistics.

    Attributes
    ----------
    statistic : float or ndarray
        Observed statistic(s).
    pvalue : float or ndarray
        p-value(s): exact ``b / N`` when every rearrangement was enumerated, ``(b + 1) / (P + 1)``
        otherwise, ``h / L`` for a statistic stopped early (Besag & Clifford 1991).
    null_distribution : ndarray, shape (P,) or (P, m)
        Statistics under the rearrangements evaluated (for a run stopped early, every
        rearrangement of the batches evaluated up to the stop; ``n_resamples`` says how many
        of them count toward each p-value). For an exact test the first row is the identity,
        which holds the observed value.
    n_resamples : int or ndarray
        Rearrangements that count toward each p-value.
    exact : bool
        True when the null distribution is the complete enumeration.
    alternative : str
    scheme : str
        Plan scheme ('free', 'strata', ...).
    stopped_early : bool or ndarray
        True for statistics whose run stopped once ``early_stop`` extremes were seen.
    """

    statistic: float | np.ndarray
    pvalue: float | np.ndarray
    null_distribution: np.ndarray
    n_resamples: int | np.ndarray
    exact: bool
    alternative: str
    scheme: str
    stopped_early: bool | np.ndarray = False
    description: str = ""


def _evaluate(statistic: Statistic, plan: PermutationPlan, i: int) -> np.ndarray:
    return _checked(statistic(plan.batch(i)), plan, i)


def _checked(values: object, plan: PermutationPlan, i: int) -> np.ndarray:
    """The statistics of batch ``i`` as floats, after checking there is one per rearrangement."""
    out = np.asarray(values, dtype=np.float64)
    expected = min(plan.batch_size, plan.size - i * plan.batch_size)
    if out.ndim == 0 or out.shape[0] != expected:
        raise InputError(
            f"Batch {i} holds {expected} rearrangements but the statistic returned "
            f"{'a scalar' if out.ndim == 0 else out.shape[0]} value(s); a custom plan's draw "
            "must return one surrogate per requested row, and the statistic one value (or "
            "one row) per surrogate.")
    return out


def permutation_test(
    statistic: Statistic,
    plan: PermutationPlan,
    *,
    observed: float | np.ndarray | None = None,
    alternative: str = "greater",
    center: float | np.ndarray | None = None,
    early_stop: int | None = None,
    n_jobs: int | None = -1,
    backend: str = "loky",
    task: str = "permutations",
) -> PermutationResult:
    """Permutation test of a statistic that evaluates whole batches of rearrangements.

    Parameters
    ----------
    statistic : callable
        ``statistic(orders)`` takes an integer array ``(k, n_sites)`` of site orders (row ``b``
        says that site ``i`` takes the data of site ``orders[b, i]``) and returns ``k``
        statistics, shape ``(k,)``, or ``k`` rows of ``m`` statistics, shape ``(k, m)``, tested
        together (for example one per environmental variable or per distance class). It should
        be vectorised over the batch (a matrix product, a compiled kernel).
    plan : PermutationPlan
        From :func:`permutation_plan` or :func:`custom_plan`.
    observed : float or ndarray, optional
        Observed statistic(s); by default ``statistic`` applied to the identity order.
    alternative : {'greater', 'less', 'two-sided'}, default 'greater'
        Direction of the test. Two-sided compares distances from the centre of the permutation
        distribution: ``center`` when given (a known null mean), else the mean of the
        permuted statistics.
    center : float or ndarray, optional
        Known null mean for ``alternative='two-sided'``.
    early_stop : int, optional
        Sequential Monte Carlo test [2]_: stop a statistic once ``early_stop`` permuted values
        at least as extreme as the observed one have been seen after ``L`` rearrangements, and
        report ``p = early_stop / L``. Saves time when p is clearly large. Batches are then run
        in order in this process.
    n_jobs : int or None, default -1
        Workers evaluating batches. ``-1``: up to all cores, by the size rule (a run that
        would take more than about a second on one worker, timed on a few rearrangements
        first, is spread over the cores; see :mod:`gradients.permutation._workers`); ``1``:
        one worker;
        ``k``: ``k`` workers; ``None``: the workers of an enclosing ``joblib.parallel_config``
        (one outside any). Inside ``joblib.parallel_config(backend="dask")`` with a
        ``dask.distributed`` client the batches run on the cluster's workers. Inside a
        kernel-thread block (``numba_threads``) the block's ``n_jobs`` decides and the workers
        are the kernels' threads. The result never depends on it.
    backend : {'loky', 'threading'}, default 'loky'
        joblib backend; 'threading' suits statistics that release the GIL (BLAS, numba nogil).
    task : str
        Name shown by a progress reporter.

    Returns
    -------
    PermutationResult

    Notes
    -----
    The p-value rule lives in one place, :func:`gradients.permutation.pvalue_from_counts`:
    exact enumeration gives ``b / N`` (identity included), random rearrangements give
    ``(b + 1) / (P + 1)`` [1]_. Ties within a relative ``1e-10`` count as extreme.

    References
    ----------
    .. [1] Phipson, B. & Smyth, G. K. (2010). Permutation p-values should never be zero.
       Statistical Applications in Genetics and Molecular Biology 9(1): 39.
    .. [2] Besag, J. & Clifford, P. (1991). Sequential Monte Carlo p-values. Biometrika 78:
       301-304.

    Examples
    --------
    >>> import numpy as np
    >>> from gradients.permutation import permutation_plan, permutation_test
    >>> x = np.array([1.0, 2.0, 3.0, 4.0, 5.0]); y = np.array([2.0, 1.0, 4.0, 3.0, 5.0])
    >>> plan = permutation_plan(5, n_resamples=999, rng=0)
    >>> res = permutation_test(lambda o: y[o] @ x, plan)
    >>> res.exact, round(float(res.pvalue), 4)
    (True, 0.0667)
    """
    alternative = check_alternative(alternative)
    if not isinstance(plan, PermutationPlan):
        raise InputError("`plan` must come from permutation_plan() or custom_plan().")
    n_jobs = check_n_jobs(n_jobs)
    if early_stop is not None:
        if not isinstance(early_stop, numbers.Integral) or early_stop < 1:
            raise InputError(f"`early_stop` must be a positive integer; got {early_stop!r}.")
        if plan.exact:
            early_stop = None  # enumeration is already cheap and exact
        elif alternative == "two-sided" and center is None:
            raise InputError("Early stopping with alternative='two-sided' needs the null centre "
                             "`center` (e.g. 0 for a correlation), which a partial run cannot "
                             "estimate.")
    if observed is None:
        if plan.scheme == "custom" or plan._draw is not None:
            raise InputError("A custom plan needs `observed`: its batches are not site orders.")
        obs = np.asarray(statistic(plan.identity()), dtype=np.float64)[0]
    else:
        obs = np.asarray(observed, dtype=np.float64)
    scalar = obs.ndim == 0
    obs_vec = np.atleast_1d(obs)
    if np.isnan(obs_vec).any():
        raise InputError(
            "The observed statistic is not a number (NaN) for statistic(s) "
            f"{np.flatnonzero(np.isnan(obs_vec)).tolist()}: there is nothing to compare the "
            "rearrangements with. Check the data for constant or missing values.")

    reporter = current_reporter()
    size, per_batch = plan.size, plan.batch_size

    def note(done: int) -> None:
        # the engine counts batches; a reporter is told permutations
        if reporter is not None:
            reporter(task, min(done * per_batch, size), size)

    with _one_blas_thread():
        return _run(statistic, plan, obs_vec, scalar, alternative, center, early_stop,
                    n_jobs, backend, note)


def _one_blas_thread() -> contextlib.AbstractContextManager[object]:
    """Hold BLAS to one thread while batches are evaluated.

    Batched statistics are many mid-sized products; a multi-threaded BLAS gains little on them
    and its spinning threads compete with the engine's own parallelism (compiled drawing and
    kernels on every core, or several workers), which on a small machine makes runs several
    times slower. Parallel speed comes from ``n_jobs`` and the compiled kernels instead.
    """
    try:
        controller = _blas_controller()
    except ImportError:  # pragma: no cover - a declared dependency
        return contextlib.nullcontext()
    return controller.limit(limits=1, user_api="blas")


@functools.lru_cache(maxsize=1)
def _blas_controller() -> object:
    """The thread pools of the process, found once.

    Looking them up scans every loaded library (about 5 ms in a process that has loaded
    numba, scipy and pandas), which a call with many small tests paid on each test. scipy's
    linear algebra, which may bring its own BLAS, is loaded first so that it is found too.
    """
    import scipy.linalg  # noqa: F401 - load every BLAS the analyses use before looking
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def _run(statistic: Statistic, plan: PermutationPlan, obs_vec: np.ndarray, scalar: bool,
         alternative: str, center: float | np.ndarray | None, early_stop: int | None,
         n_jobs: int, backend: str, note: Callable[[int], None]) -> PermutationResult:
    nb = plan.n_batches
    stopped = np.zeros(obs_vec.size, dtype=bool)
    used = np.full(obs_vec.size, plan.size, dtype=np.int64)
    counts_at_stop = np.zeros(obs_vec.size, dtype=np.int64)

    if early_stop is not None:
        chunks: list[np.ndarray] = []
        running = np.zeros(obs_vec.size, dtype=np.int64)
        seen = 0
        for i in range(nb):
            values = _as_rows(_evaluate(statistic, plan, i), obs_vec.size)
            chunks.append(values)
            hits = extreme_mask(values, obs_vec, alternative, center=center)
            cum = running[None, :] + np.cumsum(hits, axis=0)
            for j in np.flatnonzero(~stopped):
                reached = np.flatnonzero(cum[:, j] >= early_stop)
                if reached.size:
                    stopped[j] = True
                    used[j] = seen + reached[0] + 1
                    counts_at_stop[j] = early_stop
            running = cum[-1]
            seen += values.shape[0]
            note(i + 1)
            if stopped.all():
                break
        null = np.concatenate(chunks, axis=0)
        used[~stopped] = null.shape[0]
    else:
        parts = _run_batches(statistic, plan, n_jobs, backend, note)
        null = np.concatenate([_as_rows(p, obs_vec.size) for p in parts], axis=0)

    bad = np.isnan(null)
    if bad.any():
        cols = np.flatnonzero(bad.any(axis=0)).tolist()
        raise InputError(
            f"The statistic was not a number (NaN) for {int(bad.any(axis=1).sum())} of "
            f"{null.shape[0]} rearrangements (statistic(s) {cols}); a p-value would be "
            "meaningless. Check the data for constant or missing values.")
    if plan.exact and null.shape[0]:
        # The enumeration lists the identity first: it is the observed arrangement itself,
        # so it takes the observed value (a batched formula can differ from the direct one by
        # more than the tie tolerance when the statistic is computed by cancellation).
        null[0] = obs_vec
    counts = count_extreme(null, obs_vec, alternative, center=center)
    pvalues = pvalue_from_counts(counts, null.shape[0], exact=plan.exact)
    if stopped.any():
        # Besag & Clifford: p = h / L for a statistic that reached h extremes after L draws.
        pvalues = np.where(stopped, pvalue_from_counts(counts_at_stop, used, exact=True),
                           pvalues)

    out_null = null[:, 0] if scalar else null
    return PermutationResult(
        statistic=float(obs_vec[0]) if scalar else obs_vec,
        pvalue=float(pvalues[0]) if scalar else pvalues,
        null_distribution=out_null,
        n_resamples=int(used[0]) if scalar else used,
        exact=plan.exact,
        alternative=alternative,
        scheme=plan.scheme,
        stopped_early=bool(stopped[0]) if scalar else stopped,
        description=plan.description,
    )


def _run_batches(statistic: Statistic, plan: PermutationPlan, n_jobs: int | None,
                 backend: str, note: Callable[[int], None]) -> list[np.ndarray]:
    """Evaluate every batch, in order, on the workers ``n_jobs`` asks for (see ``_workers``)."""
    nb = plan.n_batches
    in_kernels, kernel_jobs = kernel_request()
    asked = kernel_jobs if in_kernels else n_jobs
    if asked != 1 and nb > 1:
        client = dask_client()
        if client is not None:
            return _run_dask(client, statistic, plan, note)
    request = resolve_request(asked)
    # The workers are the compiled kernels' threads when the statistic runs on them (and the
    # batches stay in this thread), otherwise joblib workers of `backend`.
    pool = not (in_kernels and backend != "threading")
    if pool and backend == "threading" and not _threads_may_share_kernels():
        pool = False
    if nb == 1 and pool:
        pool, request = False, 1  # one batch: nothing to share between workers
    if request != AUTO:
        if request == 1 or not pool:
            return _run_prefetching(statistic, plan, note)
        return _run_parallel(statistic, plan, request, backend, note, range(nb))
    cores = available_cores()
    if cores == 1:
        with _kernel_threads(1 if in_kernels else None):
            return _run_prefetching(statistic, plan, note)
    with _kernel_threads(1 if in_kernels else None):
        serial, first = one_worker_seconds(statistic, plan)
    if not should_spread(serial, processes=pool and backend != "threading"):
        with _kernel_threads(1 if in_kernels else None):
            return _run_prefetching(statistic, plan, note, first=first)
    if pool:
        return _run_parallel(statistic, plan, cores, backend, note, range(nb))
    with _kernel_threads(cores if in_kernels else None):
        return _run_prefetching(statistic, plan, note, first=first)


@contextlib.contextmanager
def _kernel_threads(n: int | None):  # type: ignore[no-untyped-def]
    """This thread's compiled kernels on ``n`` threads inside the block (None: unchanged)."""
    if n is None:
        yield
        return
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(n)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def _run_prefetching(statistic: Statistic, plan: PermutationPlan, note: Callable[[int], None],
                     first: np.ndarray | None = None) -> list[np.ndarray]:
    """Evaluate the batches in order in this thread while a helper thread draws the next one.

    Drawing random orders (a compiled kernel that releases the GIL) then overlaps with the
    statistic instead of alternating with it; the helper draws on one thread so that the two
    share the cores. A single batch, enumerated and custom plans, whose batches are slices or
    Python draws, and numba's 'workqueue' layer (see :func:`_threads_may_share_kernels`) run
    plainly. ``first``: batch 0, already drawn (by the size rule's timing).
    """
    nb = plan.n_batches
    parts: list[np.ndarray] = []
    if nb == 1 or plan.exact or plan._draw is not None or not _threads_may_share_kernels():
        for i in range(nb):
            rows = first if i == 0 and first is not None else plan.batch(i)
            parts.append(_checked(statistic(rows), plan, i))
            note(i + 1)
        return parts
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="gradients-draw") as pool:
        pending = pool.submit(_draw_one_thread, plan, 1 if first is not None else 0)
        for i in range(nb):
            if i == 0 and first is not None:
                orders = first
            else:
                orders = pending.result()
                if i + 1 < nb:
                    pending = pool.submit(_draw_one_thread, plan, i + 1)
            parts.append(_checked(statistic(orders), plan, i))
            note(i + 1)
    return parts


def _draw_one_thread(plan: PermutationPlan, i: int) -> np.ndarray:
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        return plan.batch(i)
    finally:
        numba.set_num_threads(before)


def _evaluate_many(statistic: Statistic, plan: PermutationPlan,
                   indices: range) -> list[np.ndarray]:
    return [_evaluate(statistic, plan, i) for i in indices]


def _evaluate_many_one_thread(statistic: Statistic, plan: PermutationPlan,
                              indices: range) -> list[np.ndarray]:
    # A thread worker runs numba's parallel kernels on one thread (the setting is per thread):
    # the workers already share the cores, and nested thread teams would oversubscribe them.
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        return _evaluate_many(statistic, plan, indices)
    finally:
        numba.set_num_threads(before)


def _chunks(indices: range, workers: int) -> list[range]:
    """A few contiguous chunks of batches per worker, so that the statistic (which may hold
    large arrays) is sent to each worker a few times rather than once per batch."""
    n_chunks = min(len(indices), 4 * workers)
    edges = np.linspace(indices.start, indices.stop, n_chunks + 1).round().astype(int)
    return [range(int(a), int(b)) for a, b in itertools.pairwise(edges) if b > a]


def _run_parallel(statistic: Statistic, plan: PermutationPlan, n_jobs: int, backend: str,
                  note: Callable[[int], None], indices: range) -> list[np.ndarray]:
    """Evaluate the batches ``indices`` on several joblib workers, in order."""
    from joblib import Parallel, delayed, effective_n_jobs

    workers = max(1, effective_n_jobs(n_jobs))
    parts: list[np.ndarray] = []
    if workers == 1:
        for i in indices:
            parts.append(_evaluate(statistic, plan, i))
            note(i + 1)
        return parts
    chunks = _chunks(indices, workers)
    runner = Parallel(n_jobs=workers, backend=backend, return_as="generator")
    task = _evaluate_many_one_thread if backend == "threading" else _evaluate_many
    for chunk, values in zip(chunks, runner(delayed(task)(statistic, plan, c)
                                            for c in chunks), strict=True):
        parts.extend(values)
        note(chunk.stop)
    return parts


def _run_dask(client: object, statistic: Statistic, plan: PermutationPlan,
              note: Callable[[int], None]) -> list[np.ndarray]:
    """Evaluate every batch on the workers of a ``dask.distributed`` client.

    The statistic (with the base matrices it holds) and the plan are scattered to every worker
    once; each task then evaluates a contiguous chunk of batches, each drawn from its own
    ``SeedSequence`` child exactly as here, and the chunks are put back in order.
    """
    from distributed import as_completed

    nb = plan.n_batches
    workers = max(1, sum(client.nthreads().values()))  # type: ignore[attr-defined]
    chunks = _chunks(range(nb), workers)
    stat_f, plan_f = client.scatter([statistic, plan], broadcast=True,  # type: ignore[attr-defined]
                                    hash=False)
    futures = [client.submit(_evaluate_many, stat_f, plan_f, c, pure=False)  # type: ignore[attr-defined]
               for c in chunks]
    position = {f.key: k for k, f in enumerate(futures)}
    done: dict[int, list[np.ndarray]] = {}
    finished = 0
    try:
        for future in as_completed(futures, loop=client.loop):  # type: ignore[attr-defined]
            k = position[future.key]
            done[k] = future.result()
            finished += len(chunks[k])
            note(finished)
    finally:
        client.cancel([*futures, stat_f, plan_f])  # type: ignore[attr-defined]
    return [values for k in range(len(chunks)) for values in done[k]]


def _threads_may_share_kernels() -> bool:
    """False when numba runs its parallel kernels on the 'workqueue' threading layer.

    That layer aborts the whole process when two threads launch parallel kernels at once (the
    drawing of orders is one), which a thread backend with several workers would do; the
    'omp' and 'tbb' layers are thread-safe. On 'workqueue' the batches are evaluated in this
    thread instead (the result is the same; the kernels still use every core).
    """
    import numba

    from ._shuffle import shuffle_segments

    try:
        layer = numba.threading_layer()
    except ValueError:  # no parallel kernel has run yet: run a tiny one to pick the layer
        shuffle_segments(0, 2, 2, np.arange(2), np.array([0, 2]))
        layer = numba.threading_layer()
    return layer != "workqueue"


def _as_rows(values: np.ndarray, m: int) -> np.ndarray:
    values = np.asarray(values, dtype=np.float64)
    if values.ndim == 1:
        values = values[:, None]
    if values.ndim != 2 or values.shape[1] != m:
        raise InputError(
            f"The statistic must return shape (k,) or (k, {m}) for a batch of k orders; "
            f"got {values.shape}."
        )
    return values

