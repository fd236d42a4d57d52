"""Helpers shared by the report steps: p-value wording, sections, figures, strata, predictors."""

from __future__ import annotations

from collections.abc import Callable

import pandas as pd

from ..._errors import InputError
from .._model import Section
from .._pipeline import Context

__all__ = ["METRIC_NAMES", "_add_figure", "_fmt_p", "_numeric", "_predictors", "_section",
           "_strata"]


def _fmt_p(p: float) -> str:
    return f"p = {p:.3g}" if p >= 0.001 else "p < 0.001"


def _section(ctx: Context, key: str) -> Section | None:
    for s in ctx.sections:
        if s.key == key:
            return s
    return None


def _add_figure(ctx: Context, section: Section, name: str, caption: str,
                function: Callable[..., object], *args: object, **kwargs: object) -> None:
    try:
        fig = ctx.figure(function, *args, **kwargs)
    except InputError as exc:
        ctx.skipped.append((f"figure {name}", str(exc)))
        return
    if fig is not None:
        section.figures[name] = fig
        section.captions[name] = caption


METRIC_NAMES = {"bray-curtis": "Bray-Curtis", "jaccard": "Jaccard", "sorensen": "Sørensen",
                "ruzicka": "Růžička", "kulczynski": "Kulczynski", "hellinger": "Hellinger",
                "chord": "chord", "chi-square": "chi-square", "euclidean": "Euclidean",
                "manhattan": "Manhattan", "canberra": "Canberra",
                "morisita-horn": "Morisita-Horn"}


def _strata(ctx: Context) -> pd.Series | None:
    name = ctx.settings["design.strata"]
    if not name:
        return None
    env = ctx.survey.environment
    if name not in env.columns:
        raise InputError(f"`design.strata` names {name!r}, which the environmental table does "
                         "not have.", columns=[name])
    return env[name]


def _numeric(frame: pd.DataFrame) -> pd.DataFrame:
    keep = [c for c in frame.columns
            if pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(frame[c])]
    return frame.loc[:, keep]


def _predictors(ctx: Context) -> dict[str, object]:
    """Every predictor distance matrix by name: hypotheses, covariables, geography."""
    out: dict[str, object] = dict(ctx.results.get("hypothesis_distances", {}))
    if "covariables" in ctx.results:
        out["covariables"] = ctx.results["covariables"]
    if "geography" in ctx.results:
        out["geography"] = ctx.results["geography"]
    return out
