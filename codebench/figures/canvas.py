"""A figure's frame and files: plans, new axes, titles, and one drawing saved as PNG and SVG.

Figures are :class:`matplotlib.figure.Figure` objects on the Agg canvas;
nothing touches pyplot's global state.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Generic, Sequence, TypeVar, cast

import matplotlib
import matplotlib.image
from matplotlib.axes import Axes
from matplotlib.axis import Axis
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator

from codebench.figures.data import Curve, spans_decades
from codebench.figures.labels import wrap_family
from codebench.figures.layout import freeze
from codebench.figures.style import DPI, FIGSIZE, INK, MUTED, log_tick_label

InputsT = TypeVar("InputsT")


@dataclass(frozen=True)
class FigureFile:
    """One figure as written: its PNG and SVG files, a short title and a caption.

    ``drawn`` is false when the files of an earlier run were current and kept.
    """

    stem: str
    kind: str
    png: Path
    svg: Path
    title: str
    caption: str
    drawn: bool = True


@dataclass(frozen=True)
class FigurePlan(Generic[InputsT]):
    """A figure before it is drawn: its names and everything ``draw`` reads.

    ``draw(inputs)`` reads nothing else, so a digest of ``inputs`` (see
    :mod:`codebench.figures.manifest`) tells whether files drawn earlier are current.
    """

    stem: str
    kind: str
    title: str
    caption: str
    inputs: InputsT
    draw: Callable[[InputsT], Figure]

    def render(self) -> Figure:
        return self.draw(self.inputs)


def new_figure(size: tuple[float, float] = FIGSIZE) -> tuple[Figure, Axes]:
    """A figure at the PNG's resolution, so the one Agg drawing is the PNG."""
    fig = Figure(figsize=size, dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    return fig, ax


@dataclass(frozen=True)
class RateAxes:
    """Axes whose x is the rate: logarithmic where the values span decades, and the padded y limits."""

    fig: Figure
    ax: Axes
    all_p: list[float]
    log_x: bool
    log_y: bool
    y_low: float
    y_high: float


def rate_axes(curves: Sequence[Curve], y_range: tuple[float, float]) -> RateAxes:
    """A new figure whose axes are logarithmic where the curves' p values or rates span decades."""
    all_p = [float(p) for curve in curves for p in curve.p]
    log_x, log_y = spans_decades(all_p), spans_decades(y_range)
    fig, ax = new_figure()
    if log_x:
        log_axis(ax, "x")
    if log_y:
        log_axis(ax, "y")
    y_low, y_high = pad_limits(*y_range, log_y)
    return RateAxes(fig, ax, all_p, log_x, log_y, y_low, y_high)


def log_axis(ax: Axes, which: str) -> None:
    """Make ``ax``'s ``which`` ("x" or "y") axis logarithmic, labelled in plain text (``10⁻³``, and
    ``2×10⁻³`` / ``5×10⁻³`` where decades are few): matplotlib's own labels are mathtext, whose parsing
    took most of the time of drawing a figure. Minor ticks only at 2 and 5 times a power of ten: our
    look, and a quarter of the tick objects to lay out and draw."""
    (ax.set_xscale if which == "x" else ax.set_yscale)("log")
    axis = ax.xaxis if which == "x" else ax.yaxis
    axis.set_minor_locator(LogLocator(subs=(2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(log_tick_label))
    axis.set_minor_formatter(FuncFormatter(_minor_label(axis)))


def _minor_label(axis: Axis) -> Callable[[float, object], str]:
    def label(value: float, position: object = None) -> str:
        low, high = sorted(axis.get_view_interval())
        # Labels between decades only where the axis spans fewer than two of them (else they crowd).
        few = low > 0 and high / low < 100.0
        return log_tick_label(value) if few else ""
    return label


def pad_limits(low: float, high: float, log: bool) -> tuple[float, float]:
    """Axis limits with a margin around [low, high] (a factor on a log axis)."""
    if log:
        return low / 1.6, high * 1.6
    span = high - low if high > low else max(abs(high), 1e-12)
    return max(0.0, low - 0.06 * span), high + 0.06 * span


def titles(ax: Axes, headline: str, subline: str) -> None:
    """A bold headline over a muted line naming the family (both left-aligned on the axes)."""
    subline = wrap_family(subline)
    ax.set_title(subline, loc="left", fontsize=11.5, fontweight="normal", color=MUTED, pad=8)
    lift = 27 + 15 * subline.count("\n")
    ax.annotate(headline, xy=(0, 1), xycoords="axes fraction", xytext=(0, lift), textcoords="offset points",
                ha="left", va="bottom", fontsize=14, fontweight="bold", color=INK, annotation_clip=False)


def save(fig: Figure, png: Path, svg: Path, salt: str) -> None:
    """Lay ``fig`` out and draw it once; write that drawing as the PNG, then the SVG without a new layout.

    Saving each format with :meth:`Figure.savefig` ran the constrained layout
    twice and drew on Agg for the PNG; here the layout runs once and the PNG
    is the Agg buffer of that one drawing (the same call ``savefig`` makes).
    ``salt`` fixes the SVG's element ids, so equal inputs give equal bytes.
    """
    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    fig.canvas.draw()
    freeze(fig)  # keep the positions just computed for the SVG (and no unseen extra draw before it)
    no_software: dict[str, Any] = {"Software": None}  # None drops the key (no version in the bytes)
    matplotlib.image.imsave(png, canvas.renderer.buffer_rgba(), format="png", origin="upper", dpi=fig.dpi,
                            metadata=no_software)
    with matplotlib.rc_context(cast(Any, {"svg.hashsalt": salt})):
        fig.savefig(svg, metadata={"Date": None, "Creator": None})
