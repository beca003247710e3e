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
        if self._pos >= total:
            if not self.loop:
                return None
            self._pos = 0
        end = min(self._pos + frames, total)
        block = self._data[self._pos : end]
        self._pos = end
        if len(block) < frames and self.loop:
            # Wrap within the block so a looped file plays without a gap.
            rest = frames - len(block)
            block = np.concatenate([block, self._data[:rest]])
            self._pos = rest
        return block
