"""Bad input to the partition stage: each a clear InputError naming the problem and the fix."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.partition import dbrda, forward_select, partition_variation, spatial_eigenvectors


def _inputs(n=12, seed=0):
    rng = np.random.default_rng(seed)
    lab = [f"s{i}" for i in range(n)]
    env = pd.DataFrame({"a": rng.normal(size=n), "b": rng.normal(size=n),
                        "c": rng.normal(size=n)}, index=lab)
    d = DistanceMatrix(pdist(rng.normal(size=(n, 3))), lab)
    return d, env, lab


def test_fewer_sites_than_predictors_plus_two():
    d, env, _lab = _inputs(n=5)
    wide = env.assign(e=np.arange(5.0) ** 2)
    with pytest.raises(InputError, match=r"5 sites cannot fit 4 predictor column\(s\) .* at "
                                         r"least 6 sites are needed"):
        dbrda(d, wide)
    with pytest.raises(InputError, match=r"3 predictor column\(s\) and 1 covariable"):
        dbrda(d, env, covariables=env[["a"]].rename(columns={"a": "z"}) ** 2)
    with pytest.raises(InputError, match="Forward selection first fits the global model"):
        forward_select(d, wide)


def test_constant_predictor_is_named():
    d, env, _ = _inputs()
    with pytest.raises(InputError, match=r"`predictors` column\(s\) 'k' have the same value at "
                                         "every site") as err:
        dbrda(d, env.assign(k=3.0))
    assert err.value.columns == ("k",)
    with pytest.raises(InputError, match="'habitat' have the same value"):
        dbrda(d, env.assign(habitat="pool"))


def test_collinear_predictors_are_named_with_the_fix():
    d, env, _ = _inputs()
    bad = env.assign(total=env["a"] + 2 * env["b"])
    with pytest.raises(InputError, match=r"Collinear columns in `predictors`: 'total' is a "
                                         r"linear combination of 'a' and 'b'.*drop one"):
        dbrda(d, bad)
    # a predictor that repeats a covariable: both tables named
    with pytest.raises(InputError, match=r"\(covariables\).*\(predictors\)|\(predictors\).*"
                                         r"\(covariables\)"):
        dbrda(d, env, covariables=(3 * env[["a"]]).rename(columns={"a": "a3"}))
    # a factor whose levels follow another factor's
    habitat = np.where(env["a"] > 0, "pool", "riffle")
    with pytest.raises(InputError, match="Collinear columns"):
        dbrda(d, env.assign(h1=habitat, h2=np.where(habitat == "pool", "deep", "shallow")))
    with pytest.raises(InputError, match="Collinear columns in the tables"):
        partition_variation(d, env[["a", "b"]], env[["c"]].assign(a2=env["a"]),
                            names=["x", "w"], n_resamples=0)


def test_missing_values_labels_and_types():
    d, env, _lab = _inputs()
    gap = env.copy()
    gap.loc["s3", "b"] = np.nan
    with pytest.raises(InputError, match=r"`predictors` has missing values: 'b' at site\(s\) "
                                         "'s3'"):
        dbrda(d, gap)
    with pytest.raises(InputError, match=r"1 site.* in the distance matrix but not in "
                                         "`predictors`: 's0'"):
        dbrda(d, env.iloc[1:])
    with pytest.raises(InputError, match="must be a pandas DataFrame"):
        dbrda(d, env.to_numpy())
    with pytest.raises(InputError, match="infinite at site"):
        dbrda(d, env.assign(a=np.r_[np.inf, env["a"].to_numpy()[1:]]))


def test_argument_checks():
    d, env, _ = _inputs()
    with pytest.raises(InputError, match="`n_resamples` must be a non-negative integer"):
        dbrda(d, env, n_resamples=-1)
    with pytest.raises(InputError, match=r"`n_jobs` must be a positive integer or -1"):
        dbrda(d, env, n_jobs=0)
    with pytest.raises(InputError, match="`correction` must be one of"):
        dbrda(d, env, correction="sqrt")
    with pytest.raises(InputError, match=r"`strata` must give one label per site: 3 labels "
                                         "for 12 sites"):
        dbrda(d, env, strata=[1, 2, 3])
    with pytest.raises(InputError, match="`alpha` must be a number between 0 and 1"):
        forward_select(d, env, alpha=1.5)
    with pytest.raises(InputError, match="`n_resamples` must be a positive integer"):
        forward_select(d, env, n_resamples=0)
    with pytest.raises(InputError, match="two, three or four explanatory tables; got 1"):
        partition_variation(d, env)
    with pytest.raises(InputError, match="two, three or four explanatory tables; got 5"):
        partition_variation(d, *[env[[c]] for c in "abc"], env[["a"]], env[["b"]])
    with pytest.raises(InputError, match=r"`names` must give one name per table \(2\)"):
        partition_variation(d, env[["a"]], env[["b"]], names=["x"])
    with pytest.raises(InputError, match="`names` must be distinct"):
        partition_variation(d, env[["a"]], env[["b"]], names=["x", "x"])


def test_no_locations_for_the_spatial_part():
    # a clear message, not a traceback, when the spatial part has nothing to work with
    with pytest.raises(InputError, match="No site locations were given"):
        spatial_eigenvectors(None)
    with pytest.raises(InputError, match="must be a DistanceMatrix of distances between sites"):
        spatial_eigenvectors(pd.DataFrame({"x": [1.0, 2.0], "y": [0.0, 1.0]}))

    class SurveyWithoutLocations:
        locations = None

    with pytest.raises(InputError, match=r"has no `\.locations`"):
        spatial_eigenvectors(SurveyWithoutLocations())
    lab = ["a", "b", "c"]
    with pytest.raises(InputError, match="Every site is at the same location"):
        spatial_eigenvectors(DistanceMatrix(np.zeros(3), lab))
    with pytest.raises(InputError, match="at least 3 sites"):
        spatial_eigenvectors(DistanceMatrix([1.0], ["a", "b"]))
    with pytest.raises(InputError, match="`threshold` must be a positive distance"):
        spatial_eigenvectors(DistanceMatrix([1.0, 2.0, 1.0], lab), threshold=-1.0)


def test_perfect_fit_is_refused_rather_than_dividing_by_zero():
    rng = np.random.default_rng(1)
    lab = [f"s{i}" for i in range(8)]
    env = pd.DataFrame({"a": rng.normal(size=8), "b": rng.normal(size=8)}, index=lab)
    d = DistanceMatrix(pdist(env.to_numpy()), lab)  # the community is the predictors
    with pytest.raises(InputError, match="leaves no residual variation"):
        dbrda(d, env, n_resamples=9)
