"""A forecast's ``--out`` folder in the design-review page: its tables, figure, methods, cautions, break-even.

``codebench report FOLDER`` on a forecast's folder (it holds ``forecast.json``)
writes a page of its own; on a sweep folder, every subfolder holding a
forecast adds its sections to the sweep's page. The page reads
``forecast.json`` (the document ``codebench forecast --format json`` prints)
and embeds ``forecast.svg``, so it shows exactly what the forecast wrote.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from codebench.errors import ConfigError
from codebench.report.blocks import Caution, Table, e, g, integer, with_interval
from codebench.report.html import (
    cards,
    caution_html,
    esc,
    html_table,
    inline_svg,
    page_shell,
    png_link,
)
from codebench.report.markdown import md_table

__all__ = ["FORECAST_FILE", "forecast_folders", "forecast_markdown", "forecast_page", "forecast_sections",
           "load_forecast"]

FORECAST_FILE = "forecast.json"


def forecast_folders(folder: Path) -> list[Path]:
    """``folder`` itself if it holds a forecast, then its subfolders that do (sorted by name)."""
    found = [folder] if (folder / FORECAST_FILE).is_file() else []
    if folder.is_dir():
        found += sorted(sub for sub in folder.iterdir() if sub.is_dir() and (sub / FORECAST_FILE).is_file())
    return found


def load_forecast(folder: Path) -> dict[str, Any]:
    """The forecast document of ``folder``; a damaged one is one line naming the file."""
    path = folder / FORECAST_FILE
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ConfigError(f"{path}: not a forecast document codebench can read ({exc})".replace("\n", " ")) from None
    if not isinstance(doc, dict) or not isinstance(doc.get("distances"), list):
        raise ConfigError(f"{path}: not a forecast document (no 'distances' list).")
    return doc


def _what(doc: dict[str, Any]) -> str:
    improve = doc.get("improve") or {}
    what_if = (" with " + ", ".join(f"{k} x{v:g}" for k, v in improve.items())) if improve else ""
    return (f"{doc.get('device', 'device')}{what_if}: {doc.get('code', '')} ({doc.get('basis', '')}), "
            f"{doc.get('decoder', '')}")


def distance_table(doc: dict[str, Any]) -> Table:
    table = Table("forecast-distances", "Logical error per round by distance",
                  "Per distance: the per-round rate with its 95% interval, how it was obtained and the counts "
                  "behind it; flags say what to read with care (see the cautions).",
                  ["d", "rounds", "per round [95%]", "method", "shots", "failures", "flags"], numeric={0, 1, 2, 4, 5})
    for row in doc.get("distances") or []:
        table.rows.append([integer(row.get("distance")), integer(row.get("rounds")),
                           with_interval(row.get("per_round_rate"), row.get("low"), row.get("high"), e),
                           str(row.get("method", "")), integer(row.get("shots")), integer(row.get("failures")),
                           "; ".join(str(f) for f in row.get("flags") or []) or "-"])
    return table


def target_table(doc: dict[str, Any]) -> Table:
    table = Table("forecast-targets", "Distance and qubits for each target",
                  f"From the Lambda fit, {g(doc.get('lambda'), 3)} [{g(doc.get('lambda_low'), 3)}, "
                  f"{g(doc.get('lambda_high'), 3)}] per step of 2 in distance; beyond the sampled distances "
                  "these are extrapolations.", ["target per round", "d [range]", "qubits [range]", "note"],
                  numeric={0, 1, 2}, empty="no targets (no Lambda fit: see the cautions)")
    for t in doc.get("targets") or []:
        note = t.get("not_projected") or ("extrapolated beyond the sampled distances" if t.get("extrapolation")
                                          else "" if t.get("reachable", True) else "not reached")
        table.rows.append([e(t.get("target")),
                           f"{integer(t.get('distance'))} [{integer(t.get('distance_low'))}, "
                           f"{integer(t.get('distance_high'))}]",
                           f"{integer(t.get('qubits'))} [{integer(t.get('qubits_low'))}, "
                           f"{integer(t.get('qubits_high'))}]", str(note or "-")])
    return table


def break_even_table(doc: dict[str, Any]) -> Table:
    be = doc.get("break_even") or {}
    table = Table("forecast-break-even", "Break-even against an idle qubit",
                  f"The logical qubit against the device's best idle qubit ({be.get('best_qubit', '-')}: "
                  f"{g(be.get('idle_error_best'), 3)} per round of {g(be.get('round_duration_us'), 3)} us) and "
                  f"its median one ({g(be.get('idle_error_median'), 3)}). {be.get('definition', '')}",
                  ["d", "per round", "verdict"], numeric={0, 1})
    for row in be.get("distances") or []:
        table.rows.append([integer(row.get("distance")), e(row.get("per_round_rate")), str(row.get("verdict", ""))])
    return table


def _cautions(doc: dict[str, Any]) -> list[Caution]:
    out = [Caution("Caution", str(text)) for text in doc.get("cautions") or []]
    budget = doc.get("budget") or {}
    cut = budget.get("cut_short") or []
    if cut:
        out.append(Caution("Cut short by the time limit", "Sampling of " + ", ".join(map(str, cut)) + " ended at "
                           "the hard time limit: fewer shots than planned, wider intervals; rerun the forecast "
                           "with the same --out to resume."))
    notes = [str(n) for n in doc.get("notes") or []]
    if notes:
        out.append(Caution("Notes", "\n".join(notes)))
    return out or [Caution("Cautions", "None.", ok=True)]


def forecast_sections(folder: Path, doc: dict[str, Any], anchor: str = "forecast") -> list[tuple[str, str, str]]:
    """The page sections ``(anchor, title, html)`` of one forecast."""
    svg, png = folder / "forecast.svg", folder / "forecast.png"
    figure = ""
    if svg.is_file():
        link = png_link(png) if png.is_file() else ""
        figure = (f"<figure>{inline_svg(svg, 'forecast')}<figcaption>Per-round rate against distance with the "
                  f"Lambda fit (95% band), the targets and the idle-qubit lines; beside it, when a method "
                  f"extrapolated, what it extrapolated from. {link}</figcaption></figure>")
    method = esc(doc.get("method_note", ""))
    tables = "".join(f'<h3 id="{esc(anchor)}-{esc(t.key)}">{esc(t.title)}</h3><p class="intro">{esc(t.intro)}</p>'
                     f"{html_table(t)}" for t in (distance_table(doc), target_table(doc), break_even_table(doc)))
    budget = doc.get("budget") or {}
    budget_line = (f"Budget: {g(budget.get('work'), 3)} detector-shots ({g(budget.get('seconds'), 3)} s at the "
                   f"reference rate), {g(budget.get('work_spent'), 3)} spent; seed {doc.get('seed', '-')}.")
    title = "Forecast: " + _what(doc)
    return [
        (anchor, title, f'<p class="intro">{method}</p><p class="intro">{esc(budget_line)}</p>{figure}{tables}'),
        (f"{anchor}-cautions", "Forecast cautions and notes", "".join(caution_html(c) for c in _cautions(doc))),
    ]


def forecast_page(folder: Path, doc: dict[str, Any]) -> str:
    """The page of a forecast folder on its own."""
    targets = [t for t in doc.get("targets") or [] if t.get("distance") is not None]
    facts = [("Lambda", f"{g(doc.get('lambda'), 3)}"), ("round", f"{g(doc.get('round_duration_us'), 3)} us")]
    facts += [(f"target {e(t.get('target'))}", f"d = {integer(t.get('distance'))}, {integer(t.get('qubits'))} q")
              for t in targets]
    subtitle = f"Forecast folder {folder.resolve().name} \u00b7 seed {doc.get('seed', '-')}"
    return page_shell(_what(doc), subtitle, cards(facts), forecast_sections(folder, doc))


def forecast_markdown(doc: dict[str, Any]) -> str:
    """``summary.md`` of a forecast folder."""
    out = [f"# codebench forecast: {_what(doc)}", ""]
    for table in (distance_table(doc), target_table(doc), break_even_table(doc)):
        out += [f"## {table.title}", "", table.intro, "", md_table(table), ""]
    out += ["## Cautions and notes", ""] + [f"- **{c.title}**: {c.text}" for c in _cautions(doc)]
    return "\n".join(out) + "\n"
