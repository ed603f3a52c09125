"""Run batches on a Dask cluster (dask.distributed).

The coordinator keeps every decision (which batch, when to stop) and is the
only writer of the store; Dask only moves a :class:`BatchTask` (a few hundred
bytes: the point's parameters, the batch index, its size and seed) to a
worker and a :class:`BatchResult` back. Workers import codebench themselves
and cache the compiled circuit and decoder per point
(:func:`~codebench.engine.worker.compiled`), so a point is compiled once per
worker thread.

Fault tolerance is Dask's: a batch running on a worker that dies is
rescheduled on another one. A batch is a pure function of its task, so a
rerun gives the very counts the lost run would have given. When the
scheduler gives up on a batch (it was on too many dying workers) the batch is
resubmitted a few more times before the sweep stops with a clear error.
"""

from __future__ import annotations

import functools
import logging
import shutil
import signal
import sys
import threading
import time
import uuid
from collections.abc import Mapping
from concurrent.futures import CancelledError
from typing import Any, Callable

# Imported only when a sweep runs on a cluster (after cluster.require_packages).
import dask
import distributed

from codebench.engine.cluster import BATCH_SYSTEMS, require_packages
from codebench.engine.executor import Executor
from codebench.engine.jobqueue_options import check_option_names, import_jobqueue
from codebench.engine.worker import (
    EnvironmentMismatch,
    PluginMissing,
    environment,
    environment_difference,
    run_batch_checked,
)
from codebench.errors import ClusterError, CodebenchError, ConfigError
from codebench.records import BatchResult, BatchTask, ClusterSpec

#: Resubmissions of one batch after the scheduler gave up on it (KilledWorker).
RESUBMITS = 2
#: Seconds between two looks at the scheduler's list of workers.
WORKER_POLL_SECONDS = 2.0
#: Worker settings of a local cluster. Dask's statistical profiler samples every worker
#: thread each 10 ms and its system monitor wakes twice a second: a few per cent of a
#: CPU-bound batch on a machine whose cores all run batches, for data nobody reads here.
LOCAL_WORKER_CONFIG = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.system-monitor.interval": "5s",
}


