"""The report as Markdown (``summary.md``): the same tables, with links to the figure files."""

from __future__ import annotations

from codebench.figures.marks import MARKS_NOTE
from codebench.report.blocks import Badge, Cell, Table
from codebench.report.content import Report


def _cell(cell: Cell) -> str:
    text = f"**{cell.text}**" if isinstance(cell, Badge) else str(cell)
    text = text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")
    return text.replace("<", "&lt;").replace(">", "&gt;")


def md_table(table: Table) -> str:
    """``table`` as a pipe table (its ``empty`` text in italics when it has no rows)."""
    if not table.rows:
        return f"_{table.empty}_"
    align = ["---:" if i in table.numeric else "---" for i in range(len(table.headers))]
    lines = ["| " + " | ".join(_cell(h) for h in table.headers) + " |", "|" + "|".join(align) + "|"]
    lines += ["| " + " | ".join(_cell(c) for c in row) + " |" for row in table.rows]
    return "\n".join(lines)


def _fence(text: str) -> str:
    fence = "~~~" if "```" in text else "```"
    return f"{fence}toml\n{text.rstrip()}\n{fence}"


def markdown(report: Report) -> str:
    """The whole ``summary.md``."""
    run = report.run
    out = [f"# codebench report: {report.title}", "", "## What was run", ""]
    out += [f"- **{key}**: {value}" for key, value in report.run_rows()]
    out += ["", "### Sweep file", ""]
    out.append(_fence(run.sweep_text) if run.sweep_text.strip() else "_No sweep file text was recorded._")
    results = report.results()
    out += ["", "## Results", "", results.intro, "", md_table(results), "", "## Fits", ""]
    for table in report.fits():
        out += [f"### {table.title}", "", table.intro, "", md_table(table), ""]
    out += ["## Notes on the fits", ""]
    notes = report.notes()
    out += [f"- {n}" for n in notes] if notes else ["_No notes._"]
    speed = report.speed
    out += ["", f"## {speed.title}", "", speed.intro, "", md_table(speed)]
    out += ["", "## Figures", ""]
    if report.figures:
        out += [MARKS_NOTE, ""]
        for fig in report.figures:
            out += [f"![{fig.title}](../figures/{fig.png.name})", "",
                    f"{fig.caption} (`{fig.png.name}`, `{fig.svg.name}`)", ""]
    else:
        out += ["_No figures (a figure needs a family of points with at least two distances)._", ""]
    out += ["## Cautions", ""]
    for caution in report.cautions():
        out += [f"### {caution.title}", ""]
        out += [line for line in caution.text.split("\n") if line]
        if caution.table is not None:
            out += ["", md_table(caution.table)]
        out.append("")
    return "\n".join(out).rstrip() + "\n"
