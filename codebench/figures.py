"""Figures of a sweep folder: PNG (150 dpi) and SVG files in ``DIR/figures``.

Three kinds, drawn from the results table and the :func:`~codebench.analysis.analyze`
records:

- ``per_round_vs_p__<family>``: logical error per round against p, one curve
  per distance with its 95% band, the threshold estimate (finite-size scaling
  if there is one, else a crossing) with its interval, the line
  logical = physical and the pseudo-thresholds on it;
- ``lambda_vs_d__<family>__p<p>``: logical error per round against distance at
  one p, the fit eps_d = C / Lambda^((d+1)/2) extended to the distance the
  smallest target needs, and the targets;
- ``decoders_vs_p__<group>``: decoders side by side where a group of points
  (code, basis, noise, rounds) was decoded several ways.

Every distance has one colour in every figure (:func:`distance_colour`).
Figures are :class:`matplotlib.figure.Figure` objects rendered by the Agg and
SVG backends; nothing touches pyplot's global state. A figure whose data are
missing is skipped, never drawn empty.
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Sequence, cast

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from codebench.analysis.families import Family, group_families
from codebench.noise import NOISE_MODELS

__all__ = ["FIGURES_DIR", "FigureFile", "distance_colour", "render_figures", "write_figures"]

FIGURES_DIR = "figures"
DPI = 150
FIGSIZE = (7.0, 5.0)
#: File-name prefixes this module owns in ``DIR/figures`` (stale files with them are removed).
PREFIXES = ("per_round_vs_p__", "lambda_vs_d__", "decoders_vs_p__")

INK = "#1f2430"
MUTED = "#5d6472"
THRESHOLD_INK = "#2c3e50"
THRESHOLD_SHADE = "#9aa8b8"
TARGET_INK = "#8a5a00"

#: Odd distances 3, 5, 7, ... in turn; hand-picked to stay apart on a projector and in grey print.
_ODD_COLOURS = (
    "#127a7a",  # 3  deep teal
    "#d9622b",  # 5  burnt orange
    "#4a4aa8",  # 7  indigo
    "#b38b00",  # 9  mustard
    "#b03a76",  # 11 plum
    "#4f8a2b",  # 13 moss
    "#7b4f2c",  # 15 walnut
    "#2f7fc1",  # 17 cornflower
    "#c73737",  # 19 brick
    "#6b6f78",  # 21 slate
)
#: Even distances 2, 4, 6, ... (repetition code), lighter relatives of the odd ones.
_EVEN_COLOURS = (
    "#3aa6a0",  # 2
    "#ee9a4d",  # 4
    "#7d7dd6",  # 6
    "#d9b53c",  # 8
    "#d874a8",  # 10
    "#86b95a",  # 12
    "#a8825e",  # 14
    "#70aee0",  # 16
    "#e07a7a",  # 18
    "#9a9ea6",  # 20
)
#: (line style, marker) per decoder, in the order decoders appear.
_DECODER_STYLES: tuple[tuple[Any, str], ...] = (("-", "o"), ("--", "s"), (":", "^"), ("-.", "D"), ((0, (5, 1, 1, 1)), "v"))

#: Our figure style, applied inside :func:`matplotlib.rc_context` only.
STYLE: dict[str, Any] = {
    "font.size": 12,
    "axes.titlesize": 13,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlepad": 10,
    "axes.titlecolor": INK,
    "axes.labelsize": 12.5,
    "axes.labelcolor": INK,
    "axes.edgecolor": "#6a7180",
    "axes.linewidth": 0.9,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.facecolor": "#fbfaf6",
    "axes.grid": True,
    "axes.grid.which": "major",
    "axes.axisbelow": True,
    "grid.color": "#e3e1da",
    "grid.linewidth": 0.8,
    "grid.linestyle": "-",
    "xtick.labelsize": 11,
    "ytick.labelsize": 11,
    "xtick.color": "#3a404c",
    "ytick.color": "#3a404c",
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.fontsize": 11,
    "legend.frameon": True,
    "legend.framealpha": 0.94,
    "legend.edgecolor": "#d8d6cf",
    "legend.fancybox": False,
    "legend.borderpad": 0.6,
    "legend.handlelength": 2.2,
    "lines.linewidth": 1.9,
    "lines.markersize": 6.5,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "svg.fonttype": "path",
}


@dataclass(frozen=True)
class FigureFile:
    """One figure as written: its PNG and SVG files, a short title and a caption."""

    stem: str
    kind: str
    png: Path
    svg: Path
    title: str
    caption: str


def distance_colour(distance: int) -> str:
    """The colour of distance ``distance`` in every figure (a fixed mapping)."""
    d = int(distance)
    if d % 2:
        return _ODD_COLOURS[max(0, (d - 3) // 2) % len(_ODD_COLOURS)]
    return _EVEN_COLOURS[max(0, (d - 2) // 2) % len(_EVEN_COLOURS)]


def write_figures(folder: Path, frame: pd.DataFrame, analysis: dict[str, Any]) -> list[Path]:
    """Write every figure of ``frame`` and ``analysis`` into ``folder/"figures"``.

    Returns the written files (a PNG and an SVG per figure). Files of earlier
    runs that this run did not write again are removed.
    """
    return [path for item in render_figures(folder, frame, analysis) for path in (item.png, item.svg)]


def render_figures(folder: Path, frame: pd.DataFrame, analysis: dict[str, Any]) -> list[FigureFile]:
    """Like :func:`write_figures`, returning what each figure shows."""
    out_dir = Path(folder) / FIGURES_DIR
    out_dir.mkdir(parents=True, exist_ok=True)
    written: list[FigureFile] = []
    families = group_families(frame) if _has_rows(frame) else []
    with matplotlib.rc_context(cast(Any, STYLE)):
        for family in families:
            item = _per_round_vs_p(out_dir, family, analysis)
            if item is not None:
                written.append(item)
        for family in families:
            written += _lambda_figures(out_dir, family, analysis)
        for group in _decoder_groups(families):
            item = _decoders_vs_p(out_dir, group)
            if item is not None:
                written.append(item)
    _remove_stale(out_dir, {item.stem for item in written})
    return written


# helpers -------------------------------------------------------------------


def _has_rows(frame: pd.DataFrame) -> bool:
    needed = {"code", "basis", "noise", "decoder", "distance", "rounds", "p", "shots"}
    return frame is not None and not frame.empty and needed <= set(frame.columns)


def _remove_stale(out_dir: Path, keep: set[str]) -> None:
    for path in out_dir.iterdir():
        if path.suffix in (".png", ".svg") and path.name.startswith(PREFIXES) and path.stem not in keep:
            path.unlink()


def _non_default_options(noise: str, noise_options: str) -> dict[str, str]:
    """The noise options that differ from the model's defaults (all of them if the model is unknown)."""
    try:
        options = json.loads(noise_options) if noise_options else {}
    except (TypeError, ValueError):
        return {"options": str(noise_options)}
    if not isinstance(options, dict):
        return {"options": str(options)}
    model = NOISE_MODELS.get(noise)
    defaults = {key: str(spec.default) for key, spec in model.option_specs.items()} if model is not None else {}
    return {str(k): str(v) for k, v in sorted(options.items()) if defaults.get(str(k)) != str(v)}


