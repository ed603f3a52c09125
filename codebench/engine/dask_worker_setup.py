"""Preloaded into the worker processes of the local Dask clusters codebench starts.

Ctrl-C in a terminal sends SIGINT to every process of the foreground group,
Dask's worker processes included, which would each die with a traceback.
The coordinator alone handles it (it commits the finished batches and closes
the cluster), as with the local process pool.
"""

from __future__ import annotations

import signal
from typing import Any


def dask_setup(worker: Any) -> None:
    """Dask's preload hook: leave SIGINT to the coordinator."""
    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:  # not the main thread of the worker process: nothing to do
        pass
