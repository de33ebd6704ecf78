"""A part's DCR read with an ohmmeter, carried by its capture's preamble and judged like a
measured quantity.

A capture may hold a preamble line ``dcr,<value>``, the part's DC resistance measured
separately (a 4-wire ohmmeter) with its uncertainty, written as a part value
(``docs/setup-file.md``): ``dcr,121.3 mohm ±0.4 mohm k=2``. The reading travels with the
capture, so the capture's sha256 in the results row covers it too. When the spec limits
``DCR``, the row carries the reading as ``DCR`` and ``DCR_U`` beside the fitted ``R`` and
the part is judged on it by the spec's decision rule (ILAC-G8:09/2019 §4.2.1 or §4.2.3).

References
----------
.. [1] JCGM 100:2008 (GUM), 6.2.1 and 6.3.3: the expanded uncertainty U = k·u, k = 2 for
   an interval of about 95 % coverage; 4.3.7 and 4.3.3 for the standard uncertainty of a
   bound and of a stated expanded uncertainty.
.. [2] ILAC-G8:09/2019, "Guidelines on Decision Rules and Statements of Conformity",
   §4.2.1 and §4.2.3.
"""
from __future__ import annotations

from typing import Any, Mapping

from ..errors import AnalysisRefused, SetupError
from ..results import AnalysisResult, QuantityResult
from ..values import parse_part

#: The spec's name for the ohmmeter reading, and the results file's columns (``DCR``, ``DCR_U``).
DCR = "DCR"
#: The preamble key that holds the reading (compared without case and surrounding spaces).
PREAMBLE_KEY = "dcr"
#: Coverage factor of the reading's expanded uncertainty: k = 2, about 95 % for a normal
#: distribution (JCGM 100:2008, 6.3.3), the coverage of the batch's other U.
COVERAGE = 2.0


def reading_from_text(text: str) -> QuantityResult:
    """The reading as a quantity: its value, its standard uncertainty as the part value gives
    it (``±a`` a bound, ``±a k=K`` an expanded uncertainty, ``u=a``), and U = 2·u."""
    part = parse_part(text, "ohm")
    u = part.standard_uncertainty
    return QuantityResult(DCR, part.value, "ohm", u, COVERAGE * u, COVERAGE)


def dcr_reading(result: AnalysisResult) -> QuantityResult:
    """The ohmmeter reading of the part whose captures gave ``result``.

    Raises
    ------
    AnalysisRefused
        When no capture holds a ``dcr`` preamble line, when captures of one part hold
        different readings, or when a reading cannot be read; the part's row is then an
        ``error`` row whose message says so.
    """
    texts = {value.strip() for metadata in _metadata(result) for key, value in metadata.items()
             if key.strip().lower() == PREAMBLE_KEY}
    if not texts:
        raise AnalysisRefused(f"the spec limits {DCR}, but the capture has no '{PREAMBLE_KEY}' preamble line "
                              f"with the ohmmeter reading (e.g. {PREAMBLE_KEY},121.3 mohm ±0.4 mohm k=2)")
    if len(texts) > 1:
        raise AnalysisRefused(f"the part's captures hold different {PREAMBLE_KEY} readings: "
                              + ", ".join(sorted(texts)))
    text = texts.pop()
    try:
        return reading_from_text(text)
    except SetupError as exc:
        raise AnalysisRefused(f"the '{PREAMBLE_KEY}' preamble line: {exc}") from None


def _metadata(result: AnalysisResult) -> list[Mapping[str, Any]]:
    provenance = result.provenance or {}
    return [capture.get("metadata") or {} for capture in provenance.get("captures", [])]
