"""Make the rows of a lot in worker processes and hand each to the parent as it finishes.

Rows are handed to ``sink`` in the parent process, so the parent alone writes
files. Signals, worker start-up and a worker that dies are handled here.
"""
from __future__ import annotations

import contextlib
import multiprocessing
import multiprocessing.connection
import os
import pkgutil
import signal
import sys
import threading
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Callable, Iterator, Sequence

from .rows import RowMaker


class Interrupted(Exception):
    """The run was stopped by a signal (SIGTERM); ``signum`` says which."""

    def __init__(self, signum: int) -> None:
        super().__init__(f"stopped by signal {signum}")
        self.signum = signum


def run_rows(paths: Sequence[str], maker: RowMaker, sink: Callable[[dict[str, Any]], None],
             workers: int = 1, progress: bool = False) -> int:
    """Make the row of every path, calling ``sink(row)`` in this process as each finishes.

    ``workers`` > 1 uses that many processes (rows then arrive in completion
    order). SIGTERM raises :class:`Interrupted`, Ctrl-C ``KeyboardInterrupt``,
    after the rows already handed to ``sink``; queued captures are cancelled and
    the workers end after their current capture. A capture whose analysis kills
    its worker process gets an ``error`` row. Returns the number of rows made.
    """
    with _stop_on_sigterm(), _progress(len(paths), progress) as bar:
        if workers <= 1 or len(paths) <= 1:
            for path in paths:
                sink(maker(path))
                bar.update(1)
            return len(paths)
        _run_pool(paths, maker, sink, workers, bar)
        return len(paths)


def _run_pool(paths: Sequence[str], maker: RowMaker, sink: Callable[[dict[str, Any]], None],
              workers: int, bar: Any) -> None:
    """Rows from ``workers`` processes; a capture whose analysis kills its worker gets an error row.

    When a worker dies, every unfinished capture's future fails. The pool
    hands out captures in order, so the ones in flight were among the first
    ``workers + 1`` unfinished (the pool queues one call beyond its workers).
    Those are analysed again one at a time, each in a fresh process, which
    finds the culprit. Then the rest go on in parallel.
    """
    remaining = list(paths)
    while remaining:
        unfinished = _parallel_pass(remaining, maker, sink, workers, bar)
        suspects, remaining = unfinished[:workers + 1], unfinished[workers + 1:]
        for path in suspects:
            sink(_isolated(path, maker))
            bar.update(1)


def _parallel_pass(paths: Sequence[str], maker: RowMaker, sink: Callable[[dict[str, Any]], None],
                   workers: int, bar: Any) -> list[str]:
    """Hand the rows of ``paths`` to ``sink``; return those left unfinished when a worker died."""
    finished: set[str] = set()
    pool = ProcessPoolExecutor(min(workers, len(paths)), mp_context=_worker_context(),
                               initializer=_init_worker, initargs=(maker,))
    try:
        futures = {pool.submit(_work, path): path for path in paths}
        for future in as_completed(futures):
            try:
                row = future.result()
            except BrokenProcessPool:
                break
            sink(row)
            finished.add(futures[future])
            bar.update(1)
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
    return [path for path in paths if path not in finished]


def _isolated(path: str, maker: RowMaker) -> dict[str, Any]:
    """The row of one capture analysed alone in a fresh worker process."""
    pool = ProcessPoolExecutor(1, mp_context=_worker_context(), initializer=_init_worker, initargs=(maker,))
    try:
        return pool.submit(_work, path).result()
    except BrokenProcessPool:
        return maker.crashed_row(path)
    finally:
        pool.shutdown(wait=True)


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
    context.set_forkserver_preload(["wavefit.analysis", "wavefit.batch.runner", "wavefit.batch.rows",
                                    *(f"wavefit.methods.{info.name}" for info in pkgutil.iter_modules(methods.__path__)
                                      if not info.name.startswith("_"))])
    return context


_maker: RowMaker | None = None


def _init_worker(maker: RowMaker) -> None:
    """Worker set-up: keep the maker; leave Ctrl-C and SIGTERM to the parent; die with it."""
    global _maker
    _maker = maker
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    parent = multiprocessing.parent_process()
    if parent is not None:
        threading.Thread(target=_exit_with_parent, args=(parent.sentinel,), daemon=True).start()


def _exit_with_parent(sentinel: int) -> None:
    """End this worker when the batch process is gone (``kill -9``), instead of waiting forever."""
    multiprocessing.connection.wait([sentinel])
    os._exit(1)


def _work(path: str) -> dict[str, Any]:
    assert _maker is not None
    return _maker(path)


@contextlib.contextmanager
def _stop_on_sigterm() -> Iterator[None]:
    def handler(signum: int, frame: object) -> None:
        raise Interrupted(signum)

    try:
        previous = signal.signal(signal.SIGTERM, handler)
    except ValueError:  # not the main thread: leave signals alone
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


class _NoBar:
    def update(self, n: int) -> None:
        pass


@contextlib.contextmanager
def _progress(total: int, enabled: bool) -> Iterator[Any]:
    if not enabled:
        yield _NoBar()
        return
    from tqdm import tqdm

    with tqdm(total=total, unit="capture", file=sys.stderr, dynamic_ncols=True) as bar:
        yield bar
