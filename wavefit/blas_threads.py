"""One BLAS thread for wavefit's fits, whatever the program imported first.

Our least-squares problems are tall and narrow: one BLAS thread is fastest, and
several threads per process (batch workers, a busy machine) were measured to slow
them down by 1.1-40x. Two mechanisms keep one thread:

- :func:`default_to_one_thread` (called when ``wavefit`` is imported) puts
  ``OPENBLAS_NUM_THREADS``, ``OMP_NUM_THREADS`` and ``MKL_NUM_THREADS`` = 1 in the
  environment unless the user set one of them. A numerical library loaded after
  that, and every process started from this one (batch workers), reads it.
- :func:`one_blas_thread` limits the thread pools of the libraries already loaded,
  with threadpoolctl, for the duration of an analysis: a program that imported
  numpy before wavefit has numpy's pool sized before the environment was set.

A thread count the user chose in the environment is kept by both.
"""
from __future__ import annotations

import functools
import os
from contextlib import contextmanager
from typing import Iterator

#: The environment variables by which OpenBLAS, OpenMP and MKL size their thread pools.
THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")

#: Whether the user set a thread count in the environment: read when ``wavefit`` is
#: imported, before :func:`default_to_one_thread` fills the variables in.
USER_CHOSE = any(name in os.environ for name in THREAD_VARIABLES)


def default_to_one_thread() -> None:
    """Put one BLAS thread in the environment unless the user set a thread count there."""
    for name in THREAD_VARIABLES:
        os.environ.setdefault(name, "1")


@functools.cache
def _pools():
    """threadpoolctl's view of the thread pools loaded, taken at the first analysis: finding them
    scans every shared library of the process (about 0.35 ms, a twentieth of a small analysis,
    each time), and a library loaded later read the environment that
    :func:`default_to_one_thread` had set when ``wavefit`` was imported, so its pool has one
    thread already."""
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Run the body with one thread in every BLAS and OpenMP pool loaded (the user's
    count from the environment is kept instead, when there is one)."""
    if USER_CHOSE:
        yield
        return
    with _pools().limit(limits=1):
        yield
