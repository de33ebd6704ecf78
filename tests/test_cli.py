"""Command-line contract: exit codes, one-line errors, JSON of inspect."""
import json
import subprocess
import sys

import numpy as np
import pytest

from wavefit.cli import main


def run(*args):
    proc = subprocess.run([sys.executable, "-m", "wavefit.cli", *args], capture_output=True, text=True)
    return proc.returncode, proc.stdout, proc.stderr


@pytest.fixture
def capture_file(tmp_path):
    t = np.arange(200) * 1e-6
    path = tmp_path / "c.csv"
    lines = ["Time (s),CH1 (mV)"] + [f"{a:.9e},{1000 * np.sin(2e4 * a):.6f}" for a in t]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_version():
    code, out, _ = run("--version")
    assert code == 0 and out.startswith("wavefit ")


def test_no_command_is_usage_error():
    code, _, err = run()
    assert code == 2 and "usage" in err


def test_unknown_option_is_usage_error():
    code, _, _ = run("analyze", "--frobnicate")
    assert code == 2


@pytest.mark.parametrize("args", [("analyze", "--frobnicate"), ("analyze", "x.csv"), ("frobnicate",),
                                  ("analyze", "x.csv", "--setup", "x.toml", "--json", "--csv"),
                                  ("analyze", "x.csv", "--setup", "x.toml", "--sample-interval", "-1e-9")])
def test_a_usage_error_is_one_line(args):
    # argparse printed its whole usage block before the error (six lines for analyze); every
    # error is one line that says what was found, here with where to read the usage
    code, out, err = run(*args)
    assert code == 2 and out == "" and err.count("\n") == 1 and "error:" in err and "--help" in err


def test_json_and_csv_together_is_usage_error(capture_file):
    # one output format per run: a run asked for both would silently print only one
    code, out, err = run("analyze", str(capture_file), "--setup", "x.toml", "--json", "--csv")
    assert code == 2 and out == "" and "not allowed with argument" in err


def test_inspect_json(capture_file):
    code, out, err = run("inspect", str(capture_file), "--json")
    assert code == 0, err
    info = json.loads(out)
    assert info["rows"] == 200
    assert info["sample_interval_s"] == pytest.approx(1e-6)
    assert info["time_column"] == "Time (s)"
    col = info["columns"][0]
    assert col["unit"] == "V"
    assert col["max"] == pytest.approx(np.max(1000 * np.sin(2e4 * np.arange(200) * 1e-6)) / 1000, rel=1e-6)


def test_missing_setup_file_is_exit_3_one_line(capture_file, tmp_path):
    code, out, err = run("analyze", str(capture_file), "--setup", str(tmp_path / "none.toml"))
    assert code == 3
    assert err.count("\n") == 1 and "setup file" in err and "none.toml does not exist" in err
    assert "Traceback" not in err


def test_unknown_method_is_exit_3(capture_file, tmp_path):
    setup = tmp_path / "s.toml"
    setup.write_text('method = "no-such-method"\n', encoding="utf-8")
    code, _, err = run("analyze", str(capture_file), "--setup", str(setup))
    assert code == 3 and "unknown method 'no-such-method'" in err


