"""The reader's shortcuts for large tables give what the careful, cell-by-cell reading gives.

Unquoted text is split line by line instead of going through the ``csv`` module, and a table of
numbers written as text is read once per distinct text; both must agree exactly with the
standard library's ``csv`` reader and with :func:`float` (the references here), and leave every
message as it was.
"""

from __future__ import annotations

import csv
import io
import random
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gradients import InputError
from gradients.data import read_survey
from gradients.data._cells import NUMBER, decimal_marks, parse_column
from gradients.data._files import _rows_to_frame, _split_unquoted


def _csv_rows(text: str, delimiter: str) -> tuple[list[list[str]], list[int]]:
    """Rows and line numbers from the standard library's csv reader (the reference)."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, quotechar='"')
    rows, numbers = [], []
    for row in reader:
        rows.append(row)
        numbers.append(reader.line_num)
    return rows, numbers


@pytest.mark.parametrize("text", [
    "site,a,b\nS1,1,2\nS2,3,4\n",
    "site,a,b\r\nS1,1,2\r\nS2,3,4",
    "site;a\n\nS1;1\n \n;;\nS2;2\n\n",
    "site\ta\tb\nS1\t\t2\nS2\t3\n",
    "site|a\nS1|1|\nS2|\u00e9|\x0c\n\u2028x|\x85\n",
])
def test_split_lines_equal_the_csv_reader(text):
    # reference: Python's csv module, read as the careful path reads it
    delimiter = next(d for d in (",", ";", "\t", "|") if d in text)
    assert _split_unquoted(text, delimiter) == _csv_rows(text, delimiter)


def test_split_lines_equal_the_csv_reader_on_random_text():
    # reference: Python's csv module on 4,000 seeded random texts built from delimiters, line
    # ends, spaces, blank lines and characters that other readers take as line breaks
    pieces = ["a", "1", " ", ",", ";", "\t", "|", "\n", "\r\n", "\x0c", "\x85", "\u2028", "0.5"]
    rng = random.Random(16)
    compared = 0
    for _ in range(4000):
        text = "".join(rng.choice(pieces) for _ in range(rng.randint(1, 40)))
        for delimiter in (",", ";", "\t", "|"):
            got = _split_unquoted(text, delimiter)
            assert got is not None
            assert got == _csv_rows(text, delimiter), (text, delimiter)
            compared += 1
    assert compared == 16000


@pytest.mark.parametrize("text", ['site,a\nS1,"1"\n', "site,a\rS1,1\r", "site,a\nS1,1\rS2,2\n"])
def test_quotes_and_lone_carriage_returns_go_through_the_csv_reader(text):
    assert _split_unquoted(text, ",") is None


def test_long_line_goes_through_the_csv_reader():
    # the csv module refuses a field over its limit; such text is left to it
    text = "site,a\nS1," + "1" * (csv.field_size_limit() + 1) + "\n"
    assert _split_unquoted(text, ",") is None


def test_frame_of_even_rows_equals_the_padded_construction():
    rows = [["site", "a", "b"], ["S1", "1", "2"], ["S2", " 3", ""]]
    frame, lines = _rows_to_frame(rows, [1, 2, 3], "t.csv", "community", "line")
    expected = pd.DataFrame([["S1", "1", "2"], ["S2", " 3", ""]], columns=["site", "a", "b"],
                            dtype=object)
    pd.testing.assert_frame_equal(frame, expected)
    assert lines == [2, 3]
    short, _ = _rows_to_frame([["site", "a", "b"], ["S1", "1"], ["S2", " 3", ""]], [1, 2, 3],
                              "t.csv", "community", "line")
    expected.iloc[0, 2] = ""
    pd.testing.assert_frame_equal(short, expected)


def test_counts_read_once_per_text_equal_float_cell_by_cell(tmp_path: Path):
    # reference: float() of every cell, and pandas.read_csv for the whole table
    rng = np.random.default_rng(5)
    texts = np.array(["0", "1", "2", "17", " 3", "4 ", "+5", "007", "1e2", "250"])
    cells = texts[rng.integers(0, len(texts), size=(40, 12))]
    lines = ["site," + ",".join(f"t{j}" for j in range(12))]
    lines += [f"S{i}," + ",".join(row) for i, row in enumerate(cells)]
    path = tmp_path / "c.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    survey = read_survey(path)
    expected = np.vectorize(float)(cells)
    assert survey.community.dtypes.eq(np.int64).all()
    np.testing.assert_array_equal(survey.community.to_numpy(), expected)
    np.testing.assert_array_equal(survey.community.to_numpy(),
                                  pd.read_csv(path, index_col="site").to_numpy())


def test_fractional_abundances_keep_their_values(tmp_path: Path):
    # reference: float() of each cell text
    path = tmp_path / "c.csv"
    path.write_text("site,a,b\nS1,0.50,1.25\nS2,2.5,0.1\nS3,3,1e-3\n", encoding="utf-8")
    community = read_survey(path).community
    assert community.dtypes.eq(np.float64).all()
    np.testing.assert_array_equal(community.to_numpy(),
                                  [[0.5, 1.25], [2.5, 0.1], [3.0, 0.001]])


def test_bad_cell_in_a_large_count_table_is_reported_as_before(tmp_path: Path):
    # the shortcut gives way to the cell-by-cell reading, which names the cell and its line
    rows = ["site," + ",".join(f"t{j}" for j in range(30))]
    rows += [f"S{i}," + ",".join("1" for _ in range(30)) for i in range(50)]
    rows[20] = rows[20][: -1] + "-2"
    path = tmp_path / "c.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_survey(path)
    assert ("1 abundance(s) are negative: site 'S19', taxon 't29': '-2', line 21"
            in str(err.value))


def test_distinct_texts_read_as_the_column_reader_reads_them():
    # the texts a count table may hold, read by parse_column one by one and all at once
    texts = ["0", " 1", "2 ", "1_0", "\u0661\u0662", "-0", "1e2", "+.5"]
    together = parse_column(pd.Series(texts, dtype=object))
    for text, kind, value in zip(texts, together.kinds, together.values, strict=True):
        alone = parse_column(pd.Series([text], dtype=object))
        assert alone.kinds[0] == kind == NUMBER
        assert alone.values[0] == value == float(text)


def test_decimal_marks_by_distinct_text_equal_the_column_loop():
    # reference: the cells sorted by hand (a decimal comma: '0,5', ' <1,25', ',5'; a decimal
    # point: '1.5', '<0.1', '.5'; neither: '2', 'abc', ''), listed column by column
    frame = pd.DataFrame({"a": ["0,5", "1.5", "2", " <1,25"], "b": ["abc", "<0.1", ",5", ".5"],
                          "c": ["", "2", "2", "0,5"]}, dtype=object)
    comma, point = decimal_marks(frame)
    assert comma == [(0, "a"), (3, "a"), (2, "b"), (3, "c")]
    assert point == [(1, "a"), (1, "b"), (3, "b")]
    # a table with a cell that is not text is looked at column by column, with the same lists
    mixed = frame.copy()
    mixed.loc[1, "c"] = None
    assert decimal_marks(mixed) == (comma, point)
