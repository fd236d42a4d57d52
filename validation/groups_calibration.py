"""Calibration of the group tests on simulated surveys: type I error under a true null.

For each test, data sets in which the null hypothesis holds are analysed and the rejection
rate at alpha = 0.05 must stay inside the 99 % binomial interval of the number of data sets.
Class sizes are unequal throughout. Each test runs on Euclidean distances of multivariate
normal responses and on Bray-Curtis dissimilarities of Poisson counts.

- PERMANOVA, one way, three classes of 5, 8 and 12 sites, nothing planted.
- PERMANOVA, two ways with interaction (unbalanced, sequential sums of squares): both main
  effects planted (for counts, one: multiplicative means interact on the Bray-Curtis scale),
  the interaction null (its residuals permuted, Freedman & Lane 1983).
- PERMANOVA, two ways: the second factor planted, the first null, tested given it
  (marginal sums of squares).
- PERMANOVA, nested: zones null, sites within zones carrying a random effect of their own;
  zones tested against sites by exchanging whole sites (4 zones x 3 sites x 2 samples).
- ANOSIM and MRPP, three unequal classes, nothing planted.
- The dispersion test, three unequal classes with equal spreads (and, for Euclidean
  distances, shifted centroids: a difference in location this test must not see), and three
  classes of 8. For the record, the same small classes tested by rearranging the distances to
  centroids themselves, the scheme the test does not use (the distances of one class share
  its estimated centroid and are correlated).

Run from the repository root (about 10 minutes on two shared cores at the defaults)::

    python validation/groups_calibration.py [--datasets 1000] [--permutations 999]

It prints a Markdown table and writes it to ``validation/results_groups.md``; the numbers are
quoted in ``docs/groups.md``. The unit tests import :func:`null_pvalue` and run a short version.
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

from gradients import DistanceMatrix, anosim, dispersion_test, mrpp, permanova

KINDS = ("one-way", "interaction", "marginal", "nested", "anosim", "mrpp", "dispersion",
         "dispersion-small", "distances-small")
DESCRIPTIONS = {
    "one-way": "PERMANOVA one way, classes of 5, 8, 12, nothing planted",
    "interaction": "PERMANOVA A x B (unbalanced), main effects planted (Bray-Curtis: A only), "
                   "interaction null",
    "marginal": "PERMANOVA A given B (marginal SS), B planted, A null",
    "nested": "PERMANOVA zone against site(zone), site effects random, zones null",
    "anosim": "ANOSIM, classes of 5, 8, 12, nothing planted",
    "mrpp": "MRPP, classes of 5, 8, 12, nothing planted",
    "dispersion": "dispersion test, classes of 5, 8, 12, equal spreads (Euclidean: centroids "
                  "shifted)",
    "dispersion-small": "dispersion test, classes of 8, 8, 8, equal spreads",
    "distances-small": "for the record, not used: the distances to centroids themselves "
                       "rearranged, classes of 8, 8, 8",
}
FAST = {"pairwise": False, "dispersion": False}


def _distances(rng: np.random.Generator, signal: np.ndarray, metric: str) -> np.ndarray:
    """Condensed distances of responses with mean ``signal`` (sites x 4 variables)."""
    if metric == "euclidean":
        return pdist(signal + rng.normal(size=signal.shape))
    counts = rng.poisson(np.exp(1.0 + 0.5 * signal))
    counts[counts.sum(axis=1) == 0, 0] = 1
    return pdist(counts, "braycurtis")


def _one_way(rng: np.random.Generator):
    groups = np.repeat(["a", "b", "c"], [5, 8, 12])
    return groups, np.zeros((groups.size, 4))


def _distances_rearranged(d: DistanceMatrix, groups: np.ndarray, n_resamples: int,
                          seed: int) -> float:
    """p-value of the dispersion F with the distances to centroids themselves permuted."""
    from gradients.distance import gower_centred
    from gradients.groups._dispersion import centroid_distances

    codes = pd.factorize(pd.Series(groups))[0]
    z, _ = centroid_distances(np.asarray(gower_centred(d).matrix), codes)
    rng = np.random.default_rng(seed)
    x = np.eye(codes.max() + 1)[codes]
    sizes = x.sum(axis=0)

    def f(values: np.ndarray) -> np.ndarray:  # one-way F of each row
        fitted = np.sum((values @ x) ** 2 / sizes, axis=1)
        between = fitted - values.sum(axis=1) ** 2 / values.shape[1]
        within = np.sum(values * values, axis=1) - fitted
        return (between / (x.shape[1] - 1)) / (within / (values.shape[1] - x.shape[1]))

    observed = f(z[None, :])[0]
    null = f(np.array([rng.permutation(z) for _ in range(n_resamples)]))
    return float((1 + np.sum(null >= observed - 1e-12)) / (n_resamples + 1))


def null_pvalue(seed: int, kind: str, metric: str, n_resamples: int) -> float:
    """The p-value of one null data set of ``kind``."""
    rng = np.random.default_rng(seed)
    if kind in ("dispersion-small", "distances-small"):
        groups = np.repeat(["a", "b", "c"], 8)
        sites = [f"n{i:02d}" for i in range(24)]
        d = DistanceMatrix(_distances(rng, np.zeros((24, 4)), metric), sites)
        if kind == "distances-small":
            return _distances_rearranged(d, groups, n_resamples, seed)
        return float(dispersion_test(d, groups, n_resamples=n_resamples, rng=seed).pvalue)
    if kind in ("one-way", "anosim", "mrpp", "dispersion"):
        groups, signal = _one_way(rng)
        if kind == "dispersion" and metric == "euclidean":
            # shifted centroids, equal spreads: the null of this test. (Shifted Poisson means
            # would change the spread of the counts too, so Bray-Curtis data keep one mean.)
            signal = signal + 1.5 * (groups == "c")[:, None] * rng.normal(size=4)
        sites = [f"n{i:02d}" for i in range(groups.size)]
        d = DistanceMatrix(_distances(rng, signal, metric), sites)
        if kind == "one-way":
            design = pd.DataFrame({"zone": groups}, index=sites)
            return float(permanova(d, design, n_resamples=n_resamples, rng=seed,
                                   **FAST).pvalue["zone"])
        fn = {"anosim": anosim, "mrpp": mrpp, "dispersion": dispersion_test}[kind]
        return float(fn(d, groups, n_resamples=n_resamples, rng=seed).pvalue)
    if kind in ("interaction", "marginal"):
        # an unbalanced two-way layout: cell sizes 3, 5, 7 (A = p) and 6, 4, 11 (A = q)
        cells = [("p", "u", 3), ("p", "v", 5), ("p", "w", 7),
                 ("q", "u", 6), ("q", "v", 4), ("q", "w", 11)]
        a = np.repeat([c[0] for c in cells], [c[2] for c in cells])
        b = np.repeat([c[1] for c in cells], [c[2] for c in cells])
        n = a.size
        # Euclidean: additive main effects, so no interaction. Counts have multiplicative means
        # (exp of the sum), which is an interaction on the scale of Bray-Curtis; there only one
        # factor is planted, which leaves the other and the interaction exactly null.
        effect_a = 0.0 if kind == "marginal" else 1.0
        effect_b = 1.0 if kind == "marginal" or metric == "euclidean" else 0.0
        signal = (effect_a * (a == "p")[:, None] * rng.normal(size=4)
                  + effect_b * (b == "u")[:, None] * rng.normal(size=4))
        sites = [f"n{i:02d}" for i in range(n)]
        d = DistanceMatrix(_distances(rng, signal, metric), sites)
        design = pd.DataFrame({"A": a, "B": b}, index=sites)
        if kind == "interaction":
            res = permanova(d, design, terms=["A*B"], n_resamples=n_resamples, rng=seed, **FAST)
            return float(res.pvalue["A:B"])
        res = permanova(d, design, terms=["B", "A"], n_resamples=n_resamples, rng=seed,
                        sums_of_squares="marginal", **FAST)
        return float(res.pvalue["A"])
    if kind == "nested":
        zone = np.repeat(["z1", "z2", "z3", "z4"], 6)
        site = np.tile(np.repeat(["1", "2", "3"], 2), 4)
        unit = np.repeat(np.arange(12), 2)
        signal = rng.normal(size=(12, 4))[unit]  # a random effect of each site
        sites = [f"n{i:02d}" for i in range(24)]
        d = DistanceMatrix(_distances(rng, signal, metric), sites)
        design = pd.DataFrame({"zone": zone, "site": site}, index=sites)
        res = permanova(d, design, terms=["zone", "site(zone)"], n_resamples=n_resamples,
                        rng=seed, **FAST)
        return float(res.pvalue["zone"])
    raise ValueError(kind)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", type=int, default=1000)
    parser.add_argument("--permutations", type=int, default=999)
    args = parser.parse_args()
    start = time.perf_counter()
    load = os.getloadavg()[0]
    lo, hi = stats.binom.interval(0.99, args.datasets, 0.05)
    rows = []
    for k, kind in enumerate(KINDS):
        for metric in ("euclidean", "bray-curtis"):
            p = np.array([null_pvalue(100_000 * k + 7 * s + 1, kind, metric, args.permutations)
                          for s in range(args.datasets)])
            rate = float(np.mean(p <= 0.05))
            inside = lo <= np.sum(p <= 0.05) <= hi
            ks = stats.kstest(p, "uniform").pvalue
            rows.append(f"| {DESCRIPTIONS[kind]} | {metric} | {rate:.3f} | "
                        f"{'yes' if inside else 'NO'} | {ks:.2f} |")
            print(rows[-1], flush=True)
    text = "\n".join([
        "# Group tests calibration (`validation/groups_calibration.py`)",
        "",
        f"Machine: {platform.machine()}, {os.cpu_count()} cores shared with other work (1-minute "
        f"load average {load:.1f} at the start), Python {platform.python_version()}, numpy "
        f"{np.__version__}.",
        "",
        f"Type I error at alpha = 0.05, {args.datasets} null data sets per row, "
        f"{args.permutations} permutations each; 99 % binomial interval of the rate: "
        f"{lo / args.datasets:.3f}-{hi / args.datasets:.3f}. The last column is the "
        "Kolmogorov-Smirnov p-value of the p-values against the uniform distribution (discrete "
        "permutation p-values make it conservative).",
        "",
        "| test | distance | rejection rate | inside the interval | KS p |",
        "|---|---|---|---|---|",
        *rows,
        "",
        f"Run time {time.perf_counter() - start:.0f} s; load average at the end "
        f"{os.getloadavg()[0]:.1f}.",
    ]) + "\n"
    print(text)
    Path(__file__).with_name("results_groups.md").write_text(text, encoding="utf-8")


if __name__ == "__main__":
    main()
