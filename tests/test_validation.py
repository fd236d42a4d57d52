"""The argument checks shared by every stage: one rule, one message, used everywhere.

Each helper of ``gradients._validation`` is checked on its own, and then every public entry
point that takes the argument is called with the same bad value: all must refuse it with the
same words, which fails as soon as a stage grows a check of its own again.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients._validation import align_strata, check_n_jobs, check_rng, seed_sequence
from gradients.distance import DistanceMatrix
from gradients.fitting import fit_factors, fit_surface, fit_vectors
from gradients.matrix import (
    distance_decay,
    mantel,
    mantel_correlogram,
    matrix_regression,
    partial_mantel,
)
from gradients.ordination import nmds
from gradients.permutation import custom_plan, permutation_plan, permutation_test

N = 12
LABELS = [f"s{i:02d}" for i in range(N)]


def _matrices():
    rng = np.random.default_rng(3)
    xy = rng.uniform(size=(N, 2))
    a = DistanceMatrix(pdist(xy + 0.3 * rng.normal(size=(N, 2))) / 3, LABELS)
    b = DistanceMatrix(pdist(xy), LABELS)
    c = DistanceMatrix(pdist(rng.normal(size=(N, 2))), LABELS)
    return a, b, c


def _scores():
    rng = np.random.default_rng(4)
    sc = pd.DataFrame(rng.normal(size=(N, 2)), index=LABELS, columns=["axis1", "axis2"])
    env = pd.DataFrame({"pH": sc.axis1 + rng.normal(0, 0.3, N)}, index=LABELS)
    fac = pd.DataFrame({"habitat": ["fen", "bog", "carr"] * (N // 3)}, index=LABELS)
    return sc, env, fac


def _entry_points(**kw):
    """Every public function of the permutation, fitting and matrix stages, with ``kw``."""
    a, b, c = _matrices()
    sc, env, fac = _scores()
    return {
        "mantel": lambda: mantel(a, b, n_resamples=99, **kw),
        "partial_mantel": lambda: partial_mantel(a, b, c, n_resamples=99, **kw),
        "mantel_correlogram": lambda: mantel_correlogram(a, b, classes=3, n_resamples=99,
                                                         min_pairs=1, **kw),
        "matrix_regression": lambda: matrix_regression(a, {"b": b, "c": c}, n_resamples=99,
                                                       **kw),
        "fit_vectors": lambda: fit_vectors(sc, env, n_resamples=99, **kw),
        "fit_factors": lambda: fit_factors(sc, fac, n_resamples=99, **kw),
        "fit_surface": lambda: fit_surface(sc, env["pH"], n_resamples=19, **kw),
    }


# --------------------------------------------------------------------------- n_jobs
def test_n_jobs_rule():
    # Common practice (joblib's convention): a positive number of workers, -1 for all, None
    # for the setting of an enclosing joblib.parallel_config.
    assert [check_n_jobs(v) for v in (1, 2, -1, np.int64(3), None)] == [1, 2, -1, 3, None]
    for bad in (0, -2, 1.5, True, "2"):
        with pytest.raises(InputError, match=r"`n_jobs` must be a positive integer or -1 "
                                             r"\(all cores\)"):
            check_n_jobs(bad)


@pytest.mark.parametrize("name", [*_entry_points(), "nmds", "permutation_test"])
def test_every_stage_refuses_a_bad_n_jobs_with_the_same_message(name):
    calls = _entry_points(n_jobs=0, rng=1)
    a, _, _ = _matrices()
    plan = permutation_plan(N, n_resamples=9, rng=0)
    calls["nmds"] = lambda: nmds(a, starts=2, rng=1, n_jobs=0)
    calls["permutation_test"] = lambda: permutation_test(lambda o: o[:, 0] * 1.0, plan,
                                                         n_jobs=0)
    with pytest.raises(InputError, match=r"^`n_jobs` must be a positive integer or -1 "
                                         r"\(all cores\), or None \(joblib's setting\); got 0\.$"):
        calls[name]()


# --------------------------------------------------------------------------- rng
def test_rng_forms_follow_spec_7():
    # SPEC 7 (Scientific Python), from memory: an int seeds numpy.random.default_rng, a
    # Generator is used as given, None takes fresh entropy from the operating system.
    gen = np.random.default_rng(7)
    assert check_rng(gen) is gen
    assert check_rng(5).random() == np.random.default_rng(5).random()
    assert isinstance(check_rng(None), np.random.Generator)
    # The engine's root sequence: an int seeds it directly (numpy's SeedSequence(entropy)),
    # the same entropy default_rng(int) is built from; a Generator gives 128 drawn bits.
    assert seed_sequence(5).entropy == 5
    assert seed_sequence(5).entropy == np.random.default_rng(5).bit_generator.seed_seq.entropy
    ss = np.random.SeedSequence(11)
    assert seed_sequence(ss) is ss
    expected = np.random.default_rng(3).integers(0, 2**32, size=4, dtype=np.uint64).tolist()
    assert seed_sequence(np.random.default_rng(3)).entropy == \
        np.random.SeedSequence(expected).entropy


@pytest.mark.parametrize("bad, words", [
    (-1, r"`rng` must be a non-negative integer seed; got -1\."),
    (True, r"`rng` must be an int, a numpy.random.Generator or None; got True\."),
    ("seed", r"`rng` must be an int, a numpy.random.Generator or None; got 'seed'\."),
    (np.random.RandomState(0), r"legacy numpy.random.RandomState\. Pass "
                               r"numpy.random.default_rng\(seed\) instead\."),
])
def test_both_rng_forms_refuse_the_same_values_with_the_same_words(bad, words):
    with pytest.raises(InputError, match=words):
        check_rng(bad)
    with pytest.raises(InputError, match=words):
        seed_sequence(bad)


@pytest.mark.parametrize("name", [*_entry_points(), "nmds", "distance_decay",
                                  "permutation_plan", "custom_plan", "is_metric"])
def test_every_stage_refuses_a_negative_seed_with_the_same_message(name):
    calls = _entry_points(rng=-1)
    a, b, _ = _matrices()
    calls["nmds"] = lambda: nmds(a, starts=2, rng=-1)
    calls["distance_decay"] = lambda: distance_decay(a, b, n_resamples=9, rng=-1)
    calls["permutation_plan"] = lambda: permutation_plan(N, n_resamples=9, rng=-1)
    calls["custom_plan"] = lambda: custom_plan(lambda g, k: g.normal(size=(k, N)), N,
                                               n_resamples=9, rng=-1)
    calls["is_metric"] = lambda: a.is_metric(sample=10, rng=-1)
    with pytest.raises(InputError, match=r"^`rng` must be a non-negative integer seed; "
                                         r"got -1\.$"):
        calls[name]()


def test_a_generator_and_its_seed_give_the_fits_the_same_permutations():
    # Normalising rng once at the top of a fit must not change which permutations are drawn:
    # a Generator is asked for its 128 bits once, exactly as the engine did before.
    sc, env, _ = _scores()
    a = fit_vectors(sc, env, n_resamples=99, rng=np.random.default_rng(2))
    b = fit_vectors(sc, env, n_resamples=99, rng=seed_sequence(np.random.default_rng(2)))
    np.testing.assert_array_equal(a.null_distribution, b.null_distribution)


# --------------------------------------------------------------------------- strata
def test_strata_series_is_matched_by_label_and_default_index_by_position():
    labels = pd.Index(["b", "a", "c", "d"])
    by_label = pd.Series(["x", "x", "y", "y"], index=["a", "b", "c", "d"])
    np.testing.assert_array_equal(align_strata(by_label, labels), ["x", "x", "y", "y"])
    by_label_reordered = by_label.iloc[::-1]
    np.testing.assert_array_equal(align_strata(by_label_reordered, labels),
                                  ["x", "x", "y", "y"])
    in_order = pd.Series(["p", "q", "p", "q"])  # default 0..3 index: taken in site order
    np.testing.assert_array_equal(align_strata(in_order, labels), ["p", "q", "p", "q"])
    np.testing.assert_array_equal(align_strata(["p", "q", "p", "q"], labels),
                                  ["p", "q", "p", "q"])
    assert align_strata(None, labels) is None
    # with only a number of sites, a Series is positional whatever its index
    np.testing.assert_array_equal(align_strata(by_label_reordered, 4), ["y", "y", "x", "x"])


def test_strata_errors_name_the_sites_and_the_fix():
    labels = pd.Index(["a", "b", "c"])
    with pytest.raises(InputError, match=r"1 site\(s\) in the matrices but not in `strata`: "
                                         r"'c'; 1 site\(s\) in `strata` but not in the "
                                         r"matrices: 'z'\. Give `strata` one label for every "
                                         r"site of the matrices, indexed by site label\."):
        align_strata(pd.Series([1, 1, 2], index=["a", "b", "z"]), labels,
                     sites_name="the matrices")
    with pytest.raises(InputError, match=r"`blocks` must give one label per site: 2 labels "
                                         r"for 3 sites\."):
        align_strata([1, 2], labels, name="blocks")
    with pytest.raises(InputError, match=r"`strata` is missing for site\(s\) 'b'; give every "
                                         r"site one\."):
        align_strata(pd.Series([1, None, 2], index=labels), labels)
    with pytest.raises(InputError, match=r"`strata` is missing for site position\(s\) 1; "
                                         r"give every site one\."):
        align_strata([1, None, 2], 3)
    with pytest.raises(InputError, match=r"one dimension"):
        align_strata(np.zeros((3, 2)), labels)
    with pytest.raises(InputError, match="unclear whether its values follow"):
        align_strata(pd.Series([1, 1, 2]), pd.Index([2, 0, 1]))


@pytest.mark.parametrize("name", ["mantel", "partial_mantel", "mantel_correlogram",
                                  "matrix_regression", "fit_vectors", "fit_factors",
                                  "fit_surface"])
def test_every_stage_aligns_strata_the_same_way(name):
    # Theory: strata matched by label, given in another order, are the same design as the
    # labels in site order, so the permutations and the p-values are identical.
    strata = pd.Series(np.where(np.arange(N) % 2 == 0, "north", "south"), index=LABELS)
    in_order = _entry_points(rng=5, strata=strata.to_numpy())[name]()
    by_label = _entry_points(rng=5, strata=strata.iloc[::-1])[name]()
    pvalue = (lambda r: r.table["pvalue"]) if name == "mantel_correlogram" else \
        (lambda r: r.pvalue)
    np.testing.assert_array_equal(np.asarray(pvalue(in_order)), np.asarray(pvalue(by_label)))
    missing = strata.copy()
    missing.iloc[3] = None
    with pytest.raises(InputError, match=r"`strata` is missing for site\(s\) 's03'"):
        _entry_points(rng=5, strata=missing)[name]()
