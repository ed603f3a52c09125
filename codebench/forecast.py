"""Device forecasts: what a calibrated device's logical qubit would do, within a time budget.

:func:`forecast` takes a device file (or a :class:`~codebench.noise.calibration.Device`),
a code family, distances, a basis and a decoder, and returns per distance the
physical qubits and the per-round logical error with a 95% interval; Lambda
with its interval; for each target rate the distance and qubits needed; the
round duration and the logical error per second; and break-even against an
idle physical qubit. Every number says how it was obtained.

Sampling
--------
Every shot goes through :func:`codebench.api.run_sweep` (so the engine, its
workers, the store and resume are the ones of ``codebench sweep``) with
``noise = "device"``, ``rounds = d`` and the sweep's ``scale`` as the what-if
factor s: s multiplies every error probability and every 1/T1 and 1/T2 of the
device (s = 1 is the device itself). One worker pool is started once and kept
for all the small sweeps of a forecast. All of them use the same seed, so a
point sampled again with a larger shot budget reuses its stored batches (the
pilot's and the probe's shots count towards the final estimate), and a rerun
with the same ``out`` folder resumes.

The budget is wall-clock seconds for the whole forecast (worker start-up,
sampling, fits and files). The planner turns what is left of it into
worker-seconds, (budget - elapsed - reserve) x workers x 0.85, and measures
costs from the results' ``seconds`` column (worker compute time per shot) and
the wall clock (the fixed cost of a sampled point: circuit builds and decoder
compiles, taken from the pilot and scaled as d^3). Whatever the plan, sampling
stops at 1.1 x the budget (less a second kept for the files): the counts so far
are kept and any distance not yet sampled keeps its pilot counts, with a note.

1. Pilot: every distance at s = 1, at most 7,168 shots (stopping at 10
   failures). It measures the cost per shot and a rough rate.
2. Distances are then handled from the smallest up. Each gets an equal share
   of the worker-seconds still left, so what a small distance does not use
   goes to the larger ones. Where the pilot saw fewer than 10 failures, the
   s = 1 point is continued with up to 10% of the share, again stopping at
   10 failures: reaching them means 100 failures fit in the share.
3. **direct**: if 100 failures at s = 1 fit in the share, the distance is
   sampled at s = 1 until 1,000 failures or the share's shots. The interval
   is the Wilson interval of the counts (Wilson, JASA 22, 209 (1927)) mapped
   through the per-round conversion.
4. **extrapolated**: otherwise a coarse ladder (s = 2, 8, 32, 128, up to the
   scale at which a channel of the device would saturate; at most 7,168 shots
   each) shows where failures are frequent, and four consecutive scales of
   the grid s = 2^(j/2) (a spread of 2^1.5 = 2.8x) are sampled, starting at
   the smallest scale >= 2 at which 100 failures at that lowest scale fit in
   the share (rates and costs predicted by log-log interpolation of what was
   sampled). Each scale stops at 400 failures or a common shot cap: the
   largest cap, up to twice the predicted shots for 400 failures at the lowest
   scale, whose planned cost (the lowest scale charged the whole cap) fits in
   the share. The per-round rate is fitted as ln eps = a + b ln s (weighted
   least squares, weights 1 / var(ln eps) from the delta method on the counts,
   :func:`codebench.analysis.suppression.per_round_with_variance`; the
   covariance widened by chi2/dof when that exceeds 1) and extrapolated to
   s = 1: eps(1) = e^a with the 95% interval e^(a +- 1.96 sd(a)). The fitted
   exponent b is reported.

A power law fitted at raised noise is an approximation: the local slope of
ln eps against ln s is close to (d + 1) / 2 (the faults a minimum-weight
logical error needs) well below threshold and flattens towards threshold, and
the interval covers the counting noise of the fit, not that model error. The
planner therefore starts at the lowest affordable scale, and a note is added
when the fitted exponent is well below (d + 1) / 2: the raised scales then
approach threshold and the extrapolated rate is likely too high. Auto mode
extrapolates only where direct sampling is out of reach, that is where the
rate at s = 1 is small and the raised scales are still far below threshold.

``method="direct"`` or ``"extrapolated"`` forces one method for every
distance, a mapping ``{distance: method}`` for some (the tests compare the
two where both are feasible).

Fits
----
Lambda: weighted least squares of ln eps_d = ln C - ((d + 1) / 2) ln Lambda
over the distances with an estimate (Acharya et al., Nature 638, 920 (2025),
Eq. 1), with :func:`codebench.analysis.suppression.weighted_fit`; a direct
distance enters with its delta-method variance, an extrapolated one with the
variance of its extrapolated log. 95% interval from the normal quantile on
ln Lambda. Targets: the smallest allowed distance with
C / Lambda^((d + 1) / 2) <= target and its physical qubits, with the range
from the fit's 95% band (:func:`codebench.analysis.projections.distances_for_target`),
flagged as an extrapolation beyond the largest distance forecast.

Round duration: :meth:`codebench.noise.device.DeviceNoise.round_duration_ns`
of the memory circuit (one syndrome round: reset, basis changes, two-qubit
layers, measurement). The logical error per second is eps / round duration
(treating the per-round flips as a rate, fine for eps << 1). Decoder speed:
per distance, ``decode_us_per_round`` is the decoding wall time per shot per
round on one worker at scale 1 (the results' ``decode_seconds``), and
``keeps_up`` says whether it is at most the round duration.

Break-even: the per-round logical error against the error of one idle
physical qubit over one round, p_idle = px + py + pz of the Pauli-twirled
amplitude and phase damping channel (Tomita & Svore, PRA 90, 062320 (2014),
Eqs. 9-10) for the round duration and each listed qubit's T1 and T2 (the
defaults when the file lists none); best = smallest p_idle, median = median.

Cautions
--------
A model-based projection: it uses only what the device file states. Leakage,
crosstalk, correlated and burst errors (such as those from high-energy
events), non-Markovian noise and drift are not modelled. Measured
logical-qubit experiments on the device take precedence over this forecast.
"""

from __future__ import annotations

