"""A network design laid over the band view's measured points (see :mod:`rtanalyzer.gui.band_view`).

From a network file (the format of ``rtanalyzer network``, ``measurements/network_design.py``)
the design's phase error and the suppression it alone allows are computed across the audio
range, with the range that 90 % of builds within the stated tolerances fall in. The band view
draws them behind the points and passes the network to the diagnosis, which then knows the
ripple no trim removes.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from rtanalyzer.dsp.quadrature import image_rejection_db
from rtanalyzer.measurements.network_design import Network, compare_measured, error_spread_deg, read_network

GRID_HZ = (50.0, 12_000.0)
GRID_POINTS = 241
TOLERANCE_R_PCT = 1.0
TOLERANCE_C_PCT = 5.0
BUILDS = 1000
SHARE = 0.9
# The image-rejection relation gives infinity where the design crosses 90° exactly; cap it for a plot.
SUPPRESSION_CAP_DB = 90.0


@dataclass(frozen=True)
class Curve:
    """A design curve for one plot: values against frequency, and the builds' range (or None)."""

    frequency_hz: np.ndarray
    value: np.ndarray
    low: np.ndarray | None = None
    high: np.ndarray | None = None


@dataclass(frozen=True)
class Design:
    """A network design evaluated on a log-frequency grid."""

    network: Network
    name: str
    frequency_hz: np.ndarray
    error_deg: np.ndarray
    suppression_db: np.ndarray
    spread_low_deg: np.ndarray
    spread_high_deg: np.ndarray

    @classmethod
    def load(cls, path: str | Path) -> Design:
        """Read and evaluate a network file (``RtaError`` with one line for a bad one)."""
        network = read_network(path)
        f = np.geomspace(*GRID_HZ, GRID_POINTS)
        error = np.abs(network.difference_deg(f)) - 90.0
        suppression = np.minimum(image_rejection_db(1.0, np.radians(error)), SUPPRESSION_CAP_DB)
        low, high = error_spread_deg(network, f, TOLERANCE_R_PCT, TOLERANCE_C_PCT, BUILDS, seed=0, share=SHARE)
        return cls(network, Path(path).name, f, error, suppression, low, high)

    @property
    def legend(self) -> str:
        return (f"design {self.name}: dashed; shaded, {SHARE:.0%} of builds at {TOLERANCE_R_PCT:g} % R, "
                f"{TOLERANCE_C_PCT:g} % C")

    def curve(self, key: str) -> Curve | None:
        """The design's curve for a plot of ``key`` (None: the design says nothing of it)."""
        if key == "phase_error_deg":
            return Curve(self.frequency_hz, self.error_deg, self.spread_low_deg, self.spread_high_deg)
        if key in ("predicted_suppression_db", "sideband_suppression_db"):
            return Curve(self.frequency_hz, self.suppression_db)
        return None

    def against(self, points: Sequence[dict[str, Any]]) -> list[str]:
        """What the measured network points say against the design, in words."""
        if not points:
            return []
        c = compare_measured(self.network, list(points))
        return [
            f"against the design ({self.name}): the build turns the phase by {c['mean_difference_deg']:+.2f}° on "
            f"average (a constant the phase trimmer takes out) and departs from the design's shape by "
            f"{c['spread_deg']:.2f}° peak to peak (parts off their values; no trim removes that)"
        ]
