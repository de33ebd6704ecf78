"""What a method reports: each output declared as a scalar or a curve over an axis, with its unit.

A method lists its outputs once (``outputs = {"L": Scalar("H"), "L_vs_I": Curve("H",
axis=Axis("I", "A"))}``); the shared analysis (:meth:`wavefit.methods.base.Method.analyze`),
the reports, JSON, CSV, plots and batch columns read these declarations, so a new output
needs no code outside its method.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Union


@dataclass(frozen=True)
class Axis:
    """The independent variable of a curve: its name, SI unit and how plots space it
    (``Axis("I", "A")``, ``Axis("f", "Hz", log=True)``)."""

    name: str
    unit: str
    log: bool = False


@dataclass(frozen=True)
class Scalar:
    """An output that is one number in SI ``unit`` ("" for a ratio such as Q)."""

    unit: str


@dataclass(frozen=True)
class Curve:
    """An output that is one value per point of ``axis``, each in SI ``unit``."""

    unit: str
    axis: Axis


Output = Union[Scalar, Curve]


def scalar_names(outputs: Mapping[str, Output]) -> tuple[str, ...]:
    """The names of the scalar outputs, in declaration order (batch columns, spec limits)."""
    return tuple(name for name, out in outputs.items() if isinstance(out, Scalar))


def curve_names(outputs: Mapping[str, Output]) -> tuple[str, ...]:
    """The names of the curve outputs, in declaration order."""
    return tuple(name for name, out in outputs.items() if isinstance(out, Curve))
