"""Reference-part substitution in the measurement function.

With a reference file (:mod:`wavefit.calibration.reference_file`) the output ``Y`` it corrects
becomes

    Y = y(x_dut, s) · Y_known / y(x_ref, s),

``y`` the method's measurement function, ``x_dut`` the fitted inputs of the part under test,
``x_ref`` those of the reference capture (budget names prefixed ``reference``), ``s`` every
input the two share (parts of the fixture, timebase, channel gains: the same fixture and scope)
and ``Y_known`` the reference part's known value. The whole function is propagated at once
(GUM 5.2, correlated inputs): an input that scales ``y`` (the sense resistor and the timebase
in rl-step's L, the channels' gain ratio there too) cancels exactly, one that enters otherwise
cancels in part, and nothing is counted twice. The other outputs keep their values.

What the budget cannot hold: the part of the fixture's error that does not scale alike for the
two parts (a stray whose share depends on the value or the frequency content). Substitution is
valid only for a reference close to the part under test; a part more than
:data:`SIMILAR_VALUE_FACTOR` away from the reference is warned.

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of uncertainty
   in measurement (GUM), 5.2 and F.1.2.3 (a systematic effect common to a comparison cancels).
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Mapping

from ..errors import SetupError
from ..uncertainty import InputSet
from .in_use import FUTURE_DAYS, made_in_the_future
from .reference_file import ReferenceSubstitution, read_reference, wiring

if TYPE_CHECKING:  # imported for the annotations only: base imports this module
    from ..methods.base import Method
    from ..methods.estimate import Estimate
    from ..setup import Setup

#: Budget names of the reference capture's own inputs start with this.
REFERENCE_PREFIX = "reference "
#: A part whose value is more than this factor above or below the reference's is
#: warned: the fixture's errors that depend on the value or the time scale (the probe's pole
#: against tau, the generator's edge against tau, a winding capacitance's share) then differ by
#: about that factor between the two captures and do not cancel. Chosen so that such errors, a
#: few per mille at most where the method does not warn already, stay a small part of the
#: uncertainty; a judgement, not a published limit.
SIMILAR_VALUE_FACTOR = 2.0
#: Largest |known/measured − 1| of the reference accepted. The errors substitution corrects (a
#: sense resistor's or tank capacitor's tolerance, 1–5 %; two channels' gains, ±2–3 % each;
#: probe loading and timebase, less) add to a few per cent, some 10 % in a crude fixture
#: (common practice; 4.3 % in the ngspice fixture of the tests). A factor beyond 20 % means a
#: known value typed with the wrong prefix or unit (330 H for 330 µH gives 10⁶), a capture of
#: another part, or a fixture that is not the one described: nothing a factor should absorb.
MAX_CORRECTION_DEVIATION = 0.20

Model = Callable[[Mapping[str, Any], Mapping[str, Any]], dict[str, Any]]


def known_input(quantity: str, file: Path) -> str:
    """The budget name of the reference part's known value: the quantity and the file it is from."""
    return f"known {REFERENCE_PREFIX}{quantity} ({file.name})"


