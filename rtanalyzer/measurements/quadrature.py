"""Phase-network analysis: phase difference and amplitude ratio of the I and Q outputs, per tone.

The capture is stereo: the left input carries the network's I output, the right input its Q
output, both driven by one tone, several at once (a multitone) or one after another (a stepped
sweep). Each tone that stands clearly above the noise becomes one point:

- ``phase_difference_deg``: phase of left minus phase of right, wrapped to (-180, 180];
- ``phase_error_deg``: |phase difference| - 90 (positive: further apart than quadrature);
- ``amplitude_ratio_db``: right over left;
- ``time_offset_us``: the phase difference as a time at that frequency, φ/(360·f);
- ``predicted_suppression_db``: the opposite-sideband suppression these two errors alone allow,
  from the image-rejection relation with g = the amplitude ratio and ε = the phase error; when the
  errors are not clearly above their noise (``phase_uncertainty_deg``,
  ``amplitude_uncertainty_db``) it is a lower bound and ``predicted_suppression_is_bound`` is true
  (``dsp.quadrature.noise_limited_suppression``). The worst point's flag is
  ``worst_is_lower_bound``, at the top and in ``band``.

Tones are found in the Welch-averaged spectrum of the two channels (``dsp.spectrum``) and measured
by the windowed DTFT at their refined frequency over the samples in which they are present
(``dsp.quadrature``): the whole capture for steady tones, the settled part of its step for a
sweep.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

import numpy as np

from scipy.ndimage import median_filter

from rtanalyzer.dsp.noise import NEIGHBOURHOOD_BINS, band_noise, local_noise, median_to_mean, threshold_db
from rtanalyzer.dsp.quadrature import (
    is_steady,
    noise_limited_suppression,
    SpanPhasors,
    phase_std_rad,
    sweep_steps,
    wrap_deg,
)
from rtanalyzer.dsp.spectrum import Spectrum, averaged_spectrum
from rtanalyzer.dsp.tones import local_peaks, refine_peak, tone_near
from rtanalyzer.errors import CaptureError, MeasurementError
from rtanalyzer.measurements.base import Parameter, settings_with_defaults
from rtanalyzer.measurements.component import rounded, spectrum_of
from rtanalyzer.sources.capture import Capture, Signal

#: Below this frequency a peak is DC, its skirt or hum, never a test tone.
MIN_TONE_HZ = 20.0
#: A tone must stand at least this far above the local mean noise (or the detection threshold
#: of ``dsp.noise`` where that is higher) to count.
CLEAR_MARGIN_DB = 10.0
#: Peaks closer than this many bins to a stronger tone belong to it.
MIN_SPACING_BINS = 8
#: |phase difference| at or above this is antiphase; at or below IN_PHASE_DEG, in phase.
ANTIPHASE_DEG = 135.0
IN_PHASE_DEG = 45.0
DEFAULT_BAND_HZ = (300.0, 3000.0)
#: A step's tone is searched this far (Hz) from where the sweep's frames placed it.
STEP_SEARCH_HZ = 10.0

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class QuadraturePoint:
    """One tone as the two channels carry it (levels in dBFS, angles in degrees)."""

    frequency_hz: float
    left_dbfs: float
    right_dbfs: float
    phase_difference_deg: float
    phase_uncertainty_deg: float
    amplitude_uncertainty_db: float
    span_s: float

    @property
    def amplitude_ratio_db(self) -> float:
        return self.right_dbfs - self.left_dbfs

    @property
    def phase_error_deg(self) -> float:
        return abs(self.phase_difference_deg) - 90.0

    @property
    def time_offset_us(self) -> float:
        return self.phase_difference_deg / (360.0 * self.frequency_hz) * 1e6

    def _suppression(self) -> tuple[float, bool]:
        value, bound = noise_limited_suppression(self.amplitude_ratio_db, self.phase_error_deg,
                                                 self.amplitude_uncertainty_db, self.phase_uncertainty_deg)
        return float(value), bool(bound)

    @property
    def predicted_suppression_db(self) -> float:
        """The suppression the two errors allow; only a lower bound when they are within the noise."""
        return self._suppression()[0]

    @property
    def predicted_suppression_is_bound(self) -> bool:
        """True when the errors are not clearly above their noise: the figure is then "at least"."""
        return self._suppression()[1]

    @property
    def worst_key(self) -> tuple[float, bool]:
        """Sort key of the worst point: lowest figure, a measured one before a bound of the same value."""
        return self._suppression()

    @property
    def status(self) -> str:
        """``quadrature``, ``antiphase`` (about 180 degrees apart) or ``in phase`` (about 0)."""
        a = abs(self.phase_difference_deg)
        if a >= ANTIPHASE_DEG:
            return "antiphase"
        if a <= IN_PHASE_DEG:
            return "in phase"
        return "quadrature"

    def to_json(self) -> dict[str, Any]:
        return {
            "frequency_hz": rounded(self.frequency_hz, 3),
            # six decimals: a clean capture resolves errors of 1e-5 degree or dB
            "phase_difference_deg": rounded(self.phase_difference_deg, 6),
            "phase_error_deg": rounded(self.phase_error_deg, 6),
            "amplitude_ratio_db": rounded(self.amplitude_ratio_db, 6),
            "time_offset_us": rounded(self.time_offset_us, 4),
            "predicted_suppression_db": _suppression_json(*self._suppression()),
            "predicted_suppression_is_bound": self.predicted_suppression_is_bound,
            "left_dbfs": rounded(self.left_dbfs, 3),
            "right_dbfs": rounded(self.right_dbfs, 3),
            # three significant figures: a clean capture's uncertainties are far below 1e-5
            "phase_uncertainty_deg": _significant(self.phase_uncertainty_deg),
            "amplitude_uncertainty_db": _significant(self.amplitude_uncertainty_db),
            "span_s": rounded(self.span_s, 3),
            "status": self.status,
        }


@dataclass(frozen=True)
class QuadratureResult:
    sample_rate_hz: float
    points: tuple[QuadraturePoint, ...]
    noise_floor_dbfs: float
    analysis_bandwidth_hz: float
    band_hz: tuple[float, float]
    clipped: bool
    signal_label: str
    warnings: tuple[str, ...] = field(default=())
    calibration: tuple[str, ...] = field(default=())

    @property
    def worst_point(self) -> QuadraturePoint | None:
        return min(self.points, key=lambda p: p.worst_key) if self.points else None

    @property
    def band_points(self) -> tuple[QuadraturePoint, ...]:
        lo, hi = self.band_hz
        return tuple(p for p in self.points if lo <= p.frequency_hz <= hi)

    @property
    def worst_in_band(self) -> QuadraturePoint | None:
        inside = self.band_points
        return min(inside, key=lambda p: p.worst_key) if inside else None

    def to_json(self) -> dict[str, Any]:
        worst, in_band = self.worst_point, self.worst_in_band
        return {
            "measurement": "quadrature",
            "signal": self.signal_label,
            "sample_rate_hz": self.sample_rate_hz,
            "points": [p.to_json() for p in self.points],
            "worst_predicted_suppression_db": _suppression_json(*worst.worst_key) if worst else None,
            "worst_frequency_hz": rounded(worst.frequency_hz, 3) if worst else None,
            "worst_is_lower_bound": worst.predicted_suppression_is_bound if worst else None,
            "band": {
                "low_hz": self.band_hz[0],
                "high_hz": self.band_hz[1],
                "points": len(self.band_points),
                "worst_predicted_suppression_db": _suppression_json(*in_band.worst_key) if in_band else None,
                "worst_frequency_hz": rounded(in_band.frequency_hz, 3) if in_band else None,
                "worst_is_lower_bound": in_band.predicted_suppression_is_bound if in_band else None,
                "worst_phase_error_deg": rounded(in_band.phase_error_deg, 4) if in_band else None,
                "worst_amplitude_ratio_db": rounded(in_band.amplitude_ratio_db, 4) if in_band else None,
            },
            "noise_floor_dbfs": rounded(self.noise_floor_dbfs),
            "analysis_bandwidth_hz": rounded(self.analysis_bandwidth_hz, 4),
            "clipped": self.clipped,
            "calibration": list(self.calibration),
            "warnings": list(self.warnings),
        }


def _suppression_json(value: float, bound: bool) -> float:
    """Two decimals; a lower bound is rounded down so that it stays one."""
    return float(np.floor(value * 100.0) / 100.0) if bound else round(value, 2)


def _significant(value: float) -> float:
    return float(f"{value:.3g}")


def _mean_spectrum(left: Spectrum, right: Spectrum) -> Spectrum:
    return Spectrum(0.5 * (left.power + right.power), left.rate_hz, left.nfft, left.segments, False,
                    left.effective_segments)


def _clear_line(noise) -> float:
    """Power a tone must exceed to count as clearly above the noise."""
    return noise.power * 10.0 ** (max(noise.threshold_db, CLEAR_MARGIN_DB) / 10.0)


def find_tones(spectrum: Spectrum, range_db: float, requested: tuple[float, ...] = (), where: str = "") -> list[float]:
    """Frequencies of the tones in ``spectrum`` that stand clearly above the noise.

    Parameters
    ----------
    spectrum : Spectrum
        Real (one-sided) averaged spectrum, here the mean of the two channels.
    range_db : float
        Automatic search: keep peaks within this many dB of the strongest (distortion products
        and hum further down are not test tones).
    requested : tuple of float
        When given, exactly these tones (each searched within 2 Hz or 3 bins); a requested tone
        that is not clearly above the noise is an error.
    where : str
        Capture description for messages.

    Returns
    -------
    list of float
        Refined frequencies in Hz, ascending.

    Raises
    ------
    MeasurementError
        When no tone, or a requested one, stands clearly above the noise.
    """
    nyquist = spectrum.nyquist_hz
    found: list[float] = []
    if requested:
        for f in requested:
            if not (MIN_TONE_HZ <= f < nyquist):
                raise MeasurementError(
                    f"--tone {f:g} Hz is outside the range a tone can be measured in: "
                    f"{MIN_TONE_HZ:g}-{nyquist:g} Hz"
                )
            est = tone_near(spectrum, f, max(3.0, 2.0 / spectrum.bin_hz))
            if est is None or est.power <= _clear_line(local_noise(spectrum, est.frequency_hz)):
                raise MeasurementError(f"{where}: no tone stands clearly above the noise near {f:g} Hz")
            found.append(est.frequency_hz)
        return sorted(found)
    peaks = local_peaks(spectrum, MIN_TONE_HZ, nyquist - 8 * spectrum.bin_hz)
    if peaks.size:
        # Cheap first cut against a running median of the noise, 3 dB more lenient than the
        # exact test below (which leaves the tones' own lobes out of the noise).
        running = median_filter(spectrum.power, size=2 * NEIGHBOURHOOD_BINS + 1, mode="nearest")
        averages = round(spectrum.averages, 2)
        margin = 10.0 ** ((max(threshold_db(averages), CLEAR_MARGIN_DB) - 3.0) / 10.0)
        peaks = peaks[spectrum.power[peaks] > running[peaks] / median_to_mean(averages) * margin]
    if peaks.size:
        floor = spectrum.bins(peaks[0]) * 10.0 ** (-range_db / 10.0)
        accepted_bins: list[int] = []
        for k in peaks:
            if spectrum.bins(k) < floor:
                break  # strongest first: the rest are weaker still
            if any(abs(int(k) - a) < MIN_SPACING_BINS for a in accepted_bins):
                continue
            est = refine_peak(spectrum, int(k))
            if est.power > _clear_line(local_noise(spectrum, est.frequency_hz)):
                accepted_bins.append(int(k))
                found.append(est.frequency_hz)
    if not found:
        raise MeasurementError(
            f"{where}: no tone stands clearly above the noise on either channel; feed a tone or a "
            "multitone through the network"
        )
    return sorted(found)


def _spectra(left_x: np.ndarray, right_x: np.ndarray, signal: Signal, resolution_hz: float,
             nfft: int | None = None) -> tuple[Spectrum, Spectrum]:
    """Averaged spectra of the two channels (a silent right channel gives zeros, not an error)."""
    rate = signal.rate_hz
    if nfft is not None:
        return averaged_spectrum(left_x, rate, nfft), averaged_spectrum(right_x, rate, nfft)
    spec_l = spectrum_of(Signal(left_x, rate, label="left", source=signal.source), resolution_hz)
    if not np.any(right_x):
        return spec_l, Spectrum(np.zeros_like(spec_l.power), rate, spec_l.nfft, spec_l.segments, False,
                                spec_l.effective_segments)
    return spec_l, averaged_spectrum(right_x, rate, spec_l.nfft)


def _sweep_jobs(left_x, right_x, signal: Signal, range_db: float, requested: tuple[float, ...]):
    """One job per step of a stepped sweep: (frequency, start, stop, left and right spectra, others)."""
    rate = signal.rate_hz
    steps = sweep_steps(left_x, right_x, rate, range_db, MIN_TONE_HZ)
    if requested:
        chosen = []
        for f in requested:
            near = [s for s in steps if abs(s[2] - f) <= max(2.0, 0.01 * f)]
            if not near:
                raise MeasurementError(f"{signal.where}: no step of the sweep stands clearly above the noise "
                                       f"near {f:g} Hz")
            chosen.append(near[0])
        steps = chosen
    jobs = []
    for start, stop, rough in steps:
        n = stop - start
        nfft = int(2 ** np.floor(np.log2(n)))
        if nfft < 1024:
            continue
        sl, sr = _spectra(left_x[start:stop], right_x[start:stop], signal, 1.0, nfft)
        mean = _mean_spectrum(sl, sr)
        est = tone_near(mean, rough, max(3.0, STEP_SEARCH_HZ / mean.bin_hz))
        if est is None:
            continue
        jobs.append((est.frequency_hz, start, stop, sl, sr, ()))
    if not jobs:
        raise MeasurementError(f"{signal.where}: no step of the sweep stands clearly above the noise long enough "
                               "to measure (each step needs at least 1024 settled samples)")
    return jobs


def _clip_warning(signal: Signal) -> list[str]:
    if not signal.clipped:
        return []
    names = []
    for name, part in (("left (I)", signal.samples.real), ("right (Q)", signal.samples.imag)):
        if float(np.max(np.abs(part))) >= 1.0 - 1.5 * 2.0**-15:
            names.append(name)
    which = " and ".join(names) if names else "a channel"
    return [f"{which} of {signal.where} touched full scale (clipped): phase and amplitude figures are "
            "not valid until the input level is reduced"]


def measure_quadrature(signal: Signal, tones: tuple[float, ...] = (), band_hz=DEFAULT_BAND_HZ,
                       resolution_hz: float = 1.0, range_db: float = 40.0,
                       progress: Progress | None = None) -> QuadratureResult:
    """Phase difference, amplitude ratio and predicted suppression for each tone of a stereo capture.

    Parameters
    ----------
    signal : Signal
        Complex view left + j·right of a stereo capture (``Capture.view(iq=True)``).
    tones : tuple of float
        Restrict to these tones (Hz); default: every tone found.
    band_hz : (float, float)
        Band whose worst point is reported separately.
    resolution_hz : float
        Bin width of the spectrum used to find the tones.
    range_db : float
        Tones weaker than the strongest by more than this are left out (automatic search only).
    progress : callable, optional
        Called as ``progress(done, total)`` after each tone.

    Returns
    -------
    QuadratureResult

    Raises
    ------
    MeasurementError
        For a mono view, a bad band, or no tone above the noise.
    CaptureError
        For a capture that is digital silence or too short.

    References
    ----------
    Windowed DTFT per tone (Harris 1978); image-rejection relation (Razavi, *RF
    Microelectronics*); phase variance after Rife & Boorstyn (1974). See ``dsp.quadrature``.

    Examples
    --------
    A 1 kHz pair, Q lagging I by 89 degrees and 0.1 dB low (2 s, 48 kHz):

    >>> import numpy as np
    >>> t = np.arange(96000) / 48000
    >>> i = 0.5 * np.cos(2 * np.pi * 1000 * t)
    >>> q = 0.5 * 10 ** (-0.1 / 20) * np.cos(2 * np.pi * 1000 * t - np.radians(89.0))
    >>> r = measure_quadrature(Signal(i + 1j * q, 48000.0, label="stereo"))
    >>> p = r.points[0]
    >>> round(p.phase_difference_deg, 4), round(p.amplitude_ratio_db, 4), round(p.predicted_suppression_db, 1)
    (89.0, -0.1, 39.6)
    """
    if not signal.is_complex:
        raise MeasurementError(
            f"quadrature: {signal.where} is a single channel; it needs a stereo capture read as "
            "left + j·right (left = I output, right = Q output)"
        )
    lo, hi = (float(b) for b in band_hz)
    if not (np.isfinite(lo) and np.isfinite(hi) and 0.0 <= lo < hi):
        raise MeasurementError(f"--band {lo:g} {hi:g}: give two frequencies in Hz, low below high")
    if not (np.isfinite(range_db) and range_db > 0):
        raise MeasurementError(f"--range-db {range_db:g}: must be a positive number of dB")
    left_x = np.ascontiguousarray(signal.samples.real)
    right_x = np.ascontiguousarray(signal.samples.imag)
    rate = signal.rate_hz
    spec_l, spec_r = _spectra(left_x, right_x, signal, resolution_hz)
    mean = _mean_spectrum(spec_l, spec_r)
    requested = tuple(float(t) for t in tones)
    strongest = local_peaks(mean, MIN_TONE_HZ, mean.nyquist_hz - 8 * mean.bin_hz)
    if strongest.size and not is_steady(left_x, right_x, rate, refine_peak(mean, int(strongest[0])).frequency_hz):
        jobs = _sweep_jobs(left_x, right_x, signal, range_db, requested)
    else:
        freqs = find_tones(mean, range_db, requested, signal.where)
        jobs = [(f, 0, left_x.size, spec_l, spec_r, tuple(g for g in freqs if g != f)) for f in freqs]
    warnings = _clip_warning(signal)
    points = []
    floors = []
    transforms: dict[tuple[int, int], SpanPhasors] = {}
    for done, (f, start, stop, sl, sr, others) in enumerate(jobs, 1):
        if (start, stop) not in transforms:
            transforms = {(start, stop): SpanPhasors(left_x, right_x, rate, start, stop)}  # keep one span's arrays
        cl, cr = transforms[(start, stop)].at(f)
        missing = []
        stds = []
        for name, c, spec in (("left (I)", cl, sl), ("right (Q)", cr, sr)):
            noise = local_noise(spec, f, others)
            floors.append(noise.power)
            if abs(c) ** 2 <= _clear_line(noise):
                missing.append(name)
            stds.append(phase_std_rad(abs(c), noise.power, spec.enbw_hz, stop - start, rate))
        if progress is not None:
            progress(done, len(jobs))
        if missing:
            warnings.append(f"the {f:.1f} Hz tone is not clearly above the noise on the {' and '.join(missing)} "
                            "channel: no figures for it")
            continue
        std = float(np.hypot(*stds))
        points.append(QuadraturePoint(
            frequency_hz=f,
            left_dbfs=float(20.0 * np.log10(abs(cl))),
            right_dbfs=float(20.0 * np.log10(abs(cr))),
            phase_difference_deg=float(wrap_deg(np.degrees(np.angle(cl) - np.angle(cr)))),
            phase_uncertainty_deg=float(np.degrees(std)),
            amplitude_uncertainty_db=float(20.0 / np.log(10.0) * std),
            span_s=(stop - start) / rate,
        ))
    if not points:
        raise MeasurementError(f"{signal.where}: no tone stands clearly above the noise on both channels")
    warnings += _point_warnings(points, (lo, hi))
    if len(jobs) == 1 or jobs[0][1:3] == (0, left_x.size):
        freqs = [j[0] for j in jobs]
        span = (max(MIN_TONE_HZ, min(freqs) - 200 * mean.bin_hz), max(freqs) + 200 * mean.bin_hz)
        floor_dbfs, bandwidth = band_noise(mean, *span, tuple(freqs)).level_dbfs, mean.enbw_hz
    else:  # a sweep: each step has its own spectrum; report their median noise and bandwidth
        floor_dbfs = float(10.0 * np.log10(max(float(np.median(floors)), 1e-300)))
        bandwidth = float(np.median([j[3].enbw_hz for j in jobs]))
    return QuadratureResult(
        sample_rate_hz=rate,
        points=tuple(points),
        noise_floor_dbfs=floor_dbfs,
        analysis_bandwidth_hz=bandwidth,
        band_hz=(lo, hi),
        clipped=signal.clipped,
        signal_label=signal.label,
        warnings=tuple(warnings),
    )


def _point_warnings(points: list[QuadraturePoint], band: tuple[float, float]) -> list[str]:
    found = []
    anti = [p for p in points if p.status == "antiphase"]
    same = [p for p in points if p.status == "in phase"]
    if anti:
        where = ", ".join(f"{p.frequency_hz:.0f}" for p in anti)
        found.append(f"the channels are in antiphase (about 180 degrees apart) at {where} Hz, not in quadrature: "
                     "is one input fed from the same path inverted, or a network output taken twice?")
    if same:
        where = ", ".join(f"{p.frequency_hz:.0f}" for p in same)
        found.append(f"the channels are nearly in phase at {where} Hz, not in quadrature: is the same output "
                     "connected to both inputs?")
    signs = {np.sign(p.phase_difference_deg) for p in points if p.status == "quadrature"}
    if len(signs) > 1:
        found.append("the phase difference changes sign across the band: I leads Q at some tones and lags at others")
    if not any(band[0] <= p.frequency_hz <= band[1] for p in points):
        found.append(f"no tone lies inside the band {band[0]:g}-{band[1]:g} Hz")
    return found


class QuadratureMeasurement:
    """Plugin: phase-network analysis of a stereo capture (left = I output, right = Q output)."""

    name = "quadrature"
    summary = "phase difference and amplitude ratio of an audio 90-degree network's I and Q outputs, per tone"
    #: Which view of the capture the plugin reads: "stereo" = left + j·right, no --channel/--iq.
    view = "stereo"
    parameters = (
        Parameter("tone", float, "measure only this tone (repeat for several; default: every tone found)",
                  nargs="+", unit="Hz"),
        Parameter("band", float, "band whose worst point is reported", DEFAULT_BAND_HZ, nargs=2, unit="Hz"),
        Parameter("range_db", float, "ignore tones weaker than the strongest by more than this", 40.0, unit="dB"),
        Parameter("resolution", float, "bin width of the spectrum that finds the tones", 1.0, unit="Hz"),
    )

    def measure(self, signal: Signal, settings: Mapping[str, Any], spectrum: Spectrum | None = None,
                progress: Progress | None = None) -> QuadratureResult:
        """Measure ``signal`` (left + j·right); ``spectrum`` is not used (the phases need the samples)."""
        s = settings_with_defaults(self, settings)
        return measure_quadrature(signal, tuple(s["tone"] or ()), tuple(s["band"]), s["resolution"],
                                  s["range_db"], progress)


def stereo_view(capture: Capture, who: str = "analyze quadrature") -> Signal:
    """The left + j·right view of a stereo capture, labelled for a phase-network analysis.

    Raises
    ------
    CaptureError
        For a capture with fewer than two channels.
    """
    if capture.channels < 2:
        raise CaptureError(
            f"{capture.source}: {who} needs a stereo capture (left = I output, right = Q output of the network); "
            f"this one has {capture.channels} channel"
        )
    signal = capture.view(iq=True)
    return dataclasses.replace(signal, label="stereo (left = I, right = Q)")