import copy
import json
import math
import os
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from codebench.analysis.projections import MAX_DISTANCE, distances_for_target
from codebench.analysis.suppression import per_round_with_variance, weighted_fit
from codebench.codes import CODE_FAMILIES
from codebench.decoders import DECODERS
from codebench.engine.executors import Executor, make_executor
from codebench.engine.stopping import DEFAULT_BATCH_BYTES, FIRST_BATCH, batch_cap, batch_sizes
from codebench.engine.worker import BatchResult, BatchTask
from codebench.export import decode_us_per_round
from codebench.errors import ConfigError, DeviceFileError, not_allowed
from codebench.noise.calibration import Device, load_device, parse_device
from codebench.noise.device import (
    MAX_DEPOLARIZE1,
    MAX_DEPOLARIZE2,
    MAX_FLIP,
    DeviceNoise,
    depolarizing_from_infidelity,
    twirled_idle,
)
from codebench.stats import Z95, per_round, wilson_interval

__all__ = [
    "CAUTIONS", "DEFAULT_DISTANCES", "DEFAULT_TARGETS", "IMPROVABLE", "METHODS", "forecast",
    "idle_error", "improve_device", "parse_improve",
]

DEFAULT_DISTANCES = (3, 5, 7)
DEFAULT_TARGETS = (1e-6, 1e-9, 1e-12)
DEFAULT_SEED = 20260101
METHODS = ("auto", "direct", "extrapolated")
#: Parameters ``improve`` may scale. For t1_us / t2_us the factor applies to 1/T.
IMPROVABLE = ("t1_us", "t2_us", "gate_1q_error", "gate_2q_error", "readout_error", "reset_error")

CAUTIONS = (
    "A model-based projection: it uses only the numbers in the device file and the circuit-level "
    "noise model derived from them.",
    "Not modelled: leakage, crosstalk, correlated and burst errors, non-Markovian noise, and drift of "
    "the calibration over time.",
    "Defer to measured logical-qubit experiments on the device wherever they exist.",
)

# Planner constants (see the module docstring).
PILOT_SHOTS = 7168               # 1024 + 2048 + 4096: a prefix of the batch schedule, reused later
PROBE_FAILURES = 10
PROBE_SHARE = 0.1
DIRECT_MIN_FAILURES = 100
DIRECT_FAILURES = 1000
EXTRAPOLATION_MIN_FAILURES = 100
EXTRAPOLATION_FAILURES = 400
LADDER_STEPS = (2, 6, 10, 14)    # grid indices j of s = 2^(j/2): s = 2, 8, 32, 128
LADDER_SHOTS = 7168
LADDER_FAILURES = 25
FIT_SCALES = 4                   # consecutive grid points: spread 2^(3/2)
MIN_RAISED_STEP = 2              # the lowest raised scale is s = 2
EFFICIENCY = 0.85                # usable fraction of workers x wall seconds
MIN_POINT_OVERHEAD = 0.03        # wall seconds per sampled point, at least
#: A fitted exponent below this fraction of (d + 1) / 2 (by 2 standard errors) gets a note.
EXPONENT_WARNING = 0.9
#: Sampling stops, whatever the plan, at this multiple of the budget (minus time for the outputs).
HARD_LIMIT = 1.1
#: Per-shot failure probability above which a raised scale is flagged as close to threshold.
NEAR_THRESHOLD = 0.2


# ---------------------------------------------------------------------------
# device what-ifs


def parse_improve(text: str) -> tuple[str, float]:
    """``"gate_2q_error=0.5"`` -> ``("gate_2q_error", 0.5)``; raises :class:`ConfigError`.

    >>> parse_improve("t1_us=0.5")
    ('t1_us', 0.5)
    """
    allowed = f"NAME=FACTOR with NAME one of {', '.join(IMPROVABLE)} and FACTOR a positive number"
    name, sep, value = text.partition("=")
    name = name.strip()
    try:
        factor = float(value)
    except ValueError:
        factor = math.nan
    if not sep or name not in IMPROVABLE or not math.isfinite(factor) or factor <= 0:
        raise ConfigError(not_allowed("--improve", text, allowed))
    return name, factor


def _check_improve(improve: Mapping[str, float]) -> dict[str, float]:
    out: dict[str, float] = {}
    for name, factor in improve.items():
        text = f"{name}={factor}"
        if name not in IMPROVABLE or isinstance(factor, bool) or not isinstance(factor, (int, float)) \
                or not math.isfinite(factor) or factor <= 0:
            raise ConfigError(not_allowed("--improve", text, f"NAME=FACTOR with NAME one of "
                                          f"{', '.join(IMPROVABLE)} and FACTOR a positive number"))
        out[name] = float(factor)
    return out


def improve_device(device: Device, improve: Mapping[str, float], source: str = "<device>") -> Device:
    """The device with each named parameter multiplied by its factor, re-validated.

    ``t1_us`` / ``t2_us``: the factor multiplies 1/T (0.5 doubles T). The
    error parameters are multiplied directly. Each applies to the defaults,
    to every per-qubit value and (``gate_2q_error``) every per-pair value;
    ``readout_error`` also scales the conditional readout errors. The
    modified data are parsed again with
    :func:`~codebench.noise.calibration.parse_device`, so a factor that makes
    a value invalid (a probability above 0.5, T2 > 2 T1) raises
    :class:`~codebench.errors.DeviceFileError`.

    >>> from codebench.noise.calibration import parse_device
    >>> base = parse_device({"name": "x", "defaults": {"t1_us": 100.0, "t2_us": 80.0, "gate_1q_error": 1e-4,
    ...     "gate_2q_error": 4e-3, "readout_error": 1e-2, "reset_error": 1e-3},
    ...     "durations": {"gate_1q_ns": 20, "gate_2q_ns": 40, "measure_ns": 500, "reset_ns": 200}})
    >>> better = improve_device(base, {"gate_2q_error": 0.5, "t1_us": 0.5})
    >>> better.gate_2q_error, better.defaults.t1_us
    (0.002, 200.0)
    """
    factors = _check_improve(improve)
    if not factors:
        return device
    data = copy.deepcopy(device.data)

    def scale(table: Any, key: str, factor: float, inverse: bool) -> None:
        if isinstance(table, dict) and isinstance(table.get(key), (int, float)) and not isinstance(table[key], bool):
            table[key] = table[key] / factor if inverse else table[key] * factor

    tables = [data.get("defaults")] + list(data.get("qubits", []) or [])
    for name, factor in factors.items():
        inverse = name in ("t1_us", "t2_us")
        keys = [name] + (["readout_error_0to1", "readout_error_1to0"] if name == "readout_error" else [])
        for table in tables:
            for key in keys:
                scale(table, key, factor, inverse)
        if name == "gate_2q_error":
            for pair in data.get("pairs", []) or []:
                scale(pair, "gate_2q_error", factor, False)
    spec = ",".join(f"{k}={v:g}" for k, v in factors.items())
    return parse_device(data, f"{source} with --improve {spec}")