def _safe(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.+-]+", "-", text).strip("-")


_DEVICE_LABEL = re.compile(r"^(?P<name>.*?)\s*\[(?P<digest>[0-9a-f]+)\]$")


def _device_parts(options: dict[str, str]) -> tuple[str, str] | None:
    """(name, digest) of the device a family runs on, from its ``noise_options`` ("name [digest]")."""
    label = options.get("device")
    if label is None:
        return None
    match = _DEVICE_LABEL.match(label)
    return (match.group("name"), match.group("digest")) if match else (label, "")


def _family_slug(family: Family, with_decoder: bool = True) -> str:
    parts = [family.code, family.basis, family.noise]
    options = _non_default_options(family.noise, family.noise_options)
    device = _device_parts(options)
    if device is not None:
        name, digest = device
        options.pop("device")
        parts.append(_safe(name)[:32].strip("-") + (f"-{digest[:8]}" if digest else ""))
    parts += [f"{key}-{value}" for key, value in options.items()]
    if with_decoder:
        parts.append(family.decoder)
    parts.append(f"r{family.rounds_rule}")
    return _safe("_".join(parts))


def _family_title(family: Family, with_decoder: bool = True) -> str:
    noise = family.noise
    options = _non_default_options(family.noise, family.noise_options)
    device = _device_parts(options)
    if device is not None:
        options.pop("device")
        noise = f"device {device[0]}"
    if options:
        noise += " (" + ", ".join(f"{key}={value}" for key, value in options.items()) + ")"
    parts = [family.code, f"{family.basis} basis", noise]
    if with_decoder:
        parts.append(family.decoder)
    parts.append(f"rounds {family.rounds_rule}")
    return " \u00b7 ".join(parts)


def _x_label(noise: str) -> str:
    return "device scale factor" if noise == "device" else "physical error rate p (per operation)"


def _p_label(noise: str, p: float) -> str:
    return f"scale {_num(p)}" if noise == "device" else f"p = {_num(p)}"


def _num(value: float | None) -> str:
    if value is None or not math.isfinite(float(value)):
        return "n/a"
    return f"{float(value):.3g}"


