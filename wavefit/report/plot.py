"""Pictures of a result: capture, fitted model and residuals; or a line fit.

Channel labels come from the capture's column headers and the title from its file
name: they are drawn as literal text (:mod:`.figure_file`).
"""
from __future__ import annotations

import os

import numpy as np

from ..errors import WavefitError
from ..results import AnalysisResult, LinePlot, TracePlot
from .figure_file import literal_text, save_figure
from .safe_text import visible


def save_plot(result: AnalysisResult, path: str | os.PathLike) -> None:
    """Draw ``result.plot_data`` into ``path`` (format from the extension, e.g. PNG)."""
    if not isinstance(result.plot_data, (TracePlot, LinePlot)):
        raise WavefitError(f"method {result.method!r} has nothing to plot")
    with literal_text() as plt:
        fig = draw(result, plt)
        try:
            save_figure(fig, path, dpi=110)
        except OSError as exc:
            raise WavefitError(f"cannot write plot {visible(path)}: {visible(exc.strerror or exc)}") from None


def draw(result: AnalysisResult, plt):
    """The result's figure, titled, made by ``plt.subplots`` (pyplot, or a maker of figures that
    pyplot does not manage, as ``result.plot()`` uses)."""
    data = result.plot_data
    fig = _trace_figure(plt, data) if isinstance(data, TracePlot) else _line_figure(plt, data)
    title = result.source if isinstance(result.source, str) else f"{len(result.source)} captures"
    fig.suptitle(visible(f"{result.method}: {os.path.basename(str(title))}"))
    fig.tight_layout(rect=(0, 0, 1, 0.96))
    return fig


def _trace_figure(plt, data: TracePlot):
    n = len(data.channels)
    fig, axes = plt.subplots(2 * n, 1, figsize=(9, 3.2 * n + 1.5), sharex=True,
                             gridspec_kw={"height_ratios": [3, 1] * n})
    t = np.asarray(data.time)
    scale, unit = _time_scale(t)
    for k, (label, yunit, y, model) in enumerate(data.channels):
        label, yunit = visible(label), visible(yunit)
        ax, axr = axes[2 * k], axes[2 * k + 1]
        ax.plot(t * scale, y, ".", ms=1.5, color="0.45", label=f"{label} recorded")
        ax.plot(t * scale, model, "-", lw=1.2, color="tab:red", label="fitted model")
        ax.set_ylabel(f"{label} ({yunit})")
        ax.legend(loc="best", fontsize=8)
        axr.plot(t * scale, np.asarray(y) - np.asarray(model), ".", ms=1.0, color="tab:blue")
        axr.axhline(0.0, color="k", lw=0.6)
        axr.set_ylabel("residual")
    axes[-1].set_xlabel(f"time ({unit})")
    return fig


def _line_figure(plt, data: LinePlot):
    fig, ax = plt.subplots(figsize=(7, 5))
    x, y = np.asarray(data.x), np.asarray(data.y)
    ax.errorbar(x, y, xerr=data.x_err, yerr=data.y_err, fmt="o", color="k", capsize=3, label="captures")
    span = np.linspace(min(0.0, x.min()), x.max() * 1.05, 50)
    ax.plot(span, data.intercept + data.slope * span, "-", color="tab:red", label="fitted line")
    ax.set_xlabel(visible(data.x_label))
    ax.set_ylabel(visible(data.y_label))
    ax.legend()
    return fig


def _time_scale(t: np.ndarray) -> tuple[float, str]:
    span = float(t[-1] - t[0]) if t.size > 1 else 1.0
    for factor, unit in ((1e9, "ns"), (1e6, "µs"), (1e3, "ms")):
        if span * factor < 5000:
            return factor, unit
    return 1.0, "s"
