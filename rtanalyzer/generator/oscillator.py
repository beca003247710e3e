"""A bank of phase-accumulating cosine oscillators that renders blocks without allocating.

Each oscillator keeps its phase in cycles, wrapped to [0, 1) after every block, so hours of
output lose no precision: within a block the phase is ``cycle + increment * n`` with n below
the block size, and the wrap itself (``% 1.0``) is exact in floating point. The next block
starts where the last one ended, whatever the block sizes.
"""

from __future__ import annotations

import numpy as np

_TWO_PI = 2.0 * np.pi


class OscillatorBank:
    """K cosine oscillators mixed into C channels.

    Channel c is ``sum_k amplitudes[c, k] * cos(2*pi*cycle_k(n) + phases[c, k])`` where
    ``cycle_k`` advances by ``frequencies_hz[k] / rate_hz`` each sample.

    Parameters
    ----------
    frequencies_hz : array_like, shape (K,)
        Oscillator frequencies in Hz.
    amplitudes, phases_rad : array_like, shape (C, K)
        Per channel and oscillator: peak amplitude and phase (radians) at sample 0.
    rate_hz : float
        Sample rate in Hz.
    block : int
        Largest block :meth:`render` is asked for; scratch arrays of this size are made once.

    Examples
    --------
    >>> bank = OscillatorBank([12000.0], [[1.0]], [[0.0]], 48000.0, block=8)
    >>> out = np.empty((4, 1))
    >>> bank.render(out)
    >>> np.round(out[:, 0], 12).tolist()
    [1.0, 0.0, -1.0, -0.0]
    """

    def __init__(self, frequencies_hz, amplitudes, phases_rad, rate_hz: float, block: int) -> None:
        self._rate_hz = float(rate_hz)
        self._increments = np.asarray(frequencies_hz, dtype=np.float64) / self._rate_hz
        self._amplitudes = np.atleast_2d(np.asarray(amplitudes, dtype=np.float64))
        self._phases = np.atleast_2d(np.asarray(phases_rad, dtype=np.float64))
        self._cycles = np.zeros_like(self._increments)
        self._index = np.arange(block, dtype=np.float64)
        self._theta = np.empty(block)
        self._term = np.empty(block)

    @property
    def channels(self) -> int:
        """Number of output channels C."""
        return self._amplitudes.shape[0]

    def set_frequency(self, k: int, frequency_hz: float) -> None:
        """Retune oscillator ``k`` from the next sample on, its phase running on unbroken."""
        self._increments[k] = float(frequency_hz) / self._rate_hz

    def advance(self, frames: int) -> None:
        """Move every phase on by ``frames`` samples without rendering them."""
        self._cycles += self._increments * frames
        np.remainder(self._cycles, 1.0, out=self._cycles)

    def render(self, out: np.ndarray) -> None:
        """Overwrite ``out`` (shape (n, C), n <= block) with the next n samples, then advance."""
        n = out.shape[0]
        out[...] = 0.0
        index, theta, term = self._index[:n], self._theta[:n], self._term[:n]
        for k in range(self._increments.size):
            np.multiply(index, self._increments[k], out=theta)
            theta += self._cycles[k]
            theta *= _TWO_PI
            for c in range(out.shape[1]):
                np.add(theta, self._phases[c, k], out=term)
                np.cos(term, out=term)
                term *= self._amplitudes[c, k]
                out[:, c] += term
        self.advance(n)
