"""Logical error against the rate, one curve per distance, each with its 95% band: two figures.

* ``per_round_vs_p__<family>``: the error per round. Drawn on it: where the
  per-round curves of the largest distances cross (if they do in the sampled
  range), and, where ``p`` is a physical error probability, the line
  logical = physical and the pseudo-thresholds on it.
* ``failure_vs_p__<family>``: the failure probability of the whole
  experiment, for families whose thresholds were estimated, with the
  threshold estimate (finite-size scaling if there is one, else a crossing)
  and its interval. The threshold comes from these curves and is drawn only
  here: per-round curves cross elsewhere at finite d.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import MaxNLocator

from codebench.analysis import threshold_applies
from codebench.analysis.families import Family
from codebench.figures.canvas import FigurePlan, rate_axes, titles
from codebench.figures.data import (
    Curve,
    chosen_threshold,
    curves,
    family_records,
    method_name,
    y_range,
)
from codebench.figures.labels import (
    compares_with_physical,
    family_slug,
    family_title,
    rate_meaning,
    rate_noun,
)
from codebench.figures.layout import settle
from codebench.figures.legend import (
    ALONG_GUIDE,
    MARKER,
    Label,
    LegendGroup,
    Obstacle,
    curve_obstacles,
    marker_points,
    markers,
    place_labels,
    place_legends,
    to_axes,
)
from codebench.figures.marks import count_entries, interval_points
from codebench.figures.style import (
    GUIDE_INK,
    INK,
    PANEL,
    THRESHOLD_INK,
    THRESHOLD_SHADE,
    distance_colour,
    finite,
    num,
)

KIND = "per_round_vs_p"
WHOLE_KIND = "failure_vs_p"


@dataclass(frozen=True)
class ThresholdMark:
    """A crossing as drawn: value, 95% interval, how it was found (short), and what it is."""

    value: float
    low: float | None
    high: float | None
    method: str
    name: str = "threshold"


@dataclass(frozen=True)
class PerRoundInputs:
    curves: tuple[Curve, ...]
    #: Smallest and largest positive rate or band end (:func:`~codebench.figures.data.y_range`).
    limits: tuple[float, float]
    headline: str
    subline: str
    x_label: str
    #: Whether ``p`` is a physical error probability (logical = physical line, pseudo-thresholds).
    physical: bool
    #: (pseudo-threshold, distance) of every finite estimate.
    pseudo: tuple[tuple[float, int], ...]
    threshold: ThresholdMark | None
    y_label: str = "logical error per round"


def plan(family: Family, analysis: dict[str, Any]) -> FigurePlan[PerRoundInputs] | None:
    """The per-round figure of ``family``, or ``None`` when it has no rate to show."""
    drawn = curves(family)
    limits = y_range(drawn)
    if not drawn or limits is None:
        return None
    rate = rate_meaning(family.noise)
    physical = compares_with_physical(rate)
    pseudo = tuple((float(r["pseudo_threshold"]), int(r.get("distance") or 0))
                   for r in family_records(analysis, "pseudo_thresholds", family)
                   if finite(r.get("pseudo_threshold")) is not None) if physical else ()
    record = chosen_threshold(family_records(analysis, "per_round_crossings", family))
    crossing = None if record is None else ThresholdMark(
        float(record["threshold"]), finite(record.get("low")), finite(record.get("high")), method_name(record),
        "per-round crossing")
    title = family_title(family)
    caption = f"Logical error per round against {rate_noun(rate, article=True)} for {title}; bars are 95% intervals; open markers: fewer than 10 failures."
    if record is not None:
        caption += (f" The per-round curves of d = {'/'.join(str(d) for d in record.get('distances') or [])} cross"
                    f" at {num(record['threshold'])} [{num(record.get('low'))}, {num(record.get('high'))}];"
                    " this is not the threshold, which is estimated from the whole experiment's failure"
                    " probability (its own figure).")
    inputs = PerRoundInputs(tuple(drawn), limits, f"Logical error per round vs {rate_noun(rate)}", title, rate.axis_label,
                            physical, pseudo, crossing)
    return FigurePlan(f"{KIND}__{family_slug(family)}", KIND, title, caption, inputs, draw)


def whole_plan(family: Family, analysis: dict[str, Any]) -> FigurePlan[PerRoundInputs] | None:
    """The whole-experiment figure of ``family`` with its threshold, for families with threshold estimates."""
    drawn = curves(family, "whole")
    limits = y_range(drawn)
    if not drawn or limits is None or not threshold_applies(family):
        return None
    rate = rate_meaning(family.noise)
    record = chosen_threshold(family_records(analysis, "thresholds", family))
    threshold = None if record is None else ThresholdMark(
        float(record["threshold"]), finite(record.get("low")), finite(record.get("high")), method_name(record))
    title = family_title(family)
    caption = (f"Probability that the whole memory experiment fails against {rate_noun(rate, article=True)} for "
               f"{title}; bars are 95% intervals; open markers: fewer than 10 failures.")
    caption += (" No threshold estimate (see the notes)." if record is None else
                f" Threshold estimate ({method_name(record, short=False)}): {num(record['threshold'])}"
                f" [{num(record.get('low'))}, {num(record.get('high'))}].")
    inputs = PerRoundInputs(tuple(drawn), limits, f"Logical failure of the whole experiment vs {rate_noun(rate)}",
                            title, rate.axis_label, False, (), threshold,
                            "logical failure probability (whole experiment)")
    return FigurePlan(f"{WHOLE_KIND}__{family_slug(family)}", WHOLE_KIND, title, caption, inputs, draw)


def draw(inputs: PerRoundInputs) -> Figure:
    drawn = list(inputs.curves)
    axes = rate_axes(drawn, inputs.limits)
    fig, ax, y_low, y_high = axes.fig, axes.ax, axes.y_low, axes.y_high
    handles = [interval_points(ax, curve.p, curve.rate, curve.low, curve.high, curve.failures,
                               distance_colour(curve.distance), floor=y_low, linestyle="-") for curve in drawn]
    ax.set_ylim(y_low, y_high)
    x_low, x_high = min(axes.all_p), max(axes.all_p)
    if axes.log_x:
        ax.set_xlim(x_low / 1.15, x_high * 1.15)
    else:
        pad = 0.05 * (x_high - x_low) if x_high > x_low else 0.1 * x_high
        ax.set_xlim(max(0.0, x_low - pad), x_high + pad)
    xlim = ax.get_xlim()
    extra: list[tuple[Any, str]] = []
    obstacles: list[Obstacle] = []
    if inputs.physical:
        extra_entries, guide = _physical_guides(ax, inputs, xlim, axes.log_x, y_low, y_high)
        extra += extra_entries
        obstacles += guide
    ax.set_xlim(*xlim)
    if not axes.log_x:
        ax.xaxis.set_major_locator(MaxNLocator(nbins=6))
    ax.set_xlabel(inputs.x_label)
    ax.set_ylabel(inputs.y_label)
    titles(ax, inputs.headline, inputs.subline)
    keep_clear: list[Any] = []
    if inputs.threshold is not None:  # last: its label is placed in the settled layout
        entries, keep_clear, column = _draw_threshold(ax, inputs.threshold, xlim)
        extra += entries
        obstacles += column
    extra += count_entries([curve.failures for curve in drawn])
    # The failures behind each point, beside it where there is room (thinned where points crowd).
    counted = [Label(float(p), float(r), f"{int(f):,}", distance_colour(curve.distance))
               for curve in drawn for p, r, f in zip(curve.p, curve.rate, curve.failures) if r > 0]
    shown = place_labels(ax, counted, keep_clear, fontsize=8.5, fontweight="normal")
    if shown:
        keep_clear = [*keep_clear, *shown]
        extra.append((Line2D([], [], linestyle="none"), "small numbers: failures behind a point"))
    labels = [f"d = {curve.distance}" for curve in drawn]
    place_legends(ax, [LegendGroup(handles, labels), LegendGroup([h for h, _ in extra], [t for _, t in extra])],
                  curve_obstacles(ax, drawn) + obstacles, avoid=keep_clear)
    return fig


def _physical_guides(ax: Axes, inputs: PerRoundInputs, xlim: tuple[float, float], log_x: bool, y_low: float,
                     y_high: float) -> tuple[list[tuple[Any, str]], list[Obstacle]]:
    """The line logical = physical and the pseudo-thresholds on it: legend entries and obstacles."""
    extra: list[tuple[Any, str]] = []
    obstacles: list[Obstacle] = []
    line = np.geomspace(xlim[0], xlim[1], 60) if log_x else np.linspace(xlim[0], xlim[1], 60)
    (diag,) = ax.plot(line, line, linestyle=(0, (6, 4)), color=GUIDE_INK, linewidth=1.4, zorder=2,
                      scalex=False, scaley=False)
    extra.append((diag, "logical = physical"))
    inside = (line >= y_low) & (line <= y_high)
    obstacles.append((to_axes(ax, list(line[inside]), list(line[inside])), ALONG_GUIDE))
    shown = False
    for value, distance in inputs.pseudo:
        if xlim[0] <= value <= xlim[1] and y_low <= value <= y_high:
            ax.plot([value], [value], linestyle="none", marker="D", markersize=7,
                    markerfacecolor=distance_colour(distance), markeredgecolor=INK, markeredgewidth=0.8, zorder=5)
            obstacles.append((markers(ax, [value], [value]), MARKER))
            shown = True
    if shown:
        handle = Line2D([], [], linestyle="none", marker="D", markersize=7, markerfacecolor="#ffffff",
                        markeredgecolor=INK)
        extra.append((handle, "pseudo-threshold (colour: d)"))
    return extra, obstacles


def _draw_threshold(ax: Axes, mark: ThresholdMark, xlim: tuple[float, float]
                    ) -> tuple[list[tuple[Any, str]], list[Any], list[Obstacle]]:
    """Draw the threshold; return its legend entries, artists to keep clear and obstacle points."""
    value, low, high = mark.value, mark.low, mark.high
    parts: list[Any] = []
    if low is not None and high is not None and high > xlim[0] and low < xlim[1]:
        parts.append(ax.axvspan(max(low, xlim[0]), min(high, xlim[1]), color=THRESHOLD_SHADE, alpha=0.22,
                                linewidth=0, zorder=0))
    label = f"{mark.name} {num(value)} ({mark.method})"
    if xlim[0] <= value <= xlim[1]:
        parts.append(ax.axvline(value, color=THRESHOLD_INK, linewidth=1.6, zorder=2))
        x_frac = float(ax.transAxes.inverted().transform(ax.transData.transform((value, 1.0)))[0])
        text = _threshold_label(ax, value, f" {label} ", x_frac < 0.6)
        column = np.column_stack([np.full(40, x_frac), np.linspace(0, 1, 40)])
        return [(tuple(reversed(parts)), f"{mark.name}, 95% interval")], [text], [(column, ALONG_GUIDE * 5)]
    side = ">" if value > xlim[1] else "<"
    handle = Line2D([], [], color=THRESHOLD_INK, linewidth=1.6)
    entries = [(handle, f"{label} {side} sampled range")]
    if parts:
        entries.append((parts[0], f"{mark.name} 95% interval"))
    return entries, [], []


def _threshold_label(ax: Axes, value: float, label: str, right: bool) -> Any:
    """The threshold's label beside its line, at the bottom of the axes or else at the top, where it covers
    no marker (an interval's cap included); at the bottom if neither is free."""
    fig = ax.get_figure(root=True)
    renderer = settle(fig) if isinstance(fig, Figure) else None
    points = marker_points(ax)
    texts: list[Any] = []
    for y, va in ((0.025, "bottom"), (0.975, "top")):
        text = ax.text(value, y, label, transform=ax.get_xaxis_transform(), ha="left" if right else "right", va=va,
                       fontsize=11, color=THRESHOLD_INK, zorder=6,
                       bbox={"boxstyle": "square,pad=0.2", "facecolor": PANEL, "edgecolor": "none", "alpha": 0.9})
        box = text.get_window_extent(renderer) if renderer is not None and len(points) else None
        if box is None or not ((points[:, 0] >= box.x0) & (points[:, 0] <= box.x1) & (points[:, 1] >= box.y0)
                               & (points[:, 1] <= box.y1)).any():
            for other in texts:
                other.remove()
            return text
        texts.append(text)
    texts[1].remove()
    return texts[0]
