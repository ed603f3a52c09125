"""The executor interface: the one place that moves batches to workers and back.

The engine holds all the logic (what to run, when to stop); an executor only
runs :func:`~codebench.engine.worker.run_batch` somewhere. Whoever creates an
executor closes it (it is a context manager); the engine never closes an
executor it was handed. Implementations register by name in
:mod:`codebench.engine.executors`.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping
from types import TracebackType
from typing import Any, ClassVar

from codebench.options import OptionSpec
from codebench.records import BatchResult, BatchTask

__all__ = ["Executor"]


class Executor(ABC):
    """Runs batches. ``capacity`` is how many it wants in flight at once."""

    name: ClassVar[str]
    #: Options :meth:`create` accepts (documented and checked like a decoder's).
    option_specs: ClassVar[dict[str, OptionSpec]] = {}
    #: Whether batches run in other processes (then a point's compiled model is worth shipping).
    remote: ClassVar[bool] = True

    @classmethod
    @abstractmethod
    def create(cls, options: Mapping[str, Any]) -> Executor:
        """A new executor from checked ``options`` (see :attr:`option_specs`)."""

    @property
    @abstractmethod
    def capacity(self) -> int: ...

    @abstractmethod
    def submit(self, task: BatchTask) -> None:
        """Start ``task``; its result comes back from :meth:`completed`."""

    @abstractmethod
    def completed(self, timeout: float) -> list[BatchResult]:
        """Results finished since the last call, waiting up to ``timeout`` s for one."""

    @abstractmethod
    def in_flight(self) -> int: ...

    @abstractmethod
    def abandon(self) -> None:
        """Forget every batch in flight: their results are never returned (the workers stay up)."""

    def close(self, wait: bool = True) -> None:
        """Stop the workers; batches not yet finished are dropped.

        ``wait=False`` (after an interrupt) does not wait for running batches.
        """

    def summary(self) -> str:
        """One line saying where batches run, printed when a run starts."""
        return ""

    def note(self) -> str:
        """A short live remark for the progress line (for example workers lost)."""
        return ""

    def __enter__(self) -> Executor:
        return self

    def __exit__(self, kind: type[BaseException] | None, error: BaseException | None,
                 trace: TracebackType | None) -> None:
        # After an error or interrupt, do not sit out running batches.
        self.close(wait=kind is None)
