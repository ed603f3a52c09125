"""``lambda_vs_d__<family>``: logical error per round against distance, one figure per family.

Up to :data:`MAX_RATES` representative rates of the family (lowest, middle and highest p among
the fits that are not near threshold and cover the most distances), each in its own colour and
marker: the points with their 95% intervals, the fit eps_d = C / Lambda^((d+1)/2) with its 95%
band (:func:`~.marks.lambda_band`), extended (dashed) to the distance the smallest target needs, the
targets, and the distance each target needs (named in the legend when it lies far off the plot).
Every rate's fit and projections are in the report's Lambda and projection tables; the figure shows
how they behave, not every number.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from codebench.analysis.families import Family
from codebench.figures.canvas import FigurePlan, log_axis, new_figure, titles
from codebench.figures.data import family_records
from codebench.figures.labels import family_slug, family_title, rate_meaning
from codebench.figures.legend import (
    ALONG_CURVE,
    MARKER,
    Label,
    LegendGroup,
    Obstacle,
    markers,
    place_labels,
    place_legends,
    to_axes,
)
from codebench.figures.marks import (
    count_entries,
    interval_points,
    lambda_band,
    lambda_curve,
)
from codebench.figures.style import (
    FIGSIZE,
    FIT_BAND_ALPHA,
    INK,
    MUTED,
    TARGET_INK,
    finite,
    rate_style,
    sci,
)

KIND = "lambda_vs_d"
#: Rates drawn per family.
MAX_RATES = 3


@dataclass(frozen=True)
class RateSeries:
    """One rate of the figure: its points and its Lambda fit."""

    label: str
    distances: np.ndarray
    rate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    failures: np.ndarray
    lam: float
    scale: float
    lam_low: float | None
    lam_high: float | None
    #: Covariance of (ln C, ln Lambda), for the fit's band.
    log_cov: tuple[tuple[float, ...], ...] | None
    #: Distances the fit used.
    fitted: tuple[int, ...]
    #: (distance needed, target) of every projection at this rate.
    projections: tuple[tuple[int, float], ...]


@dataclass(frozen=True)
class LambdaInputs:
    series: tuple[RateSeries, ...]
    targets: tuple[float, ...]
    #: How many rates of the family have a fit (drawn or not).
    fits: int
    headline: str
    subline: str


def _usable(record: dict[str, Any]) -> bool:
    values = [finite(record.get(key)) for key in ("p", "lambda", "C")]
    return all(v is not None and v > 0 for v in values)


def representative(records: list[dict[str, Any]], most: int = MAX_RATES) -> list[dict[str, Any]]:
    """Up to ``most`` fits, lowest p first: among those not near threshold (else all) that cover the most
    distances, the lowest, the middle and the highest p."""
    usable = sorted((r for r in records if _usable(r)), key=lambda r: float(r["p"]))
    pool = [r for r in usable if not r.get("near_threshold")] or usable
    widest = max((len(r.get("distances") or []) for r in pool), default=0)
    pool = [r for r in pool if len(r.get("distances") or []) == widest]
    if len(pool) <= most:
        return pool
    picks = sorted({round(i * (len(pool) - 1) / (most - 1)) for i in range(most)})
    return [pool[i] for i in picks]


def plans(family: Family, analysis: dict[str, Any]) -> list[FigurePlan[LambdaInputs]]:
    """The family's figure (a list of one), or none when no rate has a Lambda fit with points to show."""
    targets = tuple(float(t) for t in (analysis.get("settings") or {}).get("targets") or [] if finite(t))
    projections = family_records(analysis, "projections", family)
    fits = family_records(analysis, "lambdas", family)
    rate = rate_meaning(family.noise)
    series = []
    for record in representative(fits):
        p = float(record["p"])
        here = [r for r in projections
                if finite(r.get("p")) is not None and math.isclose(float(r["p"]), p, rel_tol=1e-9)]
        item = _series(family, record, rate.text(float(f"{p:.3g}")), here)
        if item is not None:
            series.append(item)
    if not series:
        return []
    title = family_title(family)
    shown = ", ".join(s.label for s in series)
    inputs = LambdaInputs(tuple(series), targets, sum(_usable(r) for r in fits),
                          "Suppression with distance", title)
    caption = (f"Logical error per round against distance for {title} at {shown} ({len(series)} of the "
               f"{inputs.fits} rates with a \u039b fit; every fit and projection is in the \u039b and projection "
               "tables): points with 95% intervals (open: fewer than 10 failures), the \u039b fit with its 95% band "
               "(dashed where extrapolated), the targets and the distance each needs.")
    return [FigurePlan(f"{KIND}__{family_slug(family)}", KIND, title, caption, inputs, draw)]


