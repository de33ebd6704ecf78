"""The reference substitution file: what ``wavefit calibrate reference`` writes and a setup's
``[calibration] reference`` names.

The fixture of the measurement held a reference part of known value (a calibrated standard
inductor, a coil measured on a bridge) instead of the part under test, and the capture was
analysed with the setup's method. The file keeps what the method's measurement function needs
to be evaluated again on that reference capture: its fitted blocks (values, covariance,
degrees of freedom, units), the estimate's other inputs, and the estimate's settings; and the
reference part's known value as written. When a later measurement names the file, the
measurement function of the part under test and the same function on the reference's fitted
inputs are propagated together (:mod:`wavefit.calibration.substitution`), so that the inputs the
two share (sense resistor, timebase, channel gains) cancel as far as they really do.

The file also holds, for the reader only, the correction factor known/measured with its
standard uncertainty; the analysis never reads it back (it recomputes the factor jointly).

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of uncertainty
   in measurement (GUM), 5.2 (correlated input quantities) and F.1.2.3 (substitution: a
   common systematic effect cancels in a comparison).
.. [2] TOML v1.0.0, https://toml.io/en/v1.0.0.
"""
from __future__ import annotations

import datetime as dt
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ..errors import SetupError
from ..fitted import FittedBlock
from ..uncertainty import InputQuantity
from ..values import PartValue, parse_part
from .toml_file import write_toml_whole

#: The ``kind`` written in every reference substitution file, checked when one is read.
KIND = "reference substitution"
TOP_LEVEL_KEYS = ("kind", "method", "quantity", "known", "made", "tool_version", "capture", "capture_sha256",
                  "blocks", "inputs", "settings", "correction", "columns")
#: Keys a file may lack: ``columns`` was first written by wavefit 0.1.0 of 2026-12-05 (a file
#: made before has its wiring unchecked).
OPTIONAL_KEYS = ("columns",)
BLOCK_KEYS = ("group", "type", "names", "units", "values", "covariance", "degrees_of_freedom")
INPUT_KEYS = ("name", "value", "standard_uncertainty", "unit", "type", "degrees_of_freedom", "distribution")
SETTING_KEYS = ("type", "value")
CORRECTION_KEYS = ("value", "standard_uncertainty")
#: A covariance's asymmetry allowed, relative to the two standard errors: a fit's matrix is
#: symmetric up to rounding (a few ulps), an edited file's usually not.
SYMMETRY_TOLERANCE = 1e-9
#: How a setting's Python type is written (the estimates' settings hold only these types).
SETTING_TYPES = {bool: "bool", int: "int", float: "float", str: "text", tuple: "tuple", frozenset: "set"}


@dataclass(frozen=True)
class ReferenceSubstitution:
    """A reference part's capture, analysed with a method, kept for substitution.

    Attributes
    ----------
    method
        The method that analysed the reference capture (a setup of another method refuses it).
    quantity
        The output the reference corrects (``L`` for a reference inductor in rl-step).
    known
        The reference part's known value with its standard uncertainty, as written.
    made
        When the reference capture was analysed (UTC).
    capture, capture_sha256
        The reference capture's path and the sha256 of its bytes.
    tool_version
        The wavefit that made the file.
    blocks, inputs, settings
        The reference estimate's fitted blocks, its other inputs, and its settings.
    correction
        Known / measured value of ``quantity`` and its standard uncertainty (for the reader).
    columns
        The column of each channel role in the setup the reference was analysed with
        (:func:`wiring`; None for a file that does not record it).
    """

    method: str
    quantity: str
    known: PartValue
    made: dt.datetime
    capture: str
    capture_sha256: str
    tool_version: str
    blocks: tuple[FittedBlock, ...]
    inputs: tuple[InputQuantity, ...] = ()
    settings: Mapping[str, Any] = field(default_factory=dict)
    correction: tuple[float, float] = (1.0, 0.0)
    columns: Mapping[str, str] | None = None

    def age(self, now: dt.datetime | None = None) -> dt.timedelta:
        """Time since the reference capture was analysed."""
        return (now or dt.datetime.now(dt.timezone.utc)) - self.made


