"""Writing result files atomically, readable like the store, and leaving nothing behind on failure.

Every file codebench writes for people to read (results CSV, report pages,
forecast tables, figure manifests) goes through :func:`write_atomically`: the
content is written to a temporary file beside the target and renamed over it,
so a reader never sees half a file; the file gets the permissions an ordinary
file gets here (``0o666`` less the umask: on a shared cluster, readable by the
group like the store), not the ``0o600`` of a temporary file; and when writing
fails (a full disk, a read-only folder) the temporary file is removed and one
:class:`~codebench.errors.OutputError` line says which file and why.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import IO, Any

from codebench.errors import OutputError

__all__ = ["ordinary_mode", "write_atomically", "write_text"]


def ordinary_mode() -> int:
    """The mode a newly created file gets here: ``0o666`` less the process umask."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def write_atomically(path: str | Path, write: Callable[[IO[Any]], object], binary: bool = False) -> Path:
    """Write ``path`` with ``write(handle)`` through a temporary file renamed over it."""
    target = Path(path)
    if target.is_dir():
        raise OutputError(f"cannot write '{target}': it is a folder; give a file path.")
    tmp: str | None = None
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.stem}-", suffix=target.suffix, dir=target.parent)
        handle: IO[Any] = os.fdopen(fd, "wb") if binary else os.fdopen(fd, "w", encoding="utf-8", newline="")
        with handle:
            write(handle)
        os.chmod(tmp, ordinary_mode())
        os.replace(tmp, target)
        tmp = None
    except OSError as exc:
        raise OutputError(f"cannot write '{target}': {exc.strerror or exc}.") from exc
    finally:
        if tmp is not None:
            Path(tmp).unlink(missing_ok=True)
    return target


def make_folder(path: str | Path) -> Path:
    """Create ``path`` (and its parents) or raise the one-line :class:`OutputError` naming it."""
    folder = Path(path)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create the folder '{folder}': {exc.strerror or exc}.") from exc
    return folder


def write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` atomically (UTF-8, newlines as given)."""
    return write_atomically(path, lambda handle: handle.write(text))
