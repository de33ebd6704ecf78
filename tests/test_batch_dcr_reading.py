"""The ohmmeter's DCR reading in batch: carried by the capture's preamble, judged against the
spec's DCR limit with the reading's own uncertainty.

Expected verdicts follow from ILAC-G8:09/2019 §4.2.3 (guard band w = U: pass inside by more
than w, conditional pass inside within w, conditional fail outside within w, fail outside by
more than w) and §4.2.1 (simple acceptance), with U = 2·u (JCGM 100:2008, 6.3.3) and u from
the written reading: ``±a k=2`` gives u = a/2 (GUM 4.3.3), ``±a`` a bound, u = a/√3 (GUM 4.3.7).
The readings are written in the tests; no value serves as a reference.
"""
from __future__ import annotations

import math

import pytest

from wavefit.batch.dcr_reading import dcr_reading, reading_from_text
from wavefit.batch.decision import CONDITIONAL_FAIL, CONDITIONAL_PASS, ERROR, FAIL, PASS
from wavefit.batch.results_file import result_columns
from wavefit.batch.rows import RowMaker
from wavefit.batch.spec import parse_spec
from wavefit.errors import AnalysisRefused, SetupError
from wavefit.io import read_capture
from wavefit.provenance import capture_record
from wavefit.results import AnalysisResult, QuantityResult
from wavefit.setup import load_setup

SETUP = {"method": "rl-step", "columns": {"sense": "CH2", "drive": "CH1"}, "parts": {"sense_resistor": "10 ohm"}}
GUARD = parse_spec({"limits": {"DCR": "<= 0.15 ohm"}, "decision": {"rule": "guard-band"}})
SIMPLE = parse_spec({"limits": {"DCR": "<= 0.15 ohm"}})
FITTED_R = QuantityResult("R", 0.2, "ohm", 0.1, 0.2, 2.0)


def capture_file(folder, name: str, preamble: list[str]):
    """A small capture whose preamble holds ``preamble`` lines before the table."""
    lines = preamble + ["Time (s),CH1 (V),CH2 (V)"] + [f"{k * 1e-6!r},{k % 2},{0.1 * (k % 2)}" for k in range(32)]
    path = folder / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return str(path)


def read_and_report(path: str, setup) -> AnalysisResult:
    """Stands in for the fit: the capture is read by the real reader (its preamble kept in the
    provenance, as wavefit.analyze keeps it) and a fixed fitted R is reported."""
    capture = read_capture(path)
    return AnalysisResult("rl-step", path, {"R": FITTED_R}, {}, {},
                          provenance={"captures": [capture_record(path, capture)]})


def maker(spec) -> RowMaker:
    return RowMaker(load_setup(SETUP), spec, ("L", "R"), "0" * 64, "0" * 64, "test", read_and_report,
                    reads_dcr=True)


# upper limit 0.15 Ω, U = 0.004 Ω (±0.004 ohm k=2): pass below 0.146 Ω, fail above 0.154 Ω (§4.2.3)
@pytest.mark.parametrize("reading, verdict", [
    ("0.120 ohm ±0.004 ohm k=2", PASS),
    ("0.148 ohm ±0.004 ohm k=2", CONDITIONAL_PASS),
    ("150 mohm ±4 mohm k=2", CONDITIONAL_PASS),       # on the limit counts as inside
    ("0.152 ohm ±0.004 ohm k=2", CONDITIONAL_FAIL),
    ("0.160 ohm ±0.004 ohm k=2", FAIL),
    # a bound ±3 mΩ: u = 3/√3 mΩ, U = 3.46 mΩ > the 3 mΩ margin: conditional pass
    ("0.147 ohm ±0.003 ohm", CONDITIONAL_PASS),
    ("0.146 ohm u=1 mohm", PASS),                      # U = 2 mΩ < 4 mΩ margin
])
def test_guard_band_verdicts_on_the_reading(tmp_path, reading, verdict):
    row = maker(GUARD)(capture_file(tmp_path, "p.csv", [f"dcr,{reading}"]))
    assert row["verdict"] == verdict, row["message"]
    expected = reading_from_text(reading)
    assert row["DCR"] == expected.value and row["DCR_U"] == pytest.approx(expected.expanded_uncertainty)
    assert row["R"] == FITTED_R.value  # the fitted R stays beside the reading


