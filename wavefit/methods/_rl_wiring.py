"""Wiring faults of an rl-step capture, found before any fit so that the refusal names them.

In the rl-step circuit (generator -> drive -> coil -> sense -> sense resistor ->
ground) the drive node steps with the generator at once, and the sense node,
which carries the coil's current, follows it with the loop time constant: it
moves in the same direction and never jumps (the current through an
inductance is continuous). A drive channel that does not step, a sense
channel that moves against the drive, or a sense channel that jumps where the
drive does not are wiring or mapping faults; fitted regardless they give
negative or absurd inductances.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import AnalysisRefused
from ..signal.edges import Edge, find_edges, noise_rms
from ..signal.levels import StateLevels, state_levels
from ..signal.robust import mad_sigma

#: A channel "jumps" at an edge when it covers more than this fraction of its step within
#: JUMP_SAMPLES samples: an exponential with a time constant of 10 samples or more (the
#: least rl-step is made for) covers at most 1 − e^(−0.2) = 18 % in two samples.
JUMP_FRACTION = 0.5
JUMP_SAMPLES = 2
#: The sense channel is judged to move against the drive when most of its edges do.
AGAINST_SHARE = 0.5
#: A drive whose two settled levels are not apart beyond its noise still steps when it jumps
#: at most sense edges by more than this many times the noise of a difference over the jump's
#: span (the amplitude find_edges asks of a step). A source resistance well above the rest of the loop leaves the drive node
#: a jump of nearly the generator's step that relaxes back to within a few noise deviations
#: of its level before: 50 Ω against 10.5 Ω at 34 dB was refused as a drive that does not
#: step, though each edge jumped by 20 deviations (measured).
DRIVE_JUMP_SNR = 5.0
#: Record after each sense edge's 10 % instant (to the next edge or the end), in its 10–90 %
#: durations (ln 9 tau each), below which a drive that seems not to step may be one whose
#: relaxation fills the record: two durations are 4.4 tau; the jump test's noise, read from
#: differences over the jump's span, then holds the relaxation itself (a single step with
#: 3 tau after it, measured).
SHORT_AFTER = 2.0


def check_wiring(t: np.ndarray, sense: np.ndarray, drive: np.ndarray | None, edges: list[Edge],
                 source: str, sense_levels: StateLevels | None = None) -> None:
    """Refuse a capture whose drive and sense channels cannot be the rl-step circuit's.

    Parameters
    ----------
    t, sense, drive
        Time axis and the two channels (drive None when not recorded).
    edges
        The sense channel's transitions (:func:`wavefit.signal.edges.find_edges`).
    source
        The capture's name, for the message.
    sense_levels
        The sense channel's state levels, when the caller found them already.

    Raises
    ------
    AnalysisRefused
        Naming the likely fault: a drive that does not step, a sense that moves against the
        drive, or channels swapped.
    """
    if drive is None or not edges:
        return
    sense_levels = sense_levels or state_levels(sense)
    drive_levels = state_levels(drive)
    drive_edges = find_edges(t, drive, drive_levels)
    dt = float(t[1] - t[0])
    if not drive_edges and not _jumps_at_edges(t, drive, edges, dt, sense, sense_levels):
        ends = [edge.t10 for edge in edges[1:]] + [float(t[-1])]
        short = all(end - edge.t10 < SHORT_AFTER * edge.duration for edge, end in zip(edges, ends))
        raise AnalysisRefused(
            f"{source}: the drive channel does not step (no transition above its noise) while the sense "
            "channel does: is the drive probe connected, and is [columns] drive the generator-side node?"
            + (" Or the record is too short after each edge to tell (a drive node relaxing until the next "
               "edge or the record's end hides its jump): record 5 tau or more after an edge" if short else ""))
    # a drive with no edges of its own got here by jumping at the sense edges
    drive_jumps = not drive_edges or _jumps(t, drive, drive_edges, drive_levels.amplitude, dt)
    if _jumps(t, sense, edges, sense_levels.amplitude, dt) and not drive_jumps:
        raise AnalysisRefused(
            f"{source}: the sense channel jumps at its edges while the drive channel follows slowly: drive "
            "and sense look swapped in [columns] (the sense resistor's voltage cannot jump in an rl-step "
            "circuit)")
    against = sum(np.sign(_jump_at(t, drive, edge, dt)) == -edge.direction for edge in edges)
    if against > AGAINST_SHARE * len(edges):
        spike = _feedthrough(sense, drive, sense_levels, drive_levels)
        if spike is not None:
            raise AnalysisRefused(
                f"{source}: the sense channel jumps with the drive at its edges (by up to {spike:.0%} of its step) "
                "and falls back before the coil's current rises: current through a capacitance across the coil "
                "(its winding capacitance), which charges through the sense resistance, so the sense edges are "
                "read from that spike; use a smaller sense resistance (the spike lasts about (R_sense + R_source) "
                "times that capacitance, and tau grows), so that it is over within a few samples")
        raise AnalysisRefused(
            f"{source}: the sense channel falls when the drive rises at {against} of {len(edges)} edges: an "
            "inverted probe or channel, or leads swapped across the sense resistor; fix the wiring or the "
            "channel's sign")


def _feedthrough(sense: np.ndarray, drive: np.ndarray, sense_levels: StateLevels,
                 drive_levels: StateLevels) -> float | None:
    """The largest jump of the sense channel with the drive, as a share of the sense step, where
    the sense jumps in the drive's direction at most of the drive's jumps (each by more than
    JUMP_FRACTION of the channel's step within JUMP_SAMPLES samples); None where it does not.
    The current of an inductance cannot jump, that of a capacitance across it can: a sense
    that follows the drive's jump and falls back has its transitions read from that spike,
    and moves against the drive there, which an inverted probe would do throughout."""
    sense_step, drive_step = abs(sense_levels.amplitude), abs(drive_levels.amplitude)
    if not sense_step or not drive_step or drive.size <= JUMP_SAMPLES:
        return None
    change = drive[JUMP_SAMPLES:] - drive[:-JUMP_SAMPLES]
    jumps = np.flatnonzero(np.abs(change) > JUMP_FRACTION * drive_step)
    if not jumps.size:
        return None
    # one jump per run of samples that span it: its first
    firsts = jumps[np.concatenate(([True], np.diff(jumps) > JUMP_SAMPLES))]
    shares = []
    for i in firsts:
        direction = np.sign(change[i])
        moved = direction * (sense[i + 1:i + 2 * JUMP_SAMPLES + 1] - sense[i])
        shares.append(float(np.max(moved, initial=0.0)) / sense_step)
    jumping = [share for share in shares if share > JUMP_FRACTION]
    return max(jumping) if len(jumping) > 0.5 * len(shares) else None


def _jump_span(t: np.ndarray, edge: Edge, dt: float) -> tuple[int, int] | None:
    """The samples between which the drive node's jump at a sense edge is read: from half the
    edge's 10-90 % duration before its 10 % instant to two samples after it (the drive then
    relaxes back, so only its jump tells the generator's direction); None where that reaches
    past the record."""
    start = int(np.searchsorted(t, edge.t10 - 0.5 * edge.duration - dt)) - 1
    stop = int(np.searchsorted(t, edge.t10 + JUMP_SAMPLES * dt))
    return (start, stop) if start >= 0 and stop < t.size else None


def _jump_at(t: np.ndarray, drive: np.ndarray, edge: Edge, dt: float) -> float:
    """How far the drive node moves at the start of a sense edge (:func:`_jump_span`); 0 where
    that cannot be read."""
    span = _jump_span(t, edge, dt)
    return float(drive[span[1]] - drive[span[0]]) if span is not None else 0.0


def _jumps_at_edges(t: np.ndarray, drive: np.ndarray, edges: list[Edge], dt: float, sense: np.ndarray,
                    sense_levels: StateLevels) -> bool:
    """Whether the drive jumps at most of the sense edges by more than DRIVE_JUMP_SNR times the
    noise of a difference over the same number of samples, in the edge's direction: a drive
    that steps, whatever its settled levels. The noise is 1.4826·MAD of differences at that
    lag (common practice), so band-limited noise, whose differences over several samples are
    far larger than over one, is judged by the scatter a jump read over that span would have.
    The differences are those between samples where the sense has settled in one state
    (:func:`_settled_pairs`), where the drive has too: over a record of a few tau per half
    period the relaxations fill most lags of the record, and their differences, not the
    noise's, made the median (a drive jumping by 1.6 V read against 0.35 V of "noise" at
    6 tau per half period and 2.4 periods, measured); the whole record's differences
    (:func:`wavefit.signal.edges.noise_rms` at that lag) where too few pairs have settled."""
    spans = [span for span in (_jump_span(t, edge, dt) for edge in edges) if span is not None]
    if not spans:
        return False
    lag = int(np.median([stop - start for start, stop in spans]))
    if not 0 < lag < drive.size:
        return False
    pairs = _settled_pairs(sense, sense_levels, lag)
    if pairs.size >= MIN_SETTLED_PAIRS:
        sigma = mad_sigma(drive[pairs + lag] - drive[pairs])
    else:
        sigma = math.sqrt(2.0) * noise_rms(drive, lag)  # the rms of a difference over the span
    jumping = sum(_jump_at(t, drive, edge, dt) * edge.direction > DRIVE_JUMP_SNR * sigma for edge in edges)
    return jumping > 0.5 * len(edges)


#: Fewest pairs of settled samples the noise of a lagged difference is taken from.
MIN_SETTLED_PAIRS = 20
#: A sense sample has settled when it lies within this share of its step from a state level
#: (e^−4: four tau after an edge; the drive relaxes with the same tau).
SETTLED_SHARE = 0.02


def _settled_pairs(sense: np.ndarray, levels: StateLevels, lag: int) -> np.ndarray:
    """The samples i where the sense has settled at a state level and is still settled at the
    same level ``lag`` samples later."""
    if not levels.amplitude:
        return np.zeros(0, dtype=np.intp)
    reach = SETTLED_SHARE * abs(levels.amplitude)
    state = np.where(np.abs(sense - levels.low) <= reach, 0, np.where(np.abs(sense - levels.high) <= reach, 1, -1))
    same = (state[:-lag] >= 0) & (state[:-lag] == state[lag:])
    return np.flatnonzero(same)


def _jumps(t: np.ndarray, y: np.ndarray, edges: list[Edge], step: float, dt: float) -> bool:
    """Whether most edges cover more than JUMP_FRACTION of the step within JUMP_SAMPLES samples."""
    if not step:
        return False
    jumping = 0
    for edge in edges:
        i = int(np.searchsorted(t, edge.t50))
        lo, hi = max(i - JUMP_SAMPLES, 0), min(i + JUMP_SAMPLES, y.size - 1)
        largest = float(np.max(np.abs(y[lo + JUMP_SAMPLES:hi + 1] - y[lo:hi + 1 - JUMP_SAMPLES]), initial=0.0))
        jumping += largest > JUMP_FRACTION * abs(step)
    return jumping > 0.5 * len(edges)
