"""How the cost of a codebench point grows with code distance.

The points: rotated surface code, Z basis, SI1000 noise at ``p`` (default
1e-3), rounds = d, for each odd d in ``--distances`` (default 3..15), decoded
by ``--decoder`` (default ``mwpm``). Every point goes through codebench's own
worker path, in this process on one core, so the numbers are what one sweep
worker spends: ``run_batch`` on ``BatchTask``s built from ``Point(...).params()``
with seeds from ``batch_seed``.

Per distance the point is compiled once (circuit, detector error model,
decoder; the time is reported as ``compile s`` and kept out of every rate),
then a calibration batch of 1,024 shots warms it up and gives a first cost
estimate (not counted either), then batches sized from the running cost
estimate fill ``--seconds`` of wall time. The time is spread over
``--passes`` interleaved passes over the distances (the order reversed from
one pass to the next) so a slow phase of a shared machine hits small and
large codes alike. Timed batches are whole multiples of the worker's
sampling chunk (at most the sweep's batch cap), as a sweep's large batches
are, unless a single chunk would overrun the time target (a slow decoder).
Columns:

* ``shots/s``: shots over the batches' seconds, sampling plus decoding;
* ``sample µs/shot``: the rest of a batch besides decoding (sampling and
  comparing predictions), per shot;
* ``decode µs/shot``: the decoder's time per shot;
* ``decode µs/round``: the same divided by rounds, the definition of the
  ``decode_us_per_round`` column of the exported results.

After the table: the least-squares slope of log(decode seconds per shot)
against log(detectors), over all distances and over d >= 7 only (the
smallest codes sit off the trend of the large ones), and the ratio of
the per-shot decode cost at the largest and the smallest distance next to
the ratio of their detector counts. Progress goes to stderr, so stdout is
the header line, the markdown table and the fit lines, ready to paste.

Usage::

    python scripts/bench_scaling.py [--distances 3,5,7] [--seconds 4] [--passes 2]
                                    [--p 1e-3] [--decoder mwpm] [--seed 2024]

With the defaults the whole run takes about half a minute (4 s for each of
7 distances plus compiling).
"""

from __future__ import annotations

import argparse
import math
import os
import platform
import sys
import time
from dataclasses import dataclass
from importlib import metadata

import numpy as np

from codebench.build import qubit_count
from codebench.codes import Basis, get_code_family
from codebench.decoders import DECODERS, get_decoder
from codebench.engine import worker
from codebench.engine.worker import batch_seed, run_batch
from codebench.noise import get_noise_model
from codebench.records import FIRST_BATCH, BatchResult, BatchTask, Point, batch_cap
from codebench.results.export import decode_us_per_round

CODE = "rotated_surface"
NOISE = "si1000"
BASIS: Basis = "Z"
DEFAULT_DISTANCES = (3, 5, 7, 9, 11, 13, 15)
#: Distance from which the second fit starts (the smallest codes sit off the large-code trend).
LARGE_FROM = 7
#: Each timed batch aims at this share of a pass's time, so a pass is a few
#: batches (as in a sweep) and the last one cannot overshoot by much.
BATCH_SHARE = 0.25


@dataclass
class Measured:
    """One distance: its point, its compiled size and the batches timed so far."""

    point: Point
    key: str
    detectors: int
    compile_seconds: float
    cap: int
    chunk: int
    shots: int = 0
    seconds: float = 0.0
    decode_seconds: float = 0.0
    batches: int = 0
    #: Estimated seconds per shot, from the calibration batch, then from everything timed.
    per_shot: float = 0.0

    def add(self, result: BatchResult) -> None:
        self.shots += result.shots
        self.seconds += result.seconds
        self.decode_seconds += result.decode_seconds
        self.batches += 1
        self.per_shot = self.seconds / self.shots