class DaskExecutor(Executor):
    """Batches on the workers of ``client``.

    ``owned`` lists what this executor started and closes with it (its client,
    a cluster); a client handed in by the caller stays open.
    """

    name = "dask"

    @classmethod
    def create(cls, options: Mapping[str, Any]) -> DaskExecutor:
        """Connect to (or start) the cluster of ``options["cluster"]``, a validated :class:`ClusterSpec`."""
        spec = options.get("cluster")
        if not isinstance(spec, ClusterSpec):
            raise TypeError(f"the dask executor needs a ClusterSpec as option 'cluster'; got {spec!r}")
        return start_dask_executor(spec)

    def __init__(self, client: Any, owned: list[Any] | None = None) -> None:
        self._client = client
        self.address = str(client.scheduler.address)
        self._owned = list(owned or [])
        self._expected = environment()
        self._tasks: dict[Any, tuple[BatchTask, int]] = {}
        self._workers: dict[str, int] = {}
        self._polled = -float("inf")
        self.workers_lost = 0
        self.resubmitted = 0
        self._stop: ClusterError | None = None
        self._checked: set[str] = set()
        self._closed = False
        # The client logs its reconnection attempts with tracebacks; a lost scheduler is
        # reported by codebench itself, in one line. Restored on close.
        self._client_log = logging.getLogger("distributed.client")
        self._client_log_level = self._client_log.level
        self._client_log.setLevel(logging.CRITICAL)

    # worker bookkeeping ----------------------------------------------------

    def _poll_workers(self) -> None:
        now = time.monotonic()
        if now - self._polled < WORKER_POLL_SECONDS:
            return
        self._polled = now
        try:
            info = self._client.scheduler_info(n_workers=-1)
        except (OSError, TimeoutError):  # scheduler unreachable for now: keep the last known workers
            return
        current = {address: int(w.get("nthreads", 1)) for address, w in info.get("workers", {}).items()}
        self.workers_lost += len(set(self._workers) - set(current))
        new = sorted(set(current) - self._checked)
        if new:
            self._check_environment(new)
        self._workers = current

    def _check_environment(self, addresses: list[str]) -> None:
        """Refuse workers that cannot import codebench or whose libraries differ, before they get a batch."""
        try:
            answers = self._client.run(environment, workers=addresses, on_error="return")
        except (OSError, TimeoutError):  # a worker that just left: the next poll sees who is there
            return
        for address, answer in sorted(answers.items()):
            if isinstance(answer, BaseException) and not isinstance(answer, ImportError):
                continue  # the worker died or left while answering: the next poll sees who is there
            if isinstance(answer, BaseException):
                raise CodebenchError(f"Dask worker {address} cannot run codebench ({answer}); install codebench "
                                     "and the sweep's plug-in decoders in the workers' environment")
            details = environment_difference(answer, self._expected)
            if details:
                raise CodebenchError(f"Dask worker {address} differs from the coordinator: {details}; install the "
                                     "same versions on the workers so counts stay reproducible")
            self._checked.add(address)

    @property
    def capacity(self) -> int:
        # Two batches per worker thread keep every thread busy while results travel;
        # at least two so that work is queued while batch-system jobs wait to start.
        self._poll_workers()
        return max(2, 2 * sum(self._workers.values()))

    def note(self) -> str:
        self._poll_workers()
        if not self._workers:
            return "waiting for Dask workers to join"
        text = f"{len(self._workers)} Dask workers"
        if self.workers_lost:
            text += f", {self.workers_lost} lost"
        if self.resubmitted:
            text += f", {self.resubmitted} batches resubmitted"
        return text

    def summary(self) -> str:
        self._poll_workers()
        link = getattr(self._client, "dashboard_link", None)
        threads = sum(self._workers.values())
        text = (f"Dask scheduler {self.address}: {len(self._workers)} workers, "
                f"{threads} threads")
        return text + (f"; dashboard {link}" if link else "")

    # batches ---------------------------------------------------------------

    def submit(self, task: BatchTask, attempt: int = 0) -> None:
        # A fresh key per submission: a resubmitted batch must not be mistaken for the failed one.
        key = f"codebench-batch-{task.point_key[:12]}-{task.batch_index}-{uuid.uuid4().hex[:8]}"
        future = self._client.submit(run_batch_checked, task, self._expected, key=key, pure=False)
        self._tasks[future] = (task, attempt)

    def completed(self, timeout: float) -> list[BatchResult]:
        if self._stop is not None:
            raise self._stop
        if not self._tasks:
            return []
        try:
            done, _ = distributed.wait(list(self._tasks), timeout=timeout, return_when="FIRST_COMPLETED")
        except TimeoutError:
            return []
        except CancelledError:  # some batches were cancelled: by a lost scheduler, or by someone else
            self._check_connection()
            done = {future for future in self._tasks if future.status == "cancelled"}
        results: list[BatchResult] = []
        for future in done:
            task, attempt = self._tasks.pop(future)
            try:
                if future.status == "finished":
                    results.append(future.result())
                elif self._stop is None:
                    self._failed(future, task, attempt)
            except CancelledError:  # finished, but the connection went before its result came
                if self._stop is None:
                    self._resubmit(task, attempt, "cancelled")
            except ClusterError as stop:
                self._stop = stop  # the run ends; first hand over every finished result, to be committed
            finally:
                future.release()
        if self._stop is not None and not results:
            raise self._stop
        return results

    def _check_connection(self) -> None:
        if self._client.status != "running":
            raise ClusterError(
                f"lost the connection to the Dask scheduler at {self.address}; the finished batches are "
                "stored: rerun the same command to resume once it is back"
            )

    def _failed(self, future: Any, task: BatchTask, attempt: int) -> None:
        error = None if future.status == "cancelled" else future.exception()
        if error is None or isinstance(error, distributed.KilledWorker):
            self._resubmit(task, attempt, "cancelled" if error is None else str(error))
            return
        if isinstance(error, EnvironmentMismatch):
            raise CodebenchError(f"{error}; install the same versions on the workers so counts stay reproducible")
        if isinstance(error, PluginMissing):
            raise ClusterError(str(error))
        if isinstance(error, ImportError):  # the task could not even be unpacked on the worker
            raise ClusterError(f"a Dask worker cannot import what a batch needs ({error}); install codebench "
                               "and the sweep's plug-in decoders in the workers' environment")
        future.result()  # re-raises the worker's own error (for example a DecoderError)

    def _resubmit(self, task: BatchTask, attempt: int, reason: str) -> None:
        self._check_connection()
        if attempt >= RESUBMITS:
            raise ClusterError(
                f"batch {task.batch_index} of point {task.point_key[:12]} was lost {attempt + 1} times "
                f"(last: {reason}); its workers may be short of memory: lower engine.batch_bytes or give "
                "the workers more memory"
            )
        self.resubmitted += 1
        self.submit(task, attempt + 1)

    def in_flight(self) -> int:
        return len(self._tasks)

    def abandon(self) -> None:
        pending = list(self._tasks)
        self._tasks.clear()
        if pending:
            try:
                self._client.cancel(pending, force=True)
            except Exception:  # best effort: an unread result is harmless
                pass

    def close(self, wait: bool = True) -> None:
        if self._closed:
            return
        self._closed = True
        pending = list(self._tasks)
        self._tasks.clear()
        # Closing is best effort (the batches that matter are stored), and each step is
        # tried even if the one before failed, so that no cluster is left running.
        steps: list[Callable[[], object]] = []
        if pending:
            steps.append(functools.partial(self._client.cancel, pending, force=True))
        for resource in self._owned:  # the client before the cluster it talks to
            steps.append(functools.partial(resource.close, timeout=10 if wait else 5))
        for step in steps:
            try:
                step()
            except Exception as exc:
                if self._client.status == "running":  # after a lost scheduler, failures here are expected
                    print(f"codebench: closing the Dask cluster: {type(exc).__name__}: {exc}", file=sys.stderr)
        self._client_log.setLevel(self._client_log_level)


