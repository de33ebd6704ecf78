"""lc-ring method: setup checks, warnings, refusals, JSON contract, CLI.

The rings here come from wavefit.synth.lc and only trigger behaviour (warnings,
errors, output shape); accuracy is checked against ngspice in test_lc_ring_spice.py.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.cli import main
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.scope import ScopeModel

TANK = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=2.0, feed_resistance=20e3)
SETUP = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
         "parts": {"tank_capacitor": "10 nF ±1%", "parallel_load": "20 kohm ±1%"}}


def _frame(tank: Tank = TANK, spp: float = 30, n: int = 3000, noise: float = 0.01, seed: int = 1,
           warp=None) -> pd.DataFrame:
    alpha, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * spp)
    t, v = ringdown(tank, dt, n, pre_trigger=50)
    if warp is not None:
        v = warp(t, v)
    y = ScopeModel(noise_rms=noise * float(np.abs(v).max())).apply(v, np.random.default_rng(seed))
    return pd.DataFrame({"t": t, "v": y})


def test_json_contract_and_quantities():
    result = wavefit.analyze(_frame(), setup=SETUP)
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    assert data["method"] == "lc-ring"
    for name, unit in [("f0", "Hz"), ("fd", "Hz"), ("alpha", "1/s"), ("Q_loaded", ""), ("Q", ""),
                       ("L", "H"), ("R", "ohm")]:
        entry = data["quantities"][name]
        assert entry["unit"] == unit
        assert entry["expanded_uncertainty"] > 0 and entry["coverage_factor"] > 1.9
    assert {line["source"] for line in data["budget"]["L"]} >= {"fit w_d", "timebase", "tank_capacitor"}
    assert data["warnings"] == []
    assert result.value("Q") > result.value("Q_loaded")


def test_drifting_frequency_is_flagged():
    # a frequency that rises as the ring decays (as a saturating core does) stretches the phase
    def warp(t, v):
        alpha, w_d = TANK.poles()
        tt = np.clip(t, 0, None)
        phase = w_d * tt + 0.002 * w_d / alpha * (1 - np.exp(-alpha * tt)) * -1.0
        return np.where(t < 0, 0.0, np.exp(-alpha * tt) * np.sin(phase) * 0.01)

    result = wavefit.analyze(_frame(warp=warp, noise=0.002), setup=SETUP)
    assert any("frequency changes with amplitude" in w for w in result.warnings)


def test_second_mode_is_flagged():
    def warp(t, v):
        alpha, w_d = TANK.poles()
        tt = np.clip(t, 0, None)
        return v + np.where(t < 0, 0.0, 0.05 * np.abs(v).max() * np.exp(-alpha * tt) * np.sin(2.7 * w_d * tt))

    result = wavefit.analyze(_frame(warp=warp, noise=0.002), setup=SETUP)
    assert any("second oscillation" in w for w in result.warnings)


def test_a_residual_line_at_the_rings_own_frequency_is_not_called_a_second_oscillation():
    # a ring on few converter codes left a line at its own frequency in the residuals, and the
    # warning named it a second mode at that very frequency
    from wavefit.methods._ring import ResidualPeak, residual_line_warning

    own = residual_line_warning(ResidualPeak(127_610.0, 1.2e-3), 127_594.0, 10.0)
    assert own.startswith("the residuals hold the ring's own frequency") and "second oscillation" not in own
    other = residual_line_warning(ResidualPeak(2.7 * 127_594.0, 1.2e-3), 127_594.0, 10.0)
    assert other.startswith("a second oscillation at 3.445e+05 Hz")


def test_undersampled_and_few_cycles_warn():
    result = wavefit.analyze(_frame(spp=6, n=600), setup=SETUP)
    assert any("samples per period" in w for w in result.warnings)
    lossy = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=45.0, feed_resistance=20e3)
    parts = dict(SETUP["parts"])
    result = wavefit.analyze(_frame(lossy, noise=0.02), setup=dict(SETUP, parts=parts))
    assert any("too few cycles" in w for w in result.warnings)


@pytest.mark.parametrize("spp", [3.3, 2.6])
def test_a_ring_above_half_the_nyquist_frequency_is_refused(spp):
    # below 4 samples per period a ring may be the alias of a faster one (a sampled sinusoid's
    # frequency is known only modulo the sampling rate, common practice): it was printed with a
    # warning; these rings are real, but the capture alone cannot tell them from aliases
    with pytest.raises(wavefit.AnalysisRefused, match="samples per period put the ring at .* alias"):
        wavefit.analyze(_frame(spp=spp, n=600), setup=SETUP)


def test_load_that_explains_all_damping_is_refused():
    lossless = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=1e-6, feed_resistance=20e3)
    with pytest.raises(wavefit.AnalysisRefused, match="parallel_load"):
        wavefit.analyze(_frame(lossless), setup=SETUP)
    # a load stated at half its value explains more than all the damping: the message says that
    # the load or the ring itself must be wrong (it named only the load's share)
    half = {**SETUP, "parts": {**SETUP["parts"], "parallel_load": "10 kohm ±1%"}}
    with pytest.raises(wavefit.AnalysisRefused, match="more than all of it"):
        wavefit.analyze(_frame(lossless), setup=half)


def test_noise_only_is_refused():
    frame = pd.DataFrame({"t": np.arange(2000) * 1e-7, "v": np.random.default_rng(2).normal(size=2000)})
    with pytest.raises(wavefit.AnalysisRefused):
        wavefit.analyze(frame, setup=SETUP)


@pytest.mark.parametrize("change, match", [
    ({"parts": {}}, "tank_capacitor"),
    ({"options": {"coil_loss": "both"}}, "coil_loss"),
    ({"options": {"fit_start": "1 s"}}, "outside the record"),
    ({"parts": {"tank_capacitor": "10 nH"}}, "expected 'F'"),
])
def test_setup_errors(change, match):
    with pytest.raises(wavefit.SetupError, match=match):
        wavefit.analyze(_frame(), setup=dict(SETUP, **change))


def test_cli_json(tmp_path, capsys):
    _frame().to_csv(tmp_path / "ring.csv", index=False)
    (tmp_path / "setup.toml").write_text(
        'method = "lc-ring"\n[columns]\ntime = "t"\ntank = "v"\n'
        '[parts]\ntank_capacitor = "10 nF ±1%"\nparallel_load = "20 kohm ±1%"\n')
    code = main(["analyze", str(tmp_path / "ring.csv"), "--setup", str(tmp_path / "setup.toml"), "--json"])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    assert data["quantities"]["L"]["value"] == pytest.approx(TANK.inductance, rel=0.02)


def test_residual_spectrum_length_is_the_longest_regular_one():
    # the residuals' spectrum is cut to the longest length with prime factors 2, 3 and 5 only
    # (regular numbers): checked against that definition by trial division
    from wavefit.methods._ring import fast_length

    def regular(m: int) -> bool:
        for p in (2, 3, 5):
            while m % p == 0:
                m //= p
        return m == 1

    longest = 1
    for n in range(1, 4000):
        if regular(n):
            longest = n
        assert fast_length(n) == longest
    assert fast_length(997_331) == 995_328  # 2¹²·3⁵; 997,331 = 127·7,853


@pytest.mark.parametrize("top, clipped", [(0.6, True), (1.2, False)])
def test_ring_clipped_by_the_converter_warns(top, clipped):
    # an 8-bit ring whose positive peaks pass the converter's top code piles up samples there
    # (judged with the record's code step); one within full scale does not (common practice)
    alpha, w_d = TANK.poles()
    t, v = ringdown(TANK, 2 * math.pi / (w_d * 12), 3000, pre_trigger=50)
    peak = float(np.abs(v).max())
    scope = ScopeModel(noise_rms=0.02 * peak, bits=8, full_scale=(-1.2 * peak, top * peak))
    result = wavefit.analyze(pd.DataFrame({"t": t, "v": scope.apply(v, np.random.default_rng(3))}), setup=SETUP)
    assert any("clipped at the converter's limit" in w for w in result.warnings) == clipped


@pytest.mark.parametrize("seed", [3, 4])
def test_a_clipped_ring_is_fitted_after_its_clipped_peaks(seed):
    # the early cycles of a ring over 60 % of its peak cut off at the converter's top: fitted
    # with them, R read 1.806 ± 0.10 Ω for the tank's 2 Ω (1.9 U), warned only; the window now
    # starts after the last clipped sample and R and L hold their truth within U
    alpha, w_d = TANK.poles()
    t, v = ringdown(TANK, 2 * math.pi / (w_d * 12), 3000, pre_trigger=50)
    peak = float(np.abs(v).max())
    scope = ScopeModel(noise_rms=0.02 * peak, bits=8, full_scale=(-1.2 * peak, 0.6 * peak))
    result = wavefit.analyze(pd.DataFrame({"t": t, "v": scope.apply(v, np.random.default_rng(seed))}), setup=SETUP)
    assert any("the fit starts after it" in w for w in result.warnings)
    for name, truth in (("R", TANK.dcr), ("L", TANK.inductance)):
        q = result.quantities[name]
        assert abs(q.value - truth) < q.expanded_uncertainty, name


def test_window_on_a_grid_of_a_continuous_record_is_not_called_clipped():
    # a strong early ring on a 16-bit grid makes the record look continuous (more distinct
    # values than half its samples); a window set late in it holds a few codes only, whose
    # extremes repeat: judged by the window's own code step they are not clipped
    q, n, lo, hi = 1e-4, 2000, 1300, 2000
    k = np.arange(n)
    decay = math.log(1e7 / 2.5) / lo
    rng = np.random.default_rng(0)
    clean = 1e7 * q * np.exp(-decay * k) * np.cos(2 * math.pi / 30 * k)
    y = np.round((clean + 0.3 * q * rng.standard_normal(n)) / q) * q
    t = k * 1e-7
    setup = dict(SETUP, options={"fit_start": float(t[lo]), "fit_end": float(t[hi - 1])})
    result = wavefit.analyze(pd.DataFrame({"t": t, "v": y}), setup=setup)
    assert not any("clipped" in w for w in result.warnings)


@pytest.mark.parametrize("seed", [1, 4])
def test_a_coil_loss_the_ring_cannot_resolve_is_warned(seed):
    # a 10 mΩ coil in a tank damped mostly by its 200 kΩ load, 20 cycles at 2 % noise: L and the
    # ring's damping are measured, the coil's own share is not; Q and R were printed as
    # 16 ± 34 k and 6 ± 14 mΩ without a word (a ring longer than its record read Q = 31 ± 346 k)
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=0.01, feed_resistance=200e3)
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
             "parts": {"tank_capacitor": "10 nF ±1%", "parallel_load": "200 kohm ±1%"}}
    result = wavefit.analyze(_frame(tank, n=600, noise=0.02, seed=seed), setup=setup)
    loose = [w for w in result.warnings if "not determined by this measurement" in w]
    assert len(loose) == 1 and "Q = " in loose[0] and "R = " in loose[0] and "L = " not in loose[0]
    for name in ("Q", "R"):
        q = result.quantities[name]
        assert q.expanded_uncertainty >= q.value
    assert result.quantities["L"].expanded_uncertainty < 0.02 * result.quantities["L"].value


def test_a_tank_without_its_load_or_stray_capacitance_is_warned():
    # without parallel_load the load's damping is counted as the coil's (Q = Q_loaded: 30 read
    # for a coil of Q 342); without stray_capacitance on a small tank capacitor the probe's input
    # alone moves L by many standard uncertainties (1.340 ± 0.015 mH read for 1.000 mH on 100 pF)
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"}, "parts": {"tank_capacitor": "10 nF ±1%"}}
    result = wavefit.analyze(_frame(), setup=setup)
    assert any(w.startswith("no parallel_load given") for w in result.warnings)
    assert result.value("Q") == pytest.approx(result.value("Q_loaded"))
    assert not any("stray_capacitance" in w for w in result.warnings)  # 12 pF is 0.12 % of 10 nF, U 1.2 %
    small = Tank(inductance=100e-6, tank_capacitor=100e-12, dcr=2.0, feed_resistance=2e6)
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
             "parts": {"tank_capacitor": "100 pF ±0.1%", "parallel_load": "2 Mohm ±1%"}}
    result = wavefit.analyze(_frame(small, noise=0.002), setup=setup)
    stray = [w for w in result.warnings if w.startswith("no stray_capacitance given")]
    assert len(stray) == 1 and "12 % high" in stray[0]


@pytest.mark.parametrize("stray, warned", [("11 pF ±2 pF", True), ("30 pF ±3 pF", False)])
def test_a_stray_capacitance_of_a_probe_alone_is_questioned(stray, warned):
    # a stray_capacitance of about a probe's input (11 pF) likely leaves out the coil's own,
    # which on a 100 pF tank moves L by many standard uncertainties (10 pF: 9 %); one that
    # holds more (30 pF) is taken as given
    small = Tank(inductance=100e-6, tank_capacitor=100e-12, dcr=2.0, feed_resistance=2e6)
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
             "parts": {"tank_capacitor": "100 pF ±0.1%", "parallel_load": "2 Mohm ±1%", "stray_capacitance": stray}}
    result = wavefit.analyze(_frame(small, noise=0.002), setup=setup)
    asked = [w for w in result.warnings if "about a probe's input alone" in w]
    assert len(asked) == warned
    if warned:
        assert "L reads high" in asked[0] and "9 % for 10 pF" in asked[0]


def test_a_refusal_names_the_file_and_the_readers_warning(tmp_path):
    # a time column in µs under a header without a unit is read as seconds (the reader warns);
    # the ring then decays a million times too slowly for its load and is refused, and the
    # refusal said neither which file nor that warning, its cause
    frame = _frame()
    path = tmp_path / "ring_us.csv"
    pd.DataFrame({"Time": frame["t"] * 1e6, "v": frame["v"]}).to_csv(path, index=False)
    setup = {**SETUP, "columns": {"time": "Time", "tank": "v"}}
    with pytest.raises(wavefit.AnalysisRefused) as err:
        wavefit.analyze(path, setup=setup)
    message = str(err.value)
    assert str(path) in message and "the reader had warned: time column 'Time' has no unit" in message
    assert "\n" not in message


def test_an_undetermined_l_names_the_part_that_holds_its_variance():
    # a tank capacitor written "±100%" leaves L undetermined; the refusal blamed the capture
    # ("check that the capture holds several periods of the ring")
    setup = {**SETUP, "parts": {"tank_capacitor": "10 nF ±100%", "parallel_load": "20 kohm ±1%"}}
    with pytest.raises(wavefit.AnalysisRefused, match="not determined.*% of its variance from tank_capacitor"):
        wavefit.analyze(_frame(), setup=setup)


@pytest.mark.parametrize("fit_start", [None, "2 us"])
def test_a_weak_fitted_ring_points_at_the_window(fit_start):
    # a window that holds little of the ring was refused as "the ring's amplitude is 2.2 times
    # the noise rms" for a ring 55 times its noise (a fit_start in the pre-trigger baseline), and
    # an automatic window that missed a ring 7.5 times its noise likewise; the refusal now says
    # which window to check. Here the record holds noise only.
    frame = pd.DataFrame({"t": np.arange(3000) * 1e-8, "v": np.random.default_rng(5).normal(0, 0.01, 3000)})
    setup = {**SETUP, "options": {} if fit_start is None else {"fit_start": fit_start}}
    with pytest.raises(wavefit.AnalysisRefused) as err:
        wavefit.analyze(frame, setup=setup)
    hint = "automatic window missed the ring" if fit_start is None else "check fit_start and fit_end"
    assert hint in str(err.value)


def test_a_failed_fit_of_a_clipped_ring_names_the_clipping(monkeypatch):
    # a ring on a screen a tenth of its swing: when even the first fit fails (a singular normal
    # matrix), the refusal said only "check the [columns] tank entry"
    import wavefit.methods._ring as ring_module

    def failing(*args, **kwargs):
        raise ValueError("the data do not determine every fit parameter (singular normal matrix)")

    monkeypatch.setattr(ring_module, "fit_ring", failing)
    alpha, w_d = TANK.poles()
    t, v = ringdown(TANK, 2 * math.pi / (w_d * 30), 3000, pre_trigger=50)
    peak = float(np.abs(v).max())
    scope = ScopeModel(noise_rms=0.02 * peak, bits=8, full_scale=(-0.1 * peak, 0.1 * peak))
    frame = pd.DataFrame({"t": t, "v": scope.apply(v, np.random.default_rng(3))})
    with pytest.raises(wavefit.AnalysisRefused, match="no damped oscillation.*probably clipped"):
        wavefit.analyze(frame, setup=SETUP)
    with pytest.raises(wavefit.AnalysisRefused) as err:  # a record held nowhere is not called clipped
        wavefit.analyze(_frame(), setup=SETUP)
    assert "clipped" not in str(err.value)


def test_a_second_ring_as_strong_as_the_first_ends_the_window():
    # a square-wave drive rings the tank at each edge: the second ring's first block was the
    # record's largest, so the search for a second excitation started after it, and the tail
    # that set the noise floor was the second ring itself; the whole record was fitted as one
    # ring and refused as "2.6 times the noise rms"
    alpha, w_d = TANK.poles()
    t, v = ringdown(TANK, 2 * math.pi / (w_d * 30), 6000, pre_trigger=300)
    edge = 3300
    second = np.concatenate([np.zeros(edge - 300), v[:v.size - (edge - 300)]])
    y = v - 1.05 * second  # the falling edge's ring, of opposite sign and a little stronger
    y = y + 0.005 * float(np.abs(v).max()) * np.random.default_rng(2).standard_normal(y.size)
    result = wavefit.analyze(pd.DataFrame({"t": t, "v": y}), setup=SETUP)
    assert result.fit.window_end_s < t[edge]
    q = result.quantities["L"]
    assert abs(q.value - TANK.inductance) < q.expanded_uncertainty


def test_a_noise_sample_in_a_long_pre_trigger_is_not_the_rings_start():
    # a ring 7.5 times its noise: one noise sample of the long pre-trigger stretch past half the
    # ring's largest excursion was taken as the excitation, the window began 263 µs before the
    # step and the ring was refused as "0.2 times the noise rms" (3 of 60 draws of a trial)
    alpha, w_d = TANK.poles()
    t, v = ringdown(TANK, 2 * math.pi / (w_d * 30), 6000, pre_trigger=2000)
    peak = float(np.abs(v).max())
    y = v + (peak / 7.5) * np.random.default_rng(4).standard_normal(v.size)
    y[300] = 0.6 * peak   # the noise's excursion, far before the step
    result = wavefit.analyze(pd.DataFrame({"t": t, "v": y}), setup=SETUP)
    assert result.fit.window_start_s >= 0.0
    q = result.quantities["L"]
    assert abs(q.value - TANK.inductance) < q.expanded_uncertainty


def test_a_fit_start_before_the_ring_is_warned_and_one_after_it_is_not():
    # a window from before the excitation fits the ring to baseline samples (Q 2 standard
    # uncertainties off two samples early, the model check passing: a fault campaign's rings)
    frame = _frame()
    t = frame["t"].to_numpy()
    onset = float(t[50])  # the ring starts after the 50 pre-trigger samples
    for start, warned in ((t[0], True), (t[47], True), (onset, False), (t[60], False)):
        setup = {**SETUP, "options": {"fit_start": f"{start} s"}}
        result = wavefit.analyze(frame, setup)
        assert any("before the ring's onset" in w for w in result.warnings) == warned, start
