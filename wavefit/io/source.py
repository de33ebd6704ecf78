"""Open a capture file as a byte stream, transparently decompressing gzip.

Only the first bytes are read here (for sniffing); the body is streamed
straight from the file by the table parser.
"""
from __future__ import annotations

import gzip
import os
import stat
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

from ..errors import CaptureError

_GZIP_MAGIC = b"\x1f\x8b"
_OTHER_CONTAINERS = {
    b"PK\x03\x04": "a zip archive",
    b"BZh": "bzip2-compressed",
    b"\xfd7zXZ\x00": "xz-compressed",
    b"(\xb5/\xfd": "zstd-compressed",
    b"7z\xbc\xaf\x27\x1c": "a 7-zip archive",
}
_CHUNK = 64 * 1024

#: Exceptions a damaged gzip stream raises while being read.
GZIP_ERRORS: tuple[type[BaseException], ...] = (gzip.BadGzipFile, EOFError, zlib.error)


@dataclass(frozen=True)
class FileSource:
    """A capture file on disk and whether its bytes are gzip-compressed.

    Attributes
    ----------
    path
        The file.
    name
        The path as the caller wrote it, for messages.
    compressed
        True when the file starts with the gzip magic bytes.
    """

    path: Path
    name: str
    compressed: bool

    def open_binary(self) -> BinaryIO:
        """Open the (decompressed) bytes for reading from the start."""
        if self.compressed:
            return gzip.open(self.path, "rb")  # type: ignore[return-value]
        return open(self.path, "rb")

    def read_head(self, max_bytes: int, max_lines: int) -> tuple[bytes, bool]:
        """Read the first bytes, stopping after ``max_lines`` line ends or ``max_bytes``.

        Returns
        -------
        tuple of (bytes, bool)
            The bytes read and whether they are the whole file.
        """
        parts: list[bytes] = []
        size = lines = 0
        try:
            with self.open_binary() as stream:
                while size < max_bytes and lines <= max_lines:
                    chunk = stream.read(_CHUNK)
                    if not chunk:
                        return b"".join(parts), True
                    parts.append(chunk)
                    size += len(chunk)
                    lines += chunk.count(b"\n") or chunk.count(b"\r")
                complete = not stream.read(1)
        except GZIP_ERRORS as exc:
            raise CaptureError(damaged_gzip_message(self.name, exc)) from None
        return b"".join(parts), complete


def open_source(path: str | os.PathLike[str]) -> FileSource:
    """Check that ``path`` is a readable, non-empty file and detect compression.

    Parameters
    ----------
    path
        The capture file.

    Returns
    -------
    FileSource
        The file, ready for :meth:`FileSource.read_head`.

    Raises
    ------
    CaptureError
        When the file is missing, a directory, empty, unreadable or an archive
        format other than gzip.
    """
    name = os.fspath(path)
    file = Path(name)
    problem = not_a_regular_file(file)
    if problem is not None:
        raise CaptureError(f"capture file {name} {problem}")
    try:
        with open(file, "rb") as stream:
            magic = stream.read(8)
    except OSError as exc:
        raise CaptureError(f"cannot read {name}: {exc.strerror or exc}; check its permissions") from None
    if not magic:
        raise CaptureError(f"{name} is empty (0 bytes); export the capture again")
    for signature, kind in _OTHER_CONTAINERS.items():
        if magic.startswith(signature):
            raise CaptureError(f"{name} is {kind}, not CSV text; unpack it and read the CSV inside")
    return FileSource(file, name, magic.startswith(_GZIP_MAGIC))


def not_a_regular_file(path: Path) -> str | None:
    """What is wrong when ``path`` is not a regular file one can read to its end, else None.

    A FIFO or a device would block the reader or never end; a directory holds no capture.

    Parameters
    ----------
    path
        A capture, setup or spec file.

    Returns
    -------
    str or None
        The end of a message (``"is a directory; ..."``), or None for a regular file.
    """
    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        return "does not exist; check the path"
    except OSError as exc:
        return f"cannot be examined ({exc.strerror or exc}); check the path and its permissions"
    if stat.S_ISREG(mode):
        return None
    if stat.S_ISDIR(mode):
        return "is a directory; give the path of a file"
    if stat.S_ISFIFO(mode):
        return "is a pipe (FIFO), not a file; save the data to a file first"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "is a device, not a file; give the path of a file"
    return "is not a regular file; give the path of a file"


def damaged_gzip_message(name: str, exc: BaseException) -> str:
    """One-line message for a gzip stream that cannot be decompressed."""
    reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    return f"{name} is a damaged gzip file ({reason}); compress the capture again"
