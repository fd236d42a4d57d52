"""A simulated survey written as a project folder, for the whole-run benchmarks."""

from __future__ import annotations

import shutil
from pathlib import Path

__all__ = ["write_project"]


def write_project(folder: Path, n_sites: int, *, permutations: int = 999, seed: int = 1,
                  extra: str = "") -> Path:
    """Write ``simulate_survey(n_sites)`` and the template project for it into `folder`.

    The project is the demo's template (every analysis on) pointed at the simulated tables;
    `extra` is appended to the file (for example a ``[permutations]`` key). Returns the
    project file.
    """
    from gradients.data import simulate_survey
    from gradients.data._demo import DEMO_DIR
    from gradients.report._demo import project_template

    folder = Path(folder)
    data = folder / "data"
    data.mkdir(parents=True, exist_ok=True)
    simulate_survey(n_sites, rng=seed).write(data)
    shutil.copyfile(DEMO_DIR / "screening.csv", data / "screening.csv")
    text = project_template(permutations=permutations, seed=seed)
    project = folder / "project.toml"
    project.write_text(text + extra, encoding="utf-8")
    return project
