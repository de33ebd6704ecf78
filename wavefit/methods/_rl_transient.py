"""A transient after every edge that the exponential does not hold: the samples of rl-step's
two-channel edge windows to leave out at their start.

A fast generator edge rings on the drive probe (its ground lead's inductance with the probe's
input capacitance: tens of MHz, a few periods; from memory, and common practice to shorten the
lead), and overshoot or a settling generator output does much the same. The ring barely moves
tau, so the late-start test of :func:`~wavefit.methods._rl_windows.settle_starts`, which
watches tau, does not see it; but it moves the drive's exponential amplitude against the
sense's, from which the loop resistance and L come: rings of 5–50 % of the drive's step at
30 MHz, decaying in 50 ns, on a loop with tau = 1.65 µs, left L 1.3–1.8 standard uncertainties
off on average with no warning (inside U in 12 of 20 noise draws at 20 and 50 % of the step, 9
and 11 of 15 at 5 and 10 %; 18–20 of 20 once left out). The noise model does not flag it
either: an autoregressive model of order 2 or more follows a damped ring, so the ring passes
for correlated noise and only widens U (2.6-fold on an ngspice bench with a probe's 150 nH
ground lead behind a 2 Ω driver; 1.7-fold once left out).

The transient is found from the residuals themselves, where it is large: each window's
residuals on one channel, squared and divided by their mean square from 0.3 to 2 tau after
the window's start (the noise where the curve still moves: on a record whose noise is below
half a converter code the settled tail sits on one or two codes, and its smaller quantisation
error made ring-free profiles average 1.5–1.8 and moved windows), are averaged over the
windows sample by sample. Without a transient each average is near a χ² variable with W
degrees of freedom over W (W windows, whose noise is independent; the scale's own scatter and
correlated noise give it somewhat heavier tails, so the false-alarm rate is above the nominal
on one or two short windows). Averages above the χ² quantile at :data:`FALSE_ALARM` shared
among the samples searched (Bonferroni) mark the transient when they start at the edge: it
ends after the last of a run of them, no two more than :data:`GAP_SAMPLES` apart (a ring's
zero crossings dip below the limit).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy import stats

#: Probability that a record without a transient has one found on a channel (shared among
#: the samples searched: the Bonferroni bound, C. E. Bonferroni 1936, from memory).
FALSE_ALARM = 1e-3
#: Fewest samples searched, and fewest that give the noise scale: below, a window is too short
#: to tell a transient from its noise.
FEWEST_SEARCHED = 8
#: A transient that outlasts this share of tau is no transient of the edge but a misfit of the
#: model (a second time constant, eddy currents): the windows are not moved for it (a note
#: says so), and the model check (windows started one tau later) weighs it. Three tenths of
#: tau is the reach of the late-start test (three steps of a tenth); a second time constant of
#: tau/5 at a tenth of the step lasts about a tau above noise of 10⁻³, a probe's ring at 30 MHz
#: that decays in 50 ns, at half the step, 0.14 tau of a 1.65 µs loop.
LONGEST_SHARE_OF_TAU = 0.3
#: The noise scale is taken from LONGEST_SHARE_OF_TAU to this many tau after the start: the
#: curve sweeps 60 % of its step there, so a quantised record's codes are crossed as in the
#: transient, and the transient itself is over.
SCALE_END_TAU = 2.0
#: Exceedances of a transient's run may be this many samples apart, or 5 % of tau where that is
#: more (a ring's averages dip below the limit at its zero crossings, a few samples per period).
GAP_SAMPLES = 16
GAP_SHARE_OF_TAU = 0.05
#: A channel whose residuals are this small against its step is noise-free (an exact
#: record, rounding only): its residuals follow the arithmetic, not noise, and are not judged.
NOISE_FREE = 1e-9


@dataclass(frozen=True)
class Transient:
    """What :func:`edge_transient` found: the samples to leave out at the start of every
    window (0 for none), the channel that needs most of them, and, where a misfit after the
    edges outlasts :data:`LONGEST_SHARE_OF_TAU` of tau, its length in samples (left to the
    model check, ``samples`` 0)."""

    samples: int = 0
    channel: str | None = None
    too_long: int = 0


def edge_transient(windows: Sequence, fits: Sequence, channels: Sequence[str],
                   sample_interval: float) -> Transient:
    """The transient after every edge of ``windows`` (see the module docstring).

    ``windows`` have ``start`` and ``stop``; each of ``fits`` holds the residuals of its
    window's ``channels`` one after another (as :func:`~wavefit.fit.exponential.fit_exponential_window`
    stacks them), tau and the value ``coef_<channel>`` of its exponential's amplitude.

    References
    ----------
    JCGM 100:2008 (GUM), 3.2.4: the result is corrected for recognised significant systematic
    effects. The χ² distribution of averaged squared standard normal scores and the
    Bonferroni bound on a family of tests (common practice).
    """
    if not windows:
        return Transient()
    counts = [w.stop - w.start for w in windows]
    per_tau = float(np.median([f["tau"] for f in fits])) / sample_interval
    longest = int(LONGEST_SHARE_OF_TAU * per_tau)
    searched = min(min(counts) // 2, 2 * longest)
    scale_end = min(min(counts), int(SCALE_END_TAU * per_tau))
    if searched < FEWEST_SEARCHED or scale_end - longest < FEWEST_SEARCHED:
        return Transient()
    limit = float(stats.chi2.isf(FALSE_ALARM / searched, len(windows))) / len(windows)
    gap = max(GAP_SAMPLES, int(GAP_SHARE_OF_TAU * per_tau))
    found = Transient()
    for c, channel in enumerate(channels):
        profile = np.zeros(searched)
        for f, n in zip(fits, counts):
            r = f.residuals[c * n:(c + 1) * n]
            moving = r[longest:scale_end]
            scale = float(moving @ moving) / moving.size
            if not scale > (NOISE_FREE * abs(f[f"coef_{channel}"])) ** 2:
                break
            profile += r[:searched] ** 2 / scale
        else:
            end = _run_from_the_edge(np.flatnonzero(profile > limit * len(windows)), gap)
            if end > longest:
                found = Transient(found.samples, found.channel, max(found.too_long, end))
            elif end > found.samples:
                found = Transient(end, channel, found.too_long)
    return found if found.samples else Transient(too_long=found.too_long)


def _run_from_the_edge(above: np.ndarray, gap: int) -> int:
    """The end (one past its last sample) of the run of exceedances ``above`` that starts
    within ``gap`` samples of the edge, its members no more than ``gap`` apart; 0 for none."""
    if not above.size or above[0] >= gap:
        return 0
    breaks = np.flatnonzero(np.diff(above) > gap)
    return int(above[breaks[0]] if breaks.size else above[-1]) + 1
