"""Local noise floor around a frequency, and the threshold a component must clear to count.

The floor is the median of the bins around the frequency, leaving out the main lobes of every
known component, divided by the median-to-mean ratio of the noise's distribution. The median
ignores the odd spur or hum line that a mean would follow. Averaged over K segments, a noise
bin's power is gamma-distributed with shape K (chi-squared with 2K degrees of freedom,
Welch 1967), which gives both the median-to-mean ratio and the detection threshold.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import stats

from rtanalyzer.dsp.spectrum import Spectrum

# Bins each side of a component that its main lobe occupies (first zeros at +/-4 bins).
MAIN_LOBE_BINS = 6
# Half width of the neighbourhood searched for noise, in bins, and at least this many Hz.
NEIGHBOURHOOD_BINS = 160
# Probability that noise alone crosses the threshold in one test.
FALSE_ALARM = 1e-4
# Never call a component detected with less margin than this over the mean noise.
MIN_THRESHOLD_DB = 6.0


@dataclass(frozen=True)
class NoiseFloor:
    """Mean noise power on the spectrum's scale near a frequency, and the detection line."""

    power: float
    threshold_db: float

    @property
    def level_dbfs(self) -> float:
        return float(10.0 * np.log10(max(self.power, 1e-300)))

    @property
    def detection_dbfs(self) -> float:
        """A component must exceed this level (dBFS) to count as detected."""
        return self.level_dbfs + self.threshold_db


@lru_cache(maxsize=256)
def median_to_mean(averages: float) -> float:
    """Median of a gamma(K) variable relative to its mean."""
    return float(stats.gamma.ppf(0.5, averages) / averages)


@lru_cache(maxsize=256)
def threshold_db(averages: float) -> float:
    """Detection margin over the mean noise for the chosen false-alarm probability."""
    margin = stats.gamma.isf(FALSE_ALARM, averages) / averages
    return float(max(MIN_THRESHOLD_DB, 10.0 * np.log10(margin)))


def local_noise(
    spectrum: Spectrum,
    frequency_hz: float,
    exclude_hz: tuple[float, ...] = (),
    half_width_bins: int = NEIGHBOURHOOD_BINS,
) -> NoiseFloor:
    """Noise floor near ``frequency_hz``, ignoring the main lobes at ``exclude_hz``.

    Parameters
    ----------
    spectrum : Spectrum
    frequency_hz : float
        Centre of the neighbourhood (the component's own lobe is always left out).
    exclude_hz : tuple of float
        Frequencies of other components whose main lobes must not count as noise.
    half_width_bins : int
        Half width of the neighbourhood.

    Returns
    -------
    NoiseFloor
    """
    centre = int(round(frequency_hz / spectrum.bin_hz))
    k = np.arange(centre - half_width_bins, centre + half_width_bins + 1)
    if not spectrum.is_complex:
        # Stay off DC (its lobe, and any offset) and the Nyquist edge.
        k = k[(k > MAIN_LOBE_BINS) & (k < len(spectrum.power) - MAIN_LOBE_BINS)]
    keep = np.ones(k.shape, dtype=bool)
    for f in (frequency_hz, *exclude_hz):
        c = f / spectrum.bin_hz
        if spectrum.is_complex:
            # Distance on the circle of bins.
            d = (k - c + spectrum.nfft / 2) % spectrum.nfft - spectrum.nfft / 2
        else:
            d = k - c
        keep &= np.abs(d) > MAIN_LOBE_BINS
    k = k[keep]
    if k.size < 16:
        # Nothing left nearby: fall back to the whole spectrum.
        values = spectrum.power
    else:
        values = spectrum.bins(k)
    averages = round(spectrum.averages, 2)
    mean = float(np.median(values) / median_to_mean(averages))
    return NoiseFloor(mean, threshold_db(averages))


def band_noise(spectrum: Spectrum, f_lo_hz: float, f_hi_hz: float, exclude_hz: tuple[float, ...] = ()) -> NoiseFloor:
    """Noise floor over a band, ignoring the main lobes at ``exclude_hz``."""
    centre = 0.5 * (f_lo_hz + f_hi_hz)
    half = max(NEIGHBOURHOOD_BINS, int(np.ceil(0.5 * (f_hi_hz - f_lo_hz) / spectrum.bin_hz)))
    return local_noise(spectrum, centre, exclude_hz, half)
