"""Measured coverage of the forecast's 95% intervals against long direct runs (codebench.forecast.coverage).

A 95% interval should contain the truth in about 95% of runs. The truth is a
long direct run of the same point (stim's circuit sampler and the point's
decoder: a reference library's sampler, independent of the stratified
machinery); each method runs under several seeds. With n trials at true
coverage 0.95 the number covered is Binomial(n, 0.95): 6 trials cover at
least 4 with probability 0.998, 20 trials at least 16 with probability 0.984
(binomial tail; exact arithmetic). The full campaign is
``scripts/check_intervals.py`` (README, "How far the intervals can be trusted").
"""

from __future__ import annotations

from pathlib import Path

import pytest

from codebench.config import parse_sweep
from codebench.engine.local import InProcessExecutor
from codebench.forecast import forecast
from codebench.forecast.coverage import (
    Trial,
    direct_reference,
    stratified_trials,
    summarise,
)
from codebench.records import Point

ROOT = Path(__file__).resolve().parents[1]
IMPROVED = ROOT / "configs" / "devices" / "larkspur_improved.toml"


def _point(noise: dict[str, object], distance: int) -> Point:
    study = {"code": "rotated_surface", "distances": [distance], "rounds": "d", "basis": ["Z"], "decoders": ["mwpm"],
             **noise}
    return parse_sweep({"name": "coverage", "seed": 1, "study": [study]}, source="test").points[0]


DEVICE = {"noise": "device", "device": str(IMPROVED), "scale": [1.0]}
SI1000 = {"noise": "si1000", "p": [0.002]}


def _stratified_coverage(noise: dict[str, object], distance: int, seeds: int, work: float, at_least: int) -> None:
    point = _point(noise, distance)
    ref = direct_reference(point, 5000, 20_000_000, seed=4242)
    summary = summarise(stratified_trials(point, list(range(1, seeds + 1)), work, InProcessExecutor), ref.rate)
    print(f"stratified coverage {summary}")
    assert summary["covered"] >= at_least, summary


@pytest.mark.parametrize("noise, distance", [(DEVICE, 3), (SI1000, 3)], ids=["device d=3", "si1000 d=3"])
def test_stratified_coverage_few_seeds(noise: dict[str, object], distance: int) -> None:
    """Six seeds, a small budget each: at least 4 of 6 intervals contain the direct reference."""
    _stratified_coverage(noise, distance, 6, 2e7, 4)


@pytest.mark.slow
@pytest.mark.parametrize("noise, distance", [(DEVICE, 5), (SI1000, 5)], ids=["device d=5", "si1000 d=5"])
def test_stratified_coverage_twenty_seeds(noise: dict[str, object], distance: int) -> None:
    """Twenty seeds: at least 16 of 20 intervals contain the direct reference."""
    _stratified_coverage(noise, distance, 20, 3e7, 16)


@pytest.mark.slow
def test_extrapolated_coverage() -> None:
    """The raised-noise power law (its envelope interval) over ten seeds at d = 3: at least 8 of 10 cover."""
    point = _point(DEVICE, 3)
    ref = direct_reference(point, 2000, 5_000_000, seed=4242)
    trials = []
    for seed in range(1, 11):
        row = forecast(IMPROVED, distances=(3, 5), method={3: "extrapolated"}, work=1.2e8, workers=2,
                       seed=seed).distances[0]
        total = [None if e is None else (1 - (1 - 2 * e) ** 3) / 2 for e in (row.per_round_rate, row.low, row.high)]
        trials.append(Trial(seed, *total))
    summary = summarise(trials, ref.rate)
    print(f"extrapolated coverage {summary}")
    assert summary["covered"] >= 8, summary
