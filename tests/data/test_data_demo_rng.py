"""The demo functions take `rng` as the rest of the suite does; `seed` is deprecated.

Sources: SPEC 7 of the Scientific Python ecosystem coordination documents ("Seeding pseudo-random
number generation", https://scientific-python.org/specs/spec-0007/) for what `rng` accepts (an
int seeds a new ``numpy.random.Generator``, a Generator is used as it is, None takes fresh
entropy) and for the transition (the old keyword still works, warns, and is an error together
with `rng`); common practice (Python's :mod:`warnings` documentation) for a
``DeprecationWarning`` whose ``stacklevel`` points at the caller's line.
"""

from __future__ import annotations

import hashlib
import warnings

import numpy as np
import pytest

from gradients import InputError
from gradients.data import demo_survey, simulate_survey
from gradients.data._demo import DEFAULT_SEED, DEMO_DIR


def _digits(values) -> bytes:
    """Floats to 9 significant digits: the draws themselves, not the last bits of the linear
    algebra (OpenBLAS picks its kernels by processor, and the spatial fields' factorisations
    differ in the last bits between them; common practice for cross-machine fingerprints)."""
    flat = np.asarray(values, dtype=float).ravel()
    return "\x1f".join(f"{v:.9g}" for v in flat).encode()


def _fingerprint(scenario) -> str:
    h = hashlib.sha256()
    c = scenario.community
    h.update("\x1f".join([*c.index, *c.columns]).encode())
    h.update(c.to_numpy(dtype=np.int64).tobytes())
    h.update("\x1f".join(scenario.environment.to_numpy(dtype=str).ravel()).encode())
    geom = scenario.locations.geometry
    h.update(_digits(np.concatenate([geom.x.to_numpy(), geom.y.to_numpy()])))
    h.update(_digits(scenario.site_truth.select_dtypes("number")))
    h.update(_digits(scenario.taxon_truth.select_dtypes("number")))
    return h.hexdigest()[:16]


#: Fingerprints of surveys made by ``simulate_survey(..., rng=s)`` (recorded from the generator
#: once the bank zones were planted, which changed the counts; `seed=s` must give the same; the
#: default one is also checked byte for byte against the bundled files by test_data_demo.py).
#: Re-recorded with floats at 9 significant digits on a machine whose OpenBLAS kernel still gave
#: the earlier full-precision fingerprints (OPENBLAS_CORETYPE=SkylakeX), so they are the same
#: surveys; they now agree across OpenBLAS's Haswell, Zen and SkylakeX kernels.
BEFORE = {
    (60, 40, DEFAULT_SEED): "d26809a7154d42ae",
    (12, 6, 3): "16b2945841c616a1",
    (18, 10, 11): "ed1c2dbab7f0bb29",
    (24, 12, 5): "8823ea81aa3f564f",
}

#: Fingerprints of what the zones must leave alone (every environmental column but the zone,
#: the locations, and the truth of everything drawn before them), recorded from the generator
#: before the zones were added: the zones are drawn after every other draw.
KEPT = {
    (60, 40, DEFAULT_SEED): "b4317da7028df5e9",
    (12, 6, 3): "6dda69d409cb3ee1",
    (18, 10, 11): "ef86174160896088",
    (24, 12, 5): "ecf9a1a1064b5304",
}


def _kept_fingerprint(scenario) -> str:
    h = hashlib.sha256()
    env = scenario.environment.drop(columns="zone")
    h.update("\x1f".join(env.to_numpy(dtype=str).ravel()).encode())
    geom = scenario.locations.geometry
    h.update(_digits(np.concatenate([geom.x.to_numpy(), geom.y.to_numpy()])))
    h.update("\x1f".join(scenario.locations["reach"]).encode())
    site = ["x_km", "y_km", "valley_position", "distance_to_works_km", "contamination",
            "fines", "spatial_1", "spatial_2", "Cd_uncensored"]
    h.update(_digits(scenario.site_truth[site]))
    taxon = ["optimum_contamination", "tolerance_contamination", "optimum_fines",
             "tolerance_fines", "max_expected_count", "loading_spatial_1", "loading_spatial_2",
             "effect_margin", "effect_pool", "effect_riffle"]
    h.update(_digits(scenario.taxon_truth[taxon]))
    return h.hexdigest()[:16]


@pytest.mark.parametrize(("n_sites", "n_taxa", "seed"), list(KEPT))
def test_zones_leave_the_environment_and_locations_as_they_were(n_sites, n_taxa, seed):
    scenario = simulate_survey(n_sites=n_sites, n_taxa=n_taxa, rng=seed)
    assert _kept_fingerprint(scenario) == KEPT[n_sites, n_taxa, seed]
    assert list(scenario.environment.columns)[-2:] == ["habitat", "zone"]


