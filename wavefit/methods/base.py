"""The interface every measurement method implements, the shared analysis, and the checks of a
setup against it.

A method declares its roles, parts, options and :attr:`Method.outputs`, and implements two
hooks: :meth:`Method.estimate` (the fits: a :class:`~wavefit.methods.estimate.Estimate`) and
:meth:`Method.model` (the measurement function from the inputs to the declared outputs).
:meth:`Method.analyze`, shared, does the rest once: the declared parts and the instrument
figures into the budget, propagation (elementwise for curves), the plausibility check and
the result.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, ClassVar, Mapping

from ..calibration.in_use import (ChannelCalibration, channel_calibration, check_channel_mapping,
                                  refuse_skew_beyond_record)
from ..calibration.substitution import with_reference
from ..curve_propagation import propagate_curves
from ..errors import AnalysisRefused, NothingToMeasure, SetupError, had_warned
from ..io.capture import Capture, Channel
from ..measurement import CaptureCount, Measurement, takes_entries
from ..outputs import Curve, Output, scalar_names
from ..results import AnalysisResult
from ..setup import GAIN_KEY_PREFIX, INSTRUMENT_KEYS, Setup, check_names, parse_time_option
from ..uncertainty import InputSet, Propagation, propagate_outputs, unit_variables
from ..values import PartValue, eng_pm
from .estimate import Estimate

#: How far below zero, in expanded uncertainties, a quantity of ``not_negative`` may come out
#: before the result is refused: 2 U is about 4 standard uncertainties, so a part whose true
#: value is zero (a DCR of a few milliohms beside an uncertainty of ohms) is refused about 3 in
#: 10⁵ times (one-sided normal tail), while a result that contradicts its own model is caught.
NEGATIVE_BEYOND = 2.0
#: A capacitance part (a tank capacitor, a probe's, stray or winding capacitance) at or above
#: this is refused as a unit slip: the capacitors these methods take are picofarads to some
#: hundred microfarads (a film tank capacitor for a choke of henries; common practice), while a
#: plain ``472`` (the three-digit code of 4.7 nF, which is not read) is 472 F in SI and
#: ``4.7 MF`` (an old shorthand for microfarads) is megafarads.
MAX_CAPACITANCE = 0.01


@dataclass(frozen=True)
class PartSpec:
    """A part a method knows: its SI unit, whether it is required, what it is."""

    unit: str
    required: bool
    help: str


class Method:
    """Base class: declare roles, parts, options and outputs; implement :meth:`estimate` and
    :meth:`model`.

    ``roles`` maps each column role to whether it is required; ``time`` is
    always allowed. ``parts`` maps part names to :class:`PartSpec`.
    ``options`` maps option names to their default values. ``outputs`` maps each
    reported quantity to its declaration (:class:`~wavefit.outputs.Scalar` or
    :class:`~wavefit.outputs.Curve`), in report order.
    """

    name: ClassVar[str] = ""
    summary: ClassVar[str] = ""
    roles: ClassVar[dict[str, bool]] = {}
    parts: ClassVar[dict[str, PartSpec]] = {}
    options: ClassVar[dict[str, object]] = {}
    #: Every output the method reports, in report order, with its unit and kind.
    outputs: ClassVar[dict[str, Output]] = {}
    #: Quantities that only a physical part has positive (L > 0, tau > 0, ...): a result with
    #: one of them at or below zero is refused, never reported.
    positive: ClassVar[tuple[str, ...]] = ()
    #: Quantities a real part has at or above zero but that may be measured near it (a small
    #: DCR): an estimate a little below zero is an honest one; one below zero by more than
    #: ``NEGATIVE_BEYOND`` expanded uncertainties contradicts the model, and the result is refused.
    not_negative: ClassVar[tuple[str, ...]] = ()
    #: The quantities the method exists to measure: a result whose expanded uncertainty of one
    #: of them reaches its value (the interval takes in zero) says nothing of the part and is
    #: refused, naming :attr:`undetermined_hint` (a coil ten times the lot's, captured with the
    #: lot's period, read 1.3 ± 5.1 mH and entered the lot's statistics).
    determined: ClassVar[tuple[str, ...]] = ()
    #: What to check when a result is refused as not determined by the capture.
    undetermined_hint: ClassVar[str] = ""
    #: Quantities a part has above zero, so that an interval taking in zero says the measurement
    #: did not resolve them (warned by :meth:`unresolved`); None: those of :attr:`positive` and
    #: :attr:`not_negative`. A value that may well be zero (a final current that settles at zero,
    #: the energy it stores) is measured as zero within its interval, not unresolved.
    resolvable: ClassVar[tuple[str, ...] | None] = None
    #: Parts that hold for every capture of a measurement and enter its result once (lc-sweep's
    #: stray capacitance moves the line's intercept only): a ``[[captures]]`` entry that gives one
    #: is a setup error, since the method would not use it there (it was ignored: C read 34 ± 2 pF
    #: for 22 pF).
    common_parts: ClassVar[tuple[str, ...]] = ()
    #: Outputs a measurement may not give (a saturation current the pulse did not reach): the
    #: model returns ``None`` for them, the result omits them and the estimate's warnings say why.
    optional: ClassVar[tuple[str, ...]] = ()
    #: What to check when a result is refused as not physical (named in the message).
    unphysical_hint: ClassVar[str] = ""
    #: How many captures one measurement takes. A method that takes several gets them from
    #: the setup's ``[[captures]]`` entries, each capture bound to its entry's parts
    #: (:func:`wavefit.measurement.bind`), never matched by position.
    capture_count: ClassVar[CaptureCount] = CaptureCount(minimum=1, maximum=1)
    #: The two voltage channels whose gain ratio the model uses, (numerator, denominator): a
    #: setup's channel comparison then replaces that ratio (:mod:`wavefit.calibration.in_use`).
    #: None: the method records one voltage channel and refuses a channel comparison.
    channel_ratio_roles: ClassVar[tuple[str, str] | None] = None
    #: Why a reference part's capture cannot correct this method's results
    #: (:mod:`wavefit.calibration.substitution`), or "" when it can: substitution evaluates the
    #: measurement function on the reference's fitted inputs with the estimate's settings, which
    #: must then be the same for every capture of the fixture.
    no_substitution: ClassVar[str] = ""

    @property
    def quantities(self) -> tuple[str, ...]:
        """The scalar outputs' names, in report order (batch columns are built from them before
        any capture is analysed)."""
        return scalar_names(self.outputs)

    def check_setup(self, setup: Setup) -> None:
        """Reject unknown roles, parts, options, instrument keys and captures, and a channel
        comparison the method or the setup's columns cannot use; require the required ones."""
        if setup.column_files and (setup.captures or self.capture_count.minimum > 1):
            raise SetupError(f"{setup.source}: method {self.name!r} takes several captures, so a column cannot "
                             "come from one other file; give each capture's columns in its own file")
        check_names(setup.columns, ("time", *self.roles), "role in [columns]", setup.source)
        check_names(setup.parts, tuple(self.parts), "part in [parts]", setup.source)
        check_names(setup.options, tuple(self.options), "option in [options]", setup.source)
        for key, value in setup.options.items():
            if isinstance(self.options[key], list) and not isinstance(value, list):
                # (a text was taken a character at a time, a number raised a traceback)
                shown = f'"{value}"' if isinstance(value, str) else repr(value)
                raise SetupError(f"{setup.source}: option {key} = {shown} must be a list in brackets, "
                                 f"e.g. {key} = [{shown}]")
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
        check_channel_mapping(setup, self.name, self.channel_ratio_roles)
        if self.no_substitution and setup.calibration.reference is not None:
            raise SetupError(f"{setup.source}: [calibration] reference: method {self.name!r} cannot be corrected by "
                             f"a reference part: {self.no_substitution}")

    def role_unit(self, role: str, setup: Setup) -> str:
        """The SI unit the method reads the column of ``role`` in (volts unless a method says
        otherwise)."""
        return "V"

    def check_channel_units(self, captures: list[Capture], setup: Setup) -> None:
        """Refuse a column whose unit, as the capture writes it, is not the one its role is
        read in (a column without a unit is taken as the setup says). A current probe's
        channel in A mapped to a voltage role was read as volts: L ten times off, silently."""
        for capture in captures:
            for role in self.roles:
                if role not in setup.columns:
                    continue
                channel = capture.channel(setup.columns[role])
                expected = self.role_unit(role, setup)
                if channel.unit and channel.unit != expected:
                    raise SetupError(f"{capture.source}: column {channel.header!r} (role {role!r}) is in "
                                     f"{channel.unit}, but {self.name} reads {role!r} in {expected}; "
                                     f"{self.unit_hint(role, setup)}")

    def unit_hint(self, role: str, setup: Setup) -> str:
        """What to do about a column in another unit than its role's (the message's end)."""
        return "map the role to a column in volts"

    def _check_instrument_keys(self, setup: Setup) -> None:
        """``vertical_gain_<role>`` is valid only for a role of this method."""
        valid = (*INSTRUMENT_KEYS, *(GAIN_KEY_PREFIX + role for role in self.roles))
        for role in setup.vertical_gain:
            if role not in self.roles:
                raise SetupError(f"{setup.source}: unknown [instrument] key {GAIN_KEY_PREFIX + role!r} "
                                 f"(method {self.name!r} has no role {role!r}); valid: {', '.join(valid)}")

    def _check_captures(self, setup: Setup) -> None:
        takes_entries(setup, self.capture_count)
        for index, entry in enumerate(setup.captures):
            check_names(entry.parts, ("file", *self.parts), f"key in [[captures]] entry {index + 1}",
                        setup.source)
            for part_name in self.common_parts:
                if part_name in entry.parts:
                    raise SetupError(f"{setup.source}: part {part_name!r} in [[captures]] entry {index + 1}: "
                                     f"method {self.name!r} takes it as common to every capture; give it once, "
                                     "in [parts]")
            for part_name, part in entry.parts.items():
                self._check_unit(setup, part_name, part)
        for part_name in setup.parts:
            if self._part_in_captures(setup, part_name):
                raise SetupError(f"{setup.source}: part {part_name!r} in [parts] is given by every [[captures]] "
                                 "entry too, so it would not be used; give it in one place (in [parts] for a value "
                                 "that holds for every capture)")

    def _check_unit(self, setup: Setup, part_name: str, part: PartValue) -> None:
        expected = self.parts[part_name].unit
        if part.unit and part.unit != expected:
            raise SetupError(f"{setup.source}: part {part_name!r} = {part.text!r} is in {part.unit!r}, "
                             f"expected {expected!r}")
        if part.value <= 0:
            raise SetupError(f"{setup.source}: part {part_name!r} must be positive, got {part.text!r}")
        if expected == "F" and part.value >= MAX_CAPACITANCE:
            # with a unit written the prefix is the likely slip ("10 mF" was told that a plain
            # number is in farads)
            why = ("check its prefix (p, n, u or µ for the usual tank and stray capacitances)" if part.unit else
                   "a plain number is in farads (a three-digit code such as 472 for 4.7 nF is not read); write the "
                   "value with its unit, e.g. \"4.7 nF ±5%\"")
            raise SetupError(f"{setup.source}: part {part_name!r} = {part.text!r} is {part.value:.3g} F, far above any "
                             f"tank, probe or winding capacitance: {why}")

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
        """Refuse a result with a non-finite value or uncertainty, a non-positive quantity of
        :attr:`positive` or one of :attr:`not_negative` below zero by more than
        :data:`NEGATIVE_BEYOND` expanded uncertainties, at any point of a curve too: it could
        not be a measurement of a real part.

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
        # the analysis's own first warning, often the cause (a clipped trace was refused as "is
        # the record long enough?" with the clipping unsaid)
        warned = had_warned("analysis", result.warnings)
        points = [(name, q.value, q.expanded_uncertainty, q.unit) for name, q in result.quantities.items()]
        points += [(name, float(v), float(u), c.unit) for name, c in result.curves.items()
                   for v, u in zip(c.values, c.expanded_uncertainty)]
        for name, value, expanded, unit in points:
            finite = math.isfinite(value) and math.isfinite(expanded)
            below = name in self.not_negative and value + NEGATIVE_BEYOND * expanded < 0
            if not finite or (name in self.positive and value <= 0) or below:
                what = ("is not a finite number" if not finite
                        else f"is below zero by more than {NEGATIVE_BEYOND:g} times its uncertainty" if below
                        else "is not positive")
                raise NothingToMeasure(
                    f"{source}: {name} came out as {value:.4g} ± {expanded:.2g} {unit}, which "
                    f"{what}: no measurement of a real part; {self.unphysical_hint}{warned}",
                    result.source if isinstance(result.source, str) else None)
            if name in self.determined and expanded >= abs(value):
                raise AnalysisRefused(f"{source}: {name} came out as {value:.4g} ± {expanded:.2g} {unit}: "
                                      f"{self._undetermined_cause(result, name)}{warned}")

    def _undetermined_cause(self, result: AnalysisResult, name: str) -> str:
        """Why a quantity is not determined and what to check: the input given by the setup
        (type B) that holds most of its variance when one holds most of it (a tank capacitor
        written "±100%" was blamed on the capture), else :attr:`undetermined_hint`."""
        entries = result.budget.get(name, ())
        top = max(entries, key=lambda e: e.variance_share, default=None)
        if top is not None and top.kind == "B" and top.variance_share > 0.5:
            return (f"it is not determined (the interval takes in zero), {100 * top.variance_share:.0f} % of its "
                    f"variance from {top.source}; check its value and uncertainty in the setup")
        return f"the capture does not determine it (the interval takes in zero); {self.undetermined_hint}"

    def unresolved(self, quantities: Mapping[str, Any]) -> tuple[str, ...]:
        """One warning naming the quantities of :attr:`resolvable`, other than those of
        :attr:`determined` (which are refused instead), whose expanded uncertainty reaches their
        value: the interval takes in zero, so the capture says nothing of them (a ring that fills
        a record with 3 % of its decay printed Q = 31 ± 346 k and R = 7 ± 78 mΩ without a word)."""
        resolvable = (*self.positive, *self.not_negative) if self.resolvable is None else self.resolvable
        loose = [f"{name} = {eng_pm(q.value, q.expanded_uncertainty, q.unit)}" for name, q in quantities.items()
                 if name in resolvable and name not in self.determined and math.isfinite(q.value)
                 and q.expanded_uncertainty >= abs(q.value)]
        if not loose:
            return ()
        what = "is" if len(loose) == 1 else "are"
        return (f"{', '.join(loose)} {what} not determined by this measurement (the expanded uncertainty reaches "
                "the value): read as unknown",)

    @staticmethod
    def channel(capture: Capture, setup: Setup, role: str) -> Channel:
        """The channel the setup maps ``role`` to."""
        return capture.channel(setup.columns[role])

    # -- the two hooks a method implements -------------------------------------------------

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:  # pragma: no cover
        """Fit the measurement's captures: the fitted blocks and whatever else the model needs."""
        raise NotImplementedError

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:  # pragma: no cover
        """The measurement function: every declared output from the inputs ``x`` (numbers or
        ``uncertainties`` values, arrays of them for a curve), given the estimate's ``settings``."""
        raise NotImplementedError

    def review(self, estimate: Estimate, inputs: InputSet, propagation: Propagation) -> tuple[str, ...]:
        """Warnings that need the propagated result (none unless a method says otherwise)."""
        return ()

    # -- the shared analysis ----------------------------------------------------------------

    def analyze(self, measurement: Measurement, setup: Setup) -> AnalysisResult:
        """Estimate, add the declared parts and instrument figures, propagate, check, build.

        With ``[calibration] reference`` the measurement function is the substituted one of
        :func:`wavefit.calibration.substitution.with_reference` (the reference capture's
        fitted inputs and the reference part's known value added to the inputs).

        Parameters
        ----------
        measurement
            The captures, each bound to its parts.
        setup
            The parsed setup (parts, instrument figures, options).

        Returns
        -------
        AnalysisResult
            Scalars in ``quantities`` (with budget and correlation), curves in ``curves``.

        Raises
        ------
        AnalysisRefused
            From the estimate, or when a result is not physical (:meth:`check_physical`).
        """
        channels = channel_calibration(setup, self.name, self.channel_ratio_roles)  # read once, checked
        time = measurement.first.capture.time
        refuse_skew_beyond_record(channels, float(time[-1] - time[0]), setup)
        estimate = self.estimate(measurement, setup)
        inputs = self.inputs(estimate, measurement, setup, channels)
        model, substitution_warnings = with_reference(self, estimate, inputs, setup)
        variables = unit_variables(inputs)
        given = model(variables, estimate.settings)  # evaluated once for scalars and curves
        names = tuple(n for n in self.outputs if n not in self.optional or given.get(n) is not None)
        scalars = tuple(n for n in scalar_names(self.outputs) if n in names)

        def measurement_function(x: Mapping[str, Any]) -> dict[str, Any]:
            return _declared(model(x, estimate.settings), names)

        outputs = _declared(given, names)
        prop = propagate_outputs(inputs, {name: outputs[name] for name in scalars}, variables,
                                 {name: self.outputs[name].unit for name in scalars}, model=measurement_function)
        declared = {name: out for name, out in self.outputs.items() if isinstance(out, Curve) and name in names}
        curves = propagate_curves(inputs, outputs, declared, estimate.axes, variables)
        warnings = (*estimate.warnings, *substitution_warnings, *self.review(estimate, inputs, prop),
                    *self.unresolved(prop.quantities),
                    *(() if channels is None or channels.too_old is None else (channels.too_old,)))
        result = AnalysisResult(self.name, measurement.source, prop.quantities, prop.budget, estimate.fit,
                                tuple(dict.fromkeys(warnings)), prop.correlation, estimate.plot,
                                adequate=estimate.adequate, curves=curves, fitted=estimate.blocks,
                                propagation=prop)
        self.check_physical(result)
        return result

    def inputs(self, estimate: Estimate, measurement: Measurement, setup: Setup,
               channels: ChannelCalibration | None = None) -> InputSet:
        """The measurement function's inputs: the estimate's fitted blocks and other inputs, then
        every declared part the setup gives for all captures (type B), the timebase and the
        vertical gain of every mapped channel. With a channel comparison (``channels``), its
        gain ratio and skew are inputs (type A, with the file and its age as their origin) and
        the ratio's denominator channel has no gain of its own. An input the model does not use
        has no sensitivity and so no part in the result or its budget."""
        inputs = InputSet()
        for block in estimate.blocks:
            inputs.add_correlated(block.names, block.values, block.covariance, block.units,
                                  block.degrees_of_freedom,
                                  group=block.group, kind=block.kind)
        for extra in estimate.inputs:
            inputs.add(extra.name, extra.value, extra.standard_uncertainty, extra.unit, extra.kind,
                       dof=extra.dof, distribution=extra.distribution)
        for name in self.parts:
            if name in measurement.parts:
                inputs.add_part(name, measurement.parts[name])
        inputs.add("timebase", 1.0, setup.timebase.standard_uncertainty, "", "B")
        for role in self.roles:
            if role in setup.columns and (channels is None or role != channels.dropped_gain):
                inputs.add(GAIN_KEY_PREFIX + role, 1.0, setup.gain_for(role).standard_uncertainty, "", "B")
        if channels is not None:
            for given in (channels.ratio, channels.skew):
                inputs.add(given.name, given.value, given.standard_uncertainty, given.unit, "A",
                           dof=given.degrees_of_freedom, origin=channels.origin)
        return inputs


def _declared(outputs: Mapping[str, Any], names: tuple[str, ...]) -> dict[str, Any]:
    """The outputs ``names`` from what a measurement function returned, in that order."""
    missing = [name for name in names if outputs.get(name) is None]
    if missing:
        raise KeyError(f"the measurement function returned no {', '.join(missing)}")
    return {name: outputs[name] for name in names}
