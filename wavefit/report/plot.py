"""Pictures of a result: capture, fitted model and residuals, or a line fit; and every curve output.

Channel labels come from the capture's column headers and the title from its file
name: they are drawn as literal text (:mod:`.figure_file`).
"""
from __future__ import annotations

import math
import os

import numpy as np

from ..errors import WavefitError
from ..write_errors import write_failed
from ..results import AnalysisResult, CurveResult, LinePlot, TracePlot
from .figure_file import literal_text, save_figure
from .safe_text import visible


def save_plot(result: AnalysisResult, path: str | os.PathLike) -> None:
    """Draw the result into ``path`` (format from the extension, e.g. PNG): see :func:`draw`."""
    with literal_text() as plt:
        fig = draw(result, plt)
        try:
            save_figure(fig, path, dpi=110)
        except OSError as exc:
            raise write_failed("plot", path, exc) from None


def draw(result: AnalysisResult, plt):
    """The result's titled figure, made by ``plt.figure`` (pyplot, or a maker of figures that
    pyplot does not manage, as ``result.plot()`` uses): the method's plot layers
    (``result.plot_data``: capture, fitted model and residuals, or a line fit), then one panel
    per curve output, drawn from its declaration (value ± U against its axis)."""
    data = result.plot_data
    layers = data if isinstance(data, (TracePlot, LinePlot)) else None
    if layers is None and not result.curves:
        raise WavefitError(f"method {result.method!r} has nothing to plot")
    ratios = _layer_ratios(layers) + [3] * len(result.curves)
    fig = plt.figure(figsize=(9, 1.1 * sum(ratios) + 1.5))
    grid = fig.add_gridspec(len(ratios), 1, height_ratios=ratios)
    row = 0
    if isinstance(layers, TracePlot):
        row = _trace_panels(fig, grid, layers)
    elif isinstance(layers, LinePlot):
        _line_panel(fig.add_subplot(grid[0]), layers)
        row = 1
    for k, curve in enumerate(result.curves.values()):
        _curve_panel(fig.add_subplot(grid[row + k]), curve)
    title = result.source if isinstance(result.source, str) else f"{len(result.source)} captures"
    fig.suptitle(visible(f"{result.method}: {os.path.basename(str(title))}"))
    fig.tight_layout(rect=(0, 0, 1, 0.96))
    return fig


def _layer_ratios(layers: TracePlot | LinePlot | None) -> list[int]:
    """The relative heights of the panels the plot layers take."""
    if isinstance(layers, TracePlot):
        return [3, 1] * len(layers.channels)
    return [4] if isinstance(layers, LinePlot) else []


def _trace_panels(fig, grid, data: TracePlot) -> int:
    """Recorded samples and fitted model above their residuals, one pair per channel; returns the
    number of grid rows used."""
    t = np.asarray(data.time)
    scale, unit = _time_scale(t)
    axes = []
    for k, (label, yunit, y, model) in enumerate(data.channels):
        label, yunit = visible(label), visible(yunit)
        ax = fig.add_subplot(grid[2 * k], sharex=axes[0] if axes else None)
        axr = fig.add_subplot(grid[2 * k + 1], sharex=ax)
        axes += [ax, axr]
        y, model = np.asarray(y, dtype=float), np.asarray(model, dtype=float)
        # samples as dots, or beyond MOST_DRAWN as the strokes between each run's lowest and highest
        dots = {"marker": ".", "linestyle": "none"} if y.size <= MOST_DRAWN else {"linestyle": "-", "lw": 0.4}
        ax.plot(*_envelope(t * scale, y), ms=1.5, color="0.45", label=f"{label} recorded", **dots)
        ax.plot(*_envelope(t * scale, model), "-", lw=1.2, color="tab:red", label="fitted model")
        ax.set_ylabel(f"{label} ({yunit})")
        ax.legend(loc="best", fontsize=8)
        axr.plot(*_envelope(t * scale, y - model), ms=1.0, color="tab:blue", **dots)
        axr.axhline(0.0, color="k", lw=0.6)
        axr.set_ylabel("residual")
    for ax in axes[:-1]:
        ax.tick_params(labelbottom=False)
    axes[-1].set_xlabel(f"time ({unit})")
    return len(axes)


#: Samples drawn at most per trace: more are drawn as the lowest and highest of each run of
#: samples (a scope's peak-detect display, common practice), which a figure 1,000 pixels wide
#: shows alike; matplotlib took over 100 s for the 10⁷ samples of a long record.
MOST_DRAWN = 20_000


def _envelope(t: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(t, y)``, or for more than :data:`MOST_DRAWN` samples the lowest and highest sample of
    each run of samples, with their instants, in time order (NaN runs stay NaN: the model is
    NaN outside its window)."""
    if y.size <= MOST_DRAWN:
        return t, y
    run = int(math.ceil(y.size / (MOST_DRAWN // 2)))
    n = (y.size // run) * run
    rows = y[:n].reshape(-1, run)
    filled = np.isfinite(rows).any(axis=1)
    low = np.where(filled, np.argmin(np.where(np.isfinite(rows), rows, np.inf), axis=1), 0)
    high = np.where(filled, np.argmax(np.where(np.isfinite(rows), rows, -np.inf), axis=1), 0)
    picks = np.sort(np.stack([low, high], axis=1), axis=1) + (np.arange(rows.shape[0]) * run)[:, None]
    picks = np.unique(np.concatenate([picks.ravel(), np.arange(n, y.size)]))  # the last short run whole
    return t[picks], y[picks]


def _line_panel(ax, data: LinePlot) -> None:
    x, y = np.asarray(data.x), np.asarray(data.y)
    ax.errorbar(x, y, xerr=data.x_err, yerr=data.y_err, fmt="o", color="k", capsize=3, label="captures")
    span = np.linspace(min(0.0, x.min()), x.max() * 1.05, 50)
    ax.plot(span, data.intercept + data.slope * span, "-", color="tab:red", label="fitted line")
    ax.set_xlabel(visible(data.x_label))
    ax.set_ylabel(visible(data.y_label))
    ax.legend()


def _curve_panel(ax, curve: CurveResult) -> None:
    """A curve output: its values with the expanded uncertainty as error bars, against its axis."""
    x, y = np.asarray(curve.axis_values, dtype=float), np.asarray(curve.values, dtype=float)
    ax.errorbar(x, y, yerr=np.asarray(curve.expanded_uncertainty, dtype=float), fmt="o-", ms=3, color="k",
                capsize=3, label=f"{visible(curve.name)} ± U")
    if curve.axis_log:
        ax.set_xscale("log")
    ax.set_xlabel(visible(_label(curve.axis_name, curve.axis_unit)))
    ax.set_ylabel(visible(_label(curve.name, curve.unit)))
    ax.legend(loc="best", fontsize=8)


def _label(name: str, unit: str) -> str:
    return f"{name} ({unit})" if unit else name


def _time_scale(t: np.ndarray) -> tuple[float, str]:
    span = float(t[-1] - t[0]) if t.size > 1 else 1.0
    for factor, unit in ((1e9, "ns"), (1e6, "µs"), (1e3, "ms")):
        if span * factor < 5000:
            return factor, unit
    return 1.0, "s"
