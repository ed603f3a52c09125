"""What the report says, independent of the output format: key facts, the run, results and fit tables.

:class:`Report` gathers the inputs once; :mod:`codebench.report.html` and
:mod:`codebench.report.markdown` only lay its parts out.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any, Callable

import pandas as pd

from codebench.figures import FigureFile
from codebench.report.blocks import (
    DASH,
    Badge,
    Caution,
    Cell,
    Table,
    e,
    family_text,
    finite,
    g,
    integer,
    list_text,
    row_dicts,
    with_interval,
)
from codebench.report.cautions import FEW_FAILURES, cautions
from codebench.report.comparisons import comparison_table
from codebench.report.run import (
    VERSION_KEYS,
    RunInfo,
    column_sum,
    duration,
    incomplete,
    interval_text,
    stopping_text,
)
from codebench.report.speed import round_durations_us, speed_table


@dataclass
class Report:
    """Everything the report shows; ``analysis`` is plain records (:func:`codebench.figures.plain_analysis`)."""

    folder: Path
    frame: pd.DataFrame
    analysis: dict[str, Any]
    run: RunInfo
    figures: list[FigureFile]
    problems: list[str]
    #: Further page sections ``(anchor, title, html)``: the forecasts kept in the folder's subfolders.
    extra_sections: tuple[tuple[str, str, str], ...] = ()

    @property
    def title(self) -> str:
        return self.run.name or self.folder.name or "sweep"

    @cached_property
    def speed(self) -> Table:
        """The decoder-speed table (round durations read from the store where the noise model has a clock).

        Kept once made: both renderers show it, and it builds the circuits of clocked points.
        """
        return speed_table(self.frame, round_durations_us(self.folder, self.frame))

    def results(self) -> Table:
        return results_table(self.frame)

    def fits(self) -> list[Table]:
        return fit_tables(self.analysis)

    def cautions(self) -> list[Caution]:
        return cautions(self.frame, self.analysis, self.problems)

    def notes(self) -> list[str]:
        return [str(n) for n in self.analysis.get("notes") or []]

    def settings_text(self) -> str:
        """The fits' settings in one sentence ('' when unknown)."""
        settings = self.analysis.get("settings") or {}
        if not settings:
            return ""
        return (f"Targets {list_text(settings.get('targets'))} per round; {settings.get('bootstrap')} "
                f"bootstrap resamples (seed {settings.get('seed')}); confidence {settings.get('confidence')}.")

    def facts(self) -> list[tuple[str, str]]:
        """Key numbers of the run, in display order."""
        frame = self.frame
        return [
            ("points", f"{len(frame):,}"),
            ("incomplete points", f"{len(incomplete(frame)):,}"),
            ("total shots", f"{int(column_sum(frame, 'shots')):,}"),
            ("total failures", f"{int(column_sum(frame, 'failures')):,}"),
            ("total CPU time", duration(column_sum(frame, "seconds"))),
            ("seed", self.run.seed if self.run.seed is not None else "not recorded"),
        ]

    def run_rows(self) -> list[tuple[str, str]]:
        """What was run, one (label, value) row each."""
        run, frame = self.run, self.frame
        rows = [
            ("sweep name", run.name or "not recorded"),
            ("seed", run.seed if run.seed is not None else "not recorded"),
            ("sweep file", run.sweep_source or "not recorded"),
            ("stopping rule", stopping_text(run.stopping)),
            ("intervals", interval_text(frame)),
            ("points", f"{len(frame):,} ({len(incomplete(frame)):,} incomplete)"),
            ("total shots", f"{int(column_sum(frame, 'shots')):,}"),
            ("total CPU time", f"{duration(column_sum(frame, 'seconds'))} (sum of the points' worker seconds; "
                               f"decoding {duration(column_sum(frame, 'decode_seconds'))})"),
            ("machine", run.versions.get("machine", "unknown")),
        ]
        suffix = "" if run.versions_recorded else " (this session; the store holds no record)"
        for key in VERSION_KEYS:
            rows.append((key, run.versions.get(key, "unknown") + suffix))
        return rows


