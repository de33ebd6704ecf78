"""Setup files: which method, which columns, which known parts, which instrument.

A setup is a TOML file or a dict of the same structure (see ``docs/setup-file.md``)::

    method = "rl-step"
    sample_interval = "10 ns"          # optional, when the capture has no time column
    [columns]                          # role -> header, header without unit, or 0-based index
    time = "Time (s)"
    sense = "CH2"
    drive = { file = "ch1.csv", column = 1 }   # a column of another file
    [parts]                            # known components, "VALUE [UNIT] [±TOL [k=K]]"
    sense_resistor = "10 ohm ±0.1%"
    [instrument]                       # optional; defaults describe a typical bench scope
    timebase = "±25 ppm"
    vertical_gain = "±2%"
    vertical_gain_sense = "±1%"        # overrides one channel
    [options]                          # optional, method specific
    [calibration]                      # optional: files made by 'wavefit calibrate'
    channels = "channels.toml"         # a channel comparison, beside the setup
    max_age_days = 30                  # warn when a calibration is older

This layer knows nothing of waveforms: each method checks the roles, parts,
options and per-channel instrument keys it knows (``Method.check_setup``). Every
other unknown key, here or in a table, is an error that lists the valid ones.
"""
from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from .errors import SetupError
from .values import PartValue, parse_number_with_unit, parse_part, parse_relative_uncertainty

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

#: Typical bench-scope figures used when ``[instrument]`` is silent (common practice:
#: general-purpose 8-bit scopes specify about ±25 ppm timebase and ±2 % DC gain).
DEFAULT_TIMEBASE = "±25 ppm"
DEFAULT_VERTICAL_GAIN = "±2%"

# A value quoted in a message is cut to this many characters (a 400-digit number stays one line).
_SHOWN_CHARS = 40
TOP_LEVEL_KEYS = ("method", "sample_interval", "columns", "parts", "instrument", "options", "captures",
                  "calibration")
CALIBRATION_KEYS = ("channels", "reference", "max_age_days")
INSTRUMENT_KEYS = ("timebase", "vertical_gain")
#: Prefix of the per-channel gain keys, ``vertical_gain_<role>``.
GAIN_KEY_PREFIX = "vertical_gain_"
#: Keys of a [columns] entry that names a column of another file.
COLUMN_FILE_KEYS = ("file", "column")


@dataclass(frozen=True)
class RelativeFigure:
    """A relative instrument accuracy: bound ``±fraction`` with rectangular distribution."""

    fraction: float
    text: str
    k: float | None = None

    @property
    def standard_uncertainty(self) -> float:
        """u = a/√3 for a bound (JCGM 100:2008, 4.3.7), a/k when k is written (4.3.3)."""
        return self.fraction / self.k if self.k else self.fraction / math.sqrt(3.0)


@dataclass(frozen=True)
class CaptureEntry:
    """One capture named inside a setup (``[[captures]]``), with its own parts."""

    file: Path
    parts: Mapping[str, PartValue]


@dataclass(frozen=True)
class CalibrationFiles:
    """The calibrations a setup names (``[calibration]``): files as absolute paths, and the
    age in days beyond which a calibration is warned about (None: never)."""

    channels: Path | None = None
    reference: Path | None = None
    max_age_days: float | None = None


@dataclass(frozen=True)
class Setup:
    """A parsed setup.

    ``columns`` maps every role to its header name or 0-based index; ``column_files``
    maps the roles whose column lies in another file to that file's absolute path.
    ``vertical_gain`` holds the ``vertical_gain_<role>`` figures by role.
    """

    method: str
    columns: Mapping[str, str | int]
    parts: Mapping[str, PartValue]
    timebase: RelativeFigure
    vertical_gain: Mapping[str, RelativeFigure]
    default_vertical_gain: RelativeFigure
    options: Mapping[str, Any] = field(default_factory=dict)
    sample_interval: float | None = None
    captures: tuple[CaptureEntry, ...] = ()
    source: str = "<dict>"
    column_files: Mapping[str, Path] = field(default_factory=dict)
    calibration: CalibrationFiles = CalibrationFiles()

    def gain_for(self, role: str) -> RelativeFigure:
        """The vertical-gain accuracy of the channel that carries ``role``."""
        return self.vertical_gain.get(role, self.default_vertical_gain)

    def named_files(self) -> tuple[Path, ...]:
        """Every file the setup names: its captures' files, columns from other files and the
        calibration files (inputs that no output may overwrite)."""
        named = [entry.file for entry in self.captures] + list(self.column_files.values())
        named += [path for path in (self.calibration.channels, self.calibration.reference) if path is not None]
        return tuple(named)


