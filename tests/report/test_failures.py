"""No silent failures: a step that breaks stops the run and names itself; a step is skipped only
for a reason of the data, and then listed with that reason."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import gradients.fitting
import gradients.matrix
from gradients import InputError
from gradients.data import Survey, simulate_survey
from gradients.report import StepError, analyse, init_project, run_project
from gradients.report._pipeline import Context, Skip, Step, run_steps


@pytest.fixture
def quick_project(tmp_path: Path) -> Path:
    """The template project of ``gradients init`` with few permutations and NMDS starts."""
    project = init_project(tmp_path / "project")
    text = project.read_text(encoding="utf-8")
    text = text.replace("count = 999", "count = 9")
    text = text.replace('dimensions = 2\n', 'dimensions = 2\nstarts = 2\n')
    assert "count = 9\n" in text and "starts = 2" in text
    project.write_text(text, encoding="utf-8")
    return project


def _nothing_written(project: Path, out: Path) -> None:
    assert not out.exists()
    # no half-written temporary folder beside the target either
    assert sorted(p.name for p in out.parent.iterdir()) == sorted(
        p.name for p in project.parent.iterdir())


def test_a_misspelt_import_in_a_step_fails_the_run(quick_project: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    # Before, an ImportError raised inside a gradients module dropped the Mantel section
    # without a word. It must now stop the run, name the step and write nothing.
    def broken(*args: object, **kwargs: object) -> None:
        raise ImportError("cannot import name 'mantle_core' from 'gradients.matrix._mantel'",
                          name="gradients.matrix._mantel")

    monkeypatch.setattr(gradients.matrix, "mantel", broken)
    out = quick_project.parent / "report"
    with pytest.raises(StepError, match=r"analysis step 'mantel' failed with ImportError: "
                                        r"cannot import name 'mantle_core'") as info:
        run_project(quick_project, out=out)
    assert info.value.step == "mantel"
    assert isinstance(info.value.__cause__, ImportError)
    _nothing_written(quick_project, out)


def test_a_bug_in_a_step_fails_the_run(quick_project: Path,
                                       monkeypatch: pytest.MonkeyPatch) -> None:
    def broken(*args: object, **kwargs: object) -> None:
        raise RuntimeError("index out of step")

    monkeypatch.setattr(gradients.fitting, "fit_vectors", broken)
    out = quick_project.parent / "report"
    with pytest.raises(StepError, match=r"'vectors' failed with RuntimeError: index out of "
                                        r"step\. No report folder was written"):
        run_project(quick_project, out=out)
    _nothing_written(quick_project, out)


def test_the_command_line_reports_the_failing_step(quick_project: Path,
                                                   monkeypatch: pytest.MonkeyPatch,
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    from gradients.cli import main

    def broken(*args: object, **kwargs: object) -> None:
        raise ImportError("no module named 'gradients.matrix._gone'",
                          name="gradients.matrix._gone")

    monkeypatch.setattr(gradients.matrix, "matrix_regression", broken)
    out = quick_project.parent / "report"
    assert main(["run", str(quick_project), "--out", str(out)]) == 1
    err = capsys.readouterr().err
    assert "analysis step 'regression' failed with ImportError" in err
    _nothing_written(quick_project, out)


def test_a_data_reason_skips_the_step_and_is_listed(tmp_path: Path) -> None:
    # Euclidean dissimilarities are not bounded by 1, so 1 - d is no similarity: the distance
    # decay step raises Skip with that reason; the report, run.json and the HTML list it.
    from gradients.report import write_report

    truth = simulate_survey(n_sites=18, n_taxa=10, rng=11)
    survey = Survey(truth.community, truth.environment.set_index("site"), truth.locations,
                    censored="half-limit")
    outcome = analyse(survey, settings={"permutations.count": 9, "analyses.starts": 2,
                                        "analyses.surfaces": False,
                                        "community.dissimilarity": "euclidean"},
                      hypotheses={"metals": ("Cu", "Zn")})
    reason = dict(outcome.skipped)["distance_decay"]
    assert reason.startswith("euclidean dissimilarities are not bounded by 1")
    assert "distance_decay" not in {s.key for s in outcome.sections}
    assert {"mantel", "correlogram", "verdicts"} <= {s.key for s in outcome.sections}
    folder = write_report(outcome, tmp_path / "r")
    info = json.loads((folder / "run.json").read_text(encoding="utf-8"))
    assert {"analysis": "distance_decay", "reason": reason} in info["skipped"]
    assert "euclidean dissimilarities are not bounded by 1" in (
        folder / "report.html").read_text(encoding="utf-8")


def _context() -> Context:
    return Context(settings={"analyses.off": False}, hypotheses={}, survey=None, seed=1,
                   n_resamples=9)


def test_run_steps_lists_skips_and_runs_the_rest() -> None:
    ran: list[str] = []

    def skip(ctx: Context) -> None:
        raise Skip("no site locations were given")

    def refused(ctx: Context) -> None:
        raise InputError("too few sites for this analysis")

    steps = [Step("a", skip), Step("b", refused), Step("c", lambda ctx: ran.append("c")),
             Step("d", lambda ctx: ran.append("d"), "analyses.off")]
    ctx = _context()
    run_steps(ctx, steps)
    assert ctx.skipped == [("a", "no site locations were given"),
                           ("b", "too few sites for this analysis")]
    assert ran == ["c"]  # "d" is switched off: it does not run and is not listed
    assert set(ctx.timings) == {"a", "b", "c"}


def test_run_steps_stops_on_a_required_input_error_and_on_any_other_error() -> None:
    def refused(ctx: Context) -> None:
        raise InputError("the community table has one site")

    with pytest.raises(InputError, match="one site"):
        run_steps(_context(), [Step("community", refused, required=True)])
    for error in (ImportError("x", name="gradients.fitting._gone"),
                  ImportError("y", name="numpy_missing"), KeyError("axis1"), ValueError("z")):
        def broken(ctx: Context, error: Exception = error) -> None:
            raise error

        with pytest.raises(StepError, match=f"'late' failed with {type(error).__name__}"):
            run_steps(_context(), [Step("early", lambda ctx: None), Step("late", broken)])


def test_every_step_is_listed_once_in_the_order_it_runs() -> None:
    from gradients.report.steps import SECTION_ORDER, STEPS

    names = [s.name for s in STEPS]
    assert len(names) == len(set(names))
    # what each step reads from the context comes from a step listed before it
    core = [n for n in names if n in ("community", "environment", "geography", "ordination")]
    assert core == ["community", "environment", "geography", "ordination"]
    # the screening step may add mean_quotient to the survey, so it runs before environment
    assert names.index("community") < names.index("screening") < names.index("environment")
    assert names.index("texture") < names.index("ordination")
    assert names.index("verdicts") > max(names.index(n) for n in
                                         ("mantel", "partial_mantel", "regression", "vectors",
                                          "correlogram"))
    assert names.index("planted_truth") > names.index("verdicts")
    assert names.index("biplot") > max(names.index("vectors"), names.index("factors"))
    assert set(SECTION_ORDER) <= set(names)
    assert all(s.setting is None or s.setting == f"analyses.{s.name}" for s in STEPS)
