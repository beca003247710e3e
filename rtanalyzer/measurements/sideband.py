"""Opposite-sideband and carrier suppression from a single- or multi-tone capture.

Opposite (unwanted) sideband suppression = wanted level - unwanted level (dB, positive is
good); carrier suppression = strongest wanted level - carrier level (dBc below the wanted
tone). A residue under the noise gives a lower bound on the suppression, never a number.
Besides the overall worst point, the worst point whose tone lies inside an audio band (``band``,
default 300-3000 Hz) is reported: tones outside the band a builder cares about should not hide
or set the figure that matters.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Mapping, Sequence

import numpy as np

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.errors import MeasurementError, PlanError
from rtanalyzer.measurements.base import Parameter, settings_with_defaults
from rtanalyzer.measurements.component import Component, measure_at, plan_floor, rounded, spectrum_of
from rtanalyzer.measurements.plan import PlanRequest, lock, strongest_tone
from rtanalyzer.measurements.warnings import capture_warnings, lock_warnings, resolution_warnings
from rtanalyzer.sources.capture import Signal

PLAN_PARAMETERS = (
    Parameter("carrier", float, "audio frequency where the suppressed carrier lands", unit="Hz"),
    Parameter("wanted", str, "side of the carrier the wanted sideband is on", "auto",
              choices=("above", "below", "auto")),
    Parameter("resolution", float, "analysis bin width to aim for", 1.0, unit="Hz"),
)
DEFAULT_BAND_HZ = (300.0, 3000.0)
# A wanted sideband this far below the capture's strongest component is probably not the
# exciter's output for that tone (a wrong --tone locking onto a distortion product).
MUCH_WEAKER_DB = 20.0


def check_band(band: Sequence[Any]) -> tuple[float, float]:
    """``band`` as (low, high) Hz; anything but two finite frequencies 0 < low < high is a one-line error."""
    try:
        lo, hi = (float(b) for b in band)
    except (TypeError, ValueError):
        raise MeasurementError(f"--band {band!r}: give two frequencies in Hz, LOW HIGH") from None
    if not (np.isfinite(lo) and np.isfinite(hi) and 0.0 < lo < hi):
        raise MeasurementError(f"--band {lo:g} {hi:g}: give two frequencies in Hz above 0, low below high")
    return lo, hi


def worst_in_band(points: Sequence[Mapping[str, Any]], band: Sequence[float]) -> dict[str, Any] | None:
    """The point with the lowest suppression among those whose tone lies in ``band`` (ends included).

    Works on the JSON points, so a calibration that changes their figures afterwards can reuse it.

    Returns
    -------
    dict or None
        ``{"tone_hz", "sideband_suppression_db", "is_lower_bound"}``; None when no point inside
        has a figure.

    Examples
    --------
    >>> pts = [{"tone_hz": 200.0, "sideband_suppression_db": 30.0, "unwanted_detected": True},
    ...        {"tone_hz": 2900.0, "sideband_suppression_db": 41.2, "unwanted_detected": True},
    ...        {"tone_hz": 1000.0, "sideband_suppression_db": 62.0, "unwanted_detected": False}]
    >>> worst_in_band(pts, (300.0, 3000.0))
    {'tone_hz': 2900.0, 'sideband_suppression_db': 41.2, 'is_lower_bound': False}
    """
    lo, hi = band
    inside = [p for p in points if lo <= p["tone_hz"] <= hi and p.get("sideband_suppression_db") is not None]
    if not inside:
        return None
    worst = min(inside, key=lambda p: p["sideband_suppression_db"])
    return {
        "tone_hz": worst["tone_hz"],
        "sideband_suppression_db": worst["sideband_suppression_db"],
        "is_lower_bound": not worst["unwanted_detected"],
    }


@dataclass(frozen=True)
class SidebandPoint:
    tone_hz: float
    wanted: Component
    unwanted: Component

    @property
    def suppression_db(self) -> float | None:
        """Wanted minus unwanted; a lower bound when the unwanted is not detected."""
        if not self.wanted.detected:
            return None
        return self.wanted.level_dbfs - self.unwanted.bound_dbfs


@dataclass(frozen=True)
class SidebandResult:
    sample_rate_hz: float
    carrier: Component
    points: tuple[SidebandPoint, ...]
    noise_floor_dbfs: float
    analysis_bandwidth_hz: float
    wanted_side: str
    tuning_offset_hz: float | None
    clipped: bool
    signal_label: str
    warnings: tuple[str, ...] = field(default=())
    band_hz: tuple[float, float] = DEFAULT_BAND_HZ
    sweep_steps: int = 0  # steps of a stepped sweep measured one by one (0: a steady capture)

    @property
    def strongest_wanted_dbfs(self) -> float | None:
        levels = [p.wanted.level_dbfs for p in self.points if p.wanted.detected]
        return max(levels) if levels else None

    @property
    def carrier_suppression_db(self) -> float | None:
        top = self.strongest_wanted_dbfs
        return None if top is None else top - self.carrier.bound_dbfs

    @property
    def worst_point(self) -> SidebandPoint | None:
        scored = [p for p in self.points if p.suppression_db is not None]
        return min(scored, key=lambda p: p.suppression_db) if scored else None

    def points_json(self) -> list[dict[str, Any]]:
        return [
            {
                "tone_hz": p.tone_hz,
                "wanted_hz": rounded(p.wanted.frequency_hz),
                "unwanted_hz": rounded(p.unwanted.frequency_hz),
                "wanted_dbfs": rounded(p.wanted.level_dbfs),
                "unwanted_dbfs": rounded(p.unwanted.level_dbfs),
                "unwanted_detected": p.unwanted.detected,
                "sideband_suppression_db": rounded(p.suppression_db),
            }
            for p in self.points
        ]

    def to_json(self) -> dict[str, Any]:
        worst = self.worst_point
        points = self.points_json()
        return {
            "measurement": "sideband",
            "signal": self.signal_label,
            "sample_rate_hz": self.sample_rate_hz,
            "carrier_hz": rounded(self.carrier.frequency_hz),
            "carrier_dbfs": rounded(self.carrier.level_dbfs),
            "carrier_detected": self.carrier.detected,
            "carrier_suppression_db": rounded(self.carrier_suppression_db),
            "wanted_side": self.wanted_side,
            "tuning_offset_hz": rounded(self.tuning_offset_hz),
            "points": points,
            "worst_sideband_suppression_db": rounded(worst.suppression_db) if worst else None,
            "worst_is_lower_bound": (not worst.unwanted.detected) if worst else None,
            "band_hz": list(self.band_hz),
            "worst_in_band": worst_in_band(points, self.band_hz),
            "noise_floor_dbfs": rounded(self.noise_floor_dbfs),
            "analysis_bandwidth_hz": rounded(self.analysis_bandwidth_hz, 4),
            "clipped": self.clipped,
            "sweep_steps": self.sweep_steps,
            "warnings": list(self.warnings),
        }


class SidebandMeasurement:
    """Plugin: opposite-sideband and carrier suppression per modulating tone."""

    name = "sideband"
    summary = "opposite-sideband and carrier suppression for one or more modulating tones"
    parameters = (
        Parameter("tone", float, "modulating tone fed to the exciter (repeat for several)",
                  required=True, nargs="+", unit="Hz"),
        *PLAN_PARAMETERS,
        Parameter("band", float, "audio band whose worst point is reported", DEFAULT_BAND_HZ, nargs=2, unit="Hz"),
    )

    def measure(self, signal: Signal, settings: Mapping[str, Any], spectrum: Spectrum | None = None,
                progress=None) -> SidebandResult:
        """Measure ``signal``; a live engine may pass its running ``spectrum`` of the same signal.

        A recorded stepped sweep (its strongest component does not play throughout) is measured
        step by step (``sideband_sweep``), ``progress(done, total)`` called after each step.
        """
        s = settings_with_defaults(self, settings)
        check_band(s["band"])
        if spectrum is None and _is_sweep(signal):
            from rtanalyzer.measurements.sideband_sweep import measure_sweep

            result = measure_sweep(self._measure_steady, signal, s, progress)
            return self._band_note(result)
        return self._band_note(self._measure_steady(signal, s, spectrum))

    @staticmethod
    def _band_note(result: SidebandResult) -> SidebandResult:
        band = result.band_hz
        if worst_in_band(result.points_json(), band) is None:
            note = f"no tone with a suppression figure lies inside the band {band[0]:g}-{band[1]:g} Hz (--band): no in-band worst"
            result = replace(result, warnings=(*result.warnings, note))
        return result

    def _measure_steady(self, signal: Signal, s: Mapping[str, Any], spectrum: Spectrum | None = None) -> SidebandResult:
        """Every tone playing throughout ``signal`` (settings ``s`` with defaults applied)."""
        band = check_band(s["band"])
        request = PlanRequest(tuple(float(t) for t in s["tone"]), s["carrier"], s["wanted"])
        offline = spectrum is None
        spectrum = spectrum_of(signal, s["resolution"]) if offline else spectrum
        locked = lock(spectrum, request)
        positions = tuple(locked.positions().values())
        points = tuple(
            SidebandPoint(
                tone,
                measure_at(spectrum, locked.wanted_hz(tone), positions),
                measure_at(spectrum, locked.unwanted_hz(tone), positions),
            )
            for tone in sorted(request.tones_hz)
        )
        carrier = measure_at(spectrum, locked.carrier_hz, positions)
        warnings = [*capture_warnings(signal), *lock_warnings(locked, spectrum)]
        if offline:
            warnings += resolution_warnings(spectrum)
        try:
            loudest = strongest_tone(spectrum)
        except PlanError:
            loudest = None
        for p in points:
            if loudest is not None and p.wanted.detected and \
                    10 * np.log10(loudest.power) - p.wanted.level_dbfs > MUCH_WEAKER_DB:
                warnings.append(
                    f"the wanted sideband of the {p.tone_hz:g} Hz tone ({p.wanted.level_dbfs:.1f} dBFS) is "
                    f"{10 * np.log10(loudest.power) - p.wanted.level_dbfs:.0f} dB below the capture's strongest "
                    f"component at {loudest.frequency_hz:.1f} Hz: is --tone right?"
                )
            if not p.wanted.detected:
                warnings.append(
                    f"the wanted sideband of the {p.tone_hz:g} Hz tone is not above the noise at "
                    f"{p.wanted.frequency_hz:.1f} Hz: no suppression figure for it"
                )
            elif p.unwanted.detected and p.suppression_db < 0.0:
                warnings.append(
                    f"at {p.tone_hz:g} Hz the unwanted side is {-p.suppression_db:.1f} dB stronger "
                    "than the wanted side: check --wanted and --carrier"
                )
            elif p.unwanted.detected and p.suppression_db < 6.0:
                warnings.append(
                    f"at {p.tone_hz:g} Hz the unwanted sideband is within 6 dB of the wanted one: "
                    "check the wanted side (--wanted) and the phasing"
                )
        if signal.is_complex and abs(locked.carrier_hz) < 2 * spectrum.bin_hz * 6:
            warnings.append("the carrier sits at 0 Hz of the I/Q capture: the sound card's DC offset adds to it")
        result = SidebandResult(
            sample_rate_hz=signal.rate_hz,
            carrier=carrier,
            points=points,
            noise_floor_dbfs=plan_floor(spectrum, positions).level_dbfs,
            analysis_bandwidth_hz=spectrum.enbw_hz,
            wanted_side=locked.wanted_side,
            tuning_offset_hz=locked.tuning_offset_hz,
            clipped=signal.clipped,
            signal_label=signal.label,
            warnings=tuple(warnings),
            band_hz=band,
        )
        return result


def _is_sweep(signal: Signal) -> bool:
    """Does the capture's strongest component stop and start (a stepped sweep), rather than play
    throughout as a tone or multitone does?"""
    from rtanalyzer.dsp.noise import MAIN_LOBE_BINS
    from rtanalyzer.dsp.quadrature import is_steady
    from rtanalyzer.dsp.tones import local_peaks, refine_peak

    x = signal.samples
    if not np.any(x):
        return False  # the steady path says "digital silence"
    spectrum = spectrum_of(signal, 10.0)
    low = 2 * MAIN_LOBE_BINS * spectrum.bin_hz
    peaks = local_peaks(spectrum, low, spectrum.nyquist_hz - low)
    if not peaks.size:
        return False
    f = abs(refine_peak(spectrum, int(peaks[0])).frequency_hz)
    left, right = (x.real, x.imag) if signal.is_complex else (x, x)
    return not is_steady(left, right, signal.rate_hz, f)
