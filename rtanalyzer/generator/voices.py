"""Each test signal as oscillators: frequencies, and per-channel amplitudes and phases scaled to peak 1.

The generator multiplies a voice by the linear level, so the scaling here is what makes
``level_dbfs`` mean what :mod:`rtanalyzer.generator.signals` says: the tone's peak, the two-tone
PEP, the multitone's waveform peak, the louder quadrature channel's peak.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rtanalyzer.generator.errors import GeneratorError
from rtanalyzer.generator.schroeder import common_spacing, periodic_peak
from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone


@dataclass(frozen=True)
class Voice:
    """Oscillator settings of a signal whose (continuous-time) peak is 1.0.

    Attributes
    ----------
    frequencies_hz : ndarray, shape (K,)
    amplitudes, phases_rad : ndarray, shape (C, K)
        C = 1 for mono signals, 2 for :class:`Quadrature` (I left, Q right).
    """

    frequencies_hz: np.ndarray
    amplitudes: np.ndarray
    phases_rad: np.ndarray

    @property
    def channels(self) -> int:
        return self.amplitudes.shape[0]


def voice_for(signal) -> Voice:
    """The :class:`Voice` of a Tone, TwoTone, Multitone, Sweep (its first step) or Quadrature.

    Examples
    --------
    >>> voice_for(Quadrature(1000.0, -6.0, amplitude_db=6.0206)).amplitudes.round(4).tolist()
    [[0.5], [1.0]]
    """
    if isinstance(signal, Tone):
        return _voice([signal.frequency_hz], [[1.0]], [[0.0]])
    if isinstance(signal, Sweep):
        return _voice([signal.frequencies_hz[0]], [[1.0]], [[0.0]])
    if isinstance(signal, TwoTone):
        return _voice([signal.low_hz, signal.high_hz], [list(signal.amplitudes)], [[0.0, 0.0]])
    if isinstance(signal, Multitone):
        _, harmonics = common_spacing(signal.frequencies_hz)
        phases = signal.phases_rad
        count = len(signal.frequencies_hz)
        peak = periodic_peak(harmonics, np.ones(count), phases)
        return _voice(signal.frequencies_hz, [np.full(count, 1.0 / peak)], [phases])
    if isinstance(signal, Quadrature):
        g = 10.0 ** (signal.amplitude_db / 20.0)
        scale = 1.0 / max(1.0, g)
        q_phase = np.deg2rad(signal.phase_offset_deg) - np.pi / 2.0  # sin(x + phi) = cos(x + phi - pi/2)
        return _voice([signal.frequency_hz], [[scale], [g * scale]], [[0.0], [q_phase]])
    raise GeneratorError(
        f"signal {signal!r} is not a test signal; allowed: Tone, TwoTone, Multitone, Sweep, Quadrature"
    )


def _voice(frequencies, amplitudes, phases) -> Voice:
    return Voice(
        np.asarray(frequencies, dtype=np.float64),
        np.asarray(amplitudes, dtype=np.float64),
        np.asarray(phases, dtype=np.float64),
    )
