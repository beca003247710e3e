"""The raised-cosine gain ramp that fades the generator in and out without a click.

The ramp has R + 1 positions 0..R with gain ``0.5 - 0.5*cos(pi*p/R)``: 0 at p = 0 and 1 at
p = R, monotone in between. Each rendered sample moves the position one step towards the
target, so a fade that reverses half-way (stop during a fade-in) carries on from the gain it
had reached: the gain is continuous and monotone within each fade.
"""

from __future__ import annotations

import numpy as np

#: Direction of travel.
RISING, HOLDING, FALLING = 1, 0, -1


class RaisedCosineRamp:
    """Gain state of a raised-cosine fade of ``length`` samples (R).

    Parameters
    ----------
    length : int
        R >= 1: a fade-in from silence reaches full gain R samples after its first (zero) sample.
    block : int
        Largest block :meth:`fill` is asked for.

    Examples
    --------
    >>> ramp = RaisedCosineRamp(4, block=8)
    >>> ramp.rise_from_silence()
    >>> gain = np.empty(6)
    >>> ramp.fill(gain)
    >>> np.round(gain, 4).tolist()
    [0.0, 0.1464, 0.5, 0.8536, 1.0, 1.0]
    """

    def __init__(self, length: int, block: int) -> None:
        self.length = int(length)
        self.position = -1  # position of the last sample rendered; -1: silent, the next is position 0
        self.direction = HOLDING
        self._steps = np.arange(1, block + 1, dtype=np.float64)

    @property
    def silent(self) -> bool:
        """True while the gain is zero and not rising."""
        return self.direction != RISING and self.position <= 0

    def frames_to_end(self) -> int | None:
        """Samples until the fade under way completes (inclusive), or None when holding."""
        if self.direction == RISING:
            return self.length - self.position
        if self.direction == FALLING:
            return self.position
        return None

    def rise_from_silence(self) -> None:
        """Start a fade-in whose first sample has zero gain."""
        self.position, self.direction = -1, RISING

    def rise(self) -> None:
        """Fade in from the present gain (carry on where a fade-out had got to; from silence, from 0)."""
        if self.position <= 0:
            self.position = -1
        # Already at full gain (a fall asked for but not yet begun): hold there, do not fall.
        self.direction = RISING if self.position < self.length else HOLDING

    def fall(self) -> None:
        """Fade out from the present gain; already silent stays silent."""
        self.direction = FALLING if self.position > 0 else HOLDING
        if self.position < 0:
            self.position = -1

    def silence(self) -> None:
        """Zero gain from the next sample, no fade."""
        self.position, self.direction = -1, HOLDING

    def fill(self, gain: np.ndarray) -> None:
        """Write the gains of the next ``len(gain)`` samples and move the position on."""
        n = gain.shape[0]
        if self.direction == HOLDING:
            gain[...] = 1.0 if self.position >= self.length else 0.0
            return
        np.multiply(self._steps[:n], self.direction, out=gain)
        gain += self.position
        np.clip(gain, 0.0, self.length, out=gain)
        self.position = int(gain[-1]) if n else self.position
        gain *= np.pi / self.length
        np.cos(gain, out=gain)
        gain *= -0.5
        gain += 0.5
        if self.frames_to_end() == 0:
            self.direction = HOLDING
