"""The library's front door: ``analyze(source, setup)``."""
from __future__ import annotations

import math
import os
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, replace
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from .blas_threads import one_blas_thread
from .capture_checks import refuse_shared_columns, without_glitches
from .errors import AnalysisRefused, CaptureError, NothingToMeasure, SetupError, WavefitError, had_warned
from .io import capture_from_frame, read_capture
from .io.capture import Capture
from .measurement import Measurement, bind, capture_sources
from .methods import get_method
from .methods.base import Method
from .montecarlo import DEFAULT_SEED, MEASUREMENT_DRAWS, propagate_measurement
from .numerics import collected, numerical_failures_refused
from .provenance import PendingHashes, capture_paths, changed_files, provenance
from .results import AnalysisResult
from .setup import RelativeFigure, Setup, load_setup

Source = "str | os.PathLike | pd.DataFrame | Capture"
#: The ways of propagating the uncertainty: the GUM's law (always) and JCGM 101's Monte Carlo beside it.
UNCERTAINTY_MODES = ("linear", "montecarlo")


@one_blas_thread()
def analyze(source: Any = None, setup: str | os.PathLike | Mapping[str, Any] | Setup | None = None,
            *, sample_interval: float | None = None, uncertainty: str = "linear",
            draws: int = MEASUREMENT_DRAWS, seed: int | None = DEFAULT_SEED) -> AnalysisResult:
    """Analyse one capture (path, DataFrame or Capture) with a setup (TOML path or dict).

    ``uncertainty="montecarlo"`` also propagates the inputs' distributions through the
    method's measurement function by Monte Carlo (JCGM 101:2008) with ``draws`` draws from
    ``seed`` and reports its coverage intervals in ``result.monte_carlo`` beside the
    linear ones (:func:`with_monte_carlo`).

    When the setup names its captures in ``[[captures]]`` entries (``lc-sweep``),
    ``source`` may be ``None`` (the entries' files), a folder that holds a file of
    each entry's name (one part's captures, as ``batch`` gives them), or a sequence
    of sources that replaces the setup's files in order; each capture is bound to
    its entry's parts (:func:`wavefit.measurement.capture_sources`). Returns a frozen
    :class:`~wavefit.results.AnalysisResult`; its ``to_dict()`` is what
    ``wavefit analyze --json`` prints.
    """
    if setup is None:
        raise SetupError("a setup is needed: pass a TOML path or a dict with at least 'method'")
    if uncertainty not in UNCERTAINTY_MODES:
        raise SetupError(f"uncertainty must be one of {', '.join(UNCERTAINTY_MODES)}, got {uncertainty!r}")
    prepared = prepare(source, load_setup(setup), sample_interval)
    hashes = PendingHashes(capture_paths(prepared.sources))  # beside the analysis
    with refusals_with_the_capture(prepared.captures), collected() as numerical, \
            numerical_failures_refused(prepared.captures), other_method_named(prepared.captures, prepared.method.name):
        result = prepared.method.analyze(prepared.measurement, prepared.setup)
    remark = numerical.remark()
    if remark is not None:
        result = replace(result, warnings=(*result.warnings, remark))
    if uncertainty == "montecarlo":
        result = with_monte_carlo(result, draws, seed)
    record = provenance(prepared.as_parsed, prepared.sources, prepared.captures, hashes)
    result = replace(result, provenance=record, warnings=(*result.warnings, *changed_files(record)))
    return with_capture_remarks(result, prepared.captures)


@dataclass(frozen=True)
class Prepared:
    """What an analysis starts from: the method, the captures bound to their parts, the setup
    (with the time axis's uncertainty and any columns from other files), the setup as parsed,
    and the sources the captures were read from."""

    method: Method
    measurement: Measurement
    setup: Setup
    as_parsed: Setup
    sources: Sequence[Any]
    captures: Sequence[Capture]


def prepare(source: Any, parsed: Setup, sample_interval: float | None) -> Prepared:
    """Check the setup against its method, read and check the captures, and bind them
    (the steps of :func:`analyze` before the method's own analysis)."""
    as_parsed = parsed
    method = get_method(parsed.method)
    method.check_setup(parsed)
    interval = sample_interval if sample_interval is not None else parsed.sample_interval
    time_col = parsed.columns.get("time")
    sources, entries = capture_sources(source, parsed, method.capture_count)
    captures = [load_capture(s, interval, time_col) for s in sources]
    if parsed.column_files:
        captures, parsed = with_columns_from_files(captures, parsed, interval)
    refuse_shared_columns(captures, parsed.columns, parsed.source)
    method.check_channel_units(captures, parsed)
    captures = [without_glitches(capture) for capture in captures]
    parsed = with_time_axis_uncertainty(parsed, captures)
    return Prepared(method, bind(captures, parsed, entries), parsed, as_parsed, sources, captures)


