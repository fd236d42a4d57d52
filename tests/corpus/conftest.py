"""Builders of the bad-input corpus: one small valid project, written afresh for every case.

A case starts from :func:`write_project` (16 invented sites from the bundled simulator, CSV
tables, a CSV of longitudes and latitudes, a project file with few permutations) and breaks one
thing. Tables are written by pandas and project files by :func:`toml_text`, so that a case
states only what it changes.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path
from typing import Any

import pandas as pd
import pytest

from gradients.data import simulate_survey

N_SITES = 16


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    raise TypeError(value)


def toml_text(data: dict[str, Any]) -> str:
    """A TOML file for ``data`` (top-level values, then one [section] per dict, nested once)."""
    lines = [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in data.items()
             if not isinstance(v, dict)]
    for name, table in data.items():
        if not isinstance(table, dict):
            continue
        lines.append(f"[{name}]")
        lines += [f"{json.dumps(k, ensure_ascii=False)} = {_toml_value(v)}"
                  for k, v in table.items() if not isinstance(v, dict)]
        for sub, inner in table.items():
            if isinstance(inner, dict):
                lines.append(f"[{name}.{sub}]")
                lines += [f"{json.dumps(k, ensure_ascii=False)} = {_toml_value(v)}"
                          for k, v in inner.items()]
    return "\n".join(lines) + "\n"


def base_settings() -> dict[str, Any]:
    """The project file of the valid base project, as a dict."""
    return {
        "title": "Corpus base project",
        "inputs": {"community": "community.csv", "environment": "environment.csv",
                   "locations": "locations.csv", "crs": "EPSG:4326",
                   "below_detection": "half-limit"},
        "environment": {"log10": ["Cu", "Zn"], "compositions": [["sand", "silt", "clay"]],
                        "factors": ["habitat"], "surfaces": ["Cu"]},
        "hypotheses": {"contamination": ["Cu", "Zn"], "texture": ["sand", "silt", "clay"],
                       "water": ["pH", "conductivity"]},
        "analyses": {"starts": 2},
        "ranking": {"permutations": 9, "turnover_permutations": 0},
        "permutations": {"count": 9, "seed": 3},
        "output": {"folder": "report"},
    }


def base_tables() -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """Community, environment and locations of the base project (site IDs as a column)."""
    truth = simulate_survey(n_sites=N_SITES, n_taxa=10, rng=5)
    community = truth.community.reset_index()
    env = truth.environment.copy()
    env = env[["site", "Cu", "Zn", "sand", "silt", "clay", "pH", "conductivity", "habitat"]]
    loc = truth.locations
    locations = pd.DataFrame({"site": list(loc.index),
                              "longitude": [p.x for p in loc.geometry],
                              "latitude": [p.y for p in loc.geometry]})
    return community, env, locations


def write_table(frame: pd.DataFrame, path: Path) -> Path:
    frame.to_csv(path, index=False, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    return path


class Workspace:
    """One case's folder: the project file and its tables, to break before a command runs."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.settings = base_settings()
        self.community, self.environment, self.locations = base_tables()

    @property
    def project(self) -> Path:
        return self.root / "project.toml"

    @property
    def out(self) -> Path:
        return self.root / "report"

    def write(self) -> Path:
        write_table(self.community, self.root / "community.csv")
        write_table(self.environment, self.root / "environment.csv")
        write_table(self.locations, self.root / "locations.csv")
        if not self.project.exists():
            self.project.write_text(toml_text(self.settings), encoding="utf-8")
        return self.project


@pytest.fixture
def workspace(tmp_path: Path) -> Workspace:
    root = tmp_path / "case"
    root.mkdir()
    return Workspace(root)
