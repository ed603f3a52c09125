"""Cautions: what a reader must know before trusting the numbers (drift, extrapolation, thin counts)."""

from __future__ import annotations

from typing import Any

import pandas as pd

from codebench.figures import chosen_threshold
from codebench.figures.style import FEW_FAILURES as FIGURE_FEW_FAILURES
from codebench.report.blocks import (
    DASH,
    Caution,
    Table,
    e,
    family_text,
    finite,
    g,
    integer,
    row_dicts,
    with_interval,
)
from codebench.report.run import incomplete
from codebench.results.store import UNLISTED

#: Points with fewer failures than this are listed under the cautions.
FEW_FAILURES = FIGURE_FEW_FAILURES  # one threshold: the figures draw these points hollow
#: Distances up to this are "small" for the finite-size caution on crossings.
SMALL_DISTANCE = 5
#: Points whose whole-experiment failure probability exceeds this have a near-saturated per-round rate.
SATURATION = 0.4


def cautions(frame: pd.DataFrame, analysis: dict[str, Any], problems: list[str]) -> list[Caution]:
    """Every caution, in display order (those with nothing to report say so)."""
    out = [Caution("Analysis", problem) for problem in problems]
    out.append(_drift_caution(analysis))
    out.append(_extrapolation_caution(analysis))
    out.append(_few_failures_caution(frame))
    out.append(_saturation_caution(frame))
    if "study" in frame.columns and (frame["study"] == UNLISTED).any():
        listed_not = frame[frame["study"] == UNLISTED]
        out.append(Caution("Points the sweep file no longer lists", f"{len(listed_not)} stored point(s) are not in "
                           "the sweep file of the latest run (it was edited after they were sampled); shown because "
                           "--all was given, under the study '(not in the sweep file)', counted by the latest "
                           "run's stopping rule.", points_table("unlisted", listed_not)))
    stopped = incomplete(frame)
    if len(stopped):
        table = points_table("incomplete-points", stopped)
        out.append(Caution("Incomplete points", f"{len(stopped)} point(s) stopped before their stopping rule "
                           "was met (an interrupted run). Their counts are valid but smaller than planned; run "
                           "the same sweep again on this folder to resume them.", table))
    else:
        out.append(Caution("Incomplete points", "None: every point met its stopping rule.", ok=True))
    return out


def _drift_caution(analysis: dict[str, Any]) -> Caution:
    thresholds = [r for r in analysis.get("thresholds") or [] if isinstance(r, dict)
                  and finite(r.get("threshold")) is not None]
    if not thresholds:
        return Caution("Finite-size drift of crossings", "No threshold was estimated, so none can drift; the "
                       "notes say why.", ok=True)
    lines = []
    families: dict[str, list[dict[str, Any]]] = {}
    for r in thresholds:
        families.setdefault(family_text(r), []).append(r)
    for name, records in families.items():
        crossings = sorted((r for r in records if r.get("method") == "crossing"),
                           key=lambda r: min(int(d) for d in r.get("distances") or [0]))
        chosen = chosen_threshold(records)
        parts = [f"d = {'/'.join(str(d) for d in r.get('distances') or [])}: {g(r['threshold'], 3)}"
                 for r in crossings]
        fss = [r for r in records if r.get("method") == "finite_size_scaling"]
        if fss:
            parts.append(f"FSS: {g(fss[0]['threshold'], 3)}")
        small = any(min(int(d) for d in r.get("distances") or [0]) <= SMALL_DISTANCE for r in crossings)
        line = f"{name}: " + "; ".join(parts)
        if small:
            line += f" (crossings involving d \u2264 {SMALL_DISTANCE} carry the most finite-size bias)"
        if chosen is not None:
            line += f"; shown in the figures: {g(chosen['threshold'], 3)}."
        lines.append(line)
    text = ("Curves of small distances do not cross at the asymptotic threshold: the crossing point moves as the "
            "distances grow, by more than its statistical interval when the counts are large. Prefer the "
            "finite-size-scaling estimate or the crossing of the largest distances, and read a gap between "
            "them as a systematic uncertainty.")
    return Caution("Finite-size drift of crossings", text + "\n" + "\n".join(lines))


