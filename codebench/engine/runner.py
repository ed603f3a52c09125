"""The coordinator: decides which batches to run and records what comes back.

Batches of a point are submitted speculatively (several in flight, so all
workers stay busy) but counted in batch order (:mod:`codebench.results.tally`).
Each finished batch is committed to the store at once, so an interrupt loses
only the batches in flight, and a rerun picks up every stored batch.
"""

from __future__ import annotations

import math
import signal
from dataclasses import dataclass, field, replace
from types import FrameType
from typing import Any, Callable, Iterator, Sequence

from codebench.build import point_label, qubit_count
from codebench.decoders import get_decoder
from codebench.engine.executors import Executor
from codebench.engine.models import circuit_of, model_of, pack_model
from codebench.engine.progress import PointStatus, Progress
from codebench.engine.worker import batch_seed
from codebench.errors import Interrupted
from codebench.records import (
    BatchResult,
    BatchSchedule,
    BatchTask,
    Point,
    Stopping,
    batch_cap,
)
from codebench.results.store import Store, StoredPoint
from codebench.results.tally import Tally, tally, usable_batches
from codebench.stats import Z95


@dataclass
class PointRun:
    """The coordinator's view of one point during a run."""

    stored: StoredPoint
    seed: int
    sizes: Sequence[int]
    batches: dict[int, BatchResult]
    in_flight: set[int] = field(default_factory=set)
    tally: Tally = field(default_factory=Tally)
    #: The packed detector error model shipped with this point's batches (built on first use).
    model: bytes | None = None
    #: The study the point belongs to (for the live view).
    study: str = ""
    #: The point's random stream (:meth:`Point.sample_key`): shared by its other decoders.
    stream: str = ""

    def __post_init__(self) -> None:
        self.stream = self.stored.point.sample_key(self.seed)

    def refresh(self, stopping: Stopping) -> None:
        self.tally = tally(self.sizes, self.batches, stopping)
        if self.tally.finished:
            self.model = None

    def packed_model(self) -> bytes:
        if self.model is None:
            params = self.stored.point.params()
            self.model = pack_model(model_of(params, get_decoder(self.stored.point.decoder).wants_decomposed))
        return self.model

    def known(self) -> tuple[int, int, float]:
        """Shots, failures and seconds of every usable stored batch."""
        results = self.batches.values()
        return (sum(r.shots for r in results), sum(r.failures for r in results), sum(r.seconds for r in results))

    def next_task(self, stopping: Stopping, ship: bool = False) -> BatchTask | None:
        """The next batch worth running now, or ``None``."""
        if self.tally.finished:
            return None
        index = next((i for i in range(len(self.sizes)) if i not in self.batches and i not in self.in_flight), None)
        if index is None:
            return None
        shots, failures, _ = self.known()
        if shots == 0:
            if len(self.in_flight) >= 2:
                return None
        elif self.in_flight:
            # Hold back once the batches in flight are expected to end the point.
            pending = sum(self.sizes[i] for i in self.in_flight)
            if failures + failures / shots * pending >= _failures_needed(stopping):
                return None
        point = self.stored.point
        return BatchTask(
            point_key=self.stored.key,
            params=point.params(),
            batch_index=index,
            shots=self.sizes[index],
            seed=batch_seed(self.seed, self.stream, index, self.sizes[index]),
            model=self.packed_model() if ship else None,
        )

    def status(self) -> PointStatus:
        shots, failures, seconds = self.known()
        return PointStatus(point_label(self.stored.point), self.tally, shots, failures, seconds, study=self.study,
                           detectors=self.stored.detectors, running=bool(self.in_flight))


def _failures_needed(stopping: Stopping) -> float:
    """Failures that will certainly stop the point (used only to limit speculation)."""
    needed = float(stopping.failure_target) if stopping.failure_target is not None else math.inf
    if stopping.relative_precision is not None:
        needed = min(needed, (Z95 / stopping.relative_precision) ** 2 + 1)
    return needed


def describe(point: Point, seed: int, batch_bytes: int) -> StoredPoint:
    """Key, size and batch cap of a point (builds its circuit, kept for an in-process worker)."""
    circuit = circuit_of(point.params())
    return StoredPoint(
        key=point.key(seed),
        point=point,
        qubits=qubit_count(point),
        detectors=circuit.num_detectors,
        batch_cap=batch_cap(circuit.num_detectors, batch_bytes),
    )


@dataclass(frozen=True)
class RunPlan:
    name: str
    seed: int
    stopping: Stopping
    members: list[tuple[StoredPoint, str]]


