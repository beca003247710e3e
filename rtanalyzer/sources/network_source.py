"""The bench's audio 90-degree network on its own, as a live stereo source: left = I, right = Q.

On the simulated bench there is no capture of the network's outputs, only of the receiver. This
source stands in for a sound card whose left input is wired to the network's I output and its
right input to the Q output: for the generator's tones it renders both outputs of the bench's
network (the example RC pair of ``sources.bench.network``, or an ideal one) with the bench's
amplitude and phase trimmers, at real-time pace. A stepped sweep steps on the generator's own
schedule, so the analysis knows the step of every captured frame.

Each tone is rendered from its exact analog response (``path_responses``: all-pass phases from
``dsp.allpass`` plus the trims), so the phase difference at f is
``pair_difference(f) - phase_trim`` and the amplitude ratio is ``amplitude_trim_db``, exactly;
a little white noise (``NOISE_DBFS``) keeps the analysis honest.
"""

from __future__ import annotations

import numpy as np

from rtanalyzer.generator.generator import Generator
from rtanalyzer.generator.signals import Sweep
from rtanalyzer.generator.voices import voice_for
from rtanalyzer.generator.sweep import SweepPlan
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.bench.network import path_responses
from rtanalyzer.sources.drive import drive_at, tones_of
from rtanalyzer.sources.live import Drive
from rtanalyzer.sources.paced import PacedSource

#: RMS of the white noise added to each channel, dBFS.
NOISE_DBFS = -110.0


class NetworkSource(PacedSource):
    """Left: the network's I output; right: its Q output (trimmers included)."""

    kind = "simulated network"

    def __init__(self, knobs: BenchKnobs, signal, rate_hz: float, block: int = 1024, seed: int = 0) -> None:
        super().__init__(rate_hz, 2, "simulated 90° network", block)
        self._knobs = knobs
        self._pending_knobs: BenchKnobs | None = None
        self._pending_signal = None
        self._rng = np.random.default_rng(seed)
        self._install(signal, 0)

    # -- control (any thread) -----------------------------------------------------------------

    @property
    def knobs(self) -> BenchKnobs:
        return self._pending_knobs or self._knobs

    def set_knobs(self, knobs: BenchKnobs) -> None:
        """Turn the trimmers (or change the network); applied at the next block."""
        self._pending_knobs = knobs

    def set_signal(self, signal) -> None:
        """Drive the network with another test signal from the next block on."""
        Generator(signal, self.rate_hz)  # validates against the rate now, in the caller's thread
        self._pending_signal = signal

    def truth(self) -> dict:
        """What the outputs hold at the steady tones playing (or the sweep's first step)."""
        tones = np.asarray(tones_of(self._signal)[0], dtype=np.float64)
        h_i, h_q = path_responses(tones, self._knobs)
        diff = np.degrees(np.angle(h_i) - np.angle(h_q))
        diff = (diff + 180.0) % 360.0 - 180.0
        return {
            "network": self._knobs.network,
            "amplitude_trim_db": self._knobs.amplitude_trim_db,
            "phase_trim_deg": self._knobs.phase_trim_deg,
            "tones_hz": [float(f) for f in tones],
            "phase_difference_deg": [float(d) for d in diff],
            "amplitude_ratio_db": [float(20.0 * np.log10(abs(q) / abs(i))) for i, q in zip(h_i, h_q)],
        }

    # -- rendering thread ---------------------------------------------------------------------

    def _install(self, signal, frame: int) -> None:
        self._signal = signal
        self._start_frame = frame
        self._plan = SweepPlan.for_sweep(signal, self.rate_hz, 0) if isinstance(signal, Sweep) else None
        # The generator's own amplitudes and phases (a two-tone's PEP, a multitone's Schroeder
        # phases), so the network is driven exactly as the generator would drive it.
        voice = voice_for(signal)
        peak = 10.0 ** (signal.level_dbfs / 20.0)
        self._tones = np.asarray(voice.frequencies_hz, dtype=np.float64)
        self._amps = peak * np.asarray(voice.amplitudes[0], dtype=np.float64)
        self._phases = np.asarray(voice.phases_rad[0], dtype=np.float64)

    def _render(self, tones: np.ndarray, amps: np.ndarray, first: int, frames: int,
                phases: np.ndarray | None = None) -> np.ndarray:
        t = (first + np.arange(frames)) / self.rate_hz
        h_i, h_q = path_responses(tones, self._knobs)
        phase = 2.0 * np.pi * np.outer(t, tones) + (0.0 if phases is None else phases)
        out = np.empty((frames, 2))
        out[:, 0] = (amps * np.abs(h_i) * np.cos(phase + np.angle(h_i))).sum(axis=1)
        out[:, 1] = (amps * np.abs(h_q) * np.cos(phase + np.angle(h_q))).sum(axis=1)
        out += self._rng.standard_normal(out.shape) * 10.0 ** (NOISE_DBFS / 20.0)
        return out

    def render_block(self, frames: int) -> np.ndarray:
        if self._pending_signal is not None:
            signal, self._pending_signal = self._pending_signal, None
            self._install(signal, self.ring.written)
        if self._pending_knobs is not None:
            self._knobs, self._pending_knobs = self._pending_knobs, None
        first = self.ring.written
        if self._plan is None:
            return self._render(self._tones, self._amps, first, frames, self._phases)
        out = np.empty((frames, 2))
        done = 0
        while done < frames:
            local = first + done - self._start_frame
            _, freq, _ = self._plan.step_at(local)
            span = min(frames - done, self._plan.frames_to_boundary(local))
            out[done:done + span] = self._render(np.array([freq]), self._amps[:1], first + done, span)
            done += span
        return out

    def drive_at(self, frame: int) -> Drive | None:
        return drive_at(self._plan, self._tones, frame, self._start_frame)
