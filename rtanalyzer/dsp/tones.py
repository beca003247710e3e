"""Sub-bin location and level of a tone in an averaged spectrum.

A tone between bins k0 and k0+1 lights its bins in proportion to the window kernel at the
offsets; the ratio (|X[k0+1]| - |X[k0-1]|) / |X[k0]| is an odd, monotonic function of the
fractional offset that the exact kernel of ``dsp.window`` tabulates. Inverting it gives the
offset, and dividing the peak bin by the kernel there gives the level with the scalloping
loss removed (window-specific interpolation in the manner of Grandke 1983, here for the
Blackman-Harris kernel).

References
----------
.. [1] T. Grandke, "Interpolation algorithms for discrete Fourier transforms of weighted
   signals", IEEE Trans. Instrum. Meas. 32(2), 1983.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.dsp.window import kernel


@dataclass(frozen=True)
class ToneEstimate:
    """A located tone: frequency in Hz, power on the spectrum's scale (amplitude**2)."""

    frequency_hz: float
    power: float
    position: float  # fractional bin index

    @property
    def amplitude(self) -> float:
        return float(np.sqrt(self.power))

    @property
    def level_dbfs(self) -> float:
        return power_db(self.power)


def power_db(power: float) -> float:
    """Level in dB of a power on the spectrum's scale (dBFS for a tone)."""
    return float(10.0 * np.log10(max(power, 1e-300)))


@lru_cache(maxsize=16)
def _ratio_table(nfft: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    delta = np.linspace(-0.5, 0.5, 4001)
    k0 = kernel(delta, nfft)
    ratio = (kernel(1.0 - delta, nfft) - kernel(1.0 + delta, nfft)) / k0
    return ratio, delta, k0


def refine_peak(spectrum: Spectrum, k0: int) -> ToneEstimate:
    """Sub-bin frequency and scalloping-corrected power of the tone whose peak bin is ``k0``."""
    lo, mid, hi = np.sqrt(spectrum.bins(np.array([k0 - 1, k0, k0 + 1])))
    ratio, delta, k_at = _ratio_table(spectrum.nfft)
    if mid <= 0.0:
        return ToneEstimate(spectrum.frequency(float(k0)), 0.0, float(k0))
    d = float(np.interp((hi - lo) / mid, ratio, delta))
    gain = float(np.interp(d, delta, k_at))
    position = k0 + d
    return ToneEstimate(spectrum.frequency(position), float((mid / gain) ** 2), position)


def local_peaks(spectrum: Spectrum, f_lo_hz: float, f_hi_hz: float) -> np.ndarray:
    """Bins between two frequencies that are at least as high as both neighbours, strongest first.

    Only such bins count as tones, so the skirt of a strong tone just outside the range is
    not mistaken for a tone inside it.
    """
    a = int(np.ceil(f_lo_hz / spectrum.bin_hz))
    b = int(np.floor(f_hi_hz / spectrum.bin_hz))
    if b < a:
        return np.array([], dtype=int)
    k = np.arange(a, b + 1)
    if not spectrum.is_complex:
        k = k[(k >= 1) & (k < len(spectrum.power) - 1)]
    p = spectrum.bins(k)
    peaks = (p >= spectrum.bins(k - 1)) & (p >= spectrum.bins(k + 1)) & (p > 0)
    order = np.argsort(p[peaks])[::-1]
    return k[peaks][order]


def peak_bin(spectrum: Spectrum, f_lo_hz: float, f_hi_hz: float) -> int | None:
    """Index of the strongest local maximum between two frequencies, or None if there is none."""
    peaks = local_peaks(spectrum, f_lo_hz, f_hi_hz)
    return int(peaks[0]) if peaks.size else None


def locate_tone(spectrum: Spectrum, f_lo_hz: float, f_hi_hz: float) -> ToneEstimate | None:
    """Strongest tone between two frequencies, located to a fraction of a bin."""
    k0 = peak_bin(spectrum, f_lo_hz, f_hi_hz)
    return None if k0 is None else refine_peak(spectrum, k0)


def tone_near(spectrum: Spectrum, frequency_hz: float, tolerance_bins: float = 1.5) -> ToneEstimate | None:
    """The tone at an expected frequency, allowing a small clock or tuning error."""
    half = tolerance_bins * spectrum.bin_hz
    return locate_tone(spectrum, frequency_hz - half, frequency_hz + half)
