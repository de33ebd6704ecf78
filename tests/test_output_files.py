"""Outputs never replace an input, a device, a FIFO or a link, and are written through a new
temporary file (wavefit/output_files.py). Each case was found by a fault campaign: the file
named was replaced, exit 0."""
from __future__ import annotations

import os
from pathlib import Path

import pytest

from wavefit.cli import main

SETUP = 'method = "rl-step"\n[columns]\ndrive = "drive"\nsense = "sense"\n[parts]\nsense_resistor = "10 ohm"\n'


def _files(tmp_path: Path) -> tuple[Path, Path]:
    capture = tmp_path / "capture.png"  # the reader takes a capture under any name
    capture.write_text("time,drive,sense\n0,0,0\n1e-6,1,0.1\n", encoding="utf-8")
    setup = tmp_path / "setup.toml"
    setup.write_text(SETUP, encoding="utf-8")
    return capture, setup


def _refused(args: list[str], capsys) -> str:
    code = main(args)
    out, err = capsys.readouterr()
    assert code == 3 and out == "" and err.count("\n") == 1
    return err


def test_a_plot_may_not_be_an_input_or_other_than_a_regular_file(tmp_path, capsys):
    capture, setup = _files(tmp_path)
    before = capture.read_bytes()
    err = _refused(["analyze", str(capture), "--setup", str(setup), "--plot", str(capture)], capsys)
    assert "holds no PNG picture" in err and capture.read_bytes() == before
    # the second capture's plot is FILE-2: checked against the inputs as well
    second = tmp_path / "fit-2.png"
    second.write_bytes(before)
    err = _refused(["analyze", str(capture), str(second), "--setup", str(setup), "--plot", str(tmp_path / "fit.png")],
                   capsys)
    assert "fit-2.png is the input" in err and second.read_bytes() == before
    fifo = tmp_path / "pipe.png"
    os.mkfifo(fifo)
    link = tmp_path / "link.png"
    link.symlink_to(tmp_path / "elsewhere.png")
    for target in (fifo, link):
        err = _refused(["analyze", str(capture), "--setup", str(setup), "--plot", str(target)], capsys)
        assert "is not a regular file" in err
    assert fifo.is_fifo() and link.is_symlink()


@pytest.mark.parametrize("which", ["capture", "setup", "channels file", "reference file"])
def test_a_calibration_may_not_overwrite_its_inputs(tmp_path, capsys, which):
    capture, setup = _files(tmp_path)
    channels, reference = tmp_path / "channels.toml", tmp_path / "reference.toml"
    channels.write_text("# a channel comparison\n", encoding="utf-8")
    reference.write_text("# a reference substitution\n", encoding="utf-8")
    setup.write_text(SETUP + f'[calibration]\nchannels = "{channels.name}"\nreference = "{reference.name}"\n',
                     encoding="utf-8")
    target = {"capture": capture, "setup": setup, "channels file": channels, "reference file": reference}[which]
    before = target.read_bytes()
    commands = {"reference": ["calibrate", "reference", str(capture), "--setup", str(setup), "--part", "L = 470 uH ±0.05%"],
                "channels": ["calibrate", "channels", str(capture), "--setup", str(setup)]}
    for name, command in commands.items():
        code = main([*command, "--out", str(target)])
        _, err = capsys.readouterr()
        # each command may renew the calibration file of its own kind (the procedure asks for it),
        # which it does not read; every other input is refused before anything is read
        renews = (name, which) in (("reference", "reference file"), ("channels", "channels file"))
        assert ("is the input" in err) != renews and code == 3 and target.read_bytes() == before


def test_a_file_is_written_through_a_new_temporary_never_an_existing_name(tmp_path):
    # a link planted at the fixed name OUT.partial made a calibration write into its target
    from wavefit.calibration.toml_file import write_toml_whole

    victim = tmp_path / "victim.txt"
    victim.write_text("precious", encoding="utf-8")
    (tmp_path / "out.toml.partial").symlink_to(victim)
    write_toml_whole({"kind": "test"}, tmp_path / "out.toml")
    assert victim.read_text(encoding="utf-8") == "precious"
    assert (tmp_path / "out.toml").read_text(encoding="utf-8").startswith('kind = "test"')
    assert {p.name for p in tmp_path.iterdir()} == {"victim.txt", "out.toml.partial", "out.toml"}


def _sample_run(env: dict | None = None, **kwargs):
    import subprocess
    import sys

    samples = Path(__file__).resolve().parent.parent / "sample_data"
    return subprocess.run([sys.executable, "-m", "wavefit.cli", "analyze", str(samples / "choke_step.csv"),
                           "--setup", str(samples / "choke_step.toml"), "--no-budget"],
                          env={**os.environ, **(env or {})}, capture_output="stdout" not in kwargs,
                          **kwargs)