def start_dask_executor(spec: ClusterSpec) -> DaskExecutor:
    """Connect to (or start) the cluster ``spec`` describes."""
    require_packages(spec)
    if spec.scheduler is not None:
        client = _connect(spec.scheduler, spec.connect_timeout)
        return DaskExecutor(client, [client])
    cluster = _local_cluster(spec) if spec.local_workers is not None else _batch_system_started(spec)
    try:
        client = distributed.Client(cluster, timeout=spec.connect_timeout)
    except BaseException:
        cluster.close()
        raise
    return DaskExecutor(client, [client, cluster])


def _local_cluster(spec: ClusterSpec) -> Any:
    # Worker processes write to this terminal; Dask's own shutdown races (a heartbeat
    # meeting a closing connection) would print tracebacks there. Lost workers and
    # resubmitted batches are reported on the progress line instead. SIGINT is ignored
    # while the workers start: they inherit that (an ignored signal survives exec), so a
    # Ctrl-C during start-up cannot kill them half-imported; once up, the preloaded
    # hook keeps ignoring it, also in workers restarted later. A Ctrl-C in that window is
    # lost (blocking it instead does not carry over to the spawned workers).
    previous = signal.getsignal(signal.SIGINT)
    in_main_thread = threading.current_thread() is threading.main_thread()
    if in_main_thread:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        with dask.config.set(LOCAL_WORKER_CONFIG):
            return distributed.LocalCluster(
                n_workers=spec.local_workers, threads_per_worker=spec.threads_per_worker, processes=True,
                dashboard_address=":0", silence_logs=logging.CRITICAL,
                preload=["codebench.engine.dask_worker_setup"],
            )
    finally:
        if in_main_thread:
            signal.signal(signal.SIGINT, previous)


def _batch_system_started(spec: ClusterSpec) -> Any:
    cluster = batch_system_cluster(spec, require_submit_command=True)
    try:
        if spec.jobs is not None:
            cluster.scale(jobs=spec.jobs)
        else:
            cluster.adapt(minimum_jobs=spec.adapt_minimum, maximum_jobs=spec.adapt_maximum)
    except BaseException:
        cluster.close()
        raise
    return cluster


def batch_system_cluster(spec: ClusterSpec, require_submit_command: bool = False) -> Any:
    """The dask-jobqueue cluster of ``spec``, with no job submitted yet (see its ``job_script()``)."""
    require_packages(spec)
    dask_jobqueue = import_jobqueue()
    assert spec.batch_system is not None
    class_name = BATCH_SYSTEMS[spec.batch_system]
    cluster_class = getattr(dask_jobqueue, class_name)
    command = str(getattr(cluster_class.job_cls, "submit_command", "") or "").split()
    if require_submit_command and command and shutil.which(command[0]) is None:
        raise ConfigError(f"cluster.batch_system is {spec.batch_system!r} but its submit command "
                          f"'{command[0]}' is not on this machine's PATH; run the coordinator where jobs can be "
                          "submitted (a login node), or use cluster.scheduler.")
    # Again here, for a ClusterSpec not read from a file: a cluster whose construction
    # fails half way cannot be closed cleanly.
    check_option_names(class_name, spec.options)
    try:
        cluster = cluster_class(**spec.options)
    except (TypeError, ValueError) as exc:
        reason = " ".join(str(exc).split())
        raise ConfigError(f"cluster.options are not accepted by dask_jobqueue.{class_name}: {reason}.") from None
    return cluster


def _connect(address: str, timeout: float) -> Any:
    try:
        return distributed.Client(address, timeout=timeout)
    except (OSError, TimeoutError) as exc:
        raise CodebenchError(
            f"cannot reach the Dask scheduler at '{address}' within {timeout:g} s ({exc}); "
            "is it running, and is the address right?"
        ) from None
