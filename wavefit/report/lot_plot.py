"""Lot plots: per limited quantity a histogram with the limits and a run chart in capture order."""
from __future__ import annotations

import math
import os
from dataclasses import dataclass
from typing import Sequence


@dataclass(frozen=True)
class LotSeries:
    """One quantity over a lot, in capture order (``None`` for captures without a value)."""

    name: str
    unit: str
    values: Sequence[float | None]
    lower: float | None
    upper: float | None


def save_lot_plot(series: Sequence[LotSeries], path: str | os.PathLike[str], title: str = "") -> None:
    """Draw one row per quantity: histogram (limits as lines) and run chart; save as an image."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import EngFormatter, MaxNLocator

    rows = max(1, len(series))
    fig, axes = plt.subplots(rows, 2, figsize=(10, 3.2 * rows), squeeze=False,
                             gridspec_kw={"width_ratios": [1, 2]})
    for (hist_ax, run_ax), item in zip(axes, series):
        index = [i + 1 for i, v in enumerate(item.values) if v is not None and math.isfinite(v)]
        values = [v for v in item.values if v is not None and math.isfinite(v)]
        symbol = "Ω" if item.unit == "ohm" else item.unit
        formatter = EngFormatter(unit=symbol, places=None)
        if values:
            hist_ax.hist(values, bins="auto", color="tab:blue", alpha=0.8)
        run_ax.plot(index, values, marker="o", markersize=3, linewidth=0.8, color="tab:blue")
        for limit, text in ((item.lower, "lower limit"), (item.upper, "upper limit")):
            if limit is not None:
                hist_ax.axvline(limit, color="tab:red", linestyle="--", label=text)
                run_ax.axhline(limit, color="tab:red", linestyle="--", label=text)
        hist_ax.xaxis.set_major_formatter(formatter)
        hist_ax.yaxis.set_major_locator(MaxNLocator(integer=True))
        hist_ax.set_xlabel(item.name)
        hist_ax.set_ylabel("captures")
        run_ax.yaxis.set_major_formatter(formatter)
        run_ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        run_ax.set_xlabel("capture (in order)")
        run_ax.set_ylabel(item.name)
        if item.lower is not None or item.upper is not None:
            run_ax.legend(loc="best", fontsize="small")
    if title:
        fig.suptitle(title)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