def write_reference(reference: ReferenceSubstitution, path: str | os.PathLike[str]) -> None:
    """Write ``reference`` as TOML to ``path`` (written beside, then renamed over it).

    Raises
    ------
    SetupError
        When a setting of the estimate has a type the file cannot hold.
    """
    data: dict[str, Any] = {
        "kind": KIND, "method": reference.method, "quantity": reference.quantity, "known": reference.known.text,
        "made": reference.made, "tool_version": reference.tool_version, "capture": reference.capture,
        "capture_sha256": reference.capture_sha256,
        "blocks": [block.to_dict() for block in reference.blocks],
        "inputs": [{"name": i.name, "value": i.value, "standard_uncertainty": i.standard_uncertainty,
                    "unit": i.unit, "type": i.kind, "degrees_of_freedom": i.dof, "distribution": i.distribution}
                   for i in reference.inputs],
        "settings": {key: _setting(key, value) for key, value in reference.settings.items()},
        "correction": {"value": reference.correction[0], "standard_uncertainty": reference.correction[1]},
    }
    if reference.columns is not None:
        data["columns"] = dict(reference.columns)
    write_toml_whole(data, path)


def wiring(columns: Mapping[str, str | int]) -> dict[str, str]:
    """The column of each channel role (the time column aside) as text, as a reference file
    keeps it; a role taken from another file (its column named ``<role> from <file>`` by
    :func:`wavefit.analysis.with_columns_from_files`) is left out, since that file may be
    another one for each capture."""
    return {role: str(column) for role, column in columns.items()
            if role != "time" and not str(column).startswith(f"{role} from ")}


def read_reference(path: str | os.PathLike[str], method: str | None = None) -> ReferenceSubstitution:
    """Read a file written by :func:`write_reference`; with ``method``, refuse one made by another.

    Raises
    ------
    SetupError
        One line naming the file and what is wrong: not a file, not TOML, another kind or
        method, a missing or unknown key, a value of the wrong type, a covariance that is not
        a symmetric square matrix, a ``made`` time without its UTC offset.
    """
    from ..setup import check_names, read_toml

    file = Path(path)
    data = read_toml(file, "reference substitution")
    where = f"reference substitution file {file}"
    if data.get("kind") != KIND:
        raise SetupError(f"{where} is not a reference substitution (its kind is {data.get('kind')!r}, "
                         f"expected {KIND!r}); make one with 'wavefit calibrate reference'")
    check_names(data, TOP_LEVEL_KEYS, "key", where)
    missing = [key for key in TOP_LEVEL_KEYS if key not in data and key not in OPTIONAL_KEYS]
    if missing:
        raise SetupError(f"{where} lacks {', '.join(missing)}; make it again with 'wavefit calibrate reference'")
    made_in = _text(data["method"], "method", where)
    if method is not None and made_in != method:
        raise SetupError(f"{where} was made with method {made_in!r}, the setup's method is {method!r}; "
                         "a reference corrects only measurements of the method that analysed it")
    made = data["made"]
    if not isinstance(made, dt.datetime) or made.tzinfo is None:
        raise SetupError(f"{where}: 'made' must be a date and time with its UTC offset, e.g. 2026-12-03T22:00:00Z")
    try:
        known = parse_part(_text(data["known"], "known", where))
    except SetupError as exc:
        raise SetupError(f"{where}: known: {exc}") from None
    if not (known.value > 0 and known.standard_uncertainty > 0):
        raise SetupError(f"{where}: the known value must be positive with its uncertainty, got {known.text!r}")
    correction = _table(data["correction"], "correction", CORRECTION_KEYS, where)
    return ReferenceSubstitution(
        method=made_in, quantity=_text(data["quantity"], "quantity", where), known=known,
        made=made.astimezone(dt.timezone.utc),
        capture=_text(data["capture"], "capture", where),
        capture_sha256=_text(data["capture_sha256"], "capture_sha256", where),
        tool_version=_text(data["tool_version"], "tool_version", where),
        blocks=tuple(_block(b, where) for b in _list(data["blocks"], "blocks", where)),
        inputs=tuple(_input(i, where) for i in _list(data["inputs"], "inputs", where)),
        settings={key: _setting_value(key, value, where) for key, value in
                  _table(data["settings"], "settings", None, where).items()},
        correction=(_number(correction["value"], "correction", where),
                    _number(correction["standard_uncertainty"], "correction", where)),
        columns=({role: _text(column, f"columns.{role}", where)
                  for role, column in _table(data["columns"], "columns", None, where).items()}
                 if "columns" in data else None),
    )


def _setting(key: str, value: Any) -> dict[str, Any]:
    kind = SETTING_TYPES.get(type(value))
    if kind is None:
        raise SetupError(f"the estimate's setting {key!r} ({type(value).__name__}) cannot be kept in a reference file")
    if kind in ("tuple", "set"):
        items = sorted(value) if kind == "set" else list(value)
        if not all(isinstance(item, str) for item in items):
            raise SetupError(f"the estimate's setting {key!r} holds other things than text")
        return {"type": kind, "value": items}
    return {"type": kind, "value": value}


