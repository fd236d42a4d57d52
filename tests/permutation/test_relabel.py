"""The engine's 'relabel' scheme: distinct reassignments of sites to groups, checked against
counting (the multinomial coefficient), against listing every site order with itertools, and
against the free scheme's random draws."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from gradients import InputError
from gradients.permutation import permutation_plan, permutation_test


def _partitions(orders, labels):
    """The reassignment each order makes: for every group, the set of sites whose data it gets."""
    labels = np.asarray(labels)
    return [tuple(frozenset(o[labels == g].tolist()) for g in dict.fromkeys(labels.tolist()))
            for o in orders]


def _between_ss(y, labels):
    # one-way between-group sum of squares of a batch of rearranged data: a statistic that
    # depends only on which sites share a group and not on the groups' names
    labels = np.asarray(labels)

    def statistic(orders):
        z = y[orders]
        out = np.zeros(len(orders))
        for g in np.unique(labels):
            inside = z[:, labels == g]
            out += inside.shape[1] * (inside.mean(axis=1) - y.mean()) ** 2
        return out

    return statistic


@pytest.mark.parametrize(
    ("labels", "interchangeable", "count"),
    [
        # theory: 8! / (4! 4!) = 70 reassignments of two groups of 4; 35 up to swapping them
        ([0] * 4 + [1] * 4, False, 70),
        ([0] * 4 + [1] * 4, True, 35),
        # 9! / (3!)^3 = 1680, and / 3! = 280 with the three equal groups interchangeable
        (list("aaabbbccc"), True, 280),
        # unequal sizes cannot be swapped: 7! / (2! 2! 3!) = 210, / 2! for the two pairs = 105
        (list("xxyyzzz"), False, 210),
        (list("xxyyzzz"), True, 105),
        # interleaved labels: the count does not depend on the order of the sites
        (list("abab"), True, 3),
        # six pairs: 12! / (2^6 6!) = 10,395 pairings (more than 999: asked for below)
        (list("aabbccddeeff"), True, 10395),
    ],
)
def test_relabel_counts_and_lists_each_reassignment_once(labels, interchangeable, count):
    plan = permutation_plan(len(labels), groups=labels, interchangeable=interchangeable,
                            n_resamples=max(999, count), rng=0)
    assert plan.scheme == "relabel" and plan.exact and plan.size == count == plan.n_distinct
    orders = np.concatenate(list(plan.batches()))
    assert (orders[0] == np.arange(len(labels))).all()  # identity first
    assert all(sorted(o.tolist()) == list(range(len(labels))) for o in orders)
    parts = _partitions(orders, labels)
    if interchangeable:  # distinct as unlabelled partitions of the sites
        assert len({frozenset(p) for p in parts}) == count
    else:
        assert len(set(parts)) == count
    # multinomial coefficient (theory), computed independently
    sizes = np.unique(labels, return_counts=True)[1]
    total = math.factorial(len(labels)) // math.prod(math.factorial(s) for s in sizes)
    if interchangeable:
        for m in np.unique(sizes, return_counts=True)[1]:
            total //= math.factorial(int(m))
    assert total == count


def test_exact_p_over_reassignments_equals_p_over_all_site_orders():
    # Exact enumeration (theory): over all 8! = 40,320 orders, listed with itertools, the
    # p-value of a group statistic equals that over the 70 distinct reassignments and over the
    # 35 reassignments up to swapping the two equal groups (every set of orders or
    # reassignments giving one partition has the same size).
    rng = np.random.default_rng(5)
    labels = np.array([0, 1, 0, 0, 1, 1, 0, 1])
    y = rng.normal(size=8) + labels
    stat = _between_ss(y, labels)
    every = np.array(list(itertools.permutations(range(8))))
    observed = float(stat(np.arange(8)[None, :])[0])
    values = stat(every)
    p_all = float(np.mean(values >= observed - 1e-12))
    for interchangeable, size in [(False, 70), (True, 35)]:
        plan = permutation_plan(8, groups=labels, interchangeable=interchangeable, rng=0)
        res = permutation_test(stat, plan)
        assert res.exact and res.n_resamples == size
        assert res.pvalue == pytest.approx(p_all, abs=1e-12)


def test_relabel_within_strata_counts_the_product_of_strata():
    # theory: reassignments within each stratum, C(5, 3) * C(5, 2) * ... per stratum
    labels = list("aaabb" + "aabbb")
    strata = [0] * 5 + [1] * 5
    plan = permutation_plan(10, groups=labels, strata=strata, interchangeable=True, rng=0)
    assert plan.exact and plan.size == math.comb(5, 3) * math.comb(5, 2)  # no swap with strata
    orders = np.concatenate(list(plan.batches()))
    strata = np.asarray(strata)
    for o in orders:  # every site takes data from its own stratum
        assert (strata[o] == strata).all()
    assert len(set(_partitions(orders, labels))) == plan.size


def test_random_relabel_draws_are_the_free_draws():
    # Uniform random orders give every reassignment the same chance, so when the count is too
    # large to enumerate, a relabel plan draws exactly the orders of a free plan (or of a
    # within-strata plan) from the same rng.
    labels = np.repeat(np.arange(3), 10)
    sites = [f"s{i:02d}" for i in range(30)]
    a = permutation_plan(30, groups=labels, n_resamples=199, rng=4, site_labels=sites)
    b = permutation_plan(30, n_resamples=199, rng=4, site_labels=sites)
    assert not a.exact
    assert np.array_equal(np.concatenate(list(a.batches())), np.concatenate(list(b.batches())))
    strata = np.tile([0, 1], 15)
    a = permutation_plan(30, groups=labels, strata=strata, n_resamples=199, rng=4)
    b = permutation_plan(30, strata=strata, n_resamples=199, rng=4)
    assert np.array_equal(np.concatenate(list(a.batches())), np.concatenate(list(b.batches())))


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"scheme": "relabel"}, "needs `groups`"),
        ({"scheme": "cyclic", "groups": [0, 0, 1, 1]}, "does not apply"),
        ({"groups": [0, 0, 0, 0]}, "changes nothing"),
        ({"groups": [0, 1, 0, 1], "strata": [0, 0, 1, 1], "exact": False,
          "n_resamples": 9}, None),
        ({"groups": [0, 0, 1, 1], "strata": [0, 0, 1, 1]}, "changes nothing"),
        ({"groups": [0, 0, None, 1]}, "`groups` is missing"),
    ],
)
def test_relabel_arguments(kwargs, message):
    if message is None:
        plan = permutation_plan(4, rng=0, **kwargs)
        assert not plan.exact and plan.size == 9
        return
    with pytest.raises(InputError, match=message):
        permutation_plan(4, rng=0, **kwargs)
