"""Throughput of the codebench engine against a minimal sampling loop.

The point: rotated surface code, d = 5, 5 rounds, Z basis, circuit-level
depolarizing noise p = 1e-3, matching decoder. Three measurements, each on
the same number of shots and timed from start to finish (circuit build,
detector error model, decoder compile included):

* ``raw loop``: the point's circuit from ``noisy_circuit(Point(...))``, one
  compiled detector sampler, bit-packed batches with separate observables,
  one matching graph built from the decomposed detector error model,
  ``decode_batch`` on bit-packed shots and predictions, mismatching rows
  counted with numpy;
* ``engine 1 worker``: ``run_sweep(..., workers=1)`` on a fresh folder, with
  the shot budget fixed and a failure target that is never reached;
* ``engine 2 workers``: the same with ``workers=2`` (a local process pool).

The three are interleaved (each repetition runs all three, the order rotated
from one repetition to the next) so slow phases of a shared machine hit them
alike, after one discarded warm-up run of each on a tenth of the shots; the
ratios use the medians. Wall time and CPU time (this process and its worker
processes) are both measured: on a busy machine the wall ratio says little,
the CPU ratio says what the engine costs per shot. The last lines are::

    cpu_ratio <raw loop CPU / engine 1 worker CPU>      (1.0: no overhead)
    cpu_ratio_2_vs_1 <engine 1 worker CPU / engine 2 workers CPU>  (1.0: no parallel overhead)
    ratio_2_vs_1 <engine 2 workers / engine 1 worker, throughput by wall time>
    ratio <engine 1 worker / raw loop, throughput by wall time>

Goals: ``ratio >= 0.95`` and ``ratio_2_vs_1 >= 1.8`` (on a machine with at
least two free cores). ``--profile`` adds a profile of one engine run.

Usage::

    python scripts/bench_throughput.py [--shots N] [--repeats K] [--profile]
"""

from __future__ import annotations

import argparse
import cProfile
import io
import os
import pstats
import statistics
import sys
import tempfile
import time
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pymatching
from cpu_meter import CpuMeter

from codebench.api import run_sweep
from codebench.build import noisy_circuit
from codebench.records import Point

DISTANCE = 5
ROUNDS = 5
P = 1e-3
SEED = 2024
POINT = Point(code="rotated_surface", distance=DISTANCE, rounds=ROUNDS, basis="Z",
              noise="circuit_depolarizing", p=P, decoder="mwpm")


def sweep_config(shots: int) -> dict[str, Any]:
    return {
        "name": "bench",
        "seed": SEED,
        "stopping": {"failure_target": 2**62, "shot_budget": shots},
        "study": [{"code": "rotated_surface", "distances": [DISTANCE], "rounds": ROUNDS,
                   "noise": "circuit_depolarizing", "p": [P], "decoders": ["mwpm"]}],
    }


def raw_loop(shots: int, batch: int) -> tuple[float, int]:
    """Seconds and failures of the minimal loop on ``shots`` shots."""
    start = time.perf_counter()
    circuit = noisy_circuit(POINT)
    dem = circuit.detector_error_model(decompose_errors=True)
    matcher = pymatching.Matching.from_detector_error_model(dem)
    sampler = circuit.compile_detector_sampler(seed=SEED)
    failures = 0
    left = shots
    while left > 0:
        take = min(batch, left)
        detectors, observables = sampler.sample(take, separate_observables=True, bit_packed=True)
        predicted = matcher.decode_batch(detectors, bit_packed_shots=True, bit_packed_predictions=True)
        failures += int(np.count_nonzero(np.any(predicted != observables, axis=1)))
        left -= take
    return time.perf_counter() - start, failures


def engine(shots: int, workers: int) -> tuple[float, int]:
    """Seconds and failures of ``run_sweep`` on a fresh folder."""
    with tempfile.TemporaryDirectory(prefix="bench-") as folder:
        start = time.perf_counter()
        frame = run_sweep(sweep_config(shots), out=Path(folder) / "out", workers=workers, progress=False)
        elapsed = time.perf_counter() - start
    taken = int(frame["shots"].iloc[0])
    if taken != shots:
        raise SystemExit(f"the engine took {taken} shots instead of {shots}")
    return elapsed, int(frame["failures"].iloc[0])