def _sci(value: float) -> str:
    """``1e-09`` -> ``10^-9`` set as mathtext; other values keep three significant digits."""
    exponent = math.log10(value) if value > 0 else float("nan")
    if math.isfinite(exponent) and abs(exponent - round(exponent)) < 1e-9:
        return f"$10^{{{int(round(exponent))}}}$"
    return f"{value:.3g}"


def _finite(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _matches(record: dict[str, Any], family: Family) -> bool:
    """Whether an analysis record belongs to ``family`` (identity, and noise options if recorded)."""
    identity = family.identity()
    if any(str(record.get(key)) != str(value) for key, value in identity.items()):
        return False
    options = record.get("noise_options")
    return options is None or str(options) == family.noise_options


def _records(analysis: dict[str, Any], section: str, family: Family) -> list[dict[str, Any]]:
    records = analysis.get(section) or []
    return [r for r in records if isinstance(r, dict) and _matches(r, family)]


def chosen_threshold(records: Sequence[dict[str, Any]]) -> dict[str, Any] | None:
    """The threshold estimate to draw: finite-size scaling if present, else the crossing of the largest distances."""
    usable = [r for r in records if _finite(r.get("threshold")) is not None]
    fss = [r for r in usable if r.get("method") == "finite_size_scaling"]
    if fss:
        return fss[0]
    crossings = [r for r in usable if r.get("method") == "crossing"]
    if not crossings:
        return usable[0] if usable else None

    def size(record: dict[str, Any]) -> tuple[int, int]:
        distances = [int(d) for d in record.get("distances") or [0]]
        return min(distances), max(distances)

    return max(crossings, key=size)


def _rate_axes(
    curves: Sequence[Any], y_range: tuple[float, float]
) -> tuple[Figure, Any, list[float], bool, bool, float, float]:
    """A new figure whose axes are logarithmic where the curves' p values or rates span decades."""
    all_p = [float(p) for curve in curves for p in curve.p]
    log_x, log_y = _spans_decades(all_p), _spans_decades(y_range)
    fig, ax = _new_figure()
    if log_x:
        ax.set_xscale("log")
    if log_y:
        ax.set_yscale("log")
    y_low, y_high = _pad_limits(*y_range, log_y)
    return fig, ax, all_p, log_x, log_y, y_low, y_high


def _new_figure() -> tuple[Figure, Axes]:
    fig = Figure(figsize=FIGSIZE, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    return fig, ax


#: Characters of the family line that fit above the axes of a 7-inch figure.
_SUBLINE_CHARS = 66


def _wrap_family(text: str) -> str:
    """Break a long " · "-separated family line into two lines, at the separator nearest the middle."""
    if len(text) <= _SUBLINE_CHARS:
        return text
    parts = text.split(" \u00b7 ")
    best, split = None, 1
    for i in range(1, len(parts)):
        first = " \u00b7 ".join(parts[:i])
        score = max(len(first), len(text) - len(first))
        if best is None or score < best:
            best, split = score, i
    return " \u00b7 ".join(parts[:split]) + "\n" + " \u00b7 ".join(parts[split:])


def _titles(ax: Axes, headline: str, subline: str) -> None:
    """A bold headline over a muted line naming the family (both left-aligned on the axes)."""
    subline = _wrap_family(subline)
    ax.set_title(subline, loc="left", fontsize=11.5, fontweight="normal", color=MUTED, pad=8)
    lift = 27 + 15 * subline.count("\n")
    ax.annotate(headline, xy=(0, 1), xycoords="axes fraction", xytext=(0, lift), textcoords="offset points",
                ha="left", va="bottom", fontsize=14, fontweight="bold", color=INK, annotation_clip=False)


def _save(fig: Figure, out_dir: Path, stem: str, kind: str, title: str, caption: str) -> FigureFile:
    png = out_dir / f"{stem}.png"
    svg = out_dir / f"{stem}.svg"
    fig.savefig(png, dpi=DPI, metadata={"Software": None})
    with matplotlib.rc_context(cast(Any, {"svg.hashsalt": stem})):
        fig.savefig(svg, metadata={"Date": None, "Creator": None})
    return FigureFile(stem, kind, png, svg, title, caption)


@dataclass(frozen=True)
class _Curve:
    """One distance of one family, sorted by p: the plotted arrays."""

    distance: int
    p: np.ndarray
    rate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    failures: np.ndarray


def _curves(family: Family) -> list[_Curve]:
    curves = []
    for distance in family.distances:
        part = family.at_distance(distance)
        part = part[part["shots"] > 0]
        rate = part["per_round_rate"].to_numpy(dtype=float)
        keep = np.isfinite(rate)
        if not keep.any():
            continue
        curves.append(_Curve(
            distance,
            part["p"].to_numpy(dtype=float)[keep],
            rate[keep],
            part["per_round_low"].to_numpy(dtype=float)[keep],
            part["per_round_high"].to_numpy(dtype=float)[keep],
            part["failures"].to_numpy(dtype=float)[keep],
        ))
    return curves


def _spans_decades(values: Iterable[float]) -> bool:
    positive = [v for v in values if math.isfinite(v) and v > 0]
    return len(positive) >= 2 and max(positive) / min(positive) >= 10.0


def _y_range(curves: Sequence[_Curve]) -> tuple[float, float] | None:
    """Positive limits holding every rate and band (a zero-failure point shows its upper end)."""
    values: list[float] = []
    for curve in curves:
        values += [float(v) for v in curve.rate if v > 0]
        values += [float(v) for v in curve.low if math.isfinite(v) and v > 0]
        values += [float(v) for v in curve.high if math.isfinite(v) and v > 0]
    if not values:
        return None
    return min(values), max(values)


def _pad_limits(low: float, high: float, log: bool) -> tuple[float, float]:
    if log:
        return low / 1.6, high * 1.6
    span = high - low if high > low else max(abs(high), 1e-12)
    return max(0.0, low - 0.06 * span), high + 0.06 * span


def _zero_marker(ax: Axes, x: Sequence[float], y: Sequence[float], colour: str) -> None:
    ax.plot(x, y, linestyle="none", marker="v", markersize=7, markerfacecolor="white",
            markeredgecolor=colour, markeredgewidth=1.5, zorder=4)


_LEGEND_SPOTS: tuple[Any, ...] = ("upper left", "lower right", "upper right", "lower left", "center right", "center left",
                 "upper center", "lower center")


def _to_axes(ax: Axes, x: Sequence[float], y: Sequence[float]) -> np.ndarray:
    """Data points in axes-fraction coordinates, densified along the polyline (straight on screen)."""
    frac = _markers(ax, x, y)
    if len(frac) <= 1:
        return frac
    pieces = [np.linspace(a, b, 25, endpoint=False) for a, b in zip(frac[:-1], frac[1:])]
    return np.vstack(pieces + [frac[-1:]])


@dataclass
class _LegendGroup:
    """Entries that share one legend box."""

    handles: list[Any]
    labels: list[str]
    title: str | None = None
    options: dict[str, Any] = field(default_factory=dict)


def _place_legends(ax: Axes, groups: Sequence[_LegendGroup], obstacles: Sequence[tuple[np.ndarray, float]],
                   avoid: Sequence[Any] = ()) -> None:
    """Legends inside the axes where they cover the least of ``obstacles``, one box per group.

    ``obstacles`` are (points in axes fractions, weight) pairs; ``avoid`` holds
    artists (a label) no legend may cover. Each group tries every corner and
    edge, in one or two columns. Groups that would hide a data marker
    wherever they go share one legend below the axes.
    """
    groups = [g for g in groups if g.handles]
    fig = ax.get_figure(root=True)
    if not groups or not isinstance(fig, Figure):
        return
    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    fig.draw_without_rendering()  # settles the layout, so axes fractions are final
    renderer = canvas.get_renderer()  # type: ignore[no-untyped-call]
    taken = [artist.get_window_extent(renderer).transformed(ax.transAxes.inverted()) for artist in avoid]
    below: list[_LegendGroup] = []
    for group in groups:
        best: tuple[float, Any, int] | None = None
        for ncol in (1, 2) if len(group.handles) >= 5 else (1,):
            for spot in _LEGEND_SPOTS:
                legend = ax.legend(group.handles, group.labels, loc=spot, ncols=ncol, title=group.title,
                                   **group.options)
                box = legend.get_window_extent(renderer).transformed(ax.transAxes.inverted())
                legend.remove()
                score = 0.4 * (ncol - 1)
                for points, weight in obstacles:
                    if len(points):
                        inside = ((points[:, 0] >= box.x0) & (points[:, 0] <= box.x1)
                                  & (points[:, 1] >= box.y0) & (points[:, 1] <= box.y1))
                        score += weight * float(inside.sum())
                if any(box.overlaps(other) for other in taken):
                    score += 1e6
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


def _legend_below(fig: Figure, renderer: Any, groups: Sequence[_LegendGroup]) -> None:
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


#: Obstacle weights: a data marker, a point along a curve, along a band edge, along a reference line.
_MARKER, _ALONG_CURVE, _ALONG_BAND, _ALONG_GUIDE = 3.0, 0.2, 0.04, 0.01
_HIDES_A_MARKER = 3.0


def _markers(ax: Axes, x: Sequence[float], y: Sequence[float]) -> np.ndarray:
    points = np.column_stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)])
    points = points[np.all(np.isfinite(points), axis=1)]
    if ax.get_yscale() == "log":
        points = points[points[:, 1] > 0]
    if points.size == 0:
        return np.empty((0, 2))
    return np.asarray(ax.transAxes.inverted().transform(ax.transData.transform(points)))


