"""The live view of a sweep: its ETA and what it writes to a terminal and to a log.

A fake clock drives every check, so nothing here depends on the machine's speed or load.
"""

from __future__ import annotations

import io
import math

import pytest

from codebench.engine.progress import (
    SMOOTHING_SECONDS,
    PointStatus,
    Progress,
    WorkRate,
    cost_per_detector_shot,
    remaining_seconds,
    shots_needed,
)
from codebench.records import Stopping
from codebench.results.tally import Tally

STOP = Stopping(failure_target=100, shot_budget=1_000_000, relative_precision=None)


class FakeClock:
    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now


class Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def status(label: str, shots: int = 0, failures: int = 0, seconds: float = 0.0, detectors: int = 10,
           finished: bool = False, running: bool = False, study: str = "s") -> PointStatus:
    tally = Tally(shots, failures, seconds, 0.0, 1 if shots else 0, finished)
    return PointStatus(label, tally, shots, failures, seconds, study=study, detectors=detectors, running=running)


def test_a_point_without_batches_is_priced_by_its_detectors() -> None:
    # Decoding cost per shot grows about linearly with the detector graph (see the README's cost table),
    # so a point with 10x the detectors of a measured one is priced at 10x its cost per shot.
    measured = status("small", shots=10_000, failures=0, seconds=1.0, detectors=10)
    waiting = status("large", detectors=100)
    per = cost_per_detector_shot([measured, waiting])
    assert per == pytest.approx(1.0 / (10_000 * 10))
    assert remaining_seconds(waiting, STOP, per) == pytest.approx(1_000_000 * 1e-4 * 100 / 10)
    # The measured point's own cost counts for it, over the shots its budget still allows.
    assert remaining_seconds(measured, STOP, per) == pytest.approx(990_000 * 1e-4)


def test_shots_needed_follows_the_stopping_rule() -> None:
    assert shots_needed(status("a"), STOP) == 1_000_000  # no failures yet: the budget
    assert shots_needed(status("a", shots=1000, failures=10), STOP) == pytest.approx(10_000)
    precise = Stopping(failure_target=None, shot_budget=10**9, relative_precision=0.1)
    # Relative half-width z / sqrt(failures) <= 0.1 needs (1.96 / 0.1)^2 + 1 failures (common practice).
    assert shots_needed(status("a", shots=1000, failures=10), precise) == pytest.approx(
        ((1.959963984540054 / 0.1) ** 2 + 1) / 0.01)


def test_work_rate_is_smoothed() -> None:
    rate = WorkRate(workers=2, now=0.0)
    # One long batch landing at once moves the rate by a fraction of its size, not to it.
    rate.add(40.0)
    jumped = rate.update(1.0)
    assert 2.0 < jumped < 2.0 + 40.0 * (1 - math.exp(-1 / SMOOTHING_SECONDS)) + 1e-9
    # A steady 1 compute-second per second is approached over a few time constants.
    for second in range(2, int(5 * SMOOTHING_SECONDS)):
        rate.add(1.0)
        rate.update(float(second))
    assert rate.value == pytest.approx(1.0, abs=0.05)


def test_a_log_gets_one_line_per_finished_point_and_a_summary_every_ten_seconds() -> None:
    clock, log = FakeClock(), io.StringIO()
    view = Progress("demo", STOP, 2, stream=log, clock=clock)
    running = [status("p1", shots=1000, failures=5, seconds=0.1, running=True), status("p2")]
    view.update(running)
    done = [status("p1", shots=20_000, failures=100, seconds=2.0, finished=True), status("p2", running=True)]
    for step in range(1, 25):
        clock.now = float(step)
        view.update(done)
    lines = log.getvalue().splitlines()
    assert sum("done p1" in line for line in lines) == 1
    assert "20,000 shots, 100 failures" in next(line for line in lines if "done p1" in line)
    summaries = [line for line in lines if "points done" in line]
    assert len(summaries) == 3  # at 0 s, 10 s and 20 s
    assert all("\x1b" not in line for line in lines)


def test_a_terminal_block_is_redrawn_in_place() -> None:
    clock, screen = FakeClock(), Terminal()
    view = Progress("demo", STOP, 2, stream=screen, clock=clock)
    points = [status("a", shots=1000, failures=3, seconds=0.1, running=True, study="one"),
              status("b", study="two")]
    view.update(points)
    first = screen.getvalue()
    assert first.count("\n") == view.drawn_lines == 4  # summary, two studies, one running point
    assert "running a" in first and "3.00e-03 [" in first  # rate with its interval
    clock.now = 1.0
    view.update(points)
    assert screen.getvalue()[len(first):].startswith("\x1b[4F")  # back up over the previous block
