"""The exception tree of codebench.

::

    CodebenchError            root: anything codebench raises on purpose
    ├── ConfigError           a sweep file or command-line value is not allowed
    ├── DeviceFileError       a device calibration file is not allowed
    ├── DecoderError          a decoder cannot be built or run for a point
    ├── StoreError            a results store is unusable (foreign, corrupt, locked)
    ├── DataError             measured records or an experiment description do not fit
    └── ClusterError          a cluster run could not go on (scheduler lost, workers keep dying)

The command line prints the message of every ``CodebenchError`` on one line,
without a traceback, and exits with status 2 (bad input), or 1 for a
``ClusterError`` (the input was fine; the cluster failed).
"""

from __future__ import annotations

from typing import Any

#: Exit statuses of the command line: done; a run fault (lost worker, full disk); bad input; stopped by
#: Ctrl-C or SIGTERM (128 + SIGINT, the shell's convention).
EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130


class CodebenchError(Exception):
    """Root of every error codebench raises on purpose."""


class ConfigError(CodebenchError):
    """A sweep-file or command-line value is not allowed."""


class DeviceFileError(CodebenchError):
    """A device calibration file is not allowed."""


class DecoderError(CodebenchError):
    """A decoder cannot be built or run."""


class StoreError(CodebenchError):
    """A results store cannot be used."""


class DataError(CodebenchError):
    """Measured records, an experiment description or an OpenQASM program are malformed or do not fit."""


class RunFault(CodebenchError):
    """Work could not go on for a reason outside the input (exit status 1); what was finished is kept."""


class ClusterError(RunFault):
    """A run on a cluster could not go on; its finished batches are stored."""


class WorkerLost(ClusterError):
    """A local worker process died under a batch; the finished batches are stored."""


class OutputError(RunFault):
    """A file could not be written (full disk, read-only folder); nothing half-written is left."""


def not_allowed(path: str, value: Any, allowed: str) -> str:
    """Format the one message template used for every rejected value.

    >>> not_allowed("study[1].p[0]", 1.5, "a number in [0, 0.1]")
    'study[1].p[0] must be a number in [0, 0.1]; got 1.5.'
    """
    return f"{path} must be {allowed}; got {value!r}."


class Interrupted(Exception):
    """A run was stopped by SIGINT or SIGTERM; its finished batches are stored."""
