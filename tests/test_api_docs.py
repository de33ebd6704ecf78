"""The API reference (docs/api) builds from the docstrings without a warning.

Sphinx with numpydoc renders every documented object; a docstring that stops parsing, an
object renamed or removed, or a broken cross-reference fails the build (``-W``), so the
reference cannot fall behind the code.
"""
from __future__ import annotations

from pathlib import Path

from sphinx.cmd import build as sphinx_build  # in the test extras: a missing Sphinx fails, never skips

SOURCE = Path(__file__).resolve().parents[1] / "docs" / "api"


def test_api_reference_builds_without_warnings(tmp_path):
    status = sphinx_build.build_main(["-b", "html", "-W", "--keep-going", "-q", "-d", str(tmp_path / "doctrees"),
                                      str(SOURCE), str(tmp_path / "html")])
    assert status == 0
    page = (tmp_path / "html" / "index.html").read_text(encoding="utf-8")
    for name in ("analyze", "fit_model", "DampedSine", "Curve", "estimate", "uvalues", "to_frame", "propagate",
                 "AnalysisRefused"):
        assert name in page, name
