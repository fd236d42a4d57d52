"""The partition step: "Space and environment", the raw-data answer to how much of the
community's turnover is environment, how much is space and how much the two share.

Where the matrix steps test distance matrices, this step works on the raw tables with the
partition stage (:mod:`gradients.partition`):

1. spatial eigenvectors (dbMEM) of the distance between sites the project chose (geodesic,
   straight-line or in-stream: the geography step's one matrix), forward-selected on the
   community with the double stopping criterion;
2. the variables of every hypothesis, in analysis units (log10, isometric log-ratios of
   compositions), forward-selected together the same way, given the covariables;
3. variation partitioning of the community between the selected environment and the selected
   eigenvectors (and the covariables, when the project has them);
4. for each hypothesis, its pure fraction: all its variables given the other hypotheses, the
   covariables and the selected eigenvectors (the controls of its partial Mantel test, with
   space described by the eigenvectors), tested by permutation. The verdict step puts these
   beside the partial Mantel results.

A hypothesis whose variables cannot enter a linear model (a constant column, collinear columns
such as the parts of a composition not listed in ``environment.compositions``, more columns
than the sites allow) is left out with a note naming the key to change; without site
locations the step is skipped with that reason.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from ..._errors import InputError, format_items
from .._model import Section
from .._pipeline import Context, Skip
from ._common import _add_figure, _fmt_p, _strata
from .community import _hypothesis_table

__all__ = ["partition_check", "partition_step"]

#: Most spatial eigenvectors drawn in the map figure.
MAP_VECTORS = 4


def _percent(value: float) -> str:
    return f"{100 * value:.1f} %"


def _key_hint(name: str, exc: InputError, ctx: Context) -> str:
    """A partition-stage refusal of one hypothesis, said with the project keys to change."""
    message = str(exc)
    where = f"`hypotheses.{name}`" if name != "covariables" else "`design.covariables`"
    hint = ""
    if message.startswith("Collinear columns"):
        comps = {p for c in ctx.settings["environment.compositions"] for p in c}
        if not set(exc.columns or ()) <= comps:
            hint = (" If they are the parts of a composition (they sum to a constant), list "
                    "them in `environment.compositions` so that they enter as log-ratios, or "
                    f"drop one part from {where}.")
    elif "sites cannot fit" in message:
        hint = f" Name fewer variables in {where} (or in `design.covariables`)."
    elif "the same value at every site" in message:
        hint = f" Remove the column from {where}."
    return f"{where}: {message}{hint}"


def _tables(ctx: Context, d: Any) -> tuple[dict[str, pd.DataFrame], pd.DataFrame | None,
                                              list[str]]:
    """Each usable hypothesis' variables in analysis units, the covariables, and the notes on
    what was left out. A table is usable when it can enter a linear model on its own."""
    from ...partition import dbrda

    def usable(name: str, table: pd.DataFrame) -> str | None:
        try:
            dbrda(d, table, n_resamples=0)
        except InputError as exc:
            return _key_hint(name, exc, ctx)
        return None

    problems: list[str] = []
    cov = None
    if ctx.settings["design.covariables"]:
        cov = _hypothesis_table(ctx, tuple(ctx.settings["design.covariables"])).rename(
            columns=ctx.results.get("analysis_names", {}))
        why = usable("covariables", cov)
        if why is not None:
            raise Skip(why)
    names = ctx.results.get("analysis_names", {})
    tables: dict[str, pd.DataFrame] = {}
    for name, variables in ctx.hypotheses.items():
        table = _hypothesis_table(ctx, variables).rename(columns=names)
        why = usable(name, table)
        if why is not None:
            problems.append(why + f" The hypothesis {name!r} was left out of this section.")
            continue
        tables[name] = table
    return tables, cov, problems


def _pooled(tables: dict[str, pd.DataFrame]) -> tuple[pd.DataFrame, dict[str, str]]:
    """Every hypothesis' columns side by side, and the hypothesis of each column (names that
    clash between hypotheses, such as two compositions' ``ilr_1``, get the hypothesis added)."""
    counts: dict[str, int] = {}
    for table in tables.values():
        for c in table.columns:
            counts[str(c)] = counts.get(str(c), 0) + 1
    parts, owner = [], {}
    for name, table in tables.items():
        renamed = table.rename(columns=lambda c, name=name: f"{c} ({name})"
                               if counts[str(c)] > 1 else str(c))
        parts.append(renamed)
        owner.update(dict.fromkeys(renamed.columns, name))
    return pd.concat(parts, axis=1), owner


