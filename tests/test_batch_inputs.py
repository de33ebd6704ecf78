"""INPUT expansion: files, folders, patterns; natural capture order; errors before any analysis."""
from __future__ import annotations

import os

import pytest

from wavefit.batch.inputs import expand_inputs
from wavefit.errors import CaptureError


@pytest.fixture()
def lot(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "lot").mkdir()
    for name in ("p1.csv", "p2.csv.gz", "p10.csv", "notes.md", "p3.TXT"):
        (tmp_path / "lot" / name).write_text("x", encoding="utf-8")
    (tmp_path / "lot" / "sub").mkdir()
    (tmp_path / "lot" / "sub" / "p4.csv").write_text("x", encoding="utf-8")
    return tmp_path


def test_folder_gives_its_captures_in_natural_order(lot):
    assert expand_inputs(["lot"]) == [os.path.join("lot", n) for n in ("p1.csv", "p2.csv.gz", "p3.TXT", "p10.csv")]


def test_patterns_files_and_duplicates(lot):
    got = expand_inputs(["lot/p1*.csv", "./lot/p1.csv", "lot/notes.md", "lot/**/p4.csv"])
    assert got == [os.path.join("lot", "notes.md"), os.path.join("lot", "p1.csv"), os.path.join("lot", "p10.csv"),
                   os.path.join("lot", "sub", "p4.csv")]


@pytest.mark.parametrize("item, fragment", [
    ("lot/p99.csv", "does not exist"), ("lot/*.wav", "no capture file matches"), ("lot/sub/..", None)])
def test_errors_before_anything_runs(lot, item, fragment):
    if fragment is None:
        assert expand_inputs([item])  # a folder written with '..' still works
        return
    with pytest.raises(CaptureError, match=fragment):
        expand_inputs([item])


def test_empty_folder_is_an_error(lot):
    (lot / "empty").mkdir()
    with pytest.raises(CaptureError, match="has no capture files"):
        expand_inputs(["empty"])


def test_a_capture_link_to_nowhere_stays_in_the_lot(lot):
    # a capture that cannot be read must become an error row, not a part missing from the lot
    # without a word (a link whose target is gone was dropped from folders and patterns)
    os.symlink(lot / "gone.csv", lot / "lot" / "p5.csv")
    assert os.path.join("lot", "p5.csv") in expand_inputs(["lot"])
    assert os.path.join("lot", "p5.csv") in expand_inputs(["lot/p*.csv"])


def test_a_special_file_is_an_error_row_not_a_hang(lot):
    # a FIFO, or a link to /dev/zero, in a lot's folder hung the run: its sha256 was taken by
    # opening it (blocked on the FIFO, /dev/zero read forever); named on the command line the
    # same files were said not to exist
    from wavefit.batch.rows import sha256_file

    os.mkfifo(lot / "lot" / "p6.csv")
    os.symlink("/dev/zero", lot / "lot" / "p7.csv")
    for name, reason in (("p6.csv", "is a pipe"), ("p7.csv", "is a device")):
        path = os.path.join("lot", name)
        assert path in expand_inputs(["lot"]) and expand_inputs([path]) == [path]
        with pytest.raises(CaptureError, match=reason):
            sha256_file(path)


def test_one_file_under_many_names_is_one_capture(lot):
    # a link from a sub-folder back to its parent, which a '**' pattern follows round and round,
    # a link to itself, and a hard link: each file once, under its shortest name (a fault
    # campaign's loop made one capture 41 parts of the lot, with no spread)
    os.symlink(lot / "lot", lot / "lot" / "sub" / "loop")
    os.symlink("self.csv", lot / "lot" / "self.csv")
    os.link(lot / "lot" / "p1.csv", lot / "lot" / "sub" / "p1_again.csv")
    got = expand_inputs(["lot/**/*.csv"])
    assert got == [os.path.join("lot", n) for n in ("p1.csv", "p10.csv", "self.csv", os.path.join("sub", "p4.csv"))]


def test_files_whose_file_system_gives_no_inode_number_stay_apart(lot, monkeypatch):
    # an inode number of 0 identifies no file (some network and Windows file systems report it):
    # distinct captures were merged into one (a review)
    real = os.stat

    class NoInode:
        def __init__(self, info):
            self._info = info

        st_ino = 0

        def __getattr__(self, name):
            return getattr(self._info, name)

    monkeypatch.setattr(os, "stat", lambda path, *a, **k: NoInode(real(path, *a, **k)))
    assert expand_inputs(["lot"]) == [os.path.join("lot", n) for n in ("p1.csv", "p2.csv.gz", "p3.TXT", "p10.csv")]
