"""Writing a calibration file whole: a reader never sees half of one."""
from __future__ import annotations

import contextlib
import os
from pathlib import Path
from typing import Any, Mapping

import tomli_w

from ..output_files import new_temporary
from ..write_errors import write_failed


def write_toml_whole(data: Mapping[str, Any], path: str | os.PathLike[str]) -> None:
    """Write ``data`` as TOML to ``path``: to a new file beside it
    (:func:`wavefit.output_files.new_temporary`), synced, then renamed over it, so that ``path``
    holds the old file or the new one, never part of one (POSIX ``rename``).

    Raises
    ------
    OutputError
        When the file cannot be written (the old one, if any, is kept).
    """
    target = Path(path)
    partial: Path | None = None
    try:
        partial = new_temporary(target)
        with open(partial, "wb") as handle:
            tomli_w.dump(data, handle)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(partial, target)
    except OSError as exc:
        if partial is not None:  # (none was made where the folder is missing)
            with contextlib.suppress(OSError):
                partial.unlink()
        raise write_failed("the file", target, exc, "the file it would replace is kept") from None
