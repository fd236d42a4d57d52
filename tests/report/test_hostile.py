"""A project whose site, taxon, variable and hypothesis names are hostile still gives a safe
report: nothing written outside the output folder, no spreadsheet formulas, no markup."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

from gradients.cli import main
from gradients.data import simulate_survey

FORMULA = '=HYPERLINK("http://x","y")'
UP = "../../x"
SCRIPT = "<script>alert(1)</script>"
PREFIXES = ("=", "+", "-", "@", "\t", "\r")


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


@pytest.fixture(scope="module")
def hostile_report(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    root = tmp_path_factory.mktemp("hostile")
    work = root / "project"
    work.mkdir()
    truth = simulate_survey(n_sites=24, n_taxa=12, rng=5)
    rename_sites = dict(zip(truth.community.index[:3], [FORMULA, UP, SCRIPT], strict=True))
    community = truth.community.rename(index=rename_sites)
    community = community.rename(columns={community.columns[0]: SCRIPT,
                                          community.columns[1]: "@taxon"})
    env = truth.environment.set_index("site").rename(index=rename_sites)
    env = env.rename(columns={"pH": FORMULA, "sand": UP})
    loc = truth.locations.rename(index=rename_sites)
    community.index.name = env.index.name = "site"
    community.to_csv(work / "community.csv")
    env.to_csv(work / "environment.csv")
    with open(work / "locations.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["site", "longitude", "latitude"])
        for site, point in zip(loc.index, loc.geometry, strict=True):
            w.writerow([site, point.x, point.y])
    (work / "project.toml").write_text(
        f"""title = "{SCRIPT} survey"
[inputs]
community = "community.csv"
environment = "environment.csv"
locations = "locations.csv"
below_detection = "half-limit"
[environment]
surfaces = ['{UP}']
[hypotheses]
"{SCRIPT}" = ["Cu", "Zn"]
'{UP}' = ['{FORMULA}', "conductivity"]
"=SUM(A1)" = ['{UP}', "clay"]
[analyses]
starts = 2
[permutations]
count = 19
seed = 3
""", encoding="utf-8")
    out = root / "out" / "report"
    assert main(["run", str(work / "project.toml"), "--out", str(out)]) == 0
    return root, out


def test_nothing_written_outside_the_output_folder(hostile_report: tuple[Path, Path]) -> None:
    root, out = hostile_report
    outside = {p for p in root.rglob("*") if out not in p.parents and p != out}
    expected = {root / "project", root / "out"} | {
        root / "project" / n for n in ("community.csv", "environment.csv", "locations.csv",
                                       "project.toml")}
    assert outside == expected
    for p in out.rglob("*"):
        assert p.resolve().is_relative_to(out.resolve())
        assert not p.name.startswith(".")
        assert all(ch.isalnum() or ch in "._-" for ch in p.name), p.name


def test_csv_cells_are_not_formulas(hostile_report: tuple[Path, Path]) -> None:
    _, out = hostile_report
    seen_quoted = False
    for path in (out / "tables").glob("*.csv"):
        with open(path, newline="", encoding="utf-8") as fh:
            for row in csv.reader(fh):
                for cell in row:
                    if cell and not _is_number(cell):
                        assert not cell.startswith(PREFIXES), (path.name, cell)
                    seen_quoted |= cell.startswith("'=HYPERLINK(")
    assert seen_quoted  # the hostile site name is kept, quoted, not dropped


def test_workbook_cells_are_text_not_formulas(hostile_report: tuple[Path, Path]) -> None:
    from openpyxl import load_workbook

    _, out = hostile_report
    wb = load_workbook(out / "tables.xlsx")
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str):
                    assert c.data_type == "s" and not c.value.startswith(PREFIXES), c.value


def test_html_escapes_every_name(hostile_report: tuple[Path, Path]) -> None:
    _, out = hostile_report
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "<script" not in html.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "=HYPERLINK(&quot;http://x&quot;,&quot;y&quot;)" in html
    assert 'href="http://x"' not in html
    assert "Content-Security-Policy" in html
