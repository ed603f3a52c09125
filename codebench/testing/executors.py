"""Conformance checks for executors (registered or your own class).

``check_executor(factory)`` runs them on executors that ``factory()``
creates (one per check; each is closed by the check). Each raises
:class:`AssertionError` naming the executor and the check:

``returns_what_run_batch_returns``
    Every submitted batch comes back once, with the counts
    :func:`~codebench.engine.worker.run_batch` gives in this process (a batch
    is a pure function of its task), whatever the completion order.
``shipped_model_changes_nothing``
    Batches that carry the point's packed detector error model give the same
    counts as batches that do not.
``abandon_forgets_in_flight``
    After :meth:`~codebench.engine.executor.Executor.abandon` nothing is in
    flight and no abandoned result comes back; new batches still run.
``close_is_idempotent``
    Closing twice, and leaving a ``with`` block after ``close``, are harmless.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from codebench.decoders import get_decoder
from codebench.engine.executor import Executor
from codebench.engine.executors import get_executor
from codebench.engine.models import model_of, pack_model
from codebench.engine.worker import batch_seed, run_batch
from codebench.records import BatchResult, BatchTask, Point

__all__ = ["EXECUTOR_CHECKS", "check_executor", "executor_checks", "run_executor_check"]

#: Two small points of different codes and decoders, three batches each.
POINTS = (
    Point("repetition", 3, 3, "Z", "circuit_depolarizing", 0.02, "mwpm"),
    Point("rotated_surface", 3, 3, "X", "si1000", 0.003, "mwpm_correlated"),
)
SEED = 9
SHOTS = 1500
#: Seconds an executor may take to return one result before the check gives up.
PATIENCE = 120.0


def tasks(ship: bool = False) -> list[BatchTask]:
    """The batches the checks submit (with the packed model if ``ship``)."""
    out = []
    for point in POINTS:
        key = point.key(SEED)
        model = pack_model(model_of(point.params(), get_decoder(point.decoder).wants_decomposed)) if ship else None
        out += [BatchTask(key, point.params(), i, SHOTS, batch_seed(SEED, key, i, SHOTS), model=model)
                for i in range(3)]
    return out


@dataclass
class _Subject:
    factory: Callable[[], Executor]
    label: str

    def fail(self, check: str, text: str) -> AssertionError:
        return AssertionError(f"executor {self.label} fails {check}: {text}")


def _collect(executor: Executor, count: int, subject: _Subject, check: str) -> dict[tuple[str, int], BatchResult]:
    got: dict[tuple[str, int], BatchResult] = {}
    waited = 0.0
    while len(got) < count:
        results = executor.completed(timeout=1.0)
        waited = 0.0 if results else waited + 1.0
        if waited > PATIENCE:
            raise subject.fail(check, f"{count - len(got)} of {count} batches never came back")
        for result in results:
            key = (result.point_key, result.batch_index)
            if key in got:
                raise subject.fail(check, f"batch {key} came back twice")
            got[key] = result
    return got


def _expected() -> dict[tuple[str, int], int]:
    return {(t.point_key, t.batch_index): run_batch(t).failures for t in tasks()}


def _returns_what_run_batch_returns(subject: _Subject) -> None:
    expected = _expected()
    with subject.factory() as executor:
        for task in tasks():
            executor.submit(task)
        got = _collect(executor, len(expected), subject, "returns_what_run_batch_returns")
        if executor.in_flight():
            raise subject.fail("returns_what_run_batch_returns", f"{executor.in_flight()} in flight after all returned")
    counts = {key: result.failures for key, result in got.items()}
    if counts != expected:
        raise subject.fail("returns_what_run_batch_returns", f"counts {counts} differ from run_batch's {expected}")
    if any(result.shots != SHOTS for result in got.values()):
        raise subject.fail("returns_what_run_batch_returns", "a batch came back with another shot count")


def _shipped_model_changes_nothing(subject: _Subject) -> None:
    expected = _expected()
    with subject.factory() as executor:
        for task in tasks(ship=True):
            executor.submit(task)
        got = _collect(executor, len(expected), subject, "shipped_model_changes_nothing")
    counts = {key: result.failures for key, result in got.items()}
    if counts != expected:
        raise subject.fail("shipped_model_changes_nothing", f"counts {counts} differ from {expected}")


def _abandon_forgets_in_flight(subject: _Subject) -> None:
    with subject.factory() as executor:
        first = tasks()
        for task in first:
            executor.submit(task)
        executor.abandon()
        if executor.in_flight():
            raise subject.fail("abandon_forgets_in_flight", f"{executor.in_flight()} still in flight")
        fresh = BatchTask(first[0].point_key, first[0].params, 99, SHOTS, 12345)
        executor.submit(fresh)
        got = _collect(executor, 1, subject, "abandon_forgets_in_flight")
        if set(got) != {(fresh.point_key, 99)}:
            raise subject.fail("abandon_forgets_in_flight", f"an abandoned batch came back: {sorted(got)}")


def _close_is_idempotent(subject: _Subject) -> None:
    executor = subject.factory()
    with executor:
        executor.close()
    executor.close()


EXECUTOR_CHECKS: dict[str, Callable[[_Subject], None]] = {
    "returns_what_run_batch_returns": _returns_what_run_batch_returns,
    "shipped_model_changes_nothing": _shipped_model_changes_nothing,
    "abandon_forgets_in_flight": _abandon_forgets_in_flight,
    "close_is_idempotent": _close_is_idempotent,
}


def _subject(executor: Callable[[], Executor] | str) -> _Subject:
    if isinstance(executor, str):
        cls = get_executor(executor)
        options = {"workers": 2} if "workers" in cls.option_specs else {}
        return _Subject(lambda: cls.create(options), repr(executor))
    return _Subject(executor, getattr(executor, "__name__", repr(executor)))


def executor_checks() -> list[str]:
    """Names of the checks, in the order :func:`check_executor` runs them."""
    return list(EXECUTOR_CHECKS)


def run_executor_check(check: str, executor: Callable[[], Executor] | str) -> None:
    """Run one check (a name from :func:`executor_checks`); ``AssertionError`` if it fails."""
    if check not in EXECUTOR_CHECKS:
        raise ValueError(f"check must be one of {', '.join(map(repr, EXECUTOR_CHECKS))}; got {check!r}")
    EXECUTOR_CHECKS[check](_subject(executor))


def check_executor(executor: Callable[[], Executor] | str) -> None:
    """Run every executor check on executors made by ``executor`` (a factory, or a registered name
    whose :meth:`~codebench.engine.executor.Executor.create` needs no options beyond ``workers``).

    >>> check_executor("in_process")
    """
    subject = _subject(executor)
    for check in EXECUTOR_CHECKS.values():
        check(subject)
