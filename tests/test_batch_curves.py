"""Batch carries curves: each part's curve outputs go to the curves file beside the results file
and into ``--json``; a method that reports only curves runs too; limits apply to scalars only.

External reference: the ngspice transient simulation of the RC circuit of
tests/example_rc_step.py (the netlist's R and C are the truth), so each part's impedance curve
must lie within its expanded uncertainty of |Z(f)| = √(R² + 1/(2π·f·C)²) (series RC network).
The failure tests check what is kept on disk, against the rows written before the failure.
"""
from __future__ import annotations

import csv
import errno
import json
import math
import os
import shutil
from pathlib import Path
from typing import Any, Mapping

import numpy as np
import pytest

import example_rc_step
from spice import needs_ngspice
from test_example_methods import C_TRUE, FREQUENCIES, R_TRUE, rc_step
from wavefit.batch.curves_file import CURVE_COLUMNS, curves_path
from wavefit.cli import main
from wavefit.methods import register
from wavefit.outputs import Scalar

pytestmark = [needs_ngspice, pytest.mark.ngspice]
PARTS = 3


@register
class ExampleRcStepAndImpedance(example_rc_step.ExampleRcImpedance):
    """R and tau as scalars and |Z(f)| as a curve, from one step (tests only)."""

    name = "example-rc-step-and-impedance"
    outputs = {"R": Scalar("ohm"), "tau": Scalar("s"), **example_rc_step.ExampleRcImpedance.outputs}

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        return {**example_rc_step.ExampleRcStep.model(self, x, settings), **super().model(x, settings)}


def true_impedance(f: np.ndarray) -> np.ndarray:
    return np.sqrt(R_TRUE ** 2 + (1.0 / (2 * math.pi * f * C_TRUE)) ** 2)


def lot(tmp_path: Path, method: str, limits: str) -> list[str]:
    folder = tmp_path / "lot"
    folder.mkdir()
    rc_step().to_csv(folder / "rc1.csv", index=False)
    for k in range(2, PARTS + 1):
        shutil.copy(folder / "rc1.csv", folder / f"rc{k}.csv")
    (tmp_path / "setup.toml").write_text(
        f'method = "{method}"\n[columns]\ntime = "t"\ncapacitor = "cap"\n[parts]\ncapacitor = "10 nF ±1%"\n'
        f'[options]\nfrequencies = {FREQUENCIES}\n')
    (tmp_path / "spec.toml").write_text(limits)
    return ["batch", str(folder), "--setup", str(tmp_path / "setup.toml"), "--spec", str(tmp_path / "spec.toml"),
            "--out", str(tmp_path / "out.csv"), "--workers", "1"]


def table(path: Path) -> list[dict[str, str]]:
    with path.open(encoding="utf-8", newline="") as stream:
        return list(csv.DictReader(stream))


def check_curves_against_ngspice(rows: list[dict[str, str]], parts: int) -> None:
    assert len(rows) == parts * len(FREQUENCIES) and list(rows[0]) == list(CURVE_COLUMNS)
    for row in rows:
        assert (row["output"], row["axis"], row["axis_unit"], row["unit"]) == ("Z", "f", "Hz", "ohm")
        truth = true_impedance(np.array([float(row["axis_value"])]))[0]
        assert abs(float(row["value"]) - truth) <= float(row["expanded_uncertainty"]), (row, truth)
        assert float(row["standard_uncertainty"]) < float(row["expanded_uncertainty"])


def test_a_curve_only_method_runs_and_its_curves_are_kept_per_part(tmp_path, capsys):
    argv = lot(tmp_path, "example-rc-impedance", '[decision]\nrule = "guard-band"\n')
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "a pass says only that the part was measured" in text and "curves: 3 parts -> " in text
    assert [row["verdict"] for row in table(tmp_path / "out.csv")] == ["pass"] * PARTS
    curves = table(curves_path(tmp_path / "out.csv"))
    check_curves_against_ngspice(curves, PARTS)

    assert main([*argv, "--plot", str(tmp_path / "lot.png")]) == 3  # no limits: nothing to draw
    assert "the spec has no limits" in capsys.readouterr().err and not (tmp_path / "lot.png").exists()
    assert main([*argv, "--json"]) == 0  # resumed: the curves come back from the file
    payload = json.loads(capsys.readouterr().out)
    assert payload["rows_resumed"] == PARTS and list(payload["curves"]) == [r["file"] for r in table(tmp_path / "out.csv")]
    first = payload["curves"][curves[0]["file"]]["Z"]
    assert first["axis"] == {"name": "f", "unit": "Hz", "values": FREQUENCIES}
    assert first["values"] == [float(r["value"]) for r in curves[:3]]
    assert first["expanded_uncertainty"] == [float(r["expanded_uncertainty"]) for r in curves[:3]]


