"""Views of an :class:`~wavefit.results.AnalysisResult` for work in Python and notebooks.

The result's own methods (``uvalues``, ``covariance``, ``to_frame``, ``params``,
``fit_report``, ``plot``, ``repr``) call these functions; they read only what the
result holds and compute nothing new about the measurement.

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement, 5.2.2 (covariance from standard uncertainties and
   correlation coefficients, r(x_i, x_j) = u(x_i, x_j) / (u(x_i)·u(x_j))) and C.3.6.
.. [2] E. O. Lebigot, "uncertainties: a Python package for calculations with
   uncertainties", ``uncertainties.correlated_values``.
.. [3] M. Newville et al., "LMFIT: Non-Linear Least-Square Minimization and
   Curve-Fitting for Python", ``lmfit.Parameters``.
"""
from __future__ import annotations

import math
import re
from typing import TYPE_CHECKING, Any

import numpy as np

from .fit_summary import shown_details
from .fitted import FittedBlock
from .values import eng_pm

if TYPE_CHECKING:
    import lmfit
    import pandas as pd
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from .results import AnalysisResult

#: Correlations of fitted parameters smaller than this in magnitude are left out of
#: :func:`fit_report` (they change no decision; lmfit's own report uses the same cut).
SHOWN_CORRELATION = 0.1


def covariance_matrix(result: AnalysisResult) -> tuple[list[str], np.ndarray]:
    """The quantities' names and their covariance u_i·u_j·r_ij (GUM 5.2.2 read backwards)."""
    names = list(result.quantities)
    u = np.array([result.quantities[n].standard_uncertainty for n in names], dtype=float)
    corr = np.eye(len(names))
    for a, na in enumerate(names):
        for b, nb in enumerate(names):
            if a != b:
                corr[a, b] = result.correlation.get(na, {}).get(nb, 0.0)
    corr = (corr + corr.T) / 2.0  # r(a, b) and r(b, a) were computed apart and may differ in the last bit
    return names, corr * np.outer(u, u)


def correlated_quantities(result: AnalysisResult) -> dict[str, Any]:
    """The quantities as ``uncertainties`` numbers that carry their mutual correlations.

    Arithmetic on them propagates to first order with the result's covariance, so
    ``q["L"] / q["R"]`` has the uncertainty the correlation of L and R implies.
    """
    from uncertainties import correlated_values

    names, cov = covariance_matrix(result)
    values = [result.quantities[n].value for n in names]
    return dict(zip(names, correlated_values(values, cov, tags=names)))


def covariance_frame(result: AnalysisResult) -> pd.DataFrame:
    """The quantities' covariance matrix, labelled by name; ``frame.attrs["units"]`` maps
    each name to its unit (entry (a, b) is in unit(a)·unit(b))."""
    import pandas as pd

    names, cov = covariance_matrix(result)
    frame = pd.DataFrame(cov, index=pd.Index(names, name="quantity"), columns=names)
    frame.attrs["units"] = {n: result.quantities[n].unit for n in names}
    return frame


def quantity_frame(result: AnalysisResult) -> pd.DataFrame:
    """One row per quantity: value, unit, u, U, k, dof (inf when infinite)."""
    import pandas as pd

    rows = [{"quantity": n, "value": q.value, "unit": q.unit, "u": q.standard_uncertainty,
             "U": q.expanded_uncertainty, "k": q.coverage_factor, "dof": q.degrees_of_freedom}
            for n, q in result.quantities.items()]
    columns = ["quantity", "value", "unit", "u", "U", "k", "dof"]
    return pd.DataFrame(rows, columns=columns).set_index("quantity")


def parameter_names(blocks: tuple[FittedBlock, ...]) -> dict[str, str]:
    """Budget input name -> a Python identifier for lmfit ("fit alpha" -> "fit_alpha")."""
    taken: dict[str, str] = {}
    for block in blocks:
        for name in block.names:
            base = re.sub(r"\W", "_", name)
            base = base if base and not base[0].isdigit() else f"p_{base}"
            ident, n = base, 2
            while ident in taken.values():
                ident, n = f"{base}_{n}", n + 1
            taken[name] = ident
    return taken


def fit_parameters(result: AnalysisResult) -> lmfit.Parameters:
    """The fitted parameters as ``lmfit.Parameters`` with ``stderr`` and ``correl`` set.

    Names are the budget's input names made into identifiers; each parameter's
    ``user_data`` holds ``{"input": budget name, "unit": ..., "dof": ...}``.
    Correlations are given within a fit's block (different blocks are independent).
    """
    import lmfit

    params = lmfit.Parameters()
    idents = parameter_names(result.fitted)
    for block in result.fitted:
        se = block.standard_errors()
        corr = block.correlation_matrix()
        for i, name in enumerate(block.names):
            params.add(idents[name], value=block.values[i], vary=True)
            p = params[idents[name]]
            p.stderr = float(se[i])
            p.correl = {idents[other]: float(corr[i, j]) for j, other in enumerate(block.names) if j != i}
            p.user_data = {"input": name, "unit": block.units[i], "dof": block.degrees_of_freedom}
    return params


