"""Output safety: file names, spreadsheet formulas, HTML escaping, the output folder."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from gradients import InputError
from gradients.report._safety import esc, inside, neutralise_frame, neutralise_text, safe_name
from gradients.report._writers import OutputFolder, write_csv, write_workbook

HOSTILE = ['=HYPERLINK("http://x","y")', "../../x", "<script>alert(1)</script>", "+1", "-2",
           "@SUM(A1)", "\tx", "\rx", "..", "/etc/passwd", "CON", "a\\b", ""]


@pytest.mark.parametrize("name", HOSTILE)
def test_safe_name_stays_a_plain_file_name(name: str, tmp_path: Path) -> None:
    s = safe_name(name)
    assert s and "/" not in s and "\\" not in s and not s.startswith(".")
    assert set(s) <= set("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789._-")
    assert inside(tmp_path, f"tables/{s}.csv").parent == (tmp_path / "tables").resolve()


def test_safe_name_keeps_plain_names_and_separates_different_ones() -> None:
    assert safe_name("site_scores") == "site_scores"
    assert safe_name("a/b") != safe_name("a_b")
    assert safe_name("CON").lower() != "con"


def test_inside_refuses_escapes(tmp_path: Path) -> None:
    with pytest.raises(RuntimeError, match="outside the output folder"):
        inside(tmp_path, "../../x")


@pytest.mark.parametrize("text", ["=1+1", "+1", "-1", "@A1", "\t=1", "\r=1"])
def test_formula_cells_are_quoted(text: str) -> None:
    assert neutralise_text(text) == "'" + text


def test_plain_text_and_numbers_unchanged() -> None:
    assert neutralise_text("Taxon A") == "Taxon A"
    assert neutralise_text(-1.5) == -1.5
    frame = pd.DataFrame({"v": [-1.0, 2.0], "label": ["-x", "ok"]},
                         index=pd.Index(["=cmd", "s2"], name="site"))
    out = neutralise_frame(frame)
    assert out["v"].tolist() == [-1.0, 2.0]
    assert out["label"].tolist() == ["'-x", "ok"]
    assert out["site"].tolist() == ["'=cmd", "s2"]


def test_csv_and_workbook_neutralise(tmp_path: Path) -> None:
    from openpyxl import load_workbook

    frame = pd.DataFrame({"=bad column": [1.5, -2.0]},
                         index=pd.Index(['=HYPERLINK("http://x","y")', "@x"], name="site"))
    write_csv(frame, tmp_path / "t.csv")
    text = (tmp_path / "t.csv").read_text(encoding="utf-8")
    assert text.splitlines()[1].startswith('"\'=HYPERLINK(')
    assert "'=bad column" in text and ",-2" in text  # numbers stay numbers
    write_workbook({"t": frame}, tmp_path / "t.xlsx")
    ws = load_workbook(tmp_path / "t.xlsx")["t"]
    cells = [c for row in ws.iter_rows() for c in row]
    for c in cells:
        if isinstance(c.value, str):
            assert c.data_type == "s"
            assert not c.value.startswith(("=", "+", "-", "@"))
    assert ws["B3"].value == -2.0 and ws["B3"].data_type == "n"


def test_esc() -> None:
    assert esc("<script>") == "&lt;script&gt;"
    assert esc('"a"') == "&quot;a&quot;"


def test_output_folder_is_atomic_and_never_overwrites(tmp_path: Path) -> None:
    target = tmp_path / "out"
    with OutputFolder(target) as f:
        f.path("run.json").write_text("{}")
        f.path("tables/a.csv").write_text("1")
        assert not target.exists()  # nothing at the target until complete
        f.commit()
    assert (target / "tables" / "a.csv").read_text() == "1"
    with pytest.raises(InputError, match=r"already exists.*--force"):
        OutputFolder(target)
    # a failure while writing leaves the old folder untouched and no partial folder behind
    with pytest.raises(ZeroDivisionError), OutputFolder(target, force=True) as f:
        f.path("run.json").write_text("new")
        raise ZeroDivisionError
    assert (target / "run.json").read_text() == "{}"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]
    with OutputFolder(target, force=True) as f:
        f.path("run.json").write_text("new")
        f.commit()
    assert (target / "run.json").read_text() == "new"
    assert not (target / "tables").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_force_refuses_a_folder_that_is_not_a_report(tmp_path: Path) -> None:
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "precious.csv").write_text("x")
    with pytest.raises(InputError, match="not a gradients report"):
        OutputFolder(tmp_path / "data", force=True)
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match="is a file"):
        OutputFolder(tmp_path / "file", force=True)