def results_table(frame: pd.DataFrame) -> Table:
    """One row per point, with its status flagged."""
    table = Table("results", "Results", "One row per point. Rates are failures / shots over the whole memory "
                  "experiment and per round, each with its 95% interval.",
                  ["study", "code", "d", "rounds", "basis", "noise", "p", "decoder", "shots", "failures",
                   "failure rate [95%]", "per round [95%]", "qubits", "CPU s", "status"],
                  numeric={2, 3, 6, 8, 9, 10, 11, 12, 13}, empty="no points")
    for item in row_dicts(frame):
        failures = finite(item.get("failures")) or 0.0
        shots = finite(item.get("shots")) or 0.0
        complete = bool(item.get("complete", True))
        status: Cell = "done"
        css = ""
        if not complete:
            status, css = Badge("incomplete", "bad"), "incomplete"
        elif shots == 0:
            status, css = Badge("no shots", "bad"), "incomplete"
        elif failures < FEW_FAILURES:
            status, css = Badge(f"< {FEW_FAILURES} failures", "warn"), "few"
        table.rows.append([
            str(item.get("study", "")), str(item.get("code", "")), integer(item.get("distance")),
            integer(item.get("rounds")), str(item.get("basis", "")), str(item.get("noise", "")),
            g(item.get("p")), str(item.get("decoder", "")), integer(shots), integer(failures),
            with_interval(item.get("failure_rate"), item.get("failure_rate_low"), item.get("failure_rate_high"), e),
            with_interval(item.get("per_round_rate"), item.get("per_round_low"), item.get("per_round_high"), e),
            integer(item.get("qubits")), g(item.get("seconds"), 3), status,
        ])
        table.row_classes.append(css)
    return table


