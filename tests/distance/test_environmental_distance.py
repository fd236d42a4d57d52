"""Environmental distance: z-scored Euclidean, Gower for mixed tables, weights."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import dissimilarity, environmental_distance


def _env():
    rng = np.random.default_rng(4)
    return pd.DataFrame({"ph": rng.normal(7, 0.6, 12), "cu": rng.lognormal(3, 1, 12),
                         "depth": rng.uniform(0.2, 3.0, 12)},
                        index=[f"r{i}" for i in range(12)])


def test_default_is_euclidean_on_zscores():
    # reference library: scipy pdist on variables z-scored with ddof = 1
    env = _env()
    z = (env - env.mean()) / env.std(ddof=1)
    d = environmental_distance(env)
    np.testing.assert_allclose(d.condensed, pdist(z.to_numpy()), rtol=1e-12)
    assert (d.metric, d.transform) == ("euclidean", "zscore")
    assert d.labels.equals(env.index)


def test_weights_and_variables():
    # reference library: scipy's weighted Minkowski p=2, (sum w |u - v|^2)^(1/2)
    env = _env()
    z = ((env - env.mean()) / env.std(ddof=1)).to_numpy()
    w = np.array([2.0, 0.5, 1.0])
    d = environmental_distance(env, weights={"ph": 2.0, "cu": 0.5})
    np.testing.assert_allclose(d.condensed, pdist(z, "minkowski", p=2, w=w), rtol=1e-12)
    sub = environmental_distance(env, variables=["ph", "depth"])
    np.testing.assert_allclose(sub.condensed, pdist(z[:, [0, 2]]), rtol=1e-12)
    with pytest.raises(InputError, match="'salinity' are not in"):
        environmental_distance(env, variables=["salinity"])
    with pytest.raises(InputError, match="non-negative"):
        environmental_distance(env, weights=[1, -1, 1])


def test_gower_when_categorical_present():
    env = _env()
    env["geology"] = pd.array(["chalk", "clay"] * 6, dtype="string")
    d = environmental_distance(env)
    assert d.metric == "gower"
    assert d == dissimilarity(env, "gower")
    with pytest.raises(InputError, match="'geology' are categorical"):
        environmental_distance(env, method="euclidean")


def test_missing_and_constant_named():
    env = _env()
    env.loc["r3", "cu"] = np.nan
    with pytest.raises(InputError, match=r"site 'r3', column 'cu'.*method='gower'"):
        environmental_distance(env)
    assert environmental_distance(env, method="gower").n == 12
    env = _env().assign(flat=1.0)
    with pytest.raises(InputError, match="'flat' take the same value"):
        environmental_distance(env)


def test_survey_like():
    class Holder:
        environment = _env()

    assert environmental_distance(Holder()) == environmental_distance(Holder.environment)


def test_survey_without_environment_is_named():
    class Holder:
        environment = None

    with pytest.raises(InputError, match=r"This Holder has no `\.environment` table"):
        environmental_distance(Holder())
