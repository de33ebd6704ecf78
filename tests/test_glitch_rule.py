"""The glitch rule of :mod:`wavefit.signal.glitches` against its definition, written out.

A sample is a glitch candidate when its departure from its neighbours' mean exceeds
GLITCH_SHAPE times the waveform's local curvature plus GLITCH_NOISE noise standard deviations
(the rule's own definition, module docstring; the thresholds are common practice).
"""
from __future__ import annotations

import numpy as np

from wavefit.signal.codes import CHUNK_VALUES
from wavefit.signal.glitches import GLITCH_NOISE, GLITCH_SHAPE, find_glitches


def _by_definition(y: np.ndarray, sigma: float) -> np.ndarray:
    departure = np.abs(y[2:-2] - 0.5 * (y[1:-3] + y[3:-1]))
    curvature = np.abs(y[3:-1] - y[1:-3]) + np.abs(y[4:] - y[3:-1]) + np.abs(y[1:-3] - y[:-4])
    return np.flatnonzero(departure > GLITCH_SHAPE * curvature + GLITCH_NOISE * sigma) + 2


def test_candidates_are_the_rules_across_chunks() -> None:
    # a slow sinusoid over more than one chunk, with noise well below the stated sigma (so the
    # curvature term is small and the threshold near GLITCH_NOISE·sigma), and samples displaced
    # by 11 to 15 sigma, either side of it, on flat and on sloping stretches
    rng = np.random.default_rng(11)
    n = CHUNK_VALUES + 300_000
    sigma = 0.01
    y = np.sin(2 * np.pi * np.arange(n) / 200_000) + rng.normal(0.0, 0.05 * sigma, n)
    where = rng.choice(np.arange(10, n - 10), 400, replace=False)
    where = np.r_[where, CHUNK_VALUES - 1, CHUNK_VALUES, CHUNK_VALUES + 1, CHUNK_VALUES + 2]
    y[where] += rng.choice([-1.0, 1.0], where.size) * rng.uniform(11.0, 15.0, where.size) * sigma
    expected = _by_definition(y, sigma)
    assert 100 < expected.size < where.size  # both sides of the threshold are represented
    assert np.array_equal(find_glitches(y, None, sigma), expected)


def test_jumps_are_the_rules_across_chunks() -> None:
    # a change over one sample, or over two whose steps both move the same way by more than
    # JUMP_INNER_NOISE sigma, is a jump when it exceeds GLITCH_SHAPE times the one-sample steps
    # either side plus GLITCH_NOISE sigma; the mask marks the samples after its start, to
    # COINCIDENCE samples after its end
    from wavefit.signal.glitches import COINCIDENCE, JUMP_INNER_NOISE, _after_jumps

    rng = np.random.default_rng(12)
    n = CHUNK_VALUES + 200_000
    sigma = 0.01
    rises = rng.choice([0.0, 1.0], n, p=[0.9995, 0.0005]) * rng.uniform(0.11, 0.15, n)
    spread = np.flatnonzero(rises)[::3]  # every third jump larger, spread over two samples
    rises[spread] *= 2.5
    y = np.cumsum(rises)
    y[spread] = 0.5 * (y[spread - 1] + y[spread])
    y += rng.normal(0.0, 0.05 * sigma, n)
    signed = np.diff(y)
    step = np.abs(signed)
    expected = np.zeros(n, dtype=bool)
    for width in (1, 2):
        j = np.arange(1, n - 1 - width)
        change = np.abs(y[j + width] - y[j])
        ok = change > GLITCH_SHAPE * (step[j - 1] + step[j + width]) + GLITCH_NOISE * sigma
        if width == 2:
            ok &= (step[j] > JUMP_INNER_NOISE * sigma) & (step[j + 1] > JUMP_INNER_NOISE * sigma)
            ok &= np.sign(signed[j]) == np.sign(signed[j + 1])
        for shift in range(width + COINCIDENCE):
            expected[np.minimum(j[ok] + 1 + shift, n - 1)] = True
        if width == 1:
            assert 100 < np.count_nonzero(ok) < np.count_nonzero(step > 0.1)  # both sides of the threshold
        else:
            assert 30 < np.count_nonzero(ok)  # the spread jumps are found
    assert np.array_equal(_after_jumps(y, None, sigma), expected)


def test_spikes_recurring_at_one_interval_are_named_as_such() -> None:
    # a winding capacitance charging at each edge puts a one-sample spike on the sense trace at
    # every switching instant: the warning called each "a glitch" (a faulty record) in a QA
    # trial's lot; spikes evenly spaced are named for what they are, scattered ones stay glitches
    import pandas as pd

    from wavefit.capture_checks import recurring, without_glitches
    from wavefit.io.frame import capture_from_frame

    assert recurring(np.array([10, 510, 1010, 1511]))
    assert not recurring(np.array([10, 510]))
    assert not recurring(np.array([10, 300, 1010, 1511]))
    t = np.arange(4000) * 1e-8
    y = np.sin(2 * np.pi * t / 4e-5) + 1e-3 * np.random.default_rng(3).standard_normal(t.size)
    for name, at in (("periodic", [500, 1500, 2500, 3500]), ("scattered", [500, 1300, 3100])):
        spiked = y.copy()
        spiked[at] += 0.5
        capture = without_glitches(capture_from_frame(pd.DataFrame({"time": t, "v": spiked})))
        said = " ".join(capture.warnings)
        assert ("recurring every 1e-05 s" in said) == (name == "periodic"), said
        assert ("(a glitch)" in said) == (name == "scattered"), said


def test_a_spike_on_a_two_sample_drive_edge_is_kept() -> None:
    # a scope's band limit spreads the drive's switching edge over two samples; the sense's
    # winding-capacitance spike on the middle one is part of the response (kept, as a spike at
    # a one-sample jump is), not a glitch to replace at every edge
    import pandas as pd

    from wavefit.capture_checks import without_glitches
    from wavefit.io.frame import capture_from_frame

    n, period = 4000, 1000
    phase = np.arange(n) % period
    rng = np.random.default_rng(4)
    drive = np.where(phase < period // 2, 5.0, 0.0)
    edges = np.flatnonzero(np.diff(drive) != 0)
    drive[edges + 1] = 0.5 * (drive[edges] + drive[edges + 2])  # the edge over two samples
    sense = np.zeros(n)
    level = 0.0
    for i in range(n):  # a slow relaxation toward a tenth of the drive: no onset right after the spike
        level += (0.1 * drive[i] - level) / 2000.0
        sense[i] = level
    sense[edges + 1] += 0.02 * np.sign(drive[edges + 2] - drive[edges])  # the spike, a fifth of the span
    frame = pd.DataFrame({"time": np.arange(n) * 1e-8, "drive": drive + 1e-3 * rng.standard_normal(n),
                          "sense": sense + 2e-4 * rng.standard_normal(n)})
    capture = without_glitches(capture_from_frame(frame))
    assert not any("isolated sample" in w for w in capture.warnings), capture.warnings


def test_jumps_of_very_short_records() -> None:
    # a record too short for a two-sample change (4 samples) raised from an empty concatenation
    from wavefit.signal.glitches import _after_jumps

    for n in (4, 5, 6):
        assert _after_jumps(np.r_[np.zeros(n - 2), 5.0, 5.0], None, 0.01).shape == (n,)
