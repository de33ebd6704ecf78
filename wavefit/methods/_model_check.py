"""Model adequacy: how far a fitted parameter moves when the fit window changes, and the
type B input that spread becomes when the move is significant.

A waveform model that holds gives the same parameter from any part of the record, to within
the noise. One that misses the waveform (a coil that is not one time constant, damping that
changes with amplitude) gives estimates that move with the window, and the reported value
is then no more certain than that movement, whatever the fit's own standard error says.
Each method varies its windows (``docs/method-rl-step.md``, ``docs/method-lc-ring.md``) and
hands the estimates here as :class:`Variation` records; a variation whose z-score exceeds
:data:`MODEL_Z` enters the budget as an input of value 0 added to the fitted parameter.

References
----------
.. [1] JCGM 100:2008 (GUM), 4.3.7: an input known only to lie within ±a, rectangular
   distribution, u = a/√3 (clause number from memory).
.. [2] JCGM 100:2008 (GUM), G.4.2, Eq. (G.3): degrees of freedom of a type B standard
   uncertainty, ν ≈ ½·[Δu/u]⁻², Δu/u its relative uncertainty (as quoted from G.4.2 at
   https://www.isobudgets.com/de/faq/degrees-of-freedom-type-b-uncertainty).
.. [3] J. A. Hausman, "Specification tests in econometrics", Econometrica 46 (1978)
   1251–1271: the difference of an efficient and a consistent estimator has the variance
   var(consistent) − var(efficient) when the model holds.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

from ..uncertainty import InputQuantity

#: z above which an estimate's movement with the fit window counts as a model that misses the
#: waveform. For a normal z a false alarm on an adequate model has probability 6·10⁻⁵ per test
#: (two-sided), so the few tests of one record stay near 10⁻⁴ and the estimator-quality study,
#: which has no model error, is not disturbed; lc-ring's frequency drift check uses the same
#: value (DRIFT_Z).
MODEL_Z = 4.0


@dataclass(frozen=True)
class Variation:
    """One fitted parameter from the reported fit and from varied windows.

    ``varied`` maps a label ("late_windows", "early") to the estimate from that window; ``z``
    is the difference between the windows' estimates over its own standard deviation, and
    ``basis`` holds the estimates the varied ones were compared with when they are not
    the reported one (shown, not part of the half-width). ``input_name`` is the budget input
    the spread becomes when ``z`` exceeds :data:`MODEL_Z`.
    """

    parameter: str
    input_name: str
    unit: str
    reported: float
    varied: Mapping[str, float]
    z: float
    basis: Mapping[str, float] = field(default_factory=dict)

    @property
    def significant(self) -> bool:
        return self.z > MODEL_Z

    @property
    def half_width(self) -> float:
        """The largest departure of a varied-window estimate from the reported one."""
        return max(abs(v - self.reported) for v in self.varied.values())

    @property
    def standard_uncertainty(self) -> float:
        """u = a/√3 for a rectangular distribution of half-width a (GUM 4.3.7)."""
        return self.half_width / math.sqrt(3.0)

    @property
    def dof(self) -> float:
        """ν = z²/2 (GUM G.4.2, Eq. G.3): the half-width is a difference known to about
        1/z of itself, so Δu/u ≈ 1/z."""
        return 0.5 * self.z * self.z

    def to_dict(self) -> dict[str, Any]:
        """The JSON entry of the parameter (``docs/json-output.md``, ``fit.model_check``)."""
        entry: dict[str, Any] = {"reported": self.reported, **self.basis, **self.varied, "z": self.z,
                                 "significant": self.significant}
        if self.significant:
            entry.update(input=self.input_name, half_width=self.half_width,
                         standard_uncertainty=self.standard_uncertainty, degrees_of_freedom=self.dof)
        return entry


@dataclass(frozen=True)
class ModelCheck:
    """The window variations of one fit; ``varied`` says in words what was varied, and
    ``skipped`` why no variation could be measured (then the model counts as adequate:
    nothing showed that it is not)."""

    varied: str
    variations: tuple[Variation, ...] = ()
    skipped: str | None = None

    @property
    def adequate(self) -> bool:
        return not any(v.significant for v in self.variations)

    @property
    def threshold_z(self) -> float:
        """The z beyond which a variation is significant (:data:`MODEL_Z`)."""
        return MODEL_Z

    @property
    def inputs(self) -> tuple[Variation, ...]:
        """The variations that enter the budget."""
        return tuple(v for v in self.variations if v.significant)

    def budget_inputs(self) -> tuple[InputQuantity, ...]:
        """Each significant variation as a type B input of value 0 (rectangular)."""
        return tuple(InputQuantity(v.input_name, 0.0, v.standard_uncertainty, v.unit, "B", v.dof,
                                   distribution="rectangular") for v in self.inputs)

    def variation(self, parameter: str) -> Variation:
        """The variation of the fitted ``parameter``."""
        return next(v for v in self.variations if v.parameter == parameter)

    @property
    def inadequate_captures(self) -> tuple[str, ...]:
        """The captures whose own check failed: none, the check is of one fit."""
        return ()

    def to_dict(self) -> dict[str, Any]:
        """The JSON object ``fit.model_check`` (``docs/json-output.md``)."""
        out: dict[str, Any] = {"adequate": self.adequate, "varied": self.varied, "threshold_z": self.threshold_z}
        if self.skipped is not None:
            out["skipped"] = self.skipped
        out["parameters"] = {v.parameter: v.to_dict() for v in self.variations}
        return out

    def warning(self, model: str, cause: str) -> str | None:
        """The warning for an inadequate ``model``; ``cause`` names a likely physical cause."""
        if self.adequate:
            return None
        moves = "; ".join(f"{v.parameter} moves by {_relative(v)} (z = {v.z:.1f}, input {v.input_name!r})"
                          for v in self.inputs)
        return (f"the {model} does not describe the waveform: when the fit window changes ({self.varied}), "
                f"{moves}, beyond the threshold z = {self.threshold_z:g}; that spread is in the budget as a rectangular "
                f"type B input, so the uncertainty is the model's, not the fit's ({cause})")


@dataclass(frozen=True)
class CaptureChecks:
    """The model checks of several captures fitted alone, taken together (lc-sweep's rings).

    Attributes
    ----------
    varied
        What was varied, in words.
    inadequate_captures
        The sources of the captures whose own check failed, in capture order.
    skipped
        Why no capture's check was possible, or ``None`` when one was.
    """

    varied: str
    inadequate_captures: tuple[str, ...]
    skipped: str | None = None

    @property
    def adequate(self) -> bool:
        return not self.inadequate_captures

    @property
    def inputs(self) -> tuple[Variation, ...]:
        """None here: each capture's significant variations enter its own point's uncertainty."""
        return ()

    def to_dict(self) -> dict[str, Any]:
        """The JSON object ``fit.model_check`` of lc-sweep (``docs/json-output.md``)."""
        out: dict[str, Any] = {"adequate": self.adequate, "varied": self.varied,
                               "inadequate_captures": list(self.inadequate_captures)}
        if self.skipped is not None:
            out["skipped"] = self.skipped
        return out


def added(x: Mapping[str, Any], name: str) -> Any:
    """The model input ``name`` from the measurement function's inputs, or 0 when the check
    did not add it."""
    return x[name] if name in x else 0.0


def _relative(v: Variation) -> str:
    if v.reported:
        return f"{100.0 * v.half_width / abs(v.reported):.2g} %"
    return f"{v.half_width:.3g} {v.unit}".rstrip()
