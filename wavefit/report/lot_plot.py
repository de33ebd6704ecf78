"""Lot plots: per limited quantity a histogram with the limits and a run chart in capture order.

The title holds the lot name, which comes from the user or a file name: all text is
drawn literally (:mod:`.figure_file`).
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass
from typing import Sequence

from .figure_file import literal_text, save_figure
from .safe_text import visible

#: At most this many histogram bars: the histogram is about 290 pixels wide (10 in figure, a third
#: of it, 110 dpi), so more bars would be under 3 pixels each. The Freedman–Diaconis width asks
#: for millions when most values agree to many digits and one lies far off, and numpy before 2.x
#: (the project allows 1.23) used it uncapped in its "auto" rule.
MAX_BINS = 100


@dataclass(frozen=True)
class LotSeries:
    """One quantity over a lot, in capture order: ``None`` for a capture without a value the
    lot statistics use (:func:`wavefit.batch.statistics.usable`), so plot and statistics show
    the same values."""

    name: str
    unit: str
    values: Sequence[float | None]
    lower: float | None
    upper: float | None


def save_lot_plot(series: Sequence[LotSeries], path: str | os.PathLike[str], title: str = "") -> None:
    """Draw one row per quantity: histogram (limits as lines) and run chart; save as an image.

    Raises
    ------
    FigureFileError
        When ``path`` has no image format's suffix or its folder is missing.
    OSError
        When the file cannot be written; a file already at ``path`` is then left as it was.
    """
    with literal_text() as plt:
        _draw(plt, series, path, title)


def _draw(plt, series: Sequence[LotSeries], path: str | os.PathLike[str], title: str) -> None:
    from matplotlib.ticker import EngFormatter, MaxNLocator

    rows = max(1, len(series))
    fig, axes = plt.subplots(rows, 2, figsize=(10, 3.2 * rows), squeeze=False,
                             gridspec_kw={"width_ratios": [1, 2]})
    for (hist_ax, run_ax), item in zip(axes, series):
        index = [i + 1 for i, v in enumerate(item.values) if v is not None]
        values = [v for v in item.values if v is not None]
        symbol = "Ω" if item.unit == "ohm" else visible(item.unit)
        formatter = EngFormatter(unit=symbol, places=None)
        if values:
            hist_ax.hist(values, bins=_bins(values), color="tab:blue", alpha=0.8)
        run_ax.plot(index, values, marker="o", markersize=3, linewidth=0.8, color="tab:blue")
        for limit, text in ((item.lower, "lower limit"), (item.upper, "upper limit")):
            if limit is not None:
                hist_ax.axvline(limit, color="tab:red", linestyle="--", label=text)
                run_ax.axhline(limit, color="tab:red", linestyle="--", label=text)
        hist_ax.xaxis.set_major_formatter(formatter)
        hist_ax.yaxis.set_major_locator(MaxNLocator(integer=True))
        hist_ax.set_xlabel(visible(item.name))
        hist_ax.set_ylabel("captures")
        run_ax.yaxis.set_major_formatter(formatter)
        run_ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        run_ax.set_xlabel("capture (in order)")
        run_ax.set_ylabel(visible(item.name))
        if item.lower is not None or item.upper is not None:
            run_ax.legend(loc="best", fontsize="small")
    if title:
        fig.suptitle(visible(title))
    fig.tight_layout()
    save_figure(fig, path, dpi=110)


def _bins(values: Sequence[float]) -> int:
    """The larger of the Sturges and Freedman–Diaconis numbers of bins, at most :data:`MAX_BINS`.

    References
    ----------
    .. [1] D. Freedman, P. Diaconis, "On the histogram as a density estimator: L2 theory",
       Z. Wahrscheinlichkeitstheorie verw. Gebiete 57 (1981) 453–476 (width 2·IQR/n^(1/3)).
    .. [2] H. A. Sturges, "The choice of a class interval", J. Am. Stat. Assoc. 21 (1926) 65–66
       (log2(n) + 1 classes).
    """
    import numpy as np

    x = np.asarray(values, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        span = float(np.ptp(x))
        if not (math.isfinite(span) and span > 0):
            return 1
        iqr = float(np.subtract(*np.percentile(x, [75, 25])))
    sturges = math.log2(x.size) + 1.0
    width = 2.0 * iqr / x.size ** (1.0 / 3.0)  # Freedman–Diaconis
    wanted = max(sturges, span / width) if width > 0 else sturges
    return int(min(MAX_BINS, math.ceil(wanted)))