def _selection_rows(result: Any, which: str, owner: dict[str, str] | None) -> pd.DataFrame:
    table = result.table.copy()
    table.insert(0, "selection", which)
    if owner is not None:
        table.insert(2, "hypothesis", [owner.get(v, "") for v in table["variable"]])
    return table


def _global_words(result: Any, what: str) -> str:
    """One sentence on a forward selection: its global test and what it kept."""
    from ...partition import STOP_REASONS

    chosen = list(result.selected)
    head = (f"{what}: global model adjusted R2 = {result.r2_adjusted:.3f} "
            f"({_fmt_p(result.pvalue)})")
    if not chosen:
        return f"{head}; nothing selected ({STOP_REASONS[result.stop_reason]})"
    return (f"{head}; {len(chosen)} selected ({', '.join(chosen)}), stopped because "
            f"{STOP_REASONS[result.stop_reason]}")


def _chosen(result: Any, candidates: pd.DataFrame, what: str, notes: list[str]) -> pd.DataFrame:
    """The selected columns; every candidate when the selection stopped at its first step on
    the adjusted-R2 rule although the global model is significant.

    That stop means the best single candidate already explains as much as all of them (the
    others only cost degrees of freedom), not that nothing explains the community: the global
    model, tested first and significant, is then the table used, and the note says so.
    """
    if result.selected or result.stop_reason not in ("r2", "both") or \
            result.pvalue > result.alpha:
        return result.subset(candidates)
    first = result.table.iloc[0]
    notes.append(f"The forward selection of the {what} stopped at its first step: "
                 f"{first['variable']} alone has adjusted R2 {first['r2_adjusted']:.4g}, above "
                 f"the {result.r2_adjusted:.4g} of all {candidates.shape[1]} together, which "
                 "the double criterion does not allow. The global model being significant "
                 f"({_fmt_p(result.pvalue)}), all {candidates.shape[1]} were kept.")
    return candidates


def partition_check(ctx: Context) -> None:
    """Space and environment need hypotheses and the distance between sites."""
    if ctx.hypotheses and ctx.results.get("geography") is None:
        raise Skip("no site locations were given (`[inputs] locations`): without them space "
                   "cannot be separated from the environment")


