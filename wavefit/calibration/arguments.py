"""The ``calibrate`` command group's arguments (``channels`` and ``reference``), apart from their
runs (:mod:`.command`, :mod:`.reference_command`) so that the command line's parser is built
without loading the numerical libraries."""
from __future__ import annotations

import argparse
from typing import Any

#: The role taken as the reference channel when ``--reference`` is not given: the drive node's
#: channel, which every two-channel setup of the fixture maps.
DEFAULT_REFERENCE_ROLE = "drive"


def add_calibrate_parser(sub: Any) -> argparse.ArgumentParser:
    """Add the ``calibrate`` command group (``channels`` and ``reference`` under it) to the CLI's
    subparsers."""
    p = sub.add_parser("calibrate", help="turn a calibration capture into a file a setup names in [calibration]")
    kinds = p.add_subparsers(dest="calibration", metavar="KIND")
    ch = kinds.add_parser("channels", help="both probes on one node: gain ratio, offset difference and skew",
                          description="Compare the two channels of a capture in which both probes were on the "
                                      "same node with the same settings, and write the channel comparison file.")
    ch.add_argument("capture", metavar="CAPTURE", help="the comparison capture (CSV, optionally .gz)")
    ch.add_argument("--setup", required=True, help="setup file (TOML) whose [columns] map the two channels")
    ch.add_argument("--out", required=True, metavar="FILE.toml", help="the channel comparison file to write")
    ch.add_argument("--reference", metavar="ROLE",
                    help=f"the role of the reference channel (default: {DEFAULT_REFERENCE_ROLE!r} when mapped)")
    ch.add_argument("--json", action="store_true", help="print the comparison as JSON instead of the summary")
    ch.add_argument("--sample-interval", type=float, metavar="SECONDS",
                    help="sample interval when the capture has no time column")
    add_reference_parser(kinds)
    return p


def add_reference_parser(calibrate: Any) -> argparse.ArgumentParser:
    """Add ``reference`` to the subparsers of ``wavefit calibrate``."""
    p = calibrate.add_parser("reference", help="analyse a reference part's capture: the fixture's correction",
                             description="Analyse a capture of the fixture holding a reference part of known "
                                         "value instead of the part under test, and write the file that a "
                                         "setup names in [calibration] reference.")
    p.add_argument("capture", metavar="CAPTURE", help="the reference part's capture (CSV, optionally .gz)")
    p.add_argument("--setup", required=True, help="the setup of the measurements it will correct")
    p.add_argument("--part", required=True, metavar="'Q = VALUE ±TOL'",
                   help="the quantity the reference corrects and its known value, e.g. 'L = 100 uH ±0.1%%'")
    p.add_argument("--out", required=True, metavar="FILE.toml", help="the reference substitution file to write")
    p.add_argument("--sample-interval", type=float, metavar="SECONDS",
                   help="sample interval when the capture has no time column")
    return p
