"""Read a capture file: open, decode, sniff the layout, parse the body, check and assemble."""
from __future__ import annotations

import os
import re
from collections.abc import Sequence
from dataclasses import replace

from ..errors import CaptureError
from .assemble import Table, assemble
from .body import Body, line_numbers, read_body, without_cut_last_line
from .capture import Capture
from .encoding import decode_head
from .layout import Layout, sniff_layout
from .preamble import Preamble, contradicts, read_preamble
from .source import open_source
from .timebase import Printing

#: The layout is sniffed on at most this many lines ...
SNIFF_LINES = 200
#: ... and at most this many bytes from the start of the (decompressed) file.
SNIFF_BYTES = 1 << 20
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f]")


def read_capture(
    path: str | os.PathLike[str],
    *,
    sample_interval: float | None = None,
    time_column: str | int | None = None,
) -> Capture:
    """Read a waveform capture from a CSV-like text file (optionally gzip-compressed).

    The separator, decimal mark, header row, units and preamble are found from
    the first lines; see ``docs/capture-format.md`` for what is accepted.

    Parameters
    ----------
    path
        The capture file (``.csv``, ``.txt``, ``.csv.gz``, ...).
    sample_interval
        Seconds between samples. Overrides a sample interval in the preamble
        and, with a warning, a time column (which is then kept as a channel).
        Needed when the file holds no time information.
    time_column
        The time column by header, header without unit, or 0-based place in
        the file; found automatically when None.

    Returns
    -------
    Capture
        Time in seconds, channels scaled to SI units, metadata and warnings.

    Raises
    ------
    wavefit.errors.CaptureError
        With a one-line message when the file cannot be read as a uniformly
        sampled waveform table.
    """
    try:
        return _read(path, sample_interval, time_column)
    except CaptureError as exc:
        exc.source = os.fspath(path)  # every message of the reader names the file
        raise


def _read(path: str | os.PathLike[str], sample_interval: float | None, time_column: str | int | None) -> Capture:
    """:func:`read_capture` without the marking of its errors."""
    source = open_source(path)
    state = file_state(source.path)
    raw, complete = source.read_head(SNIFF_BYTES, SNIFF_LINES)
    head = decode_head(raw, complete=complete, source=source.name)
    layout = sniff_layout(head.text, complete=complete, source=source.name, max_lines=SNIFF_LINES)
    preamble = read_preamble(layout.preamble, layout.sep)
    body, cut = without_cut_last_line(source, layout, head.encoding, read_body(source, layout, head.encoding))
    if body.footer:
        preamble = _with_footer(preamble, body.footer, layout.sep)
    if cut:
        preamble = replace(preamble, warnings=(*preamble.warnings, cut))
    if source.nul_tail:
        preamble = replace(preamble, warnings=(*preamble.warnings, (
            f"the file ends in {source.nul_tail:,} NUL bytes after its text (a file cut short while it was "
            "written?); the text before them was read")))

    def where(rows: Sequence[int]) -> list[str]:
        return [f"line {n}" for n in line_numbers(source, layout, head.encoding, rows)]

    table = Table(
        source=source.name,
        headers=layout.headers,
        columns=body.columns,
        where=where,
        has_header=layout.header_line is not None,
        preamble=preamble,
        positions=layout.fields,
        aliases=layout.aliases,
        clock_columns=frozenset(body.clock_resolution),
        printing=_printing(layout, body),
        text_columns=body.text_cells,
    )
    capture = assemble(table, sample_interval=sample_interval, time_column=time_column)
    return replace(capture, file_state=state)


def file_state(path: str | os.PathLike[str]) -> tuple[int, int]:
    """The file's size in bytes and modification time in nanoseconds (``Capture.file_state``)."""
    status = os.stat(path)
    return status.st_size, status.st_mtime_ns


def _printing(layout: Layout, body: Body) -> dict[int, Printing]:
    """How each read column is printed: clock stamps by their resolution, numbers by their form."""
    forms = {k: Printing(digits=n) if scientific else Printing(step=10.0 ** -n)
             for k, (scientific, n) in layout.printed.items()}
    return {**forms, **{k: Printing(step=r) for k, r in body.clock_resolution.items()}}


def _with_footer(preamble: Preamble, footer: tuple[tuple[int, str], ...], sep: str) -> Preamble:
    """The preamble plus what the lines after the table say (pairs by their key, text as
    ``footer1``, ...) and a warning that counts them; a time hint there is used when the
    preamble has none."""
    texts = [(n, _CONTROL.sub("", text).strip()) for n, text in footer]
    texts = [(n, text) for n, text in texts if text]
    if not texts:
        return preamble  # only the DOS end-of-file mark (Ctrl-Z)
    after = read_preamble(texts, sep, text_key="footer", taken=preamble.metadata)
    first, last = texts[0][0], texts[-1][0]
    where = f"line {first}" if first == last else f"lines {first}-{last}"
    count = f"{len(texts)} line{'s' if len(texts) > 1 else ''}"
    warning = (
        f"{count} after the table ({where}, starting {texts[0][1][:40]!r}) "
        f"{'is' if len(texts) == 1 else 'are'} not data: ignored, kept as footer metadata"
    )
    interval = preamble.sample_interval is None and after.sample_interval is not None
    other = preamble.other_interval or after.other_interval
    if (preamble.sample_interval is not None and after.sample_interval is not None
            and contradicts(after.sample_interval, preamble.sample_interval)):
        other = other or f"{after.interval_line} gives {after.sample_interval:.6g} s"
    return replace(
        preamble,
        metadata={**preamble.metadata, **after.metadata},
        sample_interval=after.sample_interval if interval else preamble.sample_interval,
        interval_line=after.interval_line if interval else preamble.interval_line,
        interval_without_unit=after.interval_without_unit if interval else preamble.interval_without_unit,
        start_time=preamble.start_time if preamble.start_time is not None else after.start_time,
        warnings=(*preamble.warnings, *after.warnings, warning),
        other_interval=other,
    )
