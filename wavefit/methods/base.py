"""The interface every measurement method implements."""
from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..errors import SetupError
from ..io.capture import Capture, Channel
from ..results import AnalysisResult
from ..setup import Setup, check_names
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
    #: True when the method takes its captures from ``[[captures]]`` in the setup.
    uses_setup_captures: ClassVar[bool] = False

    def check_setup(self, setup: Setup) -> None:
        """Reject unknown roles, parts and options; require the required ones."""
        check_names(setup.columns, ("time", *self.roles), "role in [columns]", setup.source)
        check_names(setup.parts, tuple(self.parts), "part in [parts]", setup.source)
        check_names(setup.options, tuple(self.options), "option in [options]", setup.source)
        for role, required in self.roles.items():
            if required and role not in setup.columns:
                raise SetupError(f"{setup.source}: method {self.name!r} needs a [columns] entry {role!r}")
        for part_name, spec in self.parts.items():
            if spec.required and part_name not in setup.parts and not self._part_in_captures(setup, part_name):
                raise SetupError(f"{setup.source}: method {self.name!r} needs part {part_name!r} "
                                 f"({spec.help}) in [parts]")
        for part_name, part in setup.parts.items():
            self._check_unit(setup, part_name, part)
        for entry in setup.captures:
            for part_name, part in entry.parts.items():
                check_names({part_name: 0}, tuple(self.parts), "part in [[captures]]", setup.source)
                self._check_unit(setup, part_name, part)

    def _check_unit(self, setup: Setup, part_name: str, part: PartValue) -> None:
        expected = self.parts[part_name].unit
        if part.unit and part.unit != expected:
            raise SetupError(f"{setup.source}: part {part_name!r} is in {part.unit!r}, expected {expected!r}")
        if part.value <= 0:
            raise SetupError(f"{setup.source}: part {part_name!r} must be positive, got {part.text!r}")

    @staticmethod
    def _part_in_captures(setup: Setup, part_name: str) -> bool:
        return bool(setup.captures) and all(part_name in e.parts for e in setup.captures)

    def option(self, setup: Setup, key: str) -> object:
        """The option's value from the setup, or its default."""
        return setup.options.get(key, self.options[key])

    @staticmethod
    def channel(capture: Capture, setup: Setup, role: str) -> Channel:
        """The channel the setup maps ``role`` to."""
        return capture.channel(setup.columns[role])

    def analyze(self, captures: list[Capture], setup: Setup) -> AnalysisResult:  # pragma: no cover
        raise NotImplementedError
