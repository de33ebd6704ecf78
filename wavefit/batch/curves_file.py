"""The curves of a lot: one row per part, curve and point, in a CSV beside the results file.

A method that declares curve outputs (:class:`~wavefit.outputs.Curve`) has each part's
curves written here, in the columns of ``wavefit analyze --csv`` with ``file`` (the
results file's) in place of ``source``. A part's rows are written whole, and before its
results row, so a failed or killed write leaves at most one part's rows without a
results row, at the end of the file: the next run cuts them off (:meth:`CurvesFile.open_beside`)
and analyses that part again. Rows of parts without a results row anywhere else
are not this run's to remove: the file is refused rather than changed.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Collection, Mapping, Sequence

from ..report.csv_table import COLUMNS as ANALYZE_COLUMNS
from ..report.csv_table import result_rows
from ..report.safe_text import visible
from ..results import AnalysisResult
from .results_file import AppendedTable, ResultsFileError

CURVE_COLUMNS = ("file", *ANALYZE_COLUMNS[1:])
_NUMERIC = frozenset({"axis_value", "value", "standard_uncertainty", "expanded_uncertainty", "coverage_factor",
                      "degrees_of_freedom"})


def curves_path(results: str | os.PathLike[str]) -> Path:
    """The curves file beside a results file: ``lot0412.csv`` -> ``lot0412.curves.csv``."""
    results = Path(results)
    return results.with_name(f"{results.stem}.curves.csv")


def curve_rows(file: str, result: AnalysisResult) -> list[dict[str, Any]]:
    """The curves file's rows of one part: one per curve and point."""
    return [{**row, "file": file} for row in result_rows(result) if row["axis"] is not None]


class CurvesFile(AppendedTable):
    """The open curves file of a lot."""

    what = "curves file"

    def __init__(self, path: str | os.PathLike[str]) -> None:
        super().__init__(path, CURVE_COLUMNS, _NUMERIC)

    def open_beside(self, parts: Collection[str]) -> list[dict[str, Any]]:
        """Open, keeping the rows of ``parts`` (the files with a results row).

        The rows of one part at the end of the file that has no results row are a part
        written here but not in the results file (a failed write, a kill) and are cut off.

        Raises
        ------
        ResultsFileError
            When rows of a part without a results row lie before the last part's rows
            (a results row deleted by hand, or the curves of another lot).
        """
        rows = self.open()
        try:
            keep = len(rows)
            while keep and rows[keep - 1]["file"] not in parts and rows[keep - 1]["file"] == rows[-1]["file"]:
                keep -= 1
            stray = sorted({row["file"] for row in rows[:keep] if row["file"] not in parts})
            if stray:
                raise ResultsFileError(
                    f"{self.what} {visible(self.path)} holds curves of parts with no row in the results file "
                    f"({len(stray)}, first {visible(stray[0])}); remove their lines or use another --out")
            if keep < len(rows):
                self.truncate_rows(keep)
        except BaseException:
            self.close()
            raise
        return self.rows

    def by_part(self, order: Sequence[str]) -> dict[str, dict[str, Any]]:
        """Each part's curves, parts in ``order``: ``{file: {curve: {"unit", "axis": {"name",
        "unit", "values"}, "values", "standard_uncertainty", "expanded_uncertainty"}}}``."""
        grouped: dict[str, dict[str, dict[str, Any]]] = {}
        for row in self.rows:
            curve = grouped.setdefault(row["file"], {}).setdefault(row["output"], _empty_curve(row))
            curve["axis"]["values"].append(row["axis_value"])
            for key in ("values", "standard_uncertainty", "expanded_uncertainty"):
                curve[key].append(row["value" if key == "values" else key])
        return {file: grouped[file] for file in order if file in grouped}


def _empty_curve(row: Mapping[str, Any]) -> dict[str, Any]:
    return {"unit": row["unit"], "axis": {"name": row["axis"], "unit": row["axis_unit"], "values": []},
            "values": [], "standard_uncertainty": [], "expanded_uncertainty": []}
