"""Permutation batches on a Dask cluster give the p-values of a serial run, bit for bit.

A ``dask.distributed.LocalCluster`` with two worker processes stands in for a cluster. Inside
``joblib.parallel_config(backend="dask")`` the engine scatters the statistic and the plan to
every worker once and sends chunks of batches; each batch is drawn from its own
``SeedSequence`` child, so the rearrangements are the ones a serial run evaluates. The task
stream of the cluster shows that the batches did run on its workers.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

import gradients
from gradients.distance import DistanceMatrix
from gradients.permutation import _plan, permutation_plan, permutation_test

distributed = pytest.importorskip("distributed")  # the test extra installs it: never skipped
from joblib import parallel_config  # noqa: E402

N = 16
LABELS = [f"s{i:02d}" for i in range(N)]


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                       dashboard_address=None)
    c = distributed.Client(cluster, set_as_default=False)
    try:
        yield c
    finally:
        c.close()
        cluster.close()


@pytest.fixture
def small_batches(monkeypatch: pytest.MonkeyPatch) -> None:
    # several batches even for 99 permutations, so that a run has batches to send
    monkeypatch.setattr(_plan, "DEFAULT_BATCH", 16)
    for module in ("gradients.partition._ftest", "gradients.groups._classes",
                   "gradients.groups._permanova"):
        monkeypatch.setattr(f"{module}.BATCH_SIZE", 16)


def _data():
    rng = np.random.default_rng(21)
    xy = rng.uniform(size=(N, 2))
    env = pd.DataFrame({"pH": xy[:, 0] + rng.normal(0, 0.2, N),
                        "depth": xy[:, 1] + rng.normal(0, 0.3, N)}, index=LABELS)
    d = DistanceMatrix(pdist(np.column_stack([xy[:, 0], 0.5 * env["depth"]])), LABELS)
    geo = DistanceMatrix(pdist(xy), LABELS)
    other = DistanceMatrix(pdist(env[["pH"]].to_numpy()), LABELS)
    scores = pd.DataFrame(rng.normal(size=(N, 2)) + xy[:, :1], index=LABELS,
                          columns=["axis1", "axis2"])
    design = pd.DataFrame({"habitat": ["fen", "bog"] * (N // 2)}, index=LABELS)
    return d, geo, other, env, scores, design


def _pvalues():
    d, geo, other, env, scores, design = _data()
    g = gradients
    return {
        "mantel": lambda: g.mantel(d, geo, n_resamples=99, rng=3).pvalue,
        "partial_mantel": lambda: g.partial_mantel(d, other, geo, n_resamples=99, rng=3).pvalue,
        "fit_vectors": lambda: g.fit_vectors(scores, env, n_resamples=99,
                                             rng=3).table["pvalue"].to_numpy(),
        "fit_surface": lambda: g.fit_surface(scores, env["pH"], n_resamples=1099, rng=3).pvalue,
        "permanova": lambda: g.permanova(d, design, n_resamples=99, rng=3,
                                         pairwise=False).table["pvalue"].to_numpy(),
        "dbrda": lambda: g.dbrda(d, env, n_resamples=99, rng=3).pvalue,
    }


def _ran_on_cluster(stream: list[dict]) -> bool:
    return any("_evaluate_many" in str(t.get("key", "")) for t in stream)


@pytest.mark.parametrize("name", sorted(_pvalues()))
def test_pvalues_on_a_cluster_equal_the_serial_ones(name: str, client, small_batches: None):
    call = _pvalues()[name]
    with parallel_config(n_jobs=1):
        serial = np.asarray(call())  # n_jobs=None would read this; the default is -1
    local = np.asarray(call())
    with distributed.get_task_stream(client) as ts, parallel_config(backend="dask",
                                                                    client=client):
        remote = np.asarray(call())
    assert _ran_on_cluster(ts.data), "no batch ran on the cluster"
    np.testing.assert_array_equal(remote, local)
    np.testing.assert_array_equal(remote, serial)


def test_the_engine_sends_the_base_data_once_and_keeps_the_order(client):
    # A statistic holding a large array: scattered to each worker once, not sent with every
    # chunk. Order: the null distribution is the serial one, row for row.
    big = np.random.default_rng(5).normal(size=(200, 200))
    plan = permutation_plan(200, n_resamples=999, rng=9, batch_size=50)

    def stat(orders):
        return big[orders[:, 0], orders[:, 1]] + orders[:, 2] * 1e-3

    serial = permutation_test(stat, plan, observed=0.0, n_jobs=1)
    with distributed.get_task_stream(client) as ts, parallel_config(backend="dask",
                                                                    client=client):
        remote = permutation_test(stat, plan, observed=0.0)
    np.testing.assert_array_equal(remote.null_distribution, serial.null_distribution)
    assert remote.pvalue == serial.pvalue
    chunks = [t for t in ts.data if "_evaluate_many" in str(t.get("key", ""))]
    assert 1 < len(chunks) <= 4 * 2  # a few chunks per worker thread, not one per batch
    # nothing of the run is left on the cluster afterwards
    assert not client.who_has() or all(not v for v in client.who_has().values())


def test_n_jobs_1_stays_here_even_inside_a_dask_context(client):
    plan = permutation_plan(12, n_resamples=999, rng=0, batch_size=100)
    y = np.arange(12.0)
    with distributed.get_task_stream(client) as ts, parallel_config(backend="dask",
                                                                    client=client):
        permutation_test(lambda o: y[o] @ y, plan, n_jobs=1)
    assert not _ran_on_cluster(ts.data)