def with_monte_carlo(result: AnalysisResult, draws: int, seed: int | None) -> AnalysisResult:
    """The result with a Monte Carlo run (JCGM 101:2008) on the measurement function the
    method propagated (``result.propagation``), scalars and curves, and a warning for any
    output whose draws were not all finite.

    Raises
    ------
    AnalysisRefused
        When the method propagated no measurement function, or its function cannot be
        evaluated on draws (it needs one number somewhere, see :class:`wavefit.montecarlo.Sampled`).
    """
    propagation = result.propagation
    if propagation is None or propagation.model is None:
        raise AnalysisRefused(f"method {result.method!r} gives no measurement function to run Monte Carlo on")
    try:
        report = propagate_measurement(propagation.inputs, propagation.model, draws=draws, seed=seed)
    except (TypeError, ValueError) as exc:
        raise AnalysisRefused(f"Monte Carlo cannot evaluate the measurement function of {result.method!r}: "
                              f"{exc}") from None
    invalid = [f"{name} ({count} of {report.draws})" for name, count in report.invalid.items() if count]
    warnings = result.warnings
    if invalid:
        warnings = (*warnings, "Monte Carlo: some draws of the measurement function were not finite numbers and "
                               f"are left out of the intervals: {', '.join(invalid)}")
    return replace(result, monte_carlo=report, warnings=warnings)


def with_columns_from_files(
    captures: Sequence[Capture], setup: Setup, sample_interval: float | None
) -> tuple[list[Capture], Setup]:
    """Each capture with the channels that the setup takes from other files (one channel per file).

    The other file's time axis must be the capture's: the same number of
    samples, starts within half a sample, and intervals that drift apart by
    less than half a sample over the record. Its channel is added under the
    header ``<role> from <file>``, to which the setup's role then points.

    Parameters
    ----------
    captures
        The captures named on the command line or in the call.
    setup
        The parsed setup; its ``column_files`` name the other files by role.
    sample_interval
        The interval given for the captures, used for the other files too.

    Returns
    -------
    tuple of (list of Capture, Setup)
        The captures with the added channels, and the setup pointing its roles at them.

    Raises
    ------
    CaptureError
        When a file cannot be read or its time axis is not the capture's.
    """
    columns = dict(setup.columns)
    others = {role: read_capture(path, sample_interval=sample_interval) for role, path in setup.column_files.items()}
    merged = []
    for capture in captures:
        added = []
        for role, other in others.items():
            _check_same_axis(capture, other)
            channel = other.channel(setup.columns[role])
            header = f"{role} from {other.source}"
            added.append(replace(channel, header=header, name=header, position=None, alias=""))
            columns[role] = header
        merged.append(replace(capture, channels=(*capture.channels, *added),
                              warnings=(*capture.warnings, *(w for o in others.values() for w in o.warnings))))
    return merged, replace(setup, columns=columns, column_files={})


def _check_same_axis(capture: Capture, other: Capture) -> None:
    """Refuse a file whose time axis is not the capture's (rows, start, interval)."""
    dt = capture.sample_interval
    problem = None
    if other.rows != capture.rows:
        problem = f"{other.rows} samples against {capture.rows}"
    elif abs(float(other.time[0]) - float(capture.time[0])) > 0.5 * dt:
        problem = f"it starts at {float(other.time[0]):.6g} s against {float(capture.time[0]):.6g} s"
    elif abs(other.sample_interval - dt) * (capture.rows - 1) > 0.5 * dt:
        problem = f"its sample interval is {other.sample_interval:.6g} s against {dt:.6g} s"
    if problem is not None:
        raise CaptureError(
            f"{other.source} does not share the time axis of {capture.source} ({problem}); "
            "record both channels in one acquisition and export them with the same settings"
        )


def with_time_axis_uncertainty(setup: Setup, captures: Sequence[Capture]) -> Setup:
    """The setup with its timebase figure widened by what the captures' time axes leave uncertain.

    A time axis rebuilt from stamps printed with too few digits has an
    interval known only to u_axis (relative, see :mod:`wavefit.io.timebase`);
    it adds in quadrature to the instrument's timebase figure (JCGM 100:2008,
    5.1.2, uncorrelated inputs) and enters the budget as the ``timebase`` input.
    The largest over several captures is taken as common to them all, which
    overstates it for methods that combine captures (lc-sweep).

    Parameters
    ----------
    setup
        The parsed setup.
    captures
        The captures about to be analysed.

    Returns
    -------
    Setup
        ``setup`` itself when no axis was rebuilt, else a copy with the wider figure.

    References
    ----------
    .. [1] JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
       uncertainty in measurement, 5.1.2.
    """
    u_axis = max((c.interval_uncertainty for c in captures), default=0.0)
    if u_axis <= 0.0:
        return setup
    figure = setup.timebase
    combined = math.hypot(figure.standard_uncertainty, u_axis)
    text = f"{figure.text} with the rebuilt time axis (u = {u_axis:.2g})"
    return replace(setup, timebase=RelativeFigure(combined, text, 1.0))


