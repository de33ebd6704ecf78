"""One run per results file: an OS lock on ``RESULTS.lock`` held from start to end of the run.

The lock is ``flock`` on a lock file next to the results file. It belongs to the
open file, not to the process's other descriptors, so a run that reads the
results file (say, as an input) does not drop it, and the kernel releases it when
the run's process ends in any way, ``kill -9`` included: a lock file left behind by
a killed run blocks nothing. A run that ends normally removes the lock file.

References
----------
.. [1] flock(2), Linux man-pages: locks are tied to the open file description and
   released when it is closed, also by the death of the process.
"""
from __future__ import annotations

import os
from pathlib import Path

from ..errors import WavefitError
from ..report.safe_text import visible
from ..write_errors import write_failed

try:
    import fcntl
except ImportError:  # pragma: no cover - not on POSIX
    fcntl = None  # type: ignore[assignment]

#: Suffix of the lock file (``lot.csv`` -> ``lot.csv.lock``).
LOCK_SUFFIX = ".lock"


class RunLockedError(WavefitError):
    """Another run holds the results file."""

    exit_code = 3


def lock_path(results: str | os.PathLike[str]) -> Path:
    """The lock file of a results file."""
    path = Path(results)
    return path.with_name(path.name + LOCK_SUFFIX)


class RunLock:
    """The lock of one results file; use as a context manager around the whole run."""

    def __init__(self, results: str | os.PathLike[str]) -> None:
        self.results = Path(results)
        self.path = lock_path(results)
        self._fd: int | None = None

    def __enter__(self) -> "RunLock":
        self.acquire()
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()

    def acquire(self) -> None:
        """Take the lock, or raise :class:`RunLockedError` at once when another run holds it."""
        while True:
            try:
                fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
            except OSError as exc:
                raise write_failed("lock file", self.path, exc) from None
            if fcntl is not None:  # pragma: no branch
                try:
                    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                except OSError:
                    os.close(fd)
                    raise RunLockedError(f"{visible(self.results)} is in use by another run (lock "
                                         f"{visible(self.path)}); wait for it to finish or use another "
                                         "--out") from None
            if self._is_current(fd):
                self._fd = fd
                return
            os.close(fd)  # the run before us removed the file after we opened it: take the new one

    def release(self) -> None:
        """Remove the lock file and release the lock (in that order, so no one locks a removed file)."""
        if self._fd is None:
            return
        try:
            os.unlink(self.path)
        except OSError:
            pass
        os.close(self._fd)
        self._fd = None

    def _is_current(self, fd: int) -> bool:
        """Whether ``fd`` is still the file at the lock's path (not one removed meanwhile)."""
        try:
            here, there = os.fstat(fd), os.stat(self.path)
        except OSError:
            return False
        return (here.st_dev, here.st_ino) == (there.st_dev, there.st_ino)
