"""One layout pass per figure, kept for both files.

A figure of one axes is laid out by :func:`settle` in a single measuring pass: the axes' tight box
(tick labels, axis labels, titles) is measured once and the axes placed so that box fills the figure
up to :data:`PAD` from each edge, less the room a legend below the axes takes (:func:`fit_axes`).
matplotlib's constrained layout measured the same box twice per layout and ran again for a legend
below; it remains for figures of several axes. After :func:`settle` the figure has no layout engine
(:func:`freeze`), so the drawing :func:`~.canvas.save` writes as PNG and SVG does not lay it out again,
and saving the SVG does not draw it an extra time.
"""

from __future__ import annotations

import weakref
from typing import Any

from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.layout_engine import ConstrainedLayoutEngine

#: Space kept free along the figure's edges, in inches.
PAD = 5 / 72


def settle(fig: Figure) -> Any:
    """Lay ``fig`` out now, once, and keep that layout; return the renderer (idempotent)."""
    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    renderer = canvas.get_renderer()  # type: ignore[no-untyped-call]
    engine = fig.get_layout_engine()
    if isinstance(engine, ConstrainedLayoutEngine):
        if len(fig.axes) == 1:
            fit_axes(fig, fig.axes[0], renderer)
        else:
            engine.execute(fig)
        freeze(fig)
    return renderer


def freeze(fig: Figure) -> None:
    """Keep ``fig``'s layout as it is: no layout engine at all. (With any engine, even matplotlib's
    ``"none"`` placeholder, ``savefig`` draws the whole figure once more, unseen, before saving it.)"""
    fig.set_layout_engine(None)
    if fig.get_layout_engine() is not None:  # the rc settings asked for a layout: keep one that does nothing
        fig.set_layout_engine("none")


#: Per axes, the room its surroundings take on each side (left, right, below, above) in pixels, as
#: measured by the figure's one layout pass; reused when a legend below the axes asks for room.
_AROUND: weakref.WeakKeyDictionary[Axes, tuple[float, float, float, float]] = weakref.WeakKeyDictionary()


def fit_axes(fig: Figure, ax: Axes, renderer: Any, bottom: float = 0.0) -> None:
    """Place ``ax`` so that it and everything around it fill ``fig`` up to :data:`PAD` from each edge,
    with ``bottom`` pixels left free under it (for a legend there). The surroundings are measured once
    per axes; a second call reuses that measurement."""
    around = _AROUND.get(ax)
    if around is None:
        frame = ax.get_window_extent(renderer)
        tight = ax.get_tightbbox(renderer, for_layout_only=True)
        if tight is None:
            return
        around = (max(0.0, frame.x0 - tight.x0), max(0.0, tight.x1 - frame.x1), max(0.0, frame.y0 - tight.y0),
                  max(0.0, tight.y1 - frame.y1))
        _AROUND[ax] = around
    width, height = fig.bbox.width, fig.bbox.height
    pad = PAD * fig.dpi
    left, right, below, above = around
    x0, x1 = pad + left, width - pad - right
    y0, y1 = pad + bottom + below, height - pad - above
    if x1 - x0 < 0.2 * width or y1 - y0 < 0.2 * height:  # far too crowded to fit: leave it as it was
        return
    ax.set_position((x0 / width, y0 / height, (x1 - x0) / width, (y1 - y0) / height))
