"""The records every stage passes on: points, stopping rules, batches, cluster settings.

This module is the bottom of the package: it imports nothing of codebench
but the layout's basis type and the interval used by the precision rule, so
config, engine, results store, export, forecast and the check suites can all
share these types without importing one another. A record holds data and
pure functions of it; turning a point into a circuit is
:func:`codebench.build.noisy_circuit`.
"""

from __future__ import annotations

import hashlib
import json
import zlib
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any, overload

from codebench.layout import Basis
from codebench.stats import wilson_interval

__all__ = ["BatchResult", "BatchSchedule", "BatchTask", "ClusterSpec", "Point", "Stopping", "batch_cap", "batch_sizes",
           "pack_failed", "unpack_failed"]


# ---------------------------------------------------------------------------
# points

#: The decoder whose point key names a physical point's random stream (see :meth:`Point.sample_key`).
SAMPLE_STREAM_DECODER = "mwpm"

@dataclass(frozen=True)
class Point:
    """One (code, distance, rounds, basis, noise, p, decoder) combination.

    ``params()`` is the canonical description: it is what is hashed into the
    key, stored, and shipped to workers. ``study`` labels the row in tables
    but is not part of the key, so two studies sharing a point share its shots.
    """

    code: str
    distance: int
    rounds: int
    basis: Basis
    noise: str
    p: float
    decoder: str
    noise_options: tuple[tuple[str, str], ...] = ()
    decoder_options: tuple[tuple[str, Any], ...] = ()
    study: str = field(default="", compare=False)

    def params(self) -> dict[str, Any]:
        return {
            "code": self.code,
            "distance": self.distance,
            "rounds": self.rounds,
            "basis": self.basis,
            "noise": self.noise,
            "p": self.p,
            "noise_options": dict(self.noise_options),
            "decoder": self.decoder,
            "decoder_options": dict(self.decoder_options),
        }

    def key(self, seed: int) -> str:
        """Stable 16-hex-digit key of the point under sweep ``seed``."""
        canonical = json.dumps({"seed": seed, **self.params()}, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(canonical.encode()).hexdigest()[:16]

    def sample_key(self, seed: int) -> str:
        """Key of the random stream the point's shots are drawn from: everything but the decoder.

        It is the key of the same point decoded by :data:`SAMPLE_STREAM_DECODER` without options, so
        decoders compared on one physical point decode identical shots (paired comparisons), and points
        of that decoder draw the stream they always drew.
        """
        return replace(self, decoder=SAMPLE_STREAM_DECODER, decoder_options=()).key(seed)

    @classmethod
    def from_params(cls, params: dict[str, Any], study: str = "") -> Point:
        return cls(
            code=params["code"],
            distance=int(params["distance"]),
            rounds=int(params["rounds"]),
            basis=params["basis"],
            noise=params["noise"],
            p=float(params["p"]),
            decoder=params["decoder"],
            noise_options=tuple(sorted(params.get("noise_options", {}).items())),
            decoder_options=tuple(sorted(params.get("decoder_options", {}).items())),
            study=study,
        )

    def label(self, rate: str = "p") -> str:
        """One line naming the point; ``rate`` is what its rate is called (``scale`` for a device)."""
        return (f"{self.code} d={self.distance} r={self.rounds} {self.basis} {self.noise} {rate}={self.p:g} "
                f"{self.decoder}")


# ---------------------------------------------------------------------------
# stopping rule and batch schedule

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


class BatchSchedule(Sequence[int]):
    """Sizes of batches 0, 1, 2, ...: growing from FIRST_BATCH up to ``cap``, truncated at the budget.

    A pure function of its arguments, so every run and worker count sees the
    same batches. Lazy: the growing head (a few dozen sizes at most) is kept,
    the rest are all ``cap`` but the last, so a budget of 2**63 shots costs no
    more than one of a thousand.

    >>> list(BatchSchedule(5000, 2048))
    [1024, 2048, 1928]
    >>> schedule = BatchSchedule(2**62, 80000)
    >>> len(schedule), schedule[40], schedule[len(schedule) - 1]
    (57646075230352, 80000, 72041)
    """

    def __init__(self, shot_budget: int, cap: int) -> None:
        if shot_budget < 0 or cap < 1:
            raise ValueError(f"a batch schedule needs shot_budget >= 0 and cap >= 1; got {shot_budget}, {cap}")
        self.shot_budget, self.cap = int(shot_budget), int(cap)
        head: list[int] = []
        total = 0
        size = min(FIRST_BATCH, cap)
        while total < shot_budget and size < cap:
            take = min(size, shot_budget - total)
            head.append(take)
            total += take
            size = min(size * 2 if size < FAST_GROWTH_LIMIT else size + size // 4, cap)
        self._head = head
        rest = max(0, shot_budget - total)
        self._full, self._last = divmod(rest, cap)
        self._count = len(head) + self._full + (1 if self._last else 0)

    def __len__(self) -> int:
        return self._count

    @overload
    def __getitem__(self, index: int) -> int: ...

    @overload
    def __getitem__(self, index: slice) -> list[int]: ...

    def __getitem__(self, index: int | slice) -> int | list[int]:
        if isinstance(index, slice):
            return [self[i] for i in range(*index.indices(self._count))]
        if index < 0:
            index += self._count
        if not 0 <= index < self._count:
            raise IndexError(f"batch {index} is beyond the schedule's {self._count} batches")
        if index < len(self._head):
            return self._head[index]
        return self.cap if index - len(self._head) < self._full else self._last


def batch_sizes(shot_budget: int, cap: int) -> list[int]:
    """All sizes of :class:`BatchSchedule` as a list (for small budgets: tests, doctests).

    >>> batch_sizes(40000, 1 << 20)
    [1024, 2048, 4096, 8192, 10240, 12800, 1600]
    """
    return list(BatchSchedule(shot_budget, cap))


# ---------------------------------------------------------------------------
# batches


@dataclass(frozen=True)
class BatchTask:
    """One batch of one point, self-contained so it can be shipped to any worker."""

    point_key: str
    params: dict[str, Any]
    batch_index: int
    shots: int
    seed: int
    #: ``None``: shots sampled from the circuit. An integer w: every shot has exactly w faults of the
    #: point's detector error model (:mod:`codebench.engine.fault_sampling`), for rare-event estimates.
    faults: int | None = None
    #: The point's detector error model, compressed (:func:`codebench.engine.models.pack_model`), so a
    #: remote worker need not derive it from the circuit; ``None``: the worker derives it.
    model: bytes | None = field(default=None, repr=False, compare=False)
    #: Batches of other points with the same seed and shots (the same physical point under other
    #: decoders): the worker samples once and decodes with each (:attr:`BatchResult.partners`).
    partners: tuple[BatchTask, ...] = field(default=(), repr=False)


@dataclass(frozen=True)
class BatchResult:
    """Counts of one finished batch. ``seconds`` covers sampling and decoding.

    ``seed`` is the batch's random stream (batches of two points with equal seeds and shots hold
    identical shots); ``failed`` says which of its shots failed (:func:`pack_failed`), so decoders
    that decoded the same shots can be compared shot by shot.
    """

    point_key: str
    batch_index: int
    shots: int
    failures: int
    seconds: float
    decode_seconds: float
    seed: int | None = None
    failed: bytes | None = field(default=None, repr=False, compare=False)
    #: Results of the task's partners, in their order.
    partners: tuple[BatchResult, ...] = field(default=(), repr=False, compare=False)


def pack_failed(failed: Sequence[bool] | Any) -> bytes:
    """Which shots of a batch failed, as compressed little-endian bits (one per shot).

    Failures are rare where comparisons matter, so the bits compress to a few bytes per failure.

    >>> unpack_failed(pack_failed([False, True, False, True, True]), 5).nonzero()[0].tolist()
    [1, 3, 4]
    """
    import numpy as np

    return zlib.compress(np.packbits(np.asarray(failed, dtype=bool), bitorder="little").tobytes(), 6)


def unpack_failed(data: bytes, shots: int) -> Any:
    """The boolean failure flags of a batch's ``shots`` shots from :func:`pack_failed`'s bytes."""
    import numpy as np

    bits = np.frombuffer(zlib.decompress(data), dtype=np.uint8)
    return np.unpackbits(bits, count=shots, bitorder="little").astype(bool)


# ---------------------------------------------------------------------------
# cluster settings

#: The three ways to reach Dask workers (exactly one per sweep; see :mod:`codebench.engine.cluster`).
CLUSTER_WAYS = ("scheduler", "local_workers", "batch_system")


@dataclass(frozen=True)
class ClusterSpec:
    """Validated ``[cluster]`` settings (see the module docstring)."""

    scheduler: str | None = None
    local_workers: int | None = None
    threads_per_worker: int = 1
    batch_system: str | None = None
    jobs: int | None = None
    adapt_minimum: int | None = None
    adapt_maximum: int | None = None
    options: dict[str, Any] = field(default_factory=dict)
    #: Seconds to wait for the scheduler to answer.
    connect_timeout: float = 30.0

    @property
    def way(self) -> str:
        """``"scheduler"``, ``"local_workers"`` or ``"batch_system"``."""
        return next(w for w in CLUSTER_WAYS if getattr(self, w) is not None)
