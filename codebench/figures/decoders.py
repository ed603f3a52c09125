"""``decoders_vs_p__<group>``: decoders side by side where the same points were decoded several ways.

Colour is the distance, line style and marker the decoder; bars are 95% intervals; open markers: fewer than 10 failures.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from codebench.analysis.families import Family
from codebench.figures.canvas import FigurePlan, rate_axes, titles
from codebench.figures.data import Curve, curves, y_range
from codebench.figures.labels import family_slug, family_title, rate_meaning
from codebench.figures.legend import LegendGroup, curve_obstacles, place_legends
from codebench.figures.marks import count_entries, interval_points
from codebench.figures.style import INK, decoder_style, distance_colour

KIND = "decoders_vs_p"


@dataclass(frozen=True)
class DecodersInputs:
    #: (decoder, its curves) in the group's order.
    per_decoder: tuple[tuple[str, tuple[Curve, ...]], ...]
    limits: tuple[float, float]
    x_label: str
    subline: str


def groups(families: Sequence[Family]) -> list[list[Family]]:
    """Families that differ only in their decoder, where there are at least two decoders."""
    found: dict[tuple[str, ...], list[Family]] = {}
    for family in families:
        key = (family.code, family.basis, family.noise, family.noise_options, family.rounds_rule, family.source)
        found.setdefault(key, []).append(family)
    return [group for _, group in sorted(found.items()) if len({f.decoder for f in group}) >= 2]


def plan(group: list[Family]) -> FigurePlan[DecodersInputs] | None:
    """The comparison of ``group``, or ``None`` when it has no rate to show."""
    per_decoder = tuple((family.decoder, tuple(curves(family))) for family in group)
    limits = y_range([curve for _, cs in per_decoder for curve in cs])
    if limits is None:
        return None
    decoders = list(dict.fromkeys(decoder for decoder, _ in per_decoder))
    title = family_title(group[0], with_decoder=False)
    inputs = DecodersInputs(per_decoder, limits, rate_meaning(group[0].noise).axis_label, title)
    caption = (f"Decoders compared for {title}: colour is the distance, line style and marker the decoder "
               f"({', '.join(decoders)}); bars are 95% intervals; open markers: fewer than 10 failures.")
    return FigurePlan(f"{KIND}__{family_slug(group[0], with_decoder=False)}", KIND, title, caption, inputs, draw)


def draw(inputs: DecodersInputs) -> Figure:
    all_curves = [curve for _, cs in inputs.per_decoder for curve in cs]
    axes = rate_axes(all_curves, inputs.limits)
    fig, ax, y_low = axes.fig, axes.ax, axes.y_low
    decoders: list[str] = []
    for decoder, decoder_curves in inputs.per_decoder:
        if decoder not in decoders:
            decoders.append(decoder)
        style, marker = decoder_style(decoders.index(decoder))
        for curve in decoder_curves:
            interval_points(ax, curve.p, curve.rate, curve.low, curve.high, curve.failures,
                            distance_colour(curve.distance), floor=y_low, marker=marker, linestyle=style)
    ax.set_ylim(y_low, axes.y_high)
    ax.set_xlabel(inputs.x_label)
    if not axes.log_x:  # as on the per-round figure: a linear p axis with matplotlib's default crowds
        ax.xaxis.set_major_locator(MaxNLocator(nbins=6))
    ax.set_ylabel("logical error per round")
    titles(ax, "Decoders compared: logical error per round", inputs.subline)
    distances = sorted({curve.distance for curve in all_curves})
    colours: list[Any] = [Patch(facecolor=distance_colour(d), edgecolor="none") for d in distances]
    styles: list[Any] = [Line2D([], [], color=INK, linestyle=decoder_style(i)[0], marker=decoder_style(i)[1],
                                markersize=6.5) for i in range(len(decoders))]
    counts = count_entries([curve.failures for curve in all_curves])
    place_legends(ax, [LegendGroup(colours, [f"d = {d}" for d in distances], "distance"),
                       LegendGroup(styles + [h for h, _ in counts], decoders + [t for _, t in counts], "decoder",
                                   {"handlelength": 3.2})],
                  curve_obstacles(ax, all_curves))
    return fig
