"""What a method's estimation stage hands to the shared analysis.

:meth:`wavefit.methods.base.Method.estimate` fits the captures and returns an
:class:`Estimate`: the fitted blocks (:class:`wavefit.fitted.FittedBlock`, importable from
here too: parameters with their joint covariance and degrees of freedom, type A), any other inputs it measured (a model check's spread, an assumption's
range), the settings its measurement function needs, the fit summary, warnings and plot
layers. The shared :meth:`~wavefit.methods.base.Method.analyze` turns it into a result.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..fit_summary import FitSummary
from ..fitted import FittedBlock
from ..uncertainty import InputQuantity


@dataclass(frozen=True)
class Estimate:
    """The estimation stage's outcome for one measurement.

    Attributes
    ----------
    blocks
        Fitted parameter blocks, inputs of the measurement function.
    inputs
        Other inputs the estimate found (independent of each other and of the blocks).
    settings
        What the measurement function needs beside its inputs (which parts are present,
        an option's choice), read by :meth:`~wavefit.methods.base.Method.model`.
    fit
        The fit summary written under ``fit`` in the result: a typed
        :class:`~wavefit.fit_summary.FitSummary`; a plain mapping (a method defined
        outside the package) is kept in the result as a :class:`~wavefit.fit_summary.PlainSummary`.
    warnings
        Broken assumptions and other remarks, in order.
    plot
        The plot layers (:class:`~wavefit.results.TracePlot`, :class:`~wavefit.results.LinePlot`)
        or ``None``; declared curves are drawn from the result itself.
    adequate
        False when the model check found that the model misses the waveform.
    axes
        The points of each curve axis, by axis name (conditions of the measurement, exact).
    """

    blocks: tuple[FittedBlock, ...]
    fit: FitSummary | Mapping[str, Any]
    inputs: tuple[InputQuantity, ...] = ()
    settings: Mapping[str, Any] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    plot: Any = None
    adequate: bool = True
    axes: Mapping[str, np.ndarray] = field(default_factory=dict)
