"""Worker pool: a failed start or workers that vanish before they get a capture end the run in one line.

Rows already written are kept; nothing hangs.
"""
from __future__ import annotations

import errno
import os
from multiprocessing.process import BaseProcess

import pytest

from wavefit.batch import pool
from wavefit.batch.command import run
from wavefit.batch.pool import WorkerStartError

from test_batch_fakes import delayed_analyse, write_lot
from test_batch_runner import batch_args, read_rows


def test_worker_that_cannot_be_started(tmp_path, monkeypatch):
    write_lot(tmp_path, [100.0] * 4)

    def no_process(self):
        raise OSError(errno.EAGAIN, os.strerror(errno.EAGAIN))

    monkeypatch.setattr(BaseProcess, "start", no_process)
    with pytest.raises(WorkerStartError) as caught:
        run(batch_args(tmp_path, "--workers", "2"), analyse=delayed_analyse)
    assert caught.value.exit_code == 5 and "cannot start a worker process" in str(caught.value)
    assert read_rows(tmp_path / "out.csv") == []


def test_workers_that_keep_vanishing_before_work_do_not_hang_the_run(tmp_path, monkeypatch):
    write_lot(tmp_path, [100.0] * 4)
    real_send = pool._send
    monkeypatch.setattr(pool, "_send", lambda worker, path: path is None and real_send(worker, path))
    with pytest.raises(WorkerStartError, match="keep ending before they get a capture"):
        run(batch_args(tmp_path, "--workers", "2"), analyse=delayed_analyse)
