"""The report as one self-contained HTML page.

Styles are inline, every figure is embedded (the SVG inline, the PNG as a
``data:`` URI behind a download link), and the page loads nothing from
anywhere. Every piece of text that comes from data (study labels, the sweep
file, notes) is escaped before it goes into the page.
"""

from __future__ import annotations

import base64
import datetime as _dt
import re
from html import escape
from pathlib import Path
from typing import Any

from codebench.api import versions
from codebench.figures.marks import MARKS_NOTE
from codebench.report.blocks import Badge, Caution, Cell, Table
from codebench.report.content import Report

_CSS = """
:root { --ink: #1f2430; --muted: #5d6472; --line: #e3e1da; --paper: #fbfaf6; --accent: #127a7a;
        --warn: #a76200; --warn-bg: #fff5e2; --bad: #a83232; --bad-bg: #fdeceb; --head: #17303f; }
* { box-sizing: border-box; }
body { margin: 0; background: #efede7; color: var(--ink); font: 15px/1.5 system-ui, sans-serif; }
header { background: var(--head); color: #fff; padding: 26px 0 22px; }
.wrap { max-width: 1260px; margin: 0 auto; padding: 0 24px; }
header .kicker { text-transform: uppercase; letter-spacing: .12em; font-size: 12px; color: #9fd3cf; }
header h1 { margin: 4px 0 6px; font-size: 30px; font-weight: 700; }
header p { margin: 0; color: #c9d4db; }
nav { margin-top: 14px; display: flex; flex-wrap: wrap; gap: 6px; }
nav a { color: #fff; text-decoration: none; font-size: 13px; padding: 3px 10px; border: 1px solid #3e5a6a;
        border-radius: 12px; }
nav a:hover { background: #24485b; }
main { padding-bottom: 48px; }
section { background: #fff; border: 1px solid var(--line); border-radius: 8px; padding: 18px 20px 20px;
          margin: 18px 0; }
h2 { margin: 0 0 12px; font-size: 21px; padding-left: 11px; border-left: 5px solid var(--accent); }
h3 { margin: 20px 0 6px; font-size: 16px; }
p.intro { margin: 2px 0 10px; color: var(--muted); font-size: 14px; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(170px, 1fr)); gap: 12px; margin: 18px 0; }
.card { background: #fff; border: 1px solid var(--line); border-radius: 8px; padding: 12px 16px;
        border-top: 4px solid var(--accent); }
.card .label { color: var(--muted); font-size: 12px; text-transform: uppercase; letter-spacing: .06em; }
.card .value { font-size: 22px; font-weight: 700; font-variant-numeric: tabular-nums; overflow-wrap: anywhere; }
.card.alert { border-top-color: var(--bad); }
.scroll { overflow-x: auto; max-width: 100%; }
table { border-collapse: collapse; width: 100%; font-size: 13px; font-variant-numeric: tabular-nums; }
th { text-align: left; background: #f1efe8; color: #3a404c; font-weight: 600; font-size: 12.5px; }
th, td { padding: 5px 7px; border-bottom: 1px solid var(--line); vertical-align: top; }
td.num { text-align: right; }
td .ci { white-space: nowrap; font-size: 12px; color: var(--muted); }
td .badge { white-space: normal; }
tbody tr:nth-child(even) td { background: #faf9f6; }
tr.few td { background: var(--warn-bg) !important; }
tr.incomplete td { background: var(--bad-bg) !important; }
tr.extrapolated td { background: #fffaf0 !important; }
td.empty { color: var(--muted); font-style: italic; }
table.facts th { width: 190px; background: none; color: var(--muted); font-weight: 500; }
table.facts td { overflow-wrap: anywhere; }
.badge { display: inline-block; padding: 0 8px; border-radius: 10px; font-size: 12px; font-weight: 600;
         white-space: nowrap; }
.badge.warn { background: #fbe2b5; color: #6d4100; }
.badge.bad { background: #f6c9c5; color: #7a1f1f; }
.badge.ok { background: #d3ece9; color: #0d5656; }
pre { background: #1f2430; color: #ebe8df; padding: 14px 16px; border-radius: 6px; overflow-x: auto;
      max-width: 100%; white-space: pre-wrap; overflow-wrap: anywhere; font: 13px/1.45 ui-monospace, monospace; }
ul.notes { margin: 0; padding-left: 20px; }
ul.notes li { margin: 3px 0; }
.figures { display: grid; grid-template-columns: repeat(auto-fill, minmax(min(560px, 100%), 1fr)); gap: 16px; }
figure { margin: 0; min-width: 0; border: 1px solid var(--line); border-radius: 8px; padding: 10px 12px; background: #fff; }
figure svg, figure img { display: block; width: 100%; max-width: 100%; height: auto; }
figcaption { font-size: 13px; color: var(--muted); margin-top: 4px; }
figcaption a { color: var(--accent); font-weight: 600; text-decoration: none; margin-left: 6px; }
figcaption .file { color: #8a909b; font-size: 12px; overflow-wrap: anywhere; }
.split { display: grid; grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); gap: 24px; }
.split pre { margin: 0; max-height: 560px; overflow: auto; }
h3.first { margin-top: 0; }
@media (max-width: 900px) { .split { grid-template-columns: minmax(0, 1fr); } }
.caution { border-left: 5px solid var(--warn); background: var(--warn-bg); border-radius: 4px;
           padding: 10px 14px; margin: 12px 0; }
.caution h3 { margin: 0 0 4px; color: #6d4100; }
.caution p { margin: 4px 0; }
.caution table { background: #fff; margin-top: 8px; }
.caution.ok { border-left-color: var(--accent); background: #eef7f6; }
.caution.ok h3 { color: #0d5656; }
footer { color: var(--muted); font-size: 12px; padding: 8px 0 24px; }
"""


