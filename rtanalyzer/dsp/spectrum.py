"""Averaged, level-calibrated spectrum of a real or complex (I/Q) signal.

Scale: ``power[k]`` is the squared amplitude a sine would need to give that bin, so a tone of
peak A centred on a bin reads A**2 there (real signal: one-sided, factor 2 included; complex
signal: two-sided, a complex tone A*exp(j w t) reads A**2). Noise in a bin reads twice its
power in the window's equivalent noise bandwidth for a real signal (a sine of peak A has
power A**2/2), and its power for a complex one: either way ``10*log10(power)`` is the level
in dBFS of the sine of equal power in the analysis bandwidth.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import sliding_window_view

from rtanalyzer.dsp.window import RECOMMENDED_OVERLAP, cosine_sum, figures

# Aim for bins no wider than this: resolves carrier, sidebands and IMD products of
# voice-band tones and keeps tuning drift within a bin over a few seconds.
TARGET_BIN_HZ = 1.0
MIN_NFFT = 1024
# Segments transformed per FFT call.
BATCH = 4


@dataclass(frozen=True)
class Spectrum:
    """An averaged spectrum in natural FFT bin order (complex signals keep negative bins)."""

    power: np.ndarray
    rate_hz: float
    nfft: int
    segments: int
    is_complex: bool
    effective_segments: float = 0.0  # independent-equivalent count (0: same as segments)

    @property
    def averages(self) -> float:
        """Equivalent number of independent averages, for noise statistics."""
        return self.effective_segments or float(self.segments)

    @property
    def bin_hz(self) -> float:
        return self.rate_hz / self.nfft

    @property
    def enbw_hz(self) -> float:
        """Equivalent noise bandwidth of one bin (the analysis bandwidth), in Hz."""
        return figures(self.nfft).enbw_bins * self.bin_hz

    @property
    def nyquist_hz(self) -> float:
        return self.rate_hz / 2.0

    def position(self, frequency_hz: float) -> float:
        """Fractional bin index of a frequency (negative frequencies wrap for complex)."""
        pos = frequency_hz / self.bin_hz
        return pos % self.nfft if self.is_complex else pos

    def frequency(self, position: float) -> float:
        """Frequency in Hz of a fractional bin index (upper half is negative for complex)."""
        if self.is_complex and position >= self.nfft / 2:
            position -= self.nfft
        return position * self.bin_hz

    def bins(self, k) -> np.ndarray:
        """Power at integer bin indices (wrapping for complex, clamped for real)."""
        idx = np.asarray(k)
        if self.is_complex:
            return self.power[idx % self.nfft]
        return self.power[np.clip(idx, 0, len(self.power) - 1)]

    @property
    def frequencies_hz(self) -> np.ndarray:
        if self.is_complex:
            return np.fft.fftfreq(self.nfft, 1.0 / self.rate_hz)
        return np.fft.rfftfreq(self.nfft, 1.0 / self.rate_hz)


def choose_nfft(frames: int, rate_hz: float, bin_hz: float = TARGET_BIN_HZ) -> int:
    """Power-of-two segment length giving bins of at most ``bin_hz``, within the capture."""
    wanted = int(2 ** np.ceil(np.log2(rate_hz / bin_hz)))
    longest = int(2 ** np.floor(np.log2(max(frames, 1))))
    nfft = min(wanted, longest)
    if nfft < MIN_NFFT:
        raise ValueError(
            f"capture too short: {frames} samples, need at least {MIN_NFFT} "
            f"({MIN_NFFT / rate_hz * 1000:.0f} ms at {rate_hz:g} Hz)"
        )
    return nfft


def averaged_spectrum(
    samples: np.ndarray,
    rate_hz: float,
    nfft: int | None = None,
    overlap: float = RECOMMENDED_OVERLAP,
    workers: int = -1,
) -> Spectrum:
    """Welch-averaged spectrum with the Blackman-Harris window, in the scale described above.

    Parameters
    ----------
    samples : ndarray
        1-D real or complex samples, full scale 1.0.
    rate_hz : float
        Sample rate in Hz.
    nfft : int, optional
        Segment length; default from :func:`choose_nfft`.
    overlap : float
        Fraction of overlap between segments, 0 <= overlap < 1.
    workers : int
        Threads for the FFT (scipy.fft's meaning: -1 uses every core).

    Returns
    -------
    Spectrum

    Raises
    ------
    ValueError
        When the capture is shorter than one segment of the minimum length.

    Notes
    -----
    Averaging power over segments (Welch 1967) keeps a stationary tone's level and reduces
    the variance of the noise estimate by about the number of segments.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(48000) / 48000
    >>> s = averaged_spectrum(0.5 * np.cos(2 * np.pi * 1000 * t), 48000)
    >>> float(round(10 * np.log10(s.power.max()), 2))  # 1000 Hz is not on a bin centre here
    -6.39
    """
    x = np.asarray(samples)
    if x.ndim != 1:
        raise ValueError(f"samples must be 1-D, got shape {x.shape}")
    if not 0.0 <= overlap < 1.0:
        raise ValueError(f"overlap must be in [0, 1), got {overlap}")
    if nfft is None:
        nfft = choose_nfft(len(x), rate_hz)
    if len(x) < nfft:
        raise ValueError(f"capture of {len(x)} samples is shorter than one segment of {nfft}")
    hop = max(1, int(round(nfft * (1.0 - overlap))))
    count = 1 + (len(x) - nfft) // hop
    window = cosine_sum(nfft)
    is_complex = np.iscomplexobj(x)
    scale = (1.0 if is_complex else 2.0) / window.sum()
    segments = sliding_window_view(x, nfft)[::hop][:count]
    accumulated = np.zeros(nfft if is_complex else nfft // 2 + 1)
    transform = sfft.fft if is_complex else sfft.rfft
    # A few segments per call bounds memory and lets the FFT use both cores.
    for i in range(0, count, BATCH):
        spec = transform(segments[i : i + BATCH] * window, axis=1, workers=workers)
        pairs = spec.view(np.float64).reshape(spec.shape[0], spec.shape[1], 2)
        accumulated += np.einsum("ijk,ijk->j", pairs, pairs)  # |X|**2 without temporaries
    accumulated *= scale**2
    power = accumulated / count
    if not is_complex:
        # DC and Nyquist bins have no mirror image: undo the one-sided doubling there.
        power[0] /= 4.0
        if nfft % 2 == 0:
            power[-1] /= 4.0
    return Spectrum(power, float(rate_hz), nfft, count, is_complex, equivalent_averages(nfft, hop, count))


@lru_cache(maxsize=64)
def equivalent_averages(nfft: int, hop: int, count: int) -> float:
    """Independent-equivalent number of averaged segments for overlapped Welch averaging.

    K_eq = K / (1 + 2 * sum_{j=1}^{K-1} (1 - j/K) * rho(j*hop)**2), with rho the window's
    normalised overlap correlation (Welch 1967; Percival & Walden, "Spectral Analysis for
    Physical Applications", 1993, section 6.17).
    """
    window = cosine_sum(nfft)
    energy = float(np.sum(window**2))
    total = 0.0
    for j in range(1, count):
        lag = j * hop
        if lag >= len(window):
            break
        rho = float(np.dot(window[:-lag], window[lag:]) / energy)
        total += (1.0 - j / count) * rho**2
    return count / (1.0 + 2.0 * total)
