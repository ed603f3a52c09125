"""Pseudo-thresholds: per distance, the p at which the per-round logical error rate equals p."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from codebench.analysis.curves import (
    MIN_VALID_FRACTION,
    FloatArray,
    IntArray,
    at_distance,
    corrected,
    family_points,
    p_range,
    per_round_rates,
    percentile_interval,
    resample,
    sign_changes,
)
from codebench.analysis.families import Family
from codebench.analysis.records import PSEUDO_DEFINITION, PseudoThreshold


def _pseudo_g(p: FloatArray, n: IntArray, k: npt.NDArray[Any], rounds: IntArray) -> FloatArray:
    """log eps - log p, eps the per-round rate of the continuity-corrected failure rate.

    NaN (left out) at a point with no failures whose corrected rate is not
    below p: too few shots to tell whether the encoded qubit beats p there.
    """
    g = np.log(per_round_rates(corrected(k, n), rounds)) - np.log(p)
    return np.asarray(np.where((k == 0) & (g >= 0), np.nan, g), dtype=np.float64)


def pseudo_thresholds(
    family: Family, *, bootstrap: int = 200, rng: np.random.Generator
) -> tuple[list[PseudoThreshold], list[str]]:
    """Pseudo-threshold per distance: the p at which the per-round logical error rate equals p.

    The per-round rate is eps = (1 - (1 - 2 P)^(1/rounds)) / 2 of the
    continuity-corrected failure rate P = (k + 1/2) / (n + 1); a point with
    no failures counts only if that corrected eps is below p (otherwise its
    shots are too few to place it on either side of the line). The
    pseudo-threshold is where log eps - log p changes sign from negative
    (encoded qubit better than p) to non-negative, by linear interpolation
    in log p between adjacent sampled values; the interval is the 2.5 / 97.5
    percentile range over ``bootstrap`` parametric resamples of the counts.
    With one round this is the usual "logical = physical" pseudo-threshold.

    Parameters
    ----------
    family : Family
        The curves.
    bootstrap : int
        Number of resamples (0: no interval).
    rng : numpy.random.Generator
        Source of the resamples.

    Returns
    -------
    records : list of PseudoThreshold
        One per distance whose per-round rate crosses the line eps = p.
    notes : list of str
        Why a distance has no record (too few values of p; better or worse
        than p everywhere sampled).
    """
    prefix = f"{family.describe()}: "
    points = family_points(family)
    records: list[PseudoThreshold] = []
    notes: list[str] = []
    for d in family.distances:
        p, n, k, rounds = at_distance(points, d)
        if p.size < 2:
            notes.append(f"{prefix}pseudo-threshold at d={d} needs >= 2 values of p; have {p.size}.")
            continue
        found = sign_changes(np.log(p), _pseudo_g(p, n, k, rounds)[None, :]).row(0)
        log_cross = float(found.log_crossing)
        span = p_range(p)
        if not math.isfinite(log_cross):
            if found.kept < 2:
                notes.append(f"{prefix}d={d}: fewer than 2 values of p with failures or enough shots to compare "
                             f"the per-round logical error with p in {span}; no pseudo-threshold.")
            elif found.negative:
                notes.append(f"{prefix}d={d}: per-round logical error below p everywhere sampled {span} "
                             "(encoded qubit better): pseudo-threshold above the range.")
            elif found.nonnegative:
                notes.append(f"{prefix}d={d}: per-round logical error above p everywhere sampled {span} "
                             "(encoded qubit worse): pseudo-threshold below the range.")
            else:
                notes.append(f"{prefix}d={d}: per-round logical error crosses p only downwards in {span}; "
                             "no pseudo-threshold.")
            continue
        value = math.exp(log_cross)
        if found.changes > 1:
            notes.append(f"{prefix}d={d}: per-round logical error crosses p {found.changes} times in {span}; "
                         f"took the steepest crossing, p = {value:.6g}.")
        low: float | None = None
        high: float | None = None
        valid = 0
        if bootstrap > 0:
            draws = resample(rng, n, k, bootstrap)
            crossings = np.exp(sign_changes(np.log(p), _pseudo_g(p, n, draws, rounds)).log_crossing)
            valid = int(np.isfinite(crossings).sum())
            low, high = percentile_interval(crossings)
            if valid < MIN_VALID_FRACTION * bootstrap:
                notes.append(f"{prefix}d={d}: only {valid} of {bootstrap} bootstrap resamples cross eps = p; "
                             "the pseudo-threshold interval is unreliable.")
        records.append(PseudoThreshold(family.id, int(d), value, low, high, int(bootstrap), valid))
    return records, notes


__all__ = ["PSEUDO_DEFINITION", "pseudo_thresholds"]
