"""Engine overhead: ``codebench.run_sweep`` against a bare stim + pymatching loop on the same circuits.

Cases:

(a) 60 small points: repetition code, d = 3, 5, 7, rounds = d, circuit_depolarizing at 20 rates
    from 1e-3 to 1e-1, ``--small-shots`` shots each;
(b) rotated surface code, SI1000 p = 1e-3, d = 3, 7, 11, rounds = d, ``--shots`` shots each.

The bare loop builds the same noisy circuit (``codebench.build.noisy_circuit``), its detector error model and a
``pymatching.Matching``, then samples bit-packed chunks and decodes them, all in this process. The
engine runs the same points through ``run_sweep`` (a fresh results folder each time, no failure
target, so both draw the same number of shots) with 1 and with 2 workers. Wall time and CPU time
(this process plus its worker processes, read with psutil every 0.1 s) are measured side by side in
one run, after a discarded warm-up of each, as the medians of ``--repeats`` interleaved repeats.
Printed first: what starting (and closing) a 2-process pool costs with no work, paid once per sweep.
Then per case: wall and CPU seconds of the bare loop and of the engine with 1 and 2 workers, and the
ratios bare / engine-1 (wall, CPU) and engine-1 / engine-2 (wall: the speed-up; CPU: near 1 when the
second worker duplicates no work).

Goals (a throughput ratio, higher is better): bare / engine >= 0.9 with 1 worker, and engine with
2 workers >= 1.8 x engine with 1 worker at d = 7 and 11.

Usage::

    python scripts/bench_overhead.py [--shots 1000000] [--small-shots 2000] [--cases small,d3,d7,d11]
                                     [--repeats 3]

(psutil comes with the test extra: ``pip install -e '.[test]'``.)
"""

from __future__ import annotations

import argparse
import os
import statistics
import tempfile
from typing import Any

import numpy as np
import pymatching
from cpu_meter import measure

from codebench.api import run_sweep
from codebench.build import noisy_circuit
from codebench.config import parse_sweep
from codebench.records import Point


def studies(case: str) -> list[dict[str, Any]]:
    if case == "small":
        rates = [float(p) for p in np.geomspace(1e-3, 1e-1, 20)]
        return [{"code": "repetition", "distances": [3, 5, 7], "rounds": "d", "basis": ["Z"],
                 "noise": "circuit_depolarizing", "p": rates, "decoders": ["mwpm"]}]
    d = int(case[1:])
    return [{"code": "rotated_surface", "distances": [d], "rounds": "d", "basis": ["Z"], "noise": "si1000",
             "p": [1e-3], "decoders": ["mwpm"]}]


def bare(points: list[Point], shots: int) -> int:
    """The minimal loop: circuit, detector error model, matching, bit-packed sampling and decoding."""
    failures = 0
    for point in points:
        circuit = noisy_circuit(point)
        matching = pymatching.Matching.from_detector_error_model(circuit.detector_error_model(decompose_errors=True))
        sampler = circuit.compile_detector_sampler(seed=1)
        left = shots
        while left > 0:
            chunk = min(left, 16384)
            dets, obs = sampler.sample(chunk, separate_observables=True, bit_packed=True)
            predicted = matching.decode_batch(dets, bit_packed_shots=True, bit_packed_predictions=True)
            failures += int(np.count_nonzero(np.any(predicted != obs, axis=1)))
            left -= chunk
    return failures


def engine(case: str, shots: int, workers: int) -> None:
    config = {"name": f"overhead-{case}", "seed": 1, "stopping": {"failure_target": 10**9, "shot_budget": shots},
              "study": studies(case)}
    with tempfile.TemporaryDirectory() as folder:
        run_sweep(config, out=folder, workers=workers, progress=False)


def pool_start_up() -> tuple[float, float]:
    """Wall and CPU seconds to start a 2-process local pool and close it again (no work)."""
    from codebench.engine.local import LocalExecutor

    def start_and_close() -> None:
        LocalExecutor(2).close()

    return measure(start_and_close)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shots", type=int, default=1_000_000, help="shots per surface-code point (default 1e6)")
    parser.add_argument("--small-shots", type=int, default=2_000, help="shots per small point (default 2,000)")
    parser.add_argument("--cases", default="small,d3,d7,d11")
    parser.add_argument("--repeats", type=int, default=3, help="measurements of each kind, interleaved (median)")
    args = parser.parse_args()
    starts = [pool_start_up() for _ in range(3)]
    start_wall, start_cpu = statistics.median(w for w, _ in starts), statistics.median(c for _, c in starts)
    print(f"2-worker pool start-up and close, no work: {start_wall:.2f} s wall, {start_cpu:.2f} s CPU "
          f"(paid once per sweep); {os.cpu_count()} cores; medians of {args.repeats} interleaved repeats")
    print(f"{'case':6s} {'bare_wall':>9s} {'bare_cpu':>8s} {'eng1_wall':>9s} {'eng1_cpu':>8s} {'eng2_wall':>9s} "
          f"{'eng2_cpu':>8s} | {'bare/eng1 wall':>14s} {'bare/eng1 cpu':>13s} | {'eng2 vs eng1 wall':>17s} "
          f"{'eng1/eng2 cpu':>13s}")
    for case in args.cases.split(","):
        shots = args.small_shots if case == "small" else args.shots
        points = parse_sweep({"name": "b", "seed": 1, "study": studies(case)}, source="bench").points
        bare(points[:1], 1000)  # warm-up, discarded
        engine(case, min(shots, 2048), 1)
        engine(case, min(shots, 2048), 2)
        runs: dict[str, list[tuple[float, float]]] = {"bare": [], "eng1": [], "eng2": []}
        for _ in range(args.repeats):  # interleaved, so a change in the machine's load hits all three alike
            runs["bare"].append(measure(lambda: bare(points, shots)))
            runs["eng1"].append(measure(lambda: engine(case, shots, 1)))
            runs["eng2"].append(measure(lambda: engine(case, shots, 2)))
        wall = {k: statistics.median(w for w, _ in v) for k, v in runs.items()}
        cpu = {k: statistics.median(c for _, c in v) for k, v in runs.items()}
        print(f"{case:6s} {wall['bare']:8.2f}s {cpu['bare']:7.2f}s {wall['eng1']:8.2f}s {cpu['eng1']:7.2f}s "
              f"{wall['eng2']:8.2f}s {cpu['eng2']:7.2f}s | {wall['bare'] / wall['eng1']:14.2f} "
              f"{cpu['bare'] / cpu['eng1']:13.2f} | {wall['eng1'] / wall['eng2']:17.2f} "
              f"{cpu['eng1'] / cpu['eng2']:13.2f}", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
