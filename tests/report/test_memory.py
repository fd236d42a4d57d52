"""The memory estimate a project check makes before a run, and its refusal."""

from __future__ import annotations

import os

import pytest

from gradients import InputError
from gradients.matrix._memory import mantel_memory, partial_mantel_memory
from gradients.report import _memory, init_project, load_project, run_project
from gradients.report._check import check_project


def test_available_memory_reads_the_kernel_figure():
    # proc(5), the Linux manual: /proc/meminfo's MemAvailable is "an estimate of how much
    # memory is available for starting new applications", in kB
    if not os.path.exists("/proc/meminfo"):
        pytest.skip("not Linux")
    with open("/proc/meminfo", encoding="ascii") as fh:
        kb = next(int(line.split()[1]) for line in fh if line.startswith("MemAvailable:"))
    got = _memory.available_memory()
    assert got is not None and abs(got - kb * 1024) <= 0.2 * kb * 1024  # it moves meanwhile


def test_run_estimate_adds_the_kept_matrices_to_the_largest_step(tmp_path):
    project = load_project(init_project(tmp_path / "p"))
    n = 4000
    est = _memory.run_memory(project.settings, n, n_hypotheses=3)
    m = n * (n - 1) // 2
    # community + 3 hypotheses + geography, float64 condensed (no covariables in the
    # template), and the pairwise results kept until the report is written
    assert est.kept == 5 * 8 * m + _memory.PAIR_RESULTS * m
    assert est.steps["ordination (NMDS)"] == _memory.NMDS_FIXED + _memory.NMDS_PER_PAIR * m
    # the partial Mantel test controls for the two other hypotheses and geography
    assert est.steps["partial_mantel"] == partial_mantel_memory(n, 3, n_resamples=999,
                                                                spatial=True)
    assert est.steps["mantel"] == mantel_memory(n, n_resamples=999, spatial=True)
    assert est.total == _memory.BASELINE + est.kept + max(est.steps.values())
    assert "GiB" in est.describe()


def test_check_refuses_a_run_that_will_not_fit(tmp_path, monkeypatch):
    path = init_project(tmp_path / "p")
    check_project(path)  # the demo fits anywhere
    monkeypatch.setattr(_memory, "available_memory", lambda: 64 * 2**20)
    with pytest.raises(InputError, match="switch off the largest step") as info:
        check_project(path)
    assert "more than the 0.1 GiB this machine has free" in str(info.value)
    # float32 is suggested only where it lowers the estimate (not at 60 sites)
    assert "float32" not in str(info.value)
    with pytest.raises(InputError, match="cluster workers"):
        run_project(path, out=tmp_path / "out")  # refused before any analysis
    assert not (tmp_path / "out" / "run.json").exists()


def test_unknown_available_memory_is_not_checked(tmp_path, monkeypatch):
    path = init_project(tmp_path / "p")
    monkeypatch.setattr(_memory, "available_memory", lambda: None)
    survey, project = check_project(path)
    est = _memory.check_memory(project, survey)
    assert est.total > _memory.BASELINE


def test_float32_precision_key_lowers_the_estimate_and_keeps_the_verdicts(tmp_path):
    """`[permutations] precision = "float32"`: the Mantel tests of a run store their work
    arrays in float32 (bound in docs/scaling.md; tests/matrix/test_float32.py checks it against
    float64), the estimate uses the float32 counts, and on the demo the p-values are the
    float64 ones (no permuted r comes within the bound of the observed one)."""
    import numpy as np
    import pandas as pd

    from gradients.cli import main

    def project(folder, extra):
        path = init_project(folder)
        text = path.read_text(encoding="utf-8").replace(
            "[permutations]\ncount = 999", "[permutations]\ncount = 99" + extra)
        text = text.replace('ordination = "nmds"', 'ordination = "pcoa"')
        text = text.replace("[analyses]\n", "[analyses]\npartition = false\nranking = false\n"
                            "groups = false\n", 1)
        path.write_text(text, encoding="utf-8")
        return path

    p64 = project(tmp_path / "p64", "")
    p32 = project(tmp_path / "p32", '\nprecision = "float32"')
    s64, s32 = load_project(p64).settings, load_project(p32).settings
    assert s32["permutations.precision"] == "float32"
    assert s64["permutations.precision"] == "float64"
    n = 5000
    e64, e32 = (_memory.run_memory(s, n, n_hypotheses=3) for s in (s64, s32))
    assert e32.steps["partial_mantel"] == partial_mantel_memory(
        n, 3, n_resamples=99, spatial=True, dtype=np.float32)
    assert e32.total <= e64.total
    # without the spatial null the simple test's work arrays are a third (48 m -> 16 m bytes)
    flat64, flat32 = ({**s, "design.strata": "reach"} for s in (s64, s32))
    m = n * (n - 1) // 2
    assert _memory.run_memory(flat32, n, n_hypotheses=3).steps["mantel"] < 17 * m
    assert _memory.run_memory(flat64, n, n_hypotheses=3).steps["mantel"] > 48 * m
    for p, out in ((p64, "r64"), (p32, "r32")):
        assert main(["run", str(p), "--out", str(tmp_path / out), "--quiet"]) == 0
    for table in ("mantel", "partial_mantel"):
        a = pd.read_csv(tmp_path / "r64" / "tables" / f"{table}.csv", index_col=0)
        b = pd.read_csv(tmp_path / "r32" / "tables" / f"{table}.csv", index_col=0)
        pd.testing.assert_series_equal(a["pvalue"], b["pvalue"])
        np.testing.assert_allclose(a["statistic"], b["statistic"], rtol=0, atol=1e-6)
    methods = (tmp_path / "r32" / "methods.md").read_text(encoding="utf-8")
    assert "single precision (float32" in methods
    assert "single precision" not in (tmp_path / "r64" / "methods.md").read_text(
        encoding="utf-8")