class StopSignals:
    """Turn SIGTERM (and Ctrl-C's SIGINT) into :class:`Interrupted` while a run is active.

    The handlers raise, which stops whatever blocks, and also record the request: an exception raised
    while Python runs a weakref callback or a ``__del__`` is printed and dropped ("Exception ignored
    in ..."), so :func:`execute` checks the record between rounds of results as well.
    """

    requested = False

    def __enter__(self) -> None:
        StopSignals.requested = False
        self._previous: dict[int, Any] = {}
        try:
            self._previous[signal.SIGTERM] = signal.signal(signal.SIGTERM, self._raise)
            if signal.getsignal(signal.SIGINT) is signal.default_int_handler:  # not when Ctrl-C is ignored
                self._previous[signal.SIGINT] = signal.signal(signal.SIGINT, self._raise)
        except ValueError:  # not the main thread: leave signals alone
            self._previous = {}

    @staticmethod
    def _raise(signum: int, frame: FrameType | None) -> None:
        StopSignals.requested = True
        if signum == signal.SIGINT:
            raise KeyboardInterrupt
        raise Interrupted(f"signal {signum}")

    def __exit__(self, *exc: object) -> None:
        for signum, previous in self._previous.items():
            signal.signal(signum, previous)


def execute(plan: RunPlan, store: Store, executor: Executor, progress: Progress | None,
            stop_when: Callable[[], bool] | None = None) -> list[PointRun]:
    """Run every point of ``plan`` to its stopping rule, committing each batch.

    ``stop_when`` is asked after every round of results; once it says yes the
    run ends early, like an interrupt but without raising (the stored batches
    stay, so a rerun resumes). The executor stays open: its creator closes it.
    Batches still in flight at the end (speculative ones, or after a stop) are
    abandoned. Call it inside :class:`StopSignals` so that SIGTERM stops it cleanly.
    """
    stored = store.all_batches()
    runs: list[PointRun] = []
    for member, study in plan.members:
        sizes = BatchSchedule(plan.stopping.shot_budget, member.batch_cap)
        run = PointRun(member, plan.seed, sizes, usable_batches(sizes, stored.get(member.key, [])), study=study)
        run.refresh(plan.stopping)
        runs.append(run)
    by_key = {run.stored.key: run for run in runs}
    ship = executor.remote
    interrupted = False
    try:
        while not all(run.tally.finished for run in runs):
            if StopSignals.requested:  # a signal whose exception was swallowed where it landed
                raise Interrupted("signal")
            if stop_when is not None and stop_when():
                break
            _fill(runs, plan.stopping, executor, ship)
            for finished in executor.completed(timeout=0.5):
                for result in (finished, *finished.partners):
                    run = by_key[result.point_key]
                    run.in_flight.discard(result.batch_index)
                    store.add_batch(result)
                    run.batches[result.batch_index] = result
                    run.refresh(plan.stopping)
                    if progress is not None:
                        progress.record(result.shots, result.failures, result.seconds)
            if progress is not None:
                progress.update([r.status() for r in runs], note=executor.note())
    except (KeyboardInterrupt, Interrupted):
        interrupted = True
        raise Interrupted("interrupted") from None
    finally:
        note = "" if interrupted else executor.note()
        executor.abandon()
        if progress is not None:
            progress.finish([r.status() for r in runs], note=note)
    return runs


def _fill(runs: list[PointRun], stopping: Stopping, executor: Executor, ship: bool) -> None:
    for task in _candidates(runs, stopping, executor, ship):
        executor.submit(task)


def _candidates(runs: list[PointRun], stopping: Stopping, executor: Executor, ship: bool) -> Iterator[BatchTask]:
    siblings: dict[str, list[PointRun]] = {}
    for run in runs:
        siblings.setdefault(run.stream, []).append(run)
    for run in runs:
        while executor.in_flight() < executor.capacity:
            task = run.next_task(stopping, ship)
            if task is None:
                break
            run.in_flight.add(task.batch_index)
            yield _with_partners(task, run, siblings[run.stream], stopping, ship)
        if executor.in_flight() >= executor.capacity:
            return


def _with_partners(task: BatchTask, run: PointRun, siblings: list[PointRun], stopping: Stopping,
                   ship: bool) -> BatchTask:
    """``task`` joined by the same batch of the point's other decoders that want it now.

    Their batch has the same seed and shots, so it is sampled once and decoded by each; a decoder
    that does not want the batch (finished, or holding back) is left out, and its counts are
    the same either way.
    """
    partners = []
    for other in siblings:
        if other is run:
            continue
        candidate = other.next_task(stopping, ship)
        if candidate is not None and candidate.batch_index == task.batch_index and candidate.seed == task.seed:
            other.in_flight.add(candidate.batch_index)
            partners.append(candidate)
    return replace(task, partners=tuple(partners)) if partners else task