# ---------------------------------------------------------------------------
# idle qubits and break-even


def idle_error(t_us: float, t1_us: float, t2_us: float) -> float:
    """px + py + pz of the twirled idle channel over ``t_us`` (Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10).

    >>> round(idle_error(1.0, 100.0, 100.0), 9)
    0.007462625
    """
    return float(sum(twirled_idle(t_us, t1_us, t2_us)))


def _break_even(device: Device, round_us: float, rows: list[dict[str, Any]]) -> dict[str, Any]:
    listed = list(device.qubits.items()) or [("defaults", device.defaults)]
    errors = {qid: idle_error(round_us, cal.t1_us, cal.t2_us) for qid, cal in listed}
    best_id = min(errors, key=lambda q: errors[q])
    best = errors[best_id]
    median = float(np.median(list(errors.values())))
    per_distance = []
    for row in rows:
        eps, high = row["per_round_rate"], row["high"]
        if eps is None:
            verdict = "unknown"
        elif eps < best:
            verdict = "beats the best idle qubit"
        elif eps < median:
            verdict = "beats the median idle qubit"
        else:
            verdict = "does not"
        per_distance.append({
            "distance": row["distance"], "per_round_rate": eps, "verdict": verdict,
            "beats_best": None if eps is None else bool(eps < best),
            "beats_median": None if eps is None else bool(eps < median),
            "beats_best_at_95": None if high is None else bool(high < best),
            "beats_median_at_95": None if high is None else bool(high < median),
            "ratio_to_best": None if eps is None else eps / best,
            "ratio_to_median": None if eps is None else eps / median,
        })
    return {
        "round_duration_us": round_us,
        "idle_error_best": best, "idle_error_median": median, "best_qubit": best_id,
        "best_qubit_t1_us": dict(listed)[best_id].t1_us, "best_qubit_t2_us": dict(listed)[best_id].t2_us,
        "qubits_considered": len(errors),
        "definition": "p_idle = px + py + pz of the Pauli-twirled amplitude and phase damping channel over one "
                      "round (Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10), per listed device qubit",
        "distances": per_distance,
    }


# ---------------------------------------------------------------------------
# sampling through run_sweep with one kept-alive worker pool


class _Deadline(Exception):
    """Raised inside a sweep when the forecast's hard deadline has passed (the counts so far are kept)."""


class _KeptPool(Executor):
    """Wraps an executor so the sweeps of one forecast share its workers.

    ``close(wait=True)`` (the end of one sweep) only drains batches still in
    flight, which that sweep no longer needs; ``close(wait=False)`` (an
    interrupt) really stops the workers. :meth:`shutdown` ends the pool.
    """

    name = "kept"

    def __init__(self, inner: Executor, deadline: float | None = None) -> None:
        self.inner = inner
        self.deadline = deadline
        self.stopped = False
        self.expired = False

    @property
    def capacity(self) -> int:
        return self.inner.capacity

    def submit(self, task: BatchTask) -> None:
        self.inner.submit(task)

    def completed(self, timeout: float) -> list[BatchResult]:
        if self.deadline is not None and time.perf_counter() > self.deadline:
            self.expired = True
            raise _Deadline("the forecast's time budget ran out")
        return self.inner.completed(timeout)

    def in_flight(self) -> int:
        return self.inner.in_flight()

    def close(self, wait: bool = True) -> None:
        if not wait or self.expired:
            self.shutdown(wait=False)
            return
        while self.inner.in_flight():
            self.inner.completed(timeout=1.0)

    def shutdown(self, wait: bool = True) -> None:
        if not self.stopped:
            self.stopped = True
            self.inner.close(wait=wait)


@dataclass
class _Sample:
    """Counts of one sampled (distance, scale) point."""

    distance: int
    scale: float
    rounds: int
    shots: int
    failures: int
    seconds: float
    detectors: int
    decode_seconds: float = 0.0

    @property
    def cost(self) -> float:
        """Worker-seconds per shot."""
        return self.seconds / self.shots if self.shots else math.nan

    @property
    def rate(self) -> float:
        return self.failures / self.shots if self.shots else math.nan