@pytest.mark.parametrize("reading, verdict", [
    ("0.148 ohm ±0.004 ohm k=2", PASS), ("0.150 ohm ±0.004 ohm k=2", PASS), ("0.152 ohm ±0.004 ohm k=2", FAIL),
])
def test_simple_acceptance_on_the_reading(tmp_path, reading, verdict):  # ILAC-G8 §4.2.1
    assert maker(SIMPLE)(capture_file(tmp_path, "p.csv", [f"DCR,{reading}"]))["verdict"] == verdict


def test_reading_uncertainty_follows_the_gum():
    bound = reading_from_text("0.147 ohm ±0.003 ohm")           # GUM 4.3.7: u = a/√3
    assert bound.standard_uncertainty == pytest.approx(0.003 / math.sqrt(3))
    stated = reading_from_text("0.147 ohm ±0.004 ohm k=2")      # GUM 4.3.3: u = U/k
    assert stated.expanded_uncertainty == pytest.approx(0.004)


@pytest.mark.parametrize("preamble, message", [
    ([], "no 'dcr' preamble line"),
    (["dcr,0.12 ohm 1"], "'dcr' preamble line"),
])
def test_missing_or_unreadable_reading_is_an_error_row(tmp_path, preamble, message):
    row = maker(GUARD)(capture_file(tmp_path, "p.csv", preamble))
    assert row["verdict"] == ERROR and message in row["message"]
    assert "\n" not in row["message"]


def test_captures_of_one_part_with_different_readings_are_refused(tmp_path):
    paths = [capture_file(tmp_path, "a.csv", ["dcr,0.12 ohm"]), capture_file(tmp_path, "b.csv", ["dcr,0.13 ohm"])]
    result = AnalysisResult("lc-sweep", paths, {}, {}, {},
                            provenance={"captures": [capture_record(p, read_capture(p)) for p in paths]})
    with pytest.raises(AnalysisRefused, match="different dcr readings"):
        dcr_reading(result)


def test_results_columns_put_the_reading_beside_r():
    columns = result_columns(("L", "R", "tau"), "DCR")
    assert columns[columns.index("R"):columns.index("R") + 4] == ("R", "R_U", "DCR", "DCR_U")
    assert "DCR" not in result_columns(("L", "R", "tau"))  # unchanged without a DCR limit


def test_spec_takes_a_dcr_limit_for_any_method_but_no_other_unknown_name():
    GUARD.check_quantities(("L", "R"), "rl-step", readings=("DCR",))
    with pytest.raises(SetupError, match="DCR"):
        GUARD.check_quantities(("L", "R"), "rl-step")


def test_batch_run_judges_the_readings_of_real_captures(tmp_path):
    """`wavefit batch` end to end on captures of the sample lot with a `dcr` line added; only DCR
    is limited, so each verdict follows from its reading alone (ILAC-G8 §4.2.3, w = U = 2 mΩ)."""
    import csv
    import gzip
    from pathlib import Path

    from wavefit.cli import main

    lot = Path(__file__).resolve().parent.parent / "sample_data" / "lot_0412"
    readings = {"part01.csv": ("0.110 ohm ±2 mohm k=2", PASS), "part02.csv": ("0.119 ohm ±2 mohm k=2",
                CONDITIONAL_PASS), "part03.csv": ("0.125 ohm ±2 mohm k=2", FAIL)}
    folder = tmp_path / "lot"
    folder.mkdir()
    for name, (reading, _) in readings.items():
        body = gzip.decompress((lot / f"{name}.gz").read_bytes()).decode("utf-8")
        (folder / name).write_text(f"dcr,{reading}\n{body}", encoding="utf-8")
    (tmp_path / "spec.toml").write_text('[limits]\nDCR = "<= 0.12 ohm"\n[decision]\nrule = "guard-band"\n',
                                        encoding="utf-8")
    out = tmp_path / "results.csv"
    code = main(["batch", str(folder), "--setup", str(lot / "setup.toml"), "--spec", str(tmp_path / "spec.toml"),
                 "--out", str(out), "--workers", "1", "--json"])
    assert code == 0
    with out.open(encoding="utf-8", newline="") as stream:
        rows = {Path(row["file"]).name: row for row in csv.DictReader(stream)}
    for name, (reading, verdict) in readings.items():
        assert rows[name]["verdict"] == verdict, rows[name]["message"]
        assert float(rows[name]["DCR"]) == reading_from_text(reading).value
        assert rows[name]["R"] != ""  # the fitted R beside it
