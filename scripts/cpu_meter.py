"""Wall and CPU time of a piece of work, for the benchmarks (shared, noisy machines need both).

CPU time counts this process and every descendant (worker processes, Dask
nannies and workers), polled every 0.1 s so that workers which exit before
the end still count. (psutil comes with the test extra.)
"""

from __future__ import annotations

import threading
import time
from typing import Any, Callable

import psutil

__all__ = ["CpuMeter", "measure"]


class CpuMeter:
    """CPU seconds of this process and its descendants, polled so that exiting workers still count."""

    def __init__(self) -> None:
        self.seen: dict[int, float] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._poll, daemon=True)

    def _poll(self) -> None:
        me = psutil.Process()
        while not self._stop.is_set():
            for proc in [me, *me.children(recursive=True)]:
                try:
                    times = proc.cpu_times()
                except psutil.Error:
                    continue
                self.seen[proc.pid] = max(self.seen.get(proc.pid, 0.0), times.user + times.system)
            self._stop.wait(0.1)

    def __enter__(self) -> CpuMeter:
        self.start = {p: t for p, t in self._snapshot().items()}
        self._thread.start()
        return self

    def _snapshot(self) -> dict[int, float]:
        me = psutil.Process()
        out = {}
        for proc in [me, *me.children(recursive=True)]:
            try:
                times = proc.cpu_times()
            except psutil.Error:
                continue
            out[proc.pid] = times.user + times.system
        return out

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join()
        for pid, value in self._snapshot().items():
            self.seen[pid] = max(self.seen.get(pid, 0.0), value)
        self.cpu = sum(v - self.start.get(pid, 0.0) for pid, v in self.seen.items())


def measure(work: Callable[[], Any]) -> tuple[float, float]:
    """(wall seconds, CPU seconds) of ``work()``."""
    with CpuMeter() as meter:
        start = time.perf_counter()
        work()
        wall = time.perf_counter() - start
    return wall, meter.cpu