def fit_report(result: AnalysisResult) -> str:
    """A plain-text account of the fit: each block's parameters with standard error and
    relative error, the notable correlations, then the fit's scalar details."""
    lines = [f"Fit of {result.method} to {_source(result)}"]
    if not result.fitted:
        lines.append("  (no fitted parameters were kept with this result)")
    for block in result.fitted:
        dof = "infinite" if not math.isfinite(block.degrees_of_freedom) else f"{block.degrees_of_freedom:.4g}"
        lines.append(f"  block {block.group!r}: {len(block.names)} parameters, degrees of freedom {dof}")
        width = max(len(n) for n in block.names)
        se = block.standard_errors()
        for name, value, unit, err in zip(block.names, block.values, block.units, se):
            rel = f"{err / abs(value):.2e}" if value else "-"
            lines.append(f"    {name:<{width}}  {_value_pm(value, err, unit):<26}  rel {rel}")
        corr = block.correlation_matrix()
        pairs = [(abs(corr[i, j]), block.names[i], block.names[j], corr[i, j])
                 for i in range(len(block.names)) for j in range(i + 1, len(block.names))
                 if abs(corr[i, j]) >= SHOWN_CORRELATION]
        if pairs:
            lines.append(f"    correlations (|r| >= {SHOWN_CORRELATION:g}):")
            lines += [f"      r({a}, {b}) = {r:+.3f}" for _, a, b, r in sorted(pairs, reverse=True)]
    details = shown_details(result.fit)
    if details:
        lines.append("  details:")
        lines += [f"    {k}: {v:.6g}" if isinstance(v, float) else f"    {k}: {v}" for k, v in details]
    verdict = "adequate" if result.adequate else "NOT adequate (see the model check)"
    lines.append(f"  model: {verdict}")
    return "\n".join(lines)


def short_repr(result: AnalysisResult, shown: int = 3) -> str:
    """``<AnalysisResult rl-step 'a.csv': L = 47.0 µH ± 220 nH, R = ... (+3 more)>``."""
    parts = [f"{n} = {eng_pm(q.value, q.expanded_uncertainty, q.unit)}"
             for n, q in list(result.quantities.items())[:shown]]
    more = len(result.quantities) - shown
    if more > 0:
        parts.append(f"+{more} more")
    flags = "" if result.adequate else ", model NOT adequate"
    if result.warnings:
        flags += f", {len(result.warnings)} warning{'s' if len(result.warnings) > 1 else ''}"
    return f"<AnalysisResult {result.method} {_source(result)!r}: {', '.join(parts)}{flags}>"


def figure(result: AnalysisResult, ax: Axes | None = None) -> Figure:
    """The result's picture as a matplotlib Figure, made without pyplot (no backend is
    changed, nothing is left open); with ``ax`` the recorded data and the fitted model
    are drawn into that axes and its figure is returned."""
    from matplotlib import rc_context

    from .errors import WavefitError
    from .report.plot import draw
    from .results import LinePlot, TracePlot

    data = result.plot_data
    if not isinstance(data, (TracePlot, LinePlot)) and (ax is not None or not result.curves):
        raise WavefitError(f"method {result.method!r} has nothing to plot")
    with rc_context({"text.parse_math": False, "text.usetex": False}):
        if ax is None:
            return draw(result, _FigureMaker)
        _draw_on_axes(ax, data)
        return ax.figure


class _FigureMaker:
    """What :func:`wavefit.report.plot.draw` needs of pyplot, on a figure pyplot does not manage."""

    @staticmethod
    def figure(figsize: Any = None) -> Any:
        from matplotlib.figure import Figure

        return Figure(figsize=figsize)


def _draw_on_axes(ax: Axes, data: Any) -> None:
    from .report.safe_text import visible
    from .results import LinePlot

    if isinstance(data, LinePlot):
        x = np.asarray(data.x)
        ax.errorbar(x, data.y, xerr=data.x_err, yerr=data.y_err, fmt="o", color="k", capsize=3, label="captures")
        span = np.linspace(min(0.0, x.min()), x.max() * 1.05, 50)
        ax.plot(span, data.intercept + data.slope * span, "-", color="tab:red", label="fitted line")
        ax.set_xlabel(visible(data.x_label))
        ax.set_ylabel(visible(data.y_label))
    else:
        t = np.asarray(data.time)
        for label, unit, y, model in data.channels:
            ax.plot(t, y, ".", ms=1.5, label=f"{visible(label)} recorded ({visible(unit)})")
            ax.plot(t, model, "-", lw=1.2, label=f"{visible(label)} fitted model")
        ax.set_xlabel("time (s)")
    ax.legend(loc="best", fontsize=8)


def _value_pm(value: float, err: float, unit: str) -> str:
    """``value ± err unit``; a unit with a power (``s2``) gets no SI prefix, which would be read
    as raised with it (fs2 is (fs)², not f·s²)."""
    if any(c.isdigit() for c in unit):
        return f"{value:.6g} ± {err:.2g} {unit}"
    return eng_pm(value, err, unit)


def _source(result: AnalysisResult) -> str:
    import os

    if isinstance(result.source, str):
        return os.path.basename(result.source)
    return f"{len(result.source)} captures"


__all__ = ["correlated_quantities", "covariance_frame", "quantity_frame", "fit_parameters", "fit_report",
           "short_repr", "figure"]
