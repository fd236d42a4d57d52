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
    # community + 3 hypotheses + geography, float64 condensed (no covariables in the template)
    assert est.kept == 5 * 8 * m
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
    with pytest.raises(InputError, match="float32") as info:
        check_project(path)
    assert "more than the 0.1 GiB this machine has free" in str(info.value)
    with pytest.raises(InputError, match="cluster workers"):
        run_project(path, out=tmp_path / "out")  # refused before any analysis
    assert not (tmp_path / "out" / "run.json").exists()


def test_unknown_available_memory_is_not_checked(tmp_path, monkeypatch):
    path = init_project(tmp_path / "p")
    monkeypatch.setattr(_memory, "available_memory", lambda: None)
    survey, project = check_project(path)
    est = _memory.check_memory(project, survey)
    assert est.total > _memory.BASELINE
