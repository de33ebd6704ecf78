"""Make the rows of a lot, in this process or in worker processes, and hand each to the parent.

Rows are handed to ``sink`` in the parent process, so the parent alone writes
files; each call of ``sink`` runs whole, even when a stop signal arrives during
it (see :mod:`.stop`).
"""
from __future__ import annotations

import contextlib
import sys
from typing import Any, Callable, Iterator, Sequence

from .pool import pooled_rows
from .rows import RowMaker
from .stop import StopSignals


def run_rows(paths: Sequence[str], maker: RowMaker, sink: Callable[[dict[str, Any]], None],
             workers: int = 1, progress: bool = False, stop: StopSignals | None = None) -> int:
    """Make the row of every path, calling ``sink(row)`` in this process as each finishes.

    ``workers`` > 1 uses that many processes (rows then arrive in completion
    order). SIGINT and SIGTERM raise :class:`~wavefit.batch.stop.Interrupted`
    after the rows already handed to ``sink``; the captures in progress get no
    row. ``stop`` is the run's signal handling; without it, this call sets up its
    own. A capture whose analysis kills its worker process gets an ``error`` row.
    Returns the number of rows made.
    """
    with contextlib.ExitStack() as stack:
        stop = stop if stop is not None else stack.enter_context(StopSignals())
        bar = stack.enter_context(_progress(len(paths), progress))

        def deliver(row: dict[str, Any]) -> None:
            with stop.deferred():
                sink(row)
                bar.update(1)

        if workers <= 1 or len(paths) <= 1:
            for path in paths:
                deliver(maker(path))
        else:
            pooled_rows(paths, maker, deliver, workers, stop)
    return len(paths)


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
