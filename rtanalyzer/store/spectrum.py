"""The averaged spectrum of a snapshot, kept small enough to store thousands and still redraw.

A measurement's spectrum (tens of thousands of bins) is reduced to at most
:data:`MAX_POINTS` levels in dB, float32, by taking the maximum of each run of ``pooled``
adjacent bins. The maximum (not the mean) keeps every narrow component at its level: an
unwanted sideband 40 dB down stays 40 dB down in the stored trace, where averaging the run
would lower it by up to 10*log10(pooled) dB. The price is that the noise between components
reads a few dB higher than in the full spectrum (the largest of ``pooled`` noise bins); the
figures themselves always come from the full spectrum and are stored as measured.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from rtanalyzer.store.errors import StoreError

if TYPE_CHECKING:  # the store reads a Spectrum's fields only; scipy stays unloaded
    from rtanalyzer.dsp.spectrum import Spectrum

#: Most points kept per stored spectrum.
MAX_POINTS = 4096
#: Level written for an empty bin (power 0), dB.
FLOOR_DB = -300.0


@dataclass(frozen=True, eq=False)
class CompactSpectrum:
    """Levels in dB at evenly spaced frequencies, ascending (I/Q: negative frequencies first).

    Attributes
    ----------
    levels_db : ndarray
        float32, each the largest level of ``pooled`` adjacent analysis bins, dBFS (the level
        of the sine of equal power in the analysis bandwidth, as the measurement reads it).
    start_hz : float
        Frequency of the first point: the centre of its run of bins.
    step_hz : float
        Spacing of the points (``pooled`` analysis bins).
    bin_hz : float
        Width of one analysis bin of the spectrum it was made from.
    enbw_hz : float
        The analysis bandwidth (window ENBW) of that spectrum.
    is_complex : bool
        True for an I/Q (two-sided) spectrum.
    pooled : int
        Analysis bins per point.
    """

    levels_db: np.ndarray
    start_hz: float
    step_hz: float
    bin_hz: float
    enbw_hz: float
    is_complex: bool
    pooled: int

    def __post_init__(self) -> None:
        levels = np.ascontiguousarray(self.levels_db, dtype="<f4")
        if levels.ndim != 1 or not 1 <= levels.size <= MAX_POINTS:
            raise StoreError(f"stored spectrum holds {levels.size} points; allowed 1..{MAX_POINTS}")
        object.__setattr__(self, "levels_db", levels)

    @property
    def stop_hz(self) -> float:
        """Frequency of the last point."""
        return self.start_hz + self.step_hz * (self.levels_db.size - 1)

    @property
    def frequencies_hz(self) -> np.ndarray:
        return self.start_hz + self.step_hz * np.arange(self.levels_db.size)

    def to_bytes(self) -> bytes:
        """The levels as little-endian float32, the form they are stored in."""
        return self.levels_db.tobytes()

    @staticmethod
    def levels_from_bytes(data: bytes) -> np.ndarray:
        if len(data) % 4:
            raise StoreError(f"stored spectrum has {len(data)} bytes, not a whole number of float32 values")
        return np.frombuffer(data, dtype="<f4").copy()

    def header(self) -> dict:
        """Everything but the levels, JSON-ready."""
        return {
            "start_hz": self.start_hz,
            "step_hz": self.step_hz,
            "stop_hz": self.stop_hz,
            "points": int(self.levels_db.size),
            "bin_hz": self.bin_hz,
            "enbw_hz": self.enbw_hz,
            "is_complex": self.is_complex,
            "pooled": self.pooled,
        }

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, CompactSpectrum):
            return NotImplemented
        return self.header() == other.header() and np.array_equal(self.levels_db, other.levels_db)

    __hash__ = None  # mutable array inside: not hashable


def compact_spectrum(spectrum: "Spectrum", max_points: int = MAX_POINTS) -> CompactSpectrum:
    """Reduce a measurement's spectrum to at most ``max_points`` dB levels (max of each run of bins).

    Parameters
    ----------
    spectrum : Spectrum
        Power per bin in the scale of :mod:`rtanalyzer.dsp.spectrum` (a sine of peak A reads A**2).
    max_points : int
        Upper limit of points kept, 1..MAX_POINTS.

    Returns
    -------
    CompactSpectrum
        For a real spectrum the bins 0 .. nfft/2 - 1 (the Nyquist bin is dropped so a
        power-of-two ``nfft`` divides evenly); for a complex one all nfft bins, reordered from
        -fs/2 upwards.

    Examples
    --------
    A tone of peak 0.5 (-6.02 dBFS) on bin 1000 of a 65536-point spectrum at 48 kHz keeps its
    level after pooling 8 bins into one point:

    >>> import numpy as np
    >>> from rtanalyzer.dsp.spectrum import Spectrum
    >>> p = np.full(32769, 1e-12); p[1000] = 0.25
    >>> c = compact_spectrum(Spectrum(p, 48000.0, 65536, 1, False))
    >>> c.levels_db.size, c.pooled, round(float(c.levels_db.max()), 2)
    (4096, 8, -6.02)
    """
    if not 1 <= max_points <= MAX_POINTS:
        raise StoreError(f"max_points {max_points}: allowed 1..{MAX_POINTS}")
    power = np.asarray(spectrum.power, dtype=np.float64)
    bin_hz = spectrum.bin_hz
    if spectrum.is_complex:
        power = np.fft.fftshift(power)
        first_hz = -(spectrum.nfft // 2) * bin_hz
    else:
        power = power[: spectrum.nfft // 2] if power.size > spectrum.nfft // 2 else power
        first_hz = 0.0
    pooled = max(1, -(-power.size // max_points))  # ceil
    runs = -(-power.size // pooled)
    padded = np.full(runs * pooled, 0.0)
    padded[: power.size] = power
    peak = padded.reshape(runs, pooled).max(axis=1)
    with np.errstate(divide="ignore"):
        levels = np.maximum(10.0 * np.log10(peak), FLOOR_DB)
    return CompactSpectrum(
        levels_db=levels.astype("<f4"),
        start_hz=float(first_hz + (pooled - 1) / 2.0 * bin_hz),
        step_hz=float(pooled * bin_hz),
        bin_hz=float(bin_hz),
        enbw_hz=float(spectrum.enbw_hz),
        is_complex=bool(spectrum.is_complex),
        pooled=int(pooled),
    )