def _curve_obstacles(ax: Axes, curves: Sequence[_Curve]) -> list[tuple[np.ndarray, float]]:
    out = []
    for curve in curves:
        seen = curve.rate > 0
        p, rate = list(curve.p[seen]), list(curve.rate[seen])
        out.append((_markers(ax, p, rate), _MARKER))
        out.append((_to_axes(ax, p, rate), _ALONG_CURVE))
        out.append((_to_axes(ax, p, list(curve.high[seen])), _ALONG_BAND))
        out.append((_to_axes(ax, p, list(curve.low[seen])), _ALONG_BAND))
        if (~seen).any():
            out.append((_markers(ax, list(curve.p[~seen]), list(curve.high[~seen])), _MARKER))
    return out


# per-round error against p -------------------------------------------------


def _per_round_vs_p(out_dir: Path, family: Family, analysis: dict[str, Any]) -> FigureFile | None:
    curves = _curves(family)
    y_range = _y_range(curves)
    if not curves or y_range is None:
        return None
    fig, ax, all_p, log_x, log_y, y_low, y_high = _rate_axes(curves, y_range)
    any_zero = False
    for curve in curves:
        colour = distance_colour(curve.distance)
        seen = curve.rate > 0
        p_seen = curve.p[seen]
        low = np.where(np.isfinite(curve.low[seen]), np.maximum(curve.low[seen], y_low), y_low)
        high = np.where(np.isfinite(curve.high[seen]), curve.high[seen], curve.rate[seen])
        if p_seen.size >= 2:
            ax.fill_between(p_seen, low, high, color=colour, alpha=0.16, linewidth=0, zorder=1)
        elif p_seen.size == 1:
            ax.errorbar(p_seen, curve.rate[seen], yerr=[curve.rate[seen] - low, high - curve.rate[seen]],
                        fmt="none", ecolor=colour, elinewidth=1.2, capsize=3, zorder=2)
        ax.plot(p_seen, curve.rate[seen], color=colour, marker="o", markeredgecolor="white",
                markeredgewidth=0.8, label=f"d = {curve.distance}", zorder=3)
        if (~seen).any():
            any_zero = True
            _zero_marker(ax, list(curve.p[~seen]), list(curve.high[~seen]), colour)
    ax.set_ylim(y_low, y_high)
    x_low, x_high = min(all_p), max(all_p)
    if log_x:
        ax.set_xlim(x_low / 1.15, x_high * 1.15)
    else:
        pad = 0.05 * (x_high - x_low) if x_high > x_low else 0.1 * x_high
        ax.set_xlim(max(0.0, x_low - pad), x_high + pad)
    xlim = ax.get_xlim()
    extra: list[tuple[Any, str]] = []
    obstacles: list[tuple[np.ndarray, float]] = []
    if family.noise != "device":
        line = np.geomspace(xlim[0], xlim[1], 60) if log_x else np.linspace(xlim[0], xlim[1], 60)
        (diag,) = ax.plot(line, line, linestyle=(0, (6, 4)), color="#7a7f8a", linewidth=1.4, zorder=2,
                          scalex=False, scaley=False)
        extra.append((diag, "logical = physical"))
        inside = (line >= y_low) & (line <= y_high)
        obstacles.append((_to_axes(ax, list(line[inside]), list(line[inside])), _ALONG_GUIDE))
        pseudo = [r for r in _records(analysis, "pseudo_thresholds", family)
                  if _finite(r.get("pseudo_threshold")) is not None]
        shown = False
        for record in pseudo:
            value = float(record["pseudo_threshold"])
            if xlim[0] <= value <= xlim[1] and y_low <= value <= y_high:
                ax.plot([value], [value], linestyle="none", marker="D", markersize=7,
                        markerfacecolor=distance_colour(int(record.get("distance") or 0)),
                        markeredgecolor=INK, markeredgewidth=0.8, zorder=5)
                obstacles.append((_markers(ax, [value], [value]), _MARKER))
                shown = True
        if shown:
            handle = Line2D([], [], linestyle="none", marker="D", markersize=7, markerfacecolor="#ffffff",
                            markeredgecolor=INK)
            extra.append((handle, "pseudo-threshold (colour: d)"))
    threshold = chosen_threshold(_records(analysis, "thresholds", family))
    keep_clear: list[Any] = []
    if threshold is not None:
        entries, keep_clear, column = _draw_threshold(ax, threshold, xlim)
        extra += entries
        obstacles += column
    ax.set_xlim(*xlim)
    if not log_x:
        ax.xaxis.set_major_locator(MaxNLocator(nbins=6))
    if any_zero:
        extra.append((Line2D([], [], linestyle="none", marker="v", markersize=7, markerfacecolor="white",
                             markeredgecolor=MUTED, markeredgewidth=1.5), "0 failures: 95% upper end"))
    ax.set_xlabel(_x_label(family.noise))
    ax.set_ylabel("logical error per round")
    title = _family_title(family)
    _titles(ax, "Logical error per round vs " + ("device scale" if family.noise == "device" else "p"), title)
    handles, labels = ax.get_legend_handles_labels()
    _place_legends(ax, [_LegendGroup(handles, labels), _LegendGroup([h for h, _ in extra], [t for _, t in extra])],
                   _curve_obstacles(ax, curves) + obstacles, avoid=keep_clear)
    stem = f"per_round_vs_p__{_family_slug(family)}"
    caption = (f"Logical error per round against {'the device scale factor' if family.noise == 'device' else 'p'}"
               f" for {title}; bands are 95% intervals.")
    if threshold is not None:
        caption += (f" Threshold estimate ({_method_name(threshold, short=False)}): {_num(threshold['threshold'])}"
                    f" [{_num(threshold.get('low'))}, {_num(threshold.get('high'))}], fitted to the failure"
                    " probability of the whole experiment.")
    return _save(fig, out_dir, stem, "per_round_vs_p", title, caption)