def _series(family: Family, record: dict[str, Any], label: str, projections: list[dict[str, Any]]
            ) -> RateSeries | None:
    rows = family.at_rate(float(record["p"]))
    rows = rows[(rows["shots"] > 0) & np.isfinite(rows["per_round_rate"].to_numpy(dtype=float))]
    if rows.empty:
        return None
    distances = rows["distance"].to_numpy(dtype=int)
    rate = rows["per_round_rate"].to_numpy(dtype=float)
    high = rows["per_round_high"].to_numpy(dtype=float)
    if not any(v > 0 for v in np.concatenate([rate, high])):
        return None
    wanted = tuple((int(float(r["distance"])), float(r["target"])) for r in projections
                   if finite(r.get("distance")) is not None and finite(r.get("target")))
    cov = record.get("log_cov")
    log_cov = tuple(tuple(float(v) for v in row) for row in cov) if isinstance(cov, (list, tuple)) else None
    return RateSeries(
        label, distances, rate, rows["per_round_low"].to_numpy(dtype=float), high,
        rows["failures"].to_numpy(dtype=float), float(record["lambda"]), float(record["C"]),
        finite(record.get("low")), finite(record.get("high")), log_cov,
        tuple(int(d) for d in record.get("distances") or distances), wanted)


def _span(distances: tuple[int, ...]) -> str:
    return f"d = {min(distances)}\u2013{max(distances)}"


def _fit_label(series: RateSeries, same_span: bool) -> str:
    text = f"{series.label}: \u039b = {series.lam:.3g}"
    if series.lam_low is not None and series.lam_high is not None:
        text += f" [{series.lam_low:.3g}, {series.lam_high:.3g}]"
    return text if same_span else f"{text}, fit {_span(series.fitted)}"