@pytest.mark.parametrize(("n_sites", "n_taxa", "seed"), list(BEFORE))
def test_same_int_gives_the_survey_made_before(n_sites, n_taxa, seed):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # rng= itself never warns
        new = simulate_survey(n_sites=n_sites, n_taxa=n_taxa, rng=seed)
    assert _fingerprint(new) == BEFORE[n_sites, n_taxa, seed]
    assert new.seed == seed
    with pytest.warns(DeprecationWarning):
        old = simulate_survey(n_sites=n_sites, n_taxa=n_taxa, seed=seed)
    assert _fingerprint(old) == BEFORE[n_sites, n_taxa, seed]


def test_default_is_the_bundled_seed():
    scenario = simulate_survey(n_sites=12, n_taxa=6)
    assert scenario.seed == DEFAULT_SEED
    assert _fingerprint(scenario) == _fingerprint(
        simulate_survey(n_sites=12, n_taxa=6, rng=DEFAULT_SEED))


def test_generator_is_used_as_given():
    # SPEC 7: a Generator is used directly; a fresh one seeded with s draws what rng=s draws
    from_int = simulate_survey(n_sites=12, n_taxa=6, rng=7)
    generator = np.random.default_rng(7)
    first = simulate_survey(n_sites=12, n_taxa=6, rng=generator)
    assert _fingerprint(first) == _fingerprint(from_int)
    assert first.seed is None  # its seed is not known to the generator's user
    second = simulate_survey(n_sites=12, n_taxa=6, rng=generator)  # the same, advanced
    assert _fingerprint(second) != _fingerprint(first)
    numpy_int = simulate_survey(n_sites=12, n_taxa=6, rng=np.int64(7))
    assert _fingerprint(numpy_int) == _fingerprint(from_int)
    assert numpy_int.seed == 7 and type(numpy_int.seed) is int


def test_none_takes_fresh_entropy_and_records_it():
    a = simulate_survey(n_sites=12, n_taxa=6, rng=None)
    b = simulate_survey(n_sites=12, n_taxa=6, rng=None)
    assert isinstance(a.seed, int) and a.seed >= 0
    assert a.seed != b.seed and _fingerprint(a) != _fingerprint(b)
    again = simulate_survey(n_sites=12, n_taxa=6, rng=a.seed)
    assert _fingerprint(again) == _fingerprint(a)
    assert f"seed={a.seed}" in repr(a)


def test_seed_sequence_is_accepted():
    ss = np.random.SeedSequence(7)
    scenario = simulate_survey(n_sites=12, n_taxa=6, rng=ss)
    assert _fingerprint(scenario) == _fingerprint(simulate_survey(n_sites=12, n_taxa=6, rng=7))
    assert scenario.seed is None


@pytest.mark.parametrize("bad", [-1, True, 1.5, "7", np.random.RandomState(7)])
def test_bad_rng_is_refused_with_the_suite_message(bad):
    with pytest.raises(InputError, match="`rng` must be"):
        simulate_survey(n_sites=12, n_taxa=6, rng=bad)
    with pytest.raises(InputError, match="`rng` must be"):
        demo_survey(bad)


def test_seed_keyword_warns_at_the_callers_line():
    with pytest.warns(DeprecationWarning, match="`seed=` is deprecated") as record:
        simulate_survey(n_sites=12, n_taxa=6, seed=3)
    assert len(record) == 1 and record[0].filename == __file__
    with pytest.warns(DeprecationWarning, match="pass `rng=` instead") as record:
        demo_survey(seed=3, censored="half-limit")
    assert len(record) == 1 and record[0].filename == __file__


def test_seed_and_rng_together_are_an_error():
    for given in (3, DEFAULT_SEED + 1, None, np.random.default_rng(3)):
        with pytest.raises(InputError, match="not both"):
            simulate_survey(n_sites=12, n_taxa=6, rng=given, seed=3)
        with pytest.raises(InputError, match="not both"):
            demo_survey(given, seed=3)


def test_demo_survey_reads_the_bundled_files_for_the_default_seed_only():
    bundled = str(DEMO_DIR / "community.csv")
    assert demo_survey().sources["community"] == bundled
    assert demo_survey(np.int64(DEFAULT_SEED)).sources["community"] == bundled
    with pytest.warns(DeprecationWarning):
        assert demo_survey(seed=DEFAULT_SEED).sources["community"] == bundled
    simulated = demo_survey(rng=np.random.default_rng(5), censored="half-limit")
    assert simulated.sources["community"] is None
    assert simulated.equals(demo_survey(5, censored="half-limit"))  # positional rng, as before
    with pytest.warns(DeprecationWarning):
        assert simulated.equals(demo_survey(seed=5, censored="half-limit"))
    assert demo_survey(None).sources["community"] is None
