"""Project-file validation: every message names the key and the fix."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from gradients import InputError
from gradients.report import SCHEMA, init_project, load_project, project_from_dict


@pytest.fixture
def tables(tmp_path: Path) -> Path:
    (tmp_path / "c.csv").write_text("site,a,b\ns1,1,2\ns2,3,0\ns3,1,1\n", encoding="utf-8")
    (tmp_path / "e.csv").write_text("site,x,y\ns1,1,2\ns2,3,0\ns3,2,5\n", encoding="utf-8")
    return tmp_path


def write(folder: Path, text: str) -> Path:
    p = folder / "project.toml"
    p.write_text(text, encoding="utf-8")
    return p


BASE = '[inputs]\ncommunity = "c.csv"\nenvironment = "e.csv"\n'


def test_minimal_project_fills_defaults_and_resolves_paths(tables: Path) -> None:
    project = load_project(write(tables, BASE))
    assert project["inputs.community"] == (tables / "c.csv").resolve()
    assert project["permutations.count"] == 999
    assert project["community.dissimilarity"] == "bray-curtis"
    assert project["output.folder"] == (tables / "report").resolve()
    assert project.hypotheses == {}


def test_unknown_key_suggests_the_closest(tables: Path) -> None:
    with pytest.raises(InputError, match=r"Unknown key `mantle` in \[analyses\].*'mantel'"):
        load_project(write(tables, BASE + "[analyses]\nmantle = true\n"))


def test_unknown_section_suggests_the_closest(tables: Path) -> None:
    with pytest.raises(InputError, match=r"Unknown section \[permutation\].*'permutations'"):
        load_project(write(tables, BASE + "[permutation]\ncount = 9\n"))


def test_unknown_top_level_key(tables: Path) -> None:
    with pytest.raises(InputError, match=r"Unknown key `titel`.*'title'"):
        load_project(write(tables, 'titel = "x"\n' + BASE))


def test_wrong_type_names_key_and_fix(tables: Path) -> None:
    with pytest.raises(InputError, match=r"`permutations.count` must be a whole number \(no "
                                         r"quotes\); got '999'"):
        load_project(write(tables, BASE + '[permutations]\ncount = "999"\n'))
    with pytest.raises(InputError, match=r"`analyses.mantel` must be true or false"):
        load_project(write(tables, BASE + '[analyses]\nmantel = "yes"\n'))
    with pytest.raises(InputError, match=r"`permutations.count` must be at least 1"):
        load_project(write(tables, BASE + "[permutations]\ncount = 0\n"))


def test_bad_choice_lists_choices_and_suggests(tables: Path) -> None:
    with pytest.raises(InputError, match=r"`community.dissimilarity` must be one of .*"
                                         r"got 'bray_curtis'. Did you mean 'bray-curtis'\?"):
        load_project(write(tables, BASE + '[community]\ndissimilarity = "bray_curtis"\n'))


def test_missing_file_is_named(tables: Path) -> None:
    text = BASE.replace("c.csv", "nothere.csv")
    with pytest.raises(InputError, match=r"`inputs.community` names the file .*nothere.csv.*"
                                         r"does not exist"):
        load_project(write(tables, text))


def test_missing_required_key(tables: Path) -> None:
    with pytest.raises(InputError, match=r"`inputs.environment` is required"):
        load_project(write(tables, '[inputs]\ncommunity = "c.csv"\n'))


def test_missing_project_file_and_bad_toml(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"does not exist. Create one with `gradients init"):
        load_project(tmp_path / "none.toml")
    with pytest.raises(InputError, match=r"is not valid TOML"):
        load_project(write(tmp_path, "[inputs\ncommunity = 1\n"))


def test_hypothesis_checks(tables: Path) -> None:
    with pytest.raises(InputError, match=r"`hypotheses.h1` must be a list of column names"):
        load_project(write(tables, BASE + "[hypotheses]\nh1 = 3\n"))
    with pytest.raises(InputError, match=r"'x' is in both hypotheses 'h1' and 'h2'"):
        load_project(write(tables, BASE + '[hypotheses]\nh1 = ["x"]\nh2 = ["x", "y"]\n'))
    with pytest.raises(InputError, match=r"`design.covariables` 'x' are also in a hypothesis"):
        load_project(write(tables, BASE + '[hypotheses]\nh1 = ["x"]\n'
                                          '[design]\ncovariables = ["x"]\n'))


def test_section_written_as_value(tables: Path) -> None:
    with pytest.raises(InputError, match=r"`analyses` must be a section"):
        project_from_dict({"inputs": {"community": str(tables / "c.csv"),
                                      "environment": str(tables / "e.csv")},
                           "analyses": 3})


def test_template_project_loads(tmp_path: Path) -> None:
    path = init_project(tmp_path / "proj")
    project = load_project(path)
    assert set(project.hypotheses) == {"contamination", "texture", "water_and_organic"}
    assert project["inputs.locations"].is_file()
    assert project["geography.method"] == "network" and project["geography.network"].is_file()
    with pytest.raises(InputError, match="not an empty folder"):
        init_project(tmp_path / "proj")


def test_every_key_is_documented() -> None:
    doc = (Path(__file__).parents[2] / "docs" / "project-file.md").read_text(encoding="utf-8")
    for section, keys in SCHEMA.items():
        if section:
            assert f"[{section}]" in doc, section
        for key in keys:
            assert re.search(rf"`{re.escape(key)}`", doc), f"{section}.{key} not documented"


def test_example_project_is_valid() -> None:
    from gradients.report._check import check_project

    root = Path(__file__).parents[2]
    survey, project = check_project(root / "examples" / "corvanne" / "project.toml")
    assert survey.community.shape == (60, 40)
    assert project["output.folder"] == (root / "corvanne-report").resolve()


def test_composition_split_between_hypotheses_is_refused(tables: Path) -> None:
    # docs/project-file.md: all parts of a composition must be in the same hypothesis; the
    # run used to skip every hypothesis test instead.
    text = (BASE + '[environment]\ncompositions = [["sand", "silt", "clay"]]\n'
            '[hypotheses]\na = ["sand", "silt"]\nb = ["clay", "x"]\n')
    with pytest.raises(InputError, match=r"split between hypotheses \('sand' in 'a'; 'silt' "
                                         r"in 'a'; 'clay' in 'b'\)"):
        load_project(write(tables, text))
    ok = BASE + ('[environment]\ncompositions = [["sand", "silt", "clay"]]\n'
                 '[hypotheses]\na = ["sand", "silt", "clay"]\nb = ["x"]\n')
    assert load_project(write(tables, ok)).hypotheses["a"] == ("sand", "silt", "clay")