def _extrapolation_caution(analysis: dict[str, Any]) -> Caution:
    projections = [r for r in analysis.get("projections") or [] if isinstance(r, dict)]
    flagged = [r for r in projections if r.get("extrapolation")]
    if not projections:
        return Caution("Extrapolation beyond the sampled distances", "No projection was made.", ok=True)
    if not flagged:
        return Caution("Extrapolation beyond the sampled distances",
                       "Every projected distance lies within the sampled range.", ok=True)
    table = Table("extrapolated", "", "", ["family", "values of p", "largest fitted d", "projected d",
                                           "projections"], numeric={2, 3, 4})
    by_family: dict[str, list[dict[str, Any]]] = {}
    for r in flagged:
        by_family.setdefault(family_text(r), []).append(r)
    for name, rows in by_family.items():
        fitted = [int(d) for r in rows for d in r.get("fitted_distances") or []]
        needed = [int(float(r["distance"])) for r in rows if finite(r.get("distance")) is not None]
        rates = sorted({float(r["p"]) for r in rows if finite(r.get("p")) is not None})
        table.rows.append([name, ", ".join(g(p) for p in rates), str(max(fitted)) if fitted else DASH,
                           f"{min(needed)} to {max(needed)}" if needed else DASH, str(len(rows))])
    text = (f"{len(flagged)} of {len(projections)} projections need distances beyond those sampled. They assume "
            "that \u039b stays what the small distances show and that no new error mechanism (leakage, "
            "correlated or rare large errors) appears at lower rates; measure at least one larger distance "
            "before relying on them.")
    return Caution("Extrapolation beyond the sampled distances", text, table)


def _few_failures_caution(frame: pd.DataFrame) -> Caution:
    if frame.empty or "failures" not in frame.columns:
        return Caution(f"Points with fewer than {FEW_FAILURES} failures", "No points.", ok=True)
    few = frame[pd.to_numeric(frame["failures"], errors="coerce").fillna(0) < FEW_FAILURES]
    if few.empty:
        return Caution(f"Points with fewer than {FEW_FAILURES} failures",
                       f"None: every point has at least {FEW_FAILURES} failures.", ok=True)
    text = (f"{len(few)} point(s) have fewer than {FEW_FAILURES} failures. Their 95% intervals span a factor of "
            "several (at 0 failures only an upper end is known), and the fits weigh them little or leave them "
            "out (0 failures). Raise the shot budget for these points if they matter.")
    return Caution(f"Points with fewer than {FEW_FAILURES} failures", text, points_table("few-failures", few))


def _saturation_caution(frame: pd.DataFrame) -> Caution:
    title = "Per-round rates near saturation"
    if frame.empty or "failure_rate" not in frame.columns:
        return Caution(title, "No points.", ok=True)
    near = frame[pd.to_numeric(frame["failure_rate"], errors="coerce").fillna(0) > SATURATION]
    if near.empty:
        return Caution(title, f"None: every point fails in at most {SATURATION:.0%} of its experiments.", ok=True)
    text = (f"{len(near)} point(s) fail in more than {SATURATION:.0%} of their experiments. The per-round rate "
            "(1 - (1 - 2P)^(1/r)) / 2 divides by a vanishing 1 - 2P there: a small count fluctuation moves it "
            "by orders of magnitude and its interval reaches 1/2, so its point value can be far from the truth "
            "(typically too low). Use fewer rounds or a lower rate for these points.")
    return Caution(title, text, points_table("saturated", near))


def points_table(key: str, rows: pd.DataFrame) -> Table:
    """A short table of the points a caution names."""
    table = Table(key, "", "", ["study", "code", "d", "rounds", "basis", "noise", "p", "decoder", "shots",
                                "failures", "per round [95%]"], numeric={2, 3, 6, 8, 9, 10})
    for item in row_dicts(rows):
        table.rows.append([
            str(item.get("study", "")), str(item.get("code", "")), integer(item.get("distance")),
            integer(item.get("rounds")), str(item.get("basis", "")), str(item.get("noise", "")), g(item.get("p")),
            str(item.get("decoder", "")), integer(item.get("shots")), integer(item.get("failures")),
            with_interval(item.get("per_round_rate"), item.get("per_round_low"), item.get("per_round_high"), e)])
    return table
