"""The project file's ``[permutations] cores`` and ``cluster``: the tables never depend on them.

A project run on every core, on one core and on a Dask cluster (a two-process
``dask.distributed.LocalCluster``) writes byte-identical tables: each permutation batch is drawn
from its own ``SeedSequence`` child whatever evaluates it. The size rule is set to spread every
run after its first batch and batches are made small, so that these short runs do use the
other cores and the cluster's workers.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from gradients.cli import main
from gradients.permutation import _plan, _workers
from gradients.report import init_project, load_project

distributed = pytest.importorskip("distributed")  # the test extra installs it: never skipped


@pytest.fixture(scope="module")
def cluster_address():
    cluster = distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                       dashboard_address=None)
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


@pytest.fixture
def spread_early(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(_workers, "SERIAL_SECONDS", 0.0)
    monkeypatch.setattr(_plan, "DEFAULT_BATCH", 16)
    for module in ("gradients.partition._ftest", "gradients.groups._classes",
                   "gradients.groups._permanova"):
        monkeypatch.setattr(f"{module}.BATCH_SIZE", 16)


def _project(folder: Path, extra: str) -> Path:
    """The template project (the demo data) with few permutations and NMDS starts."""
    project = init_project(folder)
    text = project.read_text(encoding="utf-8")
    text = re.sub(r"\[permutations\]\ncount = 999", "[permutations]\ncount = 29\n" + extra, text)
    text = text.replace("dimensions = 2", "dimensions = 2\nstarts = 2")
    text += "\n[ranking]\npermutations = 19\nturnover_permutations = 9\n"
    project.write_text(text, encoding="utf-8")
    return project


def _tables(report: Path) -> dict[str, bytes]:
    files = sorted((report / "tables").glob("*.csv"))
    assert len(files) > 10  # the whole report ran
    return {f.name: f.read_bytes() for f in files}


def _run(project: Path, out: Path) -> Path:
    assert main(["run", str(project), "--out", str(out), "--quiet"]) == 0
    return out


def test_all_cores_one_core_and_a_cluster_write_the_same_tables(
        tmp_path: Path, cluster_address: str, spread_early: None) -> None:
    one = _run(_project(tmp_path / "p1", "cores = 1"), tmp_path / "r1")
    every = _run(_project(tmp_path / "pa", 'cores = "all"'), tmp_path / "ra")
    remote = _run(_project(tmp_path / "pc", f'cluster = "{cluster_address}"'), tmp_path / "rc")
    reference = _tables(one)
    assert _tables(every) == reference
    assert _tables(remote) == reference
    # run.json says where the permutations were computed
    info = [json.loads((r / "run.json").read_text(encoding="utf-8"))["compute"]
            for r in (one, every, remote)]
    assert info[0]["setting"] == 1 and info[0]["available"] == 1 and info[0]["cluster"] is None
    assert info[1]["setting"] == "all" and info[1]["available"] >= 1
    assert info[2]["cluster"] == cluster_address and info[2]["cluster_threads"] == 2


def test_an_unreachable_cluster_stops_the_run_naming_the_key(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    import gradients.report._compute as compute

    monkeypatch.setattr(compute, "CLUSTER_TIMEOUT", 1.0)
    project = _project(tmp_path / "p", 'cluster = "tcp://127.0.0.1:9"')  # port 9: discard
    assert main(["run", str(project), "--out", str(tmp_path / "r"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "`[permutations] cluster` = 'tcp://127.0.0.1:9'" in err and "dask scheduler" in err
    assert not (tmp_path / "r").exists()


@pytest.mark.parametrize(("value", "ok"), [("\"all\"", True), ("3", True), ("0", False),
                                           ("\"many\"", False), ("true", False)])
def test_cores_is_all_or_a_positive_number(tmp_path: Path, value: str, ok: bool) -> None:
    project = _project(tmp_path / "p", f"cores = {value}")
    if ok:
        assert load_project(project)["permutations.cores"] == json.loads(value)
    else:
        with pytest.raises(Exception, match=r"\[permutations\] cores|permutations.cores"):
            load_project(project)


def test_quiet_installs_no_progress_reporter(tmp_path: Path,
                                             monkeypatch: pytest.MonkeyPatch) -> None:
    import gradients.report
    from gradients.permutation import current_reporter

    seen = []

    def fake(project: object, **kwargs: object) -> Path:
        seen.append(current_reporter())
        (tmp_path / "r").mkdir(exist_ok=True)
        return tmp_path / "r"

    monkeypatch.setattr(gradients.report, "run_project", fake)
    project = _project(tmp_path / "p", "")
    assert main(["run", str(project), "--quiet"]) == 0
    assert main(["run", str(project)]) == 0
    assert seen[0] is None and seen[1] is not None


def test_every_permutation_test_of_a_run_follows_the_cores_setting(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """No step of the report pins its tests to one worker: each reaches the engine asking for
    ``-1`` (the size rule within ``[permutations] cores``). A step that passed ``n_jobs=1``
    would still write the same tables (the test above) but leave the other cores idle."""
    from gradients.permutation import _engine

    asked: list[int | None] = []
    real = _engine.resolve_request

    def spy(n_jobs: int | None) -> int:
        asked.append(n_jobs)
        return real(n_jobs)

    monkeypatch.setattr(_engine, "resolve_request", spy)
    _run(_project(tmp_path / "p", 'cores = "all"'), tmp_path / "r")
    assert len(asked) > 20  # every section's tests went through the engine
    assert set(asked) == {-1}, sorted(set(asked), key=str)
