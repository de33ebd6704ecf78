"""``wavefit calibrate reference``: analyse a reference part's capture and write the file a
setup names in ``[calibration] reference`` (:mod:`wavefit.calibration.reference_file`).

The capture is analysed with the setup's method, wiring and parts, exactly as a part under
test would be, but without the setup's own reference (a reference does not correct itself).
"""
from __future__ import annotations

import argparse
import datetime as dt
import sys
from dataclasses import replace
from pathlib import Path
from typing import Any

from ..errors import AnalysisRefused, SetupError
from ..values import eng, parse_part
from .reference_file import ReferenceSubstitution, wiring, write_reference
from .substitution import implausible_correction


def run(args: argparse.Namespace) -> int:
    """Analyse the reference capture, write the file, print one line of what it holds."""
    from .. import __version__
    from ..analysis import prepare
    from ..methods import get_method
    from ..numerics import collected, numerical_failures_refused
    from ..provenance import file_sha256
    from ..report.text import SAFETY_NOTE
    from ..output_files import check_output
    from ..setup import load_setup
    from ..uncertainty import propagate

    setup = load_setup(args.setup)
    # (the setup's own reference file is not read here: a reference does not correct itself, so
    # --out may renew it, as the calibration procedure asks)
    setup = replace(setup, calibration=replace(setup.calibration, reference=None))
    check_output("--out", args.out, (args.capture, args.setup, *setup.named_files()))
    quantity, known_text = _quantity_and_value(args.part)
    method = get_method(setup.method)
    if method.no_substitution:
        raise SetupError(f"method {method.name!r} cannot be corrected by a reference part: {method.no_substitution}; "
                         "check the fixture by analysing a reference coil as a part and comparing with its known value")
    if quantity not in method.quantities:
        raise SetupError(f"--part names {quantity!r}; method {method.name!r} reports "
                         f"{', '.join(method.quantities)}")
    unit = method.outputs[quantity].unit
    known = parse_part(known_text, unit)
    if not (known.value > 0 and known.standard_uncertainty > 0):
        raise SetupError(f"--part: the known value must be positive and carry its uncertainty, got {known_text!r}")
    prepared = prepare(args.capture, setup, args.sample_interval)
    with collected(), numerical_failures_refused(prepared.captures):
        estimate = prepared.method.estimate(prepared.measurement, prepared.setup)
    if not estimate.adequate:
        raise AnalysisRefused(f"{args.capture}: the method's model misses the reference capture; "
                              "it cannot calibrate the fixture")
    inputs = method.inputs(estimate, prepared.measurement, prepared.setup)
    inputs.add("known", known.value, known.standard_uncertainty, unit, "B", distribution=known.distribution)
    prop = propagate(inputs, lambda x: _measured_and_factor(method, x, estimate.settings, quantity),
                     {quantity: unit, "factor": ""})
    measured, factor = prop.quantities[quantity], prop.quantities["factor"]
    if not (measured.value > 0 and factor.value > 0):
        raise AnalysisRefused(f"{args.capture}: {quantity} of the reference came out as {measured.value:.4g} {unit}; "
                              "no measurement of a real part")
    implausible = implausible_correction(quantity, known.text, factor.value)
    if implausible:
        raise AnalysisRefused(f"{args.capture}: {quantity} measured {eng(measured.value, unit)}; {implausible}")
    reference = ReferenceSubstitution(
        method=method.name, quantity=quantity, known=known,
        made=dt.datetime.now(dt.timezone.utc).replace(microsecond=0),
        capture=str(Path(args.capture).resolve()), capture_sha256=file_sha256(args.capture),
        tool_version=__version__, blocks=estimate.blocks, inputs=estimate.inputs, settings=dict(estimate.settings),
        correction=(factor.value, factor.standard_uncertainty), columns=wiring(prepared.setup.columns))
    write_reference(reference, args.out)
    for warning in dict.fromkeys(estimate.warnings):
        print(f"wavefit: warning: {warning}", file=sys.stderr)
    print(f"{args.out}: {quantity} of the reference measured {eng(measured.value, unit)} "
          f"(u {eng(measured.standard_uncertainty, unit, 2)}), known {known.text}: correction factor "
          f"{factor.value:.6f} (u {factor.standard_uncertainty:.2g}, shared inputs included)")
    print(SAFETY_NOTE)  # the step where the reference part is put in the fixture
    return 0


def _measured_and_factor(method: Any, x: Any, settings: Any, quantity: str) -> dict[str, Any]:
    measured = method.model(x, settings)[quantity]
    return {quantity: measured, "factor": x["known"] / measured}


def _quantity_and_value(text: str) -> tuple[str, str]:
    """``'L = 100 uH ±0.1%'`` as ``('L', '100 uH ±0.1%')``."""
    quantity, sep, value = text.partition("=")
    if not sep or not quantity.strip() or not value.strip():
        raise SetupError(f"--part must read 'QUANTITY = VALUE ±TOLERANCE' (e.g. 'L = 100 uH ±0.1%'), got {text!r}")
    return quantity.strip(), value.strip()
