"""What every live source offers the engine: a ring of captured frames, counters and a state.

Sound card, file played at real-time pace, and the simulated bench all fill a ``FrameRing``
from their own thread or callback; the analysis reads it. A source that also drives the
exciter says, for any captured frame, which tones were playing and whether they had settled.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

from rtanalyzer.sources.ring import FrameRing

# Seconds of audio the ring keeps: room for the longest analysis window and a slow reader.
RING_SECONDS = 8.0


@dataclass
class XrunCounters:
    """Input overflows and output underflows reported by the audio driver, and blocks the
    source had to drop or pad because it fell behind."""

    input_overflows: int = 0
    output_underflows: int = 0
    dropped_blocks: int = 0

    def as_dict(self) -> dict[str, int]:
        return {
            "input_overflows": self.input_overflows,
            "output_underflows": self.output_underflows,
            "dropped_blocks": self.dropped_blocks,
        }


@dataclass(frozen=True)
class Drive:
    """What was driving the exciter at a captured frame."""

    tones_hz: tuple[float, ...]
    settled: bool = True
    step: int | None = None  # sweep step, None when not sweeping
    settled_from: int | None = None  # absolute frame from which this step has settled


class LiveSource:
    """Base of live sources: a ring, counters, a state line, and start/stop."""

    kind = "source"

    def __init__(self, rate_hz: float, channels: int, name: str) -> None:
        self.rate_hz = float(rate_hz)
        self.channels = channels
        self.name = name
        self.ring = FrameRing(int(RING_SECONDS * rate_hz), channels)
        self.counters = XrunCounters()
        self._state = "stopped"
        self._state_lock = threading.Lock()  # never taken in an audio callback

    @property
    def state(self) -> str:
        with self._state_lock:
            return self._state

    def _set_state(self, text: str) -> None:
        with self._state_lock:
            self._state = text

    def start(self) -> None:
        raise NotImplementedError

    def stop(self, timeout: float = 2.0) -> None:
        raise NotImplementedError

    def drive_at(self, frame: int) -> Drive | None:
        """Tones driving the exciter at captured frame ``frame``; None when unknown."""
        return None

    def describe(self) -> str:
        return f"{self.name}, {self.rate_hz:g} Hz, {self.channels} ch"
