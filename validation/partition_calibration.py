"""Calibration of the partition stage on simulated surveys.

Two questions, each on data sets whose truth is known:

1. Type I error. Under a true null the rejection rate at alpha = 0.05 must stay inside the
   99 % binomial interval of the number of data sets. Three tests: the model test with nothing
   planted; the marginal test of a term that has no effect beside one that has (residuals of
   the reduced model permuted); the partial test of predictors that have no effect given a
   covariable that has. Each with Euclidean distances of multivariate normal responses and
   with Bray-Curtis dissimilarities of Poisson counts.
2. Planted truth. A community driven only by a smooth spatial process, or only by an
   environment without spatial structure, analysed as the report will: spatial eigenvectors
   of the sites, forward selection, then variation partitioning of the environment (all its
   variables) against the selected eigenvectors.

Run from the repository root (about 15 minutes on two shared cores at the defaults)::

    python validation/partition_calibration.py [--datasets 1000] [--replicates 200]

It prints Markdown tables and writes them to ``validation/results_partition.md``; the numbers
are quoted in ``docs/partition.md``. The unit tests import the simulators below and run a
short version.
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import stats
from scipy.spatial.distance import pdist

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from gradients.distance import DistanceMatrix
from gradients.partition import (
    dbrda,
    forward_select,
    partition_variation,
    spatial_eigenvectors,
)

NULL_KINDS = ("model", "marginal", "partial")


def null_dataset(rng: np.random.Generator, kind: str, metric: str, n: int = 30):
    """One data set under a true null, and how to read the p-value under test.

    Returns ``(d, predictors, covariables, (test, effect))``: the row of ``dbrda().table`` whose
    p-value is the null test.
    """
    lab = [f"n{i:02d}" for i in range(n)]
    driver = rng.normal(size=n)
    other = 0.5 * driver + np.sqrt(0.75) * rng.normal(size=n)  # correlated with the driver
    if kind == "model":
        signal = np.zeros(n)
        predictors = pd.DataFrame({"x": rng.normal(size=n), "f": rng.choice(list("abc"), n)},
                                  index=lab)
        covariables, row = None, ("model", "all predictors")
    elif kind == "marginal":
        signal = driver
        predictors = pd.DataFrame({"driver": driver, "idle": other}, index=lab)
        covariables, row = None, ("term", "idle")
    elif kind == "partial":
        signal = driver
        predictors = pd.DataFrame({"idle": other, "noise": rng.normal(size=n)}, index=lab)
        covariables, row = pd.DataFrame({"driver": driver}, index=lab), ("model",
                                                                         "all predictors")
    else:  # pragma: no cover
        raise ValueError(kind)
    k = 6
    effects = rng.normal(size=k)
    if metric == "euclidean":
        y = np.outer(signal, effects) + rng.normal(size=(n, k))
        d = DistanceMatrix(pdist(y), lab)
    else:
        rate = np.exp(1.0 + 0.8 * np.outer(signal, effects) + 0.5 * rng.normal(size=(n, k)))
        counts = rng.poisson(rate)
        counts[counts.sum(axis=1) == 0, 0] = 1
        d = DistanceMatrix(pdist(counts, "braycurtis"), lab, metric="bray-curtis")
    return d, predictors, covariables, row


def null_pvalue(seed: int, kind: str, metric: str, n_resamples: int, n: int = 30) -> float:
    rng = np.random.default_rng(seed)
    d, x, z, (test, effect) = null_dataset(rng, kind, metric, n)
    res = dbrda(d, x, covariables=z, n_resamples=n_resamples, rng=rng)
    table = res.table
    return float(table[(table["test"] == test) & (table["effect"] == effect)]["pvalue"].iloc[0])


def planted_dataset(rng: np.random.Generator, driver: str, n: int = 100):
    """Sites in a 100 x 100 km square, three environmental variables without spatial
    structure, and 15 taxa whose counts follow either a smooth spatial process (three waves
    of 40-100 km wavelength) or the environment only. Returns Hellinger-Euclidean community
    distances, the environment table and the distances between sites (km)."""
    lab = [f"s{i:03d}" for i in range(n)]
    xy = rng.uniform(0, 100, size=(n, 2))
    env = pd.DataFrame(rng.normal(size=(n, 3)), index=lab, columns=["temp", "ph", "depth"])
    if driver == "space":
        waves = []
        for _ in range(3):
            angle = rng.uniform(0, np.pi)
            length = rng.uniform(40, 100)
            phase = rng.uniform(0, 2 * np.pi)
            direction = np.array([np.cos(angle), np.sin(angle)])
            waves.append(np.sin(2 * np.pi * (xy @ direction) / length + phase))
        signal = np.column_stack(waves)
    else:
        signal = env.to_numpy()
    beta = rng.normal(scale=0.6, size=(signal.shape[1], 15))
    counts = rng.poisson(np.exp(1.5 + signal @ beta))
    counts[counts.sum(axis=1) == 0, 0] = 1
    hellinger = np.sqrt(counts / counts.sum(axis=1, keepdims=True))
    return (DistanceMatrix(pdist(hellinger), lab, metric="euclidean", transform="hellinger"),
            env, DistanceMatrix(pdist(xy), lab, metric="euclidean"))


def planted_run(seed: int, driver: str, n_resamples: int, n: int = 100,
                broadest: int | None = None) -> dict[str, float]:
    """The report's pipeline on one planted data set: fractions and their p-values.

    Space is the forward-selected spatial eigenvectors, or with ``broadest=k`` the ``k``
    broadest ones without selection (so that a space fraction is estimated even where the
    selection would find nothing).
    """
    rng = np.random.default_rng(seed)
    d, env, geo = planted_dataset(rng, driver, n)
    sev = spatial_eigenvectors(geo)
    if broadest is not None:
        chosen = tuple(sev.vectors.columns[:broadest])
    else:
        chosen = forward_select(d, sev.vectors, n_resamples=n_resamples, rng=rng).selected
    out = {"selected": float(len(chosen))}
    if not chosen:  # no spatial structure found: nothing to partition against
        whole = dbrda(d, env, n_resamples=n_resamples, rng=rng)
        out.update(env_only=whole.r2_adjusted, space_only=0.0, shared=0.0,
                   p_env=whole.pvalue, p_space=np.nan)
        return out
    vp = partition_variation(d, env, sev.vectors[list(chosen)], names=["environment", "space"],
                             n_resamples=n_resamples, rng=rng)
    t = vp.table.set_index("fraction")
    out.update(env_only=vp.fraction("environment"), space_only=vp.fraction("space"),
               shared=vp.fraction("environment", "space"),
               p_env=float(t.loc["environment only", "pvalue"]),
               p_space=float(t.loc["space only", "pvalue"]))
    return out


def _type_one(datasets: int, n_resamples: int) -> list[str]:
    lo, hi = stats.binom.interval(0.99, datasets, 0.05)
    lines = [f"Type I error at alpha = 0.05, {datasets} null data sets of 30 sites, "
             f"{n_resamples} permutations each; 99 % binomial interval of the rate: "
             f"{lo / datasets:.3f}-{hi / datasets:.3f}.", "",
             "| test | distance | rejection rate | inside the interval |", "|---|---|---|---|"]
    what = {"model": "model, nothing planted", "marginal": "marginal term without effect",
            "partial": "partial model given an effective covariable"}
    for kind in NULL_KINDS:
        for metric in ("euclidean", "bray-curtis"):
            p = np.array([null_pvalue(10_000 * (NULL_KINDS.index(kind) + 1) + s, kind, metric,
                                      n_resamples) for s in range(datasets)])
            rejected = int(np.sum(p <= 0.05))
            ok = lo <= rejected <= hi
            lines.append(f"| {what[kind]} | {metric} | {rejected / datasets:.3f} | "
                         f"{'yes' if ok else 'NO'} |")
    return lines


def _planted(replicates: int, n_resamples: int) -> list[str]:
    lines = [f"Planted truth: {replicates} simulated surveys of 100 sites per driver, "
             f"{n_resamples} permutations per test; mean (5 %-95 % range) of the adjusted "
             "fractions and the share of surveys in which each pure fraction was significant "
             "at 0.05. Space: the forward-selected spatial eigenvectors (a survey where none "
             "is selected counts a space fraction of 0), or the 10 broadest without "
             "selection.", "",
             "| community driven by | space | environment only | space only | shared | "
             "environment only significant | space only significant | spatial vectors "
             "(mean) |", "|---|---|---|---|---|---|---|---|"]
    for driver, broadest in (("space", None), ("space", 10), ("environment", None),
                             ("environment", 10)):
        runs = pd.DataFrame([planted_run(500 + s, driver, n_resamples, broadest=broadest)
                             for s in range(replicates)])

        def cell(col: str, runs: pd.DataFrame = runs) -> str:
            v = runs[col]
            return f"{v.mean():.3f} ({v.quantile(0.05):.3f} to {v.quantile(0.95):.3f})"

        sig_env = float(np.mean(runs["p_env"] <= 0.05))
        sig_space = float(np.mean(runs["p_space"].fillna(1.0) <= 0.05))
        how = "selected" if broadest is None else f"{broadest} broadest"
        lines.append(f"| {driver} | {how} | {cell('env_only')} | {cell('space_only')} | "
                     f"{cell('shared')} | {sig_env:.3f} | {sig_space:.3f} | "
                     f"{runs['selected'].mean():.1f} |")
    return lines


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", type=int, default=1000)
    parser.add_argument("--permutations", type=int, default=999)
    parser.add_argument("--replicates", type=int, default=200)
    args = parser.parse_args(argv)
    start = time.perf_counter()
    load = os.getloadavg()[0]
    lines = [f"Machine: {platform.machine()}, {os.cpu_count()} cores shared with other work "
             f"(1-minute load average {load:.1f} at the start), Python "
             f"{platform.python_version()}, numpy {np.__version__}.", ""]
    lines += [*_type_one(args.datasets, args.permutations), ""]
    lines += [*_planted(args.replicates, args.permutations), ""]
    lines.append(f"Run time {time.perf_counter() - start:.0f} s; load average at the end "
                 f"{os.getloadavg()[0]:.1f}.")
    text = "\n".join(lines) + "\n"
    print(text)
    out = Path(__file__).with_name("results_partition.md")
    out.write_text("# Partition stage calibration (`validation/partition_calibration.py`)\n\n"
                   + text, encoding="utf-8")


if __name__ == "__main__":
    main()
