"""Value types of the command line's options (argparse ``type=`` functions)."""
from __future__ import annotations

import argparse
from typing import Callable


def whole_number(least: int, below: str) -> Callable[[str], int]:
    """An option's type: a whole number of at least ``least``; ``below`` is the message for a
    smaller one, with ``{value}`` and ``{least}`` filled in (argparse prints it as a usage
    error, exit 2, before anything runs)."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if value < least:
            raise argparse.ArgumentTypeError(below.format(value=value, least=least))
        return value

    return parse
