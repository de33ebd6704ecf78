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

from ..output_files import UnusableOutput, check_output, identity
from ..report.safe_text import visible
from .run_lock import lock_path

#: Files SQLite keeps next to a database while it writes (rollback journal, write-ahead log).
_SQLITE_SIDE_FILES = ("-journal", "-wal", "-shm")


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
    #: files the setup names (calibrations, columns from other files), which no output may be
    named: tuple[Path, ...] = ()

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
        would be read forever, a folder cannot be written; a link for the plot, which is replaced),
        whose folder is missing or cannot be written, whose name is too long, or that is a file the
        setup names (:func:`wavefit.output_files.check_output`), and two of the run's files that
        are the same file."""
        for option, path in self.outputs():
            # every output is written beside itself (the lock file, a plot's temporary file,
            # SQLite's journal), so its folder must take new files: known before a lot is analysed
            check_output(option, path, self.named, replaced=path == self.plot)
        configs = [(option, path) for option, path in (("--setup", self.setup), ("--spec", self.spec))
                   if path is not None]
        seen: dict[str, str] = {}
        for option, path in [*self.outputs(), *configs]:
            key = identity(path)
            if key in seen:
                raise UnusableOutput(f"{seen[key]} and {option} name the same file {visible(path)}; "
                                  "give each output its own file")
            seen[key] = option

    def is_own(self, path: str | os.PathLike[str]) -> bool:
        """Whether ``path`` is one of the run's own files (under any of its names)."""
        return identity(path) in self._own

    @functools.cached_property
    def _own(self) -> frozenset[str]:
        return frozenset(identity(path) for path in self.files())
