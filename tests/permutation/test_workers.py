"""Workers of a permutation run: the size rule behind ``n_jobs=-1``, and results that never
depend on the setting.

Every batch of a plan is drawn from its own ``numpy.random.SeedSequence`` child, so the
rearrangements (and so every statistic and p-value) are the same whichever worker evaluates
a batch and in which order; the tests below call every permutation test of the package with
``n_jobs=1``, ``2``, the default and ``None`` and require identical results, bit for bit. To
make the parallel paths run on these small problems, the size rule is set to spread a run
after its first batch (``SERIAL_SECONDS = 0``) and batches are made small (16 permutations).
"""

from __future__ import annotations

import dataclasses
import time

import joblib
import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

import gradients
from gradients.distance import DistanceMatrix
from gradients.permutation import _engine, _plan, _workers, permutation_plan, permutation_test
from gradients.permutation._threads import numba_threads

N = 20
LABELS = [f"s{i:02d}" for i in range(N)]


def small_batches(monkeypatch: pytest.MonkeyPatch) -> None:
    """Batches of 16 permutations in every stage, so that small runs have several."""
    monkeypatch.setattr(_plan, "DEFAULT_BATCH", 16)
    for module in ("gradients.partition._ftest", "gradients.groups._classes",
                   "gradients.groups._permanova"):
        monkeypatch.setattr(f"{module}.BATCH_SIZE", 16)


