"""Writing a calibration file whole: a reader never sees half of one."""
from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Mapping

import tomli_w


def write_toml_whole(data: Mapping[str, Any], path: str | os.PathLike[str]) -> None:
    """Write ``data`` as TOML to ``path``: to a file beside it, synced, then renamed over it, so
    that ``path`` holds the old file or the new one, never part of one (POSIX ``rename``)."""
    target = Path(path)
    partial = target.with_name(target.name + ".partial")
    with open(partial, "wb") as handle:
        tomli_w.dump(data, handle)
        handle.flush()
        os.fsync(handle.fileno())
    os.replace(partial, target)
