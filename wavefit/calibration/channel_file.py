"""The channel comparison file: what ``wavefit calibrate channels`` writes and a setup's
``[calibration] channels`` names.

Two channels of one scope recorded the same node with the same settings. Of the other
channel against the reference channel the file keeps the gain ratio (other reading over
reference reading for the same voltage), the offset difference (other reading minus ratio
times reference reading, volts) and the skew (how much later the other channel shows an
event, seconds), each with its standard uncertainty and degrees of freedom, and when, from
which capture (its sha256) and by which wavefit it was made. The file is TOML, written by
:mod:`tomli_w`, so a technician can read it and a quality system can archive it.

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of uncertainty
   in measurement (GUM), 4.2 (type A evaluation) and G.4 (effective degrees of freedom).
.. [2] TOML v1.0.0, https://toml.io/en/v1.0.0 (offset date-times for ``made``).
"""
from __future__ import annotations

import datetime as dt
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping


from ..errors import SetupError
from .toml_file import write_toml_whole

#: The ``kind`` written in every channel comparison file, checked when one is read.
KIND = "channel comparison"
#: The three estimated quantities of the file, each a table with ``value``,
#: ``standard_uncertainty``, ``degrees_of_freedom`` and ``unit``.
ESTIMATE_KEYS = ("gain_ratio", "offset_difference", "skew")
TOP_LEVEL_KEYS = ("kind", "made", "tool_version", "capture", "capture_sha256", "reference", "other",
                  *ESTIMATE_KEYS)
#: Keys a file may hold or lack: ``note``, a line on how an uncertainty was bounded (files
#: written before it existed have none).
OPTIONAL_KEYS = ("note",)
ROLE_KEYS = ("role", "column")
ESTIMATE_FIELDS = ("value", "standard_uncertainty", "degrees_of_freedom", "unit")


@dataclass(frozen=True)
class Estimated:
    """One estimated quantity: its value, standard uncertainty, degrees of freedom (infinite
    when the uncertainty is known, not estimated) and SI unit ("" for a ratio)."""

    value: float
    standard_uncertainty: float
    degrees_of_freedom: float
    unit: str


@dataclass(frozen=True)
class ChannelRole:
    """A channel as the setup names it: its role (``drive``, ``sense``) and its column."""

    role: str
    column: str | int


@dataclass(frozen=True)
class ChannelComparison:
    """The other channel against the reference channel, on one node with the same settings.

    Attributes
    ----------
    reference, other
        The two channels (roles and columns as in the setup used for the comparison).
    gain_ratio
        Other reading / reference reading for the same voltage.
    offset_difference
        Other reading − gain_ratio · reference reading, V.
    skew
        How much later the other channel shows the same event, s (negative: earlier).
    made
        When the comparison capture was analysed (UTC).
    capture, capture_sha256
        The comparison capture's path and the sha256 of its bytes.
    tool_version
        The wavefit that made the file.
    note
        What the reader of the file should know about an estimate (e.g. a bound added to
        u(skew) under coherent sampling); empty when nothing.
    """

    reference: ChannelRole
    other: ChannelRole
    gain_ratio: Estimated
    offset_difference: Estimated
    skew: Estimated
    made: dt.datetime
    capture: str
    capture_sha256: str
    tool_version: str
    note: str = ""

    def age(self, now: dt.datetime | None = None) -> dt.timedelta:
        """Time since the comparison was made."""
        return (now or dt.datetime.now(dt.timezone.utc)) - self.made


def write_channel_comparison(comparison: ChannelComparison, path: str | os.PathLike[str]) -> None:
    """Write ``comparison`` as TOML to ``path`` (replaced whole: written beside, then renamed).

    Infinite degrees of freedom are written as TOML's ``inf``.
    """
    data: dict[str, Any] = {
        "kind": KIND,
        "made": comparison.made,
        "tool_version": comparison.tool_version,
        "capture": comparison.capture,
        "capture_sha256": comparison.capture_sha256,
        "reference": {"role": comparison.reference.role, "column": comparison.reference.column},
        "other": {"role": comparison.other.role, "column": comparison.other.column},
    }
    for key in ESTIMATE_KEYS:
        q: Estimated = getattr(comparison, key)
        data[key] = {"value": q.value, "standard_uncertainty": q.standard_uncertainty,
                     "degrees_of_freedom": q.degrees_of_freedom, "unit": q.unit}
    if comparison.note:
        data["note"] = comparison.note
    write_toml_whole(data, path)


