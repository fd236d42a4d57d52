"""``gradients check`` is the pre-flight of ``gradients run``: what the check finds, and the one
rule for compositions (refused naming the samples, or renormalised on request and recorded)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from gradients import InputError
from gradients.cli import main
from gradients.report import init_project, load_project
from gradients.report._check import check
from gradients.report._pipeline import PreflightError
from gradients.report._run import prepare_run


@pytest.fixture
def template(tmp_path: Path) -> Path:
    return init_project(tmp_path / "p")


def _edit_text(project: Path, old: str, new: str) -> None:
    text = project.read_text(encoding="utf-8")
    assert old in text
    project.write_text(text.replace(old, new), encoding="utf-8")


def _edit_environment(project: Path, edit) -> pd.DataFrame:
    path = project.parent / "data" / "environment.csv"
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    edit(frame)
    frame.to_csv(path, index=False, lineterminator="\n")
    return frame


def test_the_template_passes_and_lists_nothing_left_out(template: Path,
                                                        capsys: pytest.CaptureFixture[str]
                                                        ) -> None:
    assert main(["check", str(template)]) == 0
    out = capsys.readouterr().out
    assert out.startswith("Inputs are valid.")
    assert "Analyses not run" not in out and "Warnings" not in out


def test_analyses_left_out_for_a_reason_of_the_data_are_listed(
        template: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # without locations the spatial analyses cannot run: listed with the reason, not an error
    _edit_text(template, 'locations = "data/locations.gpkg"', "")
    _edit_text(template, '[geography]\nmethod = "network"', "[geography]\nmethod = \"auto\"")
    _edit_text(template, 'network = "data/streams.gpkg"', "")
    _edit_text(template, 'contiguous = "space"', 'contiguous = "none"')
    assert main(["check", str(template)]) == 0
    out = capsys.readouterr().out
    block = out.split("Analyses not run (a reason of the data):\n")[1]
    for name in ("correlogram", "distance_decay", "partition"):
        assert f"  - {name}: no site locations were given" in block


def test_an_analysis_switched_on_by_the_project_must_run(template: Path,
                                                         capsys: pytest.CaptureFixture[str]
                                                         ) -> None:
    _edit_text(template, 'locations = "data/locations.gpkg"', "")
    _edit_text(template, '[geography]\nmethod = "network"', "[geography]\nmethod = \"auto\"")
    _edit_text(template, 'network = "data/streams.gpkg"', "")
    _edit_text(template, 'contiguous = "space"', 'contiguous = "none"')
    _edit_text(template, "dimensions = 2\n", "dimensions = 2\ncorrelogram = true\n")
    for command in ("check", "run"):
        assert main([command, str(template)]) == 2
        err = capsys.readouterr().err
        assert "no site locations were given" in err
        assert "`analyses.correlogram` is switched on in the project file" in err
    assert not (template.parent / "report").exists()


def test_every_error_is_listed_at_once(template: Path) -> None:
    _edit_text(template, 'surfaces = ["Cu", "sand"]', 'surfaces = ["Cu", "habitat"]')
    _edit_text(template, "[analyses]", '[ranking]\nvariables = ["Cu", "zone"]\n[analyses]')
    with pytest.raises(PreflightError) as info:
        check(template)
    text = str(info.value)
    assert text.startswith("2 problems must be fixed before the analyses can run:")
    assert "1. `ranking.variables` names 'zone'" in text
    assert "2. `environment.surfaces` names 'habitat'" in text
    assert set(info.value.columns) == {"zone", "habitat"}
    assert [f.step for f in info.value.findings] == ["ranking", "surfaces"]


def test_a_composition_off_its_total_is_refused_naming_the_samples(template: Path) -> None:
    def edit(frame: pd.DataFrame) -> None:
        frame.loc[3, "sand"] = "90"  # sums to about 120

    frame = _edit_environment(template, edit)
    site = frame.loc[3, "site"]
    # the composition's own check speaks first (hypothesis texture); then the texture classes
    with pytest.raises(InputError, match=rf"`environment.compositions`: The parts of the "
                                         rf"composition sand, silt, clay do not sum to 100 .*"
                                         rf"{site} \(sum 1[12]\d") as info:
        check(template)
    assert site in info.value.sites
    assert "[environment] renormalise_compositions = true" in str(info.value)


def test_renormalising_on_request_is_recorded_in_the_input_decisions(template: Path) -> None:
    def edit(frame: pd.DataFrame) -> None:
        frame.loc[3, "sand"] = "90"

    frame = _edit_environment(template, edit)
    _edit_text(template, "[environment]\n", "[environment]\nrenormalise_compositions = true\n")
    prepared = check(template)
    decisions = [str(d) for d in prepared.context.results["input_decisions"]]
    site = frame.loc[3, "site"]
    renormalised = [d for d in decisions if "renormalised" in d]
    # one record for the composition and one for the texture classes: the one rule, twice
    assert len(renormalised) == 2, decisions
    assert all(site in d for d in renormalised)


def test_zero_parts_replaced_before_log_ratios_are_recorded(template: Path) -> None:
    def edit(frame: pd.DataFrame) -> None:
        clay = float(frame.loc[5, "clay"])
        frame.loc[5, "clay"] = "0"
        frame.loc[5, "sand"] = str(float(frame.loc[5, "sand"]) + clay)

    _edit_environment(template, edit)
    prepared = check(template)
    decisions = [str(d) for d in prepared.context.results["input_decisions"]]
    assert any(d.startswith("Composition sand, silt, clay: 1 zero(s) replaced "
                            "multiplicatively by 0.65 x detection limit") for d in decisions)


def test_proportions_need_their_total(template: Path) -> None:
    def edit(frame: pd.DataFrame) -> None:
        for part in ("sand", "silt", "clay"):
            frame[part] = [str(float(v) / 100) for v in frame[part]]

    _edit_environment(template, edit)
    _edit_text(template, 'texture = ["sand", "silt", "clay"]', "")
    _edit_text(template, 'sand = "%"\nsilt = "%"\nclay = "%"\n', "")
    with pytest.raises(InputError, match="composition_total"):
        check(template)
    _edit_text(template, "[environment]\n", "[environment]\ncomposition_total = 1\n")
    assert "input_decisions" in check(template).context.results


def test_prepare_run_is_what_run_project_refuses_on(template: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    import gradients.report._run as run_module

    _edit_text(template, 'texture = ["sand", "silt", "clay"]\nwater',
               'texture = ["sand"]\nwater')
    prepared = prepare_run(load_project(template))
    assert [f.step for f in prepared.errors] == ["environment"]
    called = []
    monkeypatch.setattr(run_module, "analyse", lambda *a, **k: called.append(1))
    with pytest.raises(PreflightError, match="names only 'sand'"):
        run_module.run_project(template)
    assert called == []  # refused before any analysis


def test_identical_communities_are_a_warning_naming_the_sites(
        template: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = template.parent / "data" / "community.csv"
    frame = pd.read_csv(path, dtype=str)
    frame.iloc[1, 1:] = frame.iloc[0, 1:]
    frame.to_csv(path, index=False, lineterminator="\n")
    assert main(["check", str(template)]) == 0
    out = capsys.readouterr().out
    first, second = frame.iloc[0, 0], frame.iloc[1, 0]
    assert f"Warnings:\n  - Sites '{first}', '{second}' have identical communities" in out
