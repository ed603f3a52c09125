"""Raised-noise sampling for the power-law method (``--method extrapolated``).

A coarse ladder (s = 2, 8, 32, 128, up to the scale at which a channel of the
device would saturate; ``LADDER_SHOTS`` shots each) shows where failures are
frequent; then four consecutive scales of the grid s = 2^(j/2) are sampled,
starting at the lowest scale >= 2 at which ``MIN_FAILURES`` failures fit in
the distance's share of counted work (rates predicted by log-log
interpolation of the ladder). Each scale stops at ``FAILURES`` failures or a
common shot cap, the largest that fits in the share. Every decision reads
counts only. The estimate is :func:`codebench.forecast.estimators.extrapolated_estimate`.
"""

from __future__ import annotations

import math

import numpy as np

from codebench.forecast.estimators import (
    NEAR_THRESHOLD,
    Estimate,
    extrapolated_estimate,
)
from codebench.forecast.sampling import Sample, Sampler
from codebench.noise.calibration import Device
from codebench.noise.device import (
    MAX_DEPOLARIZE1,
    MAX_DEPOLARIZE2,
    MAX_FLIP,
    DeviceNoise,
    depolarizing_from_infidelity,
)
from codebench.records import FIRST_BATCH

__all__ = ["grid_scale", "sample_raised", "scale_cap"]

LADDER_STEPS = (2, 6, 10, 14)    # grid indices j of s = 2^(j/2): s = 2, 8, 32, 128
LADDER_SHOTS = 7168
LADDER_FAILURES = 25
FIT_SCALES = 4                   # consecutive grid points: spread 2^(3/2)
MIN_RAISED_STEP = 2              # the lowest raised scale is s = 2
MIN_FAILURES = 100
FAILURES = 400
#: Most shots one raised scale takes, whatever the budget.
MAX_SCALE_SHOTS = 1_000_000_000


def grid_scale(step: int) -> float:
    """Scale of grid index ``step``: 2^(step/2), rounded to 6 decimals so point keys are stable.

    >>> grid_scale(2), grid_scale(3)
    (2.0, 2.828427)
    """
    return round(float(2.0 ** (step / 2.0)), 6)


def scale_cap(device: Device) -> float:
    """Largest scale at which no channel of the device saturates (and at most DeviceNoise.p_max)."""
    cals = device.all_qubits() + [device.defaults]
    worst = [
        max(depolarizing_from_infidelity(c.gate_1q_error, 1) for c in cals) / MAX_DEPOLARIZE1,
        depolarizing_from_infidelity(max([device.gate_2q_error, *device.pairs.values()]), 2) / MAX_DEPOLARIZE2,
        max(c.readout_error for c in cals) / MAX_FLIP,
        max(c.reset_error for c in cals) / MAX_FLIP,
    ]
    limit = max(worst)
    return DeviceNoise.p_max if limit <= 0 else min(DeviceNoise.p_max, 1.0 / limit)


def predict_rate(samples: list[Sample], scale: float, nominal_slope: float) -> float:
    """Rough per-shot failure probability at ``scale`` (planning only): log-log interpolation of the
    points with >= 3 failures; beyond them the nearest slope (clipped to [1, nominal]) or the nominal one."""
    pts = sorted((s.scale, s.rate) for s in samples if s.failures >= 3 and s.rate < 0.45)
    if not pts:
        return math.nan
    xs = [math.log(s) for s, _ in pts]
    ys = [math.log(p) for _, p in pts]
    x = math.log(scale)
    if len(pts) == 1:
        return min(0.5, math.exp(ys[0] + nominal_slope * (x - xs[0])))
    if x <= xs[0]:
        slope = min(max((ys[1] - ys[0]) / (xs[1] - xs[0]), 1.0), nominal_slope)
        return math.exp(ys[0] + slope * (x - xs[0]))
    if x >= xs[-1]:
        slope = (ys[-1] - ys[-2]) / (xs[-1] - xs[-2])
        return min(0.5, math.exp(ys[-1] + max(slope, 0.0) * (x - xs[-1])))
    return math.exp(float(np.interp(x, xs, ys)))


def _shot_cap(rates: list[float], detectors: int, share: float) -> int:
    """Largest common cap (at most twice the shots for FAILURES at the lowest scale) whose work fits the share;
    the lowest scale is charged the whole cap, the others until their expected FAILURES."""
    def spend(limit: float) -> float:
        return detectors * (limit + sum(min(limit, FAILURES / p) for p in rates[1:]))

    lo, hi = float(FIRST_BATCH), min(2.0 * FAILURES / rates[0], float(MAX_SCALE_SHOTS))
    if spend(hi) <= share:
        return int(hi)
    for _ in range(60):
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if spend(mid) <= share else (lo, mid)
    return max(FIRST_BATCH, int(lo))


def sample_raised(sampler: Sampler, distance: int, share: float, s_cap: float, detectors: int) -> Estimate:
    """Ladder, choice of the scales, sampling at them, and the power-law estimate."""
    nominal = (distance + 1) / 2.0
    start = sampler.budget.spent
    ladder = [grid_scale(j) for j in LADDER_STEPS if grid_scale(j) <= s_cap]
    ladder = [s for s in ladder if (distance, s) not in sampler.samples]
    if ladder:
        sampler.say(f"d = {distance}: ladder at scales {', '.join(f'{s:g}' for s in ladder)}")
        sampler.run(f"d{distance}-ladder", {distance: ladder}, LADDER_FAILURES, LADDER_SHOTS)
    known = sampler.at(distance)
    share = max(0.0, share - (sampler.budget.spent - start))
    candidates = []
    for j0 in range(MIN_RAISED_STEP, 64):
        scales = [grid_scale(j0 + i) for i in range(FIT_SCALES)]
        if scales[-1] > s_cap:
            break
        rates = [predict_rate(known, s, nominal) for s in scales]
        if all(math.isfinite(r) and r > 0 for r in rates):
            candidates.append((scales, rates))
    below = [c for c in candidates if c[1][-1] <= NEAR_THRESHOLD]
    candidates = below or candidates
    chosen = None
    for scales, rates in candidates:
        if detectors * MIN_FAILURES / rates[0] <= share or (scales, rates) == candidates[-1]:
            chosen = (scales, _shot_cap(rates, detectors, share))
            break
    if chosen is None:
        scales = [grid_scale(MIN_RAISED_STEP + i) for i in range(FIT_SCALES) if grid_scale(MIN_RAISED_STEP + i) <= s_cap]
        chosen = (scales, max(FIRST_BATCH, min(MAX_SCALE_SHOTS, int(share / max(1, detectors * len(scales))))))
    scales, shots = chosen
    sampler.say(f"d = {distance}: raised noise at scales {', '.join(f'{s:g}' for s in scales)}, "
                f"up to {FAILURES} failures or {shots:,} shots each")
    sampler.run(f"d{distance}-scales", {distance: scales}, FAILURES, shots)
    return extrapolated_estimate([sampler.samples[(distance, s)] for s in scales
                                  if (distance, s) in sampler.samples], distance)
