"""Opposite-sideband and carrier suppression from a single- or multi-tone capture.

Opposite (unwanted) sideband suppression = wanted level - unwanted level (dB, positive is
good); carrier suppression = strongest wanted level - carrier level (dBc below the wanted
tone). A residue under the noise gives a lower bound on the suppression, never a number.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.measurements.base import Parameter, settings_with_defaults
from rtanalyzer.measurements.component import Component, measure_at, plan_floor, rounded, spectrum_of
from rtanalyzer.measurements.plan import PlanRequest, lock
from rtanalyzer.measurements.warnings import capture_warnings, lock_warnings, resolution_warnings
from rtanalyzer.sources.capture import Signal

PLAN_PARAMETERS = (
    Parameter("carrier", float, "audio frequency where the suppressed carrier lands", unit="Hz"),
    Parameter("wanted", str, "side of the carrier the wanted sideband is on", "auto",
              choices=("above", "below", "auto")),
    Parameter("resolution", float, "analysis bin width to aim for", 1.0, unit="Hz"),
)


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

    def to_json(self) -> dict[str, Any]:
        worst = self.worst_point
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
            "points": [
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
            ],
            "worst_sideband_suppression_db": rounded(worst.suppression_db) if worst else None,
            "worst_is_lower_bound": (not worst.unwanted.detected) if worst else None,
            "noise_floor_dbfs": rounded(self.noise_floor_dbfs),
            "analysis_bandwidth_hz": rounded(self.analysis_bandwidth_hz, 4),
            "clipped": self.clipped,
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
    )

    def measure(self, signal: Signal, settings: Mapping[str, Any], spectrum: Spectrum | None = None) -> SidebandResult:
        """Measure ``signal``; a live engine may pass its running ``spectrum`` of the same signal."""
        s = settings_with_defaults(self, settings)
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
        for p in points:
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
        return SidebandResult(
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
        )