def draw(inputs: LambdaInputs) -> Figure:
    series = inputs.series
    fig, ax = new_figure((FIGSIZE[0], FIGSIZE[1] + 0.8))  # room for the legend of several rates
    log_axis(ax, "y")
    d_first = min(min(int(s.distances.min()), min(s.fitted)) for s in series)
    d_top = max(max(int(s.distances.max()), max(s.fitted)) for s in series)
    # Keep the sampled distances readable: a projection far beyond them is named, not drawn.
    cap = max(4 * d_top, 41)
    needs = [(n, d, t) for n, s in enumerate(series) for d, t in s.projections]
    beyond = [(n, d, t) for n, d, t in needs if d > cap]
    reach = max([d for _, d, _ in needs if d <= cap] + [d_top] + ([cap] if beyond else []))
    shown_targets = sorted(set(inputs.targets) | {t for _, _, t in needs})
    values = [float(v) for s in series for v in np.concatenate([s.rate, s.high]) if v > 0]
    values += [t for t in shown_targets if t > 0]
    y_low, y_high = min(values) / 8, max(values) * 4
    ax.set_ylim(y_low, y_high)
    span = max(reach - d_first, 2)
    ax.set_xlim(d_first - max(0.8, 0.04 * span), reach + max(2.5, 0.13 * span))
    handles: list[Any] = []
    obstacles: list[Obstacle] = []
    labels: list[Label] = []
    for n, s in enumerate(series):
        colour, marker = rate_style(n)
        x = s.distances + 0.16 * (n - (len(series) - 1) / 2)  # side by side at each distance
        handle = interval_points(ax, x, s.rate, s.low, s.high, s.failures, colour, floor=y_low, marker=marker)
        handle.set_linestyle("-")
        handles.append(handle)
        ends = np.concatenate([s.high, np.where(s.rate > 0, s.low, np.nan)])
        obstacles.append((markers(ax, list(x) * 3, list(np.where(s.rate > 0, s.rate, s.high)) + list(ends)), MARKER))
        fit_x = np.linspace(min(s.fitted), max(s.fitted), 60)
        ext_x = np.linspace(max(s.fitted), reach, 80) if reach > max(s.fitted) else fit_x[-1:]
        ax.plot(fit_x, lambda_curve(s.scale, s.lam, fit_x), color=colour, linewidth=1.7, zorder=3)
        ax.plot(ext_x, lambda_curve(s.scale, s.lam, ext_x), color=colour, linewidth=1.5, linestyle=(0, (4, 3)),
                zorder=3)
        whole = np.concatenate([fit_x, ext_x[1:]])
        band = lambda_band(s.scale, s.lam, s.log_cov, whole)
        if band is not None:
            ax.fill_between(whole, np.maximum(band[0], y_low / 10), np.minimum(band[1], y_high * 10), color=colour,
                            alpha=FIT_BAND_ALPHA, linewidth=0, zorder=1)
        obstacles.append((to_axes(ax, list(whole), list(lambda_curve(s.scale, s.lam, whole))), ALONG_CURVE))
        for d_need, target in s.projections:
            if d_need <= cap:
                ax.plot([d_need], [target], linestyle="none", marker="X", markersize=9, markerfacecolor=colour,
                        markeredgecolor="white", markeredgewidth=0.8, zorder=5)
                obstacles.append((markers(ax, [d_need], [target]), MARKER))
                labels.append(Label(d_need, target, f"d = {d_need}", colour))
    transform = ax.get_yaxis_transform()
    keep_clear: list[Any] = []
    for target in shown_targets:
        ax.axhline(target, color=TARGET_INK, linewidth=1.1, linestyle=(0, (5, 4)), zorder=1)
        keep_clear.append(ax.annotate(f"target {sci(target)} per round", (0.012, target), xycoords=transform,
                                      xytext=(0, 3), textcoords="offset points", ha="left", va="bottom",
                                      fontsize=11, color=TARGET_INK))
    ax.xaxis.set_major_locator(MaxNLocator(integer=True, min_n_ticks=3))
    ax.set_xlabel("code distance d")
    ax.set_ylabel("logical error per round")
    titles(ax, inputs.headline, inputs.subline)
    keep_clear += place_labels(ax, labels, keep_clear)
    fit_key = (Patch(facecolor=MUTED, alpha=FIT_BAND_ALPHA * 2, edgecolor="none"),
               Line2D([], [], color=MUTED, linewidth=1.6, linestyle=(0, (4, 3))))
    key: list[tuple[Any, str]] = [(fit_key, "fit extrapolated (dashed), 95% band")]
    if any(d <= cap for _, d, _ in needs):
        key.append((Line2D([], [], linestyle="none", marker="X", markersize=9, markerfacecolor=INK,
                           markeredgecolor="white", markeredgewidth=0.8), "distance a target needs"))
    key += count_entries([s.failures for s in series])
    for n, s in enumerate(series):
        far = [f"{d} ({sci(t)})" for m, d, t in beyond if m == n]
        if far:
            key.append((Line2D([], [], linestyle="none"), f"{s.label} needs d = {', '.join(far)}"))
    spans = {s.fitted for s in series}
    title = f"\u039b fit, {len(series)} of {inputs.fits} rates"
    if len(spans) == 1:
        title += f", over {_span(series[0].fitted)}"
    place_legends(ax, [LegendGroup(handles, [_fit_label(s, len(spans) == 1) for s in series], title,
                                   {"title_fontproperties": {"size": 11, "weight": "bold"}}),
                       LegendGroup([h for h, _ in key], [t for _, t in key], None, {"fontsize": 10})],
                  obstacles, avoid=keep_clear)
    return fig