@dataclass
class _Sampler:
    folder: Path
    device_file: Path
    code: str
    basis: str
    decoder: str
    seed: int
    executor: _KeptPool
    progress: bool
    samples: dict[tuple[int, float], _Sample] = field(default_factory=dict)
    calls: int = 0
    log: list[dict[str, Any]] = field(default_factory=list)

    def run(self, label: str, points: Mapping[int, Sequence[float]], failure_target: int,
            shot_budget: int, planned: float | None = None) -> list[_Sample]:
        from codebench.api import load_results, run_sweep

        if self.executor.stopped:
            return [self.samples[(d, float(s))] for d, scales in points.items() for s in scales
                    if (d, float(s)) in self.samples]
        self.calls += 1
        studies = [{"label": f"d{d}", "code": self.code, "distances": [d], "rounds": "d", "basis": [self.basis],
                    "noise": "device", "device": str(self.device_file), "scale": [float(s) for s in scales],
                    "decoders": [self.decoder]} for d, scales in points.items()]
        config = {"name": f"forecast-{self.calls}-{label}", "seed": self.seed,
                  "stopping": {"failure_target": max(1, int(failure_target)), "shot_budget": max(1, int(shot_budget))},
                  "study": studies}
        started = time.perf_counter()
        before = sum(s.seconds for s in self.samples.values())
        try:
            frame = run_sweep(config, out=self.folder, executor=self.executor, progress=self.progress)
        except _Deadline:
            if self.progress:
                print(file=sys.stderr)
            frame = load_results(self.folder)
        out = []
        for record in frame.to_dict("records"):
            row: dict[str, Any] = {str(k): v for k, v in record.items()}
            if int(row["shots"]) == 0:
                continue
            sample = _Sample(int(row["distance"]), float(row["p"]), int(row["rounds"]), int(row["shots"]),
                             int(row["failures"]), float(row["seconds"]), int(row["detectors"]),
                             float(row["decode_seconds"]))
            key = (sample.distance, sample.scale)
            old = self.samples.get(key)
            if old is None or sample.shots >= old.shots:
                self.samples[key] = sample
            out.append(self.samples[key])
        self.log.append({"sweep": config["name"], "points": len(out), "failure_target": failure_target,
                         "shot_budget": shot_budget, "wall_seconds": time.perf_counter() - started,
                         "worker_seconds": sum(s.seconds for s in self.samples.values()) - before,
                         "planned_worker_seconds": planned})
        return out

    def at(self, distance: int) -> list[_Sample]:
        return sorted((s for (d, _), s in self.samples.items() if d == distance), key=lambda s: s.scale)


# ---------------------------------------------------------------------------
# planning helpers


def _grid_scale(step: int) -> float:
    """Scale of grid index ``step``: 2^(step/2), rounded to 6 decimals so point keys are stable."""
    return round(float(2.0 ** (step / 2.0)), 6)


def _prefix_shots(limit: float, cap: int) -> int:
    """Largest total of whole scheduled batches <= ``limit`` (at least one batch), so later runs reuse them."""
    if not math.isfinite(limit):
        limit = float(1 << 40)
    total = 0
    for size in batch_sizes(int(min(limit, 1 << 40)) + 1, cap):
        if total + size > limit:
            break
        total += size
    return max(total, FIRST_BATCH)


def _scale_cap(device: Device) -> float:
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


def _predict_rate(samples: list[_Sample], scale: float, nominal_slope: float) -> float:
    """Rough per-shot failure probability at ``scale`` from the samples (for planning only).

    Log-log interpolation between points with >= 3 failures; beyond them the
    slope of the nearest two such points (clipped to [1, nominal]) or the
    nominal slope (d + 1) / 2.
    """
    pts = sorted((s.scale, s.rate) for s in samples if s.failures >= 3 and s.rate < 0.45)
    if not pts:
        return math.nan
    xs = [math.log(s) for s, _ in pts]
    ys = [math.log(p) for _, p in pts]
    x = math.log(scale)
    if len(pts) == 1:
        return min(0.5, math.exp(ys[0] + nominal_slope * (x - xs[0])))
    if x <= xs[0]:
        slope = (ys[1] - ys[0]) / (xs[1] - xs[0])
        slope = min(max(slope, 1.0), nominal_slope)
        return math.exp(ys[0] + slope * (x - xs[0]))
    if x >= xs[-1]:
        slope = (ys[-1] - ys[-2]) / (xs[-1] - xs[-2])
        return min(0.5, math.exp(ys[-1] + max(slope, 0.0) * (x - xs[-1])))
    return math.exp(float(np.interp(x, xs, ys)))


def _predict_cost(samples: list[_Sample], scale: float) -> float:
    """Worker-seconds per shot at ``scale``, interpolated in ln s (clamped at the ends)."""
    pts = sorted((s.scale, s.cost) for s in samples if s.shots >= FIRST_BATCH and s.seconds > 0)
    if not pts:
        return math.nan
    return float(np.interp(math.log(scale), [math.log(s) for s, _ in pts], [c for _, c in pts]))


@dataclass
class _Clock:
    budget: float
    workers: int
    start: float
    reserve: float

    def elapsed(self) -> float:
        return time.perf_counter() - self.start

    def worker_seconds_left(self) -> float:
        return max(0.0, self.budget - self.reserve - self.elapsed()) * self.workers * EFFICIENCY


# ---------------------------------------------------------------------------
# estimates


def _direct_estimate(sample: _Sample) -> dict[str, Any]:
    k, n, r = sample.failures, sample.shots, sample.rounds
    low_total, high_total = wilson_interval(k, n) if n else (0.0, 1.0)
    base: dict[str, Any] = {"method": "direct", "method_kind": "direct", "shots": n, "failures": k,
                            "scales": [1.0]}
    if k == 0 or k / n >= 0.5:
        why = "no failures: upper bound only" if k == 0 else "failure probability >= 1/2: saturated"
        return {**base, "per_round_rate": None, "low": per_round(low_total, r) if k else 0.0,
                "high": per_round(high_total, r), "method": f"direct ({why})", "log_rate": None, "log_var": None}
    eps, var = per_round_with_variance([k], [n], [r])
    return {**base, "per_round_rate": float(eps[0]), "low": per_round(low_total, r),
            "high": per_round(high_total, r), "log_rate": float(np.log(eps[0])), "log_var": float(var[0])}