def profile_engine(shots: int, lines: int = 18) -> str:
    """A profile of one single-worker engine run (the whole run happens in this process)."""
    profiler = cProfile.Profile()
    profiler.enable()
    engine(shots, 1)
    profiler.disable()
    text = io.StringIO()
    stats = pstats.Stats(profiler, stream=text)
    stats.sort_stats("tottime").print_stats(lines)
    return text.getvalue()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=(__doc__ or "").split("\n\n")[0])
    parser.add_argument("--shots", type=int, default=16_000_000,
                        help="shots per measurement (default 16,000,000: about 10-20 s for one worker)")
    parser.add_argument("--repeats", type=int, default=3, help="repetitions of each measurement (default 3)")
    parser.add_argument("--raw-batch", type=int, default=1 << 18,
                        help="batch size of the raw loop (default 262,144: the engine's largest batch here)")
    parser.add_argument("--profile", action="store_true", help="also profile one single-worker engine run")
    args = parser.parse_args(argv)
    if args.shots < 1 or args.repeats < 1 or args.raw_batch < 1:
        parser.error("--shots, --repeats and --raw-batch must be positive")

    kinds: list[tuple[str, Callable[[int], tuple[float, int]]]] = [
        ("raw loop", lambda shots: raw_loop(shots, args.raw_batch)),
        ("engine 1 worker", lambda shots: engine(shots, 1)),
        ("engine 2 workers", lambda shots: engine(shots, 2)),
    ]
    print(f"rotated_surface d={DISTANCE} rounds={ROUNDS} circuit_depolarizing p={P:g} mwpm; "
          f"{args.shots:,} shots per measurement; {os.cpu_count()} cores; python {sys.version.split()[0]}")
    print(f"{'measurement':<18} {'repeat':>6} {'seconds':>9} {'cpu s':>8} {'shots/s':>12} {'failures':>9} {'rate':>10}")
    for _, run in kinds:  # warm-up on a tenth of the shots, discarded (imports, caches, pool start)
        run(max(1, args.shots // 10))
    rates: dict[str, list[float]] = {name: [] for name, _ in kinds}
    cpus: dict[str, list[float]] = {name: [] for name, _ in kinds}
    for repeat in range(args.repeats):
        order = kinds[repeat % len(kinds):] + kinds[: repeat % len(kinds)]
        for name, run in order:
            with CpuMeter() as meter:
                seconds, failures = run(args.shots)
            rates[name].append(args.shots / seconds)
            cpus[name].append(meter.cpu)
            print(f"{name:<18} {repeat + 1:>6} {seconds:>9.2f} {meter.cpu:>8.2f} {args.shots / seconds:>12,.0f} "
                  f"{failures:>9,} {failures / args.shots:>10.3e}", flush=True)

    median = {name: statistics.median(values) for name, values in rates.items()}
    cpu = {name: statistics.median(values) for name, values in cpus.items()}
    print()
    for name, value in median.items():
        print(f"median {name:<18} {value:>12,.0f} shots/s  {cpu[name]:>8.2f} CPU s")
    ratio_workers = median["engine 2 workers"] / median["engine 1 worker"]
    ratio_raw = median["engine 1 worker"] / median["raw loop"]
    cpu_ratio = cpu["raw loop"] / cpu["engine 1 worker"]
    cpu_ratio_workers = cpu["engine 1 worker"] / cpu["engine 2 workers"]
    print(f"goals: ratio >= 0.95 ({'met' if ratio_raw >= 0.95 else 'NOT met'}), "
          f"ratio_2_vs_1 >= 1.8 ({'met' if ratio_workers >= 1.8 else 'NOT met'})")
    if args.profile:
        print()
        print(profile_engine(args.shots))
    print(f"cpu_ratio {cpu_ratio:.3f}")
    print(f"cpu_ratio_2_vs_1 {cpu_ratio_workers:.3f}")
    print(f"ratio_2_vs_1 {ratio_workers:.3f}")
    print(f"ratio {ratio_raw:.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
