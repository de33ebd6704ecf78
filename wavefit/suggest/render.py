"""A suggestion as text: the reasoning as TOML comments, then the setup, so that the whole
output can be saved as the setup file and edited."""
from __future__ import annotations

import tomli_w

from .proposal import Suggestion


def render_toml(suggestion: Suggestion) -> str:
    """The reasoning lines (each a ``#`` comment) followed by the setup in TOML."""
    lines = ["# wavefit suggest: a setup for the next capture (edit every value that starts with 'EDIT')"]
    lines += [f"# {line}" for line in suggestion.reasoning]
    return "\n".join(lines) + "\n\n" + tomli_w.dumps(suggestion.setup)
