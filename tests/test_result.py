"""Result objects in notebooks: ``_repr_html_`` is well-formed, escaped HTML holding the scalar
fields and ``.table``; ``__repr__`` is as before.

The HTML is read back with the standard library's ``html.parser`` (an independent reader): the
tags must nest, and the text it recovers must be the labels and values as typed.
"""

from __future__ import annotations

import dataclasses
from html.parser import HTMLParser

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients._result import ResultMixin
from gradients.distance import DistanceMatrix
from gradients.fitting import fit_vectors
from gradients.matrix import mantel

VOID = {"br", "hr", "img", "meta", "link", "input", "col", "wbr"}


class Reader(HTMLParser):
    """Checks that tags nest, and collects the text and the cells of every table row."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.text: list[str] = []
        self.rows: list[list[str]] = []  # rows of tables with class "dataframe"
        self._in_frame = 0
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        if tag in VOID:
            return
        self.stack.append(tag)
        if tag == "table" and ("class", "dataframe") in attrs:
            self._in_frame = len(self.stack)
        if self._in_frame and tag == "tr":
            self.rows.append([])
        if self._in_frame and tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        if self._in_frame and tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append("".join(self._cell).strip())
            self._cell = None
        if tag == "table" and self._in_frame == len(self.stack):
            self._in_frame = 0
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)


def read(markup: str) -> Reader:
    reader = Reader()
    reader.feed(markup)
    reader.close()
    assert not reader.errors, reader.errors
    assert reader.stack == [], f"unclosed tags: {reader.stack}"
    return reader


@dataclasses.dataclass(frozen=True, repr=False)
class Example(ResultMixin):
    table: pd.DataFrame
    statistic: float
    pvalue: float
    n_sites: int
    label: str
    null_distribution: np.ndarray
    skipped: float | None = None
    notes: tuple[str, ...] = ()


def _example(n_rows: int = 2) -> Example:
    labels = ["a<b", "c&d", *(f"site {i}" for i in range(n_rows - 2))]
    table = pd.DataFrame({"r2": np.linspace(0.5, 0.25, n_rows),
                          "x&y": np.linspace(0.001, 0.2, n_rows)},
                         index=pd.Index(labels, name="variable"))
    null = np.random.default_rng(0).normal(size=999)
    return Example(table, 0.4123456, 0.001, 30, "x<y", null,
                   notes=("first <note> & more", "<script>alert(1)</script>"))


def test_html_is_well_formed_and_names_the_result():
    markup = _example()._repr_html_()
    reader = read(markup)
    text = "".join(reader.text)
    assert text.startswith("Example")
    for name, value in [("statistic", "0.4123"), ("pvalue", "0.001"), ("n_sites", "30")]:
        assert f"{name}{value}" in text  # one header row each: <th>name</th><td>value</td>
    assert "skipped" not in text  # None: not computed, left out


def test_labels_and_values_are_escaped():
    markup = _example()._repr_html_()
    assert "<script" not in markup
    assert "a&lt;b" in markup and "c&amp;d" in markup and "x&amp;y" in markup
    assert "x&lt;y" in markup
    text = "".join(read(markup).text)  # the reader gives back the text as typed
    for typed in ("a<b", "c&d", "x&y", "x<y", "first <note> & more",
                  "<script>alert(1)</script>"):
        assert typed in text, typed


def test_table_rows_are_the_tables_rows():
    result = _example(5)
    rows = read(result._repr_html_()).rows
    # pandas to_html: a header row of column names, one of the index name, then the body
    assert rows[0] == ["", "r2", "x&y"]
    assert rows[1] == ["variable", "", ""]
    body = rows[2:]
    assert [r[0] for r in body] == list(result.table.index)
    for row, (_, values) in zip(body, result.table.iterrows(), strict=True):
        assert row[1:] == [f"{v:.4g}" for v in values]


def test_long_tables_are_cut_and_counted():
    result = _example(50)
    reader = read(result._repr_html_())
    assert len(reader.rows) == 2 + 20
    assert "30 more rows in .table" in "".join(reader.text)


def test_null_distribution_is_named_not_printed():
    result = _example()
    markup = result._repr_html_()
    assert "null_distribution (999 values)" in "".join(read(markup).text)
    printed = {f"{v:.4g}" for v in result.null_distribution} | {
        f"{v:.4f}".rstrip("0") for v in result.null_distribution}
    assert not [p for p in printed if p in markup and len(p) > 5]


def test_repr_is_unchanged():
    # the text of __repr__ as it was before _repr_html_ was added (printed by that version)
    assert repr(_example()) == (
        "Example(\n"
        "    statistic=0.4123,\n"
        "    pvalue=0.001,\n"
        "    n_sites=30,\n"
        "    label='x<y',\n"
        "    null_distribution=<array shape=(999,) dtype=float64>,\n"
        "    skipped=None,\n"
        ")\n"
        "           r2   x&y\n"
        "variable           \n"
        "a<b       0.5 0.001\n"
        "c&d      0.25   0.2\n"
        "Notes:\n"
        "  [1] first <note> & more\n"
        "  [2] <script>alert(1)</script>"
    )


def test_real_results_render():
    rng = np.random.default_rng(1)
    pts = rng.normal(size=(12, 2))
    labels = [f"s<{i}>" for i in range(12)]
    x = DistanceMatrix(pdist(pts), labels)
    y = DistanceMatrix(pdist(pts + rng.normal(scale=0.5, size=(12, 2))), labels)
    res = mantel(x, y, n_resamples=99, rng=0)
    text = "".join(read(res._repr_html_()).text)
    assert text.startswith(type(res).__name__)
    assert f"statistic{res.statistic:.4f}".rstrip("0") in text
    assert "n_sites12" in text and "n_resamples99" in text
    assert "pvalue_spatial" not in text  # not computed without spatial_null
    scores = pd.DataFrame(pts, index=labels, columns=["axis1", "axis2"])
    env = pd.DataFrame({"depth<m>": pts[:, 0] + rng.normal(size=12), "pH": rng.normal(size=12)},
                       index=labels)
    fit = fit_vectors(scores, env, n_resamples=99, rng=0)
    rows = read(fit._repr_html_()).rows
    assert [r[0] for r in rows[2:]] == ["depth<m>", "pH"]
    assert repr(fit).startswith(f"{type(fit).__name__}(\n")