def fit_tables(analysis: dict[str, Any]) -> list[Table]:
    """Thresholds, pseudo-thresholds, Lambda (fit and pairs), scaling law and projections."""
    records: Callable[[str], list[dict[str, Any]]] = lambda key: [
        r for r in analysis.get(key) or [] if isinstance(r, dict)]
    tables = []

    thresholds = Table(
        "thresholds", "Thresholds",
        "Where the curves of different distances cross. Crossing: of two distances' curves; finite-size scaling "
        "(FSS): one fit of all distances near the crossing, with the exponent nu.",
        ["family", "method", "quantity", "distances", "threshold [95%]", "nu [95%]", "window", "GOF p"],
        numeric={4, 5, 7}, empty="no threshold estimate (see the notes)")
    for r in records("thresholds"):
        method = str(r.get("method", ""))
        thresholds.rows.append([
            family_text(r), "finite-size scaling" if method == "finite_size_scaling" else method,
            _quantity(r.get("quantity")), list_text(r.get("distances")),
            with_interval(r.get("threshold"), r.get("low"), r.get("high")),
            with_interval(r.get("nu"), r.get("nu_low"), r.get("nu_high")) if r.get("nu") is not None else DASH,
            list_text(r.get("window")), g(r.get("gof_p_value"), 3)])
    tables.append(thresholds)

    pseudo = Table(
        "pseudo", "Pseudo-thresholds", "Per distance, the p below which the encoded qubit beats a bare one.",
        ["family", "d", "pseudo-threshold [95%]", "definition"], numeric={1, 2},
        empty="no pseudo-threshold inside the sampled range (see the notes)")
    for r in records("pseudo_thresholds"):
        pseudo.rows.append([family_text(r), integer(r.get("distance")),
                            with_interval(r.get("pseudo_threshold"), r.get("low"), r.get("high")),
                            str(r.get("definition") or DASH)])
    tables.append(pseudo)

    lambdas = Table(
        "lambda", "Error suppression \u039b",
        "Fit of eps_d = C / \u039b^((d+1)/2) to the per-round rates at each p, over the distances whose "
        "per-round rates fall with d (not chosen by the threshold, which comes from whole-experiment rates): "
        "\u039b is the factor gained per step of 2 in distance. Near threshold: p is at least half the "
        "threshold estimate, or the interval reaches \u039b \u2264 1; suppression there is weak.",
        ["family", "p", "distances", "\u039b [95%]", "C", "near threshold"], numeric={1, 3, 4},
        empty="no \u039b fit (see the notes)")
    for r in records("lambdas"):
        lambdas.rows.append([family_text(r), g(r.get("p")), list_text(r.get("distances")),
                             with_interval(r.get("lambda"), r.get("low"), r.get("high")), g(r.get("C")),
                             "yes" if r.get("near_threshold") else ""])
    tables.append(lambdas)

    pairs = Table(
        "lambda-pairs", "\u039b between consecutive distances",
        "The same factor from each pair of distances alone; a trend with d means the fit above is an average.",
        ["family", "p", "distances", "\u039b [95%]"], numeric={1, 3}, empty="none")
    for r in records("lambda_pairs"):
        pairs.rows.append([family_text(r), g(r.get("p")), list_text(r.get("distances")),
                           with_interval(r.get("lambda"), r.get("low"), r.get("high"))])
    tables.append(pairs)

    laws = Table(
        "scaling", "Scaling law",
        "Fit of eps = A (p / p_th)^((d+1)/2) over the points below threshold.",
        ["family", "A [95%]", "p_th [95%]", "distances", "points", "chi2 / dof"], numeric={1, 2, 4, 5},
        empty="no scaling-law fit (see the notes)")
    for r in records("scaling_laws"):
        dof = finite(r.get("dof"))
        chi2 = finite(r.get("chi2"))
        laws.rows.append([family_text(r), with_interval(r.get("A"), r.get("A_low"), r.get("A_high")),
                          with_interval(r.get("p_th"), r.get("p_th_low"), r.get("p_th_high")),
                          list_text(r.get("distances")), integer(r.get("points")),
                          f"{chi2:.3g} / {int(dof)}" if chi2 is not None and dof else DASH])
    tables.append(laws)

    projections = Table(
        "projections", "Projections",
        "Smallest distance (and qubit count) whose fitted per-round error reaches each target, from the "
        "\u039b fit at that p. Rows marked extrapolated lie beyond the distances that were sampled.",
        ["family", "p", "target / round", "d [range]", "qubits [range]", "fitted d", "extrapolation"],
        numeric={1, 2, 3, 4}, empty="no projection (needs a \u039b fit)")
    for r in records("projections"):
        if finite(r.get("distance")) is None:
            d_text, q_text = "not reached", DASH
        else:
            d_text = with_interval(r.get("distance"), r.get("distance_low"), r.get("distance_high"), integer)
            q_text = with_interval(r.get("qubits"), r.get("qubits_low"), r.get("qubits_high"), integer)
        flag: Cell = (Badge("extrapolated", "warn") if r.get("extrapolation")
                      else DASH if finite(r.get("distance")) is None else "within sampled d")
        projections.rows.append([family_text(r), g(r.get("p")), g(r.get("target")), d_text, q_text,
                                 list_text(r.get("fitted_distances")), flag])
        projections.row_classes.append("extrapolated" if r.get("extrapolation") else "")
    tables.append(projections)
    if records("measured"):
        tables.append(measured_table(records("measured")))
    if records("decoder_comparisons"):
        tables.append(comparison_table(records("decoder_comparisons")))
    return tables


def measured_table(records: list[dict[str, Any]]) -> Table:
    """Measured points (``codebench lab decode``) beside their simulated twins."""
    table = Table(
        "measured", "Measured beside simulated",
        "Points decoded from records measured on the device (source = measured), each beside the simulated "
        "point of the same experiment: per-round logical error with 95% intervals, and their ratio. A decoder "
        "marked (data weights) decoded with weights learned from the other half of the shots.",
        ["study", "code", "d", "rounds", "noise", "p", "decoder", "shots", "measured / round [95%]",
         "simulated / round [95%]", "measured / simulated"], numeric={2, 3, 5, 7, 8, 9, 10}, empty="none")
    for r in records:
        table.rows.append([
            str(r.get("study", "")), str(r.get("code", "")), integer(r.get("distance")), integer(r.get("rounds")),
            str(r.get("noise", "")), g(r.get("p")), str(r.get("decoder", "")), integer(r.get("shots")),
            with_interval(r.get("measured"), r.get("measured_low"), r.get("measured_high"), e),
            with_interval(r.get("simulated"), r.get("simulated_low"), r.get("simulated_high"), e)
            if r.get("simulated") is not None else DASH, g(r.get("ratio"), 3)])
    return table


def _quantity(value: Any) -> str:
    names = {"failure_rate": "failure probability (whole experiment)", "per_round_rate": "per-round error"}
    return names.get(str(value), str(value)) if value is not None else DASH
