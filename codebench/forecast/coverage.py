"""Measured coverage of the forecast's intervals: how often a 95% interval contains the truth.

The truth of a point is taken from a long direct run (stim's circuit sampler
and the point's decoder, thousands of failures); each method is then run with
several seeds and a fixed budget, and the fraction of its intervals that
contain the reference rate is the measured coverage. The reference's own
counting noise makes the measured coverage slightly conservative (it is a few
percent of the rate, against interval half-widths of 10-40%).

Used by ``tests/test_coverage.py`` (a few seeds) and
``scripts/check_intervals.py`` (the campaign quoted in the README).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from codebench.engine.executors import Executor
from codebench.engine.worker import compile_point, count_failures
from codebench.forecast.strata import sample_point
from codebench.records import Point
from codebench.stats import wilson_interval

__all__ = ["Reference", "Trial", "direct_reference", "stratified_trials", "summarise"]

CHUNK = 50_000


@dataclass(frozen=True)
class Reference:
    """A long direct run of one point: failures in shots, per experiment."""

    shots: int
    failures: int

    @property
    def rate(self) -> float:
        return self.failures / self.shots

    @property
    def interval(self) -> tuple[float, float]:
        return wilson_interval(self.failures, self.shots)


@dataclass(frozen=True)
class Trial:
    """One method's estimate (per experiment) under one seed."""

    seed: int
    rate: float | None
    low: float | None
    high: float | None

    def covers(self, truth: float) -> bool:
        return self.low is not None and self.high is not None and self.low <= truth <= self.high


def direct_reference(point: Point, failures: int, shot_limit: int, seed: int) -> Reference:
    """Sample the point's circuit until ``failures`` failures or ``shot_limit`` shots (in-process)."""
    compiled = compile_point(point.params())
    sampler = compiled.circuit.compile_detector_sampler(seed=seed)
    shots = found = 0
    while found < failures and shots < shot_limit:
        dets, obs = sampler.sample(CHUNK, separate_observables=True, bit_packed=True)
        found += count_failures(compiled.decoder.decode_batch(dets, bit_packed=True), obs)
        shots += CHUNK
    return Reference(shots, found)


def stratified_trials(point: Point, seeds: list[int], work: float,
                      executor_factory: Callable[[], Executor]) -> list[Trial]:
    """The stratified estimate of ``point`` under each seed, with ``work`` counted work each."""
    out = []
    for seed in seeds:
        executor = executor_factory()
        try:
            result = sample_point(point, seed, executor, work, lambda _: None)
        finally:
            executor.close()
        est = result.estimate
        out.append(Trial(seed, None, 0.0, result.upper_bound) if est is None
                   else Trial(seed, est.rate, est.low, est.high))
    return out


def summarise(trials: list[Trial], truth: float) -> dict[str, float]:
    """Coverage, trials, and the median interval width as a factor (high / low)."""
    widths = sorted(t.high / t.low for t in trials if t.low and t.high)
    covered = sum(t.covers(truth) for t in trials)
    return {"trials": len(trials), "covered": covered, "coverage": covered / len(trials) if trials else 0.0,
            "median_width_factor": widths[len(widths) // 2] if widths else float("nan")}