def load_setup(setup: str | os.PathLike | Mapping[str, Any] | Setup) -> Setup:
    """Read a setup from a TOML path, a dict of the same structure, or pass one through."""
    if isinstance(setup, Setup):
        return setup
    if isinstance(setup, Mapping):
        return parse_setup(setup, source="<dict>", base_dir=Path.cwd())
    path = Path(setup)
    return parse_setup(read_toml(path, "setup", empty=False), source=str(path), base_dir=path.parent)


def read_toml(path: Path, what: str, *, empty: bool = True) -> dict[str, Any]:
    """The mapping in a UTF-8 TOML file; a SetupError naming the ``what`` file otherwise, and
    for a file of no text at all where ``empty`` is false (a setup: no method, nothing to do)."""
    from .io.source import not_a_regular_file

    problem = not_a_regular_file(path)
    if problem is not None:
        raise SetupError(f"{what} file {path} {problem}")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise SetupError(f"cannot read {what} file {path}: {exc.strerror or exc}") from None
    if not empty and not raw.strip():
        raise SetupError(f"{what} file {path} is empty (a command whose output was redirected into it failed?)")
    try:
        return tomllib.loads(raw.decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise SetupError(f"{what} file {path} is not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise SetupError(f"{what} file {path} is not valid TOML: {exc}") from None
    except RecursionError:
        raise SetupError(f"{what} file {path} nests arrays or tables too deeply to read") from None


def parse_setup(data: Mapping[str, Any], *, source: str, base_dir: Path) -> Setup:
    """Check and convert the raw mapping of a setup."""
    check_names(data, TOP_LEVEL_KEYS, "setup key", source)
    _refuse_top_level_keys_in_tables(data, source)
    method = data.get("method")
    if method is None or method == "":
        raise SetupError(f"{source}: 'method' is missing; write e.g. method = \"rl-step\"")
    if not isinstance(method, str):
        raise SetupError(f"{source}: 'method' must be a method's name in quotes, got {_shown(method)}; "
                         "write e.g. method = \"rl-step\"")
    columns: dict[str, str | int] = {}
    column_files: dict[str, Path] = {}
    for role, entry in _table(data, "columns", source).items():
        columns[role], file = _column(role, entry, source)
        if file is not None:
            column_files[role] = _beside(file, base_dir)
    parts = {name: _part(name, spec, source) for name, spec in _table(data, "parts", source).items()}
    timebase, gains, default_gain = _instrument(_table(data, "instrument", source), source)
    sample_interval = None
    if "sample_interval" in data:
        sample_interval = _positive_seconds(data["sample_interval"], source)
    captures = tuple(_capture_entry(entry, i, source, base_dir)
                     for i, entry in enumerate(_array_of_tables(data, "captures", source)))
    return Setup(
        method=method,
        columns=columns,
        parts=parts,
        timebase=timebase,
        vertical_gain=gains,
        default_vertical_gain=default_gain,
        options=dict(_table(data, "options", source)),
        sample_interval=sample_interval,
        captures=captures,
        source=source,
        column_files=column_files,
        calibration=_calibration(_table(data, "calibration", source), source, base_dir),
    )


def _refuse_top_level_keys_in_tables(data: Mapping[str, Any], source: str) -> None:
    """Refuse a table that holds a key of the top level (``captures = "x"`` or ``method`` under
    ``[parts]``): TOML puts every key after a ``[table]`` line into that table, and the key was
    then read as a part, a role or an option, with a message about its value (a fault
    campaign's setup)."""
    tables = ("columns", "parts", "instrument", "options", "calibration")
    for table in tables:
        found = data.get(table)
        if not isinstance(found, Mapping):
            continue
        for key in found:
            if key in TOP_LEVEL_KEYS and key not in tables:
                raise SetupError(f"{source}: {key!r} is in [{table}], not at the top level: TOML puts every key after "
                                 f"a [{table}] line into that table; move {key} above the first [table] line")


def _calibration(table: Mapping[str, Any], source: str, base_dir: Path) -> CalibrationFiles:
    """The ``[calibration]`` table: file names beside the setup, a positive age limit in days."""
    check_names(table, CALIBRATION_KEYS, "[calibration] key", source)
    files: dict[str, Path] = {}
    for key in ("channels", "reference"):
        if key in table:
            if not isinstance(table[key], str) or not table[key].strip():
                raise SetupError(f"{source}: [calibration] {key} must be a file name, got {_shown(table[key])}")
            files[key] = _beside(table[key], base_dir)
    age = table.get("max_age_days")
    if age is not None and (isinstance(age, bool) or not isinstance(age, (int, float)) or not _finite(age)
                            or age <= 0):
        raise SetupError(f"{source}: [calibration] max_age_days must be a positive number of days, "
                         f"got {_shown(age)}")
    return CalibrationFiles(files.get("channels"), files.get("reference"),
                            float(age) if age is not None else None)


def _table(data: Mapping[str, Any], key: str, source: str) -> Mapping[str, Any]:
    value = data.get(key, {})
    if not isinstance(value, Mapping):
        raise SetupError(f"{source}: [{key}] must be a table of key = value lines")
    return value


def _array_of_tables(data: Mapping[str, Any], key: str, source: str) -> list[Mapping[str, Any]]:
    value = data.get(key, [])
    if not isinstance(value, list) or not all(isinstance(entry, Mapping) for entry in value):
        raise SetupError(f"{source}: {key} must be an array of tables, each starting with a [[{key}]] line")
    return value


def _column(role: str, entry: Any, source: str) -> tuple[str | int, str | None]:
    """A [columns] entry: the column key, and the other file's name when it names one."""
    if isinstance(entry, Mapping):
        if role == "time":
            raise SetupError(f"{source}: [columns] time comes from the capture itself; write it as a header "
                             "text or a 0-based index, not as a table with a file")
        check_names(entry, COLUMN_FILE_KEYS, f"key in [columns] {role} table", source)
        if "file" not in entry or "column" not in entry:
            raise SetupError(f"{source}: [columns] {role} needs both 'file' and 'column', e.g. "
                             f"{role} = {{ file = \"ch1.csv\", column = 1 }}")
        file = entry["file"]
        if not isinstance(file, str) or not file.strip():
            raise SetupError(f"{source}: [columns] {role}: 'file' must be a file name, e.g. \"ch1.csv\"")
        return _column_key(role, entry["column"], source), file
    return _column_key(role, entry, source), None


def _column_key(role: str, column: Any, source: str) -> str | int:
    if isinstance(column, str) and column.strip():
        return column
    if isinstance(column, int) and not isinstance(column, bool) and column >= 0:
        return column
    raise SetupError(f"{source}: column for role {role!r} must be a header text or a 0-based index, "
                     f"got {column!r}")


def _beside(file: str, base_dir: Path) -> Path:
    """``file`` as an absolute path, relative names taken from the setup file's folder."""
    path = Path(file)
    return (path if path.is_absolute() else base_dir / path).absolute()


def _part(name: str, spec: Any, source: str) -> PartValue:
    try:
        return parse_part(spec)
    except SetupError as exc:
        raise SetupError(f"{source}: part {name!r}: {exc}") from None


def _relative(text: Any, what: str, source: str) -> RelativeFigure:
    """An instrument figure: ``"±25 ppm"``, ``"±1% k=2"``, ``"u=10 ppm"``, ``"exact"`` or 0."""
    if isinstance(text, (int, float)) and not isinstance(text, bool) and text == 0:
        return RelativeFigure(0.0, str(text))
    if not isinstance(text, str):
        raise SetupError(f"{source}: {what} must be text such as \"±1.5%\" or \"±25 ppm\" (a bare number "
                         f"could be a fraction or a percentage), got {text!r}")
    if text.strip().lower() == "exact":  # a perfect instrument, for studies of the fit alone
        return RelativeFigure(0.0, text)
    try:
        fraction, k = parse_relative_uncertainty(text)
    except SetupError as exc:
        raise SetupError(f"{source}: [instrument] {what}: {exc}") from None
    return RelativeFigure(fraction, text, k)


def _instrument(table: Mapping[str, Any], source: str
                ) -> tuple[RelativeFigure, dict[str, RelativeFigure], RelativeFigure]:
    gains: dict[str, RelativeFigure] = {}
    for key, value in table.items():
        if key.startswith(GAIN_KEY_PREFIX) and len(key) > len(GAIN_KEY_PREFIX):
            gains[key[len(GAIN_KEY_PREFIX):]] = _relative(value, key, source)
        elif key not in INSTRUMENT_KEYS:
            raise SetupError(f"{source}: unknown [instrument] key {key!r}; valid: "
                             f"{', '.join(INSTRUMENT_KEYS)}, {GAIN_KEY_PREFIX}<role>")
    timebase = _relative(table.get("timebase", DEFAULT_TIMEBASE), "timebase", source)
    default_gain = _relative(table.get("vertical_gain", DEFAULT_VERTICAL_GAIN), "vertical_gain", source)
    return timebase, gains, default_gain


def _positive_seconds(value: Any, source: str) -> float:
    """The top-level ``sample_interval``: a time above zero."""
    seconds = parse_time_option(value, "sample_interval", source, negative=True)
    if not seconds > 0:
        raise SetupError(f"{source}: sample_interval must be positive, got {_shown(value)}")
    return seconds


def parse_time_option(value: object, key: str, source: str, *, keywords: tuple[str, ...] = (),
                      negative: bool = False) -> float | str | None:
    """Read an option that is a time: seconds as a number, or text with a time unit.

    Parameters
    ----------
    value : object
        A TOML number of seconds (``3e-8``), text with a time unit (``"30 ns"``,
        ``"1.5us"``, ``"2 µs"``, ``"30n"``), one of ``keywords`` (e.g. ``"auto"``), or
        ``None`` for an option left unset (a default of None).
    key : str
        The option's name, for the message.
    source : str
        The setup's source, for the message.
    keywords : tuple of str
        Words returned as they are.
    negative : bool
        Accept times before zero (an instant on a record whose time axis starts before
        the trigger); durations leave it False.

    Returns
    -------
    float or str or None
        Seconds, the keyword, or None when unset.

    Raises
    ------
    SetupError
        One line naming the option, what was found and what to write. Text without a
        unit (``"30"``) is refused: it could be meant in seconds or in the unit of the
        record's time axis.
    """
    if value is None or (isinstance(value, str) and value in keywords):
        return value
    choices = "".join(f"\"{word}\", " for word in keywords)
    if isinstance(value, str):
        try:
            seconds, _ = parse_number_with_unit(value, "s", unit_required=True)
        except SetupError as exc:
            raise SetupError(f"{source}: option {key}: {exc}") from None
    elif isinstance(value, (int, float)) and not isinstance(value, bool) and _finite(value):
        seconds = float(value)
    else:
        raise SetupError(f"{source}: option {key} must be {choices}a number of seconds or a time such as "
                         f"\"30 ns\", got {_shown(value)}")
    if seconds < 0 and not negative:
        raise SetupError(f"{source}: option {key} must be {choices}a time >= 0, got {_shown(value)}")
    return seconds


def _shown(value: Any) -> str:
    """``repr(value)``, cut to a length that fits in a one-line message."""
    text = repr(value)
    return text if len(text) <= _SHOWN_CHARS else text[: _SHOWN_CHARS - 3] + "..."


def _finite(number: int | float) -> bool:
    """True for a number that is finite as a float (a 400-digit integer is not)."""
    try:
        return math.isfinite(number)
    except OverflowError:
        return False


def _capture_entry(entry: Mapping[str, Any], index: int, source: str, base_dir: Path) -> CaptureEntry:
    """One [[captures]] entry: its file and its parts (the method checks the parts' names)."""
    if not isinstance(entry.get("file"), str) or not entry["file"].strip():
        raise SetupError(f"{source}: [[captures]] entry {index + 1} needs a 'file' key naming the capture")
    parts = {k: _part(k, v, source) for k, v in entry.items() if k != "file"}
    return CaptureEntry(file=_beside(entry["file"], base_dir), parts=parts)


def check_names(given: Mapping[str, Any], valid: Mapping[str, Any] | tuple[str, ...], what: str,
                source: str) -> None:
    """Raise a SetupError naming the first key of ``given`` that ``valid`` lacks."""
    names = tuple(valid)
    for key in given:
        if key not in names:
            raise SetupError(f"{source}: unknown {what} {key!r}; valid: {', '.join(names)}")
