"""Progress line for a running sweep: points done, current point, rate, ETA."""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass
from typing import Sequence, TextIO

from codebench.records import Stopping
from codebench.results.tally import Tally


@dataclass(frozen=True)
class PointStatus:
    """What the progress line needs to know of one point."""

    label: str
    tally: Tally
    known_shots: int
    known_failures: int
    known_seconds: float


def remaining_seconds(status: PointStatus, stopping: Stopping, fallback_cost: float) -> float:
    """Rough compute time a point still needs, from its own rate and cost per shot."""
    if status.tally.finished:
        return 0.0
    needed = float(stopping.shot_budget)
    if status.known_failures > 0 and stopping.failure_target is not None:
        rate = status.known_failures / status.known_shots
        needed = min(needed, stopping.failure_target / rate)
    cost = status.known_seconds / status.known_shots if status.known_shots else fallback_cost
    return max(0.0, needed - status.known_shots) * cost


def _clock(seconds: float) -> str:
    seconds = int(round(seconds))
    hours, rest = divmod(seconds, 3600)
    return f"{hours}:{rest // 60:02d}:{rest % 60:02d}" if hours else f"{rest // 60}:{rest % 60:02d}"


def _count(n: float) -> str:
    for unit, size in (("M", 1e6), ("k", 1e3)):
        if n >= size:
            return f"{n / size:.1f}{unit}"
    return f"{n:.0f}"


class Progress:
    """Writes one status line: redrawn in place on a terminal, every few seconds otherwise."""

    def __init__(self, name: str, stopping: Stopping, parallelism: int, stream: TextIO | None = None) -> None:
        self.name = name
        self.stopping = stopping
        self.parallelism = max(1, parallelism)
        self.stream = stream if stream is not None else sys.stderr
        self.tty = self.stream.isatty()
        self.start = time.monotonic()
        self.last = 0.0
        self.session_shots = 0
        self.session_failures = 0
        self.width = 0

    def record(self, shots: int, failures: int) -> None:
        self.session_shots += shots
        self.session_failures += failures

    def line(self, statuses: Sequence[PointStatus], note: str = "") -> str:
        done = sum(s.tally.finished for s in statuses)
        elapsed = max(1e-9, time.monotonic() - self.start)
        parts = [f"{self.name}: {done}/{len(statuses)} points"]
        current = next((s for s in statuses if not s.tally.finished), None)
        if current is not None:
            t = current.tally
            rate = f" ({t.failures / t.shots:.2e})" if t.shots else ""
            parts.append(f"{current.label}: {t.shots:,} shots, {t.failures:,} failures{rate}")
        parts.append(f"{_count(self.session_shots / elapsed)} shots/s")
        parts.append(f"{self.session_failures:,} failures so far")
        costs = [s.known_seconds / s.known_shots for s in statuses if s.known_shots]
        fallback = max(costs) if costs else 0.0
        if current is not None and costs:
            eta = sum(remaining_seconds(s, self.stopping, fallback) for s in statuses) / self.parallelism
            parts.append(f"ETA {_clock(eta)}")
        if note:
            parts.append(note)
        return " | ".join(parts)

    def update(self, statuses: Sequence[PointStatus], force: bool = False, note: str = "") -> None:
        now = time.monotonic()
        interval = 0.25 if self.tty else 10.0
        if not force and now - self.last < interval:
            return
        self.last = now
        text = self.line(statuses, note)
        if self.tty:
            self.stream.write("\r" + text.ljust(self.width))
            self.width = len(text)
        else:
            self.stream.write(text + "\n")
        self.stream.flush()

    def finish(self, statuses: Sequence[PointStatus], note: str = "") -> None:
        self.update(statuses, force=True, note=note)
        if self.tty:
            self.stream.write("\n")
            self.stream.flush()