#: The kind of record each method measures, for :func:`other_method_named` (a method not named
#: here gets no hint: a ramp's record is neither).
RECORD_KINDS = {"rl-step": "a step response", "lc-ring": "a ring", "lc-sweep": "a ring"}
#: The method a record of each kind is named for.
METHOD_FOR = {"a step response": "rl-step", "a ring": "lc-ring"}
#: A refused capture is classified on at most this many samples (every k-th): suggest's step
#: search walks every transition it finds, and on a 10⁷-sample record of noise it took 69 s.
CLASSIFIED_SAMPLES = 100_000


@contextmanager
def other_method_named(captures: Sequence[Capture], method: str) -> Iterator[None]:
    """A refusal for a capture without what the method measures names the method the capture
    looks like, when it is of another kind (lc-ring given a step response was refused as "no
    damped oscillation ... the ring is probably clipped", rl-step given a ring as "no
    transition found"): by the tests of ``wavefit suggest``, a step first, then a ring of
    Q of :data:`~wavefit.suggest.rules.HINTED_Q` or more, on the refused capture alone
    (``NothingToMeasure.source``), thinned to :data:`CLASSIFIED_SAMPLES`."""
    try:
        yield
    except NothingToMeasure as exc:
        capture = next((c for c in captures if exc.source is not None and str(c.source) == exc.source), None)
        if capture is None or method not in RECORD_KINDS:
            raise
        kind = _record_kind(_thinned(capture))
        if kind is None or kind == RECORD_KINDS[method]:
            raise
        raise AnalysisRefused(f"{exc}; {capture.source} looks like {kind}: method = \"{METHOD_FOR[kind]}\"? "
                              "(wavefit suggest proposes a setup)") from None


def _record_kind(capture: Capture) -> str | None:
    """"a step response", "a ring" or None, by suggest's tests (:func:`other_method_named`)."""
    from .suggest.ring_record import find_ring_record
    from .suggest.rules import HINTED_Q
    from .suggest.step_record import search_step

    try:
        if search_step(capture)[0] is not None:
            return "a step response"
        ring = find_ring_record(capture)
    except (WavefitError, ValueError, ArithmeticError, np.linalg.LinAlgError):
        return None
    return "a ring" if ring is not None and ring.quality_factor >= HINTED_Q else None


def _thinned(capture: Capture) -> Capture:
    """Every k-th sample of the capture, at most :data:`CLASSIFIED_SAMPLES` of them."""
    k = -(-capture.rows // CLASSIFIED_SAMPLES)
    if k <= 1:
        return capture
    return replace(capture, time=capture.time[::k], sample_interval=capture.sample_interval * k,
                   channels=tuple(replace(ch, values=ch.values[::k]) for ch in capture.channels))


@contextmanager
def refusals_with_the_capture(captures: Sequence[Capture]) -> Iterator[None]:
    """A refusal of the analysis names the capture when its message does not, and carries the
    reader's first warning, which is often its cause (a time column in µs without a unit, read
    as seconds, was refused as "the parallel_load ... explains 40831921 % of the measured
    damping", with neither the file nor the warning said)."""
    try:
        yield
    except AnalysisRefused as exc:
        message = str(exc)
        sources = [str(c.source) for c in captures]
        if not any(source in message for source in sources):
            message = f"{', '.join(sources)}: {message}"
        message += had_warned("reader", [w for c in captures for w in c.warnings])
        if message == str(exc):
            raise
        raise AnalysisRefused(message) from exc


def with_capture_remarks(result: AnalysisResult, captures: Sequence[Capture]) -> AnalysisResult:
    """The result with every capture's warnings (once each, first) and the reader's notes.

    Parameters
    ----------
    result
        What the method returned.
    captures
        The captures it analysed (their sources prefix the remarks when there are several).

    Returns
    -------
    AnalysisResult
        A copy with the warnings merged and ``fit.capture_notes`` when the reader noted anything.
    """
    several = len(captures) > 1
    remarks = [f"{c.source}: {w}" if several else w for c in captures for w in c.warnings]
    warnings = tuple(dict.fromkeys([*remarks, *result.warnings]))
    notes = [f"{c.source}: {n}" if several else n for c in captures for n in c.notes]
    fit = result.fit.with_capture_notes(tuple(notes)) if notes else result.fit
    return replace(result, warnings=warnings, fit=fit)


def load_capture(source: Any, sample_interval: float | None, time_column: Any = None) -> Capture:
    """Turn a path, DataFrame or Capture into a :class:`Capture`."""
    if isinstance(source, Capture):
        return source
    if isinstance(source, pd.DataFrame):
        return capture_from_frame(source, sample_interval=sample_interval, time_column=time_column)
    return read_capture(source, sample_interval=sample_interval, time_column=time_column)
