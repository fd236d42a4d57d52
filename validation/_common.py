"""Pieces every validation family shares: budgets, seeds, data, rejection rates, tables.

A *cell* is one combination of test, scenario, number of sites and kind of data. Its data sets
come from a seed of their own, ``SeedSequence([seed, crc32(cell name)])``, so a cell gives the
same numbers whether it runs alone (``--only``) or with every other family.
"""

from __future__ import annotations

import zlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

__all__ = [
    "ALPHAS",
    "DATA_KINDS",
    "FULL",
    "QUICK",
    "SIZES",
    "STRENGTHS",
    "Budget",
    "FamilyResult",
    "acceptance_band",
    "cell_rng",
    "draw",
    "labels",
    "mix",
    "power_row",
    "rate_rows",
    "standardised",
]

#: Levels at which rejection rates are recorded.
ALPHAS = (0.01, 0.05)
#: Numbers of sites.
SIZES = (10, 30, 100)
#: Kinds of data: normal; skewed (log-normal, sigma 1: skewness about 6); normal with one outlier
#: (one site shifted by 10 standard deviations in the variable the family names).
DATA_KINDS = ("normal", "skewed", "outlier")
#: Strengths of a planted gradient: the correlation, at the level of the sites (or of the
#: matrices where the family says so), between the variable and the gradient.
STRENGTHS = (0.2, 0.4, 0.6)
#: Shift of the outlying site, in standard deviations.
OUTLIER_SHIFT = 10.0


@dataclass(frozen=True)
class Budget:
    """Replicate counts of one run.

    ``datasets``: null data sets per cell of the cheap tests; ``permutations`` per test;
    ``power``: data sets per cell of the power tables; ``heavy`` and ``heavy_permutations``:
    the same for the expensive tests (surfaces); ``sizes``: numbers of sites.
    """

    datasets: int = 500
    permutations: int = 199
    power: int = 200
    heavy: int = 200
    heavy_permutations: int = 99
    sizes: tuple[int, ...] = SIZES
    quick: bool = False


FULL = Budget()
QUICK = Budget(datasets=60, permutations=99, power=20, heavy=12, heavy_permutations=49,
               sizes=(10, 30), quick=True)


def cell_rng(seed: int, *parts: object) -> np.random.Generator:
    """The generator of one cell: its own stream, whatever else runs."""
    key = zlib.crc32("|".join(str(p) for p in parts).encode())
    return np.random.default_rng(np.random.SeedSequence([int(seed), key]))


def labels(n: int, prefix: str = "s") -> list[str]:
    return [f"{prefix}{i:03d}" for i in range(n)]


def draw(rng: np.random.Generator, kind: str, size: int | tuple[int, ...], *,
         outlier: bool = False) -> np.ndarray:
    """Site values of one kind of data, standardised to mean 0 and sd 1 in the population.

    ``outlier=True`` shifts the first site by :data:`OUTLIER_SHIFT` (in every column) when
    ``kind == 'outlier'``; otherwise an 'outlier' draw is plain normal, so a family chooses
    which of its variables carries the outlier.
    """
    if kind == "normal":
        return rng.normal(size=size)
    if kind == "skewed":
        # log-normal(0, 1): mean e^0.5, variance (e - 1) e
        return (np.exp(rng.normal(size=size)) - np.exp(0.5)) / np.sqrt((np.e - 1) * np.e)
    if kind == "outlier":
        out = rng.normal(size=size)
        if outlier:
            out[0] = out[0] + OUTLIER_SHIFT
        return out
    raise ValueError(f"unknown kind of data {kind!r}")


def standardised(v: np.ndarray) -> np.ndarray:
    v = np.asarray(v, dtype=np.float64)
    return (v - v.mean()) / v.std()


def mix(strength: float, signal: np.ndarray, noise: np.ndarray) -> np.ndarray:
    """``r signal + sqrt(1 - r^2) noise`` of standardised parts: correlation ``r``."""
    return strength * standardised(signal) + np.sqrt(1.0 - strength**2) * standardised(noise)


def clopper_pearson(k: int, n: int, level: float = 0.99) -> tuple[float, float]:
    ci = stats.binomtest(int(k), int(n)).proportion_ci(confidence_level=level, method="exact")
    return float(ci.low), float(ci.high)


def acceptance_band(n: int, alpha: float, level: float = 0.99) -> tuple[float, float]:
    """Central ``level`` range of the rejection rate of ``n`` data sets at a true rate ``alpha``."""
    lo, hi = stats.binom.interval(level, n, alpha)
    return float(lo) / n, float(hi) / n


