"""Turn INPUT arguments (files, folders, glob patterns) into the lot's captures, in order.

Order is "natural" by path (``part2`` before ``part10``), so the run chart
follows the capture numbering a bench writes.
"""
from __future__ import annotations

import glob
import os
import re
from pathlib import Path
from typing import Callable, Sequence

from ..errors import CaptureError
from ..report.safe_text import visible

#: File names taken from a folder: text tables, optionally gzip-compressed.
CAPTURE_SUFFIXES = (".csv", ".txt", ".tsv", ".dat", ".csv.gz", ".txt.gz", ".tsv.gz", ".dat.gz")
_GLOB_CHARS = re.compile(r"[*?\[]")
_DIGITS = re.compile(r"(\d+)")


def capture_order(path: str) -> tuple[object, ...]:
    """Sort key: the path with its digit runs compared as numbers."""
    return tuple((0, int(part), part) if part.isdigit() else (1, 0, part)
                 for part in _DIGITS.split(path) if part)


def is_capture_name(name: str) -> bool:
    """Whether a file name in a folder looks like a capture."""
    return name.lower().endswith(CAPTURE_SUFFIXES)


def capture_files(folder: str | os.PathLike[str]) -> list[Path]:
    """The capture files directly in ``folder`` (:func:`is_capture_name`), in name order.

    Everything so named but a folder is taken, so that a capture that cannot be read (a
    link whose target is gone, a special file) becomes an error row of the lot rather than
    a part missing from it without a word."""
    return [p for p in sorted(Path(folder).iterdir()) if not p.is_dir() and is_capture_name(p.name)]


def expand_inputs(inputs: Sequence[str], skip: Callable[[str], bool] = lambda path: False) -> list[str]:
    """Files named, files in named folders (not recursive), files matching patterns.

    Each path appears once, normalised (``os.path.normpath``), in capture
    order, and each file under one name only (:func:`_one_name_each`). Files for which ``skip``
    is true (the run's own outputs) are left out wherever they come from. A name that is no
    file, folder or matching pattern is an error raised before anything is analysed.
    """
    found: set[str] = set()
    for item in inputs:
        if os.path.isdir(item):
            matches = [str(p) for p in capture_files(item) if not skip(str(p))]
            if not matches:
                raise CaptureError(f"folder {visible(item)} has no capture files ({', '.join(CAPTURE_SUFFIXES)})")
        elif os.path.lexists(item):  # a file; a special file or a dead link is an error row, as in a folder
            matches = [] if skip(item) else [item]
        elif _GLOB_CHARS.search(item):
            matches = []
            for hit in glob.glob(item, recursive=True):
                if os.path.isdir(hit):
                    matches += [str(p) for p in capture_files(hit) if not skip(str(p))]
                elif not skip(hit):  # a file, or a name that cannot be read: an error row
                    matches.append(hit)
            if not matches:
                raise CaptureError(f"no capture file matches '{visible(item)}'")
        else:
            raise CaptureError(f"{visible(item)} does not exist; name capture files, folders or glob patterns")
        found.update(os.path.normpath(path) for path in matches)
    if not found:
        raise CaptureError("no capture files given; name files, folders or glob patterns")
    return _one_name_each(sorted(found, key=capture_order))


def _one_name_each(paths: list[str]) -> list[str]:
    """``paths`` (in capture order) with each file kept under one name, its shortest: one file
    reached by several names (a symbolic link to its folder, which a ``**`` pattern follows
    round a loop, or a hard link) is one capture, not a part counted many times in the lot's
    statistics (a fault campaign's link loop made one capture 41 "parts" with no spread). A
    link that leads nowhere (dead, or to itself) is one by the link itself, and becomes one
    error row; a name that cannot be examined at all is kept as it is."""
    names: dict[object, str] = {}
    for path in paths:
        try:
            info = os.stat(path)
        except OSError:
            try:
                info = os.lstat(path)
            except OSError:
                names[path] = path
                continue
        # (an inode number of 0 identifies no file, on some network and Windows file systems)
        key = (info.st_dev, info.st_ino) if info.st_ino else path
        if key not in names or len(path) < len(names[key]):
            names[key] = path
    return sorted(names.values(), key=capture_order)


def expand_part_folders(inputs: Sequence[str], skip: Callable[[str], bool] = lambda path: False) -> list[str]:
    """Folders named or matching patterns, each one part's captures for a method that takes
    several (a file of each ``[[captures]]`` entry's name), normalised, in capture order.

    A name that is no folder, or a pattern that matches none, is an error raised before
    anything is analysed.
    """
    found: set[str] = set()
    for item in inputs:
        hits = glob.glob(item, recursive=True) if _GLOB_CHARS.search(item) else [item]
        folders = [hit for hit in hits if os.path.isdir(hit) and not skip(hit)]
        if not folders:
            raise CaptureError(f"{visible(item)} is no folder; a method that takes several captures per part "
                               "reads each part's captures from a folder of its own")
        found.update(os.path.normpath(folder) for folder in folders)
    return sorted(found, key=capture_order)
