"""``wavefit suggest``: from a first capture of an unknown coil to a setup and the next
capture's settings (method, roles, tau or f0, sense resistor, period, sampling, scales)."""
from __future__ import annotations

from .proposal import Suggestion, suggest

__all__ = ["Suggestion", "suggest"]
