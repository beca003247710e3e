"""The simulated bench as a live source: the model rendered at real-time pace, knobs live.

The generator's signal decides which tones drive the simulated exciter; a sweep steps them on
the generator's own schedule, so the analysis knows the step of every captured frame. Knob and
signal changes are handed over to the rendering thread and take effect between blocks.
"""

from __future__ import annotations

import numpy as np

from rtanalyzer.generator.generator import Generator
from rtanalyzer.generator.signals import Sweep
from rtanalyzer.generator.sweep import SweepPlan
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.bench.model import Bench
from rtanalyzer.sources.drive import drive_at, tones_of
from rtanalyzer.sources.live import Drive
from rtanalyzer.sources.paced import PacedSource


class BenchSource(PacedSource):
    kind = "simulated bench"

    def __init__(self, knobs: BenchKnobs, signal, rate_hz: float, block: int = 1024, seed: int = 0) -> None:
        super().__init__(rate_hz, 2 if knobs.iq else 1, "simulated bench", block)
        self._knobs = knobs
        self._seed = seed
        self._pending_knobs: BenchKnobs | None = None
        self._pending_signal = None
        self._install(signal, 0)

    # -- control (any thread) -----------------------------------------------------------------

    @property
    def knobs(self) -> BenchKnobs:
        return self._pending_knobs or self._knobs

    def set_knobs(self, knobs: BenchKnobs) -> None:
        """Turn the bench's knobs; the rendering thread applies them at the next block."""
        if knobs.iq != self._knobs.iq:
            raise ValueError("the bench's I/Q setting cannot change while it runs")
        self._pending_knobs = knobs

    def set_signal(self, signal) -> None:
        """Drive the simulated exciter with another test signal from the next block on."""
        Generator(signal, self.rate_hz)  # validates against the rate now, in the caller's thread
        self._pending_signal = signal

    def truth(self) -> dict:
        """What the model says the capture holds now (for the steady tones playing)."""
        return self._bench.truth()

    # -- rendering thread ---------------------------------------------------------------------

    def _install(self, signal, frame: int) -> None:
        self._signal = signal
        self._start_frame = frame
        self._plan = SweepPlan.for_sweep(signal, self.rate_hz, 0) if isinstance(signal, Sweep) else None
        tones, levels = tones_of(signal)
        self._step = 0
        self._bench = Bench(self._knobs, list(tones), self.rate_hz, list(levels), self._seed)

    def render_block(self, frames: int) -> np.ndarray:
        if self._pending_signal is not None:
            signal, self._pending_signal = self._pending_signal, None
            self._install(signal, self.ring.written)
        if self._pending_knobs is not None:
            self._knobs, self._pending_knobs = self._pending_knobs, None
            self._bench.set_knobs(self._knobs)
        if self._plan is None:
            return self._bench.render(frames)
        return self._render_sweep(frames)

    def _render_sweep(self, frames: int) -> np.ndarray:
        """Render across step boundaries, with a bench at each step's tone."""
        out = np.empty((frames, self.channels))
        done = 0
        while done < frames:
            local = self.ring.written + done - self._start_frame
            step, freq, _ = self._plan.step_at(local)
            if step != self._step:
                self._step = step
                self._bench = Bench(self._knobs, [freq], self.rate_hz, None, self._seed + step)
            span = min(frames - done, self._plan.frames_to_boundary(local))
            out[done : done + span] = self._bench.render(span)
            done += span
        return out

    def drive_at(self, frame: int) -> Drive | None:
        return drive_at(self._plan, tones_of(self._signal)[0], frame, self._start_frame)
