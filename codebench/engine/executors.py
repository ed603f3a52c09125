"""Executors: the one place that moves batches to workers and back.

The engine holds all the logic (what to run, when to stop); an executor only
runs :func:`~codebench.engine.worker.run_batch` somewhere. Implementations:
:class:`InProcessExecutor` (runs in the caller, used for one worker and in
tests), :class:`LocalExecutor` (a pool of local processes) and
:class:`~codebench.engine.dask_executor.DaskExecutor` (a Dask cluster).
"""

from __future__ import annotations

import multiprocessing
import os
import signal
from abc import ABC, abstractmethod
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import ClassVar

from codebench.engine.worker import run_batch
from codebench.records import BatchResult, BatchTask, ClusterSpec


class Executor(ABC):
    """Runs batches. ``capacity`` is how many it wants in flight at once."""

    name: ClassVar[str]

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


class InProcessExecutor(Executor):
    """Runs each batch in the calling process when its result is asked for."""

    name = "in_process"

    def __init__(self) -> None:
        self._queue: list[BatchTask] = []

    @property
    def capacity(self) -> int:
        return 1

    def submit(self, task: BatchTask) -> None:
        self._queue.append(task)

    def completed(self, timeout: float) -> list[BatchResult]:
        return [run_batch(self._queue.pop(0))] if self._queue else []

    def in_flight(self) -> int:
        return len(self._queue)


def _ready() -> bool:
    return True


def _ignore_interrupts() -> None:
    """Workers leave Ctrl-C to the coordinator, which stops them itself."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


class LocalExecutor(Executor):
    """A pool of ``workers`` local processes (fork server, libraries preloaded)."""

    name = "local"

    def __init__(self, workers: int | None = None) -> None:
        self.workers = workers or os.cpu_count() or 1
        method = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
        context = multiprocessing.get_context(method)
        if method == "forkserver":
            context.set_forkserver_preload(["codebench.engine.worker"])
        self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=context, initializer=_ignore_interrupts)
        self._futures: set[Future[BatchResult]] = set()
        self._closed = False
        # Start every worker now: an interrupt while the pool is still spawning
        # processes would otherwise leave multiprocessing half set up.
        for future in [self._pool.submit(_ready) for _ in range(self.workers)]:
            future.result()

    @property
    def capacity(self) -> int:
        return 2 * self.workers

    def submit(self, task: BatchTask) -> None:
        self._futures.add(self._pool.submit(run_batch, task))

    def completed(self, timeout: float) -> list[BatchResult]:
        if not self._futures:
            return []
        done, pending = wait(self._futures, timeout=timeout, return_when=FIRST_COMPLETED)
        self._futures = set(pending)
        return [f.result() for f in done]

    def in_flight(self) -> int:
        return len(self._futures)

    def summary(self) -> str:
        return f"{self.workers} local worker processes"

    def close(self, wait: bool = True) -> None:
        if self._closed:
            return
        self._closed = True
        if not wait:
            # Interrupted: do not sit out the running batches; their results would be dropped anyway.
            for process in list(getattr(self._pool, "_processes", {}).values()):
                process.terminate()
        self._pool.shutdown(wait=wait, cancel_futures=True)


def make_executor(workers: int | None, cluster: ClusterSpec | None = None) -> Executor:
    """The executor for a Dask ``cluster`` if given, else for ``workers`` local workers (all cores when ``None``)."""
    if cluster is not None:
        from codebench.engine.dask_executor import (
            start_dask_executor,  # Dask is imported only when used
        )

        return start_dask_executor(cluster)
    count = workers or os.cpu_count() or 1
    return InProcessExecutor() if count == 1 else LocalExecutor(count)
