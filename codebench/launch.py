"""The ``codebench`` command's entry point.

It imports nothing heavy itself, so a Ctrl-C while the command line loads its
libraries (about a second on a busy machine) ends in the same one line as a
Ctrl-C later, not in a traceback from deep inside an import.
"""

from __future__ import annotations

import os
import signal
import sys
from typing import NoReturn

from codebench.errors import EXIT_INTERRUPTED

#: Exit status when the reader of standard output went away (128 + SIGPIPE, the shell's convention).
EXIT_BROKEN_PIPE = 141


def entry() -> NoReturn:
    try:
        from codebench.cli import main

        status = main()
    except KeyboardInterrupt:  # in the imports, or in the instants before main's own handler is in place
        print("codebench: interrupted; nothing was written.", file=sys.stderr)
        status = EXIT_INTERRUPTED
    except BrokenPipeError:  # `codebench circuit ... | head`: the reader has all it wanted
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        status = EXIT_BROKEN_PIPE
    # The interpreter's own shutdown (joining pool threads, stopping the fork server) can take a moment
    # on a busy machine. Python hands SIGINT back to the system's default (death by signal, no message)
    # early in that shutdown unless it is ignored: ignore it, the answer is already given.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    sys.exit(status)


if __name__ == "__main__":
    entry()
