"""Legend placement: inside the axes where a legend covers the least data, else one legend below.

Candidate boxes are scored against obstacles, (points in axes fractions,
weight) pairs: a data marker weighs most, a point along a curve less, a band
edge or reference line little. A box over a label that must stay readable is
ruled out.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal, Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.transforms import Bbox

from codebench.figures.data import Curve
from codebench.figures.layout import PAD, fit_axes, settle

#: Obstacle weights: a data marker, a point along a curve, along a band edge, along a reference line.
MARKER, ALONG_CURVE, ALONG_BAND, ALONG_GUIDE = 3.0, 0.2, 0.04, 0.01
#: A placement scoring this much covers a data marker: the group goes below the axes instead.
_HIDES_A_MARKER = 3.0

Spot = Literal["upper left", "lower right", "upper right", "lower left", "center right", "center left",
               "upper center", "lower center"]
_SPOTS: tuple[Spot, ...] = ("upper left", "lower right", "upper right", "lower left", "center right", "center left",
                            "upper center", "lower center")

Obstacle = tuple[np.ndarray, float]


@dataclass
class LegendGroup:
    """Entries that share one legend box."""

    handles: list[Any]
    labels: list[str]
    title: str | None = None
    options: dict[str, Any] = field(default_factory=dict)


def markers(ax: Axes, x: Sequence[float], y: Sequence[float]) -> np.ndarray:
    """Data points in axes-fraction coordinates (points a log axis cannot show dropped)."""
    points = np.column_stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)])
    points = points[np.all(np.isfinite(points), axis=1)]
    if ax.get_yscale() == "log":
        points = points[points[:, 1] > 0]
    if points.size == 0:
        return np.empty((0, 2))
    return np.asarray(ax.transAxes.inverted().transform(ax.transData.transform(points)))


def to_axes(ax: Axes, x: Sequence[float], y: Sequence[float]) -> np.ndarray:
    """Data points in axes-fraction coordinates, densified along the polyline (straight on screen)."""
    frac = markers(ax, x, y)
    if len(frac) <= 1:
        return frac
    pieces = [np.linspace(a, b, 25, endpoint=False) for a, b in zip(frac[:-1], frac[1:])]
    return np.vstack(pieces + [frac[-1:]])


def curve_obstacles(ax: Axes, curves: Sequence[Curve]) -> list[Obstacle]:
    """Markers, lines and band edges of ``curves`` as obstacles."""
    out = []
    for curve in curves:
        seen = curve.rate > 0
        p, rate = list(curve.p[seen]), list(curve.rate[seen])
        out.append((markers(ax, p, rate), MARKER))
        out.append((to_axes(ax, p, rate), ALONG_CURVE))
        # The caps of the 95% intervals are markers too (a legend must not hide them).
        out.append((markers(ax, p + p, list(curve.high[seen]) + list(curve.low[seen])), MARKER))
        out.append((to_axes(ax, p, list(curve.high[seen])), ALONG_BAND))
        out.append((to_axes(ax, p, list(curve.low[seen])), ALONG_BAND))
        if (~seen).any():
            out.append((markers(ax, list(curve.p[~seen]), list(curve.high[~seen])), MARKER))
    return out


def _score(box: Any, ncol: int, obstacles: Sequence[Obstacle], taken: Sequence[Any]) -> float:
    score = 0.4 * (ncol - 1)
    for points, weight in obstacles:
        if len(points):
            inside = ((points[:, 0] >= box.x0) & (points[:, 0] <= box.x1)
                      & (points[:, 1] >= box.y0) & (points[:, 1] <= box.y1))
            score += weight * float(inside.sum())
    if any(box.overlaps(other) for other in taken):
        score += 1e6
    return score


def marker_points(ax: Axes) -> np.ndarray:
    """Display coordinates of every marker drawn on ``ax``."""
    points = [np.asarray(line.get_xydata(), dtype=float) for line in ax.lines
              if line.get_visible() and line.get_marker() not in (None, "None", "", " ")]
    if not points:
        return np.empty((0, 2))
    shown = np.asarray(ax.transData.transform(np.vstack(points)))
    return shown[np.all(np.isfinite(shown), axis=1)]


@dataclass(frozen=True)
class Label:
    """A short text next to a data point (x, y), placed only where it covers nothing."""

    x: float
    y: float
    text: str
    colour: str


#: Where a label may sit around its point: (dx, dy) in points, alignment.
_AROUND: tuple[tuple[int, int, Literal["left", "right"], Literal["bottom", "top"]], ...] = (
    (7, 5, "left", "bottom"), (7, -5, "left", "top"), (-7, 5, "right", "bottom"), (-7, -5, "right", "top"))


def place_labels(ax: Axes, labels: Sequence[Label], keep_off: Sequence[Any] = (), fontsize: float = 10.5,
                 fontweight: str = "bold") -> list[Any]:
    """Put each label beside its point where it stays inside the axes and covers no marker, other label
    or artist of ``keep_off``; a label with no free spot is left out (thinned). Returns those placed."""
    fig = ax.get_figure(root=True)
    if not labels or not isinstance(fig, Figure):
        return []
    renderer = settle(fig)
    frame = ax.get_window_extent(renderer)
    taken = [artist.get_window_extent(renderer) for artist in keep_off]
    points = marker_points(ax)
    placed: list[Any] = []
    scale = fig.dpi / 72.0
    for label in labels:
        # Made and measured once, at the first spot; the other spots' boxes follow from its size.
        first_dx, first_dy, first_ha, first_va = _AROUND[0]
        text = ax.annotate(label.text, (label.x, label.y), textcoords="offset points", xytext=(first_dx, first_dy),
                           ha=first_ha, va=first_va, fontsize=fontsize, fontweight=fontweight, color=label.colour,
                           zorder=6)
        measured = text.get_window_extent(renderer)
        anchor_x, anchor_y = ax.transData.transform((label.x, label.y))
        gap_x = measured.x0 - (anchor_x + first_dx * scale)
        gap_y = measured.y0 - (anchor_y + first_dy * scale)
        for dx, dy, ha, va in _AROUND:
            x = anchor_x + dx * scale
            y = anchor_y + dy * scale
            x0 = x + gap_x if ha == "left" else x - measured.width - gap_x
            y0 = y + gap_y if va == "bottom" else y - measured.height - gap_y
            box = Bbox.from_bounds(x0, y0, measured.width, measured.height).padded(3)  # air between neighbours
            inside = (frame.x0 <= box.x0 and box.x1 <= frame.x1 and frame.y0 <= box.y0 and box.y1 <= frame.y1)
            covers = bool(((points[:, 0] >= box.x0) & (points[:, 0] <= box.x1) & (points[:, 1] >= box.y0)
                           & (points[:, 1] <= box.y1)).any()) if len(points) else False
            if inside and not covers and not any(box.overlaps(other) for other in taken):
                text.xyann = (dx, dy)
                text.set_horizontalalignment(ha)
                text.set_verticalalignment(va)
                taken.append(box)
                placed.append(text)
                break
        else:
            text.remove()
    return placed


def _spot_boxes(ax: Axes, renderer: Any, group: LegendGroup, ncol: int) -> dict[Spot, Bbox]:
    """The box (axes fractions) a legend of ``group`` in ``ncol`` columns takes at each spot.

    One legend is made and measured; the other spots follow from its size and its padding from the
    corner (matplotlib pads every side alike and centres the centre spots), instead of one legend each.
    """
    legend = ax.legend(group.handles, group.labels, loc="upper left", ncols=ncol, title=group.title, **group.options)
    box = legend.get_window_extent(renderer).transformed(ax.transAxes.inverted())
    legend.remove()
    width, height, pad_x, pad_y = box.width, box.height, box.x0, 1.0 - box.y1
    left, right, centre_x = pad_x, 1.0 - pad_x - width, 0.5 - width / 2
    top, bottom, centre_y = 1.0 - pad_y - height, pad_y, 0.5 - height / 2
    corners: dict[Spot, tuple[float, float]] = {
        "upper left": (left, top), "lower right": (right, bottom), "upper right": (right, top),
        "lower left": (left, bottom), "center right": (right, centre_y), "center left": (left, centre_y),
        "upper center": (centre_x, top), "lower center": (centre_x, bottom)}
    return {spot: Bbox.from_bounds(x0, y0, width, height) for spot, (x0, y0) in corners.items()}


def place_legends(ax: Axes, groups: Sequence[LegendGroup], obstacles: Sequence[Obstacle],
                  avoid: Sequence[Any] = ()) -> None:
    """Legends inside the axes where they cover the least of ``obstacles``, one box per group.

    ``avoid`` holds artists (a label) no legend may cover. Each group tries
    every corner and edge, in one or two columns. Groups that would hide a
    data marker wherever they go share one legend below the axes.
    """
    groups = [g for g in groups if g.handles]
    fig = ax.get_figure(root=True)
    if not groups or not isinstance(fig, Figure):
        return
    renderer = settle(fig)  # axes fractions are final from here on
    taken = [artist.get_window_extent(renderer).transformed(ax.transAxes.inverted()) for artist in avoid]
    below: list[LegendGroup] = []
    for group in groups:
        best: tuple[float, Spot, int, Bbox] | None = None
        for ncol in (1, 2) if len(group.handles) >= 5 else (1,):
            for spot, box in _spot_boxes(ax, renderer, group, ncol).items():
                score = _score(box, ncol, obstacles, taken)
                if best is None or score < best[0] - 1e-9:
                    best = (score, spot, ncol, box)
        if best is None or best[0] >= _HIDES_A_MARKER:
            below.append(group)
            continue
        legend = ax.legend(group.handles, group.labels, loc=best[1], ncols=best[2], title=group.title,
                           **group.options)
        ax.add_artist(legend)  # keeps it when the next group's legend is made
        taken.append(best[3])
    if below:
        _legend_below(ax, renderer, below)


def _legend_below(ax: Axes, renderer: Any, groups: Sequence[LegendGroup]) -> None:
    """One legend under the axes, in as many columns as fit the figure's width; the axes make room."""
    fig = ax.get_figure(root=True)
    assert isinstance(fig, Figure)
    handles = [h for g in groups for h in g.handles]
    labels = [label for g in groups for label in g.labels]
    options = {key: value for g in groups for key, value in g.options.items()}
    width = fig.bbox.width
    for ncol in (4, 3, 2, 1):
        legend = fig.legend(handles, labels, loc="lower center", bbox_to_anchor=(0.5, PAD * fig.dpi / fig.bbox.height),
                            ncols=min(ncol, len(handles)), borderaxespad=0.0, **options)
        box = legend.get_window_extent(renderer)
        if box.width <= 0.96 * width or ncol == 1:
            break
        legend.remove()
    fit_axes(fig, ax, renderer, bottom=box.height + 6 * fig.dpi / 72)
