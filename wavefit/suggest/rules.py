"""The thresholds of ``wavefit suggest``, each with the reason for its value."""
from __future__ import annotations

import math

#: Each half period of the drive lasts at least this many loop time constants, so that the
#: current settles to within e⁻⁵ ≈ 0.7 % of its final value before the next edge: common practice
#: (and the wiring advice of docs/method-rl-step.md, "half period at least 5–10 tau").
HALF_PERIOD_TAUS = 5.0

#: The record holds at least this many samples per loop time constant, so that the
#: exponential is resolved well enough to fit (common practice).
SAMPLES_PER_TAU = 10.0

#: The next capture is planned for a tau this much longer than the first estimate (for the
#: period) and shorter (for the sample interval): the estimate from a coarse first record is
#: trusted to about 10 %, the accuracy its ngspice tests check.
TAU_MARGIN = 1.1

#: Drive periods the next record should hold: at least two complete rising and two complete
#: falling edges besides the partial ones at the record's ends (the ngspice tests of rl-step
#: record 2.4 periods for the same reason).
RECORD_PERIODS = 2.4

#: Range of k = (drive step)/(sense step) between settled levels that the proposed sense
#: resistor aims at. DCR = (k − 1)·R_sense, so a relative error of k becomes k/(k − 1) times
#: larger in the DCR (the sensitivity of the measurement function, JCGM 100:2008, 5.1.3):
#: k >= 2 keeps that factor at most 2. k <= 10 keeps the sense step at least a tenth of the
#: drive's, so that it is not lost in the noise of a channel set for the drive (common practice).
K_LOW, K_HIGH = 2.0, 10.0
#: The k aimed at when the present one lies outside [K_LOW, K_HIGH]: R_sense = DCR/2, the
#: geometric middle of the range to within the E12 step.
K_TARGET = 3.0
#: How far from 1 the ratio of two channels not compared with each other may read for equal
#: voltages: each within ±2 %, the setup's default vertical_gain (a bench scope's DC gain
#: accuracy, common practice). A k within this of 1 tells nothing of the DCR, nor of the roles.
UNCOMPARED_RATIO = 0.04

#: Full scale proposed for a channel: the span the next record will show, widened by this
#: factor (12.5 % headroom on each side for noise, overshoot and the generator's drift;
#: common practice).
SCALE_HEADROOM = 1.25
#: Vertical divisions of a scope screen over which the full scale is spread (common practice
#: for bench scopes; the volts per division are rounded up in the 1-2-5 sequence).
DIVISIONS = 8
#: Converter resolution assumed when none is given: 8 bits, as the instrument defaults of
#: docs/setup-file.md (general-purpose bench scopes, common practice).
DEFAULT_BITS = 8

#: Ring detection. A damped sinusoid is the record's shape only when it leaves at most this
#: fraction of its amplitude unexplained (rms of the residuals): a square wave leaves 34 %
#: and a triangle 8 % of its fundamental's amplitude; a ring with 8-bit codes and 1 % noise
#: about 1 % (common practice).
RING_MAX_RESIDUAL = 0.05
#: A ring must show at least this many cycles in its fit window to give a frequency.
RING_MIN_CYCLES = 2.0
#: A free response decays: over its fit window the envelope falls at least by this factor
#: (a periodic wave fitted by its fundamental does not decay at all).
RING_MIN_DECAY = 2.0
#: A ring named in another method's refusal (wavefit.analysis.other_method_named) has at least
#: this Q: a record of noise fitted as a ring of Q 0.94 was named "a ring" (a review's probe);
#: a tank this tool measures rings for cycles.
HINTED_Q = 2.0
#: Samples per period of the ring that the next record should hold (the lc-ring ngspice
#: tests record 25 to 50; common practice for a damped-sine fit).
RING_SAMPLES_PER_PERIOD = 20.0
#: The record should follow the ring until its envelope has fallen to 1 % of its start,
#: ln(100) ≈ 4.6 decay time constants 1/alpha (beyond it the samples add little to the fit:
#: docs/method-lc-ring.md, the window's end).
RING_RECORD_DECAYS = math.log(100.0)

#: Samples skipped after each switching instant before a relaxation window starts: the one
#: sample that may straddle the drive's finite edge.
SKIP_SAMPLES = 1
#: A record is a step response only when the relaxation model (one tau, two settled levels,
#: one exponential per window) leaves at most this fraction of the sense record's span as
#: residual rms: 8-bit codes and noise of 0.5 % of the span leave about 0.5 % (0.33 % in the
#: ngspice test), while a wave of another shape leaves more (the quarter periods of an
#: undamped sine, read as sense-only windows, 3.2 %, measured in tests/test_suggest_spice.py).
#: A first capture noisier than this is refused too: it cannot tell the shapes apart.
STEP_MAX_RESIDUAL = 0.02
#: Most samples the tau estimate takes (every m-th beyond): a first estimate to 10 % needs no
#: more, and a long record then costs no more than this (the fit's sums are recomputed for
#: about a hundred trial values of tau).
MAX_FIT_SAMPLES = 200_000
#: Fewest samples of a relaxation window that enters the tau estimate.
MIN_WINDOW_SAMPLES = 3
#: A sense channel whose median 10 %–90 % transition takes at most this many sample intervals
#: settles faster than the record can show (tau = duration/ln 9 is then under one sample):
#: the suggestion is to sample faster, not to check the probes.
FAST_TRANSITION_SAMPLES = 2.0