def _setting_value(key: str, table: Any, where: str) -> Any:
    table = _table(table, f"settings.{key}", SETTING_KEYS, where)
    kind, value = table["type"], table["value"]
    makers = {"bool": bool, "int": int, "float": float, "text": str}
    if kind in makers and isinstance(value, makers[kind]):
        return value
    if kind in ("tuple", "set") and isinstance(value, list) and all(isinstance(v, str) for v in value):
        return tuple(value) if kind == "tuple" else frozenset(value)
    raise SetupError(f"{where}: [settings.{key}] holds a {type(value).__name__}, not a {kind}")


def _block(table: Any, where: str) -> FittedBlock:
    table = _table(table, "blocks", BLOCK_KEYS, where)
    names = _strings(table["names"], "blocks.names", where)
    units = _strings(table["units"], "blocks.units", where)
    values = [_number(v, "blocks.values", where) for v in _list(table["values"], "blocks.values", where)]
    rows = _list(table["covariance"], "blocks.covariance", where)
    covariance = np.array([[_number(c, "blocks.covariance", where) for c in _list(row, "blocks.covariance", where)]
                           for row in rows] if rows else np.zeros((0, 0)))
    n = len(names)
    if not (n and len(units) == n and len(values) == n and covariance.shape == (n, n) and _symmetric(covariance)):
        raise SetupError(f"{where}: a block's names, units, values and covariance do not match "
                         "(a symmetric square matrix with a non-negative diagonal, one row per name)")
    dof = _number(table["degrees_of_freedom"], "blocks.degrees_of_freedom", where, infinite=True)
    if not dof > 0:
        raise SetupError(f"{where}: a block's degrees_of_freedom must be positive")
    return FittedBlock(names, values, covariance, units, dof, group=_text(table["group"], "blocks.group", where),
                       kind=_text(table["type"], "blocks.type", where))


def _symmetric(covariance: np.ndarray) -> bool:
    """A covariance matrix as a fit leaves it: non-negative diagonal, symmetric to within
    :data:`SYMMETRY_TOLERANCE` of the product of the two standard errors."""
    diagonal = np.diag(covariance)
    if np.any(diagonal < 0):
        return False
    scale = np.sqrt(np.outer(diagonal, diagonal))
    return bool(np.all(np.abs(covariance - covariance.T) <= SYMMETRY_TOLERANCE * scale))


def _input(table: Any, where: str) -> InputQuantity:
    table = _table(table, "inputs", INPUT_KEYS, where)
    u = _number(table["standard_uncertainty"], "inputs.standard_uncertainty", where)
    dof = _number(table["degrees_of_freedom"], "inputs.degrees_of_freedom", where, infinite=True)
    if u < 0 or not dof > 0:
        raise SetupError(f"{where}: an input needs a standard_uncertainty >= 0 and degrees_of_freedom > 0")
    return InputQuantity(_text(table["name"], "inputs.name", where), _number(table["value"], "inputs.value", where),
                         u, _text(table["unit"], "inputs.unit", where, empty=True),
                         _text(table["type"], "inputs.type", where), dof, None,
                         _text(table["distribution"], "inputs.distribution", where))


def _table(value: Any, key: str, keys: tuple[str, ...] | None, where: str) -> Mapping[str, Any]:
    from ..setup import check_names

    if not isinstance(value, Mapping) or (keys is not None and not all(k in value for k in keys)):
        raise SetupError(f"{where}: [{key}] must be a table" + (f" giving {', '.join(keys)}" if keys else ""))
    if keys is not None:
        check_names(value, keys, f"key in [{key}]", where)
    return value


def _list(value: Any, key: str, where: str) -> list[Any]:
    if not isinstance(value, list):
        raise SetupError(f"{where}: {key} must be a list")
    return value


def _strings(value: Any, key: str, where: str) -> tuple[str, ...]:
    items = _list(value, key, where)
    if not all(isinstance(item, str) for item in items):
        raise SetupError(f"{where}: {key} must be a list of text")
    return tuple(items)


def _number(value: Any, key: str, where: str, *, infinite: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise SetupError(f"{where}: {key} must hold numbers")
    number = float(value)
    if math.isnan(number) or (math.isinf(number) and not (infinite and number > 0)):
        raise SetupError(f"{where}: {key} must hold finite numbers")
    return number


def _text(value: Any, key: str, where: str, *, empty: bool = False) -> str:
    if not isinstance(value, str) or (not value and not empty):
        raise SetupError(f"{where}: {key} must be text")
    return value
