"""The self-contained HTML report: one file, figures embedded, no network needed.

All user text (site IDs, taxon and variable names, hypothesis names, titles, messages) goes
through :func:`~gradients.report._safety.esc`; figures are embedded as base64 ``data:`` URLs
of their SVG files (sharp on screen and in print, and isolated from each other and from the
page).
"""

from __future__ import annotations

import base64
import numbers
from importlib import resources

import numpy as np
import pandas as pd

from ._model import Outcome, Section
from ._safety import esc

__all__ = ["MAX_ROWS", "format_cell", "render_html"]

#: Content security policy of the page: nothing may be loaded from anywhere, no script may
#: run; only the inline stylesheet and the embedded (data: URL) figures are allowed.
CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"

#: Most rows of a table printed in the page; the full table is in ``tables/``.
MAX_ROWS = 25


def _css() -> str:
    return resources.files("gradients.report").joinpath("assets/report.css").read_text("utf-8")


def format_cell(column: str, value: object) -> tuple[str, bool]:
    """Text for one table cell and whether it is numeric (right-aligned)."""
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return "", True
    if isinstance(value, bool | np.bool_):
        return ("yes" if value else "no"), False
    if isinstance(value, numbers.Integral):
        return str(int(value)), True
    if isinstance(value, numbers.Real):
        v = float(value)
        if not np.isfinite(v):
            return str(v), True
        if "pvalue" in column:
            return (f"{v:.3g}" if v >= 0.001 else f"{v:.1e}"), True
        if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e5):
            return f"{v:.3g}", True
        return f"{v:.3f}".rstrip("0").rstrip(".") if abs(v) < 100 else f"{v:.1f}", True
    return str(value), False


#: Text cells longer than this get a wide column.
LONG_TEXT = 40


def table_html(name: str, frame: pd.DataFrame, *, limit: int = MAX_ROWS,
               columns: list[str] | None = None) -> str:
    """An HTML table of ``frame`` (index included), at most ``limit`` rows."""
    if columns:
        frame = frame.loc[:, [c for c in columns if c in frame.columns]]
    shown = frame.head(limit)
    index_name = frame.index.name or ""
    has_index = not isinstance(frame.index, pd.RangeIndex)
    head = "".join(
        ([f'<th class="text">{esc(index_name)}</th>'] if has_index else [])
        + [f'<th class="{"" if pd.api.types.is_numeric_dtype(frame[c]) else "text"}" '
           f'title="{esc(c)}">{esc(str(c).replace("_", " "))}</th>' for c in frame.columns]
    )
    rows = []
    for label, row in shown.iterrows():
        cells = [f'<td class="text">{esc(label)}</td>'] if has_index else []
        for c in frame.columns:
            text, numeric = format_cell(str(c), row[c])
            classes = [] if numeric else ["text"]
            if not numeric and len(text) > LONG_TEXT:
                classes.append("long")
            if c == "verdict":
                classes.append(_verdict_class(text))
            attr = f' class="{" ".join(classes)}"' if classes else ""
            cells.append(f"<td{attr}>{esc(text)}</td>")
        rows.append("<tr>" + "".join(cells) + "</tr>")
    more = ""
    if len(frame) > limit:
        more = (f'<p class="more">First {limit} of {len(frame)} rows; all of them are in '
                f"<code>tables/{esc(name)}.csv</code>.</p>")
    return (f'<div class="table-wrap"><table><thead><tr>{head}</tr></thead><tbody>'
            + "".join(rows) + f"</tbody></table></div>{more}")


def _verdict_class(text: str) -> str:
    if text.startswith("supported"):
        return "verdict-supported"
    if text.startswith("partly"):
        return "verdict-partly"
    return "verdict-not"


def section_html(section: Section, figures: dict[str, bytes], files: dict[str, str]) -> str:
    parts = [f'<section id="{esc(section.key)}"><h2>{esc(section.title)}</h2>']
    parts += [f"<p>{esc(p)}</p>" for p in section.paragraphs]
    for name, fig in section.figures.items():
        data = figures.get(name)
        if data is None:
            continue
        caption = section.captions.get(name, "")
        src = "data:image/svg+xml;base64," + base64.b64encode(data).decode("ascii")
        parts.append(
            f'<figure><img src="{src}" alt="{esc(caption or name)}" '
            f'data-figure="{esc(name)}"><figcaption>{esc(caption)} '
            f'<span class="mono">(figures/{esc(files.get(name, name))}.png, .svg)</span>'
            "</figcaption></figure>"
        )
        del fig
    for name in section.shown:
        parts.append(f"<h3>{esc(name.replace('_', ' ').capitalize())}</h3>")
        parts.append(table_html(name, section.tables[name],
                                columns=section.display.get(name)))
    others = [n for n in section.tables if n not in section.shown]
    if others:
        links = ", ".join(f"<code>tables/{esc(n)}.csv</code>" for n in others)
        parts.append(f'<p class="more">Tables: {links}.</p>')
    if section.notes:
        parts.append("<h3>Notes and caveats</h3>")
        parts.append('<ol class="notes">' + "".join(f"<li>{esc(n)}</li>" for n in section.notes)
                     + "</ol>")
    parts.append("</section>")
    return "\n".join(parts)