def test_a_terminal_that_cannot_show_the_units_gets_escapes_not_a_traceback():
    # under an ASCII or Latin-1 locale the text report's Ω, µ and ± ended the run in a
    # UnicodeEncodeError traceback (exit 1) before the plot was written
    run = _sample_run({"PYTHONIOENCODING": "ascii"})
    out, err = run.stdout.decode("ascii"), run.stderr.decode("ascii")
    assert run.returncode == 0 and "Traceback" not in err and "\\xb5H" in out


def test_a_closed_standard_output_is_refused_in_one_line():
    # with stdout closed the results were lost with exit 0, or a traceback
    import subprocess

    run = _sample_run(stdout=None, stderr=subprocess.PIPE, preexec_fn=lambda: os.close(1))
    err = run.stderr.decode("utf-8")
    assert run.returncode == 5 and err.count("\n") == 1 and "standard output is closed" in err


def test_a_file_name_that_is_not_utf8_is_written_escaped(tmp_path):
    # a capture named with bytes that are not UTF-8 reaches the calibration file as text with
    # lone surrogates: tomli_w failed with a traceback and the temporary file was left behind
    from wavefit.calibration.toml_file import write_toml_whole

    name = os.fsdecode(b"comp\xff.csv")
    write_toml_whole({"capture": name}, tmp_path / "ch.toml")
    assert (tmp_path / "ch.toml").read_text(encoding="utf-8") == 'capture = "comp\\\\xff.csv"\n'
    assert [p.name for p in tmp_path.iterdir()] == ["ch.toml"]


def test_running_out_of_memory_is_one_line(tmp_path, capsys, monkeypatch):
    # a MemoryError while a capture was read (400 million rows in a 4.6 MB gzip file) ended in a
    # 42-line traceback, not the one-line refusal the README promises
    import wavefit.io

    def exhausted(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr(wavefit.io, "read_capture", exhausted)
    capture, _ = _files(tmp_path)
    code = main(["inspect", str(capture)])
    out, err = capsys.readouterr()
    assert code == 4 and out == "" and err.count("\n") == 1 and "not enough memory" in err


def test_sigterm_while_a_plot_is_written_leaves_no_temporary_file(tmp_path, capsys, monkeypatch):
    # SIGTERM ended analyze --plot with no message and left its hidden .partial.png files
    import signal

    import matplotlib.figure

    samples = Path(__file__).resolve().parent.parent / "sample_data"

    def terminated_while_saving(*args, **kwargs):
        os.kill(os.getpid(), signal.SIGTERM)

    previous = signal.getsignal(signal.SIGTERM)
    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", terminated_while_saving)
    try:
        code = main(["analyze", str(samples / "choke_step.csv"), "--setup", str(samples / "choke_step.toml"),
                     "--plot", str(tmp_path / "fit.png")])
    finally:
        signal.signal(signal.SIGTERM, previous)
    _, err = capsys.readouterr()
    assert code == 143 and err.strip().endswith("wavefit: terminated")
    assert list(tmp_path.iterdir()) == []


def test_a_name_too_long_for_its_folder_is_refused_before_any_analysis(tmp_path, capsys):
    # a plot or results name near the file system's limit failed only after the analysis (after a
    # whole lot, for batch) as "cannot write plot …": the temporary or lock file beside it is longer
    capture, setup = _files(tmp_path)
    for long_name in ("N" * 245 + ".png", "N" * 300 + ".png"):  # the second too long to look up (exit 5)
        err = _refused(["analyze", str(capture), "--setup", str(setup), "--plot", str(tmp_path / long_name)], capsys)
        assert "the file name is too long" in err
    assert list(tmp_path.glob("NNN*")) == []


def test_a_plot_name_holding_no_picture_is_not_overwritten(tmp_path):
    # batch drops the run's own files from the lot, so a capture saved as part2.png and named as
    # --plot too was left out of the lot and then overwritten by the lot's plot
    from wavefit.report.figure_file import FigureFileError, check_figure_path

    capture = tmp_path / "part2.png"
    capture.write_text("time,drive,sense\n0,0,0\n", encoding="utf-8")
    with pytest.raises(FigureFileError, match="holds no PNG picture"):
        check_figure_path(capture)
    earlier = tmp_path / "lot.png"
    earlier.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(32))   # an earlier plot is replaced
    check_figure_path(earlier)
    (tmp_path / "empty.svg").write_bytes(b"")
    check_figure_path(tmp_path / "empty.svg")
