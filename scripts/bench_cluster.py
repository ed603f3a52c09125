"""Dask local cluster (2 workers) against the local 2-process executor, on the same sweep.

Both run the same sweep (rotated surface code, SI1000, d = 7 and 9, a fixed
number of shots per point so that both do identical work) into fresh output
folders, alternating A B A B so that a slow phase of a shared machine hits
both alike. Each executor is started before its clock starts: the clock
covers the sweep itself (compiling in the workers, sampling, decoding, the
store), not process or cluster start-up, which is printed on its own line.
The counts of the two must be identical, and are checked.

Prints per run the wall time, the CPU time (coordinator and every worker
process) and shots/s, after a discarded warm-up run; then the ratio of Dask
to local throughput (goal: at least 0.9) and the CPU-time ratio.

Usage::

    python scripts/bench_cluster.py [--shots 1000000] [--repeats 2]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path
from typing import Any, Callable

from cpu_meter import CpuMeter

from codebench.api import run_sweep
from codebench.engine.dask_executor import start_dask_executor
from codebench.engine.executor import Executor
from codebench.engine.local import LocalExecutor
from codebench.records import ClusterSpec

WORKERS = 2


def sweep(shots: int) -> dict[str, Any]:
    return {
        "name": "bench_cluster", "seed": 5,
        "stopping": {"shot_budget": shots, "failure_target": 10 * shots},
        "study": [{"code": "rotated_surface", "distances": [7, 9], "rounds": "d", "noise": "si1000",
                   "p": [0.002], "decoders": ["mwpm"]}],
    }


def timed_run(make: Callable[[], Executor],
              config: dict[str, Any]) -> tuple[float, float, float, list[tuple[int, int]]]:
    """(start-up seconds, sweep seconds, sweep CPU seconds, per-point (shots, failures)) of one fresh run.

    CPU seconds count this process and all its descendants (pool workers; Dask nannies and workers)
    while the sweep runs, start-up excluded.
    """
    start = time.perf_counter()
    executor = make()
    ready = time.perf_counter()
    with executor, tempfile.TemporaryDirectory() as out:
        with CpuMeter() as meter:
            frame = run_sweep(config, out=Path(out), executor=executor, progress=False)
            done = time.perf_counter()
    counts = [(int(s), int(f)) for s, f in zip(frame["shots"], frame["failures"])]
    return ready - start, done - ready, meter.cpu, counts


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--shots", type=int, default=1_000_000, help="shots per point (default: 1,000,000)")
    parser.add_argument("--repeats", type=int, default=2, help="runs of each executor (default: 2)")
    args = parser.parse_args()
    if args.shots < 10_000 or args.repeats < 1:
        parser.error("--shots must be at least 10000 and --repeats at least 1")
    config = sweep(args.shots)
    makers: dict[str, Callable[[], Executor]] = {
        "local (2 processes)": lambda: LocalExecutor(WORKERS),
        "dask (LocalCluster, 2 workers)": lambda: start_dask_executor(ClusterSpec(local_workers=WORKERS)),
    }
    timed_run(makers[next(iter(makers))], sweep(10_000))  # warm-up, discarded (imports, caches)
    seconds: dict[str, list[float]] = {name: [] for name in makers}
    cpu: dict[str, list[float]] = {name: [] for name in makers}
    startup: dict[str, list[float]] = {name: [] for name in makers}
    reference: list[tuple[int, int]] | None = None
    total_shots = 2 * args.shots
    for repeat in range(args.repeats):
        for name, make in makers.items():
            up, run, used, counts = timed_run(make, config)
            if reference is None:
                reference = counts
            elif counts != reference:
                raise SystemExit(f"counts differ: {name} gave {counts}, expected {reference}")
            seconds[name].append(run)
            cpu[name].append(used)
            startup[name].append(up)
            print(f"run {repeat + 1} {name:32s} {run:6.2f} s  {used:6.2f} CPU s  {total_shots / run:10,.0f} shots/s  "
                  f"(start-up {up:.2f} s)", flush=True)
    best = {name: min(values) for name, values in seconds.items()}
    local_name, dask_name = makers
    print(f"\ncounts identical in all {2 * args.repeats} runs: {reference}")
    print(f"best of {args.repeats}: local {total_shots / best[local_name]:,.0f} shots/s, "
          f"dask {total_shots / best[dask_name]:,.0f} shots/s")
    least = {name: min(values) for name, values in cpu.items()}
    print(f"throughput ratio dask / local: {best[local_name] / best[dask_name]:.3f} (goal >= 0.9)")
    print(f"CPU-time ratio local / dask: {least[local_name] / least[dask_name]:.3f} (1.0: Dask costs no extra CPU)")
    print(f"start-up: local {min(startup[local_name]):.2f} s, dask {min(startup[dask_name]):.2f} s")


if __name__ == "__main__":
    main()
