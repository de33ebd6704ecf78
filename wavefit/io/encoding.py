"""Decide how the bytes of a capture become text: UTF-8 (with or without BOM), UTF-16 (with BOM, or
without one when its NUL bytes show it), or Latin-1.

Binary files are refused here, before any parsing, so that a wrong file gives
one clear message instead of a cascade of "not a number" complaints.
"""
from __future__ import annotations

import codecs
from dataclasses import dataclass

from ..errors import CaptureError

_UTF16_BOMS = (codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)
_UTF32_BOMS = (codecs.BOM_UTF32_LE, codecs.BOM_UTF32_BE)
# Control bytes that do occur in text exports: tab, LF, VT, FF, CR and the DOS end-of-file mark.
_TEXT_CONTROLS = b"\t\n\x0b\x0c\r\x1a"
_NOT_SUSPECT = bytes(b for b in range(256) if b >= 0x20 or b in _TEXT_CONTROLS)
_ASCII = bytes(range(0x80))
_MAX_CONTROL_FRACTION = 0.005
_MAX_HIGH_FRACTION_LATIN1 = 0.10
#: UTF-16 without a byte-order mark: a table of numbers is ASCII, so each character's other byte
#: is NUL (more than 90 % of one byte position, allowing for letters beyond ASCII in a header),
#: and a NUL in the character's own byte is the NUL character, which text does not hold (under
#: 1 %); judged on at least 32 characters.
_MIN_UTF16_NUL_SHARE = 0.9
_MAX_TEXT_NUL_SHARE = 0.01
_MIN_UTF16_CHARACTERS = 32


@dataclass(frozen=True)
class DecodedHead:
    """The first bytes of a file as text, and the codec that reads the rest of it.

    Attributes
    ----------
    text
        The decoded text, without a byte-order mark.
    encoding
        Codec name for the body parser: ``"utf-8"``, ``"utf-16"`` (with its mark),
        ``"utf-16-le"`` or ``"utf-16-be"`` (without) or ``"latin-1"``.
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
    if raw.startswith(_UTF32_BOMS):  # (its little-endian mark begins with UTF-16's)
        raise CaptureError(f"{source} is UTF-32 text, which is not read; save it as UTF-8 (or UTF-16) text")
    wide = "utf-16" if raw.startswith(_UTF16_BOMS) else _utf16_without_mark(raw)
    if wide is not None:
        usable = raw if complete else raw[: len(raw) - len(raw) % 2]
        return DecodedHead(usable.decode(wide, errors="replace"), wide)
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


def _utf16_without_mark(raw: bytes) -> str | None:
    """``"utf-16-le"`` or ``"utf-16-be"`` for UTF-16 text written without a byte-order mark:
    every ASCII character then has a NUL byte beside it, so the NULs fill one of the two byte
    positions (at least :data:`_MIN_UTF16_NUL_SHARE` of it) and almost none of the other; None
    otherwise (a binary file has NULs at both)."""
    if len(raw) < 2 * _MIN_UTF16_CHARACTERS:
        return None
    even, odd = raw[0::2], raw[1::2]
    nul_even, nul_odd = even.count(0) / len(even), odd.count(0) / len(odd)
    if nul_odd >= _MIN_UTF16_NUL_SHARE and nul_even < _MAX_TEXT_NUL_SHARE:
        codec, own = "utf-16-le", even
    elif nul_even >= _MIN_UTF16_NUL_SHARE and nul_odd < _MAX_TEXT_NUL_SHARE:
        codec, own = "utf-16-be", odd
    else:
        return None
    # the characters' own bytes must read as text (16-bit binary numbers of small values also
    # have one byte of each pair NUL, but their other bytes are mostly control bytes)
    controls = len(own.translate(None, _NOT_SUSPECT))
    return codec if controls <= _MAX_CONTROL_FRACTION * len(own) else None


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
