"""Drawing and saving figures safely: literal text, a checked file name, all or nothing on disk.

Text in a figure comes from file names, lot names, column headers and metadata.
matplotlib reads text between two ``$`` as a formula ("mathtext") and fails on
one it cannot parse, so figures are drawn with mathtext off (no figure of ours
uses it) and outside text passes through :func:`~wavefit.report.safe_text.visible`.
A figure is written to a temporary file beside the target and renamed over it, so
an interrupted or failed save leaves the previous file, not half an image.

References
----------
.. [1] matplotlib, "Writing mathematical expressions" and the ``text.parse_math``
   setting, https://matplotlib.org/stable/users/explain/text/mathtext.html
"""
from __future__ import annotations

import contextlib
import os
import warnings
from pathlib import Path
from typing import Any, Iterator

from ..errors import WavefitError
from ..output_files import folder_problem, new_temporary
from .safe_text import visible


class FigureFileError(WavefitError):
    """A figure cannot be written to the file named (exit code 3)."""

    exit_code = 3


def _formats() -> frozenset[str]:
    from matplotlib.backend_bases import FigureCanvasBase

    return frozenset(FigureCanvasBase.get_supported_filetypes())


#: The first bytes of a file of each of the common formats matplotlib writes (each format's own
#: published signature; SVG is XML): an existing file at a plot's name that does not start so is
#: no picture, and is not overwritten.
_SIGNATURES = {
    "png": (b"\x89PNG\r\n\x1a\n",), "pdf": (b"%PDF",), "jpg": (b"\xff\xd8\xff",), "jpeg": (b"\xff\xd8\xff",),
    "gif": (b"GIF87a", b"GIF89a"), "tif": (b"II*\x00", b"MM\x00*"), "tiff": (b"II*\x00", b"MM\x00*"),
    "webp": (b"RIFF",), "eps": (b"%!PS",), "ps": (b"%!PS",), "svg": (b"<?xml", b"<svg"),
}


def check_figure_path(path: str | os.PathLike[str]) -> None:
    """Refuse, before anything is drawn, a file name whose format matplotlib cannot write,
    whose folder does not exist, or where a file of a common format's suffix holds no picture
    of it (a capture saved as ``part2.png`` and named as the plot too was overwritten)."""
    target = Path(path)
    kind = target.suffix.lower().lstrip(".")
    if kind not in _formats():
        raise FigureFileError(f"cannot draw a plot into {visible(target)}: give it a suffix of an image format "
                              f"({', '.join(sorted(_formats()))})")
    missing = folder_problem(target.parent)
    if missing:
        raise FigureFileError(f"cannot draw a plot into {visible(target)}: folder {visible(target.parent)} {missing}")
    try:
        present = target.is_file()
    except OSError:  # a name too long to look up: check_output refuses it, with the reason
        present = False
    if kind in _SIGNATURES and present:
        with open(target, "rb") as stream:
            head = stream.read(16).lstrip()
        if head and not head.startswith(_SIGNATURES[kind]):
            raise FigureFileError(f"cannot draw a plot into {visible(target)}: the file there holds no {kind.upper()} "
                                  "picture (a capture?) and would be overwritten; name a new file for the plot")


@contextlib.contextmanager
def literal_text() -> Iterator[Any]:
    """Draw with every text literal (no mathtext) and the Agg backend; yields ``pyplot``.

    matplotlib's UserWarnings (a glyph missing from the font for an unusual file name,
    a layout that does not fit) are not shown: they are about the look of the picture,
    and the run's output on stderr stays for what the user must act on.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    with matplotlib.rc_context({"text.parse_math": False, "text.usetex": False}), warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        yield plt


def save_figure(fig: Any, path: str | os.PathLike[str], dpi: int) -> None:
    """Write ``fig`` to ``path`` through a temporary file (see the module notes); closes ``fig``.

    Raises
    ------
    FigureFileError
        When the format is not one matplotlib writes or the folder is missing.
    OSError
        When the file cannot be written (disk full, no permission).
    """
    import matplotlib.pyplot as plt

    target = Path(path)
    try:
        check_figure_path(target)
        temporary = new_temporary(target)
        try:
            fig.savefig(temporary, dpi=dpi, format=target.suffix.lower().lstrip("."))
            os.replace(temporary, target)
        finally:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(temporary)
    finally:
        plt.close(fig)
