"""Progress of a long analysis on stderr, shown only when stderr is a terminal.

A redirected or piped stderr (a log file, a test, CI) gets nothing, so ``--json`` output and
error lines stay clean.
"""

from __future__ import annotations

import sys
import time
from typing import Callable, TextIO

#: Say nothing for analyses shorter than this (seconds).
QUIET_S = 0.5


def terminal_progress(label: str, stream: TextIO | None = None) -> Callable[[int, int], None] | None:
    """A ``progress(done, total)`` callback that rewrites one line on a terminal, or None.

    Parameters
    ----------
    label : str
        What is being counted, e.g. ``"quadrature: tone"``.
    stream : text stream, optional
        Default ``sys.stderr``; nothing is written unless ``stream.isatty()``.
    """
    out = sys.stderr if stream is None else stream
    try:
        if not out.isatty():
            return None
    except (AttributeError, ValueError):
        return None
    started = time.monotonic()
    shown = [False]

    def progress(done: int, total: int) -> None:
        if time.monotonic() - started < QUIET_S and not shown[0]:
            return
        shown[0] = True
        if done >= total:
            out.write("\r\033[K")
        else:
            out.write(f"\r{label} {done}/{total}")
        out.flush()

    return progress
