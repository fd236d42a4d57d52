"""Interrupted and failing runs leave nothing behind: SIGTERM is handled like Ctrl-C, a partial
folder left by a run killed outright is removed by the next run into the same place, and an
output folder that cannot be written is refused before the analyses start."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest

import gradients.report._run as run_module
from gradients.cli import EXIT_TERMINATED, main
from gradients.report import init_project
from gradients.report._model import Outcome, Section
from gradients.report._writers import OutputFolder, remove_stale


def _tiny_outcome(*args: object, **kwargs: object) -> Outcome:
    """A finished run of one table (the analyses themselves are tested elsewhere)."""
    table = pd.DataFrame({"value": [1.0, 2.0]}, index=pd.Index(["a", "b"], name="site"))
    return Outcome(title="t", sections=[Section("mantel", "M", tables={"mantel": table})],
                   methods="m", run_info={"timings": {}, "parameters": {}, "software": {}})


@pytest.fixture
def project(tmp_path: Path) -> Path:
    return init_project(tmp_path / "p")


def _entries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def test_sigterm_while_writing_removes_the_partial_folder(project: Path,
                                                          monkeypatch: pytest.MonkeyPatch,
                                                          capsys: pytest.CaptureFixture[str]
                                                          ) -> None:
    monkeypatch.setattr(run_module, "analyse", _tiny_outcome)

    def killed(*args: object, **kwargs: object) -> None:
        os.kill(os.getpid(), signal.SIGTERM)  # the signal a scheduler or `kill` sends
        time.sleep(5)  # the handler interrupts this

    monkeypatch.setattr(run_module, "write_workbook", killed)
    out = project.parent / "report"
    before = _entries(project.parent)
    assert main(["run", str(project), "--out", str(out)]) == EXIT_TERMINATED == 143
    err = capsys.readouterr().err
    assert err == "gradients: stopped by SIGTERM; no report folder was written.\n"
    assert _entries(project.parent) == before  # no report, no .report.partial-* folder
    assert signal.getsignal(signal.SIGTERM) is not main  # the handler is put back


def test_sigterm_during_a_real_run_exits_143_with_one_line(tmp_path: Path) -> None:
    project = init_project(tmp_path / "p")
    env = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[2])}
    proc = subprocess.Popen([sys.executable, "-m", "gradients.cli", "run", str(project)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env,
                            text=True)
    time.sleep(8)  # into the analyses (the imports take a few seconds)
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 143, (out, err)
    assert err.strip().splitlines()[-1] == ("gradients: stopped by SIGTERM; no report folder "
                                            "was written.")
    assert "Traceback" not in err
    assert _entries(project.parent) == ["data", "project.toml"]


def test_a_partial_folder_of_a_killed_run_is_removed_by_the_next(
        project: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    # a run killed outright (SIGKILL) leaves its partial folder; its process no longer exists
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    stale = project.parent / f".report.partial-{dead.pid}-x1y2"
    (stale / "tables").mkdir(parents=True)
    (stale / "tables" / "half.csv").write_text("a,b\n", encoding="utf-8")
    # a run still going (here: process 1, which always exists) is left alone
    alive = project.parent / ".report.partial-1-z9"
    alive.mkdir()
    monkeypatch.setattr(run_module, "analyse", _tiny_outcome)
    assert main(["run", str(project)]) == 0
    capsys.readouterr()
    assert not stale.exists() and alive.exists()
    assert (project.parent / "report" / "tables" / "mantel.csv").is_file()


def test_remove_stale_only_touches_partial_folders_of_that_target(tmp_path: Path) -> None:
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    mine = tmp_path / f".report.partial-{dead.pid}-a"
    other = tmp_path / f".other.partial-{dead.pid}-a"
    mine.mkdir()
    other.mkdir()
    assert remove_stale(tmp_path / "report") == [mine]
    assert other.exists()


@pytest.mark.skipif(not os.path.isdir("/sys/kernel"), reason="needs a read-only /sys")
def test_an_unwritable_output_folder_is_refused_before_the_analyses(
        project: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    def never(*args: object, **kwargs: object) -> None:
        raise AssertionError("the analyses started")

    monkeypatch.setattr(run_module, "prepare_run", never)
    target = "/sys/gradients-report"  # refused to every user, root included
    for argv in (["run", str(project), "--out", target], ["demo", "--out", target]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "/sys/gradients-report" in err and "permission problem" in err, err
        assert "bug in gradients" not in err


def test_a_permission_error_elsewhere_names_the_path(project: Path,
                                                     monkeypatch: pytest.MonkeyPatch,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    def denied(*args: object, **kwargs: object) -> None:
        raise PermissionError(13, "Permission denied", "/data/locked.csv")

    monkeypatch.setattr(run_module, "prepare_run", denied)
    assert main(["run", str(project)]) == 2
    err = capsys.readouterr().err
    assert "'/data/locked.csv': Permission denied" in err and "not a bug" in err


def test_output_folder_probe_leaves_nothing(tmp_path: Path) -> None:
    OutputFolder(tmp_path / "deep" / "report")
    assert _entries(tmp_path) == []