@pytest.fixture
def spread_early(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """The size rule spreads every run; yields the batch counts seen."""
    monkeypatch.setattr(_workers, "SERIAL_SECONDS", 0.0)
    monkeypatch.setattr(_workers, "PROCESS_SECONDS", 0.0)
    small_batches(monkeypatch)
    seen: list[int] = []
    real = _engine._run_batches

    def counting(statistic, plan, *args):
        seen.append(plan.n_batches)
        return real(statistic, plan, *args)

    monkeypatch.setattr(_engine, "_run_batches", counting)
    return seen


def _data():
    rng = np.random.default_rng(11)
    xy = rng.uniform(size=(N, 2))
    env = pd.DataFrame({"pH": xy[:, 0] + rng.normal(0, 0.2, N),
                        "Cu": rng.lognormal(size=N),
                        "depth": xy[:, 1] + rng.normal(0, 0.3, N)}, index=LABELS)
    community = pd.DataFrame(rng.poisson(3 * np.exp(np.outer(xy[:, 0], [1, -1, 0.5, 2, -2]))),
                             index=LABELS, columns=list("abcde"))
    community.iloc[:, 0] += 1  # no empty site
    groups = pd.Series(["fen", "bog", "carr", "heath"] * (N // 4), index=LABELS, name="habitat")
    d = DistanceMatrix(pdist(community.to_numpy(float), "braycurtis"), LABELS)
    geo = DistanceMatrix(pdist(xy), LABELS)
    other = DistanceMatrix(pdist(env[["Cu"]].to_numpy()), LABELS)
    scores = pd.DataFrame(rng.normal(size=(N, 2)) + xy[:, :1], index=LABELS,
                          columns=["axis1", "axis2"])
    return d, geo, other, env, community, groups, scores


def _calls():
    """Every permutation test of the package (the names of ``gradients._EXPORTS``)."""
    d, geo, other, env, community, groups, scores = _data()
    g = gradients
    design = pd.DataFrame({"habitat": groups})
    return {
        "mantel": lambda kw: g.mantel(d, geo, n_resamples=99, rng=1, **kw),
        "partial_mantel": lambda kw: g.partial_mantel(d, other, geo, n_resamples=99, rng=1,
                                                      **kw),
        "mantel_correlogram": lambda kw: g.mantel_correlogram(d, geo, classes=3, min_pairs=1,
                                                              n_resamples=99, rng=1, **kw),
        "matrix_regression": lambda kw: g.matrix_regression(d, {"geo": geo, "cu": other},
                                                            n_resamples=99, rng=1, **kw),
        "fit_vectors": lambda kw: g.fit_vectors(scores, env, n_resamples=99, rng=1, **kw),
        "fit_factors": lambda kw: g.fit_factors(scores, design, n_resamples=99, rng=1, **kw),
        "fit_surface": lambda kw: g.fit_surface(scores, env["pH"], n_resamples=1099, rng=1,
                                                  **kw),
        "permanova": lambda kw: g.permanova(d, design, n_resamples=99, rng=1, **kw),
        "dispersion_test": lambda kw: g.dispersion_test(d, groups, n_resamples=99, rng=1, **kw),
        "anosim": lambda kw: g.anosim(d, groups, n_resamples=99, rng=1, **kw),
        "mrpp": lambda kw: g.mrpp(d, groups, n_resamples=99, rng=1, **kw),
        "indicator_taxa": lambda kw: g.indicator_taxa(community, groups, n_resamples=99, rng=1,
                                                      **kw),
        "dbrda": lambda kw: g.dbrda(d, env, n_resamples=99, rng=1, **kw),
        "forward_select": lambda kw: g.forward_select(d, env, n_resamples=99, rng=1, **kw),
        "partition_variation": lambda kw: g.partition_variation(
            d, env[["pH"]], env[["depth"]], names=["a", "b"], n_resamples=99, rng=1, **kw),
        "subset_search": lambda kw: g.subset_search(d, env, n_resamples=99, rng=1, **kw),
        "turnover_model": lambda kw: g.turnover_model(d, env[["pH", "depth"]], n_resamples=19,
                                                      rng=1, **kw),
        "rank_variables": lambda kw: g.rank_variables(d, env, geo=geo, n_resamples=19,
                                                      turnover_resamples=3, rng=1, **kw),
    }


def _assert_same(a: object, b: object, where: str) -> None:
    """Bit-for-bit equality of two results (dataclasses, tables, arrays, scalars, nests)."""
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        assert type(a) is type(b), where
        for f in dataclasses.fields(a):
            _assert_same(getattr(a, f.name), getattr(b, f.name), f"{where}.{f.name}")
    elif isinstance(a, pd.DataFrame | pd.Series):
        assert isinstance(b, type(a)), where
        if isinstance(a, pd.DataFrame):
            pd.testing.assert_frame_equal(a, b, check_exact=True, obj=where)
        else:
            pd.testing.assert_series_equal(a, b, check_exact=True, obj=where)
    elif isinstance(a, np.ndarray):
        assert a.shape == b.shape and a.dtype == b.dtype, where
        if a.dtype.kind in "fc":
            np.testing.assert_array_equal(a, b, err_msg=where)
        else:
            assert (a == b).all(), where
    elif isinstance(a, dict):
        assert a.keys() == b.keys(), where
        for k in a:
            _assert_same(a[k], b[k], f"{where}[{k!r}]")
    elif isinstance(a, list | tuple):
        assert len(a) == len(b), where
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            _assert_same(x, y, f"{where}[{i}]")
    elif isinstance(a, float) and np.isnan(a):
        assert isinstance(b, float) and np.isnan(b), where
    elif isinstance(a, DistanceMatrix):
        np.testing.assert_array_equal(a.condensed, b.condensed, err_msg=where)
    else:
        assert a == b, where


# Exported names that run no permutation test (or only through the ones above).
# The planner runs the tests above on simulated surveys; its own check that the table does
# not depend on n_jobs is in tests/planning/test_power.py.
NOT_TESTS = {"permutation_plan", "distance_decay", "spatial_eigenvectors", "cluster_sites",
             "load_project", "init_project", "run_project", "run_demo", "survey_power",
             "plan_project"}


def test_every_exported_permutation_test_is_covered():
    # Every lower-case callable of the table of public names that takes `n_jobs` is listed.
    import inspect

    with_jobs = {name for name in gradients._EXPORTS
                 if name[0].islower() and name not in NOT_TESTS
                 and callable(getattr(gradients, name))
                 and "n_jobs" in inspect.signature(getattr(gradients, name)).parameters}
    assert with_jobs - {"nmds", "permutation_test"} == set(_calls())


@pytest.mark.parametrize("name", sorted(_calls()))
def test_results_do_not_depend_on_n_jobs(name: str, spread_early: list[int]):
    call = _calls()[name]
    one = call({"n_jobs": 1})
    assert max(spread_early) > 1  # batches to share: the parallel paths do run
    for kw in ({"n_jobs": 2}, {}, {"n_jobs": None}):
        _assert_same(one, call(kw), f"{name}{kw}")
    with joblib.parallel_config(n_jobs=2):
        _assert_same(one, call({"n_jobs": None}), f"{name} n_jobs=None in parallel_config")


def test_the_engine_alone_gives_the_same_null_on_every_path(spread_early: list[int]):
    y = np.random.default_rng(2).normal(size=30)
    plan = permutation_plan(30, n_resamples=499, rng=5)
    assert plan.n_batches > 2
    runs = [permutation_test(lambda o: y[o][:, :10].sum(axis=1), plan, n_jobs=j, backend=b)
            for j, b in ((1, "loky"), (2, "threading"), (-1, "threading"), (-1, "loky"))]
    for r in runs[1:]:
        np.testing.assert_array_equal(r.null_distribution, runs[0].null_distribution)
        assert r.pvalue == runs[0].pvalue


class _Spy:
    """Records which batches ``_run_parallel`` was given."""

    def __init__(self, real):
        self.real, self.ranges = real, []

    def __call__(self, statistic, plan, n_jobs, backend, note, indices):
        self.ranges.append((n_jobs, indices))
        return self.real(statistic, plan, n_jobs, backend, note, indices)


def test_a_short_run_stays_on_one_worker_by_default(monkeypatch: pytest.MonkeyPatch):
    # The size rule: a run projected well under SERIAL_SECONDS on one worker never starts
    # workers, so the default costs what n_jobs=1 costs.
    spy = _Spy(_engine._run_parallel)
    monkeypatch.setattr(_engine, "_run_parallel", spy)
    plan = permutation_plan(10, n_resamples=2999, rng=0, batch_size=100)
    y = np.arange(10.0)
    permutation_test(lambda o: y[o] @ y, plan, backend="threading")
    assert spy.ranges == []


def test_a_long_run_is_spread_over_the_cores(monkeypatch: pytest.MonkeyPatch):
    spy = _Spy(_engine._run_parallel)
    monkeypatch.setattr(_engine, "_run_parallel", spy)
    plan = permutation_plan(10, n_resamples=2999, rng=0, batch_size=100)
    y = np.arange(10.0)

    def slow(o):  # about 0.2 ms per rearrangement: 0.6 s for the run, projected
        time.sleep(2e-4 * o.shape[0])
        return o[:, :3] @ y[:3]

    monkeypatch.setattr(_workers, "SERIAL_SECONDS", 0.3)
    res = permutation_test(slow, plan, backend="threading")
    cores = _workers.available_cores()
    if cores > 1:  # every batch on the workers
        assert spy.ranges == [(cores, range(0, 30))]
    serial = permutation_test(slow, plan, n_jobs=1)
    np.testing.assert_array_equal(res.null_distribution, serial.null_distribution)
    spy.ranges.clear()
    with _workers.limit_cores(1):  # the project file's `cores = 1`
        permutation_test(slow, plan, backend="threading")
    assert spy.ranges == []


def test_the_projection_of_one_worker_separates_set_up_from_work():
    # A statistic costing a fixed 20 ms per call plus 0.1 ms per rearrangement: 10 batches of
    # 100 take 10 x 20 ms + 1000 x 0.1 ms = 0.3 s on one worker (sleeps, so the projection
    # is checked against the arithmetic; timer and scheduler noise allow 0.1 s).
    plan = permutation_plan(10, n_resamples=1000, rng=0, batch_size=100)

    def stat(o):
        time.sleep(0.02 + 1e-4 * o.shape[0])
        return np.zeros(o.shape[0])

    seconds, first = _workers.one_worker_seconds(stat, plan)
    assert seconds == pytest.approx(0.3, abs=0.1)
    np.testing.assert_array_equal(first, plan.batch(0))  # batch 0, reused by the run


def test_the_size_rule():
    s, p = _workers.SERIAL_SECONDS, _workers.PROCESS_SECONDS
    assert not _workers.should_spread(s / 2)
    assert _workers.should_spread(2 * s)
    assert p > s and not _workers.should_spread((s + p) / 2, processes=True)
    assert _workers.should_spread(2 * p, processes=True)


def test_none_takes_joblib_setting():
    # joblib's meaning of n_jobs=None: one worker outside any context, the context's inside.
    assert _workers.resolve_request(None) == 1
    with joblib.parallel_config(n_jobs=2):
        assert _workers.resolve_request(None) == 2
    assert _workers.resolve_request(-1) == _workers.AUTO
    assert _workers.resolve_request(3) == 3


def test_kernel_threads_follow_n_jobs_and_the_core_limit():
    import numba

    top = int(numba.config.NUMBA_NUM_THREADS)
    before = numba.get_num_threads()
    with numba_threads(1) as want:
        assert want == 1 and numba.get_num_threads() == 1
        assert _workers.kernel_request() == (True, 1)
    with numba_threads(-1) as want:
        assert want == top
    with _workers.limit_cores(1), numba_threads(-1) as want:
        assert want == 1
    with numba_threads(None) as want:
        assert want == 1
    assert numba.get_num_threads() == before and _workers.kernel_request() == (False, None)
