"""Executors by name: where batches run.

``in_process`` (the caller's process: one worker, tests), ``local`` (a pool
of local worker processes) and ``dask`` (a Dask cluster). Each class declares
its options (:attr:`~codebench.engine.executor.Executor.option_specs`) and is
loaded on first use, so Dask is imported only by sweeps that run on it.
"""

from __future__ import annotations

import importlib
import os

from codebench.engine.executor import Executor
from codebench.records import ClusterSpec

__all__ = ["EXECUTORS", "Executor", "get_executor", "make_executor", "register"]

#: Registered executors: name -> "module:ClassName" (imported when first asked for).
EXECUTORS: dict[str, str] = {
    "in_process": "codebench.engine.local:InProcessExecutor",
    "local": "codebench.engine.local:LocalExecutor",
    "dask": "codebench.engine.dask_executor:DaskExecutor",
}


def register(name: str, spec: str) -> None:
    """Make the executor class at ``spec`` (``"package.module:ClassName"``) available as ``name``."""
    EXECUTORS[name] = spec


def get_executor(name: str) -> type[Executor]:
    """The executor class registered as ``name``; ``KeyError`` if none."""
    module, _, attribute = EXECUTORS[name].partition(":")
    cls = getattr(importlib.import_module(module), attribute)
    if not (isinstance(cls, type) and issubclass(cls, Executor)):
        raise TypeError(f"executor {name!r} ({EXECUTORS[name]}) is not an Executor subclass")
    return cls


def make_executor(workers: int | None, cluster: ClusterSpec | None = None, isolate: bool = False) -> Executor:
    """The executor for a Dask ``cluster`` if given, else for ``workers`` local workers (all cores when ``None``).

    ``isolate``: run batches in a worker process even with one worker (for plug-in decoders,
    so that one which crashes its process cannot take the coordinator with it). The caller
    owns the executor: use it as a context manager, or call ``close()``.
    """
    if cluster is not None:
        return get_executor("dask").create({"cluster": cluster})
    count = workers or os.cpu_count() or 1
    return get_executor("in_process" if count == 1 and not isolate else "local").create({"workers": count})