def render_html(outcome: Outcome, figures: dict[str, bytes], files: dict[str, str]) -> str:
    """The whole report page. ``figures`` maps figure names to SVG bytes."""
    info = outcome.run_info
    toc = ['<li><a href="#summary">Summary</a></li>']
    body = []
    summary = "".join(f"<li>{esc(s)}</li>" for s in outcome.summary)
    survey = info.get("survey", {})
    body.append(
        '<section id="summary"><h2>Summary</h2>'
        f"<p>{esc(survey.get('n_sites', '?'))} sites, {esc(survey.get('n_taxa', '?'))} taxa, "
        f"{esc(survey.get('n_variables', '?'))} environmental variables"
        f"{'; site locations given' if survey.get('locations') else '; no site locations'}. "
        f"{esc(info['parameters'].get('permutations.count', ''))} permutations, seed "
        f"{esc(info['parameters'].get('permutations.seed', ''))}.</p>"
        + (f'<div class="key-findings"><ul>{summary}</ul></div>' if summary else "")
        + "</section>"
    )
    for s in outcome.sections:
        toc.append(f'<li><a href="#{esc(s.key)}">{esc(s.title)}</a></li>')
        body.append(section_html(s, figures, files))
    decisions = info.get("decisions", [])
    if decisions or outcome.skipped:
        toc.append('<li><a href="#inputs">Input decisions</a></li>')
        items = "".join(f"<li>{esc(d)}</li>" for d in decisions)
        skipped = "".join(f"<li>{esc(name)}: {esc(why)}</li>" for name, why in outcome.skipped)
        body.append(
            '<section id="inputs"><h2>Input decisions</h2>'
            + (f'<p>What was done to the input tables, in order:</p><ul class="log">{items}</ul>'
               if items else "")
            + (f'<p>Analyses not run:</p><ul class="log">{skipped}</ul>' if skipped else "")
            + "</section>"
        )
    toc.append('<li><a href="#methods">Methods</a></li>')
    paragraphs = "".join(f"<p>{esc(p)}</p>" for p in outcome.methods.split("\n\n") if p.strip())
    body.append(
        '<section id="methods"><h2>Methods</h2><p>The paragraph below is also in '
        f'<code>methods.md</code>.</p><blockquote class="methods">{paragraphs}</blockquote>'
        "</section>"
    )
    toc.append('<li><a href="#files">Files</a></li>')
    file_items = "".join(f"<li><code>{esc(f)}</code></li>" for f in info.get("files", []))
    body.append(
        '<section id="files"><h2>Files in this folder</h2>'
        "<p>Every table is a CSV file in <code>tables/</code> and a sheet of "
        "<code>tables.xlsx</code>; text cells that a spreadsheet would read as a formula start "
        "with a single quote. Every figure is in <code>figures/</code> as PNG and SVG. "
        "<code>run.json</code> records software versions, input checksums, every parameter and "
        f'the timings.</p><ul class="files">{file_items}</ul></section>'
    )
    caution = (
        '<div class="caution"><strong>Caution.</strong> Permutation p-values are not corrected '
        "for multiple testing unless a column says so. Screening guideline values are not "
        "site-specific criteria. Decisions about contaminated land or water rest with the local "
        "regulator and licensed professionals.</div>"
    )
    version = esc(info.get("software", {}).get("gradients", ""))
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f'<meta http-equiv="Content-Security-Policy" content="{CSP}">'
        f"<title>{esc(outcome.title)}</title><style>{_css()}</style></head><body>"
        f'<div class="page"><nav class="toc" aria-label="Contents"><ol>{"".join(toc)}</ol>'
        f'</nav><main><header class="title"><h1>{esc(outcome.title)}</h1>'
        f'<p class="meta">Report written by gradients {version}.</p></header>{caution}'
        + "\n".join(body)
        + f"<footer>gradients {version}. Numbers in this page are rounded; the tables hold "
        "them in full.</footer></main></div></body></html>\n"
    )
