"""What a run produced, before it is written: sections of tables, figures and text."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

__all__ = ["Outcome", "Section"]


@dataclass
class Section:
    """One section of the report.

    ``tables`` are written to ``tables/<name>.csv`` and to a sheet of the workbook; those named
    in ``shown`` are also printed in the HTML report (others are linked as files).
    ``figures`` maps a figure name to a matplotlib Figure, written as PNG and SVG.
    ``paragraphs`` and ``notes`` are plain text (escaped when rendered).
    """

    key: str
    title: str
    paragraphs: list[str] = field(default_factory=list)
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    shown: list[str] = field(default_factory=list)
    figures: dict[str, Any] = field(default_factory=dict)
    captions: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    #: Columns printed in the HTML for a shown table (all columns when absent).
    display: dict[str, list[str]] = field(default_factory=dict)


@dataclass
class Outcome:
    """Everything a run computed: report sections, the methods paragraph and the run record."""

    title: str
    sections: list[Section]
    methods: str
    run_info: dict[str, Any]
    sites: pd.DataFrame | None = None  # site attributes for the GeoPackage
    locations: Any = None  # GeoDataFrame of site points, or None
    skipped: list[tuple[str, str]] = field(default_factory=list)
    summary: list[str] = field(default_factory=list)

    @property
    def tables(self) -> dict[str, pd.DataFrame]:
        out: dict[str, pd.DataFrame] = {}
        for s in self.sections:
            out.update(s.tables)
        return out
