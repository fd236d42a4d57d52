"""Where a run's permutations are computed: the project's ``cores`` and ``cluster`` keys.

The one place that turns ``[permutations] cores`` and ``cluster`` into the setting every
analysis of the run follows: the analyses keep their default ``n_jobs=-1``, and this block
bounds what ``-1`` may use (:func:`gradients.permutation._workers.limit_cores`) or, with a
cluster, opens a ``dask.distributed`` client and runs the steps inside
``joblib.parallel_config(backend="dask")`` so that the engine sends batches to its workers.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import Any

from .._errors import InputError

__all__ = ["CLUSTER_TIMEOUT", "computing"]

#: Seconds to wait for a cluster's scheduler to answer before the run stops.
CLUSTER_TIMEOUT = 10.0


@contextlib.contextmanager
def computing(settings: dict[str, Any]) -> Iterator[dict[str, Any]]:
    """The block runs the analyses on the cores (or the cluster) the settings ask for.

    Yields the record for ``run.json``: the ``cores`` setting, the cores the engine may use
    and, with a cluster, its address and the worker threads it offered.
    """
    from ..permutation._workers import available_cores, limit_cores

    cores = settings.get("permutations.cores", "all")
    address = settings.get("permutations.cluster")
    limit = None if cores == "all" else int(cores)
    with limit_cores(limit):
        record: dict[str, Any] = {"setting": cores, "available": available_cores(),
                                  "cluster": None}
        if address is None:
            yield record
            return
        client = _connect(str(address))
        try:
            from joblib import parallel_config

            record["cluster"] = str(address)
            record["cluster_threads"] = int(sum(client.nthreads().values()))
            with parallel_config(backend="dask", client=client):
                yield record
        finally:
            client.close()


def _connect(address: str) -> Any:
    try:
        from distributed import Client
    except ImportError as exc:
        raise InputError(
            f"`[permutations] cluster` is set ({address!r}) but Dask is not installed; install "
            "it with `pip install \"gradients[dask]\"`, or remove the key to run on this "
            "machine.") from exc
    try:
        return Client(address, timeout=CLUSTER_TIMEOUT, set_as_default=False)
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        raise InputError(
            f"`[permutations] cluster` = {address!r}: no Dask scheduler answered there within "
            f"{CLUSTER_TIMEOUT:g} s ({type(exc).__name__}: {exc}). Start one (`dask scheduler`, "
            "then `dask worker ADDRESS` on each machine), check the address and port, or remove "
            "the key to run on this machine.") from exc
