"""Ranking step: which variables line up with community turnover, in what order, and where.

The candidate variables enter as the project transforms them (``[environment] log10`` columns
as ``log10(name)``, each composition as its isometric log-ratio balances named
``ilr(sand | silt)``, ...), restricted to ``ranking.variables`` when given. The ranking's own
permutation counts (``ranking.permutations``, ``ranking.turnover_permutations``) are used
rather than ``permutations.count``: each permutation repeats a whole subset search or a model
fit.
"""

from __future__ import annotations

import math

import pandas as pd

from ..._errors import InputError, format_items
from .._model import Section
from .._pipeline import Context, Skip
from ._common import _add_figure, _fmt_p, _numeric, _strata

__all__ = ["ranking_check", "ranking_environment", "ranking_step"]

#: Leading predictors drawn in the figure of turnover curves.
CURVES_SHOWN = 6
#: Columns of the ranking table printed in the report (all are in the CSV).
SHOWN_COLUMNS = ["rank", "importance", "importance_pvalue", "in_best_subset",
                 "selection_order", "vector_r2", "mantel", "mantel_pvalue", "collinear"]


def _balance_names(parts: tuple[str, ...]) -> list[str]:
    """Names of the ilr balances of a composition, as the transform defines them."""
    return [f"ilr({', '.join(parts[:i])} | {parts[i]})" for i in range(1, len(parts))]


def ranking_environment(ctx: Context) -> tuple[pd.DataFrame, dict[str, str]]:
    """The candidate variables in analysis units, and how each name maps to the project's.

    Returns the table (columns named ``log10(Cu)``, ``ilr(sand | silt)``, ...) and, for each
    log10 column, its original name (used to state ranges in the original units).
    """
    from ...distance import transform_environment

    env = ctx.survey.environment
    numeric = list(_numeric(env).columns)
    wanted = list(ctx.settings["ranking.variables"]) or numeric
    absent = [v for v in wanted if v not in env.columns]
    if absent:
        raise InputError(f"`ranking.variables` names {format_items(absent)}, which the "
                         f"environmental table does not have (it has {format_items(env.columns)}).",
                         columns=absent)
    text = [v for v in wanted if v not in numeric]
    if text:
        raise InputError(f"`ranking.variables` names {format_items(text)}, which are not "
                         "numeric: only measured gradients are ranked.", columns=text)
    compositions = []
    for comp in ctx.settings["environment.compositions"]:
        inside = [p for p in comp if p in wanted]
        if inside and len(inside) != len(comp):
            raise InputError(
                f"`ranking.variables` names part of the composition {list(comp)} "
                f"({format_items(inside)}): its parts enter together as log-ratio balances, so "
                "list all of them or none.", columns=list(comp))
        if inside:
            compositions.append(tuple(comp))
    part_of = {p: comp for comp in compositions for p in comp}
    out = pd.DataFrame(index=env.index)
    logs: dict[str, str] = {}
    for v in wanted:
        if v in part_of:
            comp = part_of[v]
            if v != next(p for p in wanted if p in comp):
                continue  # the composition entered at its first listed part
            table = transform_environment(env.loc[:, list(comp)], {comp: "ilr"}).table
            for name, column in zip(_balance_names(comp), table.columns, strict=True):
                out[name] = table[column]
        elif v in ctx.settings["environment.log10"]:
            out[f"log10({v})"] = transform_environment(env.loc[:, [v]], {v: "log10"}).table[v]
            logs[f"log10({v})"] = v
        else:
            out[v] = env[v]
    return out, logs


def _interval_text(name: str, low: float, high: float, logs: dict[str, str]) -> str:
    if name in logs:
        return (f"between {logs[name]} = {_number(10 ** low)} and {_number(10 ** high)} "
                f"({name} {low:.2f} to {high:.2f})")
    return f"between {_number(low)} and {_number(high)}"


def _number(v: float) -> str:
    if v == 0 or not math.isfinite(v):
        return f"{v:g}"
    digits = max(0, 2 - math.floor(math.log10(abs(v))))
    return f"{round(v, digits):,.{digits}f}"


def _summary(res, logs: dict[str, str]) -> str:
    top = list(res.order[:3])
    lead = ", ".join(top[:-1]) + f" and {top[-1]}" if len(top) > 1 else top[0]
    text = f"{lead} rank highest against community turnover"
    model = res.turnover.table
    env_rows = model.drop(index="geography", errors="ignore")
    tested = env_rows[env_rows["importance"] > 0]
    if len(tested):
        first = next((v for v in res.order if v in tested.index), tested.index[0])
        low, high = tested.loc[first, ["low", "high"]]
        if math.isfinite(low) and math.isfinite(high):
            text += (f"; most of the turnover along {first} (half of it) happens "
                     f"{_interval_text(first, float(low), float(high), logs)}")
    return text + "."


def ranking_check(ctx: Context) -> None:
    """The candidates can be put in analysis units, and there are enough of them and of sites."""
    from ...ranking._inputs import MIN_SITES

    env, _ = ranking_environment(ctx)
    if env.shape[1] < 2:
        raise Skip("fewer than two numeric variables to rank (see `ranking.variables`)")
    n = ctx.results["community"].n
    if n < MIN_SITES:
        raise Skip(f"ranking variables needs at least {MIN_SITES} sites; the survey has {n}")