def test_a_method_with_scalars_and_curves_keeps_both(tmp_path, capsys):
    assert main(lot(tmp_path, "example-rc-step-and-impedance", '[limits]\nR = "1 kohm ±5%"\n')) == 0
    capsys.readouterr()
    rows = table(tmp_path / "out.csv")
    assert [row["verdict"] for row in rows] == ["pass"] * PARTS
    for row in rows:
        assert abs(float(row["R"]) - R_TRUE) <= float(row["R_U"])
    check_curves_against_ngspice(table(curves_path(tmp_path / "out.csv")), PARTS)


@pytest.mark.parametrize("method, valid", [("example-rc-impedance", "none, so give no limits"),
                                           ("example-rc-step-and-impedance", "R, tau")])
def test_a_limit_on_a_curve_is_refused_in_one_line(tmp_path, capsys, method, valid):
    assert main(lot(tmp_path, method, '[limits]\nZ = "<= 2 kohm"\n')) == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "limit for 'Z', a curve" in err and f"scalar quantities only: {valid}" in err
    assert not (tmp_path / "out.csv").exists()


def test_a_failed_curves_write_keeps_earlier_parts_and_the_next_run_completes(tmp_path, monkeypatch, capsys):
    argv = lot(tmp_path, "example-rc-impedance", "")
    real_write, calls = os.write, {"curves": 0}

    def write(fd, data):
        if b",Z,f,Hz," in bytes(data):
            calls["curves"] += 1
            if calls["curves"] == 2:  # the second part's curves: half of them, then a full disk
                real_write(fd, bytes(data)[:len(data) // 2])
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real_write(fd, data)

    monkeypatch.setattr(os, "write", write)
    assert main(argv) == 5
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "cannot write curves file" in err and "its earlier rows are kept" in err
    rows, curves = table(tmp_path / "out.csv"), table(curves_path(tmp_path / "out.csv"))
    assert len(rows) == 1 and {row["file"] for row in curves} == {rows[0]["file"]} and len(curves) == 3
    monkeypatch.undo()
    assert main(argv) == 0
    capsys.readouterr()
    rows, curves = table(tmp_path / "out.csv"), table(curves_path(tmp_path / "out.csv"))
    assert len(rows) == PARTS and len({row["file"] for row in rows}) == PARTS
    check_curves_against_ngspice(curves, PARTS)
    assert [row["file"] for row in curves[::3]] == [row["file"] for row in rows]  # one block per part


def _without_results_line(path: Path, index: int) -> None:
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    del lines[index]
    path.write_text("".join(lines), encoding="utf-8")


def test_curves_of_the_last_part_without_a_results_row_are_cut_off_and_redone(tmp_path, capsys):
    """The state a kill between a part's curves and its results row leaves."""
    argv = lot(tmp_path, "example-rc-impedance", "")
    assert main(argv) == 0
    _without_results_line(tmp_path / "out.csv", -1)
    assert main(argv) == 0
    assert "1 row written, 2 found from earlier runs" in capsys.readouterr().out
    rows, curves = table(tmp_path / "out.csv"), table(curves_path(tmp_path / "out.csv"))
    assert len(rows) == PARTS and len(curves) == PARTS * len(FREQUENCIES)
    assert [row["file"] for row in curves[::3]] == [row["file"] for row in rows]


def test_curves_of_an_earlier_part_without_a_results_row_are_refused_not_removed(tmp_path, capsys):
    argv = lot(tmp_path, "example-rc-impedance", "")
    assert main(argv) == 0
    _without_results_line(tmp_path / "out.csv", 1)
    before = curves_path(tmp_path / "out.csv").read_bytes()
    capsys.readouterr()
    assert main(argv) == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "holds curves of parts with no row in the results file (1, first" in err
    assert curves_path(tmp_path / "out.csv").read_bytes() == before


def test_the_curves_file_in_the_input_folder_is_no_capture(tmp_path, capsys):
    argv = lot(tmp_path, "example-rc-impedance", "")
    argv[argv.index("--out") + 1] = str(tmp_path / "lot" / "out.csv")
    assert main(argv) == 0 and main(argv) == 0
    capsys.readouterr()
    rows = table(tmp_path / "lot" / "out.csv")
    assert sorted(Path(row["file"]).name for row in rows) == [f"rc{k}.csv" for k in range(1, PARTS + 1)]
