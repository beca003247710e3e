"""Best-so-far of the figure a builder is trimming toward, and the direction of the last change."""

from __future__ import annotations

from dataclasses import dataclass

# measurement -> (JSON key of the figure, True when larger is better, name for people)
FIGURES = {
    "sideband": ("worst_sideband_suppression_db", True, "opposite-sideband suppression"),
    "twotone": ("worst_imd_db_pep", False, "worst IMD"),
    "quadrature": ("worst_predicted_suppression_db", True, "suppression the 90° network allows"),
}
# Where a result keeps the same figure for the worst point inside the user's band: a trim is
# judged there (a tone outside the voice band does not decide it).
IN_BAND = {
    "sideband": ("worst_in_band", "sideband_suppression_db"),
    "quadrature": ("band", "worst_predicted_suppression_db"),
}


def figure_value(measurement: str, result: dict) -> float | None:
    """The figure trimmed toward: the worst inside the band when the result has one, else overall."""
    path = IN_BAND.get(measurement)
    if path is not None:
        inner = result.get(path[0])
        if isinstance(inner, dict) and inner.get(path[1]) is not None:
            return inner[path[1]]
    key = FIGURES.get(measurement, (None,))[0]
    return result.get(key) if key else None
# Changes smaller than this are shown as steady (readout noise, not a trim).
STEADY_DB = 0.05


@dataclass
class BestTracker:
    key: str
    larger_is_better: bool
    best: float | None = None
    last: float | None = None
    trend: str = "steady"  # "better", "worse" or "steady"

    measurement: str = ""

    @classmethod
    def for_measurement(cls, name: str) -> BestTracker | None:
        if name not in FIGURES:
            return None
        key, larger, _ = FIGURES[name]
        return cls(key, larger, measurement=name)

    def update(self, result: dict) -> None:
        if result.get("clipped"):
            return  # figures from a clipped input are not a trim's result
        value = figure_value(self.measurement, result) if self.measurement else result.get(self.key)
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
