"""Checks of the captures against the setup before a method sees them.

* Isolated glitches (:mod:`wavefit.signal.glitches`) are replaced by the mean of
  their neighbours and counted in a warning; a record with more of them than the
  reader would fill in as missing cells is refused as damaged.
* Two roles that resolve to one column of a capture are refused: a fit of a
  channel against itself gives numbers (L = 6e-19 H) but no measurement. (A
  role on the time column is refused by the lookup itself.)
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np

from .errors import AnalysisRefused, SetupError
from .io.assemble import MAX_MISSING_FRACTION
from .io.capture import Capture
from .signal.glitches import GLITCH_NOISE, GLITCH_SHAPE, repair_glitches

_LISTED = 5
#: Isolated samples at least this many, evenly spaced to within RECURRING_SPREAD samples, recur
#: with the record's drive: a spike at each edge, not a random fault (three make two equal gaps).
RECURRING_COUNT = 3
RECURRING_SPREAD = 2


def recurring(rows) -> bool:
    """Whether isolated samples at indices ``rows`` (sorted) recur at one interval."""
    if len(rows) < RECURRING_COUNT:
        return False
    gaps = [int(b) - int(a) for a, b in zip(rows[:-1], rows[1:])]
    return max(gaps) - min(gaps) <= RECURRING_SPREAD


def without_glitches(capture: Capture) -> Capture:
    """The capture with isolated glitches replaced, and a warning per channel that had any.

    Parameters
    ----------
    capture
        A capture as read.

    Returns
    -------
    Capture
        ``capture`` itself when no glitch was found.

    Raises
    ------
    AnalysisRefused
        When a channel holds more glitches than ``MAX_MISSING_FRACTION`` of its samples
        (at least one is allowed): the record is damaged, not glitched.
    """
    # a cell near the float range's end (1e308) overflows the differences to inf, which the tests
    # take as far beyond the noise: it is found as a glitch, without numpy's warnings on stderr
    with np.errstate(over="ignore", invalid="ignore"):
        repaired, found = repair_glitches(capture, [ch.levels.step for ch in capture.channels])
    warnings = []
    for header, rows in found.items():
        allowed = max(1, int(MAX_MISSING_FRACTION * capture.rows))
        if rows.size > allowed:
            raise AnalysisRefused(
                f"{capture.source}: column {header!r} has {rows.size} isolated samples far from both "
                f"neighbours (more than {allowed}); the record is damaged: export it again")
        listed = ", ".join(f"{capture.time[i]:.6g} s" for i in rows[:_LISTED]) + (", ..." if rows.size > _LISTED else "")
        what = "(a glitch)"
        if recurring(rows):
            period = float(capture.time[rows[-1]] - capture.time[rows[0]]) / (rows.size - 1)
            what = (f"(recurring every {period:.4g} s: spikes at a fixed interval, such as one at each switching "
                    "instant from a capacitance charging or pickup from the generator, rather than random faults)")
        warnings.append(
            f"column {header!r}: {rows.size} isolated sample{'s' if rows.size > 1 else ''} ({listed}) "
            f"departed from both neighbours by more than {GLITCH_SHAPE:g} times the waveform's local "
            f"curvature and {GLITCH_NOISE:g} noise standard deviations {what} and "
            f"{'were' if rows.size > 1 else 'was'} replaced by the mean of the neighbours")
    if not warnings:
        return capture
    return replace(repaired, warnings=(*capture.warnings, *warnings))


def refuse_shared_columns(captures: Sequence[Capture], columns: Mapping[str, str | int], source: str) -> None:
    """Refuse a setup whose roles name one column twice (also when written differently).

    Parameters
    ----------
    captures
        The captures to be analysed.
    columns
        The setup's role -> column mapping.
    source
        The setup's name, for the message.

    Raises
    ------
    SetupError
        Naming the two roles and the column.
    """
    for capture in captures:
        taken: dict[int, str] = {}
        for role, key in columns.items():
            if role == "time":
                continue
            channel = capture.channel(key)
            if id(channel) in taken:
                raise SetupError(
                    f"{source}: roles {taken[id(channel)]!r} and {role!r} both name column {channel.header!r} of "
                    f"{capture.source}; map each role to its own column")
            taken[id(channel)] = role