def with_reference(method: "Method", estimate: "Estimate", inputs: InputSet, setup: "Setup") -> tuple[Model, tuple[str, ...]]:
    """The method's measurement function, corrected by the setup's reference file if it names one.

    Without ``[calibration] reference`` the method's own :meth:`~wavefit.methods.base.Method.model`
    is returned unchanged. With one, the reference's fitted blocks, its other inputs and its known
    value are added to ``inputs`` and the function of the module docstring is returned.

    Returns
    -------
    model, warnings
        ``model(x, settings)`` as :meth:`Method.model`, and remarks for the result.

    Raises
    ------
    SetupError
        The file is unreadable, of another method, corrects no output of the method, or was
        analysed with other settings (another wiring or other parts present).
    """
    path = setup.calibration.reference
    if path is None:
        return method.model, ()
    reference = read_reference(path, method.name)
    where = f"reference substitution file {path}"
    if reference.quantity not in method.quantities:
        raise SetupError(f"{where} corrects {reference.quantity!r}, which method {method.name!r} does not report")
    unit = method.outputs[reference.quantity].unit
    if reference.known.unit and reference.known.unit != unit:
        raise SetupError(f"{where}: the known value {reference.known.text!r} is not in {unit!r}")
    if reference.columns is not None:  # (a file made before the columns were kept is not checked)
        now = wiring(setup.columns)
        for role in sorted(set(reference.columns) | set(now)):
            if reference.columns.get(role) != now.get(role):
                raise SetupError(f"{where} was analysed with {role!r} on column {reference.columns.get(role)!r}, the "
                                 f"setup {setup.source} maps it to {now.get(role)!r}; record the reference with the "
                                 "channels as they are wired now")
    if dict(reference.settings) != dict(estimate.settings):
        raise SetupError(f"{where} was analysed with other settings ({_shown(reference.settings)}) than this "
                         f"measurement ({_shown(estimate.settings)}); record the reference with the same wiring "
                         "and parts")
    quantity, known = reference.quantity, known_input(reference.quantity, path)
    own = {name for block in estimate.blocks for name in block.names} | {i.name for i in estimate.inputs}
    _add_reference_inputs(inputs, reference, known)
    renamed = {name: REFERENCE_PREFIX + name for block in reference.blocks for name in block.names}
    renamed |= {i.name: REFERENCE_PREFIX + i.name for i in reference.inputs}

    def reference_measured(x: Mapping[str, Any]) -> Any:
        """y(x_ref, s): the reference's own inputs with those it shares with the part."""
        shared = {name: value for name, value in x.items() if name not in own}
        x_ref = shared | {name: x[prefixed] for name, prefixed in renamed.items()}
        return method.model(x_ref, reference.settings)[quantity]

    def substituted(x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        outputs = dict(method.model(x, settings))
        outputs[quantity] = outputs[quantity] * x[known] / reference_measured(x)
        return outputs

    nominal = {i.name: i.value for i in inputs.inputs}
    implausible = implausible_correction(quantity, reference.known.text,
                                         nominal[known] / reference_measured(nominal))
    if implausible:
        raise SetupError(f"{where}: {implausible}; make the reference file again")
    corrected = substituted(nominal, estimate.settings)[quantity]
    warnings = (similarity_warning(quantity, corrected, reference), _age_warning(reference, path, setup))
    return substituted, tuple(w for w in warnings if w)


def implausible_correction(quantity: str, known: str, factor: float) -> str | None:
    """Why a correction factor known/measured cannot be a fixture's correction (more than
    :data:`MAX_CORRECTION_DEVIATION` from 1), or None when it can."""
    if abs(factor - 1.0) <= MAX_CORRECTION_DEVIATION:
        return None
    return (f"the reference's known {quantity} {known!r} is {factor:.4g} times what the capture measures, more "
            f"than {MAX_CORRECTION_DEVIATION:.0%} from 1: a fixture's errors are a few per cent; check the known "
            "value's prefix and unit, and that the capture is of that reference in this fixture")


def similarity_warning(quantity: str, value: float, reference: ReferenceSubstitution) -> str | None:
    """A warning when the part's (corrected) value is more than :data:`SIMILAR_VALUE_FACTOR`
    away from the reference's known value, else None."""
    ratio = value / reference.known.value
    if 1.0 / SIMILAR_VALUE_FACTOR <= ratio <= SIMILAR_VALUE_FACTOR:
        return None
    return (f"{quantity} is {ratio:.3g} times the reference part's {reference.known.text}: substitution corrects "
            f"the fixture only for parts within a factor {SIMILAR_VALUE_FACTOR:g} of the reference; the mismatch "
            "is not in the budget; use a reference closer in value")


def _age_warning(reference: ReferenceSubstitution, path: Path, setup: "Setup") -> str | None:
    """A warning when the reference is older than the setup's ``max_age_days``, else None."""
    limit = setup.calibration.max_age_days
    age_days = reference.age().total_seconds() / 86400.0
    if age_days < -FUTURE_DAYS:
        return made_in_the_future("reference substitution", path, reference.made)
    if limit is None or age_days <= limit:
        return None
    return (f"the reference substitution {path.name} is {age_days:.0f} days old, more than the setup's "
            f"max_age_days = {limit:g}: capture the reference part again")


def _add_reference_inputs(inputs: InputSet, reference: ReferenceSubstitution, known_name: str) -> None:
    for block in reference.blocks:
        inputs.add_correlated([REFERENCE_PREFIX + name for name in block.names], block.values,
                              block.covariance_matrix(), block.units, block.degrees_of_freedom,
                              group=REFERENCE_PREFIX + block.group, kind=block.kind)
    for extra in reference.inputs:
        inputs.add(REFERENCE_PREFIX + extra.name, extra.value, extra.standard_uncertainty, extra.unit, extra.kind,
                   dof=extra.dof, distribution=extra.distribution)
    known = reference.known
    inputs.add(known_name, known.value, known.standard_uncertainty, known.unit, "B",
               distribution=known.distribution)


def _shown(settings: Mapping[str, Any]) -> str:
    return ", ".join(f"{key} = {sorted(value) if isinstance(value, frozenset) else value}"
                     for key, value in settings.items())
