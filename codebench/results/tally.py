"""Counts of a point from its stored batches, decided in batch order.

A point's count is the sum over batches 0, 1, 2, ... up to the first batch
after which the stopping rule holds. Batches that finished beyond that
point (run speculatively on another worker) or beyond a gap are kept in the
store but not counted, so the count depends only on the sweep seed and the
stopping rule, never on the number of workers or the completion order.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from codebench.records import BatchResult, Stopping


@dataclass(frozen=True)
class Tally:
    shots: int = 0
    failures: int = 0
    seconds: float = 0.0
    decode_seconds: float = 0.0
    batches: int = 0
    finished: bool = False


def usable_batches(sizes: Sequence[int], results: Iterable[BatchResult]) -> dict[int, BatchResult]:
    """Stored batches that belong to the current schedule, by index."""
    return {
        r.batch_index: r
        for r in results
        if r.batch_index < len(sizes) and r.shots == sizes[r.batch_index]
    }


def tally(sizes: Sequence[int], batches: dict[int, BatchResult], stopping: Stopping) -> Tally:
    """Sum the contiguous prefix of batches until the stopping rule holds."""
    shots = failures = count = 0
    seconds = decode = 0.0
    for index in range(len(sizes)):
        result = batches.get(index)
        if result is None:
            return Tally(shots, failures, seconds, decode, count, False)
        shots += result.shots
        failures += result.failures
        seconds += result.seconds
        decode += result.decode_seconds
        count += 1
        if stopping.done(shots, failures):
            break
    return Tally(shots, failures, seconds, decode, count, True)
