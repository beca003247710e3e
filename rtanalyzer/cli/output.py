"""Printing a command's figures: exactly one JSON object, or lines for a person."""

from __future__ import annotations

import json
import sys
from typing import Any, Callable, Iterable


def print_json(data: Any) -> None:
    """One JSON value on one line of stdout; NaN or infinity is a bug, so it raises."""
    json.dump(data, sys.stdout, allow_nan=False)
    sys.stdout.write("\n")


def emit(data: Any, as_json: bool, text: Callable[[Any], Iterable[str]]) -> None:
    """``data`` as JSON, or as the lines ``text(data)`` makes of it."""
    if as_json:
        print_json(data)
    else:
        print("\n".join(text(data)))
