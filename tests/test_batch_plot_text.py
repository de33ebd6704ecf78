"""Plots take names literally: `$` (matplotlib's formula marker) and control characters in file,
lot and column names draw as text, for `wavefit batch --plot` and `wavefit analyze --plot`.

Each name below is a formula matplotlib's mathtext parser refuses (an unfinished \\frac, a bare
superscript); drawn as mathtext, the save raised ValueError after the rows had been written.
"""
from __future__ import annotations

import numpy as np
import pytest

from wavefit.batch.command import run
from wavefit.report.figure_file import FigureFileError
from wavefit.report.lot_plot import MAX_BINS, LotSeries, _bins, save_lot_plot
from wavefit.report.plot import save_plot
from wavefit.results import AnalysisResult, LinePlot, QuantityResult, TracePlot

from test_batch_fakes import delayed_analyse, write_lot
from test_batch_runner import batch_args

PNG = b"\x89PNG\r\n\x1a\n"
FORMULAS = ["$\\frac$", "x$^$y", "$a$b$c$\x1b[2J", "lot $\\undefinedcommand{$ \u202e"]


@pytest.mark.parametrize("name", FORMULAS)
def test_batch_plot_with_formula_like_lot_name(tmp_path, name):
    write_lot(tmp_path, [95.0, 100.0, 104.0])
    png = tmp_path / "p$l$ot.png"
    assert run(batch_args(tmp_path, "--workers", "1", "--plot", str(png), "--lot", name),
               analyse=delayed_analyse) == 0
    assert png.read_bytes()[:8] == PNG


def test_batch_plot_title_from_a_formula_like_results_file_name(tmp_path):
    write_lot(tmp_path, [95.0, 100.0, 104.0])
    args = batch_args(tmp_path, "--workers", "1", "--plot", str(tmp_path / "lot.png"))
    args.out = str(tmp_path / "r$\\frac$s.csv")          # the default lot name is this file's stem
    assert run(args, analyse=delayed_analyse) == 0
    assert (tmp_path / "lot.png").read_bytes()[:8] == PNG


def result_with(plot_data, source: str) -> AnalysisResult:
    quantities = {"L": QuantityResult("L", 1e-4, "H", 1e-6, 2e-6, 2.0)}
    return AnalysisResult("rl-step", source, quantities, {}, {}, (), plot_data=plot_data)


@pytest.mark.parametrize("name", FORMULAS)
def test_analyze_plot_with_formula_like_file_and_column_names(tmp_path, name):
    t = np.linspace(0.0, 1e-5, 200)
    trace = TracePlot(t, ((f"CH{name}", "V$^$", np.exp(-t / 2e-6), np.exp(-t / 2e-6)),))
    png = tmp_path / "a.png"
    save_plot(result_with(trace, str(tmp_path / f"cap{name}.csv")), png)
    assert png.read_bytes()[:8] == PNG
    line = LinePlot(np.arange(1.0, 4.0), np.arange(1.0, 4.0), 0.1, 0.1, 1.0, 0.0, f"x {name}", f"y {name}")
    save_plot(result_with(line, f"cap{name}.csv"), png)
    assert png.read_bytes()[:8] == PNG


def test_plot_in_a_format_that_cannot_be_written_is_refused_before_any_analysis(tmp_path):
    write_lot(tmp_path, [95.0, 100.0])
    with pytest.raises(FigureFileError, match="suffix of an image format") as caught:
        run(batch_args(tmp_path, "--workers", "1", "--plot", str(tmp_path / "lot.csv")), analyse=delayed_analyse)
    assert caught.value.exit_code == 3
    assert not (tmp_path / "out.csv").exists()


def test_histogram_bins_stay_few_when_one_value_lies_far_off():
    # 50 values agreeing to 14 digits and one far off: the Freedman–Diaconis width alone asks for ~1e16 bars
    values = [1e-4 * (1 + k * 1e-14) for k in range(50)] + [1.0]
    assert _bins(values) == MAX_BINS
    assert _bins([1e-4] * 5) == 1 and _bins(list(np.linspace(0.0, 1.0, 1000))) < MAX_BINS


def test_lot_plot_keeps_an_earlier_file_until_the_new_one_is_whole(tmp_path, monkeypatch):
    png = tmp_path / "lot.png"
    png.write_bytes(b"\x89PNG\r\n\x1a\n earlier")
    series = [LotSeries("L", "H", [1e-4, 1.1e-4], 0.9e-4, 1.1e-4)]

    def interrupted(self, *args, **kwargs):
        raise KeyboardInterrupt

    from matplotlib.figure import Figure
    monkeypatch.setattr(Figure, "savefig", interrupted)
    with pytest.raises(KeyboardInterrupt):
        save_lot_plot(series, png, "lot")
    assert png.read_bytes() == b"\x89PNG\r\n\x1a\n earlier" and [p.name for p in tmp_path.iterdir()] == ["lot.png"]
    monkeypatch.undo()
    save_lot_plot(series, png, "lot")
    assert png.read_bytes()[:8] == PNG
