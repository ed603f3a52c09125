"""Executors on this machine: in the calling process, or a pool of local worker processes."""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import select
import signal
import sys
import threading
import time
from collections.abc import Iterator, Mapping
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from types import FrameType
from typing import Any, ClassVar

from codebench.build import point_label
from codebench.engine.executor import Executor
from codebench.engine.worker import run_batch
from codebench.errors import EXIT_BAD_INPUT, WorkerLost
from codebench.options import OptionSpec
from codebench.records import BatchResult, BatchTask, Point

__all__ = ["MAX_LOCAL_WORKERS", "InProcessExecutor", "LocalExecutor"]

#: Most local worker processes one coordinator starts (each holds its compiled points).
MAX_LOCAL_WORKERS = 512


class InProcessExecutor(Executor):
    """Runs each batch in the calling process when its result is asked for."""

    name = "in_process"
    remote = False

    def __init__(self) -> None:
        self._queue: list[BatchTask] = []

    @classmethod
    def create(cls, options: Mapping[str, Any]) -> InProcessExecutor:
        return cls()

    @property
    def capacity(self) -> int:
        return 1

    def submit(self, task: BatchTask) -> None:
        self._queue.append(task)

    def completed(self, timeout: float) -> list[BatchResult]:
        return [run_batch(self._queue.pop(0))] if self._queue else []

    def in_flight(self) -> int:
        return len(self._queue)

    def abandon(self) -> None:
        self._queue.clear()


def _ready() -> bool:
    return True


def leave_if_a_worker_imports_main() -> None:
    """End a worker process that is running the user's script instead of starting up.

    Worker processes import the script that started the coordinator (Python's
    multiprocessing does, under the name ``__mp_main__``); a script that calls
    ``run_sweep`` at its top level, outside ``if __name__ == "__main__":``,
    would start a second sweep inside every worker. The worker leaves at once
    and quietly; the coordinator then says what to add (:func:`_start_failed`).
    """
    frame: FrameType | None = sys._getframe(1)
    while frame is not None:  # is some caller the script, run under the name multiprocessing gives it?
        if frame.f_globals.get("__name__") == "__mp_main__":
            os._exit(EXIT_BAD_INPUT)
        frame = frame.f_back


def _start_failed(exc: BaseException) -> WorkerLost:
    script = getattr(sys.modules.get("__main__"), "__file__", None)
    hint = ""
    if script is not None and not script.endswith(("codebench/__main__.py", "bin/codebench")):
        hint = (f"; worker processes import {os.path.basename(script)}: if it calls codebench at its top level, "
                "put those calls under `if __name__ == \"__main__\":`")
    return WorkerLost(f"the local worker processes could not start ({type(exc).__name__}){hint}")


def _worker_setup(coordinator: int) -> None:
    """Workers leave Ctrl-C to the coordinator, which stops them itself, and die with it.

    A coordinator killed outright (``kill -9``, out of memory) cannot stop its
    workers; each one watches the coordinator's process (a pidfd, opened while
    the coordinator waits for the pool to start, so the pid cannot have been
    reused) and exits when it ends, so nothing is left running on a shared machine.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    watch_process(coordinator)


def watch_process(pid: int) -> None:
    """Exit this process as soon as process ``pid`` ends (a daemon thread blocked on its pidfd)."""
    try:
        handle = os.pidfd_open(pid)
    except (AttributeError, OSError):  # not Linux >= 5.3: fall back to polling the parent
        handle = None

    def watch() -> None:
        if handle is not None:
            select.select([handle], [], [])
        else:
            while os.getppid() == pid or _alive(pid):
                time.sleep(1.0)
        os._exit(1)

    threading.Thread(target=watch, name="codebench-coordinator-watch", daemon=True).start()


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


@contextlib.contextmanager
def _sigint_ignored() -> Iterator[None]:
    """Ignore SIGINT while worker processes start (all of them are up when it ends)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def _worker_lost(tasks: list[BatchTask]) -> WorkerLost:
    labels = sorted({point_label(Point.from_params(task.params)) for task in tasks})
    shown = "; ".join(labels[:3]) + (f" and {len(labels) - 3} more points" if len(labels) > 3 else "")
    return WorkerLost(f"a local worker process died (killed, out of memory, or crashed by a decoder) while running "
                      f"batches of {shown}; the finished batches are stored: rerun the same command to resume")


