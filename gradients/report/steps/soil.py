"""Soil and water steps: units, guideline quotients against a screening table, texture classes.

The units step only says in the methods how the environmental columns' units were read and
converted (the conversions themselves are the data stage's, listed in the input decisions).
The screening step runs before the environment step: it computes the guideline quotients of
the survey against the project's screening table and, when a hypothesis, the covariables or
the surfaces name ``mean_quotient``, adds the mean quotient to the survey as a derived
variable. The texture step gives each site's USDA texture class and the texture triangle.
Quotients are shown with the screening-only caution; texture sums that miss 100 follow the one
rule for compositions (an error naming the samples, unless
``[environment] renormalise_compositions = true``).
"""

from __future__ import annotations

import pandas as pd

from ..._errors import InputError, format_items
from .._model import Section
from .._pipeline import Context
from ._common import _add_figure

__all__ = ["DERIVED_QUOTIENT", "screening_step", "texture_step", "units_step"]

#: Name of the derived variable a hypothesis may use when the project names a screening table.
DERIVED_QUOTIENT = "mean_quotient"


def units_step(ctx: Context) -> None:
    units = dict(getattr(ctx.survey, "units", {}) or {})
    if not units:
        return
    by_unit: dict[str, list[str]] = {}
    for col, unit in units.items():
        by_unit.setdefault(unit, []).append(col)
    listed = "; ".join(f"{format_items(cols, quote=False)} "
                       + ("on the pH scale" if unit == "pH" else f"in {unit}")
                       for unit, cols in by_unit.items())
    ctx.methods.append(
        "Units of the environmental variables were read with the pint library and each "
        f"variable was expressed in one unit of its quantity: {listed} (conversions are listed "
        "in the input decisions).")


def _wanted(ctx: Context, name: str) -> bool:
    named = [v for vs in ctx.hypotheses.values() for v in vs]
    named += list(ctx.settings["design.covariables"]) + list(ctx.settings["environment.surfaces"])
    named += list(ctx.settings["environment.log10"])
    return name in named


def screening_step(ctx: Context) -> None:
    from ...data import Decision, guideline_quotients
    from ...data._screening import CAUTION
    from ...plot import quotient_map

    path = ctx.settings.get("environment.screening")
    if not path:
        return
    kind = ctx.settings["environment.screening_kind"]
    try:
        result = guideline_quotients(ctx.survey, path, kind=kind)
    except InputError as exc:
        raise InputError(f"`environment.screening` ({path}): {exc}", file=str(path),
                         sites=exc.sites, columns=exc.columns) from None
    ctx.results["screening"] = result
    extra = ctx.results.setdefault("input_decisions", [])
    if result.unmeasured:
        extra.append(
            f"The screening table lists {format_items(result.unmeasured, quote=False)} "
            f"({kind} values), which were not measured; they were left out of the guideline "
            "quotients.")
    compared = format_items(list(result.quotients.columns), quote=False)
    if _wanted(ctx, DERIVED_QUOTIENT):
        decision = Decision(
            "derived",
            f"The mean {kind} quotient over {compared} was added as the variable "
            f"{DERIVED_QUOTIENT!r}, which the project "
            "names in its analyses.", len(result.table), columns=(DERIVED_QUOTIENT,))
        ctx.survey = ctx.survey._with_derived(result.table[[DERIVED_QUOTIENT]], decision)

    table = result.table
    sec = Section("screening", "Guideline quotients (screening values only)")
    sec.paragraphs.append(
        f"Each measured value was divided by its {kind} value in the screening table "
        f"({compared}); a quotient above 1 is "
        "an exceedance, and the mean quotient summarises the variables compared at a site. "
        + "; ".join(f"{int((table['exceedance'] == c).sum())} site(s): {c}"
                    for c in result.exceedance_classes) + ".")
    sec.paragraphs.append(CAUTION)
    exceed = result.exceedances.reset_index()
    sec.tables["guideline_exceedances"] = exceed.set_index("variable")
    sec.shown.append("guideline_exceedances")
    sec.display["guideline_exceedances"] = ["screening_value", "unit", "kind", "n_compared",
                                            "n_exceeded", "max_quotient"]
    per_site = result.quotients.add_suffix("_quotient")
    per_site = pd.concat([per_site, table], axis=1)
    per_site.index.name = "site"
    sec.tables["guideline_quotients"] = per_site
    sec.notes.extend(result.notes)
    ctx.sections.append(sec)
    ctx.site_columns["mean_quotient"] = table["mean_quotient"]
    ctx.site_columns["n_exceeded"] = table["n_exceeded"]
    ctx.site_columns["exceedance"] = table["exceedance"]
    if ctx.survey.locations is not None:
        _add_figure(ctx, sec, "guideline_quotient_map",
                    f"Sites by the number of values above their {kind} value; point area grows "
                    "with the mean quotient. Screening values only: not site-specific criteria.",
                    quotient_map, result, ctx.survey.locations)
    sources = sorted(set(result.values["source"]))
    ctx.methods.append(
        f"Measured values were compared with the {kind} values of a screening table "
        f"({'; '.join(sources)}): the quotient of each value over its screening value, "
        "exceedances (quotients above 1) and the mean quotient per site over the variables "
        "compared (MacDonald, Ingersoll & Berger 2000).")


