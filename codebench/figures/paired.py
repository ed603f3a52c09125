"""``decoder_difference__<group>``: two decoders' failure rates compared on the same shots.

One panel per distance: the difference of the whole-experiment failure probability (first decoder
minus second) against p, with the paired 95% interval (Newcombe's hybrid score for paired data) as
a bold bar, and beside it, thin and grey, the interval the same counts would give had each decoder
been sampled on shots of its own. The zero line is "no difference".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import FuncFormatter

from codebench.figures.canvas import FigurePlan, log_axis
from codebench.figures.data import spans_decades
from codebench.figures.labels import rate_meaning, safe
from codebench.figures.style import DPI, GUIDE_INK, INK, MUTED, distance_colour

KIND = "decoder_difference"
#: Panels per row.
COLUMNS = 3


@dataclass(frozen=True)
class PanelInputs:
    distance: int
    x_label: str
    #: (p, difference, paired low, paired high, unpaired low, unpaired high, discordant first, discordant second)
    points: tuple[tuple[float, float, float, float, float, float, int, int], ...]


@dataclass(frozen=True)
class DifferenceInputs:
    first: str
    second: str
    subline: str
    panels: tuple[PanelInputs, ...]


def plans(records: dict[str, Any]) -> list[FigurePlan[DifferenceInputs]]:
    """One figure per study, code, basis, noise and decoder pair with paired comparisons."""
    groups: dict[tuple[str, ...], list[dict[str, Any]]] = {}
    for r in records.get("decoder_comparisons", []):
        if r.get("difference") is None:
            continue
        key = (str(r["study"]), str(r["code"]), str(r["basis"]), str(r["noise"]), str(r["first"]), str(r["second"]))
        groups.setdefault(key, []).append(r)
    return [_plan(key, rows) for key, rows in groups.items()]


def _plan(key: tuple[str, ...], rows: list[dict[str, Any]]) -> FigurePlan[DifferenceInputs]:
    study, code, basis, noise, first, second = key
    panels = []
    for distance in sorted({int(r["distance"]) for r in rows}):
        chosen = sorted((r for r in rows if int(r["distance"]) == distance), key=lambda r: float(r["p"]))
        panels.append(PanelInputs(distance, rate_meaning(noise).axis_label, tuple(
            (float(r["p"]), float(r["difference"]), float(r["low"]), float(r["high"]), float(r["unpaired_low"]),
             float(r["unpaired_high"]), int(r["first_only"]), int(r["second_only"])) for r in chosen)))
    subline = f"{code} {basis} basis, {noise} noise, study {study}"
    title = f"{first} minus {second} on the same shots"
    widths = [(r["unpaired_high"] - r["unpaired_low"]) / (r["high"] - r["low"])
              for r in rows if r["high"] > r["low"]]
    gain = f" The pairing narrows the interval by {min(widths):.2g}x to {max(widths):.2g}x here." if widths else ""
    caption = (f"Failure probability of the whole experiment under {first} minus under {second}, each distance "
               "in its own panel; both decoders decoded identical shots. Bold bars: paired 95% interval "
               "(Newcombe 1998, hybrid score for paired data); thin grey bars: the interval without the pairing "
               f"(as if each decoder had its own shots).{gain}")
    studies = study.replace(" + ", "_and_")  # two studies' points compared: both names, readable in a file name
    stem = f"{KIND}__{safe('_'.join((studies, code, basis, noise, first, 'vs', second)))}"
    return FigurePlan(stem, KIND, title, caption, DifferenceInputs(first, second, subline, tuple(panels)), draw)


def draw(inputs: DifferenceInputs) -> Figure:
    count = len(inputs.panels)
    columns = min(COLUMNS, count)
    rows = math.ceil(count / columns)
    width, height = max(7.0, 3.6 * columns), 2.0 + 3.2 * rows
    # Fixed margins, in inches, instead of a layout engine: the panels' surroundings are alike and
    # known (one y label on the left, the shared x label below, the title and key above), and the
    # constrained layout cost more than drawing the panels.
    fig = Figure(figsize=(width, height), dpi=DPI)
    FigureCanvasAgg(fig)
    fig.subplots_adjust(left=1.05 / width, right=1 - 0.15 / width, bottom=1.15 / height, top=1 - 1.0 / height,
                        wspace=0.32, hspace=0.45)
    axes = fig.subplots(rows, columns, squeeze=False)
    for ax, panel in zip(axes.flat, inputs.panels):
        _panel(ax, panel)
    for ax in list(axes.flat)[count:]:
        ax.set_visible(False)
    for ax in axes[:, 0]:
        ax.set_ylabel("difference in failure probability")
    fig.supxlabel(inputs.panels[0].x_label, y=0.5 / height, va="bottom", fontsize=12, color=INK)
    fig.suptitle(f"{inputs.first} minus {inputs.second}, decoded on the same shots\n{inputs.subline}",
                 x=0.1 / width, y=1 - 0.08 / height, ha="left", va="top", fontsize=13, color=INK)
    handles = [Line2D([], [], color=INK, marker="o", linestyle="none", markersize=6),
               Line2D([], [], color=INK, linewidth=2.2), Line2D([], [], color=GUIDE_INK, linewidth=1.0)]
    fig.legend(handles, ["difference", "paired 95% interval (same shots)", "95% interval without pairing"],
               loc="lower center", bbox_to_anchor=(0.5, 0.04 / height), ncols=3, fontsize=9.5)
    return fig


def _panel(ax: Any, panel: PanelInputs) -> None:
    colour = distance_colour(panel.distance)
    ps = [point[0] for point in panel.points]
    log_x = spans_decades(ps)
    if log_x:
        log_axis(ax, "x")
    shift = 1.05 if log_x else 0.0
    span = (max(ps) - min(ps)) or max(ps) or 1.0
    for p, difference, low, high, unpaired_low, unpaired_high, _, _ in panel.points:
        beside = p * shift if log_x else p + 0.015 * span
        ax.plot([beside, beside], [unpaired_low, unpaired_high], color=GUIDE_INK, linewidth=1.0, zorder=2)
        ax.plot([p, p], [low, high], color=colour, linewidth=2.2, solid_capstyle="butt", zorder=3)
        ax.plot([p], [difference], marker="o", color=colour, markersize=6, markeredgecolor="white", zorder=4)
    ax.axhline(0.0, color=MUTED, linewidth=0.9, linestyle="--", zorder=1)
    ax.set_title(f"d = {panel.distance}", loc="left", fontsize=11.5, color=colour)
    # Ticks at the sampled rates only (a linear axis between two close rates crowds its labels), the
    # y values as plain numbers (no offset text above the axis).
    ax.set_xticks(ps, [f"{p:g}" for p in ps])
    ax.xaxis.set_minor_formatter(FuncFormatter(lambda value, _: ""))
    if not log_x:
        ax.set_xlim(min(ps) - 0.12 * span, max(ps) + 0.12 * span)
    ax.yaxis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:.2g}"))