#: The unit of a comparison's skew; an empty unit is taken as it (a hand edited skew in "V" was
#: accepted: a fault campaign's file).
SKEW_UNIT = "s"


def read_channel_comparison(path: str | os.PathLike[str]) -> ChannelComparison:
    """Read a channel comparison file written by :func:`write_channel_comparison`.

    Raises
    ------
    SetupError
        One line naming the file and what is wrong: not a file, not TOML, another kind, a
        missing or unknown key, a value of the wrong type, a negative or non-finite
        uncertainty, a ``made`` time without its UTC offset.
    """
    from ..setup import check_names, read_toml

    file = Path(path)
    data = read_toml(file, "channel comparison")
    where = f"channel comparison file {file}"
    if data.get("kind") != KIND:
        raise SetupError(f"{where} is not a channel comparison (its kind is {data.get('kind')!r}, "
                         f"expected {KIND!r}); make one with 'wavefit calibrate channels'")
    check_names(data, TOP_LEVEL_KEYS + OPTIONAL_KEYS, "key", where)
    missing = [key for key in TOP_LEVEL_KEYS if key not in data]
    if missing:
        raise SetupError(f"{where} lacks {', '.join(missing)}; make it again with 'wavefit calibrate channels'")
    made = data["made"]
    if not isinstance(made, dt.datetime) or made.tzinfo is None:
        raise SetupError(f"{where}: 'made' must be a date and time with its UTC offset, "
                         f"e.g. 2026-12-03T22:00:00Z")
    skew = _estimated(data["skew"], "skew", where)
    if skew.unit not in (SKEW_UNIT, ""):
        raise SetupError(f"{where}: [skew] unit is {skew.unit!r}; a skew is in {SKEW_UNIT!r}")
    return ChannelComparison(
        reference=_role(data["reference"], "reference", where),
        other=_role(data["other"], "other", where),
        gain_ratio=_estimated(data["gain_ratio"], "gain_ratio", where),
        offset_difference=_estimated(data["offset_difference"], "offset_difference", where),
        skew=skew,
        made=made.astimezone(dt.timezone.utc),
        capture=_text(data["capture"], "capture", where),
        capture_sha256=_text(data["capture_sha256"], "capture_sha256", where),
        tool_version=_text(data["tool_version"], "tool_version", where),
        note=_text(data.get("note", ""), "note", where, empty=True),
    )


def _role(table: Any, key: str, where: str) -> ChannelRole:
    from ..setup import check_names

    if not isinstance(table, Mapping) or not all(k in table for k in ROLE_KEYS):
        raise SetupError(f"{where}: [{key}] must give 'role' and 'column'")
    check_names(table, ROLE_KEYS, f"key in [{key}]", where)
    column = table["column"]
    if isinstance(column, bool) or not isinstance(column, (str, int)):
        raise SetupError(f"{where}: [{key}] column must be a column name or index")
    return ChannelRole(_text(table["role"], f"{key}.role", where), column)


def _estimated(table: Any, key: str, where: str) -> Estimated:
    from ..setup import check_names

    if not isinstance(table, Mapping) or not all(k in table for k in ESTIMATE_FIELDS):
        raise SetupError(f"{where}: [{key}] must give {', '.join(ESTIMATE_FIELDS)}")
    check_names(table, ESTIMATE_FIELDS, f"key in [{key}]", where)
    numbers = [table[k] for k in ESTIMATE_FIELDS[:3]]
    if not all(isinstance(n, (int, float)) and not isinstance(n, bool) for n in numbers):
        raise SetupError(f"{where}: [{key}] value, standard_uncertainty and degrees_of_freedom must be numbers")
    value, u, dof = (float(n) for n in numbers)
    if not math.isfinite(value) or not math.isfinite(u) or u < 0 or not dof > 0:
        raise SetupError(f"{where}: [{key}] needs a finite value, a finite standard_uncertainty >= 0 and "
                         "degrees_of_freedom > 0")
    return Estimated(value, u, dof, _text(table["unit"], f"{key}.unit", where, empty=True))


def _text(value: Any, key: str, where: str, *, empty: bool = False) -> str:
    if not isinstance(value, str) or (not value and not empty):
        raise SetupError(f"{where}: {key} must be text")
    return value
