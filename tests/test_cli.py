"""The command line, called in-process: exit codes, messages on stderr, no tracebacks."""

from __future__ import annotations

from pathlib import Path

import pytest

import gradients
from gradients.cli import main


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"gradients {gradients.__version__}"


def test_no_command_prints_help_and_fails(capsys: pytest.CaptureFixture[str]) -> None:
    assert main([]) == 2
    assert "demo" in capsys.readouterr().err


def test_usage_error_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["demo"]) == 2  # --out is required
    assert "--out" in capsys.readouterr().err


def test_init_then_check(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["init", str(tmp_path / "p")]) == 0
    capsys.readouterr()
    assert main(["check", str(tmp_path / "p" / "project.toml")]) == 0
    out = capsys.readouterr().out
    for line in ("sites:      60", "taxa:       40", "censored:   6 cells", "contamination",
                 "texture", "Permutations: 999"):
        assert line in out, line
    assert main(["init", str(tmp_path / "p")]) == 2
    assert "not an empty folder" in capsys.readouterr().err


def test_check_tables_without_project(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from gradients.data._demo import DEMO_DIR

    argv = ["check", "--community", str(DEMO_DIR / "community.csv"),
            "--environment", str(DEMO_DIR / "environment.csv"),
            "--locations", str(DEMO_DIR / "locations.gpkg"), "--below-detection", "ros"]
    assert main(argv) == 0
    out = capsys.readouterr().out
    assert "sites:      60" in out and "locations:  yes" in out
    assert main(["check", "--community", str(DEMO_DIR / "community.csv")]) == 2
    assert "at least --community and --environment" in capsys.readouterr().err


def test_input_error_is_one_line_on_stderr(tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    p = tmp_path / "project.toml"
    p.write_text('[inputs]\ncommunity = "c.csv"\nenvironment = "e.csv"\n[analyses]\nmantle = 1\n',
                 encoding="utf-8")
    (tmp_path / "c.csv").write_text("site,a\ns1,1\n", encoding="utf-8")
    (tmp_path / "e.csv").write_text("site,x\ns1,1\n", encoding="utf-8")
    assert main(["check", str(p)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert "Did you mean 'mantel'?" in captured.err
    assert "Traceback" not in captured.err and len(captured.err.strip().splitlines()) == 1
    assert main(["run", str(tmp_path / "missing.toml")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_bad_data_is_an_input_error(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "c.csv").write_text("site,a,b\ns1,1,x\ns2,3,1\n", encoding="utf-8")
    (tmp_path / "e.csv").write_text("site,x\ns1,1\ns2,2\n", encoding="utf-8")
    assert main(["check", "--community", str(tmp_path / "c.csv"),
                 "--environment", str(tmp_path / "e.csv")]) == 2
    err = capsys.readouterr().err
    assert "c.csv" in err and "Traceback" not in err


def test_existing_output_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "keep.txt").write_text("x")
    assert main(["demo", "--out", str(tmp_path / "out")]) == 2
    assert "already exists" in capsys.readouterr().err
    assert main(["demo", "--out", str(tmp_path / "out"), "--force"]) == 2
    assert "not a gradients report" in capsys.readouterr().err
    assert (tmp_path / "out" / "keep.txt").read_text() == "x"
    assert main(["demo", "--out", str(tmp_path / "o2"), "--permutations", "0"]) == 2
    assert "--permutations must be a positive" in capsys.readouterr().err


def test_unexpected_error_exits_1_with_a_hint(monkeypatch: pytest.MonkeyPatch, tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    import gradients.report

    def boom(*args: object, **kwargs: object) -> None:
        raise RuntimeError("kaput")

    monkeypatch.setattr(gradients.report, "run_demo", boom)
    assert main(["demo", "--out", str(tmp_path / "x")]) == 1
    err = capsys.readouterr().err
    assert "unexpected error: RuntimeError: kaput" in err and "bug in gradients" in err
    assert "Traceback" not in err


def test_demo_end_to_end_is_quiet_off_a_terminal(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture[str],
                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    import gradients.report

    calls = {}

    def fake(out: str, **kwargs: object) -> Path:
        from gradients.permutation import current_reporter

        calls.update(kwargs, reporter=current_reporter())
        Path(out).mkdir()
        return Path(out)

    monkeypatch.setattr(gradients.report, "run_demo", fake)
    assert main(["demo", "--out", str(tmp_path / "d"), "--permutations", "9", "--seed",
                 "4"]) == 0
    assert calls["n_resamples"] == 9 and calls["rng"] == 4 and calls["force"] is False
    # a reporter is installed, and it stays silent because stderr is not a terminal
    assert calls["reporter"] is not None and calls["reporter"].enabled is False
    captured = capsys.readouterr()
    assert captured.err == "" and "report.html" in captured.out


def test_unknown_hypothesis_variable_is_named(tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["init", str(tmp_path / "p")]) == 0
    project = tmp_path / "p" / "project.toml"
    text = project.read_text(encoding="utf-8").replace('texture = ["sand", "silt", "clay"]',
                                                       'texture = ["sand", "slit", "clay"]')
    project.write_text(text, encoding="utf-8")
    capsys.readouterr()
    for command in ("check", "run"):
        assert main([command, str(project)]) == 2
        err = capsys.readouterr().err
        assert "`hypotheses.texture` names 'slit'" in err, err
    assert not (tmp_path / "p" / "report").exists()
