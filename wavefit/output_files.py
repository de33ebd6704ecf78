"""Files a command writes: whether a path may be one, and a temporary file to write it through.

An output is refused before anything is analysed (exit 3) when it exists but is not a regular
file (``--out /dev/full`` run as root replaced the device with a text file; a FIFO was
replaced the same way; a symbolic link too, where the output is renamed into place), when its
folder is missing or cannot be written, when its name with the temporary file's additions is
too long for the folder, or when it is the same file as one of the command's inputs: the
capture, the setup, or a file the setup names (``--out`` of ``calibrate reference`` had
overwritten the capture and the setup, ``--plot`` a capture whose name had an image suffix).
Files are compared by identity (device and inode), so a hard or symbolic link to an input is
the input. A calibration command may renew the setup's calibration file of its own kind, which
it does not read.

An output is written to a new hidden file beside it and renamed over it (POSIX ``rename``):
the target then holds the old file or the new one, never part of one. The temporary file is
made with ``O_EXCL`` under a random name, so an existing file or link of that name is never
written through (a fixed ``OUT.partial`` followed a link planted there).
"""
from __future__ import annotations

import errno
import os
import secrets
import stat
from collections.abc import Iterable
from pathlib import Path

from .errors import WavefitError
from .report.safe_text import visible


class UnusableOutput(WavefitError):
    """An output is not a regular file, is in a folder that does not exist or cannot be written, or
    is the same file as another output or an input (exit code 3, before anything is written)."""

    exit_code = 3


def identity(path: str | os.PathLike[str]) -> str:
    """A key that is the same for every name of one file: its inode when it exists (hard and
    symbolic links, ``..``), else its resolved path."""
    try:
        status = os.stat(path)
    except OSError:
        return "path " + os.path.realpath(path)
    return f"inode {status.st_dev} {status.st_ino}"


def check_output(option: str, path: str | os.PathLike[str],
                 inputs: Iterable[str | os.PathLike[str]] = (), *, replaced: bool = True) -> None:
    """Refuse ``path`` as the output of ``option`` (module notes); a symbolic link only where the
    output is ``replaced`` by a renamed temporary file (the link itself would be replaced), not
    where it is written in place (batch's appended results file and database).

    Raises
    ------
    UnusableOutput
        Naming the option, the path and what is wrong.
    """
    if os.path.lexists(path) and ((replaced and os.path.islink(path)) or not os.path.isfile(path)):
        raise UnusableOutput(f"{option} {visible(path)} exists and is not a regular file; name a file to write")
    folder = Path(path).parent
    missing = folder_problem(folder)
    if missing:
        raise UnusableOutput(f"{option} {visible(path)}: folder {visible(folder)} {missing}; create it "
                             "or name a file in another folder")
    longest = _longest_name(folder) - TEMPORARY_EXTRA
    if len(os.fsencode(Path(path).name)) > longest:
        # (found after a whole lot had been analysed, as "cannot write plot")
        raise UnusableOutput(f"{option} {visible(path)}: the file name is too long for its folder (at most "
                             f"{longest} bytes, leaving room for the temporary file written beside it)")
    # an output is written beside itself (its temporary file), so its folder must take new files
    if not os.access(folder, os.W_OK | os.X_OK):
        raise UnusableOutput(f"{option} {visible(path)}: folder {visible(folder)} cannot be written; name "
                             "a file in another folder")
    target = identity(path)
    for given in inputs:
        if identity(given) == target:
            raise UnusableOutput(f"{option} {visible(path)} is the input {visible(given)}: it would be overwritten; "
                                 "name a file of its own")


def folder_problem(folder: Path) -> str:
    """Why ``folder`` cannot hold an output ('does not exist', 'is not a folder', 'cannot be
    reached: ...'), or '' when it is a folder. A name too long to look up does not exist (asking
    whether it is a folder raised "File name too long", exit 5 after the analysis); a folder
    behind one that may not be searched is not said to be missing."""
    try:
        status = os.stat(folder)
    except (FileNotFoundError, NotADirectoryError):
        return "does not exist"
    except OSError as exc:
        return "does not exist" if exc.errno == errno.ENAMETOOLONG else f"cannot be reached ({exc.strerror or exc})"
    return "" if stat.S_ISDIR(status.st_mode) else "is not a folder"


#: Bytes the temporary file's name adds to its target's (:func:`new_temporary`: 18, a leading dot,
#: a dot and eight hex digits, and ".partial") and to a lock file's, with a few to spare.
TEMPORARY_EXTRA = 24


def _longest_name(folder: Path) -> int:
    """The longest file name the folder's file system takes (255 bytes where it does not say)."""
    try:
        return int(os.pathconf(folder, "PC_NAME_MAX"))
    except (OSError, ValueError):
        return 255


def new_temporary(target: Path) -> Path:
    """A new, empty hidden file beside ``target`` with its suffix, made with the usual permissions
    (0666 less the umask, as the target itself would get) and never through an existing name."""
    while True:
        candidate = target.with_name(f".{target.stem}.{secrets.token_hex(4)}.partial{target.suffix}")
        try:
            os.close(os.open(candidate, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))
        except FileExistsError:
            continue
        return candidate
