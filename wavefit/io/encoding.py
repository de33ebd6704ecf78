"""Decide how the bytes of a capture become text: UTF-8 (with or without BOM), UTF-16 with BOM, or Latin-1.

Binary files are refused here, before any parsing, so that a wrong file gives
one clear message instead of a cascade of "not a number" complaints.
"""
from __future__ import annotations

import codecs
from dataclasses import dataclass

from ..errors import CaptureError

_UTF16_BOMS = (codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)
# Control bytes that do occur in text exports: tab, LF, VT, FF, CR and the DOS end-of-file mark.
_TEXT_CONTROLS = b"\t\n\x0b\x0c\r\x1a"
_NOT_SUSPECT = bytes(b for b in range(256) if b >= 0x20 or b in _TEXT_CONTROLS)
_ASCII = bytes(range(0x80))
_MAX_CONTROL_FRACTION = 0.005
_MAX_HIGH_FRACTION_LATIN1 = 0.10


@dataclass(frozen=True)
class DecodedHead:
    """The first bytes of a file as text, and the codec that reads the rest of it.

    Attributes
    ----------
    text
        The decoded text, without a byte-order mark.
    encoding
        Codec name for the body parser: ``"utf-8"``, ``"utf-16"`` or ``"latin-1"``.
    """

    text: str
    encoding: str


def decode_head(raw: bytes, *, complete: bool, source: str) -> DecodedHead:
    """Decode the first bytes of a capture, choosing the encoding.

    Parameters
    ----------
    raw
        The first bytes of the (decompressed) file.
    complete
        True when ``raw`` is the whole file, so a multi-byte character cut at
        the end is an error rather than an artefact of reading a prefix.
    source
        File name used in messages.

    Returns
    -------
    DecodedHead
        Text and codec name.

    Raises
    ------
    CaptureError
        When the bytes look binary.
    """
    if raw.startswith(_UTF16_BOMS):
        usable = raw if complete else raw[: len(raw) - len(raw) % 2]
        return DecodedHead(usable.decode("utf-16", errors="replace"), "utf-16")
    _refuse_binary(raw, source)
    if raw.startswith(codecs.BOM_UTF8):
        raw = raw[len(codecs.BOM_UTF8) :]
    text = _decode_utf8_prefix(raw, complete)
    if text is not None:
        return DecodedHead(text, "utf-8")
    high = len(raw.translate(None, _ASCII))
    if high > _MAX_HIGH_FRACTION_LATIN1 * len(raw):
        raise CaptureError(
            f"{source} looks binary, not text ({high} of the first {len(raw)} bytes are "
            "neither ASCII nor valid UTF-8); export the capture as CSV text"
        )
    return DecodedHead(raw.decode("latin-1"), "latin-1")


def _decode_utf8_prefix(raw: bytes, complete: bool) -> str | None:
    """UTF-8 text of ``raw``, tolerating a character cut at the end of a prefix; None if not UTF-8."""
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        cut_at_end = exc.reason == "unexpected end of data" and exc.start >= len(raw) - 3
        if complete or not cut_at_end:
            return None
        return raw[: exc.start].decode("utf-8")


def _refuse_binary(raw: bytes, source: str) -> None:
    """Raise when NUL bytes or too many control bytes show the data is not text."""
    if b"\x00" in raw:
        raise CaptureError(
            f"{source} looks binary, not text (it contains NUL bytes); "
            "export the capture as CSV text"
        )
    controls = len(raw.translate(None, _NOT_SUSPECT))
    if controls > _MAX_CONTROL_FRACTION * len(raw):
        raise CaptureError(
            f"{source} looks binary, not text ({controls} control bytes in the first "
            f"{len(raw)} bytes); export the capture as CSV text"
        )
