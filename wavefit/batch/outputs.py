"""The files of a run itself, kept apart from each other and from the captures.

A run reads its setup and spec files and writes the results CSV, its lock file, for a
method with curves the curves CSV beside the results, optionally the history database
(with SQLite's journal files beside it) and a plot.
None of them is ever taken as a capture, even when it lies in an input folder or
matches an input pattern or is named among the inputs (as a shell expands
``lot/*``), and no two of them may be the same file: the plot would overwrite the
results, or the database the plot.
"""
from __future__ import annotations

import functools
import os
from dataclasses import dataclass
from pathlib import Path

from ..errors import WavefitError
from ..report.safe_text import visible
from .run_lock import lock_path

#: Files SQLite keeps next to a database while it writes (rollback journal, write-ahead log).
_SQLITE_SIDE_FILES = ("-journal", "-wal", "-shm")


class UnusableOutput(WavefitError):
    """An output is not a regular file, is in a folder that does not exist or cannot be written, or
    is the same file as another output or the setup or spec (exit code 3, before anything is
    written)."""

    exit_code = 3


@dataclass(frozen=True)
class RunFiles:
    """The run's own files: the results CSV, the curves CSV, database and plot it may write,
    and the setup and spec files it reads."""

    results: Path
    db: Path | None = None
    plot: Path | None = None
    setup: Path | None = None
    spec: Path | None = None
    curves: Path | None = None

    def outputs(self) -> list[tuple[str, Path]]:
        """(option, path) of each output the user named, and the lock file."""
        items = [("--out", self.results), ("lock file", lock_path(self.results))]
        items += [(option, path) for option, path in (("curves file", self.curves), ("--db", self.db),
                                                      ("--plot", self.plot)) if path is not None]
        return items

    def files(self) -> list[Path]:
        """Every file of the run, SQLite's side files included."""
        found = [path for _, path in self.outputs()]
        found += [path for path in (self.setup, self.spec) if path is not None]
        if self.db is not None:
            found += [self.db.with_name(self.db.name + side) for side in _SQLITE_SIDE_FILES]
        return found

    def check(self) -> None:
        """Refuse an output that exists but is not a regular file (a device such as ``/dev/full``
        would be read forever, a folder cannot be written), and two of the run's files that
        are the same file."""
        for option, path in self.outputs():
            if os.path.lexists(path) and not os.path.isfile(path):
                raise UnusableOutput(f"{option} {visible(path)} exists and is not a regular file; "
                                     "name a file to write")
            folder = path.parent
            if not folder.is_dir():
                raise UnusableOutput(f"{option} {visible(path)}: folder {visible(folder)} does not exist; create it "
                                     "or name a file in another folder")
            # every output is written beside itself (the lock file, a plot's temporary file,
            # SQLite's journal), so its folder must take new files: known before a lot is analysed
            if not os.access(folder, os.W_OK | os.X_OK):
                raise UnusableOutput(f"{option} {visible(path)}: folder {visible(folder)} cannot be written; name "
                                     "a file in another folder")
        configs = [(option, path) for option, path in (("--setup", self.setup), ("--spec", self.spec))
                   if path is not None]
        seen: dict[str, str] = {}
        for option, path in [*self.outputs(), *configs]:
            key = _identity(path)
            if key in seen:
                raise UnusableOutput(f"{seen[key]} and {option} name the same file {visible(path)}; "
                                  "give each output its own file")
            seen[key] = option

    def is_own(self, path: str | os.PathLike[str]) -> bool:
        """Whether ``path`` is one of the run's own files (under any of its names)."""
        return _identity(path) in self._own

    @functools.cached_property
    def _own(self) -> frozenset[str]:
        return frozenset(_identity(path) for path in self.files())


def _identity(path: str | os.PathLike[str]) -> str:
    """A key that is the same for every name of one file: its inode when it exists (hard and
    symbolic links, ``..``), else its resolved path."""
    try:
        status = os.stat(path)
    except OSError:
        return "path " + os.path.realpath(path)
    return f"inode {status.st_dev} {status.st_ino}"
