"""``wavefit calibrate``: calibration captures turned into files a setup can name.

``wavefit calibrate channels CAPTURE --setup SETUP --out FILE`` compares the two channels
the setup maps (both probes on one node, the same settings) and writes the channel
comparison file (:mod:`wavefit.calibration.channel_file`). The reference channel is the role
given by ``--reference``, else ``drive`` when the setup maps it; the other is the remaining
channel role. Exit codes as the rest of the command line: 3 bad capture or setup, 4 a
comparison that cannot be trusted, 5 the file could not be written.
"""
from __future__ import annotations

import argparse
import datetime as dt
import json
import sys
from pathlib import Path
from typing import Any

from .. import __version__
from ..errors import SetupError
from ..report.safe_text import visible
from ..values import eng_pm
from .arguments import DEFAULT_REFERENCE_ROLE
from .channel_file import ChannelComparison, ChannelRole, write_channel_comparison
from .reference_command import run as run_reference

#: Coverage factor of the expanded uncertainties printed in the summary.
SUMMARY_COVERAGE_FACTOR = 2.0
#: Units a compared channel may carry: volts, or none written in the capture.
VOLTAGE_UNITS = ("V", "")


def run(args: argparse.Namespace) -> int:
    """Dispatch ``wavefit calibrate KIND`` (``channels`` or ``reference``); a missing KIND is a
    usage error."""
    if args.calibration is None:
        print("wavefit: error: name what to calibrate: wavefit calibrate channels|reference CAPTURE --setup SETUP "
              "--out FILE",
              file=sys.stderr)
        return 2
    if args.calibration == "reference":
        return run_reference(args)
    return _channels(args)


def channel_roles(columns: dict[str, str | int], reference: str | None, source: str) -> tuple[str, str]:
    """(reference role, other role) among the setup's channel roles (every role but ``time``).

    Raises
    ------
    SetupError
        When the setup maps other than two channel roles, or the reference role is not one of them.
    """
    roles = [role for role in columns if role != "time"]
    if len(roles) != 2:
        raise SetupError(f"{source}: the channel comparison needs exactly two channel roles in [columns], "
                         f"found {len(roles)} ({', '.join(roles) or 'none'})")
    chosen = reference if reference is not None else DEFAULT_REFERENCE_ROLE
    if chosen not in roles:
        hint = "" if reference is not None else "; name the reference channel with --reference ROLE"
        raise SetupError(f"{source}: no channel role {chosen!r} in [columns] (roles: {', '.join(roles)}){hint}")
    return chosen, next(role for role in roles if role != chosen)


def _channels(args: argparse.Namespace) -> int:
    from ..analysis import load_capture, with_columns_from_files
    from ..capture_checks import refuse_shared_columns
    from ..output_files import check_output
    from ..provenance import file_sha256
    from ..setup import load_setup
    from .compare import compare_channels

    setup = load_setup(args.setup)
    # (the setup's own channel comparison is not read here, so --out may renew it)
    inputs = [path for path in setup.named_files() if path != setup.calibration.channels]
    check_output("--out", args.out, (args.capture, args.setup, *inputs))
    reference_role, other_role = channel_roles(dict(setup.columns), args.reference, setup.source)
    written = dict(setup.columns)  # as the setup writes them (a column of another file is renamed below)
    interval = args.sample_interval if args.sample_interval is not None else setup.sample_interval
    capture = load_capture(args.capture, interval, setup.columns.get("time"))
    if setup.column_files:
        (capture,), setup = with_columns_from_files([capture], setup, interval)
    refuse_shared_columns([capture], setup.columns, setup.source)
    channels = {role: capture.channel(setup.columns[role]) for role in (reference_role, other_role)}
    for role, channel in channels.items():
        if channel.unit not in VOLTAGE_UNITS:
            raise SetupError(f"{setup.source}: role {role!r} is column {channel.header!r} in {channel.unit}; "
                             "the channel comparison compares two voltage channels")
    estimate = compare_channels(capture.time, channels[reference_role].values, channels[other_role].values)
    comparison = ChannelComparison(
        reference=ChannelRole(reference_role, written[reference_role]),
        other=ChannelRole(other_role, written[other_role]),
        gain_ratio=estimate.gain_ratio,
        offset_difference=estimate.offset_difference,
        skew=estimate.skew,
        made=dt.datetime.now(dt.timezone.utc).replace(microsecond=0),
        capture=str(Path(args.capture).absolute()),
        capture_sha256=file_sha256(args.capture),
        tool_version=__version__,
        note=estimate.note,
    )
    write_channel_comparison(comparison, args.out)
    if args.json:
        print(json.dumps(as_dict(comparison, estimate.edges), indent=2, allow_nan=False))
    else:
        from ..report.text import SAFETY_NOTE

        print(visible_lines(summary(comparison, estimate.edges, args.out)))
        print(SAFETY_NOTE)  # the step where probes and parts are moved
    return 0


