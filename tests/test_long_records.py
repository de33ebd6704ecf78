"""Long records: Jacobians by pieces, the triangular-factor solver, levels and glitches found a
chunk at a time, and a fit out of memory refused in one line.

The paths for long records must give what the dense computations give. Each check here
forces the long-record path on a short record (by lowering its size threshold) and
compares it with the dense one, or with an independent computation (finite differences,
``np.unique``). Peak memory itself is measured by ``benchmarks/memory_long_records.py``.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.signal import lfilter

import wavefit
from wavefit.errors import AnalysisRefused
from wavefit.fit import jacobian as jacobian_module
from wavefit.fit.compressed import triangle
from wavefit.fit.jacobian import CHUNK_ELEMENTS
from wavefit.fit.damped_sine import fit_ring
from wavefit.fit.engine import Block, fit_least_squares
from wavefit.fit.noise_model import fit_ar
from wavefit.fit.relaxation import fit_relaxations, relaxation_jacobian, relaxation_model
from wavefit.signal import clipping, codes, glitches
from wavefit.synth.rl import rl_square_wave


def square_wave_record(rng: np.random.Generator, n: int = 6000) -> tuple[np.ndarray, np.ndarray, list, list]:
    """Three switching instants of a first-order response (tau = 40 samples), 1 % noise."""
    t = np.arange(n) * 1e-6
    edges = [1500.3e-6, 3000.7e-6, 4500.2e-6]
    levels = [0.0, 1.0, 0.0, 1.0]
    theta = np.array([1.0, 0.0, 0.0, 1.0, 37.5075, 0.0, 75.0175, 1.0, 112.505])  # times in units of tau
    y = relaxation_model((t - t[0]) / 40e-6, theta, 3) + 0.01 * rng.standard_normal(n)
    return t, y, edges, levels


def assert_same_fit(long, dense) -> None:
    """The same estimates to a millionth of their standard uncertainty (the solvers stop at
    their rounding, in another order of the same arithmetic), the same covariance to 1e-6 of
    the products of their standard uncertainties."""
    u = np.sqrt(np.diag(dense.covariance))
    assert np.all(np.abs(long.values - dense.values) <= 1e-6 * u)
    scale = np.outer(u, u)
    np.testing.assert_allclose(long.covariance / scale, dense.covariance / scale, atol=1e-6)
    assert long.dof == dense.dof


def test_relaxation_model_is_its_definition():
    # the module's definition, sample by sample: a head relaxing from the record's start, then
    # each state relaxing toward its level from the value the piece before reached at its instant
    import math

    rng = np.random.default_rng(2)
    ts = np.sort(rng.uniform(0, 20, 400)) + 3.0
    theta = np.array([1.3, 0.2, -0.7, 1.0, 8.0, -0.5, 14.0, 0.8, 19.0])
    tau, levels, instants = theta[0], [theta[1], *theta[3::2]], list(theta[4::2])

    def piece(k: int, t: float) -> float:
        if k == 0:
            return theta[1] + theta[2] * math.exp(-(t - ts[0]) / tau)
        start = piece(k - 1, instants[k - 1])
        return levels[k] + (start - levels[k]) * math.exp(-(t - instants[k - 1]) / tau)

    expected = [piece(sum(t >= t0 for t0 in instants), t) for t in ts]
    np.testing.assert_allclose(relaxation_model(ts, theta, 3), expected, rtol=1e-13, atol=1e-15)


def test_relaxation_jacobian_matches_finite_differences():
    # independent check of the pieces: central differences of the model itself
    rng = np.random.default_rng(1)
    ts = np.sort(rng.uniform(0, 20, 400))
    theta = np.array([1.3, 0.2, -0.7, 1.0, 5.0, -0.5, 11.0, 0.8, 16.0])
    analytic = relaxation_jacobian(ts, theta, 3).toarray()
    numeric = np.empty_like(analytic)
    for i in range(theta.size):
        h = 1e-6 * max(1.0, abs(theta[i]))
        up, down = theta.copy(), theta.copy()
        up[i] += h
        down[i] -= h
        numeric[:, i] = (relaxation_model(ts, up, 3) - relaxation_model(ts, down, 3)) / (2 * h)
    np.testing.assert_allclose(analytic, numeric, atol=1e-6)


def test_triangle_has_the_normal_matrix_of_the_whitened_rows():
    # TᵀT = (W[J | f])ᵀ(W[J | f]) for an AR whitening fitted to AR(2) noise, rows taken in several chunks
    rng = np.random.default_rng(2)
    n, p = 3000, 4
    jac = rng.standard_normal((n, p))
    rhs = rng.standard_normal(n)
    noise = fit_ar([lfilter([1.0], [1.0, -0.5, 0.2], rng.standard_normal(20000))], max_order=5)
    assert noise.order >= 2
    blocks = [Block(0, 1800, "a"), Block(1800, n, "a")]
    t = triangle(jac, rhs, blocks, {"a": noise})
    whitened = np.vstack([noise.whiten(np.column_stack([jac, rhs])[b.start:b.stop]) for b in blocks])
    np.testing.assert_allclose(t.T @ t, whitened.T @ whitened, rtol=1e-10, atol=1e-9)


def test_reducer_takes_uneven_rows_across_its_blocks():
    # rows added in uneven pieces and column groups, so that the LAPACK blocks start inside
    # pieces and end on a piece's last row: the factor's normal matrix is that of all the rows
    # (Lawson and Hanson 1974, ch. 27: sequential QR gives RᵀR = AᵀA)
    from wavefit.fit.compressed import BLOCK_VALUES, _Reducer
    rng = np.random.default_rng(4)
    width = 5
    block = BLOCK_VALUES // width
    sizes = [7, 0, block - 7, 3, 2 * block + 11, CHUNK_ELEMENTS // width + 5, 1, block]
    rows = rng.standard_normal((sum(sizes), width))
    reducer = _Reducer(width)
    at = 0
    for size in sizes:
        piece = rows[at:at + size]
        reducer.add([piece[:, :2], piece[:, 2:3], piece[:, 3:]])
        at += size
    t = reducer.result()
    np.testing.assert_allclose(t.T @ t, rows.T @ rows, rtol=1e-11, atol=1e-8)
    np.testing.assert_allclose(np.abs(t), np.abs(np.linalg.qr(rows, mode="r")), rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("noise", ["white", "auto"])
def test_relaxation_fit_same_by_triangular_factor(monkeypatch, noise):
    rng = np.random.default_rng(3)
    t, y, edges, levels = square_wave_record(rng)
    monkeypatch.setattr(jacobian_module, "DENSE_VALUES", 1 << 30)  # every problem on its dense rows
    dense = fit_relaxations(t, y, edges, levels, 40e-6, noise=noise)
    monkeypatch.setattr(jacobian_module, "DENSE_VALUES", 100)  # every problem takes the long-record path
    long = fit_relaxations(t, y, edges, levels, 40e-6, noise=noise)
    assert_same_fit(long, dense)
    assert long.dof == dense.dof


def test_ring_fit_same_by_triangular_factor(monkeypatch):
    rng = np.random.default_rng(4)
    n = 8000
    t = np.arange(n) * 1e-7
    y = np.exp(-t / 2e-4) * np.cos(2 * np.pi * 5e4 * t + 0.3) + 0.01 * rng.standard_normal(n)
    monkeypatch.setattr(jacobian_module, "DENSE_VALUES", 1 << 30)  # every problem on its dense rows
    dense = fit_ring(t, y)
    monkeypatch.setattr(jacobian_module, "DENSE_VALUES", 100)
    long = fit_ring(t, y)
    assert_same_fit(long.fit, dense.fit)


def test_fit_out_of_memory_is_refused_in_one_line():
    def fun(x):
        raise MemoryError("Unable to allocate 30.0 GiB")

    with pytest.raises(AnalysisRefused) as caught:
        fit_least_squares(fun, lambda x: np.eye(2), [1.0, 2.0], ["a", "b"], [Block(0, 10)], model="test")
    message = str(caught.value)
    assert "\n" not in message and "not enough memory" in message and "10 samples" in message


@pytest.mark.parametrize("values", [
    np.round(np.random.default_rng(5).normal(size=5000) * 4) / 3,    # few levels: gathered by chunks
    np.random.default_rng(6).normal(size=5000),                      # all distinct: one sorted copy
    np.r_[np.round(np.random.default_rng(7).normal(size=900)), np.nan, np.inf, -np.inf, 0.0, -0.0],
])
def test_levels_found_by_chunks_equal_unique(monkeypatch, values):
    monkeypatch.setattr(codes, "CHUNK_VALUES", 64)
    finite = values[np.isfinite(values)]
    reference = np.unique(finite)
    np.testing.assert_array_equal(codes.distinct_levels(values), reference)
    limit = 0.5 * finite.size
    found = codes.distinct_levels(values, limit)
    assert (found is None) == (reference.size > limit)
    gap = clipping.smallest_gap(finite) if finite.size else None
    assert gap == (float(np.min(np.diff(reference))) if reference.size >= 2 else None)
    # the clipping checks take the gap from the levels once gathered, or sort for continuous
    # values, and only when a run at an extreme is long enough for a flat trace
    facts = clipping.extremes(values)
    assert facts.smallest_gap == (gap if facts.longest_run >= clipping.FLAT_RUN else None)
    held = np.r_[values, np.full(clipping.FLAT_RUN, np.max(finite))]
    assert clipping.extremes(held).smallest_gap == clipping.smallest_gap(held[np.isfinite(held)])


@pytest.mark.parametrize("values", [
    np.random.default_rng(9).normal(size=4001),                              # distinct from the start
    np.r_[np.zeros(10), np.random.default_rng(10).normal(size=4000)],        # a repeat in the first half
    np.r_[np.random.default_rng(11).normal(size=2100), np.ones(1900)],       # distinct first half only
    np.round(np.random.default_rng(12).normal(size=4000) * 20),              # a grid of codes
    np.r_[np.round(np.random.default_rng(13).normal(size=1990) * 1e3), np.random.default_rng(14).normal(size=2010)],
    np.tile(np.random.default_rng(15).normal(size=2000), 2),                # exactly half distinct: the bound
])
@pytest.mark.parametrize("chunk", [None, 64])
def test_record_levels_as_defined(monkeypatch, values, chunk):
    # the levels are the distinct finite values when they number at most half the samples, and
    # None (continuous) otherwise, however they were found (the first half alone, all sorted,
    # or gathered by chunks: a record longer than CHUNK_VALUES)
    if chunk is not None:
        monkeypatch.setattr(codes, "CHUNK_VALUES", chunk)
    reference = np.unique(values[np.isfinite(values)])
    found = codes.record_levels(values)
    if reference.size > 0.5 * values.size:
        assert found.levels is None and found.step is None
    else:
        np.testing.assert_array_equal(found.levels, reference)
        # (the least gap comes with one sorted copy; levels gathered by chunks leave it to the caller)
        assert found.gap == (float(np.min(np.diff(reference))) if chunk is None else None)


def test_glitches_found_across_chunk_boundaries(monkeypatch):
    rng = np.random.default_rng(8)
    n = 4000
    y = np.sign(np.sin(np.arange(n) / 300.0)) + 0.01 * rng.standard_normal(n)
    bad = np.array([63, 64 + 63, 1000, 2047, 3999 - 3])  # some next to a chunk's edge
    y[bad] += 5.0
    whole = glitches.find_glitches(y)
    jumps = glitches._after_jumps(y, None)
    monkeypatch.setattr(glitches, "CHUNK_VALUES", 64)
    np.testing.assert_array_equal(glitches.find_glitches(y), whole)
    np.testing.assert_array_equal(glitches._after_jumps(y, None), jumps)
    assert set(bad.tolist()) <= set(whole.tolist())


@pytest.mark.parametrize("windows", ["six windows, one channel", "one window, two channels"])
def test_joint_windows_covariance_same_whatever_part_is_held_densely(monkeypatch, windows):
    """Several windows fitted jointly with one AR noise model (the pooled rl-step estimator):
    the sandwich covariance must not depend on which of the problem and its blocks are small
    enough to hold densely. A block gathered whole from a long problem had lost its
    parameters' numbers (its columns were taken as the first ones), which understated
    tau's standard error by a quarter on a band-limited record of 12 windows (and put a
    drive channel's level and amplitude on the sense channel's)."""
    from scipy.signal import lfilter

    from wavefit.fit.exponential import WindowChannel, fit_exponential_window

    rng = np.random.default_rng(11)
    n, tau = 900, 40.0
    chans = []
    for k in range(6):
        t = (np.arange(n) + 1000.0 * k)
        noise = 0.01 * lfilter([1.0], [1.0, -0.8], rng.standard_normal(n))
        shape = np.exp(-(t - t[0]) / tau)
        if windows == "one window, two channels":  # sense and drive of one edge
            t = np.arange(n) * 1.0
            shape = np.exp(-t / tau)
            chans = [WindowChannel(g, t, level + step * shape + 0.01 * lfilter([1.0], [1.0, -0.8], rng.standard_normal(n)))
                     for g, level, step in (("sense", 1.0, -1.0), ("drive", 2.0, 0.1))]
            break
        chans.append(WindowChannel(f"w{k}", t, (1 - shape if k % 2 == 0 else shape) + noise, noise_group="sense"))
    fits = {}
    # all dense; the problem long but each block (900 x 3 values) dense; everything long
    for label, bound in (("dense", 1 << 30), ("mixed", 4_000), ("long", 0)):
        monkeypatch.setattr(jacobian_module, "DENSE_VALUES", bound)
        fits[label] = fit_exponential_window(chans, 35.0)
    assert fits["dense"].noise_correlation_extent_samples  # the sandwich is used
    for label in ("mixed", "long"):
        np.testing.assert_allclose(fits[label].covariance, fits["dense"].covariance, rtol=1e-8)


def test_long_white_record_without_a_drive_channel_is_judged_white():
    # A sense-only square wave of tau = 10,000 samples in white noise of 1/300 of the step (the
    # closed-form response of wavefit.synth.rl). Its reference-level instants are late by tens
    # of samples (FIRST_PASS_END_MARGIN), which let the first windows take in the next edge:
    # the misfit was read as correlated noise, with a warning that the edges were poorly placed.
    inductance, dcr, r_sense, r_source = 1e-3, 1.0, 10.0, 50.0
    tau = inductance / (dcr + r_sense + r_source)
    t, _, sense = rl_square_wave(inductance, dcr, r_sense, r_source, 1.0, 16 * tau, tau / 10000, 56 * tau,
                                 delay=8 * tau)
    sense = sense + np.ptp(sense) / 300 * np.random.default_rng(3).standard_normal(t.size)
    setup = {"method": "rl-step", "columns": {"time": "t", "sense": "v"},
             "parts": {"sense_resistor": r_sense, "source_resistance": r_source, "dut_resistance": dcr},
             "instrument": {"timebase": "exact", "vertical_gain": "exact"}}
    out = wavefit.analyze(pd.DataFrame({"t": t, "v": sense}), setup).to_dict()
    assert not out["warnings"]
    assert all(edge["noise_model"]["sense"]["order"] == 0 for edge in out["fit"]["edges"])
    assert out["fit"]["estimator"] == "whole-record relaxation fit"
    value, u = out["quantities"]["L"]["value"], out["quantities"]["L"]["expanded_uncertainty"]
    assert abs(value - inductance) <= u


@pytest.mark.parametrize("values", [
    np.random.default_rng(16).normal(size=300_000),                   # continuous: nearly all distinct
    np.round(np.random.default_rng(17).normal(size=300_000) * 100) / 100,  # a grid of codes, repeated
    np.arange(300_000, dtype=float),                                  # integers: keys differing in few bits
    np.r_[np.zeros(1000), -np.zeros(1000), np.ones(10)],              # 0.0 and -0.0 are one value
    1.0 + np.arange(200_000) * np.finfo(float).eps,                   # neighbouring floats
])
def test_occupied_buckets_bound_the_distinct_values(values):
    # the buckets a hash table's keys occupy never outnumber the distinct values (Whang et al.
    # 1990: occupied buckets as a count of distinct values); with eight or more buckets per value
    # about 1/16 of random distinct values share one at most (m·(1 − e^(−n/m)) of n occupied)
    distinct = np.unique(values).size
    found = codes.occupied_buckets(values)
    assert found <= distinct
    assert found >= 0.9 * distinct