def _extrapolated_estimate(samples: list[_Sample]) -> dict[str, Any]:
    scales = [s.scale for s in samples]
    usable = [s for s in samples if s.failures > 0 and s.rate < 0.5]
    span = f"{min(scales):g}-{max(scales):g}" if scales else "none: not sampled"
    base: dict[str, Any] = {
        "method": f"extrapolated (power law over scales {span})",
        "method_kind": "extrapolated", "scales": scales,
        "shots": sum(s.shots for s in samples), "failures": sum(s.failures for s in samples),
        "points": [{"scale": s.scale, "shots": s.shots, "failures": s.failures,
                    "per_round_rate": per_round(s.rate, s.rounds) if s.shots else None,
                    "low": per_round(wilson_interval(s.failures, s.shots)[0], s.rounds) if s.shots else None,
                    "high": per_round(wilson_interval(s.failures, s.shots)[1], s.rounds) if s.shots else None}
                   for s in samples],
    }
    if len(usable) < 2:
        return {**base, "per_round_rate": None, "low": None, "high": None, "log_rate": None, "log_var": None,
                "method": base["method"] + " (fewer than 2 scales with failures: no estimate)"}
    eps, var = per_round_with_variance([s.failures for s in usable], [s.shots for s in usable],
                                       [s.rounds for s in usable])
    x = np.log(np.array([s.scale for s in usable], dtype=np.float64))
    fit = weighted_fit(np.column_stack([np.ones_like(x), x]), np.log(eps), var)
    a, var_a = float(fit.beta[0]), float(fit.cov[0, 0])
    half = Z95 * math.sqrt(max(var_a, 0.0))
    return {**base, "per_round_rate": math.exp(a), "low": math.exp(a - half), "high": math.exp(a + half),
            "log_rate": a, "log_var": var_a, "exponent": float(fit.beta[1]),
            "exponent_se": math.sqrt(max(float(fit.cov[1, 1]), 0.0)), "fit_chi2": fit.chi2, "fit_dof": fit.dof,
            "fit_inflation": float(fit.inflation)}


def _lambda_fit(rows: list[dict[str, Any]]) -> dict[str, Any] | None:
    usable = [r for r in rows if r["log_rate"] is not None and r["log_var"] is not None and r["log_var"] > 0]
    if len({r["distance"] for r in usable}) < 2:
        return None
    d = np.array([r["distance"] for r in usable], dtype=np.float64)
    x = -(d + 1.0) / 2.0
    fit = weighted_fit(np.column_stack([np.ones_like(x), x]), np.array([r["log_rate"] for r in usable]),
                       np.array([r["log_var"] for r in usable]))
    log_lam, var = float(fit.beta[1]), float(fit.cov[1, 1])
    half = Z95 * math.sqrt(max(var, 0.0))
    return {"lambda": math.exp(log_lam), "lambda_low": math.exp(log_lam - half),
            "lambda_high": math.exp(log_lam + half), "C": math.exp(float(fit.beta[0])),
            "log_cov": [[float(v) for v in row] for row in fit.cov], "distances": [int(v) for v in d],
            "chi2": fit.chi2, "dof": fit.dof, "inflation": float(fit.inflation),
            "model": "eps_d = C / Lambda^((d+1)/2), weighted least squares in ln eps "
                     "(Acharya et al., Nature 638, 920 (2025), Eq. 1)"}


