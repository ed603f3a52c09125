"""dask-jobqueue, imported safely, and the options its cluster classes accept."""

from __future__ import annotations

import inspect
import signal
import threading
from functools import lru_cache
from types import ModuleType
from typing import Any

from codebench.errors import ConfigError, not_allowed

#: Constructor arguments codebench sets itself, that clash with ``jobs``/``adapt_*``, or that
#: dask-jobqueue keeps only as deprecated spellings of newer ones.
_NOT_OPTIONS = {"self", "job_cls", "loop", "asynchronous", "job_kwargs", "scheduler", "name", "base_class_kwargs",
                "args", "kwargs", "config_name", "n_workers", "workers", "env_extra", "extra", "job_extra",
                "header_skip"}


def import_jobqueue() -> ModuleType:
    """``dask_jobqueue``, leaving the SIGINT handler as it was.

    Importing it installs a SIGINT handler that calls ``sys.exit()``, which would
    turn Ctrl-C into a silent exit 0 instead of a clean stop.
    """
    handler = signal.getsignal(signal.SIGINT)
    import dask_jobqueue

    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, handler)
    return dask_jobqueue


@lru_cache(maxsize=None)
def accepted_options(class_name: str) -> frozenset[str]:
    """Names ``dask_jobqueue.<class_name>`` accepts: its own and those of its job class."""
    cluster_class = getattr(import_jobqueue(), class_name)
    names: set[str] = set()
    for cls in (*cluster_class.__mro__, *cluster_class.job_cls.__mro__):
        if "__init__" in vars(cls):
            names.update(inspect.signature(cls.__init__).parameters)
    return frozenset(names - _NOT_OPTIONS)


def check_option_names(class_name: str, options: dict[str, Any]) -> None:
    """Refuse ``[cluster.options]`` that ``dask_jobqueue.<class_name>`` would not take, naming the first."""
    allowed = accepted_options(class_name)
    for key, value in options.items():
        if key not in allowed:
            raise ConfigError(not_allowed(f"cluster.options.{key}", value,
                                          f"absent: dask_jobqueue.{class_name} takes " + ", ".join(sorted(allowed))))
