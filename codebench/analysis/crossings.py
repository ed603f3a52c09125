"""Crossings of consecutive distances' curves (whole-experiment or per-round), with bootstrap intervals."""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from codebench.analysis.curves import (
    MIN_VALID_FRACTION,
    FloatArray,
    SignChange,
    corrected,
    family_points,
    p_range,
    pair_g,
    per_round_rates,
    percentile_interval,
    resample,
    shared_points,
    sign_changes,
)
from codebench.analysis.families import Family
from codebench.analysis.records import CrossingThreshold


def _crossing_note(found: SignChange, prefix: str, what: str, p: FloatArray) -> str:
    """Why a pair of curves has no crossing."""
    span = p_range(p)
    if found.kept < 2:
        return f"{prefix}{what}: fewer than 2 shared values of p with failures at either distance; no crossing."
    if found.negative:
        return f"{prefix}{what} do not cross in the sampled range {span}: the larger distance is lower everywhere, " \
               "threshold above the range."
    if found.nonnegative:
        return f"{prefix}{what} do not cross in the sampled range {span}: the larger distance is higher everywhere, " \
               "threshold below the range."
    return f"{prefix}{what} cross only the wrong way in {span} (larger distance higher below, lower above); " \
           "no threshold."


def crossing_thresholds(
    family: Family, *, bootstrap: int = 200, rng: np.random.Generator, quantity: str = "failure_rate"
) -> tuple[list[CrossingThreshold], list[str]]:
    """Crossings of consecutive distances' curves, with bootstrap intervals.

    For each pair of consecutive distances (d1 < d2) sampled at >= 3 common
    values of p, the crossing is the p at which log P_d2 - log P_d1 changes
    sign from negative to non-negative, found by linear interpolation in
    log p between the two adjacent sampled values (see
    :func:`codebench.analysis.curves.sign_changes` for the choice when it
    changes more than once). P is the failure probability of the whole
    memory experiment, continuity-corrected as (k + 1/2) / (n + 1), or with
    ``quantity = "per_round_rate"`` that probability mapped to the per-round
    rate (1 - (1 - 2P)^(1/r)) / 2 of each distance's rounds r: where the
    per-round curves cross, which at finite d is not where the
    whole-experiment curves do.

    The interval is the 2.5 / 97.5 percentile range of the crossing over
    ``bootstrap`` parametric resamples (failures ~ Binomial(shots,
    failures / shots) at every point, drawn all at once), counting only the
    resamples whose curves cross; how many did is ``valid_bootstrap``.

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
    records : list of CrossingThreshold
        One per pair that crosses.
    notes : list of str
        Why a pair has no record, or why its interval is weak.
    """
    prefix = f"{family.describe()}: "
    records: list[CrossingThreshold] = []
    notes: list[str] = []
    points = family_points(family)
    distances = family.distances
    per_round = quantity == "per_round_rate"

    def rates(k: npt.NDArray[Any], n: npt.NDArray[Any], rounds: npt.NDArray[Any]) -> FloatArray:
        total = corrected(k, n)
        return per_round_rates(total, rounds) if per_round else total

    for d1, d2 in zip(distances[:-1], distances[1:]):
        p, n1, k1, r1, n2, k2, r2 = shared_points(points, d1, d2)
        what = f"{'per-round ' if per_round else ''}curves of d={d1} and d={d2}"
        if p.size < 3:
            notes.append(f"{prefix}crossing needs >= 3 values of p shared by distances {d1} and {d2}; have {p.size}.")
            continue
        found = sign_changes(np.log(p), pair_g(rates(k1, n1, r1), rates(k2, n2, r2), k1, k2)[None, :]).row(0)
        if not np.isfinite(found.log_crossing):
            notes.append(_crossing_note(found, prefix, what, p))
            continue
        threshold = float(np.exp(found.log_crossing))
        if found.changes > 1:
            notes.append(f"{prefix}{what} change order {found.changes} times in {p_range(p)}; "
                         f"took the steepest crossing, p = {threshold:.6g}.")
        low: float | None = None
        high: float | None = None
        valid = 0
        if bootstrap > 0:
            b1 = resample(rng, n1, k1, bootstrap)
            b2 = resample(rng, n2, k2, bootstrap)
            g = pair_g(rates(b1, n1, r1), rates(b2, n2, r2), b1, b2)
            crossings = np.exp(sign_changes(np.log(p), g).log_crossing)
            valid = int(np.isfinite(crossings).sum())
            low, high = percentile_interval(crossings)
            if valid < MIN_VALID_FRACTION * bootstrap:
                notes.append(f"{prefix}{what}: only {valid} of {bootstrap} bootstrap resamples cross; "
                             "the interval is unreliable.")
        else:
            notes.append(f"{prefix}{what}: bootstrap = 0, crossing reported without an interval.")
        records.append(CrossingThreshold(family.id, (int(d1), int(d2)), threshold, low, high, int(bootstrap), valid,
                                         quantity))
    return records, notes


__all__ = ["crossing_thresholds"]
