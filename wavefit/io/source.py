"""Open a capture file as a byte stream, transparently decompressing gzip.

Only the first bytes are read here (for sniffing); the body is streamed
straight from the file by the table parser.
"""
from __future__ import annotations

import gzip
import io
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
    #: where the file's text ends when a run of NUL bytes fills the rest of it (None: at its end)
    end: int | None = None

    @property
    def nul_tail(self) -> int:
        """How many NUL bytes follow the text (:func:`nul_tail_start`; 0 when none were found)."""
        return 0 if self.end is None else self.path.stat().st_size - self.end

    def open_binary(self) -> BinaryIO:
        """Open the (decompressed) bytes for reading from the start, up to ``end`` when set."""
        if self.compressed:
            return gzip.open(self.path, "rb")  # type: ignore[return-value]
        if self.end is not None:
            return io.BufferedReader(_Bounded(open(self.path, "rb", buffering=0), self.end))  # type: ignore[return-value]
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
    compressed = magic.startswith(_GZIP_MAGIC)
    return FileSource(file, name, compressed, None if compressed else nul_tail_start(file))


#: Blocks of this many bytes that are all NUL make a file's NUL tail (text never holds one).
_NUL_BLOCK = 4096


def nul_tail_start(path: Path) -> int | None:
    """Where a run of NUL bytes that fills the end of the file begins, or None when its last
    block of :data:`_NUL_BLOCK` bytes is not all NUL.

    A file extended but not yet written when the power failed (a data logger's card) ends in
    NULs; read as text they were one cell of one line, and held in memory about eleven times
    over (20 GB of them exhausted the machine). The all-NUL blocks are found by bisection
    (every block after the text is all NUL, none before it is), a few reads whatever the size."""
    size = path.stat().st_size
    blocks = -(-size // _NUL_BLOCK)  # the last one may be short
    if blocks < 2:
        return None
    with open(path, "rb") as stream:

        def all_nul(block: int) -> bool:
            stream.seek(block * _NUL_BLOCK)
            data = stream.read(_NUL_BLOCK)
            return not data.strip(b"\0")

        if not all_nul(blocks - 1):
            return None
        lo, hi = 0, blocks - 1  # lo holds text, hi is all NUL (block 0 starts with the text)
        while hi - lo > 1:
            mid = (lo + hi) // 2
            lo, hi = (lo, mid) if all_nul(mid) else (mid, hi)
        stream.seek(lo * _NUL_BLOCK)
        data = stream.read(_NUL_BLOCK)
    end = lo * _NUL_BLOCK + len(data.rstrip(b"\0"))
    return end if size - end >= _NUL_BLOCK else None  # (a few NULs are left to the table's own message)


class _Bounded(io.RawIOBase):
    """A file's bytes up to ``end``, as if the file ended there (seekable, for the tail reads)."""

    def __init__(self, raw: BinaryIO, end: int) -> None:
        super().__init__()
        self._raw, self._end = raw, end

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def tell(self) -> int:
        return self._raw.tell()

    def seek(self, offset: int, whence: int = io.SEEK_SET) -> int:
        base = {io.SEEK_SET: 0, io.SEEK_CUR: self._raw.tell(), io.SEEK_END: self._end}[whence]
        return self._raw.seek(min(max(base + offset, 0), self._end))

    def readinto(self, buffer: bytearray | memoryview) -> int:  # type: ignore[override]
        n = min(len(buffer), self._end - self._raw.tell())
        return self._raw.readinto(memoryview(buffer)[:n]) if n > 0 else 0

    def close(self) -> None:
        self._raw.close()
        super().close()


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