def esc(text: Any) -> str:
    """``text`` escaped for HTML (quotes too)."""
    return escape(str(text), quote=True)


_INTERVAL = re.compile(r"\[[^\]\s]*, [^\]\s]*\]")


def _cell(cell: Cell) -> str:
    """A cell's HTML: names may break after an underscore, an interval ``[low, high]`` breaks off whole."""
    if isinstance(cell, Badge):
        return f'<span class="badge {esc(cell.kind)}">{esc(cell.text)}</span>'
    text = esc(cell).replace("_", "_<wbr>")
    return _INTERVAL.sub(lambda m: f'<span class="ci">{m.group(0)}</span>', text)


def html_table(table: Table, css: str = "") -> str:
    """``table`` as an HTML table in a horizontally scrolling box."""
    head = "".join(f"<th>{esc(h)}</th>" for h in table.headers)
    body = []
    for i, row in enumerate(table.rows):
        row_css = table.row_classes[i] if i < len(table.row_classes) else ""
        cells = "".join(
            f'<td class="num">{_cell(c)}</td>' if j in table.numeric else f"<td>{_cell(c)}</td>"
            for j, c in enumerate(row))
        body.append(f'<tr class="{esc(row_css)}">{cells}</tr>' if row_css else f"<tr>{cells}</tr>")
    if not body:
        body.append(f'<tr><td class="empty" colspan="{len(table.headers)}">{esc(table.empty)}</td></tr>')
    klass = f' class="{esc(css)}"' if css else ""
    return (f'<div class="scroll"><table{klass}><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


_SVG_OPEN = re.compile(r"<svg\b[^>]*>", re.S)
_METADATA = re.compile(r"\s*<metadata>.*?</metadata>", re.S)


def inline_svg(path: Path, label: str) -> str:
    """The SVG file as an inline element: no XML prolog, scaled by CSS, labelled for screen readers."""
    text = path.read_text(encoding="utf-8")
    match = _SVG_OPEN.search(text)
    if match is None:
        return ""
    opening = re.sub(r'\s(width|height)="[^"]*"', "", match.group(0))
    opening = opening[:-1].rstrip("/") + f' role="img" aria-label="{esc(label)}">'
    return opening + _METADATA.sub("", text[match.end():]).strip()


def png_link(path: Path) -> str:
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    return f'<a download="{esc(path.name)}" href="data:image/png;base64,{data}">PNG</a>'


_FIGURE_KINDS = (
    ("per_round_vs_p", "Logical error per round against p",
     "One curve per distance; where the per-round curves cross, the pseudo-thresholds and the line where "
     "the logical error equals the physical one."),
    ("failure_vs_p", "Failure of the whole experiment against p",
     "One curve per distance; the threshold estimate, from these curves, with its interval."),
    ("decoders_vs_p", "Decoders compared", "Colour: distance; line style and marker: decoder."),
    ("decoder_difference", "Decoders on the same shots",
     "Two decoders' difference in failure probability (whole experiment), one panel per distance: the paired "
     "95% interval (bold) beside the interval without the pairing (thin, grey); see the table under Fits."),
    ("measured_vs_d", "Measured beside simulated",
     "Simulated per-round error against distance with the points decoded from measured records beside it."),
    ("lambda_vs_d", "Suppression with distance",
     "One figure per family, at up to three representative p: the points, the \u039b fit with its 95% band "
     "(dashed where extrapolated), the targets and the distance each needs. Every p's fit is in the "
     "\u039b and projection tables under Fits."),
)



def _figures(report: Report) -> str:
    if not report.figures:
        return ('<p class="intro">No figures: a figure needs a family of points with at least two distances '
                "(see the notes).</p>")
    parts = [f'<p class="intro">{esc(MARKS_NOTE)}</p>']
    known = {kind for kind, _, _ in _FIGURE_KINDS}
    kinds = list(_FIGURE_KINDS) + [(k, k, "") for k in sorted({f.kind for f in report.figures} - known)]
    for kind, title, intro in kinds:
        items = []
        for fig in (f for f in report.figures if f.kind == kind):
            items.append(
                f'<figure id="fig-{esc(fig.stem)}">{inline_svg(fig.svg, fig.caption)}'
                f"<figcaption>{esc(fig.caption)} {png_link(fig.png)}"
                f' <span class="file">{esc(fig.stem)}.png / .svg</span></figcaption></figure>')
        if items:
            parts.append(f'<h3>{esc(title)}</h3><p class="intro">{esc(intro)}</p>'
                         f'<div class="figures">{"".join(items)}</div>')
    return "".join(parts)


def caution_html(caution: Caution) -> str:
    paragraphs = "".join(f"<p>{esc(line)}</p>" for line in caution.text.split("\n") if line)
    table = html_table(caution.table) if caution.table is not None else ""
    return f'<div class="caution{" ok" if caution.ok else ""}"><h3>{esc(caution.title)}</h3>{paragraphs}{table}</div>'


def html_page(report: Report) -> str:
    """The whole page."""
    run = report.run
    facts = cards(report.facts(), {label for label, value in report.facts()
                                   if label == "incomplete points" and value != "0"})
    run_rows = "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>" for k, v in report.run_rows())
    sweep_text = (f"<pre>{esc(run.sweep_text)}</pre>" if run.sweep_text.strip()
                  else '<p class="intro">No sweep file text was recorded (the sweep was given as a mapping).</p>')
    fits = "".join(
        f'<h3 id="{esc(t.key)}">{esc(t.title)}</h3><p class="intro">{esc(t.intro)}</p>{html_table(t)}'
        for t in report.fits())
    notes = report.notes()
    notes_html = ('<ul class="notes">' + "".join(f"<li>{esc(n)}</li>" for n in notes) + "</ul>" if notes
                  else '<p class="intro">No notes: every fit that applies was made.</p>')
    cautions = "".join(caution_html(c) for c in report.cautions())
    results = report.results()
    speed = report.speed
    sections = [
        ("run", "What was run", f'<div class="split"><div><table class="facts">{run_rows}</table></div>'
                                f'<div><h3 class="first">Sweep file</h3>{sweep_text}</div></div>'),
        ("figures", "Figures", _figures(report)),
        ("cautions", "Cautions", cautions),
        ("fits", "Fits", f'<p class="intro">{esc(report.settings_text())}</p>{fits}'),
        ("notes", "Notes on the fits", notes_html),
        ("speed", speed.title, f'<p class="intro">{esc(speed.intro)}</p>{html_table(speed)}'),
        ("results", "Results", f'<p class="intro">{esc(results.intro)}</p>{html_table(results)}'),
    ]
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    subtitle = f"Sweep folder {report.folder.name} \u00b7 seed {run.seed or 'not recorded'} \u00b7 written {stamp}"
    return page_shell(report.title, subtitle, facts, sections + list(report.extra_sections))