def partition_step(ctx: Context) -> None:
    from ...partition import dbrda, forward_select, partition_variation, spatial_eigenvectors
    from ...plot import partition as fractions_figure
    from ...plot import spatial_eigenvector_map

    if not ctx.hypotheses:
        return
    geo = ctx.results["geography"]
    d = ctx.results["community"]
    n = d.n
    level = ctx.settings["partition.selection_level"]
    strata = _strata(ctx)
    perms = ctx.n_resamples
    tables, cov, problems = _tables(ctx, d)
    if not tables:
        raise Skip("no hypothesis can enter a linear model: " + " ".join(problems))
    cov_width = 0 if cov is None else cov.shape[1]

    # -- space: spatial eigenvectors of the project's distance, forward-selected ----------------
    sev = spatial_eigenvectors(geo)
    if sev.vectors.shape[1] == 0:
        raise Skip("the sites carry no spatial pattern that spatial eigenvectors can describe "
                   "(no eigenvector of their distances has positive spatial autocorrelation)")
    room = n - 2 - cov_width
    candidates = sev.vectors
    notes: list[str] = []
    if candidates.shape[1] > room:
        candidates = candidates.iloc[:, :room]
        notes.append(f"Only the {room} broadest of the {sev.vectors.shape[1]} spatial "
                     f"eigenvectors were candidates: with {n} sites the global model of the "
                     "forward selection can hold no more.")
    space_sel = forward_select(d, candidates, covariables=cov, alpha=level, n_resamples=perms,
                               rng=ctx.rng("partition:space"), strata=strata)
    space = _chosen(space_sel, candidates, "spatial eigenvectors", notes)

    # -- environment: every hypothesis' variables, forward-selected together ------------------
    pooled, owner = _pooled(tables)
    try:
        env_sel = forward_select(d, pooled, covariables=cov, alpha=level, n_resamples=perms,
                                 rng=ctx.rng("partition:environment"), strata=strata)
    except InputError as exc:
        raise Skip(f"the hypotheses' variables cannot be selected together: {exc} Name fewer "
                   "variables in [hypotheses] or `design.covariables`, or add sites.") from None
    environment = _chosen(env_sel, pooled, "hypotheses' variables", notes)

    # -- the fractions --------------------------------------------------------------------------
    parts = None
    if environment.shape[1] and space.shape[1]:
        blocks = [environment, space] + ([cov] if cov is not None else [])
        names = ["environment", "space"] + (["covariables"] if cov is not None else [])
        try:
            parts = partition_variation(d, *blocks, names=names, n_resamples=perms,
                                        rng=ctx.rng("partition:fractions"), strata=strata)
        except InputError as exc:
            problems.append(f"The fractions could not be computed: {exc}")

    # -- each hypothesis alone, given the others, the covariables and space --------------------
    rows = []
    for name, table in tables.items():
        controls = [tables[o] for o in tables if o != name]
        words = [o for o in tables if o != name]
        if cov is not None:
            controls.append(cov)
            words.append("covariables")
        if space.shape[1]:
            controls.append(space)
            words.append(f"space ({space.shape[1]} eigenvectors)")
        try:
            res = dbrda(d, table, covariables=pd.concat(controls, axis=1) if controls else None,
                        n_resamples=perms, rng=ctx.rng(f"partition:{name}"), strata=strata)
        except InputError as exc:
            problems.append(_key_hint(name, exc, ctx) + f" No pure fraction for {name!r}.")
            continue
        rows.append({"hypothesis": name, "variables": ", ".join(table.columns),
                     "df": res.df, "pure_fraction": res.r2_adjusted,
                     "statistic": res.statistic, "pvalue": res.pvalue,
                     "controls": ", ".join(words) or "none"})
    by_hypothesis = pd.DataFrame(rows).set_index("hypothesis") if rows else None
    ctx.results["partition"] = {"fractions": parts, "space": space_sel,
                                "environment": env_sel, "eigenvectors": sev,
                                "hypotheses": by_hypothesis}
    _section_of(ctx, sev, space_sel, env_sel, owner, parts, by_hypothesis, notes, problems,
                fractions_figure, spatial_eigenvector_map, list(space.columns),
                list(environment.columns))


def _summary(parts: Any) -> str:
    """The fractions in plain words (two or three tables)."""
    t = parts.table.set_index("fraction")
    env = t.loc["environment only"]
    sp = t.loc["space only"]
    shared = parts.fraction("environment", "space")
    given = "space and the covariables are" if "covariables" in parts.names else "space is"
    text = (f"In plain words: the environment explains {_percent(env.r2_adjusted)} of the "
            f"community's turnover once {given} accounted for ({_fmt_p(env.pvalue)}); space "
            f"alone explains {_percent(sp.r2_adjusted)} ({_fmt_p(sp.pvalue)}); the two share "
            f"{_percent(shared)}, which cannot be credited to either")
    if "covariables" in parts.names:
        text += (f"; the covariables alone {_percent(parts.fraction('covariables'))}, and the "
                 "rest of their shares are in the table")
    return text + f"; {_percent(t.loc['unexplained', 'r2_adjusted'])} is not explained."