def parse_distances(text: str) -> list[int]:
    """``"3,5,7"`` -> ``[3, 5, 7]``: odd integers >= 3, each once, sorted."""
    try:
        values = [int(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected comma-separated integers such as 3,5,7; got {text!r}") from None
    family = get_code_family(CODE)
    for value in values:
        problem = family.distance_problem(value)
        if problem is not None:
            raise argparse.ArgumentTypeError(f"distances must be {problem} for {CODE}; got {value}")
    if not values:
        raise argparse.ArgumentTypeError("give at least one distance")
    return sorted(set(values))


def positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number; got {text!r}") from None
    if not (value > 0 and math.isfinite(value)):
        raise argparse.ArgumentTypeError(f"must be a positive number; got {text!r}")
    return value


def positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected an integer; got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be a positive integer; got {text!r}")
    return value


def make_point(distance: int, p: float, decoder: str) -> Point:
    # Options at their defaults, spelled out as a sweep spells them, so the point is the sweep's point.
    options = get_decoder(decoder).resolve_options({})
    return Point(code=CODE, distance=distance, rounds=distance, basis=BASIS, noise=NOISE, p=p,
                 decoder=decoder, decoder_options=tuple(sorted(options.items())))


def task(entry: Measured, index: int, shots: int, seed: int) -> BatchTask:
    return BatchTask(point_key=entry.key, params=entry.point.params(), batch_index=index, shots=shots,
                     seed=batch_seed(seed, entry.key, index, shots))


def prepare(distance: int, p: float, decoder: str, seed: int) -> Measured:
    """Compile one point into the worker's cache and run its calibration batch."""
    point = make_point(distance, p, decoder)
    key = point.key(seed)
    start = time.perf_counter()
    compiled = worker.compiled(key, point.params())  # what run_batch will find in the cache
    compile_seconds = time.perf_counter() - start
    chunk = worker.chunk_shots(compiled.num_detectors, compiled.circuit.num_measurements)
    entry = Measured(point=point, key=key, detectors=compiled.num_detectors, compile_seconds=compile_seconds,
                     cap=batch_cap(compiled.num_detectors), chunk=chunk)
    calibration = run_batch(task(entry, 0, FIRST_BATCH, seed))
    entry.per_shot = calibration.seconds / calibration.shots
    return entry


def run_pass(entry: Measured, budget: float, seed: int) -> None:
    """Timed batches of one point until ``budget`` seconds of wall time are used."""
    start = time.perf_counter()
    while (left := budget - (time.perf_counter() - start)) > 0:
        aim = min(left, budget * BATCH_SHARE)
        fits = int(aim / entry.per_shot)
        if budget >= entry.chunk * entry.per_shot:
            # Whole sampler chunks (at least one, also for the last batch of a pass), as in
            # a sweep's large batches: stim's cost per shot depends on the chunk size, so a
            # batch cut short of a chunk would time a different (for large circuits,
            # faster) sampling than a sweep does.
            shots = min(entry.cap, max(1, fits // entry.chunk) * entry.chunk)
        else:
            # A slow decoder: one chunk would overrun the pass, so keep to the time target.
            shots = max(FIRST_BATCH, fits)
        # Batch 0 was the calibration batch; timed batches follow it, each with its own seed.
        entry.add(run_batch(task(entry, entry.batches + 1, shots, seed)))


def slope(detectors: list[int], per_shot: list[float]) -> float:
    """Least-squares exponent k of per_shot ~ detectors^k (NaN for fewer than two points)."""
    if len(detectors) < 2:
        return float("nan")
    fitted = np.polyfit(np.log(detectors), np.log(per_shot), 1)
    return float(fitted[0])


def version(package: str) -> str:
    try:
        return metadata.version(package)
    except metadata.PackageNotFoundError:
        return "not installed"


def table(entries: list[Measured]) -> list[str]:
    lines = [
        "| d | rounds | qubits | detectors | compile s | shots | shots/s | sample µs/shot | decode µs/shot "
        "| decode µs/round |",
        "|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for e in entries:
        point = e.point
        decode_per_shot = e.decode_seconds / e.shots * 1e6
        sample_per_shot = (e.seconds - e.decode_seconds) / e.shots * 1e6
        lines.append(
            f"| {point.distance} | {point.rounds} | {qubit_count(point):,} | {e.detectors:,} "
            f"| {e.compile_seconds:.2f} | {e.shots:,} | {e.shots / e.seconds:,.0f} | {sample_per_shot:.2f} "
            f"| {decode_per_shot:.2f} | {decode_us_per_round(e.decode_seconds, e.shots, point.rounds):.3f} |"
        )
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description=(__doc__ or "").split("\n\n")[0],
        epilog="Rotated surface code, Z basis, SI1000 noise, rounds = d; one process, one core. "
               "Progress goes to stderr, the markdown table and the fitted exponents to stdout.",
    )
    parser.add_argument("--distances", type=parse_distances, default=list(DEFAULT_DISTANCES),
                        help="comma-separated odd distances >= 3 (default 3,5,7,9,11,13,15)")
    parser.add_argument("--seconds", type=positive_float, default=4.0,
                        help="timed wall seconds per distance, compile and calibration excluded (default 4)")
    parser.add_argument("--passes", type=positive_int, default=2,
                        help="interleaved passes over the distances the time is split into (default 2)")
    parser.add_argument("--p", type=positive_float, default=1e-3, help="SI1000 noise strength (default 1e-3)")
    parser.add_argument("--decoder", choices=sorted(DECODERS), default="mwpm", help="decoder (default mwpm)")
    parser.add_argument("--seed", type=int, default=2024, help="sweep seed the batch seeds derive from (default 2024)")
    args = parser.parse_args(argv)
    p_max = get_noise_model(NOISE).p_max
    if args.p > p_max:
        parser.error(f"--p must be in (0, {p_max:g}] for {NOISE}; got {args.p:g}")
    distances: list[int] = args.distances

    # Keep every compiled point in the worker's cache at once: interleaved passes
    # must never recompile a point (compile time is reported apart from the rates).
    worker.CACHE_SIZE = max(worker.CACHE_SIZE, len(distances))

    print(f"machine: {platform.platform()} ({platform.machine()}), {os.cpu_count()} CPUs, one used; "
          f"python {platform.python_version()}, stim {version('stim')}, pymatching {version('pymatching')}; "
          f"{CODE} {BASIS} {NOISE} p={args.p:g} {args.decoder}, rounds = d; "
          f"{args.seconds:g} s per distance in {args.passes} passes")
    entries: list[Measured] = []
    for d in distances:
        print(f"compiling d={d} ...", file=sys.stderr, flush=True)
        entries.append(prepare(d, args.p, args.decoder, args.seed))

    budget = args.seconds / args.passes
    for index in range(args.passes):
        order = entries if index % 2 == 0 else entries[::-1]
        for entry in order:
            print(f"pass {index + 1}/{args.passes} d={entry.point.distance} ...", file=sys.stderr, flush=True)
            run_pass(entry, budget, args.seed)

    print()
    print("\n".join(table(entries)))
    print()

    detectors = [e.detectors for e in entries]
    per_shot = [e.decode_seconds / e.shots for e in entries]
    large = [i for i, e in enumerate(entries) if e.point.distance >= LARGE_FROM]
    if len(entries) >= 2:
        print(f"decode cost exponent (per shot ~ detectors^k), all d: k = {slope(detectors, per_shot):.3f} "
              f"over {len(entries)} distances")
    else:
        print("decode cost exponent (per shot ~ detectors^k): n/a (needs two distances)")
    if len(large) >= 2:
        k_large = slope([detectors[i] for i in large], [per_shot[i] for i in large])
        print(f"decode cost exponent, d >= {LARGE_FROM}: k = {k_large:.3f} over {len(large)} distances")
    else:
        print(f"decode cost exponent, d >= {LARGE_FROM}: n/a (needs two distances >= {LARGE_FROM})")
    if len(entries) >= 2:
        first, last = entries[0], entries[-1]
        rate_ratio = (last.shots / last.seconds) / (first.shots / first.seconds)
        print(f"d={last.point.distance} vs d={first.point.distance}: decode per shot x{per_shot[-1] / per_shot[0]:.1f}, "
              f"detectors x{last.detectors / first.detectors:.1f}, "
              f"shots/s x{rate_ratio:.3g} (1/{1 / rate_ratio:,.0f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
