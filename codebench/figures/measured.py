"""``measured_vs_d__<group>``: measured points beside the simulated points of the same experiment.

Per group (code, basis, noise model and options, rounds, rate): the simulated per-round logical error
against distance (teal, joined) and the measured points at their distances (orange), both with our
marks (capped 95% bars, hollow below 10 failures), one style per decoder (a measured point decoded
with data weights has its own).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from codebench.analysis.families import Family, with_source
from codebench.figures.canvas import FigurePlan, new_figure, titles
from codebench.figures.labels import family_slug, family_title, rate_meaning
from codebench.figures.marks import count_entries, interval_points
from codebench.figures.style import INK, decoder_style

KIND = "measured_vs_d"
SIMULATED_INK, MEASURED_INK = "#127a7a", "#d9622b"


@dataclass(frozen=True)
class Series:
    label: str
    measured: bool
    distance: tuple[int, ...]
    rate: tuple[float, ...]
    low: tuple[float, ...]
    high: tuple[float, ...]
    failures: tuple[float, ...]


@dataclass(frozen=True)
class MeasuredInputs:
    series: tuple[Series, ...]
    subline: str


def _series(part: pd.DataFrame, label: str, measured: bool) -> Series:
    part = part.sort_values("distance")
    return Series(label, measured, tuple(int(d) for d in part["distance"]),
                  tuple(float(x) for x in part["per_round_rate"]), tuple(float(x) for x in part["per_round_low"]),
                  tuple(float(x) for x in part["per_round_high"]), tuple(float(x) for x in part["failures"]))


def plans(frame: pd.DataFrame) -> list[FigurePlan[MeasuredInputs]]:
    """One figure per group that holds a measured point."""
    if frame.empty or "source" not in frame.columns:
        return []
    frame = with_source(frame[frame["shots"] > 0])
    if "noise_options" not in frame.columns:
        frame = frame.assign(noise_options="")
    keys = ["code", "basis", "noise", "noise_options", "rounds", "p"]
    out = []
    for key, group in frame.groupby(keys, sort=True):
        measured = group[group["source"] == "measured"]
        if measured.empty:
            continue
        code, basis, noise, options, rounds, rate = key
        p = float(str(rate))
        series = []
        for decoder, part in group[group["source"] != "measured"].groupby("decoder", sort=True):
            series.append(_series(part, f"simulated, {decoder}", False))
        for decoder, part in measured.groupby("decoder", sort=True):
            series.append(_series(part, f"measured, {decoder}", True))
        family = Family(str(code), str(basis), str(noise), str(options), "", str(rounds), group)
        title = family_title(family, with_decoder=False)
        inputs = MeasuredInputs(tuple(series), f"{title} \u00b7 {rate_meaning(str(noise)).text(p)}")
        caption = (f"Measured against simulated for {title}: per-round logical error by distance; simulated points "
                   "(teal, joined) and measured points (orange) with 95% interval bars; open markers: fewer than 10 "
                   "failures.")
        stem = f"{KIND}__{family_slug(family, with_decoder=False)}__p{p:g}"
        out.append(FigurePlan(stem, KIND, title, caption, inputs, draw))
    return out


def draw(inputs: MeasuredInputs) -> Figure:
    fig, ax = new_figure()
    ax.set_yscale("log")
    values = [v for s in inputs.series for v in (*s.rate, *s.low, *s.high) if math.isfinite(v) and v > 0]
    floor = min(values) / 2 if values else 1e-12
    simulated = [s for s in inputs.series if not s.measured]
    measured = [s for s in inputs.series if s.measured]
    handles, labels = [], []
    for n, series in enumerate(simulated):
        style, marker = decoder_style(n)
        handles.append(interval_points(ax, series.distance, series.rate, series.low, series.high, series.failures,
                                       SIMULATED_INK, floor=floor, marker=marker, linestyle=style))
        labels.append(series.label)
    for n, series in enumerate(measured):
        _, marker = decoder_style(n)
        x = np.array(series.distance) + 0.08 * (n - (len(measured) - 1) / 2)
        handles.append(interval_points(ax, x, series.rate, series.low, series.high, series.failures, MEASURED_INK,
                                       floor=floor, marker=marker, markersize=8))
        labels.append(series.label)
    counts = count_entries([s.failures for s in inputs.series])
    distances = sorted({d for s in inputs.series for d in s.distance})
    ax.set_xticks(distances)
    ax.set_xlabel("code distance d")
    ax.set_ylabel("logical error per round")
    ax.legend(handles + [h for h, _ in counts], labels + [t for _, t in counts], loc="best", fontsize=10,
              labelcolor=INK)
    titles(ax, "Measured beside simulated: logical error per round", inputs.subline)
    return fig