def _section_of(ctx: Context, sev: Any, space_sel: Any, env_sel: Any, owner: dict[str, str],
                parts: Any, by_hypothesis: pd.DataFrame | None, notes: list[str],
                problems: list[str], fractions_figure: Any, map_figure: Any,
                space_used: list[str], env_used: list[str]) -> None:
    geo = ctx.results["geography"]
    metric = geo.metric or "geographic"
    level = ctx.settings["partition.selection_level"]
    sec = Section("partition", "Space and environment: how much of the turnover is "
                               "environment, space, or both")
    n_vec = sev.vectors.shape[1]
    chosen_env = env_used
    sec.paragraphs.append(
        "The matrix tests above work on distance matrices, and Mantel-type tests lose power "
        "and can mislead when space and environment are confounded (Legendre, Fortin & Borcard "
        "2015); this section answers on the raw data, by distance-based redundancy analysis of "
        "the community dissimilarities (Legendre & Anderson 1999; McArdle & Anderson 2001). "
        "Space is described by spatial "
        "eigenvectors (distance-based Moran's eigenvector maps; Dray, Legendre & Peres-Neto "
        f"2006) of the {metric} distances between sites: {n_vec} describe positive spatial "
        f"autocorrelation, from the broadest pattern to the finest, and {len(space_used)} "
        "were forward-selected on the community (or kept, see the notes). The environment is "
        "the variables of every hypothesis in analysis units, forward-selected together: "
        f"{', '.join(f'{v} ({owner[v]})' for v in chosen_env) or 'none'}. Both selections "
        "use the double stopping criterion of Blanchet, Legendre & Borcard (2008) at "
        f"{level}: the global model must be significant, and each variable enters only while "
        "its partial test is significant and the adjusted R2 stays within that of the global "
        "model. Fractions are adjusted R2 (Peres-Neto et al. 2006) combined as in Borcard, "
        "Legendre & Drapeau (1992).")
    sec.paragraphs.append(_global_words(space_sel, "Spatial eigenvectors") + "; "
                          + _global_words(env_sel, "environment") + ".")
    if parts is not None:
        sec.paragraphs.append(_summary(parts))
        table = parts.table.set_index("fraction")
        sec.tables["partition_fractions"] = table
        sec.shown.append("partition_fractions")
        sec.display["partition_fractions"] = ["kind", "df", "r2_adjusted", "testable",
                                              "statistic", "pvalue"]
    elif not space_used:
        sec.paragraphs.append(
            "No spatial eigenvector was selected: beyond the covariables, space explains no "
            "turnover these tests can detect, so there is nothing to share with the "
            "environment and no fractions were computed.")
    elif not env_used:
        sec.paragraphs.append(
            "No environmental variable was selected: the hypotheses' variables together "
            "explain no turnover these tests can detect, so no fractions were computed.")
    controls = "nothing else"
    if by_hypothesis is not None:
        words = ((["the other hypotheses"] if len(ctx.hypotheses) > 1 else [])
                 + (["the covariables"] if ctx.settings["design.covariables"] else [])
                 + (["the selected spatial eigenvectors"] if space_used else []))
        controls = (", ".join(words[:-1]) + " and " + words[-1] if len(words) > 1 else
                    words[0] if words else "nothing else")
        sec.paragraphs.append(
            f"Each hypothesis on its own: all its variables given {controls}, the controls of "
            "its partial Mantel test with space described by the eigenvectors (partial "
            "distance-based redundancy analysis, residuals of the model of the controls "
            "permuted): "
            + "; ".join(f"{h} pure fraction {r.pure_fraction:.3f} ({_fmt_p(r.pvalue)})"
                        for h, r in by_hypothesis.iterrows())
            + ". The verdict table shows these beside the partial Mantel results.")
        sec.tables["partition_hypotheses"] = by_hypothesis
        sec.shown.append("partition_hypotheses")
    selection = [_selection_rows(space_sel, "space", None),
                 _selection_rows(env_sel, "environment", owner)]
    selection = [t for t in selection if len(t)]
    if selection:
        sel = pd.concat(selection, ignore_index=True)
        sel["hypothesis"] = sel["hypothesis"].fillna("") if "hypothesis" in sel else ""
        sec.tables["partition_selection"] = sel.set_index(["selection", "order"])
        sec.shown.append("partition_selection")
    vectors = sev.table.rename(columns={"scale": "scale_km"}).copy()
    vectors["selected"] = [v in space_used for v in vectors.index]
    sec.tables["spatial_eigenvectors"] = vectors
    for name in space_used:
        ctx.site_columns[name] = sev.vectors[name]
    sec.notes.extend([
        "A shared fraction is turnover that the environment and space explain together, "
        "because the environment is itself spatially structured: it cannot be credited to "
        "either. A gradient that changes smoothly across the survey (a plume spreading from "
        "one source, a texture gradient down a valley) is described by the spatial "
        "eigenvectors as well as by its own variables, so its pure fraction can be small even "
        "when it drives the community: its effect then sits in the shared fraction.",
        "Space alone holds every spatially structured effect that the environment's linear "
        "terms do not capture: unmeasured variables, curved (for example unimodal) responses "
        "to the measured ones, and dispersal. A large space-only fraction is not by itself "
        "evidence of a spatial process.",
        "Tests of fractions built from forward-selected variables (the selected eigenvectors "
        "and environmental variables) are conditional on that selection: the double stopping "
        "criterion limits, but does not remove, their optimism. The pure fraction of each "
        "hypothesis uses all its variables, so only its control for space was selected.",
        *notes, *problems])
    spectrum = [note for res in (parts, space_sel) if res is not None for note in res.notes
                if "eigenvalues of the centred matrix are negative" in note]
    if spectrum:  # said once, without the Python options it ends with
        sec.notes.append(spectrum[0].split(" With a large share")[0])
    sec.notes.extend(n for n in sev.notes if not n.startswith("Built from"))
    ctx.sections.append(sec)
    if parts is not None:
        _add_figure(ctx, sec, "partition_fractions", "Community variation split into the part "
                    "the environment explains alone, the part it shares with space (hatched: "
                    "it cannot be credited to either), the part space explains alone and the "
                    "unexplained rest (adjusted R2).", fractions_figure, parts)
    shown = sorted(space_used, key=list(sev.vectors.columns).index)[:MAP_VECTORS]
    if shown:
        _add_figure(ctx, sec, "spatial_eigenvectors", "The broadest of the selected spatial "
                    "eigenvectors over the sites: circles of one colour form the patches of "
                    "the pattern each describes; the area of a circle is the size of the "
                    "value.", map_figure, sev, ctx.results["site_points"], vectors=shown,
                    network=ctx.results.get("network"), distance_unit="km")
    ctx.methods.append(_methods(sev, space_used, env_used, parts, by_hypothesis, metric, level,
                                controls))


