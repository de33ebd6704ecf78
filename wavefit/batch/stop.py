"""Stopping a run by Ctrl-C (SIGINT) or SIGTERM at any moment, without a traceback or a torn write.

While a run is going, both signals raise :class:`Interrupted` in the main thread,
except inside :meth:`StopSignals.deferred` sections (writing a row, starting a
worker process), where the signal is remembered and raised when the section ends.
:meth:`StopSignals.blocked` also keeps the signals pending in the process's signal
mask, which a child process inherits: a worker or helper process started there
cannot be stopped by the terminal's Ctrl-C (sent to the whole process group)
before it has set its own handlers. The run stops its workers itself.

References
----------
.. [1] POSIX.1-2017, ``pthread_sigmask`` and ``fork``/``execve``: the signal mask is
   inherited by a child and kept across ``execve``; setting a signal to ``SIG_IGN``
   discards its pending instances.
.. [2] Python issue bpo-33613: the standard library's resource tracker is started with
   the same signals masked, for the same reason.
"""
from __future__ import annotations

import contextlib
import signal
from typing import Iterator

#: The signals that stop a run; the exit code is 128 + the signal number (130, 143), as a shell reports.
STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM)


class Interrupted(BaseException):
    """The run was stopped by ``signum``.

    A ``BaseException`` like ``KeyboardInterrupt``: an analysis that turns any
    ``Exception`` into an ``error`` row must not swallow it.
    """

    def __init__(self, signum: int) -> None:
        super().__init__(f"stopped by signal {signum}")
        self.signum = signum

    @property
    def exit_code(self) -> int:
        return 128 + self.signum


class StopSignals:
    """SIGINT and SIGTERM handlers for one run; use as a context manager in the main thread.

    Outside the main thread (where Python cannot set handlers) the signals are
    left alone and Ctrl-C arrives as ``KeyboardInterrupt``.
    """

    def __init__(self) -> None:
        self.signum: int | None = None
        self._depth = 0
        self._raised = False
        self._previous: dict[int, object] = {}

    def __enter__(self) -> "StopSignals":
        try:
            for signum in STOP_SIGNALS:
                self._previous[signum] = signal.signal(signum, self._handler)
        except ValueError:  # not the main thread
            self._restore()
        return self

    def __exit__(self, *exc: object) -> None:
        self._restore()

    def _restore(self) -> None:
        for signum, previous in self._previous.items():
            signal.signal(signum, previous)  # type: ignore[arg-type]
        self._previous.clear()

    def _handler(self, signum: int, frame: object) -> None:
        if self.signum is None:
            self.signum = signum
        if self._depth == 0:
            self._raise()

    def _raise(self) -> None:
        """Raise :class:`Interrupted` once; later signals only wait for the run to end."""
        if self.signum is not None and not self._raised:
            self._raised = True
            raise Interrupted(self.signum)

    @contextlib.contextmanager
    def deferred(self) -> Iterator[None]:
        """A section that a signal does not cut short: it is raised when the section ends."""
        self._depth += 1
        try:
            yield
        finally:
            self._depth -= 1
        if self._depth == 0:
            self._raise()

    @contextlib.contextmanager
    def blocked(self) -> Iterator[None]:
        """A deferred section with SIGINT and SIGTERM also held in the signal mask,
        so that a process started inside it begins with them masked."""
        with self.deferred():
            if not hasattr(signal, "pthread_sigmask"):  # pragma: no cover - not on POSIX
                yield
                return
            previous = signal.pthread_sigmask(signal.SIG_BLOCK, STOP_SIGNALS)
            try:
                yield
            finally:
                signal.pthread_sigmask(signal.SIG_SETMASK, previous)