def test_unreadable_capture_is_exit_3(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_bytes(b"\x00\x01\x02binary\xff" * 50)
    assert main(["inspect", str(bad)]) == 3
    err = capsys.readouterr().err
    assert err.startswith("wavefit: error:") and err.count("\n") == 1


def _rl_setup(tmp_path, sense="CH1"):
    setup = tmp_path / "rl.toml"
    setup.write_text(f'method = "rl-step"\n[columns]\nsense = "{sense}"\n[parts]\nsense_resistor = "10 ohm"\n'
                     'source_resistance = "50 ohm"\ndut_resistance = "1 ohm"\n', encoding="utf-8")
    return setup


def test_missing_column_named_in_setup_is_exit_3(capture_file, tmp_path):
    code, _, err = run("analyze", str(capture_file), "--setup", str(_rl_setup(tmp_path, "CH9")))
    assert code == 3 and "no column 'CH9'" in err and err.count("\n") == 1


@pytest.mark.parametrize("content", [b"", b"Time (s),CH1 (V)\n", b"\xff\xfe\x00\x00binary\x00" * 40,
                                     b"t,CH1\n0,1\n1e-6,2\n5e-7,3\n" + b"".join(b"%d,1\n" % k for k in range(2, 40)),
                                     b"Time (s),CH1 (V)\n" + b"".join(b"%g,%s\n" % (k * 1e-6, b"x" if k == 7 else b"1")
                                                                     for k in range(40))])
def test_broken_captures_give_one_line_and_non_zero_exit(tmp_path, content):
    bad = tmp_path / "bad.csv"
    bad.write_bytes(content)
    code, out, err = run("analyze", str(bad), "--setup", str(_rl_setup(tmp_path)), "--json")
    assert code == 3, err
    assert out == "" and err.count("\n") == 1 and "Traceback" not in err


def test_a_column_with_text_is_left_out_until_a_setup_maps_it(tmp_path):
    # a word in one cell of a channel the setup does not use ('overflow' in an auxiliary column)
    # does not stop the file being read; mapping that column is refused, naming the cell
    t = np.arange(400) * 1e-6
    rows = [f"{a:.9e},{np.sin(2e4 * a):.6f},{'overflow' if k == 300 else f'{np.cos(2e4 * a):.6f}'}"
            for k, a in enumerate(t)]
    path = tmp_path / "aux.csv"
    path.write_text("\n".join(["Time (s),CH1 (V),AUX (V)", *rows]) + "\n", encoding="utf-8")
    code, out, err = run("inspect", str(path), "--json")
    assert code == 0, err
    info = json.loads(out)
    assert [c["header"] for c in info["columns"]] == ["CH1 (V)"]
    assert info["left_out"][0]["header"] == "AUX (V)" and "line 302" in info["left_out"][0]["reason"]
    code, out, err = run("inspect", str(path))
    assert code == 0 and "'AUX (V)'                left out" in out.splitlines()[2]
    code, out, err = run("analyze", str(path), "--setup", str(_rl_setup(tmp_path, "AUX")), "--json")
    assert code == 3 and out == "" and err.count("\n") == 1
    assert "line 302: found 'overflow' where a number was expected" in err


def test_several_captures_keep_going_and_report_the_worst(capture_file, tmp_path):
    flat = tmp_path / "flat.csv"
    flat.write_text("Time (s),CH1 (V)\n" + "".join(f"{k * 1e-6:g},0.5\n" for k in range(100)), encoding="utf-8")
    code, _, err = run("analyze", str(tmp_path / "missing.csv"), str(flat), "--setup", str(_rl_setup(tmp_path)))
    assert code == 4  # the flat capture has no transition (4) and is worse than the missing file (3)
    assert err.count("\n") == 2
    flat_line = next(line for line in err.splitlines() if "flat.csv" in line)
    assert flat_line.count("flat.csv") == 1, flat_line  # was named twice


def test_a_capture_error_names_the_file_once_among_several(capture_file, tmp_path):
    binary = tmp_path / "binary.csv"
    binary.write_bytes(b"a\x00b\x00c\x00" * 10)
    setup = tmp_path / "ring.toml"
    setup.write_text('method = "lc-ring"\n[columns]\ntank = "CH1"\n[parts]\ntank_capacitor = "10 nF"\n', encoding="utf-8")
    code, out, err = run("analyze", str(capture_file), str(binary), "--setup", str(setup))
    line = next(x for x in err.splitlines() if "binary.csv" in x)
    assert line.count("binary.csv") == 1 and "looks binary" in line


def test_control_characters_never_reach_the_terminal(tmp_path):
    # a name, a header and a preamble value carrying terminal controls (ECMA-48 ESC sequences,
    # a right-to-left override U+202E); shown escaped, never raw
    name = tmp_path / "lot\x1b[2J\u202eA.csv"
    t = np.arange(400) * 1e-6
    rows = [f"{a:.9e},{np.sin(2e4 * a):.6f}" for a in t]
    name.write_text("\n".join(["Probe,\x1b]0;title\x07 x10", "Time (s),CH\x1bc1 (V)", *rows]) + "\n", encoding="utf-8")
    setup = tmp_path / "s.toml"
    setup.write_text('method = "lc-ring"\n[columns]\ntank = 1\n[parts]\ntank_capacitor = "10 nF"\n', encoding="utf-8")
    for argv in (["inspect", str(name)], ["analyze", str(name), "--setup", str(setup)]):
        code, out, err = run(*argv)
        for text in (out, err):
            assert "\x1b" not in text and "\u202e" not in text and "\x07" not in text
        assert "\\x1b" in out + err
