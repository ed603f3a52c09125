"""Stratified rare-event estimates against the direct sampling the same interval would need.

For each device (the goal example device and the improved one, two-qubit
error 1e-3), rotated surface code, Z basis, rounds = d, mwpm, and each d in
``--distances``: the stratified estimate (:func:`codebench.forecast.strata.sample_point`,
counted work ``--work`` per point, 2 local workers) is timed in wall and CPU
time (coordinator plus workers, read with psutil; pool start-up excluded). Direct sampling's speed is measured
on the same point in the same run (stim's circuit sampler and the decoder, one
core, at least ``--direct-seconds`` of CPU), and the direct time for the same
interval is computed: a Wilson interval's width factor high/low is about
exp(2 x 1.96 / sqrt(k)) with k failures, so k = (3.92 / ln(high/low))^2 and
shots = k / P_L, run on 2 workers. A discarded warm-up (a d = 3 point) comes
first. Prints one line per (device, d)::

    device d per_round [low, high] width strat_wall strat_cpu direct_wall direct_cpu ratio_wall ratio_cpu

ratio = direct / stratified (above 1: stratified is faster). Goal: a per-round
rate of order 1e-9 at d >= 11 with an interval within a factor of 2 in under
10 minutes on 2 cores.

Usage::

    python scripts/bench_rare_events.py [--distances 7,9,11,13,15] [--work 1e10] [--devices goal,improved]

(psutil comes with the test extra: ``pip install -e '.[test]'``.)
"""

from __future__ import annotations

import argparse
import math
import time
from pathlib import Path

import psutil

from codebench.config import parse_sweep
from codebench.engine.local import LocalExecutor
from codebench.engine.worker import compile_point, count_failures
from codebench.forecast.strata import sample_point
from codebench.records import Point
from codebench.stats import per_round

ROOT = Path(__file__).resolve().parents[1]
DEVICES = {"goal": ROOT / "configs/devices/larkspur_goal.toml",
           "improved": ROOT / "configs/devices/larkspur_improved.toml"}
WORKERS = 2


def point(device: Path, distance: int) -> Point:
    study = {"code": "rotated_surface", "distances": [distance], "rounds": "d", "basis": ["Z"], "noise": "device",
             "device": str(device), "scale": [1.0], "decoders": ["mwpm"]}
    return parse_sweep({"name": "bench", "seed": 1, "study": [study]}, source="bench").points[0]


def tree_cpu() -> float:
    """CPU seconds of this process and every live descendant (the pool's workers and its fork server)."""
    me = psutil.Process()
    total = 0.0
    for proc in [me, *me.children(recursive=True)]:
        try:
            times = proc.cpu_times()
        except psutil.NoSuchProcess:
            continue
        total += times.user + times.system
    return total


def stratified(pt: Point, work: float) -> tuple[object, float, float]:
    """The stratified estimate, its wall time and CPU time (coordinator plus workers, pool start-up excluded)."""
    executor = LocalExecutor(WORKERS)
    try:
        wall0, cpu0 = time.perf_counter(), tree_cpu()
        result = sample_point(pt, 1, executor, work, lambda _: None)
        wall, cpu = time.perf_counter() - wall0, tree_cpu() - cpu0
    finally:
        executor.close()
    return result, wall, cpu


def direct_speed(pt: Point, min_cpu: float) -> tuple[float, float]:
    """(shots per wall second, shots per CPU second) of direct sampling and decoding on one core."""
    compiled = compile_point(pt.params())
    sampler = compiled.circuit.compile_detector_sampler(seed=2)
    shots = 0
    wall0, cpu0 = time.perf_counter(), time.process_time()
    while time.process_time() - cpu0 < min_cpu:
        dets, obs = sampler.sample(4096, separate_observables=True, bit_packed=True)
        count_failures(compiled.decoder.decode_batch(dets, bit_packed=True), obs)
        shots += 4096
    return shots / (time.perf_counter() - wall0), shots / (time.process_time() - cpu0)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--distances", default="7,9,11,13,15")
    parser.add_argument("--work", type=float, default=1e10, help="counted work (shots x detectors) per point")
    parser.add_argument("--devices", default="goal,improved")
    parser.add_argument("--direct-seconds", type=float, default=3.0)
    args = parser.parse_args()
    distances = [int(d) for d in args.distances.split(",")]
    stratified(point(DEVICES["goal"], 3), 2e7)  # warm-up, discarded
    print(f"{'device':9s} {'d':>3s} {'per_round':>10s} {'95% interval':>23s} {'width':>6s} {'strat_wall':>10s} "
          f"{'strat_cpu':>9s} {'direct_wall':>11s} {'direct_cpu':>10s} {'ratio_wall':>10s} {'ratio_cpu':>9s}  note")
    for name in args.devices.split(","):
        for d in distances:
            pt = point(DEVICES[name], d)
            result, wall, cpu = stratified(pt, args.work)
            est = result.estimate  # type: ignore[attr-defined]
            if est is None:
                print(f"{name:9s} {d:3d}  no failures in any stratum", flush=True)
                continue
            low, high = per_round(est.low, d), per_round(est.high, d)
            width = est.high / est.low
            failures_needed = (2 * 1.959963984540054 / math.log(width)) ** 2
            shots_needed = failures_needed / est.rate
            per_wall, per_cpu = direct_speed(pt, args.direct_seconds)
            direct_wall = shots_needed / (per_wall * WORKERS)
            direct_cpu = shots_needed / per_cpu
            note = ("extrapolated in w" if est.extrapolated else "sampled") + \
                f", w {est.w_sampled[0]}..{est.w_sampled[1]}, mean faults {result.mean_faults:.3g}"  # type: ignore[attr-defined]
            print(f"{name:9s} {d:3d} {per_round(est.rate, d):10.3e} [{low:10.3e}, {high:10.3e}] {width:6.2f} "
                  f"{wall:9.1f}s {cpu:8.1f}s {direct_wall:10.3g}s {direct_cpu:9.3g}s {direct_wall / wall:10.3g} "
                  f"{direct_cpu / cpu:9.3g}  {note}", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
