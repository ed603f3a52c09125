"""The live view of a running sweep: a table of its studies and points, and an ETA that holds still.

On a terminal a block is redrawn in place: a summary line (points done,
shots, failures, throughput, elapsed, ETA), one line per study, and the
points being sampled now and those just finished, each with its state,
shots, failures and rate with its 95% interval. Into a log (no terminal) it
writes the summary every ``LOG_EVERY`` seconds and one line per point as it
finishes, so a batch job's log reads as a record of the run.

The ETA is the compute time the points still need divided by the work the
workers deliver per second. A point's compute time per shot is its own once
it has batches; before that it is the sweep's cost per shot and detector
times its detector count (decoding cost grows about linearly with the
detector graph), so the large points at the end of a sweep are not priced
like the small ones at its start. Shots still needed follow the stopping
rule from the point's own failure rate once it has failures. The work
delivered per second is smoothed over about ``SMOOTHING_SECONDS``, so one
slow or fast batch does not move the ETA.
"""

from __future__ import annotations

import math
import sys
import time
from dataclasses import dataclass
from typing import Callable, Sequence, TextIO

from codebench.records import Stopping
from codebench.results.tally import Tally
from codebench.stats import Z95, wilson_interval

#: Seconds between summary lines in a log (a terminal is redrawn every REDRAW_EVERY seconds).
LOG_EVERY, REDRAW_EVERY = 10.0, 0.25
#: Time constant of the smoothed work rate behind the ETA.
SMOOTHING_SECONDS = 30.0
#: Points shown on a terminal besides the running ones: the most recently finished.
RECENT_SHOWN = 3


@dataclass(frozen=True)
class PointStatus:
    """What the live view needs to know of one point."""

    label: str
    tally: Tally
    known_shots: int
    known_failures: int
    known_seconds: float
    study: str = ""
    detectors: int = 1
    running: bool = False

    @property
    def state(self) -> str:
        return "done" if self.tally.finished else "running" if self.running else "waiting"


def shots_needed(status: PointStatus, stopping: Stopping) -> float:
    """Shots the point takes in all, as far as its failures so far tell (the budget until it has some)."""
    needed = float(stopping.shot_budget)
    if status.known_failures > 0:
        rate = status.known_failures / status.known_shots
        if stopping.failure_target is not None:
            needed = min(needed, stopping.failure_target / rate)
        if stopping.relative_precision is not None:
            needed = min(needed, ((Z95 / stopping.relative_precision) ** 2 + 1) / rate)
    return needed


def cost_per_detector_shot(statuses: Sequence[PointStatus]) -> float | None:
    """Compute seconds per shot and detector over every point with batches (``None`` before any)."""
    seconds = sum(s.known_seconds for s in statuses if s.known_shots)
    work = sum(s.known_shots * max(1, s.detectors) for s in statuses if s.known_shots)
    return seconds / work if work and seconds > 0 else None


def remaining_seconds(status: PointStatus, stopping: Stopping, per_detector_shot: float) -> float:
    """Compute seconds the point still needs."""
    if status.tally.finished:
        return 0.0
    if status.known_shots and status.known_seconds > 0:
        cost = status.known_seconds / status.known_shots
    else:
        cost = per_detector_shot * max(1, status.detectors)
    return max(0.0, shots_needed(status, stopping) - status.known_shots) * cost


class WorkRate:
    """Compute seconds delivered per wall second, smoothed exponentially (starts at the worker count)."""

    def __init__(self, workers: int, now: float) -> None:
        self.value = float(max(1, workers))
        self.last = now
        self.pending = 0.0

    def add(self, seconds: float) -> None:
        self.pending += seconds

    def update(self, now: float) -> float:
        elapsed = now - self.last
        if elapsed >= 1.0:  # short steps say nothing about the rate: let completed work accumulate
            weight = 1.0 - math.exp(-elapsed / SMOOTHING_SECONDS)
            self.value += weight * (self.pending / elapsed - self.value)
            self.value = max(self.value, 1e-3)
            self.pending, self.last = 0.0, now
        return self.value


def _clock(seconds: float) -> str:
    seconds = int(round(seconds))
    hours, rest = divmod(seconds, 3600)
    return f"{hours}:{rest // 60:02d}:{rest % 60:02d}" if hours else f"{rest // 60}:{rest % 60:02d}"


def _count(n: float) -> str:
    for unit, size in (("M", 1e6), ("k", 1e3)):
        if n >= size:
            return f"{n / size:.1f}{unit}"
    return f"{n:.0f}"