def as_dict(comparison: ChannelComparison, edges: int) -> dict[str, Any]:
    """The comparison as JSON-ready data: the file's keys (``note`` "" when none), ``made`` as
    ISO 8601, and ``edges``."""
    data: dict[str, Any] = {
        "made": comparison.made.isoformat().replace("+00:00", "Z"),
        "tool_version": comparison.tool_version,
        "capture": comparison.capture,
        "capture_sha256": comparison.capture_sha256,
        "reference": {"role": comparison.reference.role, "column": comparison.reference.column},
        "other": {"role": comparison.other.role, "column": comparison.other.column},
        "edges": edges,
        "note": comparison.note,
    }
    for key in ("gain_ratio", "offset_difference", "skew"):
        q = getattr(comparison, key)
        data[key] = {"value": q.value, "standard_uncertainty": q.standard_uncertainty,
                     "degrees_of_freedom": q.degrees_of_freedom if q.degrees_of_freedom != float("inf") else None,
                     "unit": q.unit}
    return data


def summary(comparison: ChannelComparison, edges: int, out: str) -> str:
    """A few lines: which channels, the three quantities as value ± U (k = 2) with their
    degrees of freedom, the file's note if any, the file written."""
    k = SUMMARY_COVERAGE_FACTOR
    ratio, offset, skew = comparison.gain_ratio, comparison.offset_difference, comparison.skew
    rows = [("gain ratio", f"{ratio.value:.6f} ± {k * ratio.standard_uncertainty:.6f}", ratio),
            ("offset difference", eng_pm(offset.value, k * offset.standard_uncertainty, "V"), offset),
            ("skew", eng_pm(skew.value, k * skew.standard_uncertainty, "s"), skew)]
    lines = [f"channel comparison: {comparison.other.role} ({comparison.other.column}) against "
             f"{comparison.reference.role} ({comparison.reference.column}), {edges} edges"]
    lines += [f"  {name:<18} {text:<24} ({_freedom(q.degrees_of_freedom)} degrees of freedom)" for name, text, q in rows]
    if comparison.note:
        lines.append(f"  note: {comparison.note}")
    lines.append(f"  expanded uncertainties U = {k:g}·u; written to {out}")
    return "\n".join(lines)


#: Degrees of freedom past which the count is not printed: a type B bound's infinite ones make
#: Welch–Satterthwaite's sum huge (11 digits), and the coverage factor no longer changes.
MANY_FREEDOMS = 10_000


def _freedom(dof: float) -> str:
    """Degrees of freedom as printed: the count, or "over 10000" where it no longer matters."""
    return f"{dof:.0f}" if dof <= MANY_FREEDOMS else f"over {MANY_FREEDOMS}"


def visible_lines(text: str) -> str:
    """Each line with any control character from a file or a name shown escaped."""
    return "\n".join(visible(line) for line in text.split("\n"))