def rate_rows(pvalues: np.ndarray, **keys: object) -> list[dict[str, object]]:
    """Null rejection rates of one cell at each level of :data:`ALPHAS`.

    ``lower``/``upper``: the 99 % Clopper-Pearson interval of the rate (scipy
    ``binomtest(...).proportion_ci(method='exact')``); ``inside``: the level lies in it.
    """
    p = np.asarray(pvalues, dtype=np.float64)
    p = p[np.isfinite(p)]
    rows = []
    for alpha in ALPHAS:
        k = int(np.sum(p <= alpha + 1e-12))
        lo, hi = clopper_pearson(k, p.size)
        rows.append({**keys, "alpha": alpha, "datasets": int(p.size), "rejected": k,
                     "rate": k / p.size, "lower": lo, "upper": hi,
                     "inside": bool(lo <= alpha <= hi)})
    return rows


def power_row(pvalues: np.ndarray, alpha: float = 0.05, **keys: object) -> dict[str, object]:
    p = np.asarray(pvalues, dtype=np.float64)
    p = p[np.isfinite(p)]
    k = int(np.sum(p <= alpha + 1e-12))
    lo, hi = clopper_pearson(k, p.size)
    return {**keys, "alpha": alpha, "datasets": int(p.size), "rejected": k,
            "rate": k / p.size, "lower": lo, "upper": hi}


@dataclass
class FamilyResult:
    """What a family produced: tidy tables, figures (name -> Figure) and notes in words."""

    name: str
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    figures: dict[str, object] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    #: Markdown blocks written into docs/validation.md beside the generated ``null`` and
    #: ``power`` tables (key -> text).
    blocks: dict[str, str] = field(default_factory=dict)
    seconds: float = 0.0


def collect(n: int, one: Callable[[np.random.Generator], dict[str, float]],
            rng: np.random.Generator) -> dict[str, np.ndarray]:
    """Run ``one`` on ``n`` data sets of a cell; p-values gathered per test name."""
    out: dict[str, list[float]] = {}
    for _ in range(n):
        for name, p in one(rng).items():
            out.setdefault(name, []).append(float(p))
    return {k: np.asarray(v) for k, v in out.items()}


def markdown(table: pd.DataFrame, columns: Sequence[str] | None = None,
             floats: str = "{:.3f}") -> str:
    """A small Markdown table (no dependency on tabulate)."""
    t = table if columns is None else table.loc[:, list(columns)]
    head = "| " + " | ".join(str(c) for c in t.columns) + " |"
    rule = "|" + "|".join("---" for _ in t.columns) + "|"
    lines = [head, rule]
    for _, row in t.iterrows():
        cells = []
        for v in row:
            if isinstance(v, bool | np.bool_):
                cells.append("yes" if v else "**NO**")
            elif isinstance(v, float | np.floating):
                cells.append(floats.format(v) if np.isfinite(v) else "-")
            else:
                cells.append(str(v))
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def _cell(row: pd.Series) -> str:
    text = f"{row['rate']:.3f} ({row['lower']:.3f}-{row['upper']:.3f})"
    if "inside" in row and not bool(row["inside"]):
        text += " **outside**"
    return text


def null_markdown(null: pd.DataFrame, keys: Sequence[str] = ("test", "scenario")) -> str:
    """Null rates, one row per cell: rate (99 % interval) at each level."""
    keys = [k for k in keys if k in null.columns]
    index = [*keys, "n", "data"]
    wide = {}
    for alpha in ALPHAS:
        part = null[np.isclose(null["alpha"], alpha)].set_index(index)
        wide[f"rate at {alpha:g} (99 % interval)"] = part.apply(_cell, axis=1)
    table = pd.DataFrame(wide)
    datasets = null.groupby(index, sort=False)["datasets"].max()
    table.insert(0, "data sets", datasets.astype(int))
    table = table.reset_index()
    order = {k: list(dict.fromkeys(null[k])) for k in index}
    table = table.sort_values(index, key=lambda c: c.map({v: i for i, v in
                                                        enumerate(order[c.name])}))
    return markdown(table)


def power_markdown(power: pd.DataFrame, keys: Sequence[str] = ("test",),
                   column: str = "strength") -> str:
    """Power at 0.05, one row per test and strength, one column per number of sites."""
    keys = [k for k in keys if k in power.columns]
    t = power.assign(cell=power.apply(_cell, axis=1))
    for k in [*keys, column]:
        t[k] = t[k].map(lambda v: f"{v:g}" if isinstance(v, float) else v)
    wide = t.pivot_table(index=[*keys, column], columns="n", values="cell", aggfunc="first",
                         sort=False)
    wide.columns = [f"{c} sites" for c in wide.columns]
    datasets = t.groupby([*keys, column], sort=False)["datasets"].max()
    wide.insert(0, "data sets", datasets.astype(int))
    return markdown(wide.reset_index())
