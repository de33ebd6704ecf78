"""Errors a user can cause, as one exception family.

The command line turns each into one line on stderr and the exit code named by
the class (see ``docs/cli.md``): 3 for an unreadable capture or a bad setup,
4 when the analysis is refused because its result could not be trusted, 5 when an
output file could not be written.
"""
from __future__ import annotations

from typing import Sequence


class WavefitError(Exception):
    """Base of every error a user can cause; carries the CLI exit code.

    ``source`` is set to the file's name when the message already names it (every
    error of the capture reader does), so that callers do not name it twice.
    """

    exit_code = 3
    source: str | None = None


class CaptureError(WavefitError):
    """The capture file cannot be read as a waveform table."""

    exit_code = 3


class SetupError(WavefitError):
    """The setup (TOML file or dict) is malformed or names something unknown."""

    exit_code = 3


class AnalysisRefused(WavefitError):
    """The data cannot give a trustworthy result (no edge, fit failed, too noisy)."""

    exit_code = 4


def had_warned(who: str, warnings: Sequence[str]) -> str:
    """A refusal's closing clause naming the first of ``warnings``, which is often its cause
    ("; the reader had warned (and 2 more): ..."), or '' where there are none."""
    if not warnings:
        return ""
    more = f" (and {len(warnings) - 1} more)" if len(warnings) > 1 else ""
    return f"; the {who} had warned{more}: {warnings[0]}"


class NothingToMeasure(AnalysisRefused):
    """The record does not hold what the method measures (no step for rl-step, no ring for
    lc-ring, or a result no real part gives): the front door names the method the record
    looks like, when another. ``source`` names the capture refused (None when the refusal
    concerns several)."""

    def __init__(self, message: str, source: str | None = None):
        super().__init__(message)
        self.source = source


class OutputError(WavefitError):
    """An output file (a plot, a calibration file) could not be written; what was written
    before, and the file it would have replaced, are kept."""

    exit_code = 5
