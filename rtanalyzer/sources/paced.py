"""A source that makes its audio on its own thread, one block at a time, at real-time pace."""

from __future__ import annotations

import threading
import time

import numpy as np

from rtanalyzer.sources.live import LiveSource

# If the thread falls this far behind the clock it counts the blocks a real card would have
# lost and carries on from now, rather than rushing to catch up.
MAX_LAG_S = 0.5


class PacedSource(LiveSource):
    """Calls ``render_block(frames)`` every block period and writes the result to the ring."""

    def __init__(self, rate_hz: float, channels: int, name: str, block: int = 1024) -> None:
        super().__init__(rate_hz, channels, name)
        self.block = int(block)
        self._thread: threading.Thread | None = None
        self._running = threading.Event()

    def render_block(self, frames: int) -> np.ndarray | None:
        """Next ``frames`` of audio (frames, channels), or None when the source has ended."""
        raise NotImplementedError

    def start(self) -> None:
        if self._thread is not None:
            return
        self._running.set()
        self._thread = threading.Thread(target=self._run, name=f"rtanalyzer {self.kind}", daemon=True)
        self._set_state("running")
        self._thread.start()

    def stop(self, timeout: float = 2.0) -> None:
        self._running.clear()
        if self._thread is not None:
            self._thread.join(timeout)
            self._thread = None
        if self.state == "running":
            self._set_state("stopped")

    def _run(self) -> None:
        period = self.block / self.rate_hz
        due = time.monotonic()
        while self._running.is_set():
            data = self.render_block(self.block)
            if data is None:
                self._set_state("finished")
                return
            self.ring.write(data)
            due += period
            lag = time.monotonic() - due
            if lag > MAX_LAG_S:
                # Count the blocks a real card would have lost, then carry on from now.
                self.counters.dropped_blocks += int(lag / period)
                due = time.monotonic()
            elif lag < 0:
                time.sleep(-lag)
