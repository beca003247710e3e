"""Mains hum: a 50 or 60 Hz line and its low harmonics are not test tones.

When a capture shows a line at the mains frequency, peaks at its first few harmonics are hum
too (rectifiers and transformers make them; common practice, no source), and the search for
the strongest tone passes over them.
"""

from __future__ import annotations

from rtanalyzer.dsp.noise import local_noise
from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.dsp.tones import tone_near

MAINS_HZ = (50.0, 60.0)
# Harmonics treated as hum; higher ones are weak and would shadow real tones (600-720 Hz).
HUM_HARMONICS = 12
TOLERANCE_HZ = 1.0


def mains_line(spectrum: Spectrum) -> float | None:
    """Frequency of a detected mains line, or None."""
    for nominal in MAINS_HZ:
        found = tone_near(spectrum, nominal, max(1.0, TOLERANCE_HZ / spectrum.bin_hz))
        if found is None:
            continue
        noise = local_noise(spectrum, found.frequency_hz)
        if found.level_dbfs > noise.detection_dbfs:
            return found.frequency_hz
    return None


def is_hum(frequency_hz: float, mains_hz: float | None, spectrum: Spectrum) -> bool:
    """Is a peak at this frequency a harmonic of the mains line?"""
    if mains_hz is None:
        return False
    f = abs(frequency_hz)
    k = round(f / mains_hz)
    slack = max(TOLERANCE_HZ, 2 * spectrum.bin_hz)
    return 1 <= k <= HUM_HARMONICS and abs(f - k * mains_hz) <= slack
