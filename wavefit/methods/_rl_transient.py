"""A transient after every edge that the exponential does not hold: the samples of rl-step's
two-channel edge windows to leave out at their start.

A fast generator edge rings on the drive probe (its ground lead's inductance with the probe's
input capacitance: tens of MHz, a few periods; from memory, common practice to shorten the
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
residuals on one channel, squared and divided by their mean square over the second half of
the window (the noise there, which a transient of the edge has long left), are averaged over
the windows sample by sample. Without a transient each average is a χ² variable with W
degrees of freedom over W (W windows, whose noise is independent; correlated noise changes
only how neighbouring averages go together, not their distribution). Averages above the χ²
quantile at :data:`FALSE_ALARM` shared among the samples searched (Bonferroni) mark the
transient: every window starts after the last of them.
"""
from __future__ import annotations

from typing import Sequence

import numpy as np
from scipy import stats

#: Probability that a record without a transient has one found on a channel (shared among
#: the samples searched: the Bonferroni bound); none of 20 ring-free draws moved a window.
FALSE_ALARM = 1e-3
#: The search covers the first quarter of the shortest window: a transient of the edge is
#: short against the exponential (a window that holds a transient longer than that is no
#: exponential window); the noise scale comes from the second half.
SEARCHED_SHARE = 0.25
#: Fewest samples searched: below, a window is too short to tell a transient from its noise.
FEWEST_SEARCHED = 8
#: A transient that outlasts this share of tau is no transient of the edge but a misfit of the
#: model (a second time constant, eddy currents): the windows are not moved for it, and the
#: model check (windows started one tau later) weighs it. Three tenths of tau is the reach of
#: the late-start test (three steps of a tenth); a second time constant of tau/5 at a tenth of
#: the step lasts about a tau above noise of 10⁻³, a probe's ring at 30 MHz that decays in
#: 50 ns, at half the step, 0.14 tau of a 1.65 µs loop.
LONGEST_SHARE_OF_TAU = 0.3
#: A channel whose residuals are this small against its step is noise-free (an exact
#: record, rounding only): its residuals follow the arithmetic, not noise, and are not judged.
NOISE_FREE = 1e-9


def edge_transient(windows: Sequence, fits: Sequence, channels: Sequence[str],
                   sample_interval: float) -> tuple[int, str | None]:
    """Samples to leave out at the start of every window, and the channel whose transient
    needs most of them ((0, None) when no channel has one, or when one lasts longer than
    :data:`LONGEST_SHARE_OF_TAU` of the windows' median tau; see the module docstring).

    ``windows`` have ``start`` and ``stop``; each of ``fits`` holds the residuals of its
    window's ``channels`` one after another (as :func:`~wavefit.fit.exponential.fit_exponential_window`
    stacks them), and the value ``coef_<channel>`` of its exponential's amplitude.

    References
    ----------
    JCGM 100:2008 (GUM), 3.2.3–3.2.4: a recognised systematic effect is corrected or
    removed, not only given an uncertainty. C. E. Bonferroni's bound on the family-wise
    error rate; χ² of averaged squared standard normal scores (common practice).
    """
    counts = [w.stop - w.start for w in windows]
    searched = int(min(counts) * SEARCHED_SHARE)
    if searched < FEWEST_SEARCHED or not windows:
        return 0, None
    limit = float(stats.chi2.isf(FALSE_ALARM / searched, len(windows))) / len(windows)
    skip, worst = 0, None
    for c, channel in enumerate(channels):
        profile = np.zeros(searched)
        for f, n in zip(fits, counts):
            r = f.residuals[c * n:(c + 1) * n]
            tail = r[n // 2:]
            scale = float(tail @ tail) / tail.size
            if not scale > (NOISE_FREE * abs(f[f"coef_{channel}"])) ** 2:
                break
            profile += r[:searched] ** 2 / scale
        else:
            above = np.flatnonzero(profile > limit * len(windows))
            if above.size and int(above[-1]) + 1 > skip:
                skip, worst = int(above[-1]) + 1, channel
    longest = LONGEST_SHARE_OF_TAU * float(np.median([f["tau"] for f in fits])) / sample_interval
    return (skip, worst) if skip <= longest else (0, None)