def page_shell(title: str, subtitle: str, facts: str, sections: list[tuple[str, str, str]]) -> str:
    """The page around its sections ``(anchor, title, html)``: header with navigation, cards, footer."""
    nav = "".join(f'<a href="#{key}">{esc(name)}</a>' for key, name, _ in sections)
    body = "".join(f'<section id="{key}"><h2>{esc(name)}</h2>{content}</section>'
                   for key, name, content in sections)
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        f"<title>codebench report: {esc(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
        f'<header><div class="wrap"><div class="kicker">codebench report</div>'
        f"<h1>{esc(title)}</h1><p>{esc(subtitle)}</p><nav>{nav}</nav></div></header>\n"
        f'<main class="wrap"><div class="cards">{facts}</div>{body}</main>\n'
        f'<footer class="wrap">Written by codebench {esc(versions().get("codebench", "unknown"))}. '
        "Intervals are 95%. Figures are embedded; the same files are in the figures folder next to this "
        "report.</footer>\n</body>\n</html>\n")


def cards(facts: list[tuple[str, str]], alert: set[str] | None = None) -> str:
    """Key facts as cards; those named in ``alert`` drawn as alerts."""
    return "".join(
        f'<div class="card{" alert" if label in (alert or set()) else ""}">'
        f'<div class="label">{esc(label)}</div><div class="value">{esc(value)}</div></div>'
        for label, value in facts)