#: How long closing waits for the process pool's manager thread to wind down (it takes milliseconds).
MANAGER_JOIN_SECONDS = 5.0


class LocalExecutor(Executor):
    """A pool of ``workers`` local processes (fork server, libraries preloaded)."""

    name = "local"
    option_specs: ClassVar[dict[str, OptionSpec]] = {
        "workers": OptionSpec("int", 0, "worker processes (0: one per core)", low=0, high=MAX_LOCAL_WORKERS),
    }

    @classmethod
    def create(cls, options: Mapping[str, Any]) -> LocalExecutor:
        return cls(int(options.get("workers", 0)) or None)

    def __init__(self, workers: int | None = None) -> None:
        self.workers = workers or os.cpu_count() or 1
        method = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
        context = multiprocessing.get_context(method)
        if method == "forkserver":
            context.set_forkserver_preload(["codebench.engine.worker"])
        # The fork server and the workers start with SIGINT ignored (an ignored signal survives exec): a
        # Ctrl-C while the fork server imports its preloaded modules printed its traceback. The
        # coordinator ignores it for that moment too; a Ctrl-C in that window is lost.
        with _sigint_ignored():
            self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=context,
                                             initializer=_worker_setup, initargs=(os.getpid(),))
            try:
                for future in [self._pool.submit(_ready) for _ in range(self.workers)]:
                    future.result()
            except (BrokenProcessPool, OSError, EOFError) as exc:
                self._pool.shutdown(wait=False, cancel_futures=True)
                raise _start_failed(exc) from exc
        self._futures: dict[Future[BatchResult], BatchTask] = {}
        self._lost: WorkerLost | None = None
        self._closed = False

    @property
    def capacity(self) -> int:
        return 2 * self.workers

    def submit(self, task: BatchTask) -> None:
        if self._lost is not None:
            raise self._lost
        self._futures[self._pool.submit(run_batch, task)] = task

    def completed(self, timeout: float) -> list[BatchResult]:
        if self._lost is not None:
            raise self._lost
        if not self._futures:
            return []
        done, _ = wait(self._futures, timeout=timeout, return_when=FIRST_COMPLETED)
        results: list[BatchResult] = []
        broken: list[BatchTask] = []
        for future in done:
            task = self._futures.pop(future)
            if isinstance(future.exception(), BrokenProcessPool):
                broken.append(task)
            else:
                results.append(future.result())  # a worker's own error (a DecoderError...) is raised here
        if broken:
            # The pool is unusable now; hand over what finished (to be stored), then stop the run.
            self._lost = _worker_lost(broken + list(self._futures.values()))
            self._futures.clear()
            if not results:
                raise self._lost
        return results

    def in_flight(self) -> int:
        return len(self._futures)

    def abandon(self) -> None:
        # Batches not started are cancelled; running ones finish in their worker, unread.
        for future in self._futures:
            future.cancel()
        self._futures.clear()

    def summary(self) -> str:
        return f"{self.workers} local worker processes"

    def close(self, wait: bool = True) -> None:
        if self._closed:
            return
        self._closed = True
        manager = getattr(self._pool, "_executor_manager_thread", None)
        if not wait:
            # Interrupted: do not sit out the running batches; their results would be dropped anyway.
            for process in list(getattr(self._pool, "_processes", {}).values()):
                process.terminate()
        self._pool.shutdown(wait=wait, cancel_futures=True)
        if manager is not None:
            # Let the pool's manager thread finish closing its wake-up pipe now: if it is still closing
            # it when the interpreter exits, Python's own exit hook can write to the half-closed pipe
            # and print "Exception ignored ... Bad file descriptor" under the interrupted line (seen
            # once after a Ctrl-C; a race in concurrent.futures of Python 3.11).
            manager.join(timeout=MANAGER_JOIN_SECONDS)