def ranking_step(ctx: Context) -> None:
    from ...plot import turnover_curves
    from ...ranking import rank_variables

    env, logs = ranking_environment(ctx)
    n_perm = int(ctx.settings["ranking.permutations"])
    n_turn = int(ctx.settings["ranking.turnover_permutations"])
    res = rank_variables(ctx.results["community"], env, geo=ctx.results.get("geography"),
                         n_resamples=n_perm, turnover_resamples=n_turn,
                         rng=ctx.rng("ranking"), strata=_strata(ctx))
    ctx.results["ranking"] = res
    sub, model, sel = res.subsets, res.turnover, res.selection
    sec = Section("ranking", "Which variables line up with turnover")
    sec.paragraphs.append(_summary(res, logs))
    sec.paragraphs.append(
        "Each variable is measured five ways against the community dissimilarities: whether "
        "it belongs to the best-matching subsets of variables, the height of its fitted "
        "turnover function, when it enters a forward selection, how well the ordination "
        "predicts it (vector fit r2) and its Mantel correlation on its own. The table lines "
        "these up and sorts by their mean rank. Variables in analysis units: "
        + ", ".join(env.columns) + ".")
    geo_row = model.table.loc["geography"] if "geography" in model.table.index else None
    sec.paragraphs.append(
        f"Best subset: {' + '.join(sub.best)} (Spearman rho = {sub.statistic:.3f}; "
        f"{_fmt_p(sub.pvalue)} from repeating the whole search under each permutation; the "
        f"same subset tested alone, ignoring the search, would get {_fmt_p(sub.pvalue_naive)}"
        "). The turnover model explains "
        f"{100 * model.deviance_explained:.1f} % of the deviance of the dissimilarities"
        + (f"; geographic distance accounts for a turnover of {geo_row['importance']:.2f}"
           + (f" ({_fmt_p(geo_row['pvalue'])})" if math.isfinite(geo_row["pvalue"]) else "")
           if geo_row is not None else "") + ".")
    sec.paragraphs.append(
        f"Permutations used here: {sub.n_resamples} for the subset search, forward selection, "
        f"vector fits and Mantel tests, and {model.n_resamples} per turnover predictor (each "
        "repeats a whole search or a model fit; raise them with `ranking.permutations` and "
        "`ranking.turnover_permutations`).")
    table = res.table.copy()
    sec.tables["variable_ranking"] = table
    sec.shown.append("variable_ranking")
    sec.display["variable_ranking"] = SHOWN_COLUMNS
    subsets = sub.table.set_index("size")
    sec.tables["best_subsets"] = subsets
    sec.shown.append("best_subsets")
    sec.tables["turnover_predictors"] = model.table
    sec.shown.append("turnover_predictors")
    sec.tables["turnover_curves"] = model.curves
    flagged = table.index[table["collinear"].to_numpy(dtype=bool)].tolist()
    if flagged:
        sec.notes.append(
            f"Collinearity caution: {', '.join(map(str, flagged))} are strongly correlated with "
            "another variable (|r| > 0.8) or with a combination of others (variance inflation "
            "factor above 10; see collinear_with and vif). They carry much the same "
            "information: which of them ranks higher, enters a subset or a model first, or "
            "takes the larger turnover function is not meaningful, and a variable ranked low "
            "may matter as much as its correlate ranked high.")
    sec.notes.append(res.sort_rule)
    sec.notes.extend(n for n in res.notes if n.startswith("Forward selection"))
    sec.notes.extend(sub.notes)
    sec.notes.extend(model.notes)
    if sel is not None:
        sec.notes.append(f"Forward selection: {sel.notes[1]}")
    ctx.sections.append(sec)
    caption = (f"Fitted turnover along the {min(CURVES_SHOWN, len(model.table))} leading "
               "predictors of the turnover model, on one vertical scale: each curve rises by "
               "its importance; the shaded, bold stretch is the shortest interval holding half "
               "of its turnover. Faded curves are not significant.")
    _add_figure(ctx, sec, "turnover_curves", caption, turnover_curves, model, top=CURVES_SHOWN,
                alpha=ctx.settings["output.level"])
    ctx.methods.append(
        f"Variables were ranked against community turnover by best-subset rank matching "
        f"(Clarke & Ainsworth 1993; {sub.search} search, Spearman correlation with Euclidean "
        f"distances of z-scored variables, the best subset tested by repeating the whole "
        f"search under each of {sub.n_resamples} permutations), a generalized dissimilarity "
        f"model (Ferrier et al. 2007; I-splines, Ramsay 1988, with knots at the minimum, "
        f"median and maximum, non-negative coefficients, "
        + ("geographic distance as one more predictor, " if geo_row is not None else "")
        + f"each predictor tested by {model.n_resamples} permutations of its values with the "
        f"model refitted), forward selection with the double stopping criterion (Blanchet, "
        f"Legendre & Borcard 2008), vector fits on two PCoA axes and Spearman Mantel tests, "
        f"each with {sub.n_resamples} permutations; variables were sorted by their mean rank "
        f"over these measures, and pairs with |r| > 0.8 or a variance inflation factor above "
        f"10 flagged as collinear.")