def rate_text(failures: int, shots: int) -> str:
    """``rate [low, high]`` (95% Wilson), or a dash before the first shot."""
    if not shots:
        return "-"
    low, high = wilson_interval(failures, shots)
    return f"{failures / shots:.2e} [{low:.1e}, {high:.1e}]"


class Progress:
    """The live view of one run (see the module's docstring)."""

    def __init__(self, name: str, stopping: Stopping, parallelism: int, stream: TextIO | None = None,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self.name = name
        self.stopping = stopping
        self.clock = clock
        self.stream = stream if stream is not None else sys.stderr
        self.tty = self.stream.isatty()
        self.start = clock()
        self.last = -math.inf
        self.session_shots = 0
        self.session_failures = 0
        self.work = WorkRate(parallelism, self.start)
        self.finished_order: list[str] = []
        self.drawn_lines = 0

    def record(self, shots: int, failures: int, seconds: float = 0.0) -> None:
        self.session_shots += shots
        self.session_failures += failures
        self.work.add(seconds)

    def eta(self, statuses: Sequence[PointStatus]) -> float | None:
        per_detector_shot = cost_per_detector_shot(statuses)
        if per_detector_shot is None:
            return None
        left = sum(remaining_seconds(s, self.stopping, per_detector_shot) for s in statuses)
        return left / self.work.update(self.clock())

    def summary(self, statuses: Sequence[PointStatus], note: str = "") -> str:
        done = sum(s.tally.finished for s in statuses)
        elapsed = max(1e-9, self.clock() - self.start)
        parts = [f"{self.name}: {done}/{len(statuses)} points done",
                 f"{_count(self.session_shots)} shots, {self.session_failures:,} failures this run",
                 f"{_count(self.session_shots / elapsed)} shots/s", f"{_clock(elapsed)} elapsed"]
        eta = self.eta(statuses) if done < len(statuses) else None
        if eta is not None:
            parts.append(f"ETA {_clock(eta)}")
        if note:
            parts.append(note)
        return " | ".join(parts)

    def table(self, statuses: Sequence[PointStatus]) -> list[str]:
        """Studies, then the points running now and those just finished."""
        lines: list[str] = []
        studies = list(dict.fromkeys(s.study for s in statuses))
        if len(studies) > 1:
            for study in studies:
                members = [s for s in statuses if s.study == study]
                shots = sum(s.tally.shots for s in members)
                failures = sum(s.tally.failures for s in members)
                lines.append(f"  study {study}: {sum(s.tally.finished for s in members)}/{len(members)} points, "
                             f"{_count(shots)} shots, {failures:,} failures")
        by_label = {s.label: s for s in statuses}
        shown = [s for s in statuses if s.running and not s.tally.finished]
        shown += [by_label[label] for label in self.finished_order[-RECENT_SHOWN:] if label in by_label]
        width = max((len(s.label) for s in shown), default=0)
        for s in shown:
            shots, failures = (s.tally.shots, s.tally.failures) if s.tally.finished else (s.known_shots,
                                                                                          s.known_failures)
            lines.append(f"  {s.state:<7} {s.label:<{width}}  {shots:>11,} shots {failures:>8,} failures  "
                         f"{rate_text(failures, shots)}")
        return lines

    def _note_finished(self, statuses: Sequence[PointStatus]) -> list[PointStatus]:
        new = [s for s in statuses if s.tally.finished and s.label not in self.finished_order]
        self.finished_order += [s.label for s in new]
        return new

    def update(self, statuses: Sequence[PointStatus], force: bool = False, note: str = "") -> None:
        now = self.clock()
        newly_done = self._note_finished(statuses)
        if not self.tty:
            for s in newly_done:
                self.stream.write(f"{self.name}: done {s.label}: {s.tally.shots:,} shots, {s.tally.failures:,} "
                                  f"failures, rate {rate_text(s.tally.failures, s.tally.shots)}\n")
        if not force and now - self.last < (REDRAW_EVERY if self.tty else LOG_EVERY):
            if newly_done:
                self.stream.flush()
            return
        self.last = now
        if self.tty:
            block = [self.summary(statuses, note), *self.table(statuses)]
            # Back to the top of the previous block, then each line written over and cleared to its end.
            up = f"\x1b[{self.drawn_lines}F" if self.drawn_lines else ""
            self.stream.write(up + "".join(f"{line}\x1b[K\n" for line in block))
            if len(block) < self.drawn_lines:  # a shorter block: clear what is left of the longer one
                self.stream.write("\x1b[J")
            self.drawn_lines = len(block)
        else:
            self.stream.write(self.summary(statuses, note) + "\n")
        self.stream.flush()

    def finish(self, statuses: Sequence[PointStatus], note: str = "") -> None:
        self.update(statuses, force=True, note=note)