def _method_name(record: dict[str, Any], short: bool = True) -> str:
    method = str(record.get("method") or "estimate")
    if method == "finite_size_scaling":
        return "FSS" if short else "finite-size scaling"
    if method == "crossing":
        distances = record.get("distances") or []
        return "crossing d = " + "/".join(str(int(d)) for d in distances) if distances else "crossing"
    return method.replace("_", " ")


def _draw_threshold(ax: Axes, record: dict[str, Any], xlim: tuple[float, float]
                    ) -> tuple[list[tuple[Any, str]], list[Any], list[tuple[np.ndarray, float]]]:
    """Draw the threshold; return its legend entries, artists to keep clear and obstacle points."""
    value = float(record["threshold"])
    low = _finite(record.get("low"))
    high = _finite(record.get("high"))
    parts: list[Any] = []
    if low is not None and high is not None and high > xlim[0] and low < xlim[1]:
        parts.append(ax.axvspan(max(low, xlim[0]), min(high, xlim[1]), color=THRESHOLD_SHADE, alpha=0.22,
                                linewidth=0, zorder=0))
    label = f"threshold {_num(value)} ({_method_name(record)})"
    if xlim[0] <= value <= xlim[1]:
        parts.append(ax.axvline(value, color=THRESHOLD_INK, linewidth=1.6, zorder=2))
        x_frac = float(ax.transAxes.inverted().transform(ax.transData.transform((value, 1.0)))[0])
        right = x_frac < 0.6
        text = ax.text(value, 0.025, f" {label} " if right else f" {label} ", transform=ax.get_xaxis_transform(),
                       ha="left" if right else "right", va="bottom", fontsize=11, color=THRESHOLD_INK, zorder=6,
                       bbox={"boxstyle": "square,pad=0.2", "facecolor": "#fbfaf6", "edgecolor": "none",
                             "alpha": 0.9})
        column = np.column_stack([np.full(40, x_frac), np.linspace(0, 1, 40)])
        return [(tuple(reversed(parts)), "threshold, 95% interval")], [text], [(column, _ALONG_GUIDE * 5)]
    side = ">" if value > xlim[1] else "<"
    handle = Line2D([], [], color=THRESHOLD_INK, linewidth=1.6)
    entries = [(handle, f"{label} {side} sampled range")]
    if parts:
        entries.append((parts[0], "threshold 95% interval"))
    return entries, [], []


