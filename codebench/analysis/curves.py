"""The curves the threshold estimates read, and where a difference of two curves changes sign.

Shared by :mod:`~codebench.analysis.crossings`,
:mod:`~codebench.analysis.finite_size_scaling` and
:mod:`~codebench.analysis.pseudo`.

Rates that enter a logarithm use the continuity-corrected estimate
(k + 1/2) / (n + 1), so points with no failures (or only failures) stay
finite; a p at which *both* curves of a pair have no failures says nothing
about which curve is lower and is left out of that pair's crossing.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from codebench.analysis.families import Family

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
BoolArray = npt.NDArray[np.bool_]

#: Percentiles of the two-sided 95% bootstrap interval.
PERCENTILES = (2.5, 97.5)
#: Fewer crossing resamples than this fraction earn a note.
MIN_VALID_FRACTION = 0.8


# --------------------------------------------------------------------------- data


def family_points(family: Family) -> pd.DataFrame:
    """Points of ``family`` summed over repeats of the same (distance, p), sorted.

    ``p`` is rounded to 12 significant digits so that equal rates from
    different runs match exactly across distances. Points at p <= 0 (no
    noise) have no place on a log-p axis and are left out.
    """
    frame = family.frame.loc[family.frame["p"] > 0, ["distance", "p", "rounds", "shots", "failures"]].copy()
    frame["p"] = [float(f"{float(p):.12g}") for p in frame["p"]]
    grouped = frame.groupby(["distance", "p"], sort=True).agg(
        rounds=("rounds", "max"), shots=("shots", "sum"), failures=("failures", "sum"))
    return grouped.reset_index()


def at_distance(points: pd.DataFrame, distance: int) -> tuple[FloatArray, IntArray, IntArray, IntArray]:
    """(p, shots, failures, rounds) at one distance, sorted by p."""
    part = points[points["distance"] == distance]
    return (part["p"].to_numpy(dtype=np.float64), part["shots"].to_numpy(dtype=np.int64),
            part["failures"].to_numpy(dtype=np.int64), part["rounds"].to_numpy(dtype=np.int64))


def shared_rates(points: pd.DataFrame, d1: int, d2: int) -> tuple[FloatArray, IntArray, IntArray, IntArray, IntArray]:
    """(p, n1, k1, n2, k2) at the values of p sampled at both distances."""
    common, n1, k1, _, n2, k2, _ = shared_points(points, d1, d2)
    return common, n1, k1, n2, k2


def shared_points(points: pd.DataFrame, d1: int, d2: int) -> tuple[FloatArray, IntArray, IntArray, IntArray,
                                                                   IntArray, IntArray, IntArray]:
    """(p, n1, k1, rounds1, n2, k2, rounds2) at the values of p sampled at both distances."""
    p1, n1, k1, r1 = at_distance(points, d1)
    p2, n2, k2, r2 = at_distance(points, d2)
    common, i1, i2 = np.intersect1d(p1, p2, assume_unique=True, return_indices=True)
    return common, n1[i1], k1[i1], r1[i1], n2[i2], k2[i2], r2[i2]


def corrected(k: npt.NDArray[Any], n: npt.NDArray[Any]) -> FloatArray:
    """Continuity-corrected rate (k + 1/2) / (n + 1): never 0 or 1."""
    return np.asarray((k + 0.5) / (n + 1.0), dtype=np.float64)


def per_round_rates(total: FloatArray, rounds: npt.NDArray[Any]) -> FloatArray:
    """Vectorised :func:`codebench.stats.per_round`: (1 - (1 - 2P)^(1/r)) / 2, 1/2 at P >= 1/2."""
    clipped = np.minimum(total, 0.5)
    with np.errstate(divide="ignore"):
        eps = -np.expm1(np.log1p(-2.0 * clipped) / rounds) / 2.0
    return np.asarray(np.where(total >= 0.5, 0.5, eps), dtype=np.float64)


def resample(rng: np.random.Generator, n: IntArray, k: IntArray, draws: int) -> IntArray:
    """``draws`` parametric resamples of the counts: failures ~ Binomial(n, k / n), shape (draws, m)."""
    return np.asarray(rng.binomial(n, k / n, size=(draws, n.size)), dtype=np.int64)


def p_range(p: FloatArray) -> str:
    """The sampled range of ``p`` as text for the notes."""
    return f"[{float(p.min()):.6g}, {float(p.max()):.6g}]"


def percentile_interval(values: FloatArray) -> tuple[float | None, float | None]:
    """The 2.5 / 97.5 percentile range of the finite ``values``; (None, None) if there are none."""
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return None, None
    low, high = np.percentile(finite, PERCENTILES)
    return float(low), float(high)


# --------------------------------------------------------------------------- sign changes


@dataclass(frozen=True)
class SignChange:
    """The sign changes of one row of :func:`sign_changes`."""

    log_crossing: float
    up: int
    down: int
    negative: bool
    nonnegative: bool
    kept: int

    @property
    def changes(self) -> int:
        """Sign changes either way."""
        return self.up + self.down


@dataclass(frozen=True)
class SignChanges:
    """Per row: ``log_crossing`` (NaN when there is none), ``up`` and ``down`` (numbers of crossings
    each way), ``negative`` and ``nonnegative`` (whether every kept g is < 0 or >= 0) and ``kept``
    (number of kept points)."""

    log_crossing: FloatArray
    up: IntArray
    down: IntArray
    negative: BoolArray
    nonnegative: BoolArray
    kept: IntArray

    def row(self, index: int) -> SignChange:
        return SignChange(self.log_crossing[index], int(self.up[index]), int(self.down[index]),
                          bool(self.negative[index]), bool(self.nonnegative[index]), int(self.kept[index]))


def sign_changes(logp: FloatArray, g: FloatArray) -> SignChanges:
    """Upward zero crossings of ``g`` (rows of shape (rows, m), NaN = left out) along ``logp``.

    An upward crossing is a step between consecutive kept points from
    g < 0 to g >= 0, located by linear interpolation in ``logp``. When a row
    has several, the one with the largest slope is chosen (the sharpest
    separation of the two curves; flat wiggles where the curves saturate
    lose).
    """
    g = np.atleast_2d(g)
    rows, m = g.shape
    kept = ~np.isnan(g)
    index = np.where(kept, np.arange(m), -1)
    running = np.maximum.accumulate(index, axis=1)
    prev = np.concatenate([np.full((rows, 1), -1), running[:, :-1]], axis=1)
    step = kept & (prev >= 0)
    safe_prev = np.maximum(prev, 0)
    g0 = np.take_along_axis(g, safe_prev, axis=1)
    x0 = logp[safe_prev]
    x1 = np.broadcast_to(logp, (rows, m))
    with np.errstate(invalid="ignore"):
        up = step & (g0 < 0) & (g >= 0)
        down = step & (g0 >= 0) & (g < 0)
    rise = np.where(up, g - g0, 1.0)
    run = np.where(up, x1 - x0, 1.0)
    where = np.where(up, x0 + run * (-np.where(up, g0, 0.0)) / rise, np.nan)
    slope = np.where(up, rise / run, -np.inf)
    best = np.argmax(slope, axis=1)
    any_up = up.any(axis=1)
    chosen = np.where(any_up, where[np.arange(rows), best], np.nan)
    filled = np.where(kept, g, 0.0)
    return SignChanges(
        log_crossing=np.asarray(chosen, dtype=np.float64),
        up=np.asarray(up.sum(axis=1), dtype=np.int64),
        down=np.asarray(down.sum(axis=1), dtype=np.int64),
        negative=np.asarray(np.all(np.where(kept, filled < 0, True), axis=1), dtype=np.bool_),
        nonnegative=np.asarray(np.all(np.where(kept, filled >= 0, True), axis=1), dtype=np.bool_),
        kept=np.asarray(kept.sum(axis=1), dtype=np.int64),
    )


# --------------------------------------------------------------------------- pairs of distances


def pair_g(r1: FloatArray, r2: FloatArray, k1: npt.NDArray[Any], k2: npt.NDArray[Any]) -> FloatArray:
    """log P_d2 - log P_d1, NaN where neither distance saw a failure."""
    g = np.log(r2) - np.log(r1)
    return np.asarray(np.where((k1 == 0) & (k2 == 0), np.nan, g), dtype=np.float64)


def pair_crossing(p: FloatArray, n1: IntArray, k1: IntArray, n2: IntArray, k2: IntArray) -> SignChange:
    """Point estimate of the crossing of one pair (see :func:`sign_changes`)."""
    g = pair_g(corrected(k1, n1), corrected(k2, n2), k1, k2)
    return sign_changes(np.log(p), g[None, :]).row(0)


__all__ = [
    "MIN_VALID_FRACTION", "PERCENTILES", "SignChange", "SignChanges", "at_distance", "corrected",
    "family_points", "pair_crossing", "pair_g", "per_round_rates", "percentile_interval", "p_range",
    "resample", "shared_points", "shared_rates", "sign_changes",
]
