"""A component of the plan measured in a spectrum: its level, or a bound when under the noise."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rtanalyzer.dsp.noise import NoiseFloor, band_noise, local_noise
from rtanalyzer.dsp.spectrum import Spectrum, averaged_spectrum, choose_nfft
from rtanalyzer.dsp.tones import power_db, tone_near
from rtanalyzer.errors import CaptureError
from rtanalyzer.sources.capture import Signal

# How far (bins) a component may sit from its planned place: sample-clock and rounding slack.
PLACE_TOLERANCE_BINS = 1.0
# Margin (bins) around the plan's span over which the reported noise floor is taken.
FLOOR_MARGIN_BINS = 200


@dataclass(frozen=True)
class Component:
    """A planned component. ``power`` is noise-corrected and None when not detected."""

    frequency_hz: float
    power: float | None
    noise: NoiseFloor

    @property
    def detected(self) -> bool:
        return self.power is not None

    @property
    def level_dbfs(self) -> float | None:
        return None if self.power is None else power_db(self.power)

    @property
    def bound_dbfs(self) -> float:
        """The level if detected, else the most it can be while staying undetected."""
        return self.level_dbfs if self.detected else self.noise.detection_dbfs


def measure_at(spectrum: Spectrum, frequency_hz: float, exclude_hz: tuple[float, ...] = ()) -> Component:
    """Measure the component expected at ``frequency_hz``.

    Detected means the located peak stands above the local noise by the detection threshold;
    its power then has the mean noise power subtracted (the noise adds to the bin on average),
    which matters only within a few dB of the threshold.
    """
    noise = local_noise(spectrum, frequency_hz, exclude_hz)
    found = tone_near(spectrum, frequency_hz, PLACE_TOLERANCE_BINS)
    if found is None or found.level_dbfs <= noise.detection_dbfs:
        return Component(frequency_hz, None, noise)
    return Component(found.frequency_hz, found.power - noise.power, noise)


def spectrum_of(signal: Signal, resolution_hz: float = 1.0) -> Spectrum:
    """The averaged spectrum a measurement reads; unusable captures become one-line errors."""
    x = signal.samples
    if not np.any(x):
        raise CaptureError(f"{signal.where}: the capture is digital silence (every sample is zero)")
    if not (resolution_hz > 0 and np.isfinite(resolution_hz)):
        raise CaptureError(f"resolution {resolution_hz} Hz: must be a positive number of Hz")
    try:
        return averaged_spectrum(x, signal.rate_hz, choose_nfft(len(x), signal.rate_hz, resolution_hz))
    except ValueError as exc:
        raise CaptureError(f"{signal.where}: {exc}") from None


def plan_floor(spectrum: Spectrum, positions: tuple[float, ...]) -> NoiseFloor:
    """Noise floor over the span of the plan's components, leaving their lobes out."""
    margin = FLOOR_MARGIN_BINS * spectrum.bin_hz
    return band_noise(spectrum, min(positions) - margin, max(positions) + margin, positions)


def rounded(value: float | None, digits: int = 3) -> float | None:
    """JSON-friendly rounding that keeps None."""
    return None if value is None else round(float(value), digits)
