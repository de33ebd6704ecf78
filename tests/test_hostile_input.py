"""Broken and careless input gives a refusal that names the cause, or a result within its
uncertainty of the clean one; never an impossible number reported as a measurement."""
from __future__ import annotations

import math
import os
import warnings
from pathlib import Path

import numpy as np
import pytest

import wavefit
from wavefit.numerics import collected
from wavefit.results import AnalysisResult, QuantityResult
from wavefit.signal.glitches import find_glitches
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave
from wavefit.methods._rl_wiring import check_wiring
from wavefit.signal.edges import find_edges
from wavefit.synth.scope import ScopeModel, band_limited_noise

# The rl-step circuit of docs/method-rl-step.md: L/(R_source + DCR + R_sense) = 100 µH/60.5 Ω.
L, DCR, R_SENSE, R_SOURCE = 100e-6, 0.5, 10.0, 50.0
TWO_CHANNELS = {"method": "rl-step", "columns": {"drive": "drive", "sense": "sense"},
                "parts": {"sense_resistor": "10 ohm"}}
SENSE_ONLY = {"method": "rl-step", "columns": {"sense": "sense"},
              "parts": {"sense_resistor": "10 ohm", "source_resistance": "50 ohm", "dut_resistance": "0.5 ohm"}}


def _record(seed: int = 1, bits: int | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    t, drive, sense = rl_square_wave(L, DCR, R_SENSE, R_SOURCE, 1.0, 40e-6, 4e-8, 120e-6)
    rng = np.random.default_rng(seed)
    scope = ScopeModel(noise_rms=3e-4, bits=bits)
    return t, scope.apply(drive, rng), scope.apply(sense, rng)


def _write(path: Path, t: np.ndarray, drive: np.ndarray, sense: np.ndarray) -> Path:
    rows = [f"{a:.9e},{b:.7g},{c:.7g}" for a, b, c in zip(t, drive, sense)]
    path.write_text("\n".join(["Time (s),drive (V),sense (V)", *rows]) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("setup", [TWO_CHANNELS, SENSE_ONLY], ids=["two channels", "sense only"])
@pytest.mark.parametrize("where", [0.2, 0.55, 0.9])
def test_one_glitch_sample_does_not_move_the_result(tmp_path: Path, setup: dict, where: float) -> None:
    t, drive, sense = _record()
    clean = wavefit.analyze(_write(tmp_path / "clean.csv", t, drive, sense), setup)
    k = int(where * t.size)
    glitched = sense.copy()
    glitched[k] = 0.0 if sense[k] > 0.05 else 0.1  # far from both neighbours
    result = wavefit.analyze(_write(tmp_path / "glitch.csv", t, drive, glitched), setup)
    q, ref = result.quantities["L"], clean.quantities["L"]
    assert abs(q.value - ref.value) < ref.expanded_uncertainty  # the issue: not beyond its uncertainty
    assert any("1 isolated sample" in w and "replaced" in w for w in result.warnings)


def test_glitch_rule_leaves_smooth_and_stepped_waveforms_alone() -> None:
    rng = np.random.default_rng(3)
    n = np.arange(20000)
    for samples_per_period in (3.0, 4.0, 10.0, 40.0):
        ring = np.sin(2 * np.pi * n / samples_per_period) * np.exp(-n / 4000.0) + rng.normal(0, 1e-4, n.size)
        assert find_glitches(ring).size == 0
    square = np.where(n % 400 < 200, 5.0, 0.0) + rng.normal(0, 1e-3, n.size)
    assert find_glitches(square).size == 0
    square[777] = 2.5
    assert list(find_glitches(square)) == [777]


def test_constant_drive_is_refused_by_name(tmp_path: Path) -> None:
    t, drive, sense = _record(seed=2)
    path = _write(tmp_path / "flat.csv", t, np.full_like(drive, 0.02), sense)
    with pytest.raises(wavefit.AnalysisRefused, match="drive channel does not step"):
        wavefit.analyze(path, TWO_CHANNELS)


def test_drive_that_jumps_and_settles_within_its_noise_is_analysed(tmp_path: Path) -> None:
    # R_source 50 Ω against 10.5 Ω: the drive node jumps by the generator's 1 V at each edge
    # and settles 0.17 V from where it was, 4 noise deviations of a noisy drive probe (below
    # find_edges' 5), while the sense channel is clean; the drive still steps
    t, drive, sense = _record(seed=6)
    noisy = drive + np.random.default_rng(6).normal(0.0, 0.17 / 4, drive.size)
    result = wavefit.analyze(_write(tmp_path / "noisy_drive.csv", t, noisy, sense), TWO_CHANNELS)
    q = result.quantities["L"]
    assert abs(q.value - L) <= q.expanded_uncertainty


def test_drive_of_noise_only_is_refused_by_name(tmp_path: Path) -> None:
    t, drive, sense = _record(seed=7)
    unplugged = np.random.default_rng(7).normal(0.0, 0.05, drive.size)
    with pytest.raises(wavefit.AnalysisRefused, match="drive channel does not step"):
        wavefit.analyze(_write(tmp_path / "unplugged.csv", t, unplugged, sense), TWO_CHANNELS)


def test_a_single_step_with_little_record_after_it_is_refused_naming_that_too(tmp_path: Path) -> None:
    # one step, 0.75 tau of record before it and 3 tau after: the drive node relaxes until the
    # record ends, and the jump test cannot tell its jump from its noise; the refusal names the
    # short record as well as the wiring (it named only the wiring); a long record does not
    t, drive, sense = _record(seed=9)
    tau = L / (R_SOURCE + DCR + R_SENSE)
    edge = int(np.flatnonzero(np.abs(np.diff(drive)) > 0.3)[0]) + 1
    cut = slice(edge - int(0.75 * tau / 4e-8), edge + int(3 * tau / 4e-8))
    path = _write(tmp_path / "short.csv", t[cut] - t[cut][0], drive[cut], sense[cut])
    with pytest.raises(wavefit.AnalysisRefused, match="drive channel does not step.*too short after each edge"):
        wavefit.analyze(path, TWO_CHANNELS)
    unplugged = np.random.default_rng(7).normal(0.0, 0.05, drive.size)
    with pytest.raises(wavefit.AnalysisRefused) as refused:
        wavefit.analyze(_write(tmp_path / "unplugged.csv", t, unplugged, sense), TWO_CHANNELS)
    assert "too short" not in str(refused.value)


def test_drive_of_band_limited_noise_only_is_refused_by_name() -> None:
    # a drive probe that picks up only band-limited noise: over the several samples a jump is
    # read across, its differences are far larger than over one sample, and must not pass for
    # jumps (judged by the noise of one-sample differences, 7 of these 200 draws passed)
    t, _, sense = _record(seed=8)
    edges = find_edges(t, sense)
    for seed in range(200):
        rng = np.random.default_rng(seed)
        unplugged = band_limited_noise(t.size, 0.05, 5.0, rng)
        if find_edges(t, unplugged):
            continue  # noise that happens to show two levels: not this case
        with pytest.raises(wavefit.AnalysisRefused, match="drive channel does not step"):
            check_wiring(t, sense, unplugged, edges, "capture")


def test_inverted_sense_is_refused_by_name(tmp_path: Path) -> None:
    t, drive, sense = _record(seed=3)
    with pytest.raises(wavefit.AnalysisRefused, match="sense channel falls when the drive rises"):
        wavefit.analyze(_write(tmp_path / "inverted.csv", t, drive, -sense), TWO_CHANNELS)


def test_swapped_channels_are_refused_by_name(tmp_path: Path) -> None:
    t, drive, sense = _record(seed=4)
    with pytest.raises(wavefit.AnalysisRefused, match="drive and sense look swapped"):
        wavefit.analyze(_write(tmp_path / "swapped.csv", t, sense, drive), TWO_CHANNELS)


def test_one_column_for_two_roles_is_refused(tmp_path: Path) -> None:
    t, drive, sense = _record(seed=5)
    path = _write(tmp_path / "c.csv", t, drive, sense)
    setup = {**TWO_CHANNELS, "columns": {"drive": "sense (V)", "sense": 2}}
    with pytest.raises(wavefit.SetupError, match="roles 'drive' and 'sense' both name column 'sense \\(V\\)'"):
        wavefit.analyze(path, setup)


def test_a_name_the_file_repeats_is_refused_and_its_columns_serve_by_index(tmp_path: Path) -> None:
    # a header with two columns called 'sense' (one holding half the sense voltage): mapped by
    # name it took the first one silently (L twice the truth, exit 0, a fault campaign's file);
    # mapped by index each is its own column
    t, drive, sense = _record(seed=7)
    rows = [f"{a:.9e},{b:.7g},{0.5 * c:.7g},{c:.7g}" for a, b, c in zip(t, drive, sense)]
    for header in ("Time (s),drive (V),sense (V),sense (V)", "Time (s),drive (V),sense (mV),sense (V)"):
        path = tmp_path / "twice.csv"
        path.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8")
        with pytest.raises(wavefit.SetupError, match=r"2 columns of .* match 'sense' \(at 2, 3\): map the role by"):
            wavefit.analyze(path, TWO_CHANNELS)
    path.write_text("\n".join(["Time (s),drive (V),sense (V),sense (V)", *rows]) + "\n", encoding="utf-8")
    by_index = wavefit.analyze(path, {**TWO_CHANNELS, "columns": {"drive": 1, "sense": 3}})
    found = by_index.quantities["L"]
    assert abs(found.value - L) < 3 * found.standard_uncertainty


def test_values_near_the_float_range_end_give_no_numpy_warnings(tmp_path: Path) -> None:
    # one cell of 1e308 (found and repaired as a glitch) and a time column standing at 1.7e308
    # (refused): each printed numpy's overflow warnings on stderr (a fault campaign's files)
    t, drive, sense = _record(seed=8)
    sense = sense.copy()
    sense[sense.size // 3] = 1e308
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = wavefit.analyze(_write(tmp_path / "huge.csv", t, drive, sense), TWO_CHANNELS)
        assert any("isolated sample" in w for w in result.warnings)
        with pytest.raises(wavefit.CaptureError, match="repeats the value"):
            wavefit.analyze(_write(tmp_path / "far.csv", np.full(t.size, 1.7e308), drive, sense), TWO_CHANNELS)


def test_a_ring_given_to_rl_step_is_not_reported(tmp_path: Path) -> None:
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=0.5)
    t, v = ringdown(tank, 2e-8, 4000, pre_trigger=400)
    v = v + np.random.default_rng(6).normal(0, 1e-3, v.size)
    path = _write(tmp_path / "ring.csv", t, v, v)
    with pytest.raises(wavefit.WavefitError):
        wavefit.analyze(path, {**SENSE_ONLY, "columns": {"sense": "sense"}})


def test_a_refusal_for_the_wrong_method_names_the_method_the_record_looks_like(tmp_path: Path) -> None:
    # a ring given to rl-step was refused as "no transition found ... check the trigger", a step
    # response given to lc-ring as "no damped oscillation ... the ring is probably clipped"
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=0.5)
    t, v = ringdown(tank, 2e-8, 20000, pre_trigger=400)  # rung down to its final level
    v = v + np.random.default_rng(6).normal(0, 1e-3, v.size)
    with pytest.raises(wavefit.AnalysisRefused, match='looks like a ring: method = "lc-ring"'):
        wavefit.analyze(_write(tmp_path / "ring.csv", t, v, v), {**SENSE_ONLY, "columns": {"sense": "sense"}})
    t, drive, sense = _record(seed=8)
    step = _write(tmp_path / "step.csv", t, drive, sense)
    lc_ring = {"method": "lc-ring", "columns": {"tank": "sense"}, "parts": {"tank_capacitor": "10 nF"}}
    with pytest.raises(wavefit.AnalysisRefused, match='looks like a step response: method = "rl-step"'):
        wavefit.analyze(step, lc_ring)


def test_noise_refused_by_rl_step_is_not_named_a_ring() -> None:
    # a review found 1 of 10 records of pure noise told "looks like a ring" (a fitted "ring" of
    # Q 0.94): a ring is named only at Q 2 or more (wavefit.suggest.rules.HINTED_Q)
    import pandas as pd

    setup = {**SENSE_ONLY, "columns": {"time": "t", "sense": "sense"}}
    for seed in range(10):
        rng = np.random.default_rng(seed)
        frame = pd.DataFrame({"t": np.arange(2000) * 1e-8, "sense": rng.standard_normal(2000)})
        with pytest.raises(wavefit.AnalysisRefused) as caught:
            wavefit.analyze(frame, setup)
        assert "looks like" not in str(caught.value), seed


def test_sample_interval_that_contradicts_the_time_column_is_refused(tmp_path: Path) -> None:
    t, drive, sense = _record(seed=7)
    path = _write(tmp_path / "c.csv", t, drive, sense)
    with pytest.raises(wavefit.CaptureError, match="steps by 4e-08 s \\(10 times that\\)"):
        wavefit.analyze(path, {**TWO_CHANNELS, "sample_interval": "400 ns"})


def test_a_drive_probe_set_to_the_wrong_attenuation_is_refused(tmp_path: Path) -> None:
    # the drive recorded at a tenth of its volts (a 10x probe read as 1x): the loop resistance
    # from the levels, R_sense + DCR = 10.5 ohm, comes out as 1.05 ohm, so the DCR is about
    # -9 ohm with an uncertainty of a few hundredths; it was printed with exit 0
    t, drive, sense = _record(seed=8)
    with pytest.raises(wavefit.AnalysisRefused, match=r"R came out as -8\.\d+ ± .* below zero by more than 2 times"):
        wavefit.analyze(_write(tmp_path / "att.csv", t, drive / 10, sense), TWO_CHANNELS)


@pytest.mark.parametrize(("value", "expanded", "refused"), [(-16.1, 6.0, True), (-0.9, 0.4, True), (-0.7, 0.4, False),
                                                            (-0.1, 0.4, False), (0.0, 0.0, False)])
def test_a_dcr_below_zero_is_refused_only_beyond_its_uncertainty(value: float, expanded: float, refused: bool) -> None:
    # a coil of a few milliohms measured with an uncertainty of tenths of an ohm may honestly come
    # out a little below zero; twice its expanded uncertainty below contradicts the model
    method = wavefit.methods.get_method("rl-step")
    result = _result(1e-4, 1e-6)
    result.quantities["R"] = QuantityResult("R", value, "ohm", expanded / 2, expanded, 2.0)
    if refused:
        with pytest.raises(wavefit.AnalysisRefused, match="R came out as .* below zero"):
            method.check_physical(result)
    else:
        method.check_physical(result)


def test_a_dut_resistance_beside_a_drive_channel_is_noted_and_checked(tmp_path: Path) -> None:
    # docs/setup-file.md: "nothing is ignored": the ohmmeter's DCR typed beside a drive channel was
    # neither used nor compared; it is now named in a note, and warned when it disagrees
    t, drive, sense = _record(seed=11)
    path = _write(tmp_path / "c.csv", t, drive, sense)
    for given, disagrees in (("0.5 ohm ±5%", False), ("99 ohm ±0.1%", True)):
        setup = {**TWO_CHANNELS, "parts": {**TWO_CHANNELS["parts"], "dut_resistance": given}}
        result = wavefit.analyze(path, setup)
        assert any("dut_resistance is not used" in n for n in result.fit.to_dict()["notes"])
        assert any("disagrees with the dut_resistance given" in w for w in result.warnings) == disagrees, given


def _result(value: float, u: float) -> AnalysisResult:
    q = QuantityResult("L", value, "H", u, 2 * u, 2.0)
    return AnalysisResult("rl-step", "x.csv", {"L": q, "tau": QuantityResult("tau", 1e-6, "s", 1e-8, 2e-8, 2.0),
                                               "R_loop": QuantityResult("R_loop", 60.0, "ohm", 1.0, 2.0, 2.0)},
                          {}, {})


@pytest.mark.parametrize(("value", "u", "what"), [(-2.2e-4, 7e-6, "is not positive"), (0.0, 1e-6, "is not positive"),
                                                  (math.nan, 1e-6, "not a finite"), (1e-4, math.inf, "not a finite")])
def test_physical_gate(value: float, u: float, what: str) -> None:
    method = wavefit.methods.get_method("rl-step")
    with pytest.raises(wavefit.AnalysisRefused, match=what):
        method.check_physical(_result(value, u))
    method.check_physical(_result(1e-4, 1e-6))


def test_numerical_warnings_and_raw_output_are_collected() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # nothing may escape to the caller
        with collected() as said:
            np.array([1e308]) * 10.0
            os.write(1, b"** On entry to a routine parameter 4 had an illegal value\n")
    assert any("overflow" in text for text in said.runtime_warnings)
    remark = said.remark()
    assert remark is not None and "overflow" in remark
    if said.printed:  # file descriptor 1 was a real one here
        assert "illegal value" in remark


def test_setup_nested_too_deep_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "deep.toml"
    path.write_text('method = "rl-step"\n[options]\nskip = ' + "[" * 1000 + "]" * 1000 + "\n", encoding="utf-8")
    with pytest.raises(wavefit.SetupError, match="nests arrays or tables too deeply"):
        wavefit.analyze(None, path)


def test_a_plot_that_cannot_be_written_keeps_the_result_and_exits_5(tmp_path: Path, capsys, monkeypatch) -> None:
    # docs/cli.md: exit 5 when an output could not be written, what was written before kept; the
    # plot's failure was exit 3 and the result was never printed
    import errno

    import matplotlib.figure

    from wavefit.cli import main

    t, drive, sense = _record(seed=10)
    capture = _write(tmp_path / "c.csv", t, drive, sense)
    setup = tmp_path / "s.toml"
    setup.write_text('method = "rl-step"\n[columns]\ndrive = "drive"\nsense = "sense"\n[parts]\n'
                     'sense_resistor = "10 ohm"\n', encoding="utf-8")
    # a folder where the file should go is refused before anything is analysed (it was found
    # only after the analysis, as "check free space")
    (tmp_path / "fit.png").mkdir()
    code = main(["analyze", str(capture), "--setup", str(setup), "--plot", str(tmp_path / "fit.png")])
    out, err = capsys.readouterr()
    assert code == 3 and out == "" and "is not a regular file" in err

    def full(*args, **kwargs):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", full)  # the disk fills while the plot is written
    code = main(["analyze", str(capture), "--setup", str(setup), "--plot", str(tmp_path / "fit2.png")])
    out, err = capsys.readouterr()
    assert code == 5 and "L " in out and "Safety" in out
    assert err.count("\n") == 1 and "cannot write plot" in err and "fit2.png" in err
    assert not list(tmp_path.glob(".fit2*"))  # no temporary file left
    # a plot into a folder that does not exist is refused before anything is analysed
    (tmp_path / "a_file").write_text("not a folder", encoding="utf-8")
    code = main(["analyze", str(capture), "--setup", str(setup), "--plot", str(tmp_path / "a_file" / "fit.png")])
    out, err = capsys.readouterr()
    assert code == 3 and out == "" and "a_file is not a folder" in err
    # so is one whose folder's name is longer than a file system takes (asking whether it is
    # a folder raised "File name too long", exit 5)
    code = main(["analyze", str(capture), "--setup", str(setup), "--plot", str(tmp_path / ("d" * 300) / "fit.png")])
    out, err = capsys.readouterr()
    assert code == 3 and out == "" and "does not exist" in err and "plot into" in err


def test_a_calibration_file_that_cannot_be_written_is_named(tmp_path: Path) -> None:
    from wavefit.calibration.toml_file import write_toml_whole

    (tmp_path / "a_file").write_text("not a folder", encoding="utf-8")
    with pytest.raises(wavefit.errors.OutputError, match=r"cannot write the file .*a_file/ref\.toml: .*kept"):
        write_toml_whole({"kind": "x"}, tmp_path / "a_file" / "ref.toml")


@pytest.mark.parametrize("setup", [TWO_CHANNELS, SENSE_ONLY], ids=["two channels", "sense only"])
@pytest.mark.parametrize("spread", [0.3, 0.6])
def test_sense_of_noise_on_a_few_codes_is_refused_as_no_step(tmp_path: Path, setup: dict, spread: float) -> None:
    # an open coil (or an unconnected sense probe) on an 8-bit screen: noise of a fraction of a
    # code sits on two to five codes, the two most frequent were read as the levels and every
    # crossing as an edge; the refusals said "no complete edge ... lengthen the record or the
    # period" or "the exponential fit of the edge at ... failed (singular normal matrix)"
    t, drive, _ = _record(seed=11)
    code = 0.4 / 256  # 8 bits over a 0.4 V screen
    noise = np.random.default_rng(5).normal(0.0, spread * code, t.size)
    sense = np.round(noise / code) * code
    with pytest.raises(wavefit.AnalysisRefused, match="the sense channel does not step") as refused:
        wavefit.analyze(_write(tmp_path / "open.csv", t, drive, sense), setup)
    assert "open" in str(refused.value)


def test_a_step_of_three_codes_is_not_taken_for_noise(tmp_path: Path) -> None:
    # the refusal above is for levels one or two codes apart; a coarse but real step is analysed
    # (or refused for what it is), never called an open coil
    t, drive, sense = _record(seed=12)
    code = float(np.ptp(sense)) / 3.2
    coarse = np.round((sense + np.random.default_rng(6).normal(0.0, 0.4 * code, t.size)) / code) * code
    try:
        wavefit.analyze(_write(tmp_path / "coarse.csv", t, drive, coarse), TWO_CHANNELS)
    except wavefit.AnalysisRefused as exc:
        assert "does not step" not in str(exc)


def test_a_sine_given_to_rl_step_is_flagged_as_unchecked() -> None:
    # a 2 kHz sine with no step read as L = 6.2 mH, exit 0, with "39 of 39 edges are followed
    # by less than 5 tau" alone (a review found it): where no edge settles, the warning says
    # that nothing checks the waveform is an exponential
    import pandas as pd

    t = np.arange(10000) * 1e-6
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"t": t, "sense": 1e-3 * np.sin(2 * np.pi * 2e3 * t + 1.0) + 1e-4 * rng.standard_normal(t.size)})
    result = wavefit.analyze(frame, {**SENSE_ONLY, "columns": {"time": "t", "sense": "sense"}})
    assert any("nothing checks that the waveform is an RL step's exponential" in w for w in result.warnings)