# per-round error against distance (Lambda) ----------------------------------


def _lambda_figures(out_dir: Path, family: Family, analysis: dict[str, Any]) -> list[FigureFile]:
    out = []
    targets = [float(t) for t in (analysis.get("settings") or {}).get("targets") or [] if _finite(t)]
    projections = _records(analysis, "projections", family)
    for record in _records(analysis, "lambdas", family):
        p = _finite(record.get("p"))
        lam = _finite(record.get("lambda"))
        scale = _finite(record.get("C"))
        if p is None or lam is None or scale is None or lam <= 0 or scale <= 0:
            continue
        here = [r for r in projections if _finite(r.get("p")) is not None and math.isclose(float(r["p"]), p,
                                                                                             rel_tol=1e-9)]
        item = _lambda_vs_d(out_dir, family, record, p, lam, scale, targets, here)
        if item is not None:
            out.append(item)
    return out


def _lambda_vs_d(out_dir: Path, family: Family, record: dict[str, Any], p: float, lam: float, scale: float,
                 targets: list[float], projections: list[dict[str, Any]]) -> FigureFile | None:
    rows = family.at_rate(p)
    rows = rows[(rows["shots"] > 0) & np.isfinite(rows["per_round_rate"].to_numpy(dtype=float))]
    if rows.empty:
        return None
    distances = rows["distance"].to_numpy(dtype=int)
    rate = rows["per_round_rate"].to_numpy(dtype=float)
    low = rows["per_round_low"].to_numpy(dtype=float)
    high = rows["per_round_high"].to_numpy(dtype=float)
    positive = [float(v) for v in np.concatenate([rate, high]) if v > 0]
    if not positive:
        return None
    fig, ax = _new_figure()
    ax.set_yscale("log")
    for d, eps, lo, hi in zip(distances, rate, low, high):
        colour = distance_colour(int(d))
        if eps > 0:
            lo = lo if lo > 0 else eps / 10
            ax.errorbar([d], [eps], yerr=[[eps - lo], [hi - eps]], fmt="o", color=colour, markersize=8,
                        markeredgecolor="white", markeredgewidth=0.9, elinewidth=1.6, capsize=4, zorder=4)
        else:
            ax.plot([float(d)], [float(hi)], linestyle="none", marker="v", markersize=8, markerfacecolor="white",
                    markeredgecolor=colour, markeredgewidth=1.5, zorder=4,
                    label=f"d = {int(d)}: 0 failures, 95% upper end")
    fitted = [int(d) for d in record.get("distances") or distances]
    d_first, d_last = min(int(distances.min()), min(fitted)), max(fitted)
    d_top = max(int(distances.max()), d_last)
    wanted = [r for r in projections if _finite(r.get("distance")) is not None and _finite(r.get("target"))]
    # Keep the sampled distances readable: a projection far beyond them is named, not drawn.
    cap = max(4 * d_top, 41)
    drawn = [r for r in wanted if int(float(r["distance"])) <= cap]
    beyond = [r for r in wanted if int(float(r["distance"])) > cap]
    reach = max([int(float(r["distance"])) for r in drawn] + [d_top] + ([cap] if beyond else []))
    fit_x = np.linspace(d_first, d_last, 100)
    obstacles: list[tuple[np.ndarray, float]] = []
    ax.plot(fit_x, scale / lam ** ((fit_x + 1) / 2), color=INK, linewidth=1.8, zorder=3,
            label="fit  C / \u039b^((d+1)/2)")
    ext_x = np.linspace(d_last, reach, 100)
    if reach > d_last:
        ax.plot(ext_x, scale / lam ** ((ext_x + 1) / 2), color=INK, linewidth=1.6, linestyle=(0, (2, 2.5)),
                zorder=3, label="fit, extrapolated")
    shown_targets = sorted(set(targets) | {float(r["target"]) for r in wanted})
    y_values = positive + [t for t in shown_targets if t > 0]
    ax.set_ylim(min(y_values) / 5, max(y_values) * 4)
    span = max(reach - d_first, 2)
    ax.set_xlim(d_first - max(0.8, 0.04 * span), reach + max(2.5, 0.13 * span))
    keep_clear: list[Any] = []
    transform = ax.get_yaxis_transform()
    for target in shown_targets:
        ax.axhline(target, color=TARGET_INK, linewidth=1.1, linestyle=(0, (5, 4)), zorder=1)
        keep_clear.append(ax.text(0.012, target, f"target {_sci(target)} per round", transform=transform,
                                  ha="left", va="top", fontsize=11, color=TARGET_INK))
    for proj in drawn:
        d_need, target = int(float(proj["distance"])), float(proj["target"])
        ax.plot([d_need], [target], linestyle="none", marker="o", markersize=7, markerfacecolor="white",
                markeredgecolor=TARGET_INK, markeredgewidth=1.8, zorder=5)
        keep_clear.append(ax.annotate(f"d = {d_need}", (d_need, target), textcoords="offset points",
                                      xytext=(7, 5), ha="left", va="bottom", fontsize=11, fontweight="bold",
                                      color=TARGET_INK))
    if beyond:
        text = "\n".join(f"{_sci(float(r['target']))} needs d = {int(float(r['distance']))} (off the plot)"
                         for r in beyond)
        keep_clear.append(ax.text(0.99, 0.5, text, transform=ax.transAxes, ha="right", va="center", fontsize=11,
                                  color=TARGET_INK, bbox={"boxstyle": "round,pad=0.4", "facecolor": "white",
                                                          "edgecolor": "#e0c9a0"}))
    obstacles.append((_markers(ax, list(distances.astype(float)), list(np.where(rate > 0, rate, high))), _MARKER))
    obstacles.append((_to_axes(ax, list(fit_x), list(scale / lam ** ((fit_x + 1) / 2))), _ALONG_CURVE))
    if reach > d_last:
        obstacles.append((_to_axes(ax, list(ext_x), list(scale / lam ** ((ext_x + 1) / 2))), _ALONG_CURVE))
    ax.xaxis.set_major_locator(MaxNLocator(integer=True, min_n_ticks=3))
    ax.set_xlabel("code distance d")
    ax.set_ylabel("logical error per round")
    low_lam, high_lam = _finite(record.get("low")), _finite(record.get("high"))
    head = f"\u039b = {lam:.3g}"
    if low_lam is not None and high_lam is not None:
        head += f"  [{low_lam:.3g}, {high_lam:.3g}] (95%)"
    handles, labels = ax.get_legend_handles_labels()
    _place_legends(ax, [_LegendGroup(handles, labels, head + "\nfit over d = " + ", ".join(str(d) for d in fitted),
                                     {"title_fontproperties": {"size": 12, "weight": "bold"}})],
                   obstacles, avoid=keep_clear)
    title = _family_title(family)
    _titles(ax, f"Suppression with distance at {_p_label(family.noise, p)}", title)
    stem = f"lambda_vs_d__{_family_slug(family)}__p{_safe(f'{p:.6g}')}"
    caption = (f"Logical error per round against distance at {_p_label(family.noise, p)} for {title}: "
               f"points with 95% intervals, the Lambda fit (dotted where extrapolated), the targets and the "
               f"distance each needs.")
    return _save(fig, out_dir, stem, "lambda_vs_d", f"{title}, {_p_label(family.noise, p)}", caption)


