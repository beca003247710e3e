"""A recorded capture played into the ring at real-time pace, once or looped."""

from __future__ import annotations

import numpy as np

from rtanalyzer.sources.capture import Capture
from rtanalyzer.sources.paced import PacedSource


class FileSource(PacedSource):
    kind = "file"

    def __init__(self, capture: Capture, loop: bool = False, block: int = 1024) -> None:
        super().__init__(capture.rate_hz, capture.channels, f"file {capture.source}", block)
        self._data = capture.samples
        self._pos = 0
        self.loop = loop

    def render_block(self, frames: int) -> np.ndarray | None:
        total = len(self._data)
        if self.loop:
            # Whole blocks whatever the file's length, so playback keeps real-time pace.
            index = (self._pos + np.arange(frames)) % total
            self._pos = int((self._pos + frames) % total)
            return self._data[index]
        if self._pos >= total:
            return None
        block = self._data[self._pos : self._pos + frames]
        self._pos += len(block)
        return block
