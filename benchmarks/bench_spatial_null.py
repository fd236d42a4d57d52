"""Speed of the spatially constrained null (Moran spectral randomisation) against plain numpy.

Run: ``python benchmarks/bench_spatial_null.py`` (appends to ``benchmarks/results_spatial_null.md``)

Case: n = 1,000 sites at random locations, ``x`` the Euclidean distance of four variables
(four principal coordinates), ``y`` another distance matrix, 999 surrogates; the Moran
eigenvector maps are built once before the timings (a run shares them between its tests).

- ours, simple and partial: the spatial null of :func:`gradients.mantel` and
  :func:`gradients.partial_mantel` (three controls) as the tests run it (``_spatial_null``
  with the Pearson form: one matrix product per batch for the coordinates, one compiled pass
  over the pairs for the sums; kernel threads by the engine's size rule), best of 3.
- plain numpy: per surrogate, the coordinates ``U diag(s) U' X_c + mean``, ``pdist``, then
  ``np.corrcoef`` with ``y`` (simple) or least-squares residuals on the controls by a
  precomputed orthonormal basis (partial). Timed on 100 surrogates (best of 3) and scaled to
  999 (each surrogate costs the same).

numpy's BLAS is held to one thread (``OPENBLAS_NUM_THREADS=1`` unless set), as the engine
holds it during batches.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import platform
import sys
import time
from pathlib import Path

import numpy as np
from scipy.spatial.distance import pdist

from gradients.matrix._spatial import MoranSurrogates, mem_basis, spatial_weights
from gradients.matrix._spatial_check import PearsonForm, _spatial_null

HERE = Path(__file__).resolve().parent
N_SITES = 1000
N_SURROGATES = 999
SUBSET = 100
REPEATS = 3


def _best(fn) -> float:  # type: ignore[no-untyped-def]
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    load0 = os.getloadavg()[0]
    rng = np.random.default_rng(2026)
    n = N_SITES
    xy = rng.uniform(size=(n, 2))
    geo = pdist(xy)
    env = np.column_stack([xy[:, 0] + rng.normal(scale=0.5, size=n), rng.normal(size=(n, 3))])
    x = pdist(env)
    y = pdist(np.column_stack([env[:, 0] + rng.normal(scale=0.5, size=n),
                               rng.normal(size=n)]))
    controls = np.column_stack([pdist(rng.normal(size=(n, 2))) for _ in range(3)])
    w = spatial_weights(geo)
    mem_basis(w)  # built once, as in a run

    ys = (y - y.mean()) / np.linalg.norm(y - y.mean())
    zc = controls - controls.mean(axis=0)
    q, _ = np.linalg.qr(zc)
    yc = y - y.mean()
    e_y = yc - q @ (q.T @ yc)
    forms = {"simple": PearsonForm(ys[None, :]),
             "partial": PearsonForm(np.vstack([e_y, q.T]), float(np.linalg.norm(e_y)))}

    def simple_stat(d: np.ndarray) -> float:
        return float(np.corrcoef(d, y)[0, 1])

    def partial_stat(d: np.ndarray) -> float:
        dc = d - d.mean()
        e = dc - q @ (q.T @ dc)
        return float(e @ e_y / (np.linalg.norm(e) * np.linalg.norm(e_y)))

    plain = {"simple": simple_stat, "partial": partial_stat}
    # the same coordinates the tests use (principal coordinates of x)
    from gradients.matrix._spatial import principal_coordinates

    coords, _ = principal_coordinates(x)
    msr = MoranSurrogates.from_coordinates(coords, w)
    signs = msr.draw(np.random.default_rng(1), SUBSET)

    rows = []
    for name in ("simple", "partial"):
        form = forms[name]
        _spatial_null(x, plain[name], geo, n, n_surrogates=19, alternative="greater",
                      gen=np.random.default_rng(0), n_jobs=-1, form=form)  # warm-up
        ours = _best(lambda form=form, name=name: _spatial_null(
            x, plain[name], geo, n, n_surrogates=N_SURROGATES, alternative="greater",
            gen=np.random.default_rng(1), n_jobs=-1, form=form))

        def baseline(name: str = name) -> None:
            for s in signs:
                plain[name](pdist(msr.coordinates(s)))

        base = _best(baseline) * N_SURROGATES / SUBSET
        rows.append((name, ours, base))
    load1 = os.getloadavg()[0]
    lines = [f"\n### Spatial null, n = {n}, {N_SURROGATES} surrogates, four coordinates\n",
             f"{time.strftime('%Y-%m-%d %H:%M')}; {platform.machine()}, {os.cpu_count()} cores; "
             f"1-minute load average {load0:.1f} before, {load1:.1f} after.\n",
             "| statistic | ours (s) | plain numpy (s) | ratio |", "|---|---:|---:|---:|"]
    lines += [f"| {name} | {ours:.2f} | {base:.2f} | {base / ours:.1f}x |"
              for name, ours, base in rows]
    text = "\n".join(lines) + "\n"
    print(text)
    if "--no-write" not in sys.argv:
        with open(HERE / "results_spatial_null.md", "a", encoding="utf-8") as fh:
            fh.write(text)


if __name__ == "__main__":
    main()
