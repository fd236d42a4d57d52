"""A short run of the validation (``python -m validation``, whose full results are in
docs/validation.md): the command works, every family runs, and no test is grossly off its level.

The full run uses 500 null data sets per cell; here each family runs a few dozen at 10 sites,
so only gross miscalibration can show. The rule (theory): under the null the number of
rejections at 0.05 among ``N`` independent data sets is binomial(N, 0.05); pooled over the
kinds of data of one test, the count must stay below the 1 - 0.001 / R quantile of that law,
``R`` the number of tests checked (a Bonferroni bound, so that a correct suite fails this test
with probability below 0.001). A test rejecting a quarter of its true nulls fails it.
"""

from __future__ import annotations

import importlib
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from validation import FAMILIES  # noqa: E402
from validation._common import Budget  # noqa: E402

TINY = Budget(datasets=24, permutations=49, power=4, heavy=3, heavy_permutations=19,
              sizes=(10,), quick=True)
#: Rows whose rate is not a type I error rate, by design (they show what a test is not).
NOT_A_NULL = {("spatial", "plain"), ("spatial", "report's rule"),
              ("regression", "coefficient B", "y depends on A only")}


def _pooled_counts(family: str, table) -> list[tuple[str, int, int]]:
    rows = table[np.isclose(table["alpha"], 0.05)]
    out = []
    for keys, part in rows.groupby(["test", "scenario"], sort=False):
        test, scenario = keys
        if (family, test) in NOT_A_NULL or (family, test, scenario) in NOT_A_NULL:
            continue
        out.append((f"{test} / {scenario}", int(part["rejected"].sum()),
                    int(part["datasets"].sum())))
    return out


@pytest.mark.slow
def test_every_family_runs_and_no_test_is_grossly_off_its_level():
    # (the spatial family has a check of its own below)
    counts, produced = [], {}
    for family in FAMILIES:
        if family == "spatial":
            continue
        tables = importlib.import_module(f"validation.{family}").simulate(TINY, seed=11)
        produced[family] = tables
        if "null" in tables:
            counts += [(family, *c) for c in _pooled_counts(family, tables["null"])]
    limit = 1 - 0.001 / len(counts)
    for family, what, rejected, datasets in counts:
        assert rejected <= stats.binom.ppf(limit, datasets, 0.05), (family, what, rejected,
                                                                    datasets)
    # the decay intervals cover the true slope in most data sets
    cov = produced["decay"]["coverage"]
    assert (cov["coverage"] >= 0.7).all(), cov
    # tables render as Markdown blocks and figures (one family drawn: the code is shared)
    result = importlib.import_module("validation.mantel").render(produced["mantel"])
    assert set(result.figures) == {"mantel_null", "mantel_power"}
    assert all(len(table) for table in produced["partial"].values())


def test_spatial_family_shows_the_inflation_and_the_constrained_null_removes_it():
    # Guillot & Rousset (2013): two independent, autocorrelated fields inflate the plain
    # Mantel test; the spatially constrained null (Moran spectral randomisation) does not.
    # 40 data sets at range 0.6 with 49 permutations: the plain rate must be above the 99 %
    # binomial range of an exact test (scipy.stats.binom), the constrained one inside it.
    from validation import spatial
    from validation._common import cell_rng, collect

    p = collect(40, lambda rng: spatial.one(rng, 0.6, "both autocorrelated", 49),
                cell_rng(5, "test", "spatial"))
    lo, hi = stats.binom.interval(0.99, 40, 0.05)
    assert np.sum(p["plain"] <= 0.05) > hi
    assert lo <= np.sum(p["constrained"] <= 0.05) <= hi


def test_command_writes_tables_figures_and_markdown(tmp_path):
    from validation.__main__ import main

    assert main(["--quick", "--only", "decay", "--out", str(tmp_path)]) == 0
    assert (tmp_path / "decay_coverage.csv").exists()
    text = (tmp_path / "decay.md").read_text()
    assert "<!-- decay:coverage -->" in text and "site effects and pair noise" in text


def test_docs_have_a_marker_for_every_generated_block_and_a_row_for_every_test():
    # docs/validation.md is regenerated between markers; every block a family writes has one,
    # and every permutation test of the suite appears in it.
    doc = (ROOT / "docs" / "validation.md").read_text()
    for family in FAMILIES:
        assert f"<!-- validation:{family}:" in doc, family
    for name in ("vectors", "factors", "surface", "surface curvature", "pearson", "spearman",
                 "kendall", "raw", "residuals", "first class", "any class (family-wise)", "R2",
                 "coefficient A", "model", "first axis", "marginal term", "partial model",
                 "forward selection (global test)", "constrained"):
        assert f"| {name} |" in doc, name