def _lambda_pairs(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    usable = [r for r in rows if r["log_rate"] is not None and r["log_var"] is not None]
    out = []
    for a, b in zip(usable, usable[1:]):
        k = 2.0 / (b["distance"] - a["distance"])
        log_lam = k * (a["log_rate"] - b["log_rate"])
        half = Z95 * k * math.sqrt(a["log_var"] + b["log_var"])
        out.append({"distances": [a["distance"], b["distance"]], "lambda": math.exp(log_lam),
                    "low": math.exp(log_lam - half), "high": math.exp(log_lam + half)})
    return out


def _targets(code: str, fit: dict[str, Any] | None, targets: Sequence[float], largest: int) -> list[dict[str, Any]]:
    family = CODE_FAMILIES[code]
    allowed = np.array([d for d in range(1, MAX_DISTANCE + 1) if family.distance_problem(d) is None], dtype=np.int64)
    out = []
    for target in targets:
        record: dict[str, Any] = {"target": float(target), "distance": None, "qubits": None, "distance_low": None,
                                  "distance_high": None, "qubits_low": None, "qubits_high": None,
                                  "reachable": False, "extrapolation": None}
        if fit is not None:
            central, low, high = distances_for_target(
                allowed, math.log(fit["C"]), math.log(fit["lambda"]), math.log(target),
                np.asarray(fit["log_cov"], dtype=np.float64), fit["lambda_low"], fit["lambda_high"])
            record.update({
                "distance": central, "distance_low": low, "distance_high": high,
                "qubits": None if central is None else family.qubit_count(central),
                "qubits_low": None if low is None else family.qubit_count(low),
                "qubits_high": None if high is None else family.qubit_count(high),
                "reachable": central is not None,
                "extrapolation": None if central is None else bool(central > largest),
            })
        out.append(record)
    return out


def _finite(value: Any) -> Any:
    """Plain JSON types; non-finite floats become None."""
    if isinstance(value, dict):
        return {str(k): _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(float(value)) else None
    return value


# ---------------------------------------------------------------------------
# the forecast


def _check_inputs(code: str, distances: Sequence[int], basis: str, decoder: str, targets: Sequence[float],
                  budget_seconds: float, workers: int | None, method: str | Mapping[int, str]) -> list[int]:
    if code not in CODE_FAMILIES:
        raise ConfigError(not_allowed("--code", code, "one of " + ", ".join(repr(c) for c in CODE_FAMILIES)))
    family = CODE_FAMILIES[code]
    if basis not in family.bases:
        raise ConfigError(not_allowed("--basis", basis, "one of " + ", ".join(repr(b) for b in family.bases)))
    if decoder not in DECODERS:
        raise ConfigError(not_allowed("--decoder", decoder, "one of " + ", ".join(repr(d) for d in DECODERS)))
    checked: list[int] = []
    for i, d in enumerate(distances):
        if isinstance(d, bool) or not isinstance(d, (int, np.integer)):
            raise ConfigError(not_allowed(f"--distances[{i}]", d, "an integer"))
        problem = family.distance_problem(int(d))
        if problem is not None:
            raise ConfigError(not_allowed(f"--distances[{i}]", d, f"{problem} for {code}"))
        checked.append(int(d))
    if len(set(checked)) < 2:
        raise ConfigError(not_allowed("--distances", list(distances), "at least two different distances "
                                      "(Lambda needs two)"))
    for t in targets:
        if isinstance(t, bool) or not isinstance(t, (int, float)) or not 0 < t < 0.5:
            raise ConfigError(not_allowed("--target", t, "a per-round rate in (0, 0.5)"))
    if isinstance(budget_seconds, bool) or not isinstance(budget_seconds, (int, float)) \
            or not math.isfinite(budget_seconds) or budget_seconds <= 0:
        raise ConfigError(not_allowed("--budget-seconds", budget_seconds, "a positive number of seconds"))
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise ConfigError(not_allowed("--workers", workers, "a positive integer"))
    chosen = method.values() if isinstance(method, Mapping) else [method]
    for m in chosen:
        if m not in METHODS:
            raise ConfigError(not_allowed("--method", m, "one of " + ", ".join(repr(x) for x in METHODS)))
    if isinstance(method, Mapping):
        extra = [d for d in method if d not in checked]
        if extra:
            raise ConfigError(not_allowed("method", dict(method), "a mapping from forecast distances to methods"))
    return sorted(set(checked))


def forecast(
    device: Device | str | os.PathLike[str],
    *,
    code: str = "rotated_surface",
    distances: Sequence[int] = DEFAULT_DISTANCES,
    basis: str = "Z",
    decoder: str = "mwpm",
    targets: Sequence[float] = DEFAULT_TARGETS,
    budget_seconds: float = 60.0,
    workers: int | None = None,
    seed: int = DEFAULT_SEED,
    out: str | os.PathLike[str] | None = None,
    improve: Mapping[str, float] | None = None,
    method: str | Mapping[int, str] = "auto",
    progress: bool = False,
    executor_factory: Callable[[int], Executor] | None = None,
) -> dict[str, Any]:
    """Forecast a device's logical qubit within ``budget_seconds`` of wall time.

    Parameters
    ----------
    device : Device or path
        A validated device or the path of a device file (TOML or JSON).
    code, distances, basis, decoder
        The memory experiment: rounds = d at every distance.
    targets : sequence of float
        Target per-round logical error rates for the distance projections.
    budget_seconds : float
        Wall-clock budget of the whole forecast (pool start-up, sampling, fits).
    workers : int, optional
        Local worker processes (default: all cores).
    seed : int
        Seed of every sweep the forecast runs.
    out : path, optional
        Folder for ``forecast.json``, ``forecast.csv``, ``forecast.png`` /
        ``.svg`` and the sample store ``store/`` (a rerun on the same folder
        reuses the stored batches). Without it a temporary folder is used.
    improve : mapping, optional
        ``{parameter: factor}`` what-ifs, see :func:`improve_device`.
    method : str or mapping
        ``"auto"`` (see the module docstring), ``"direct"`` or
        ``"extrapolated"`` for every distance, or a mapping from distance
        to one of these (distances not named use ``"auto"``).
    progress : bool
        Show run_sweep's progress line on standard error.
    executor_factory : callable, optional
        Builds the executor from the worker count (tests).

    Returns
    -------
    dict
        Plain JSON types (``json.dumps(..., allow_nan=False)`` works); keys
        ``device, code, basis, decoder, round_duration_us, distances, lambda,
        lambda_low, lambda_high, targets, break_even`` and more (see README).
    """
    start = time.perf_counter()
    improve = dict(improve or {})
    ds = _check_inputs(code, distances, basis, decoder, targets, budget_seconds, workers, method)
    methods = {d: (method.get(d, "auto") if isinstance(method, Mapping) else method) for d in ds}
    _check_improve(improve)
    source = "<device>"
    if isinstance(device, Device):
        base = device
    else:
        source = str(device)
        base = load_device(Path(device))
    dev = improve_device(base, improve, source)
    count = workers or os.cpu_count() or 1

    tmp: tempfile.TemporaryDirectory[str] | None = None
    if out is not None:
        out_dir = Path(out)
        if out_dir.exists() and not out_dir.is_dir():
            raise ConfigError(not_allowed("--out", str(out_dir), "a folder (or a path that does not exist yet)"))
        store_dir = out_dir / "store"
    else:
        tmp = tempfile.TemporaryDirectory(prefix="codebench-forecast-")
        out_dir = None
        store_dir = Path(tmp.name)
    store_dir.mkdir(parents=True, exist_ok=True)
    device_file = (store_dir / "device.json").resolve()
    device_file.write_text(dev.canonical_json() + "\n")

    try:
        result = _run_forecast(start, dev, device, improve, code, ds, basis, decoder, targets, budget_seconds,
                               count, seed, store_dir, device_file, methods, progress, executor_factory,
                               with_outputs=out_dir is not None)
        if out_dir is not None:
            from codebench.forecast_render import write_outputs

            write_outputs(result, out_dir)
    finally:
        if tmp is not None:
            tmp.cleanup()
    json.dumps(result, allow_nan=False)  # the promise of plain, finite JSON
    return result


def _run_forecast(start: float, dev: Device, device: Any, improve: dict[str, float], code: str, ds: list[int],
                  basis: str, decoder: str, targets: Sequence[float], budget_seconds: float, count: int,
                  seed: int, store_dir: Path, device_file: Path, methods: dict[int, str], progress: bool,
                  executor_factory: Callable[[int], Executor] | None, with_outputs: bool) -> dict[str, Any]:
    family = CODE_FAMILIES[code]
    factory = executor_factory or make_executor
    pool = _KeptPool(factory(count), deadline=start + HARD_LIMIT * float(budget_seconds)
                     - (1.0 if with_outputs else 0.2))
    clock = _Clock(float(budget_seconds), count, start, reserve=(1.5 if with_outputs else 0.5)
                   + 0.02 * float(budget_seconds))
    sampler = _Sampler(store_dir, device_file, code, basis, decoder, int(seed), pool, progress)
    notes: list[str] = []
    try:
        rows = _sample_all(sampler, clock, dev, ds, methods, notes)
    finally:
        pool.shutdown()
    elapsed_sampling = clock.elapsed()

    model = DeviceNoise(1.0, device=dev.canonical_json())
    durations = {}
    for d in ds:
        ideal = family.ideal_circuit(d, d, basis, model.circuit_gate_set())  # type: ignore[arg-type]
        durations[d] = model.round_duration_ns(ideal) / 1000.0
    round_us = durations[max(ds)]
    for row in rows:
        row["qubits"] = family.qubit_count(row["distance"])
        row["round_duration_us"] = durations[row["distance"]]
        per_s = 1e6 / row["round_duration_us"]
        row["per_second_rate"] = None if row["per_round_rate"] is None else row["per_round_rate"] * per_s
        row["per_second_low"] = None if row["low"] is None else row["low"] * per_s
        row["per_second_high"] = None if row["high"] is None else row["high"] * per_s
        # Decoder speed at the device's own noise (scale 1), on one worker, against the round duration.
        at_one = sampler.samples.get((row["distance"], 1.0))
        row["decode_us_per_round"] = (None if at_one is None or at_one.shots == 0 else
                                      decode_us_per_round(at_one.decode_seconds, at_one.shots, at_one.rounds))
        row["keeps_up"] = (None if row["decode_us_per_round"] is None
                           else bool(row["decode_us_per_round"] <= row["round_duration_us"]))

    fit = _lambda_fit(rows)
    if fit is None:
        notes.append("no Lambda fit: fewer than two distances have an estimate with failures.")
    else:
        if fit["lambda"] <= 1:
            notes.append(f"Lambda = {fit['lambda']:.3g} <= 1: the device is not below threshold for this code "
                         "and decoder; growing the distance does not reach the targets.")
        elif fit["lambda_low"] <= 1:
            notes.append("the Lambda interval reaches below 1: the upper end of each target's distance range "
                         "is unbounded.")
    target_rows = _targets(code, fit, [float(t) for t in targets], max(ds))
    if any(t["extrapolation"] for t in target_rows):
        notes.append(f"target distances beyond d = {max(ds)} extrapolate the Lambda fit; treat them as "
                     "order-of-magnitude projections.")
    break_even = _break_even(dev, round_us, rows)

    public_rows = []
    for row in rows:
        public = {k: v for k, v in row.items() if k not in ("log_rate", "log_var")}
        public["log_rate_variance"] = row["log_var"]
        public_rows.append(public)
    result: dict[str, Any] = {
        "device": dev.name, "device_file": None if isinstance(device, Device) else str(device),
        "device_digest": dev.digest(), "improve": improve,
        "code": code, "basis": basis, "decoder": decoder, "seed": int(seed),
        "round_duration_us": round_us,
        "distances": public_rows,
        "lambda": None if fit is None else fit["lambda"],
        "lambda_low": None if fit is None else fit["lambda_low"],
        "lambda_high": None if fit is None else fit["lambda_high"],
        "lambda_fit": fit,
        "lambda_pairs": _lambda_pairs(rows),
        "targets": target_rows,
        "break_even": break_even,
        "budget": {"seconds": float(budget_seconds), "workers": count,
                   "wall_seconds": elapsed_sampling,
                   "worker_seconds": sum(s.seconds for s in sampler.samples.values()),
                   "sweeps": sampler.log, "methods": {str(d): m for d, m in methods.items()}},
        "cautions": list(CAUTIONS),
        "notes": notes,
    }
    finite: dict[str, Any] = _finite(result)
    return finite


def _say(sampler: _Sampler, text: str) -> None:
    if sampler.progress:
        print(f"forecast: {text}", file=sys.stderr, flush=True)


def _sample_all(sampler: _Sampler, clock: _Clock, dev: Device, ds: list[int], methods: dict[int, str],
                notes: list[str]) -> list[dict[str, Any]]:
    """Pilot, then each distance from the smallest: decide the method, sample, estimate."""
    _say(sampler, f"pilot at scale 1 for d = {', '.join(map(str, ds))}")
    before = clock.elapsed()
    pilot = sampler.run("pilot", {d: [1.0] for d in ds}, PROBE_FAILURES, PILOT_SHOTS)
    pilot_wall = clock.elapsed() - before
    overhead = max(0.0, pilot_wall - sum(s.seconds for s in pilot) / clock.workers)
    cube = sum(d**3 for d in ds)

    def point_overhead(d: int) -> float:
        """Worker-seconds lost per sampled point of distance d (circuit builds, decoder compiles)."""
        return max(MIN_POINT_OVERHEAD, overhead * d**3 / cube) * clock.workers

    s_cap = _scale_cap(dev)
    rows: list[dict[str, Any]] = []
    for index, d in enumerate(ds):
        share = clock.worker_seconds_left() / (len(ds) - index)
        nominal = (d + 1) / 2.0
        method = methods[d]
        one = sampler.samples.get((d, 1.0), _Sample(d, 1.0, d, 0, 0, 0.0, 0))
        if sampler.executor.stopped or one.shots == 0:
            notes.append(f"d = {d}: the time budget ran out before this distance was sampled; its numbers come "
                         "from the pilot's counts only.")
            rows.append({"distance": d, "rounds": d, **_direct_estimate(one),
                         "reason": "time budget exhausted (pilot counts only)"})
            continue
        cap = batch_cap(one.detectors, DEFAULT_BATCH_BYTES)
        reason = ""
        choice = method
        if method == "auto" and one.failures < PROBE_FAILURES and one.rate < 0.5 and one.cost > 0:
            probe = _prefix_shots(PROBE_SHARE * share / one.cost, cap)
            if probe > one.shots:
                _say(sampler, f"d = {d}: probing scale 1 with up to {probe:,} shots")
                before = clock.worker_seconds_left()
                sampler.run(f"d{d}-probe", {d: [1.0]}, PROBE_FAILURES, probe, planned=probe * one.cost)
                share = max(0.0, share - (before - clock.worker_seconds_left()))
                one = sampler.samples[(d, 1.0)]
        if method == "auto":
            if one.failures >= PROBE_FAILURES or one.rate >= 0.5:
                need = DIRECT_MIN_FAILURES / one.rate * one.cost + point_overhead(d)
                choice = "direct" if need <= share else "extrapolated"
                reason = (f"{DIRECT_MIN_FAILURES} failures at scale 1 need about {need:.3g} worker-seconds; "
                          f"the share is {share:.3g}")
            else:
                choice = "extrapolated"
                reason = (f"{one.failures} failures in {one.shots:,} shots at scale 1: "
                          f"{DIRECT_MIN_FAILURES} failures do not fit in the share of {share:.3g} worker-seconds")
        elif method == "direct":
            reason = "direct sampling forced"
        else:
            reason = "extrapolation forced"
        if choice == "direct":
            shots = (share - point_overhead(d)) / one.cost if one.cost > 0 else one.shots
            shots = max(int(shots), one.shots)
            _say(sampler, f"d = {d}: direct sampling, up to {DIRECT_FAILURES} failures or {shots:,} shots")
            sampler.run(f"d{d}-direct", {d: [1.0]}, DIRECT_FAILURES, shots, planned=share)
            row = _direct_estimate(sampler.samples[(d, 1.0)])
        else:
            row = _extrapolate(sampler, clock, d, share, nominal, s_cap, point_overhead(d), notes)
        if sampler.executor.expired and not any("ran out" in n for n in notes):
            notes.append(f"the time budget ran out while sampling d = {d}; its counts stop there and later "
                         "distances use the pilot's counts only.")
        rows.append({"distance": d, "rounds": d, **row, "reason": reason})
    return rows


def _extrapolate(sampler: _Sampler, clock: _Clock, d: int, share: float, nominal: float, s_cap: float,
                 overhead: float, notes: list[str]) -> dict[str, Any]:
    """Ladder, choice of the scales, sampling at them, power-law fit."""
    start_ws = clock.worker_seconds_left()
    ladder = [_grid_scale(j) for j in LADDER_STEPS if _grid_scale(j) <= s_cap]
    ladder = [s for s in ladder if (d, s) not in sampler.samples]
    if ladder:
        _say(sampler, f"d = {d}: ladder at scales {', '.join(f'{s:g}' for s in ladder)}")
        sampler.run(f"d{d}-ladder", {d: ladder}, LADDER_FAILURES, LADDER_SHOTS)
    known = sampler.at(d)
    share = max(0.0, share - (start_ws - clock.worker_seconds_left()))
    steps = [j for j in range(MIN_RAISED_STEP, 64) if _grid_scale(j + FIT_SCALES - 1) <= s_cap]
    if not steps:
        steps = [MIN_RAISED_STEP]
    chosen: tuple[list[float], int] | None = None
    planned = math.nan
    # Candidate scale sets with finite predictions; those whose top scale stays below NEAR_THRESHOLD
    # first (when none does, all of them), from the lowest scales up.
    candidates = []
    for j0 in steps:
        scales = [_grid_scale(j0 + i) for i in range(FIT_SCALES)]
        rates = [_predict_rate(known, s, nominal) for s in scales]
        costs = [_predict_cost(known, s) for s in scales]
        if all(math.isfinite(v) and v > 0 for v in rates + costs):
            candidates.append((j0, scales, rates, costs))
    below = [c for c in candidates if c[2][-1] <= NEAR_THRESHOLD]
    candidates = below or candidates
    last = candidates[-1][0] if candidates else None
    for j0, scales, rates, costs in candidates:
        lowest = EXTRAPOLATION_MIN_FAILURES / rates[0]

        def spend(limit: float) -> float:
            """Planned worker-seconds for a shot cap ``limit``: the lowest scale is charged the whole cap
            (it is the one that may run to it), the others until their expected 400 failures."""
            rest = sum(c * min(limit, EXTRAPOLATION_FAILURES / p) for c, p in zip(costs[1:], rates[1:]))
            return costs[0] * limit + rest + overhead * FIT_SCALES

        if spend(lowest) <= share or j0 == last:
            # The largest cap that fits, at most twice the expected shots for 400 failures at the
            # lowest scale (bisection: spend is monotone in the cap).
            lo, hi = lowest, 2.0 * max(lowest, EXTRAPOLATION_FAILURES / rates[0])
            if spend(hi) <= share:
                limit = hi
            else:
                for _ in range(50):
                    mid = math.sqrt(lo * hi)
                    lo, hi = (mid, hi) if spend(mid) <= share else (lo, mid)
                limit = lo
            if spend(limit) > share:
                limit = max((share - overhead * FIT_SCALES) / sum(costs), float(FIRST_BATCH))
            chosen = (scales, max(FIRST_BATCH, int(limit)))
            planned = spend(limit)
            if rates[-1] > NEAR_THRESHOLD:
                notes.append(f"d = {d}: the highest extrapolation scale {scales[-1]:g} has an expected failure "
                             f"probability of {rates[-1]:.2g} per shot; the power law may be biased near threshold.")
            break
    if chosen is None:
        # No rate seen anywhere on the ladder: sample the lowest scales with what the share allows.
        scales = [_grid_scale(MIN_RAISED_STEP + i) for i in range(FIT_SCALES)]
        cost = max((c for c in (_predict_cost(known, s) for s in scales) if math.isfinite(c)), default=math.nan)
        limit = (share - overhead * FIT_SCALES) / (FIT_SCALES * cost) if math.isfinite(cost) and cost > 0 else 0
        chosen = (scales, max(FIRST_BATCH, int(limit)))
        notes.append(f"d = {d}: no failures on the scale ladder; the extrapolation scales were not chosen from data.")
    scales, shots = chosen
    _say(sampler, f"d = {d}: raised noise at scales {', '.join(f'{s:g}' for s in scales)}, "
                  f"up to {EXTRAPOLATION_FAILURES} failures or {shots:,} shots each")
    sampler.run(f"d{d}-scales", {d: scales}, EXTRAPOLATION_FAILURES, shots, planned=planned)
    estimate = _extrapolated_estimate([sampler.samples[(d, s)] for s in scales if (d, s) in sampler.samples])
    b, se = estimate.get("exponent"), estimate.get("exponent_se")
    if b is not None and se is not None and b + 2 * se < EXPONENT_WARNING * nominal:
        notes.append(f"d = {d}: the fitted exponent {b:.2f} +- {Z95 * se:.2f} is well below (d+1)/2 = {nominal:g}: "
                     "the raised scales approach threshold, where ln eps flattens against ln s, so the "
                     "extrapolated rate is likely too high (pessimistic).")
    return estimate
