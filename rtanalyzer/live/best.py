"""Best-so-far of the figure a builder is trimming toward, and the direction of the last change."""

from __future__ import annotations

from dataclasses import dataclass

# measurement -> (JSON key of the figure, True when larger is better, name for people)
FIGURES = {
    "sideband": ("worst_sideband_suppression_db", True, "opposite-sideband suppression"),
    "twotone": ("worst_imd_db_pep", False, "worst IMD"),
    "quadrature": ("worst_predicted_suppression_db", True, "suppression the 90° network allows"),
}
# Changes smaller than this are shown as steady (readout noise, not a trim).
STEADY_DB = 0.05


@dataclass
class BestTracker:
    key: str
    larger_is_better: bool
    best: float | None = None
    last: float | None = None
    trend: str = "steady"  # "better", "worse" or "steady"

    @classmethod
    def for_measurement(cls, name: str) -> BestTracker | None:
        if name not in FIGURES:
            return None
        key, larger, _ = FIGURES[name]
        return cls(key, larger)

    def update(self, result: dict) -> None:
        value = result.get(self.key)
        if value is None:
            return
        if self.last is not None:
            delta = (value - self.last) * (1 if self.larger_is_better else -1)
            self.trend = "better" if delta > STEADY_DB else "worse" if delta < -STEADY_DB else "steady"
        self.last = value
        if self.best is None or (value > self.best if self.larger_is_better else value < self.best):
            self.best = value

    def reset(self) -> None:
        self.best = self.last

    def as_dict(self) -> dict:
        return {"figure": self.key, "value": self.last, "best": self.best, "trend": self.trend}
