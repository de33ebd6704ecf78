"""The error of an output that could not be written (disk full, no permission), in one line."""
from __future__ import annotations

import errno
import os

from .errors import OutputError
from .report.safe_text import visible

#: What to do about a failed write, by its errno.
_ADVICE = {errno.ENOSPC: "free some space", errno.EDQUOT: "free some space",
           errno.EACCES: "make it writable", errno.EPERM: "make it writable", errno.EROFS: "make it writable",
           errno.ENOENT: "create its folder"}
#: SQLite's primary result code SQLITE_FULL, "database or disk is full"
#: (https://www.sqlite.org/rescode.html#full); Python 3.11+ sets it on the exception.
_SQLITE_FULL = 13


def write_failed(what: str, path: str | os.PathLike[str], exc: Exception, kept: str = "") -> OutputError:
    """The error for a failed write of ``what`` to ``path``; ``kept`` says what was kept.

    ``exc`` is the ``OSError`` or ``sqlite3.Error`` of the failed write.
    """
    if isinstance(exc, OSError):
        reason, advice = exc.strerror or str(exc), _ADVICE.get(exc.errno or 0)
    else:
        reason = str(exc)
        advice = "free some space" if getattr(exc, "sqlite_errorcode", None) == _SQLITE_FULL else None
    kept = f"; {kept}" if kept else ""
    return OutputError(f"cannot write {what} {visible(path)}: {visible(reason)}{kept}; "
                       f"{advice or 'check free space and permissions'} and run the same command again")
