"""One writer per results folder: the run lock.

A sweep holds an exclusive ``flock`` on ``results.lock`` beside its store for
as long as it runs. The kernel drops the lock when the process ends, however
it ends (``kill -9`` included), so a lock is never stale: a second run is
refused only while the first is alive. The file itself is left in place (it
only says who held it last); removing it while a run holds it would let a
second run lock a new file beside the first.

``flock`` works on local file systems and on NFS (Linux emulates it with
byte-range locks there); the coordinator of a cluster run should keep its
output folder on such a file system.
"""

from __future__ import annotations

import datetime as dt
import fcntl
import json
import os
import socket
from pathlib import Path
from typing import IO

from codebench.errors import StoreError

LOCK_NAME = "results.lock"


class RunLock:
    """Hold the run lock of ``folder`` (created if needed) or raise :class:`StoreError`."""

    def __init__(self, folder: str | Path) -> None:
        self.path = Path(folder) / LOCK_NAME
        self._handle: IO[str] | None = None

    def acquire(self) -> None:
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            handle = self.path.open("a+", encoding="utf-8")
        except OSError as exc:
            raise StoreError(f"cannot write into '{self.path.parent}': {exc.strerror or exc}.") from None
        try:
            fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            handle.seek(0)
            holder = _describe(handle.read())
            handle.close()
            raise StoreError(
                f"'{self.path.parent}' is being written by another codebench run ({holder}); "
                "wait for it to finish or stop it, then run again (it resumes)."
            ) from None
        except OSError as exc:  # a file system without locks (ENOLCK, EOPNOTSUPP)
            handle.close()
            raise StoreError(
                f"cannot lock '{self.path}' ({exc.strerror or exc}): this file system offers no file locks; "
                "choose an --out folder on a local disk or on NFS."
            ) from None
        handle.seek(0)
        handle.truncate()
        started = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
        handle.write(json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "started": started}) + "\n")
        handle.flush()
        self._handle = handle

    def release(self) -> None:
        if self._handle is not None:
            self._handle.close()  # closing the file drops the lock
            self._handle = None

    def __enter__(self) -> RunLock:
        self.acquire()
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()


def _describe(text: str) -> str:
    try:
        holder = json.loads(text)
        return f"pid {holder['pid']} on host {holder['host']}, since {holder['started']}"
    except (ValueError, KeyError, TypeError):
        return "holder just starting"