def _methods(sev: Any, space_used: list[str], env_used: list[str], parts: Any,
             by_hypothesis: pd.DataFrame | None, metric: str, level: float,
             controls: str) -> str:
    out = (f"Space and environment were separated on the raw data: spatial eigenvectors "
           f"(distance-based Moran's eigenvector maps; Borcard & Legendre 2002; Dray, Legendre "
           f"& Peres-Neto 2006) of the {metric} distances between sites (threshold "
           f"{sev.threshold:.3g} km, the longest edge of a minimum spanning tree; "
           f"{sev.vectors.shape[1]} with positive Moran's I) and the hypotheses' variables were "
           "each forward-selected with the double stopping criterion (Blanchet, Legendre & "
           f"Borcard 2008; alpha = {level}), giving {len(space_used)} eigenvectors and "
           f"{format_items(env_used, quote=False) or 'no variable'}")
    if parts is not None:
        t = parts.table.set_index("fraction")
        out += ("; variation partitioning (Borcard, Legendre & Drapeau 1992) by "
                "distance-based redundancy analysis (Legendre & Anderson 1999; McArdle & "
                "Anderson 2001) with adjusted R2 (Peres-Neto et al. 2006) gave environment "
                f"only {t.loc['environment only', 'r2_adjusted']:.3f} "
                f"({_fmt_p(t.loc['environment only', 'pvalue'])}), space only "
                f"{t.loc['space only', 'r2_adjusted']:.3f} "
                f"({_fmt_p(t.loc['space only', 'pvalue'])}), shared "
                f"{parts.fraction('environment', 'space'):.3f} and unexplained "
                f"{t.loc['unexplained', 'r2_adjusted']:.3f}")
    if by_hypothesis is not None:
        out += (f"; the pure fraction of each hypothesis, given {controls}, tested by "
                "permuting the residuals of the reduced model, was " + "; ".join(
                    f"{h} {r.pure_fraction:.3f} ({_fmt_p(r.pvalue)})"
                    for h, r in by_hypothesis.iterrows()))
    return out + ". Tests of fractions built from selected variables are conditional on the " \
                 "selection."

