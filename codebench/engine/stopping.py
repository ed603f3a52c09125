"""Per-point stopping rule and the deterministic batch-size schedule."""

from __future__ import annotations

from dataclasses import dataclass

from codebench.stats import wilson_interval

#: First batch size; batches double up to FAST_GROWTH_LIMIT, then grow by a quarter.
FIRST_BATCH = 1024
#: Above this size batches grow by 25% only, so the last batch of a point (run
#: past the moment its stopping rule is met) wastes little work.
FAST_GROWTH_LIMIT = 8192
#: Upper bound on the bytes of bit-packed detection events one batch may hold.
DEFAULT_BATCH_BYTES = 32 * 1024 * 1024
#: Upper bound on shots per batch, whatever the circuit size.
MAX_BATCH_SHOTS = 1 << 18


@dataclass(frozen=True)
class Stopping:
    """Stop a point at whichever comes first.

    ``failure_target``: logical failures observed; ``shot_budget``: shots
    taken; ``relative_precision``: half-width of the 95% Wilson interval
    divided by the failure rate (only once at least one failure is seen).
    """

    failure_target: int | None = 200
    shot_budget: int = 1_000_000
    relative_precision: float | None = None

    def done(self, shots: int, failures: int) -> bool:
        if shots >= self.shot_budget:
            return True
        if self.failure_target is not None and failures >= self.failure_target:
            return True
        if self.relative_precision is not None and failures > 0:
            low, high = wilson_interval(failures, shots)
            rate = failures / shots
            if (high - low) / 2 <= self.relative_precision * rate:
                return True
        return False


def batch_cap(num_detectors: int, batch_bytes: int = DEFAULT_BATCH_BYTES) -> int:
    """Largest batch whose bit-packed detection events fit in ``batch_bytes`` (at least one shot).

    >>> batch_cap(3360), batch_cap(3360, 1_000_000)
    (79891, 2380)
    """
    per_shot = max(1, (num_detectors + 7) // 8)
    return max(1, min(MAX_BATCH_SHOTS, batch_bytes // per_shot))


def batch_sizes(shot_budget: int, cap: int) -> list[int]:
    """Sizes of batches 0, 1, 2, ...: growing from FIRST_BATCH up to ``cap``, truncated at the budget.

    A pure function of its arguments, so every run and worker count sees the
    same batches.

    >>> batch_sizes(5000, 2048)
    [1024, 2048, 1928]
    >>> batch_sizes(40000, 1 << 20)
    [1024, 2048, 4096, 8192, 10240, 12800, 1600]
    """
    sizes: list[int] = []
    total = 0
    size = min(FIRST_BATCH, cap)
    while total < shot_budget:
        take = min(size, shot_budget - total)
        sizes.append(take)
        total += take
        size = min(size * 2 if size < FAST_GROWTH_LIMIT else size + size // 4, cap)
    return sizes
