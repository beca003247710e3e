"""A preallocated ring of audio frames for one writer (the audio callback) and one reader.

The writer only copies into place and advances a frame counter: no allocation of arrays, no
lock, nothing that can block, which is what a real-time audio callback may do (the contract
spelled out in python-sounddevice's ``Stream`` documentation). The reader copies out the
frames it wants and checks afterwards that the writer did not lap them while it copied.
"""

from __future__ import annotations

import numpy as np


class FrameRing:
    """Ring of ``capacity`` frames of ``channels`` samples.

    ``written`` counts every frame ever written; a frame's absolute index is its position in
    that count, so the reader can ask for "everything since index i" or "the latest n".
    """

    def __init__(self, capacity: int, channels: int, dtype=np.float32) -> None:
        if capacity < 1 or channels < 1:
            raise ValueError(f"ring needs capacity >= 1 and channels >= 1, got {capacity}, {channels}")
        self._buf = np.zeros((capacity, channels), dtype=dtype)
        self.capacity = capacity
        self.channels = channels
        self.written = 0  # a Python int store is atomic under the GIL: the reader sees old or new

    def write(self, block: np.ndarray) -> None:
        """Copy ``block`` (frames, channels) in; only its newest ``capacity`` frames are kept."""
        n = len(block)
        if n > self.capacity:
            block = block[n - self.capacity :]
            self.written += n - self.capacity
            n = self.capacity
        start = self.written % self.capacity
        first = min(n, self.capacity - start)
        self._buf[start : start + first] = block[:first]
        if first < n:
            self._buf[: n - first] = block[first:]
        self.written += n

    def read(self, start: int, frames: int, out: np.ndarray | None = None) -> np.ndarray | None:
        """Copy of frames [start, start + frames) by absolute index, or None if overwritten.

        Returns None when any of those frames has already been overwritten (the reader fell
        more than ``capacity`` behind) or is not yet written.
        """
        end = start + frames
        if frames < 0 or start < 0 or end > self.written or start < self.written - self.capacity:
            return None
        if out is None:
            out = np.empty((frames, self.channels), dtype=self._buf.dtype)
        first_pos = start % self.capacity
        first = min(frames, self.capacity - first_pos)
        out[:first] = self._buf[first_pos : first_pos + first]
        if first < frames:
            out[first:frames] = self._buf[: frames - first]
        # The writer may have lapped the oldest frames while they were copied.
        if start < self.written - self.capacity:
            return None
        return out

    def latest(self, frames: int) -> tuple[np.ndarray | None, int]:
        """The newest ``frames`` frames and the absolute index just past them."""
        end = self.written
        return self.read(end - frames, frames), end
