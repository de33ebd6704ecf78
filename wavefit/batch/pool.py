"""Worker processes that analyse captures for the parent, one capture at a time each.

Each worker has its own pipe: the parent sends it a path, it sends back the row.
So the parent knows which capture each worker holds: when a worker dies (out of
memory, a crash in a numerical library) that capture gets an ``error`` row and a
new worker takes the worker's place. The pool uses pipes only, no semaphores or
shared queues, so a parent killed by ``kill -9`` leaves nothing for the
multiprocessing resource tracker to warn about.

Workers ignore SIGINT and SIGTERM (the terminal sends Ctrl-C to the whole process
group): the parent decides, and on a stop it kills them; the captures they held
get no row and are analysed again by the next run.
"""
from __future__ import annotations

import collections
import multiprocessing
import multiprocessing.connection
import os
import pkgutil
import signal
import threading
from dataclasses import dataclass
from multiprocessing.connection import Connection
from multiprocessing.process import BaseProcess
from typing import Any, Callable, Sequence

from ..errors import WavefitError
from .rows import RowMaker
from .stop import STOP_SIGNALS, StopSignals

#: How long a worker that was told to stop may take to exit before it is killed (it is idle then).
_EXIT_GRACE_S = 5.0


class WorkerStartError(WavefitError):
    """Worker processes could not be started; rows written so far are kept (exit code 5)."""

    exit_code = 5


@dataclass
class _Worker:
    process: BaseProcess
    conn: Connection
    path: str | None = None


def pooled_rows(paths: Sequence[str], maker: RowMaker, deliver: Callable[[dict[str, Any]], None],
                workers: int, stop: StopSignals) -> None:
    """Hand the row of every path to ``deliver`` (in this process) as each worker finishes one.

    A capture whose analysis kills its worker gets ``maker.crashed_row`` and a new
    worker takes the dead one's place; a worker found dead before it got a capture
    is replaced and the capture waits. On any exception (a stop, a failed write in
    ``deliver``) the workers are killed.

    Raises
    ------
    WorkerStartError
        When worker processes cannot be started, or keep ending before they get a capture.
    """
    queue = collections.deque(paths)
    size = min(workers, len(queue))
    pool: list[_Worker] = []
    retired: list[_Worker] = []
    lost_idle = 0
    clean = False
    try:
        while queue or pool:
            while len(pool) < size and queue:
                _start(maker, stop, pool)
            for worker in [w for w in pool if w.path is None]:
                if not queue:  # nothing left for it: it may end
                    _send(worker, None)
                    pool.remove(worker)
                    retired.append(worker)
                elif _send(worker, queue[0]):
                    worker.path = queue.popleft()
                else:
                    pool.remove(worker)
                    _end(worker, kill=True)
                    lost_idle += 1
                    if lost_idle > size:
                        raise WorkerStartError("worker processes keep ending before they get a capture; "
                                               "run again, with --workers 1 if it persists")
            if pool:
                _collect(pool, maker, deliver)
        clean = True
    finally:
        with stop.deferred():
            for worker in pool + retired:
                _end(worker, kill=not clean)


def _collect(pool: list[_Worker], maker: RowMaker, deliver: Callable[[dict[str, Any]], None]) -> None:
    """Wait for the busy workers; deliver each row that arrived, and the error row of each capture
    whose worker died (that worker leaves ``pool``)."""
    ready = set(multiprocessing.connection.wait([w.conn for w in pool] + [w.process.sentinel for w in pool]))
    for worker in list(pool):
        if worker.conn not in ready and worker.process.sentinel not in ready:
            continue
        path, worker.path = worker.path, None
        row = _receive(worker)
        if row is None:  # the worker died on its capture
            pool.remove(worker)
            _end(worker, kill=True)
            row = maker.crashed_row(path)
        deliver(row)


def _receive(worker: _Worker) -> dict[str, Any] | None:
    """The row the worker sent, or ``None`` when it died instead."""
    try:
        if worker.conn.poll():
            return worker.conn.recv()
    except (EOFError, OSError):
        pass
    return None


def _send(worker: _Worker, path: str | None) -> bool:
    """Send a capture path (``None``: end) to the worker; False when it is gone."""
    try:
        worker.conn.send(path)
    except OSError:
        return False
    return True


def _start(maker: RowMaker, stop: StopSignals, pool: list[_Worker]) -> None:
    """Add a new worker process to ``pool``, started with the stop signals masked (see :mod:`.stop`).

    It joins ``pool`` before a signal that came meanwhile is raised, so the caller's
    clean-up finds it (a worker ignores SIGTERM: one left out would make the
    interpreter's exit wait for it forever).

    The resource tracker is started first: starting it masks the signals and then
    unmasks them, which inside our masked section would let the forkserver (started
    next, with the mask it finds) and so every worker start unprotected.
    """
    context = _worker_context()
    if context.get_start_method() == "forkserver":
        from multiprocessing import resource_tracker

        resource_tracker.ensure_running()
    parent_end, child_end = multiprocessing.Pipe()
    process = context.Process(target=_serve, args=(child_end, maker), daemon=True)
    with stop.blocked():
        try:
            process.start()
        except OSError as exc:  # no process could be made (out of memory, process limit)
            parent_end.close()
            raise WorkerStartError(f"cannot start a worker process: {exc.strerror or exc}; run again, "
                                   "with fewer --workers if it persists") from None
        finally:
            child_end.close()
        pool.append(_Worker(process, parent_end))


def _end(worker: _Worker, kill: bool) -> None:
    """Stop a worker (at once when ``kill``, else once it has read the end message) and reap it."""
    if kill:
        worker.process.kill()
    worker.process.join(None if kill else _EXIT_GRACE_S)
    if worker.process.is_alive():
        worker.process.kill()
        worker.process.join()
    worker.conn.close()
    worker.process.close()


def _worker_context() -> multiprocessing.context.BaseContext:
    """Workers start from a fresh interpreter, not a fork of this one.

    A fresh interpreter reads the one-BLAS-thread default that ``wavefit/__init__.py``
    puts in the environment, even when this process loaded numpy before wavefit. A
    fork would inherit this process's thread pools and locks. With "forkserver"
    (POSIX) the server imports numpy, scipy and the methods once, and each worker is
    forked from it, so a worker starts in milliseconds, not seconds.
    """
    if "forkserver" not in multiprocessing.get_all_start_methods():  # pragma: no cover - Windows
        return multiprocessing.get_context("spawn")
    from .. import methods

    context = multiprocessing.get_context("forkserver")
    context.set_forkserver_preload(["wavefit.analysis", "wavefit.batch.pool", "wavefit.batch.rows",
                                    *(f"wavefit.methods.{info.name}" for info in pkgutil.iter_modules(methods.__path__)
                                      if not info.name.startswith("_"))])
    return context


def _serve(conn: Connection, maker: RowMaker) -> None:
    """Worker main loop: a path in, its row out, until told to end or the parent is gone."""
    for signum in STOP_SIGNALS:
        signal.signal(signum, signal.SIG_IGN)
    parent = multiprocessing.parent_process()
    if parent is not None:
        threading.Thread(target=_exit_with_parent, args=(parent.sentinel,), daemon=True).start()
    while True:
        try:
            path = conn.recv()
        except (EOFError, OSError):
            return
        if path is None:
            return
        conn.send(maker(path))


def _exit_with_parent(sentinel: int) -> None:
    """End this worker when the batch process is gone (``kill -9``), even in mid-analysis."""
    multiprocessing.connection.wait([sentinel])
    os._exit(1)
