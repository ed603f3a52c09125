"""Our marks, the same in every figure (the forecast's too).

- A measured point is a marker on a vertical 95% interval with short caps (no shaded band around
  error-against-p curves). A point with fewer than :data:`~.style.FEW_FAILURES` failures is hollow,
  one with none is an open downward triangle at its interval's 95% upper end; the legend says so
  (:func:`count_entries`).
- A fitted line carries its 95% band (:func:`lambda_band`), shaded, over its whole drawn length:
  where the line is extended beyond the sampled distances the band shows how fast the projection
  loses precision.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.lines import Line2D

from codebench.figures.style import FEW_FAILURES, INTERVAL, MUTED
from codebench.stats import Z95

#: How every figure marks its points, in words (the report says it once above its figures).
MARKS_NOTE = (f"Every point carries its 95% interval as a capped bar; a hollow marker has fewer than {FEW_FAILURES} "
              "failures (the results table marks the same points), an open downward triangle none (drawn at the "
              "interval's upper end); small numbers beside points in the error-against-p figures are the failures "
              "behind them. Fitted lines carry their 95% band.")


def zero_marker(ax: Axes, x: Sequence[float], y: Sequence[float], colour: str) -> None:
    """Open downward triangles at the 95% upper end of points with no failures."""
    ax.plot(x, y, linestyle="none", marker="v", markersize=7, markerfacecolor="white",
            markeredgecolor=colour, markeredgewidth=1.5, zorder=4)


def interval_points(ax: Axes, x: Any, rate: Any, low: Any, high: Any, failures: Any, colour: str, *,
                    floor: float, marker: str = "o", linestyle: Any = None, markersize: float = 6.5) -> Line2D:
    """Points with capped 95% intervals, hollow below :data:`FEW_FAILURES` failures, zero-failure points
    as open triangles; ``linestyle`` joins the points seen. Interval ends below ``floor`` (a log axis's
    bottom) are drawn at it. Returns a legend handle for the series."""
    x, rate, low, high, failures = (np.asarray(v, dtype=float) for v in (x, rate, low, high, failures))
    seen = rate > 0
    low = np.where(np.isfinite(low) & (low > floor), low, floor)
    high = np.where(np.isfinite(high), high, rate)
    if linestyle is not None and seen.sum() >= 2:
        ax.plot(x[seen], rate[seen], color=colour, linestyle=linestyle, linewidth=1.5, zorder=2)
    if seen.any():
        ax.errorbar(x[seen], rate[seen], yerr=[np.maximum(rate[seen] - low[seen], 0), high[seen] - rate[seen]],
                    fmt="none", ecolor=colour, zorder=3, **INTERVAL)
    few = seen & (failures < FEW_FAILURES)
    for part, face, edge, width in ((seen & ~few, colour, "white", 0.8), (few, "white", colour, 1.6)):
        if part.any():
            ax.plot(x[part], rate[part], linestyle="none", marker=marker, markersize=markersize,
                    markerfacecolor=face, markeredgecolor=edge, markeredgewidth=width, zorder=4)
    if (~seen).any():
        zero_marker(ax, list(x[~seen]), list(high[~seen]), colour)
    return Line2D([], [], color=colour, linestyle=linestyle or "none", marker=marker, markersize=markersize,
                  markerfacecolor=colour, markeredgecolor="white")


def count_entries(failures: Sequence[Any]) -> list[tuple[Any, str]]:
    """Legend entries that explain hollow and triangle markers, for the failure counts shown."""
    counts = np.concatenate([np.asarray(f, dtype=float).ravel() for f in failures]) if failures else np.empty(0)
    entries: list[tuple[Any, str]] = []
    if ((counts > 0) & (counts < FEW_FAILURES)).any():
        entries.append((Line2D([], [], linestyle="none", marker="o", markersize=6.5, markerfacecolor="white",
                               markeredgecolor=MUTED, markeredgewidth=1.6), f"open: fewer than {FEW_FAILURES} failures"))
    if (counts == 0).any():
        entries.append((Line2D([], [], linestyle="none", marker="v", markersize=7, markerfacecolor="white",
                               markeredgecolor=MUTED, markeredgewidth=1.5), "0 failures: 95% upper end"))
    return entries


def lambda_curve(scale: float, lam: float, d: Any) -> np.ndarray:
    """The fit eps_d = C / Lambda^((d+1)/2) at distances ``d``."""
    return scale / lam ** ((np.asarray(d, dtype=float) + 1) / 2)


def lambda_band(scale: float, lam: float, log_cov: Sequence[Sequence[float]] | None, d: Any
                ) -> tuple[np.ndarray, np.ndarray] | None:
    """The 95% band of the fit at distances ``d``, or ``None`` without a usable covariance.

    ln eps_d = ln C - ((d + 1) / 2) ln Lambda is linear in (ln C, ln Lambda), so its variance follows
    from their 2 x 2 covariance ``log_cov`` (delta method); the band is eps_d x exp(+-1.96 sigma).
    """
    if not log_cov or len(log_cov) < 2 or len(log_cov[0]) < 2 or len(log_cov[1]) < 2:
        return None
    v_c, cov, v_l = float(log_cov[0][0]), float(log_cov[0][1]), float(log_cov[1][1])
    if not all(math.isfinite(v) for v in (v_c, cov, v_l)):
        return None
    half = (np.asarray(d, dtype=float) + 1) / 2
    spread = Z95 * np.sqrt(np.maximum(0.0, v_c + half * half * v_l - 2 * half * cov))
    line = lambda_curve(scale, lam, d)
    return line * np.exp(-spread), line * np.exp(spread)
