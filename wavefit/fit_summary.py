"""Typed fit summaries: what a method says about its fit, written under ``fit`` in the result.

Each built-in method describes its fit with a frozen dataclass derived from
:class:`FitSummary` (rl-step: :class:`~wavefit.methods._rl_summary.StepFitSummary`, lc-ring:
:class:`~wavefit.methods._ring.RingSummary`, lc-sweep:
:class:`~wavefit.methods.lc_sweep.SweepSummary`). Code that needs a value of the summary reads
its typed field; :meth:`FitSummary.to_dict` writes the JSON object ``fit``
(``docs/json-output.md``), one key per field in field order, so a field and its JSON entry
cannot differ. Two markers on a field shape that object: :func:`optional_entry` leaves the key
out while the field is ``None``, and :func:`merged_entries` writes a mapping's own keys at the
summary's level.

A method defined outside the package may hand :class:`~wavefit.methods.estimate.Estimate` a
plain mapping; it is kept as a :class:`PlainSummary`, written and shown as given, but no
wavefit code reads a key of it (a model check, say): that needs a typed summary.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Mapping, Protocol, runtime_checkable

if TYPE_CHECKING:
    from .methods._model_check import CaptureChecks, ModelCheck

_OPTIONAL = "optional"
_MERGED = "merged"


def optional_entry() -> Any:
    """A field whose key is left out of :meth:`FitSummary.to_dict` while it is ``None``
    (an entry that only some fits have)."""
    return field(default=None, metadata={_OPTIONAL: True})


def merged_entries() -> Any:
    """A mapping field whose keys :meth:`FitSummary.to_dict` writes at the summary's own level,
    after the fields before it (a key already written keeps its place and takes the new value)."""
    return field(metadata={_MERGED: True})


def json_entries(obj: Any) -> dict[str, Any]:
    """The JSON object of a summary dataclass: its fields in order, nested summaries and
    sequences converted, with the markers of :func:`optional_entry` and :func:`merged_entries`."""
    out: dict[str, Any] = {}
    for f in dataclasses.fields(obj):
        value = getattr(obj, f.name)
        if f.metadata.get(_OPTIONAL) and value is None:
            continue
        if f.metadata.get(_MERGED):
            out.update(_json_value(value))
        else:
            out[f.name] = _json_value(value)
    return out


def _json_value(value: Any) -> Any:
    if hasattr(value, "to_dict"):
        return value.to_dict()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return json_entries(value)
    if isinstance(value, Mapping):
        return {k: _json_value(v) for k, v in value.items()}
    if isinstance(value, (tuple, list)):
        return [_json_value(v) for v in value]
    return value


@dataclass(frozen=True, kw_only=True)
class FitSummary:
    """Base of every fit summary.

    Attributes
    ----------
    capture_notes
        What the capture reader had to infer (a header-less first column read as time, say),
        added by :func:`wavefit.analysis.analyze`; written last, and only when there is any.
    """

    capture_notes: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """The JSON object ``fit`` of the result (:func:`json_entries`), ``capture_notes`` last."""
        out = json_entries(self)
        del out["capture_notes"]
        if self.capture_notes:
            out["capture_notes"] = list(self.capture_notes)
        return out

    def with_capture_notes(self, notes: tuple[str, ...]) -> FitSummary:
        """The same summary with the capture reader's notes."""
        return dataclasses.replace(self, capture_notes=notes)


@dataclass(frozen=True, kw_only=True)
class PlainSummary(FitSummary):
    """The summary of a method that gave a plain mapping: its entries, written as given.

    Attributes
    ----------
    entries
        The mapping the method gave.
    """

    entries: Mapping[str, Any] = merged_entries()


@runtime_checkable
class ChecksModel(Protocol):
    """A summary that holds the model check of its fit (every built-in method's)."""

    model_check: ModelCheck | CaptureChecks


def as_summary(fit: FitSummary | Mapping[str, Any]) -> FitSummary:
    """``fit`` as a :class:`FitSummary` (a plain mapping kept as a :class:`PlainSummary`)."""
    if isinstance(fit, FitSummary):
        return fit
    return PlainSummary(entries=dict(fit))


def shown_details(summary: FitSummary) -> list[tuple[str, int | float | str]]:
    """The summary's top-level numbers and words, in JSON order, for the text reports
    (nested entries and flags are left to the JSON)."""
    return [(key, value) for key, value in summary.to_dict().items()
            if isinstance(value, (int, float, str)) and not isinstance(value, bool)]
