"""Plan every figure of a sweep folder, draw those whose files are not current, remove the rest."""

from __future__ import annotations

from pathlib import Path
from typing import Any, cast

import matplotlib
import pandas as pd

from codebench.analysis.families import group_families
from codebench.figures import decoders, measured, paired, per_round, suppression
from codebench.figures.canvas import FigureFile, FigurePlan, save
from codebench.figures.data import plain_analysis
from codebench.figures.manifest import Manifest, plan_digest
from codebench.figures.style import STYLE
from codebench.files import make_folder

FIGURES_DIR = "figures"
#: File-name prefixes this package owns in ``DIR/figures`` (stale files with them are removed).
PREFIXES = tuple(f"{kind}__" for kind in (per_round.KIND, per_round.WHOLE_KIND, suppression.KIND, decoders.KIND,
                                          measured.KIND, paired.KIND))
_NEEDED = {"code", "basis", "noise", "decoder", "distance", "rounds", "p", "shots"}


def write_figures(folder: Path, frame: pd.DataFrame, analysis: Any) -> list[Path]:
    """Write every figure of ``frame`` and ``analysis`` into ``folder/"figures"``.

    Returns the figures' files (a PNG and an SVG per figure), whether drawn now
    or kept from an earlier run because they were current. Files of earlier
    runs that this run does not show are removed.
    """
    return [path for item in render_figures(folder, frame, analysis) for path in (item.png, item.svg)]


def plan_figures(frame: pd.DataFrame, analysis: Any) -> list[FigurePlan[Any]]:
    """Every figure ``frame`` and ``analysis`` call for, in display order, none drawn yet."""
    records = plain_analysis(analysis)
    has_rows = frame is not None and not frame.empty and _NEEDED <= set(frame.columns)
    families = group_families(frame) if has_rows else []
    plans: list[FigurePlan[Any]] = []
    for family in families:
        for make in (per_round.plan, per_round.whole_plan):
            item = make(family, records)
            if item is not None:
                plans.append(item)
    for family in families:
        plans += suppression.plans(family, records)
    for group in decoders.groups(families):
        comparison = decoders.plan(group)
        if comparison is not None:
            plans.append(comparison)
    plans += paired.plans(records)
    if has_rows:
        plans += measured.plans(frame)
    return plans


def render_figures(folder: Path, frame: pd.DataFrame, analysis: Any) -> list[FigureFile]:
    """Like :func:`write_figures`, returning what each figure shows.

    A figure is drawn only when its files are missing or stale
    (:mod:`codebench.figures.manifest`); ``FigureFile.drawn`` says which were.
    """
    folder = Path(folder)
    out_dir = make_folder(folder / FIGURES_DIR)
    plans = plan_figures(frame, analysis)
    manifest = Manifest(folder)
    files = {plan.stem: (out_dir / f"{plan.stem}.png", out_dir / f"{plan.stem}.svg") for plan in plans}
    digests = {plan.stem: plan_digest(plan) for plan in plans}
    stale = [plan for plan in plans if not manifest.current(plan.stem, digests[plan.stem], *files[plan.stem])]
    manifest.keep_only({plan.stem for plan in plans} - {plan.stem for plan in stale})
    if stale:
        # Saved before any file is overwritten: an interrupted run leaves no entry vouching for half-new files.
        manifest.save()
        with matplotlib.rc_context(cast(Any, STYLE)):
            for plan in stale:
                png, svg = files[plan.stem]
                save(plan.render(), png, svg, plan.stem)
                manifest.record(plan.stem, plan.kind, digests[plan.stem], png, svg)
    _remove_stale(out_dir, set(files))
    manifest.save()
    redrawn = {plan.stem for plan in stale}
    return [FigureFile(plan.stem, plan.kind, *files[plan.stem], plan.title, plan.caption, plan.stem in redrawn)
            for plan in plans]


def _remove_stale(out_dir: Path, keep: set[str]) -> None:
    for path in out_dir.iterdir():
        if path.suffix in (".png", ".svg") and path.name.startswith(PREFIXES) and path.stem not in keep:
            path.unlink()
