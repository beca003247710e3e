"""Memoryless envelope models of the exciter's linear amplifier (AM/AM and AM/PM).

The input is the complex envelope scaled so that 1.0 is the amplifier's saturation level;
every model has unit small-signal gain, so the output is in the same units.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rtanalyzer.sources.bench.knobs import BenchKnobs


def rapp_gain(r: np.ndarray, smoothness: float) -> np.ndarray:
    """Rapp AM/AM as a gain: output amplitude / input amplitude ``r`` (saturation 1).

    The Rapp curve is ``r / (1 + r^(2p))^(1/(2p))``; as a gain it is defined at r = 0 too.

    References
    ----------
    C. Rapp, "Effects of HPA-nonlinearity on a 4-DPSK/OFDM-signal for a digital sound
    broadcasting system", Proc. 2nd European Conf. on Satellite Communications, 1991.
    """
    two_p = 2.0 * smoothness
    return (1.0 + r**two_p) ** (-1.0 / two_p)


def saleh_am_pm_rad(r: np.ndarray, alpha_rad: float, beta: float = 1.0) -> np.ndarray:
    """Saleh-type AM/PM phase ``α·r² / (1 + β·r²)`` in radians.

    References
    ----------
    A. A. M. Saleh, "Frequency-independent and frequency-dependent nonlinear models of TWT
    amplifiers", IEEE Trans. Commun. 29(11), 1981.
    """
    r2 = r * r
    return alpha_rad * r2 / (1.0 + beta * r2)


@dataclass(frozen=True)
class Amplifier:
    """One envelope amplifier, built from the knobs.

    Attributes
    ----------
    model : {"rapp", "cubic", "linear"}
    smoothness : float
        Rapp p.
    am_pm_rad : float
        AM/PM phase at saturation (r = 1); β is fixed at 1, so Saleh's α is twice this.
    a3 : float
        For "cubic": the RF coefficient of y = x + a3·x³, whose in-band envelope equivalent is
        y = z + (3/4)·a3·|z|²·z (the standard band-pass reduction of a cubic).
    """

    model: str = "linear"
    smoothness: float = 2.0
    am_pm_rad: float = 0.0
    a3: float = 0.0

    @classmethod
    def from_knobs(cls, knobs: BenchKnobs) -> "Amplifier":
        return cls(knobs.amplifier, knobs.rapp_smoothness, float(np.radians(knobs.am_pm_deg)), knobs.cubic_a3)

    def __call__(self, x: np.ndarray) -> np.ndarray:
        """Amplify envelope ``x`` (complex, saturation 1.0); returns a new array."""
        if self.model == "linear":
            return np.array(x, dtype=np.complex128)
        if self.model == "cubic":
            return x + 0.75 * self.a3 * (x.real**2 + x.imag**2) * x
        r = np.abs(x)
        phase = saleh_am_pm_rad(r, 2.0 * self.am_pm_rad, 1.0)
        return x * (rapp_gain(r, self.smoothness) * np.exp(1j * phase))
