"""Running average of the last few windowed spectra, updated with one FFT per readout.

A live readout transforms only the newest window and keeps a running sum of the last
``averages`` power spectra, instead of recomputing a Welch average over the whole span each
time: the same figures for about 1/averages of the work.
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft

from rtanalyzer.dsp.spectrum import Spectrum, equivalent_averages
from rtanalyzer.dsp.window import cosine_sum


# Rebuild the running sum from the stored spectra this often (pushes).
RESUM_EVERY = 1000


class RunningSpectrum:
    """Average of the power spectra of the last ``averages`` windows pushed.

    Parameters
    ----------
    nfft : int
        Window length in samples.
    rate_hz : float
        Sample rate.
    is_complex : bool
        Complex (I/Q) windows give a two-sided spectrum.
    averages : int
        How many of the newest windows are averaged (1: no averaging).
    """

    def __init__(self, nfft: int, rate_hz: float, is_complex: bool, averages: int = 1) -> None:
        if averages < 1:
            raise ValueError(f"averages must be at least 1, got {averages}")
        self.nfft = nfft
        self.rate_hz = float(rate_hz)
        self.is_complex = is_complex
        self.averages = averages
        self._window = cosine_sum(nfft)
        bins = nfft if is_complex else nfft // 2 + 1
        self._history = np.zeros((averages, bins))
        self._sum = np.zeros(bins)
        self._count = 0
        scale = (1.0 if is_complex else 2.0) / self._window.sum()
        self._scale2 = scale * scale
        self.hop = nfft  # frames between the last two windows, for the noise statistics

    def reset(self) -> None:
        self._history[:] = 0.0
        self._sum[:] = 0.0
        self._count = 0

    def push(self, window_samples: np.ndarray, hop: int | None = None) -> Spectrum:
        """Add the newest window (``nfft`` samples) and return the current average."""
        x = np.asarray(window_samples)
        if x.shape != (self.nfft,):
            raise ValueError(f"window must hold {self.nfft} samples, got shape {x.shape}")
        spec = (sfft.fft if self.is_complex else sfft.rfft)(x * self._window, workers=1)
        power = (spec.real**2 + spec.imag**2) * self._scale2
        if not self.is_complex:
            power[0] /= 4.0
            power[-1] /= 4.0
        slot = self._count % self.averages
        self._sum -= self._history[slot]
        self._history[slot] = power
        self._sum += power
        self._count += 1
        if self._count % RESUM_EVERY == 0:
            self._sum = self._history.sum(axis=0)  # drop rounding the running sum gathers
        if hop is not None:
            self.hop = max(1, int(hop))
        used = min(self._count, self.averages)
        effective = equivalent_averages(self.nfft, self.hop, used) if used > 1 else 1.0
        # Clamp tiny negative residues the running subtraction can leave in empty bins.
        averaged = np.maximum(self._sum / used, 0.0)
        return Spectrum(averaged, self.rate_hz, self.nfft, used, self.is_complex, effective)
