"""The report of a sweep folder: ``DIR/report/index.html`` and ``DIR/report/summary.md``.

It says what was run (sweep file, seed, library versions, machine, shots and
CPU time), shows the results table, the fits of
:func:`~codebench.analysis.analyze` with their intervals, the notes on fits
that could not be made, the figures (:mod:`codebench.figures`, reused when
``codebench figures`` already drew them from the same data), the decoder
speed and a list of cautions. One module per job:

- :mod:`.content`: what the report says (:class:`~.content.Report`, results and fit tables);
- :mod:`.run`: what was run, from the store; :mod:`.speed`: the decoder-speed table;
- :mod:`.cautions`: what to be careful about; :mod:`.blocks`: tables, badges, number formats;
- :mod:`.html` and :mod:`.markdown`: the two renderings.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from codebench.api import load_results
from codebench.figures import plain_analysis, render_figures
from codebench.files import make_folder, write_text
from codebench.report.cautions import FEW_FAILURES, SMALL_DISTANCE
from codebench.report.content import Report
from codebench.report.html import html_page
from codebench.report.markdown import markdown
from codebench.report.run import RunInfo, read_run_info
from codebench.report.speed import round_durations_us, speed_table

__all__ = ["FEW_FAILURES", "REPORT_DIR", "SMALL_DISTANCE", "RunInfo", "read_run_info", "round_durations_us",
           "speed_table", "write_report"]

REPORT_DIR = "report"


def write_report(folder: Path, frame: pd.DataFrame | None = None, analysis: object | None = None,
                 to: Path | None = None) -> Path:
    """Write ``folder/"report"/index.html`` and ``summary.md``; return the HTML path.

    ``to`` puts the report and its figures into another folder (a read-only
    or archived results folder is read, never written).

    ``frame`` defaults to :func:`~codebench.api.load_results` of ``folder`` and
    ``analysis`` to :func:`~codebench.analysis.analyze` of ``frame``. The
    figures in ``folder/"figures"`` are drawn first where they are missing or
    not current.
    """
    folder = Path(folder)
    if frame is None:
        frame = load_results(folder)
    problems: list[str] = []
    if analysis is None:
        records, problem = _analyze(frame)
        if problem:
            problems.append(problem)
    else:
        records = plain_analysis(analysis)
    target = folder if to is None else Path(to)
    figures = render_figures(target, frame, records)
    report = Report(folder, frame, records, read_run_info(folder), figures, problems)
    out_dir = make_folder(target / REPORT_DIR)
    index = out_dir / "index.html"
    write_text(index, html_page(report))
    write_text(out_dir / "summary.md", markdown(report))
    return index


def _analyze(frame: pd.DataFrame) -> tuple[dict[str, Any], str | None]:
    """Run the fits; a failure becomes a caution instead of stopping the report."""
    try:
        from codebench.analysis import analyze

        return plain_analysis(analyze(frame)), None
    except Exception as exc:  # noqa: BLE001 - the report must still be written
        return plain_analysis(None), f"the analysis failed ({type(exc).__name__}: {exc}); no fits are shown."

