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
    written = False
    try:
        partial = new_temporary(target)
        with open(partial, "wb") as handle:
            tomli_w.dump(_encodable(data), handle)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(partial, target)
        written = True
    except OSError as exc:
        raise write_failed("the file", target, exc, "the file it would replace is kept") from None
    finally:
        if partial is not None and not written:  # (none was made where the folder is missing)
            with contextlib.suppress(OSError):
                partial.unlink()


def _encodable(data: Any) -> Any:
    """``data`` with every text made encodable as UTF-8: a file name that is not UTF-8 comes
    from the system as text with lone surrogates (PEP 383), which TOML cannot hold (it ended
    ``calibrate`` in a traceback and left its temporary file); its bytes are written as
    backslash escapes."""
    if isinstance(data, str):
        return data.encode("utf-8", "surrogateescape").decode("utf-8", "backslashreplace")
    if isinstance(data, Mapping):
        return {key: _encodable(value) for key, value in data.items()}
    if isinstance(data, (list, tuple)):
        return [_encodable(value) for value in data]
    return data