# decoders side by side -----------------------------------------------------


def _decoder_groups(families: Sequence[Family]) -> list[list[Family]]:
    groups: dict[tuple[str, ...], list[Family]] = {}
    for family in families:
        key = (family.code, family.basis, family.noise, family.noise_options, family.rounds_rule)
        groups.setdefault(key, []).append(family)
    return [group for _, group in sorted(groups.items()) if len({f.decoder for f in group}) >= 2]


def _decoders_vs_p(out_dir: Path, group: list[Family]) -> FigureFile | None:
    per_decoder = [(family.decoder, _curves(family)) for family in group]
    curves = [curve for _, cs in per_decoder for curve in cs]
    y_range = _y_range(curves)
    if y_range is None:
        return None
    fig, ax, all_p, log_x, log_y, y_low, y_high = _rate_axes(curves, y_range)
    decoders: list[str] = []
    for decoder, decoder_curves in per_decoder:
        if decoder not in decoders:
            decoders.append(decoder)
        style, marker = _DECODER_STYLES[decoders.index(decoder) % len(_DECODER_STYLES)]
        for curve in decoder_curves:
            colour = distance_colour(curve.distance)
            seen = curve.rate > 0
            low = np.where(np.isfinite(curve.low), np.maximum(curve.low, y_low), y_low)
            ax.errorbar(curve.p[seen], curve.rate[seen],
                        yerr=[curve.rate[seen] - low[seen], curve.high[seen] - curve.rate[seen]],
                        color=colour, linestyle=style, marker=marker, markersize=6.5, markeredgecolor="white",
                        markeredgewidth=0.7, elinewidth=1.0, capsize=2.5, zorder=3)
            if (~seen).any():
                _zero_marker(ax, list(curve.p[~seen]), list(curve.high[~seen]), colour)
    ax.set_ylim(y_low, y_high)
    ax.set_xlabel(_x_label(group[0].noise))
    ax.set_ylabel("logical error per round")
    title = _family_title(group[0], with_decoder=False)
    _titles(ax, "Decoders compared: logical error per round", title)
    distances = sorted({curve.distance for curve in curves})
    colours: list[Any] = [Patch(facecolor=distance_colour(d), edgecolor="none") for d in distances]
    styles: list[Any] = [Line2D([], [], color=INK, linestyle=_DECODER_STYLES[i % len(_DECODER_STYLES)][0],
                                marker=_DECODER_STYLES[i % len(_DECODER_STYLES)][1], markersize=6.5)
                         for i in range(len(decoders))]
    _place_legends(ax, [_LegendGroup(colours, [f"d = {d}" for d in distances], "distance"),
                        _LegendGroup(styles, decoders, "decoder", {"handlelength": 3.2})], _curve_obstacles(ax, curves))
    stem = f"decoders_vs_p__{_family_slug(group[0], with_decoder=False)}"
    caption = (f"Decoders compared for {title}: colour is the distance, line style and marker the decoder "
               f"({', '.join(decoders)}); bars are 95% intervals.")
    return _save(fig, out_dir, stem, "decoders_vs_p", title, caption)
