"""Standard output after a write to it failed."""
from __future__ import annotations

import io
import os
import sys


def discard_stdout() -> None:
    """Point standard output at the null device, so the interpreter's last flush of what could
    not be written (a closed pipe, a full disk) does not fail again at exit with a message
    that looks like a traceback."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, io.UnsupportedOperation):  # no file descriptor: nothing is flushed at exit
        pass
