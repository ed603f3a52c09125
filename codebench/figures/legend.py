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
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from codebench.figures.data import Curve

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
    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    fig.draw_without_rendering()  # settles the layout, so axes fractions are final
    renderer = canvas.get_renderer()  # type: ignore[no-untyped-call]
    taken = [artist.get_window_extent(renderer).transformed(ax.transAxes.inverted()) for artist in avoid]
    below: list[LegendGroup] = []
    for group in groups:
        best: tuple[float, Spot, int] | None = None
        for ncol in (1, 2) if len(group.handles) >= 5 else (1,):
            for spot in _SPOTS:
                legend = ax.legend(group.handles, group.labels, loc=spot, ncols=ncol, title=group.title,
                                   **group.options)
                box = legend.get_window_extent(renderer).transformed(ax.transAxes.inverted())
                legend.remove()
                score = _score(box, ncol, obstacles, taken)
                if best is None or score < best[0] - 1e-9:
                    best = (score, spot, ncol)
        if best is None or best[0] >= _HIDES_A_MARKER:
            below.append(group)
            continue
        legend = ax.legend(group.handles, group.labels, loc=best[1], ncols=best[2], title=group.title,
                           **group.options)
        ax.add_artist(legend)  # keeps it when the next group's legend is made
        taken.append(legend.get_window_extent(renderer).transformed(ax.transAxes.inverted()))
    if below:
        _legend_below(fig, renderer, below)


def _legend_below(fig: Figure, renderer: Any, groups: Sequence[LegendGroup]) -> None:
    """One legend under the axes, in as many columns as fit the figure's width."""
    handles = [h for g in groups for h in g.handles]
    labels = [label for g in groups for label in g.labels]
    options = {key: value for g in groups for key, value in g.options.items()}
    width = fig.get_window_extent(renderer).width
    for ncol in (4, 3, 2, 1):
        legend = fig.legend(handles, labels, loc="outside lower center", ncols=min(ncol, len(handles)), **options)
        if legend.get_window_extent(renderer).width <= 0.96 * width or ncol == 1:
            return
        legend.remove()