def texture_step(ctx: Context) -> None:
    from ...data import texture_class
    from ...plot import texture_triangle

    parts = tuple(ctx.settings.get("environment.texture") or ())
    if not parts:
        return
    env = ctx.survey.environment
    absent = [p for p in parts if p not in env.columns]
    if absent:
        raise InputError(f"`environment.texture` names {format_items(absent)}, which the "
                         "environmental table does not have.", columns=absent)
    renormalise = bool(ctx.settings["environment.renormalise_compositions"])
    sand, silt, clay = parts
    try:
        classes = texture_class(env[sand], env[silt], env[clay], renormalise=renormalise)
    except InputError as exc:
        message = str(exc).replace("renormalise=True",
                                   "[environment] renormalise_compositions = true")
        raise InputError(f"`environment.texture`: {message}", sites=exc.sites,
                         columns=exc.columns) from None
    decision = classes.attrs.get("decision")
    if decision is not None:
        ctx.results.setdefault("input_decisions", []).append(decision)
    ctx.results["texture"] = classes
    table = env.loc[:, list(parts)].copy()
    table["texture_class"] = classes.astype(object)
    table.index.name = "site"
    counts = classes.value_counts(sort=False)
    counts = counts[counts > 0].rename("n_sites").to_frame()
    counts.index = pd.Index([str(c) for c in counts.index], name="texture_class")
    sec = Section("texture", "Soil texture classes")
    sec.paragraphs.append(
        f"Each site's texture class from its {sand}, {silt} and {clay} percentages, by the "
        "class definitions of the USDA Soil Survey Manual: "
        + "; ".join(f"{c} ({n})" for c, n in counts["n_sites"].items()) + ".")
    sec.tables["texture_classes"] = table
    sec.tables["texture_class_counts"] = counts
    sec.shown.append("texture_class_counts")
    ctx.sections.append(sec)
    ctx.site_columns["texture_class"] = classes.astype(object)
    _add_figure(ctx, sec, "texture_triangle",
                "Sites on the soil texture triangle over the USDA class regions (boundaries "
                "from the class inequalities of the Soil Survey Manual).", texture_triangle,
                table, parts=parts, renormalise=renormalise)
    ctx.methods.append(
        f"Soil texture classes were assigned from {sand}, {silt} and {clay} with the USDA class "
        "definitions (Soil Science Division Staff 2017)"
        + ("; samples whose parts did not sum to 100 were renormalised, as listed in the input "
           "decisions." if decision is not None else "."))
