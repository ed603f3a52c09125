"""``lambda_vs_d__<family>__p<p>``: logical error per round against distance at one rate.

The points with their 95% intervals, the fit eps_d = C / Lambda^((d+1)/2)
extended to the distance the smallest target needs, the targets, and the
distance each target needs (named in a box when it lies far off the plot).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from codebench.analysis.families import Family
from codebench.figures.canvas import FigurePlan, log_axis, new_figure, titles
from codebench.figures.data import family_records
from codebench.figures.labels import family_slug, family_title, rate_meaning, safe
from codebench.figures.legend import (
    ALONG_CURVE,
    MARKER,
    LegendGroup,
    Obstacle,
    markers,
    place_legends,
    to_axes,
)
from codebench.figures.style import INK, TARGET_INK, distance_colour, finite, sci

KIND = "lambda_vs_d"


@dataclass(frozen=True)
class LambdaInputs:
    distances: np.ndarray
    rate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    lam: float
    scale: float
    lam_low: float | None
    lam_high: float | None
    #: Distances the fit used.
    fitted: tuple[int, ...]
    targets: tuple[float, ...]
    #: (distance needed, target) of every projection at this rate.
    projections: tuple[tuple[int, float], ...]
    headline: str
    subline: str


def plans(family: Family, analysis: dict[str, Any]) -> list[FigurePlan[LambdaInputs]]:
    """One figure per rate of ``family`` that has a Lambda fit."""
    out = []
    targets = tuple(float(t) for t in (analysis.get("settings") or {}).get("targets") or [] if finite(t))
    projections = family_records(analysis, "projections", family)
    for record in family_records(analysis, "lambdas", family):
        p = finite(record.get("p"))
        lam = finite(record.get("lambda"))
        scale = finite(record.get("C"))
        if p is None or lam is None or scale is None or lam <= 0 or scale <= 0:
            continue
        here = [r for r in projections
                if finite(r.get("p")) is not None and math.isclose(float(r["p"]), p, rel_tol=1e-9)]
        item = _plan(family, record, p, lam, scale, targets, here)
        if item is not None:
            out.append(item)
    return out


def _plan(family: Family, record: dict[str, Any], p: float, lam: float, scale: float, targets: tuple[float, ...],
          projections: list[dict[str, Any]]) -> FigurePlan[LambdaInputs] | None:
    rows = family.at_rate(p)
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
    title = family_title(family)
    at = rate_meaning(family.noise).text(p)
    inputs = LambdaInputs(
        distances, rate, rows["per_round_low"].to_numpy(dtype=float), high, lam, scale,
        finite(record.get("low")), finite(record.get("high")),
        tuple(int(d) for d in record.get("distances") or distances), targets, wanted,
        f"Suppression with distance at {at}", title)
    stem = f"{KIND}__{family_slug(family)}__p{safe(f'{p:.6g}')}"
    caption = (f"Logical error per round against distance at {at} for {title}: "
               f"points with 95% intervals, the Lambda fit (dotted where extrapolated), the targets and the "
               f"distance each needs.")
    return FigurePlan(stem, KIND, f"{title}, {at}", caption, inputs, draw)


def draw(inputs: LambdaInputs) -> Figure:
    distances, rate, low, high = inputs.distances, inputs.rate, inputs.low, inputs.high
    lam, scale = inputs.lam, inputs.scale
    positive = [float(v) for v in np.concatenate([rate, high]) if v > 0]
    fig, ax = new_figure()
    log_axis(ax, "y")
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
    fitted = list(inputs.fitted)
    d_first, d_last = min(int(distances.min()), min(fitted)), max(fitted)
    d_top = max(int(distances.max()), d_last)
    # Keep the sampled distances readable: a projection far beyond them is named, not drawn.
    cap = max(4 * d_top, 41)
    drawn = [(d, t) for d, t in inputs.projections if d <= cap]
    beyond = [(d, t) for d, t in inputs.projections if d > cap]
    reach = max([d for d, _ in drawn] + [d_top] + ([cap] if beyond else []))
    fit_x = np.linspace(d_first, d_last, 100)
    obstacles: list[Obstacle] = []
    ax.plot(fit_x, scale / lam ** ((fit_x + 1) / 2), color=INK, linewidth=1.8, zorder=3,
            label="fit  C / \u039b^((d+1)/2)")
    ext_x = np.linspace(d_last, reach, 100)
    if reach > d_last:
        ax.plot(ext_x, scale / lam ** ((ext_x + 1) / 2), color=INK, linewidth=1.6, linestyle=(0, (2, 2.5)),
                zorder=3, label="fit, extrapolated")
    shown_targets = sorted(set(inputs.targets) | {t for _, t in inputs.projections})
    y_values = positive + [t for t in shown_targets if t > 0]
    ax.set_ylim(min(y_values) / 5, max(y_values) * 4)
    span = max(reach - d_first, 2)
    ax.set_xlim(d_first - max(0.8, 0.04 * span), reach + max(2.5, 0.13 * span))
    keep_clear: list[Any] = []
    transform = ax.get_yaxis_transform()
    for target in shown_targets:
        ax.axhline(target, color=TARGET_INK, linewidth=1.1, linestyle=(0, (5, 4)), zorder=1)
        keep_clear.append(ax.text(0.012, target, f"target {sci(target)} per round", transform=transform,
                                  ha="left", va="top", fontsize=11, color=TARGET_INK))
    for d_need, target in drawn:
        ax.plot([d_need], [target], linestyle="none", marker="o", markersize=7, markerfacecolor="white",
                markeredgecolor=TARGET_INK, markeredgewidth=1.8, zorder=5)
        keep_clear.append(ax.annotate(f"d = {d_need}", (d_need, target), textcoords="offset points",
                                      xytext=(7, 5), ha="left", va="bottom", fontsize=11, fontweight="bold",
                                      color=TARGET_INK))
    if beyond:
        text = "\n".join(f"{sci(target)} needs d = {d_need} (off the plot)" for d_need, target in beyond)
        keep_clear.append(ax.text(0.99, 0.5, text, transform=ax.transAxes, ha="right", va="center", fontsize=11,
                                  color=TARGET_INK, bbox={"boxstyle": "round,pad=0.4", "facecolor": "white",
                                                          "edgecolor": "#e0c9a0"}))
    obstacles.append((markers(ax, list(distances.astype(float)), list(np.where(rate > 0, rate, high))), MARKER))
    obstacles.append((to_axes(ax, list(fit_x), list(scale / lam ** ((fit_x + 1) / 2))), ALONG_CURVE))
    if reach > d_last:
        obstacles.append((to_axes(ax, list(ext_x), list(scale / lam ** ((ext_x + 1) / 2))), ALONG_CURVE))
    ax.xaxis.set_major_locator(MaxNLocator(integer=True, min_n_ticks=3))
    ax.set_xlabel("code distance d")
    ax.set_ylabel("logical error per round")
    head = f"\u039b = {lam:.3g}"
    if inputs.lam_low is not None and inputs.lam_high is not None:
        head += f"  [{inputs.lam_low:.3g}, {inputs.lam_high:.3g}] (95%)"
    handles, labels = ax.get_legend_handles_labels()
    place_legends(ax, [LegendGroup(handles, labels, head + "\nfit over d = " + ", ".join(str(d) for d in fitted),
                                   {"title_fontproperties": {"size": 12, "weight": "bold"}})],
                  obstacles, avoid=keep_clear)
    titles(ax, inputs.headline, inputs.subline)
    return fig
