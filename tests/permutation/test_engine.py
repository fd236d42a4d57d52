"""Checks of the permutation engine against theory: exact enumeration, null calibration,
reproducibility of seeded streams, and the p-value rule (Phipson & Smyth 2010)."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import stats

from gradients import InputError
from gradients.permutation import (
    custom_plan,
    permutation_plan,
    permutation_test,
    pvalue_from_counts,
    report_progress,
)


def _dot_statistic(x, y):
    return lambda orders: y[orders] @ x


def test_exact_enumeration_n5_matches_listing_all_120():
    # Theory: with 5! = 120 <= n_resamples the engine enumerates all permutations, and
    # p = (number of permutations with statistic >= observed, identity included) / 120.
    rng = np.random.default_rng(3)
    x, y = rng.normal(size=5), rng.normal(size=5)
    observed = float(x @ y)
    by_hand = [float(y[list(p)] @ x) for p in itertools.permutations(range(5))]
    assert len(by_hand) == 120
    for alternative, count in [
        ("greater", sum(v >= observed - 1e-12 for v in by_hand)),
        ("less", sum(v <= observed + 1e-12 for v in by_hand)),
    ]:
        res = permutation_test(_dot_statistic(x, y), permutation_plan(5, n_resamples=999, rng=1),
                               alternative=alternative)
        assert res.exact
        assert res.n_resamples == 120
        assert res.pvalue == pytest.approx(count / 120, abs=1e-15)
    # two-sided about the exact permutation mean (theory: mean over all orders)
    centre = np.mean(by_hand)
    count = sum(abs(v - centre) >= abs(observed - centre) - 1e-12 for v in by_hand)
    res = permutation_test(_dot_statistic(x, y), permutation_plan(5, rng=1),
                           alternative="two-sided")
    assert res.pvalue == pytest.approx(count / 120)
    # exact null mean of the cross product is (sum x)(sum y)/n (theory)
    assert np.mean(res.null_distribution) == pytest.approx(x.sum() * y.sum() / 5)


def test_exact_enumeration_lists_each_permutation_once_identity_first():
    plan = permutation_plan(4, n_resamples=24, rng=0)
    orders = np.concatenate(list(plan.batches()))
    assert plan.exact and orders.shape == (24, 4)
    assert len({tuple(o) for o in orders}) == 24
    assert (orders[0] == np.arange(4)).all()


@pytest.mark.parametrize(
    ("kwargs", "distinct"),
    [
        # theory: counts of distinct rearrangements under each restricted design
        ({"scheme": "strata", "strata": [0, 0, 0, 1, 1, 2, 2]}, math.factorial(3) * 2 * 2),
        ({"scheme": "cyclic"}, 7),
        ({"scheme": "cyclic", "strata": [0, 0, 0, 0, 1, 1, 1]}, 4 * 3),
        ({"scheme": "blocks", "blocks": [0, 0, 1, 1, 2, 2, 3]}, None),  # unequal -> error
    ],
)
def test_restricted_designs_enumerate_their_distinct_rearrangements(kwargs, distinct):
    if distinct is None:
        with pytest.raises(InputError, match="same number of sites"):
            permutation_plan(7, **kwargs)
        return
    plan = permutation_plan(7, n_resamples=999, rng=0, **kwargs)
    orders = np.concatenate(list(plan.batches()))
    assert plan.exact and len(orders) == distinct
    assert len({tuple(o) for o in orders}) == distinct
    strata = kwargs.get("strata")
    if strata is not None:  # sites only exchanged within their stratum
        strata = np.asarray(strata)
        assert (strata[orders] == strata[None, :]).all()


def test_toroidal_and_block_designs_keep_their_structure():
    # toroidal shift on a 3 x 4 grid: 12 distinct shifts; neighbours stay neighbours (theory)
    plan = permutation_plan(12, "toroidal", shape=(3, 4), n_resamples=999, rng=0)
    orders = np.concatenate(list(plan.batches()))
    assert plan.exact and len({tuple(o) for o in orders}) == 12
    grid = orders.reshape(-1, 3, 4)
    right = (grid[:, :, 1:] - grid[:, :, :-1]) % 4
    assert set(np.unique(right)) <= {1, 4 - 3}  # horizontal neighbours differ by one column
    # whole blocks: 4 blocks of 2 -> 4! = 24 distinct
    plan = permutation_plan(8, "blocks", blocks=[0, 0, 1, 1, 2, 2, 3, 3], n_resamples=50, rng=0)
    orders = np.concatenate(list(plan.batches()))
    assert plan.exact and len(orders) == 24
    pairs = orders.reshape(-1, 4, 2)
    assert ((pairs[:, :, 1] - pairs[:, :, 0]) == 1).all()  # block members stay together


def test_random_strata_draws_stay_within_strata():
    strata = np.repeat(["upper", "middle", "lower"], [10, 12, 8])
    plan = permutation_plan(30, strata=strata, n_resamples=500, rng=5)
    assert not plan.exact and plan.scheme == "strata"
    orders = np.concatenate(list(plan.batches()))
    assert orders.shape == (500, 30)
    assert (strata[orders] == strata[None, :]).all()
    assert all(sorted(o) == list(range(30)) for o in orders[:20])


def test_monte_carlo_pvalues_uniform_under_null_and_never_zero():
    # Null calibration (theory): under exchangeability P(p <= a) <= a, and (b+1)/(P+1) is
    # close to uniform on its grid; Kolmogorov-Smirnov against U(0, 1) (scipy.stats.kstest).
    rng = np.random.default_rng(2026)
    pvalues = []
    for rep in range(300):
        x, y = rng.normal(size=12), rng.normal(size=12)
        res = permutation_test(_dot_statistic(x, y),
                               permutation_plan(12, n_resamples=199, rng=rep))
        pvalues.append(res.pvalue)
    pvalues = np.array(pvalues)
    assert pvalues.min() >= 1 / 200  # never 0
    assert stats.kstest(pvalues, "uniform").pvalue > 0.01
    assert np.mean(pvalues <= 0.05) < 0.05 + 3 * np.sqrt(0.05 * 0.95 / 300)


def test_pvalue_rule():
    # Phipson & Smyth (2010): (b + 1) / (P + 1) for random permutations; b / N when exact.
    assert pvalue_from_counts(0, 999, exact=False) == pytest.approx(0.001)
    assert pvalue_from_counts(5, 120, exact=True) == pytest.approx(5 / 120)
    assert pvalue_from_counts(999, 999, exact=False) == 1.0


def test_same_rng_same_result_in_one_or_several_processes():
    rng = np.random.default_rng(0)
    x, y = rng.normal(size=40), rng.normal(size=(40, 3))
    stat = lambda orders: np.einsum("i,kij->kj", x, y[orders])  # noqa: E731
    plan = permutation_plan(40, n_resamples=2500, rng=123, batch_size=300)
    serial = permutation_test(stat, plan)
    parallel = permutation_test(stat, plan, n_jobs=2)
    threads = permutation_test(stat, plan, n_jobs=2, backend="threading")
    np.testing.assert_array_equal(serial.null_distribution, parallel.null_distribution)
    np.testing.assert_array_equal(serial.pvalue, parallel.pvalue)
    np.testing.assert_array_equal(serial.pvalue, threads.pvalue)
    # the same seed again builds the same plan; a batch drawn twice is the same batch
    again = permutation_plan(40, n_resamples=2500, rng=123, batch_size=300)
    np.testing.assert_array_equal(plan.batch(7), again.batch(7))
    np.testing.assert_array_equal(plan.batch(3), plan.batch(3))
    # a Generator gives a reproducible stream too
    a = permutation_plan(40, rng=np.random.default_rng(9)).batch(0)
    b = permutation_plan(40, rng=np.random.default_rng(9)).batch(0)
    np.testing.assert_array_equal(a, b)


def test_several_statistics_tested_together_match_one_at_a_time():
    rng = np.random.default_rng(1)
    x, y = rng.normal(size=25), rng.normal(size=(25, 4))
    plan = permutation_plan(25, n_resamples=300, rng=8)
    joint = permutation_test(lambda o: np.einsum("i,kij->kj", x, y[o]), plan)
    for j in range(4):
        single = permutation_test(_dot_statistic(x, y[:, j]), plan)
        assert single.pvalue == pytest.approx(joint.pvalue[j])
        assert single.statistic == pytest.approx(joint.statistic[j])


def test_early_stopping_besag_clifford():
    # Besag & Clifford (1991): stop after h extremes; p = h / L.
    rng = np.random.default_rng(4)
    x, y = rng.normal(size=30), rng.normal(size=30)
    plan = permutation_plan(30, n_resamples=20000, rng=2, batch_size=100)
    full = permutation_test(_dot_statistic(x, y), plan)
    early = permutation_test(_dot_statistic(x, y), plan, early_stop=10)
    assert early.stopped_early
    assert early.n_resamples < 20000
    hits = np.cumsum(full.null_distribution >= early.statistic)
    L = int(np.argmax(hits >= 10)) + 1  # first draw at which 10 extremes were seen
    assert early.n_resamples == L
    assert early.pvalue == pytest.approx(10 / L)
    # a strong effect never reaches h, and falls back to (b + 1) / (P + 1)
    strong = permutation_test(_dot_statistic(x, x), plan, early_stop=10)
    assert not strong.stopped_early and strong.pvalue == pytest.approx(1 / 20001)


def test_custom_plan_goes_through_the_same_engine():
    # a surrogate null: Gaussian noise; the observed statistic sits at the 97.5% point
    draw = lambda g, k: g.normal(size=(k, 1))  # noqa: E731
    plan = custom_plan(draw, 1, n_resamples=4000, rng=0)
    res = permutation_test(lambda batch: batch[:, 0], plan, observed=1.96)
    assert not res.exact
    assert res.pvalue == pytest.approx(0.025, abs=0.008)  # normal tail (theory), MC error
    with pytest.raises(InputError, match="needs `observed`"):
        permutation_test(lambda batch: batch[:, 0], plan)


def test_progress_reporter_sees_every_batch():
    seen = []
    plan = permutation_plan(10, n_resamples=500, rng=0, batch_size=100)
    with report_progress(lambda task, done, total: seen.append((task, done, total))):
        permutation_test(lambda o: o[:, 0].astype(float), plan, task="demo")
    assert seen[-1] == ("demo", 500, 500) and len(seen) == 5  # told permutations, not batches


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: permutation_plan(1), "at least 2"),
        (lambda: permutation_plan(5, "zigzag"), "`scheme` must be one of"),
        (lambda: permutation_plan(5, n_resamples=0), "`n_resamples` must be a positive"),
        (lambda: permutation_plan(5, n_resamples=-3), "got -3"),
        (lambda: permutation_plan(5, rng=-1), "`rng`"),
        (lambda: permutation_plan(5, rng="seed"), "`rng`"),
        (lambda: permutation_plan(6, "toroidal", shape=(2, 2)), "rows x cols = 6"),
        (lambda: permutation_plan(4, strata=[0, 0, 1]), "one label per site"),
        (lambda: permutation_plan(3, strata=[0, 1, 2]), "allows no rearrangement"),
        (lambda: permutation_plan(30, exact=True, n_resamples=99), "exact test would need"),
        (lambda: permutation_test(lambda o: o[:, 0], permutation_plan(5), alternative="up"),
         "`alternative` must be one of"),
    ],
)
def test_bad_arguments_are_named(call, message):
    with pytest.raises(InputError, match=message):
        call()


def test_random_orders_are_uniform_over_all_permutations():
    # Theory: Fisher-Yates with unbiased bounded integers makes every order equally likely;
    # chi-square goodness of fit over the 4! = 24 orders (scipy.stats.chisquare).
    plan = permutation_plan(4, n_resamples=48_000, rng=11, exact=False)
    orders = np.concatenate(list(plan.batches()))
    _, counts = np.unique(orders, axis=0, return_counts=True)
    assert len(counts) == 24
    assert stats.chisquare(counts).pvalue > 0.001
    # within strata: each of the 3! x 2! = 12 arrangements equally likely
    plan = permutation_plan(5, strata=[0, 1, 0, 1, 0], n_resamples=24_000, rng=12, exact=False)
    orders = np.concatenate(list(plan.batches()))
    _, counts = np.unique(orders, axis=0, return_counts=True)
    assert len(counts) == 12
    assert stats.chisquare(counts).pvalue > 0.001
    # each site is equally likely to take each position (first moment, theory)
    plan = permutation_plan(30, n_resamples=30_000, rng=13)
    orders = np.concatenate(list(plan.batches()))
    assert np.abs(orders.mean(axis=0) - 14.5).max() < 0.25  # sd of mean ~ 8.7/sqrt(3e4) = 0.05


def test_thread_workers_survive_numba_workqueue_layer(tmp_path):
    # numba's 'workqueue' threading layer aborts the process when two threads launch parallel
    # kernels at once (numba documentation, "The Threading Layers"); the engine must then run
    # thread-backend batches in one thread, with the same result as one worker.
    import subprocess
    import sys

    script = tmp_path / "run.py"
    script.write_text(
        "import numba, numpy as np, pandas as pd\n"
        "from gradients.fitting import fit_vectors\n"
        "rng = np.random.default_rng(0)\n"
        "sc = pd.DataFrame(rng.normal(size=(40, 2)), columns=['axis1', 'axis2'])\n"
        "env = pd.DataFrame(rng.normal(size=(40, 3)), columns=['a', 'b', 'c'])\n"
        "one = fit_vectors(sc, env, n_resamples=4999, rng=1, n_jobs=1).pvalue\n"
        "two = fit_vectors(sc, env, n_resamples=4999, rng=1, n_jobs=2).pvalue\n"
        "assert numba.threading_layer() == 'workqueue', numba.threading_layer()\n"
        "assert one.equals(two)\n"
        "print('ok')\n")
    env = {**__import__("os").environ, "NUMBA_THREADING_LAYER": "workqueue"}
    done = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                          env=env, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip() == "ok"


def test_nan_statistics_are_refused_not_counted_as_extreme():
    # A NaN in the observed value or among the permuted ones would make every comparison
    # False and the p-value its minimum; the engine refuses instead.
    x = np.arange(12.0)
    y = np.random.default_rng(0).normal(size=12)
    plan = permutation_plan(12, n_resamples=99, rng=1)

    def broken(orders):
        out = y[orders] @ x
        if len(orders) > 1:
            out[3] = np.nan
        return out

    with pytest.raises(InputError, match=r"not a number \(NaN\) for 1 of 99"):
        permutation_test(broken, plan)
    with pytest.raises(InputError, match="observed statistic is not a number"):
        permutation_test(lambda o: y[o] @ x, plan, observed=np.nan)


def test_exact_test_counts_the_identity_even_when_the_batched_formula_drifts():
    # Exact enumeration lists the identity first, and it is the observed arrangement, so the
    # exact p-value is at least 1/N (theory) even if the batched statistic of the identity
    # differs from the directly computed observed value by more than the tie tolerance.
    x = np.arange(5.0)
    y = np.array([-1.2, -0.4, 0.3, 0.8, 2.0])  # sorted like x: the identity is the maximum
    plan = permutation_plan(5, n_resamples=999, rng=0)
    res = permutation_test(lambda o: y[o] @ x - 1e-6 * (o == np.arange(5)).all(axis=1),
                           plan, observed=float(y @ x))
    assert res.exact and res.pvalue == pytest.approx(1 / 120)
    assert res.null_distribution[0] == pytest.approx(y @ x)


def test_more_arguments_named():
    with pytest.raises(InputError, match="site_labels` must give one label per site"):
        permutation_plan(5, n_resamples=999, site_labels=list("abcd"))
    with pytest.raises(InputError, match="site_labels` repeats 'a'"):
        permutation_plan(6, n_resamples=10, site_labels=list("abcdea"))
    with pytest.raises(InputError, match="batch_size"):
        permutation_plan(6, n_resamples=10, batch_size=True)
    with pytest.raises(InputError, match="n_jobs"):
        permutation_test(lambda o: o[:, 0] * 1.0, permutation_plan(6, n_resamples=10, rng=0),
                         n_jobs=0)


def test_custom_draw_must_return_every_requested_row():
    plan = custom_plan(lambda gen, k: gen.normal(size=(max(k - 1, 1), 3)), 3,
                       n_resamples=50, rng=0)
    with pytest.raises(InputError, match="holds 50 rearrangements but the statistic returned 49"):
        permutation_test(lambda data: data.sum(axis=1), plan, observed=0.0)
