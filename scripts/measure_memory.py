"""Peak resident memory of a large sweep on a Dask cluster: coordinator and each worker.

The sweep: rotated surface code, d = 15, 15 rounds, SI1000 at p = 1e-3 and
5e-3, a fixed shot budget per point (default 500,000) so that batches grow
to their cap, run on a Dask LocalCluster of 2 worker processes. A batch
holds at most ``--batch-bytes`` of bit-packed detection events (the sweep's
``engine.batch_bytes``); a worker samples it in chunks of at most 8 MiB, so
its memory does not grow with the batch.

Peak resident set sizes are the kernel's high-water marks
(``getrusage(...).ru_maxrss``): the coordinator's (this process, which also
hosts the Dask scheduler and the workers' nannies) and each worker
process's, read from the workers before the cluster closes.

Usage::

    python scripts/measure_memory.py [--shots 500000] [--batch-bytes 33554432]
"""

from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path

from distributed import Client, LocalCluster

from codebench.api import run_sweep
from codebench.engine.dask_executor import DaskExecutor
from codebench.records import DEFAULT_BATCH_BYTES


def peak_rss_mib() -> float:
    """This process's peak resident set size in MiB (Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--shots", type=int, default=500_000, help="shots per point (default: 500,000)")
    parser.add_argument("--batch-bytes", type=int, default=DEFAULT_BATCH_BYTES,
                        help=f"engine.batch_bytes of the sweep (default: {DEFAULT_BATCH_BYTES})")
    args = parser.parse_args()
    config = {
        "name": "memory_d15", "seed": 15,
        "stopping": {"shot_budget": args.shots, "failure_target": 10 * args.shots},
        "engine": {"batch_bytes": args.batch_bytes},
        "study": [{"code": "rotated_surface", "distances": [15], "rounds": 15, "noise": "si1000",
                   "p": [0.001, 0.005], "decoders": ["mwpm"]}],
    }
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,  # type: ignore[no-untyped-call]
                      dashboard_address=":0") as cluster:
        with Client(cluster) as client:  # type: ignore[no-untyped-call]
            client.wait_for_workers(2)
            start = time.perf_counter()
            with tempfile.TemporaryDirectory() as out:
                frame = run_sweep(config, out=Path(out), executor=DaskExecutor(client), progress=True)
            seconds = time.perf_counter() - start
            workers = client.run(peak_rss_mib)
    print(f"\nd=15, 15 rounds, SI1000, {len(frame)} points x {args.shots:,} shots, batch_bytes {args.batch_bytes:,}: "
          f"{seconds:.0f} s, {int(frame['detectors'].iloc[0]):,} detectors, "
          f"{int(frame['batches'].sum())} batches")
    print(f"peak resident memory: coordinator {peak_rss_mib():.0f} MiB")
    for number, (address, mib) in enumerate(sorted(workers.items()), start=1):
        print(f"peak resident memory: worker {number} ({address}) {mib:.0f} MiB")


if __name__ == "__main__":
    main()
