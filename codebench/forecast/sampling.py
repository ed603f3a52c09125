"""Sampling for a forecast: one executor shared by every sweep, sweeps through the engine.

Direct and raised-noise points go through :func:`codebench.api.run_sweep`
(the engine, its workers, the store and resume of ``codebench sweep``) with
``noise = "device"``, ``rounds = d`` and the sweep's ``scale`` as the what-if
factor s. All sweeps use the forecast's seed, so a point sampled again with a
larger budget reuses its stored batches, and a rerun into the same ``--out``
folder resumes. Stratified points submit exactly-w batches to the same executor
(:mod:`codebench.forecast.strata`).
"""

from __future__ import annotations

import math
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

from codebench.engine.executors import Executor
from codebench.forecast.plan import WorkBudget

__all__ = ["Sample", "Sampler"]


@dataclass
class Sample:
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
    def work(self) -> float:
        return float(self.shots) * self.detectors

    @property
    def rate(self) -> float:
        return self.failures / self.shots if self.shots else math.nan


@dataclass
class Sampler:
    """Runs small sweeps of one (code, basis, decoder) on the device and keeps their counts."""

    folder: Path
    device_file: Path
    code: str
    basis: str
    decoder: str
    seed: int
    executor: Executor
    budget: WorkBudget
    progress: bool
    samples: dict[tuple[int, float], Sample] = field(default_factory=dict)
    calls: int = 0
    log: list[dict[str, Any]] = field(default_factory=list)

    def say(self, text: str) -> None:
        if self.progress:
            print(f"forecast: {text}", file=sys.stderr, flush=True)

    def study(self, distance: int, scales: Sequence[float]) -> dict[str, Any]:
        return {"label": f"d{distance}", "code": self.code, "distances": [distance], "rounds": "d",
                "basis": [self.basis], "noise": "device", "device": str(self.device_file),
                "scale": [float(s) for s in scales], "decoders": [self.decoder]}

    def run(self, label: str, points: Mapping[int, Sequence[float]], failure_target: int,
            shot_budget: int) -> list[Sample]:
        """Sample each (distance, scale) to ``failure_target`` failures or ``shot_budget`` shots."""
        from codebench.api import run_sweep

        if self.budget.expired():
            return [self.samples[(d, float(s))] for d, scales in points.items() for s in scales
                    if (d, float(s)) in self.samples]
        self.calls += 1
        config = {"name": f"forecast-{self.basis}-{self.calls}-{label}", "seed": self.seed,
                  "stopping": {"failure_target": max(1, int(failure_target)), "shot_budget": max(1, int(shot_budget))},
                  "study": [self.study(d, scales) for d, scales in points.items()]}
        started = time.perf_counter()
        before = sum(s.work for s in self.samples.values())
        frame = run_sweep(config, out=self.folder, executor=self.executor, progress=self.progress,
                          stop_when=self.budget.expired)
        stopped = self.budget.expired()
        if stopped and self.progress:
            print(file=sys.stderr)
        wanted = wanted_keys(points)
        out = []
        for record in frame.to_dict("records"):
            row: dict[str, Any] = {str(k): v for k, v in record.items()}
            if int(row["shots"]) == 0 or (row["code"], row["basis"], row["decoder"]) != (
                    self.code, self.basis, self.decoder):
                continue
            sample = Sample(int(row["distance"]), float(row["p"]), int(row["rounds"]), int(row["shots"]),
                            int(row["failures"]), float(row["seconds"]), int(row["detectors"]),
                            float(row["decode_seconds"]))
            key = (sample.distance, sample.scale)
            if key not in wanted:
                continue
            old = self.samples.get(key)
            if old is None or sample.shots >= old.shots:
                self.samples[key] = sample
            out.append(self.samples[key])
        spent = sum(s.work for s in self.samples.values()) - before
        self.budget.charge(spent)
        self.log.append({"sweep": config["name"], "points": len(out), "failure_target": failure_target,
                         "shot_budget": shot_budget, "wall_seconds": time.perf_counter() - started,
                         "work": spent, **({"stopped": "hard time limit"} if stopped else {})})
        # Cut short by the hard time limit, the points keep every batch counted so far (the counted
        # prefix of their batches, as in any stopped sweep); the caller names them as cut short.
        return out

    def at(self, distance: int) -> list[Sample]:
        return sorted((s for (d, _), s in self.samples.items() if d == distance), key=lambda s: s.scale)


def wanted_keys(points: Mapping[int, Sequence[float]]) -> set[tuple[int, float]]:
    return {(d, float(s)) for d, scales in points.items() for s in scales}
