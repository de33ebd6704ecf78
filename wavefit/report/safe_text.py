"""Text from files and users, made safe to show on a terminal and to store in a cell.

File names, lot names, column headers and preamble values come from outside the
program. Written raw to a terminal, a control character in them is obeyed
(``ESC [2J`` clears the screen, ``ESC ]0;…`` sets the window title, ``ESC c``
resets the terminal, U+202E turns the rest of the line around); written raw to
a CSV cell, it travels on to whatever shows the file later. Two helpers:

- :func:`visible` for anything shown to a person (terminal, plot, log): every
  control character becomes a visible escape such as ``\\x1b``. Idempotent, so
  text that went through it once may go through it again.
- :func:`escape_controls` / :func:`unescape_controls` for text stored in a file
  (results CSV, history database): the same escapes, but reversible, so a file
  name read back is the file name that was written.

:func:`spreadsheet_cell` and :func:`from_spreadsheet_cell` add the formula
guard of a CSV cell on top of :func:`escape_controls`.

References
----------
.. [1] The Unicode Standard, §4.5 "General Category": Cc (control), Cf (format, e.g.
   the bidirectional overrides U+202A–U+202E and isolates U+2066–U+2069), Cs
   (surrogate), Co (private use), Cn (unassigned), Zl/Zp (line/paragraph separator).
.. [2] ECMA-48 / ISO 6429, "Control Functions for Coded Character Sets": the C0
   and C1 control sets that terminals obey.
.. [3] OWASP Foundation, "CSV Injection" (leading ``= + - @`` make a spreadsheet
   evaluate a cell; a leading apostrophe keeps it text),
   https://owasp.org/www-community/attacks/CSV_Injection
"""
from __future__ import annotations

import re
import unicodedata

#: Unicode general categories that are not printed as themselves: controls, formatting
#: (bidirectional overrides, zero-width characters), lone surrogates (undecodable bytes of a
#: file name), private use, unassigned code points and line/paragraph separators.
_HIDDEN_CATEGORIES = frozenset({"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"})
#: Characters after a backslash that :func:`unescape_controls` reads as an escape.
_ESCAPE_LEADS = frozenset("\\xuU")
#: A cell starting with one of these is evaluated by a spreadsheet (OWASP [3]_); the
#: apostrophe is included so that exactly one leading apostrophe can be removed on reading.
#: Tab and carriage return, also on OWASP's list, never start a cell: they are escaped.
_FORMULA_START = ("=", "+", "-", "@", "'")
_ESCAPE = re.compile(r"\\(\\|x[0-9a-f]{2}|u[0-9a-f]{4}|U[0-9a-f]{8})")


def is_hidden(char: str) -> bool:
    """Whether ``char`` would act on a terminal or be invisible instead of showing itself."""
    return unicodedata.category(char) in _HIDDEN_CATEGORIES


def _code(char: str) -> str:
    point = ord(char)
    if point <= 0xFF:
        return f"\\x{point:02x}"
    if point <= 0xFFFF:
        return f"\\u{point:04x}"
    return f"\\U{point:08x}"


def visible(text: object) -> str:
    """``text`` with every hidden character shown as an escape (``\\x1b``, ``\\u202e``).

    For a terminal, a plot or a log. Backslashes are left alone, so the result is
    easy to read and applying it again changes nothing; it cannot be undone
    exactly (use :func:`escape_controls` for text that is read back).

    Examples
    --------
    >>> visible("lot\\x1b[2J\\u202eA")
    'lot\\\\x1b[2J\\\\u202eA'
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(_code(c) if is_hidden(c) else c for c in text)


def escape_controls(text: str) -> str:
    """``text`` with hidden characters escaped reversibly (see :func:`unescape_controls`).

    A hidden character becomes ``\\xNN``, ``\\uNNNN`` or ``\\UNNNNNNNN``. A
    backslash is doubled only where it would otherwise be read as the start of
    an escape: before ``\\``, ``x``, ``u``, ``U`` or a hidden character. Other
    backslashes (a Windows path) are kept as they are.
    """
    out = []
    for index, char in enumerate(text):
        if is_hidden(char):
            out.append(_code(char))
        elif char == "\\":
            following = text[index + 1:index + 2]
            out.append("\\\\" if following and (following in _ESCAPE_LEADS or is_hidden(following)) else "\\")
        else:
            out.append(char)
    return "".join(out)


def unescape_controls(text: str) -> str:
    """The text that :func:`escape_controls` turned into ``text``."""
    def original(match: re.Match[str]) -> str:
        body = match.group(1)
        return "\\" if body == "\\" else chr(int(body[1:], 16))

    return _ESCAPE.sub(original, text) if "\\" in text else text


def spreadsheet_cell(text: str) -> str:
    """A CSV text cell: hidden characters escaped, and a leading apostrophe when the
    cell would start like a formula (OWASP [3]_)."""
    cell = escape_controls(text)
    return "'" + cell if cell.startswith(_FORMULA_START) else cell


def from_spreadsheet_cell(cell: str) -> str:
    """The text that :func:`spreadsheet_cell` turned into ``cell``."""
    return unescape_controls(cell[1:] if cell.startswith("'") else cell)
