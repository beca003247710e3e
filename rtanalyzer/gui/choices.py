"""What the user chose in the window, kept apart from Qt so it can be saved, restored and tested.

:class:`GeneratorChoice` holds every field of the generator panel (the fields of the modes not
in use are kept too, so switching modes back and forth loses nothing) and makes the signal.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone

KINDS = ("tone", "twotone", "multitone", "sweep", "quadrature")
KIND_NAMES = {
    "tone": "Tone",
    "twotone": "Two-tone",
    "multitone": "Multitone",
    "sweep": "Stepped sweep",
    "quadrature": "Quadrature pair (I/Q out)",
}
SWEEP_SETTLE_FRACTION = 0.2  # start of each sweep step the analysis skips


@dataclass(frozen=True)
class GeneratorChoice:
    kind: str = "tone"
    tone_hz: float = 1000.0
    low_hz: float = 700.0
    high_hz: float = 1900.0
    band_low_hz: float = 300.0
    band_high_hz: float = 3000.0
    count: int = 16
    sweep_start_hz: float = 300.0
    sweep_stop_hz: float = 3000.0
    steps: int = 10
    dwell_s: float = 0.5
    q_gain_db: float = 0.0
    q_phase_deg: float = 0.0
    level_dbfs: float = -6.0

    def with_changes(self, **changes: Any) -> GeneratorChoice:
        return dataclasses.replace(self, **changes)

    def signal(self):
        """The generator signal; raises GeneratorError (one line) for fields that do not fit."""
        if self.kind == "tone":
            return Tone(self.tone_hz, self.level_dbfs)
        if self.kind == "twotone":
            return TwoTone(self.low_hz, self.high_hz, self.level_dbfs)
        if self.kind == "multitone":
            return Multitone.spread(self.band_low_hz, self.band_high_hz, int(self.count), self.level_dbfs)
        if self.kind == "sweep":
            return Sweep.log_range(self.sweep_start_hz, self.sweep_stop_hz, int(self.steps), self.level_dbfs,
                                   dwell_s=self.dwell_s, settle_s=self.dwell_s * SWEEP_SETTLE_FRACTION)
        if self.kind == "quadrature":
            return Quadrature(self.tone_hz, self.level_dbfs, self.q_gain_db, self.q_phase_deg)
        raise ValueError(f"generator kind {self.kind!r}: choose one of {', '.join(KINDS)}")

    @classmethod
    def from_signal(cls, signal, base: GeneratorChoice | None = None) -> GeneratorChoice:
        """The choice that describes ``signal`` (other fields from ``base``)."""
        c = base or cls()
        if isinstance(signal, Tone):
            return c.with_changes(kind="tone", tone_hz=signal.frequency_hz, level_dbfs=signal.level_dbfs)
        if isinstance(signal, TwoTone):
            return c.with_changes(kind="twotone", low_hz=signal.low_hz, high_hz=signal.high_hz,
                                  level_dbfs=signal.level_dbfs)
        if isinstance(signal, Multitone):
            f = signal.frequencies_hz
            return c.with_changes(kind="multitone", band_low_hz=f[0], band_high_hz=f[-1], count=len(f),
                                  level_dbfs=signal.level_dbfs)
        if isinstance(signal, Sweep):
            f = signal.frequencies_hz
            return c.with_changes(kind="sweep", sweep_start_hz=f[0], sweep_stop_hz=f[-1], steps=len(f),
                                  dwell_s=signal.dwell_s, level_dbfs=signal.level_dbfs)
        if isinstance(signal, Quadrature):
            return c.with_changes(kind="quadrature", tone_hz=signal.frequency_hz, q_gain_db=signal.amplitude_db,
                                  q_phase_deg=signal.phase_offset_deg, level_dbfs=signal.level_dbfs)
        return c

    def as_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> GeneratorChoice:
        """From saved settings: unknown keys ignored, bad values left at their defaults."""
        fields = {f.name: f for f in dataclasses.fields(cls)}
        good: dict[str, Any] = {}
        for name, value in data.items():
            field = fields.get(name)
            if field is None:
                continue
            default = getattr(cls(), name)
            try:
                good[name] = type(default)(value)
            except (TypeError, ValueError):
                continue
        if good.get("kind") not in KINDS:
            good.pop("kind", None)
        return cls(**good)
