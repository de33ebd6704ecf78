"""A setup's channel comparison as one analysis uses it: read once, checked against the setup
and the method, turned into budget inputs with their source and age.

A method that compares two voltage channels declares the ratio its measurement function uses
(:attr:`wavefit.methods.base.Method.channel_ratio_roles`, numerator and denominator role). With
a comparison, that ratio of vertical gains becomes the type A input ``channel_ratio`` (the
file's gain ratio, inverted when the file's reference channel is the numerator) and the
denominator channel's ``vertical_gain_<role>`` drops out of the budget; the numerator's gain
stays for what needs an absolute voltage. The comparison's skew becomes the input ``skew``:
how much later the numerator channel shows an event than the denominator channel. The offset
difference enters no method that works from differences of levels and is not an input.

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of uncertainty
   in measurement (GUM), 4.2 (type A evaluation), 5.1.3 (sensitivity coefficients) and
   F.2.4.5 (a correction applied and its uncertainty kept in the budget).
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import SetupError
from ..setup import Setup
from .channel_file import ChannelComparison, read_channel_comparison

#: Budget input of the ratio of the two channels' vertical gains (numerator over denominator).
RATIO_INPUT = "channel_ratio"
#: Budget input of the two channels' relative delay (numerator later than denominator), s.
SKEW_INPUT = "skew"
SECONDS_PER_DAY = 86400.0


@dataclass(frozen=True)
class InputOrigin:
    """Where a budget input came from: a calibration file, when it was made, and its age at
    the analysis (days; negative when the file's clock was ahead)."""

    file: str
    made: dt.datetime
    age_days: float

    def to_dict(self) -> dict[str, Any]:
        return {"file": self.file, "made": self.made.isoformat(), "age_days": self.age_days}

    def __str__(self) -> str:
        return f"from {Path(self.file).name}, made {self.made:%Y-%m-%d %H:%M} UTC, {self.age_days:.1f} days old"


@dataclass(frozen=True)
class ChannelInput:
    """One input a channel comparison gives: value, standard uncertainty, dof, unit."""

    name: str
    value: float
    standard_uncertainty: float
    degrees_of_freedom: float
    unit: str


@dataclass(frozen=True)
class ChannelCalibration:
    """A channel comparison checked against one analysis.

    ``ratio`` and ``skew`` are already in the method's orientation (numerator over
    denominator; numerator later than denominator); ``origin`` is the file and its age;
    ``dropped_gain`` the role whose ``vertical_gain_<role>`` the ratio replaces;
    ``too_old`` the warning when the setup's ``max_age_days`` is exceeded.
    """

    comparison: ChannelComparison
    ratio: ChannelInput
    skew: ChannelInput
    origin: InputOrigin
    dropped_gain: str
    too_old: str | None


def channel_calibration(setup: Setup, method_name: str, ratio_roles: tuple[str, str] | None,
                        now: dt.datetime | None = None) -> ChannelCalibration | None:
    """Read the setup's ``[calibration] channels`` file (None when the setup names none) and
    check it against the method and the setup's ``[columns]``.

    Parameters
    ----------
    setup
        The parsed setup.
    method_name
        The method's name, for messages.
    ratio_roles
        (numerator, denominator) of the channel ratio the method's model uses; None for a
        method that records one voltage channel and cannot use a comparison.
    now
        The analysis time (UTC); the current time when None.

    Raises
    ------
    SetupError
        One line: a method that cannot use a comparison (a calibration named but not used
        would make an uncalibrated result look calibrated), a setup that maps only one of the
        method's two channels, a file whose roles are not the method's pair, or whose columns
        differ from the setup's (both named).
    """
    path = setup.calibration.channels
    if path is None:
        return None
    check_channel_mapping(setup, method_name, ratio_roles)
    numerator, denominator = ratio_roles
    comparison = read_channel_comparison(path)
    roles = {comparison.reference.role, comparison.other.role}
    if roles != set(ratio_roles):
        raise SetupError(f"channel comparison file {path} compares roles {comparison.reference.role!r} and "
                         f"{comparison.other.role!r}; method {method_name!r} needs {numerator!r} and "
                         f"{denominator!r}")
    for channel in (comparison.reference, comparison.other):
        if str(channel.column) != str(setup.columns[channel.role]):
            raise SetupError(f"channel comparison file {path} has role {channel.role!r} on column "
                             f"{channel.column!r}, the setup {setup.source} on column "
                             f"{setup.columns[channel.role]!r}; compare the channels as they are wired now")
    if not comparison.gain_ratio.value > 0:
        raise SetupError(f"channel comparison file {path}: gain_ratio must be positive, got "
                         f"{comparison.gain_ratio.value:g}")
    at = now or dt.datetime.now(dt.timezone.utc)
    age_days = comparison.age(at).total_seconds() / SECONDS_PER_DAY
    origin = InputOrigin(str(path), comparison.made, age_days)
    limit = setup.calibration.max_age_days
    too_old = None
    if limit is not None and age_days > limit:
        too_old = (f"the channel comparison {path.name} is {age_days:.1f} days old, older than the setup's "
                   f"max_age_days = {limit:g}: compare the channels again")
    elif age_days < -FUTURE_DAYS:
        too_old = made_in_the_future("channel comparison", path, comparison.made)
    return ChannelCalibration(comparison, _ratio(comparison, numerator), _skew(comparison, numerator), origin,
                              denominator, too_old)


#: A calibration file made more than this many days after now was made by a clock that is off
#: (or edited): its age, and any max_age_days, cannot be judged (a fault campaign's file dated
#: 2999 was used without a word). A day covers time zones written wrong.
FUTURE_DAYS = 1.0


def made_in_the_future(kind: str, path: Path, made: dt.datetime) -> str:
    """The warning for a calibration file whose ``made`` lies after now."""
    return (f"the {kind} {path.name} says it was made on {made:%Y-%m-%d %H:%M} UTC, after now: its age cannot be "
            "judged (is this computer's clock, or the one that made it, off?)")


def check_channel_mapping(setup: Setup, method_name: str, ratio_roles: tuple[str, str] | None) -> None:
    """The checks of a setup's channel comparison that need not read the file (a setup check
    before any capture is read): the method can use one, and the setup maps both its channels.

    Raises
    ------
    SetupError
        As :func:`channel_calibration`.
    """
    if setup.calibration.channels is None:
        return
    if ratio_roles is None:
        raise SetupError(f"{setup.source}: method {method_name!r} records one voltage channel, so a channel "
                         "comparison has nothing to correct; remove [calibration] channels")
    numerator, denominator = ratio_roles
    unmapped = [role for role in ratio_roles if role not in setup.columns]
    if unmapped:
        raise SetupError(f"{setup.source}: [calibration] channels compares {numerator!r} with {denominator!r}, "
                         f"but [columns] maps no {' or '.join(repr(r) for r in unmapped)}; map both channels "
                         "or remove [calibration] channels")


#: A channel comparison whose skew exceeds this share of the record analysed is refused: a
#: probe's or a logger's skew is a small part of any record that resolves the response (a hand
#: edited skew of 1 s on a record of 0.8 ms overflowed the measurement function, reported as
#: a capture the method did not expect: a fault campaign's file).
MAX_SKEW_SHARE = 0.1


def refuse_skew_beyond_record(channels: ChannelCalibration | None, duration: float, setup: Setup) -> None:
    """Refuse a comparison whose skew exceeds :data:`MAX_SKEW_SHARE` of the record's ``duration`` (s).

    Raises
    ------
    SetupError
        Naming the file, its skew and the record's length."""
    if channels is None or abs(channels.skew.value) <= MAX_SKEW_SHARE * duration:
        return
    raise SetupError(f"channel comparison file {setup.calibration.channels}: its skew ({channels.skew.value:.6g} s) is "
                     f"more than {MAX_SKEW_SHARE:.0%} of the record analysed ({duration:.6g} s): it cannot be the "
                     "comparison of these channels at these settings; compare them again")


def _ratio(comparison: ChannelComparison, numerator: str) -> ChannelInput:
    """numerator gain / denominator gain: the file's ratio when the other channel is the
    numerator, its inverse otherwise (u(1/g) = u(g)/g², first order)."""
    g = comparison.gain_ratio
    if comparison.other.role == numerator:
        return ChannelInput(RATIO_INPUT, g.value, g.standard_uncertainty, g.degrees_of_freedom, "")
    return ChannelInput(RATIO_INPUT, 1.0 / g.value, g.standard_uncertainty / g.value ** 2, g.degrees_of_freedom, "")


def _skew(comparison: ChannelComparison, numerator: str) -> ChannelInput:
    """How much later the numerator channel shows an event than the denominator channel."""
    s = comparison.skew
    value = s.value if comparison.other.role == numerator else -s.value
    return ChannelInput(SKEW_INPUT, value, s.standard_uncertainty, s.degrees_of_freedom, s.unit or "s")
