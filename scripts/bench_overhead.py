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
one run, after a discarded warm-up of each. Printed per case::

    case  bare_wall  bare_cpu  engine1_wall  engine1_cpu  engine2_wall  engine2_cpu
          ratio_1w_wall ratio_1w_cpu (bare / engine with 1 worker)  ratio_2v1_wall (engine 1 / engine 2)

Goals (a throughput ratio, higher is better): bare / engine >= 0.9 with 1 worker, and engine with
2 workers >= 1.8 x engine with 1 worker at d = 7 and 11.

Usage::

    python scripts/bench_overhead.py [--shots 100000] [--small-shots 2000] [--cases small,d3,d7,d11]

(psutil comes with the test extra: ``pip install -e '.[test]'``.)
"""

from __future__ import annotations

import argparse
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


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shots", type=int, default=100_000)
    parser.add_argument("--small-shots", type=int, default=2_000)
    parser.add_argument("--cases", default="small,d3,d7,d11")
    args = parser.parse_args()
    print(f"{'case':6s} {'bare_wall':>9s} {'bare_cpu':>8s} {'eng1_wall':>9s} {'eng1_cpu':>8s} {'eng2_wall':>9s} "
          f"{'eng2_cpu':>8s} {'bare/eng1 wall':>14s} {'bare/eng1 cpu':>13s} {'eng2 vs eng1 wall':>17s}")
    for case in args.cases.split(","):
        shots = args.small_shots if case == "small" else args.shots
        points = parse_sweep({"name": "b", "seed": 1, "study": studies(case)}, source="bench").points
        bare(points[:1], 1000)  # warm-up, discarded
        engine(case, min(shots, 2048), 1)
        b_wall, b_cpu = measure(lambda: bare(points, shots))
        e1_wall, e1_cpu = measure(lambda: engine(case, shots, 1))
        e2_wall, e2_cpu = measure(lambda: engine(case, shots, 2))
        print(f"{case:6s} {b_wall:8.2f}s {b_cpu:7.2f}s {e1_wall:8.2f}s {e1_cpu:7.2f}s {e2_wall:8.2f}s {e2_cpu:7.2f}s "
              f"{b_wall / e1_wall:14.2f} {b_cpu / e1_cpu:13.2f} {e1_wall / e2_wall:17.2f}", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
