"""The interface every measurement method implements, and the checks of a setup
against it."""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar

from ..errors import AnalysisRefused, SetupError
from ..io.capture import Capture, Channel
from ..results import AnalysisResult
from ..setup import GAIN_KEY_PREFIX, INSTRUMENT_KEYS, Setup, check_names, parse_time_option
from ..values import PartValue


@dataclass(frozen=True)
class PartSpec:
    """A part a method knows: its SI unit, whether it is required, what it is."""

    unit: str
    required: bool
    help: str


class Method:
    """Base class: declare roles, parts and options; implement :meth:`analyze`.

    ``roles`` maps each column role to whether it is required; ``time`` is
    always allowed. ``parts`` maps part names to :class:`PartSpec`.
    ``options`` maps option names to their default values.
    """

    name: ClassVar[str] = ""
    summary: ClassVar[str] = ""
    roles: ClassVar[dict[str, bool]] = {}
    parts: ClassVar[dict[str, PartSpec]] = {}
    options: ClassVar[dict[str, object]] = {}
    #: Names of the quantities every result of this method reports, in report order
    #: (batch output columns are built from it before any capture is analysed).
    quantities: ClassVar[tuple[str, ...]] = ()
    #: Quantities that only a physical part has positive (L > 0, tau > 0, ...): a result with
    #: one of them at or below zero is refused, never reported.
    positive: ClassVar[tuple[str, ...]] = ()
    #: What to check when a result is refused as not physical (named in the message).
    unphysical_hint: ClassVar[str] = ""
    #: True when the method takes its captures from ``[[captures]]`` in the setup.
    uses_setup_captures: ClassVar[bool] = False

    def check_setup(self, setup: Setup) -> None:
        """Reject unknown roles, parts, options, instrument keys and captures; require the
        required ones."""
        if setup.column_files and self.uses_setup_captures:
            raise SetupError(f"{setup.source}: method {self.name!r} takes several captures, so a column cannot "
                             "come from one other file; give each capture's columns in its own file")
        check_names(setup.columns, ("time", *self.roles), "role in [columns]", setup.source)
        check_names(setup.parts, tuple(self.parts), "part in [parts]", setup.source)
        check_names(setup.options, tuple(self.options), "option in [options]", setup.source)
        self._check_instrument_keys(setup)
        for role, required in self.roles.items():
            if required and role not in setup.columns:
                raise SetupError(f"{setup.source}: method {self.name!r} needs a [columns] entry {role!r}")
        for part_name, spec in self.parts.items():
            if spec.required and part_name not in setup.parts and not self._part_in_captures(setup, part_name):
                raise SetupError(f"{setup.source}: method {self.name!r} needs part {part_name!r} "
                                 f"({spec.help}) in [parts]")
        for part_name, part in setup.parts.items():
            self._check_unit(setup, part_name, part)
        self._check_captures(setup)

    def _check_instrument_keys(self, setup: Setup) -> None:
        """``vertical_gain_<role>`` is valid only for a role of this method."""
        valid = (*INSTRUMENT_KEYS, *(GAIN_KEY_PREFIX + role for role in self.roles))
        for role in setup.vertical_gain:
            if role not in self.roles:
                raise SetupError(f"{setup.source}: unknown [instrument] key {GAIN_KEY_PREFIX + role!r} "
                                 f"(method {self.name!r} has no role {role!r}); valid: {', '.join(valid)}")

    def _check_captures(self, setup: Setup) -> None:
        if setup.captures and not self.uses_setup_captures:
            raise SetupError(f"{setup.source}: method {self.name!r} takes its capture from the command line, "
                             "not from [[captures]]; remove the [[captures]] entries")
        for index, entry in enumerate(setup.captures):
            check_names(entry.parts, ("file", *self.parts), f"key in [[captures]] entry {index + 1}",
                        setup.source)
            for part_name, part in entry.parts.items():
                self._check_unit(setup, part_name, part)

    def _check_unit(self, setup: Setup, part_name: str, part: PartValue) -> None:
        expected = self.parts[part_name].unit
        if part.unit and part.unit != expected:
            raise SetupError(f"{setup.source}: part {part_name!r} = {part.text!r} is in {part.unit!r}, "
                             f"expected {expected!r}")
        if part.value <= 0:
            raise SetupError(f"{setup.source}: part {part_name!r} must be positive, got {part.text!r}")

    @staticmethod
    def _part_in_captures(setup: Setup, part_name: str) -> bool:
        return bool(setup.captures) and all(part_name in e.parts for e in setup.captures)

    def option(self, setup: Setup, key: str) -> object:
        """The option's value from the setup, or its default."""
        return setup.options.get(key, self.options[key])

    def time_option(self, setup: Setup, key: str, *, keywords: tuple[str, ...] = (),
                    negative: bool = False) -> float | str | None:
        """The option ``key`` (or its default) read by :func:`parse_time_option`."""
        return parse_time_option(self.option(setup, key), key, setup.source, keywords=keywords,
                                 negative=negative)

    def check_physical(self, result: AnalysisResult) -> None:
        """Refuse a result with a non-finite value or uncertainty, or a non-positive quantity
        of :attr:`positive`: it could not be a measurement of a real part.

        Parameters
        ----------
        result
            The method's result.

        Raises
        ------
        AnalysisRefused
            Naming the quantity, its value and :attr:`unphysical_hint`.
        """
        source = result.source if isinstance(result.source, str) else ", ".join(result.source)
        for name, q in result.quantities.items():
            finite = math.isfinite(q.value) and math.isfinite(q.expanded_uncertainty)
            if not finite or (name in self.positive and q.value <= 0):
                what = "is not a finite number" if not finite else "is not positive"
                raise AnalysisRefused(
                    f"{source}: {name} came out as {q.value:.4g} ± {q.expanded_uncertainty:.2g} {q.unit}, which "
                    f"{what}: no measurement of a real part; {self.unphysical_hint}")

    @staticmethod
    def channel(capture: Capture, setup: Setup, role: str) -> Channel:
        """The channel the setup maps ``role`` to."""
        return capture.channel(setup.columns[role])

    def analyze(self, captures: list[Capture], setup: Setup) -> AnalysisResult:  # pragma: no cover
        raise NotImplementedError
