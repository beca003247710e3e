"""One quantity of the band view against log audio frequency (see :mod:`rtanalyzer.gui.band_view`).

The user's band is shaded, the points are joined, the worst point of the band is ringed. A
point that is only a lower bound (its unwanted component under the noise) is drawn as a hollow
upward triangle instead of a filled dot, and not joined to its neighbours: the true value lies
at or above it.

A plot can be given another quantity (:meth:`BandPlot.configure`) or hidden, so one canvas (one
GL context) serves every measurement the band view shows.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from vispy import scene

from rtanalyzer.gui import style
from rtanalyzer.gui.band_design import Curve
from rtanalyzer.gui.plots import Plot, PlotCanvas, _line, _rgba
from rtanalyzer.gui.ticks import frequency_ticks, value_ticks

X_RANGE_HZ = (100.0, 6000.0)  # the frequency axis, widened to take in every point
BAND_FILL = "#e3efe9"  # a pale tint of the wanted teal: the band judged
POINT = style.TRACE
WORST = style.UNWANTED
DESIGN = style.INK_SOFT
DESIGN_FILL = (0.42, 0.30, 0.58, 0.16)  # the IMD violet, faint: where 90 % of builds fall
DOT_PX = 7
BOUND_PX = 14
RING_PX = 21


@dataclass(frozen=True)
class PlotSpec:
    """What one band plot shows: ``key`` of each point against its frequency.

    ``bound_key`` names a point's flag that is False when the value is a lower bound only.
    """

    title: str
    unit: str
    key: str
    pad: float  # the smallest span of the value axis
    bound_key: str | None = None
    legend: str = "ringed: worst in band"


def band_value_ticks(target: int = 5):
    """Linear ticks labelled with enough decimals for their step (see ``ticks.format_number``)."""
    return value_ticks(target)


class BandPlot(Plot):
    """One quantity against log frequency: the band shaded, the points joined, the worst ringed."""

    def __init__(self, host: PlotCanvas, spec: PlotSpec) -> None:
        super().__init__(host, spec.title, "audio frequency, Hz", spec.unit, frequency_ticks(True), band_value_ticks(5))
        self.spec = spec
        self.shown = True
        self.drawn = (0, 0)  # points drawn as values, and as lower bounds
        s = self.view.scene
        self.band = scene.Rectangle(center=(0.5, 0.5), width=1.0, height=1.0, color=BAND_FILL, parent=s)
        self.band.order = -5
        self.line = _line(s, POINT, 2.0)
        self.dots = scene.Markers(parent=s)
        self.bounds = scene.Markers(parent=s)
        self.worst = scene.Markers(parent=s)
        self.design_fill = scene.Mesh(parent=s, color=DESIGN_FILL)
        self.design_fill.order = -4
        # over the band's shading, translucent so the band still shows through
        self.design_fill.set_gl_state(depth_test=False, blend=True)
        self.design_line = _line(s, DESIGN, 1.5, connect="segments")
        self.design: Curve | None = None
        self.design_fill.visible = self.design_line.visible = False
        self.line.visible = self.dots.visible = self.bounds.visible = self.worst.visible = False
        self.configure(spec)
        self.set_range(x=np.log10(X_RANGE_HZ), y=(-1.0, 1.0))

    def configure(self, spec: PlotSpec, shown: bool = True) -> None:
        """Show another quantity (its points come with the next :meth:`show_points`), or hide."""
        self.spec = spec
        self.title, self.y_title = spec.title, spec.unit
        self.shown = shown
        self.view.visible = shown
        self.set_legend(spec.legend if shown else "", WORST)
        self.host.chrome_changed()

    def set_design(self, curve: Curve | None) -> None:
        """Draw a design curve behind the points (dashed), with its builds' range shaded."""
        self.design = curve
        legend = f"- - - design · {self.spec.legend}" if curve is not None else self.spec.legend
        self.set_legend(legend if self.shown else "", WORST)

    def _draw_design(self) -> None:
        curve = self.design
        if curve is None:
            self.design_fill.visible = self.design_line.visible = False
            return
        x = np.log10(curve.frequency_hz)
        pts = np.column_stack([x, curve.value]).astype(np.float32)
        n = len(pts) - len(pts) % 2  # every other segment of the fine grid: a dashed curve
        self.design_line.set_data(pts[:n])
        self.design_line.visible = True
        if curve.low is None or curve.high is None:
            self.design_fill.visible = False
            return
        verts = np.empty((2 * len(x), 2), np.float32)
        verts[0::2] = np.column_stack([x, curve.low])
        verts[1::2] = np.column_stack([x, curve.high])
        k = np.arange(len(verts) - 2)
        self.design_fill.set_data(vertices=verts, faces=np.column_stack([k, k + 1, k + 2]).astype(np.uint32),
                                  color=DESIGN_FILL)
        self.design_fill.visible = True

    def chrome(self):
        if not self.shown:
            return [], [], [], []
        return super().chrome()

    def show_points(self, points: Sequence[dict[str, Any]], fkey: str, band: tuple[float, float],
                    worst: dict | None) -> None:
        """Draw ``points`` (dicts with the frequency under ``fkey`` and this plot's key)."""
        key, bound_key = self.spec.key, self.spec.bound_key
        xs_all = [math.log10(X_RANGE_HZ[0]), math.log10(X_RANGE_HZ[1])]
        pts, is_bound = [], []
        for p in points:
            if p.get(key) is None or not p.get(fkey):
                continue
            pts.append((math.log10(p[fkey]), p[key]))
            is_bound.append(bound_key is not None and p.get(bound_key) is False)
        xs_all += [x for x, _ in pts]
        x0, x1 = min(xs_all) - 0.03, max(xs_all) + 0.03
        values = self._design_values(band)  # the design's part inside the band counts for the range
        if pts:
            data = np.asarray(pts, np.float32)
            flags = np.asarray(is_bound, bool)
            values = np.concatenate([values, data[:, 1]])
            # join the measured values only: a bound says nothing of the curve's shape
            joined = ~flags[:-1] & ~flags[1:]
            self.line.set_data(data, connect=np.append(joined, False))
            self.line.visible = bool(joined.any())
            self._markers(self.dots, data[~flags], size=DOT_PX, face_color=_rgba(POINT), edge_width=0)
            self._markers(self.bounds, data[flags], symbol="triangle_up", size=BOUND_PX,
                          face_color=_rgba(style.PLOT), edge_color=_rgba(POINT), edge_width=2.0)
            self.drawn = (int((~flags).sum()), int(flags.sum()))
        else:
            self.drawn = (0, 0)
            self.line.visible = self.dots.visible = self.bounds.visible = False
        if values.size:
            lo, hi = float(values.min()), float(values.max())
            span = max(hi - lo, self.spec.pad)
            y0, y1 = lo - 0.2 * span, hi + 0.25 * span
        else:
            y0, y1 = -self.spec.pad, self.spec.pad
        self._draw_design()
        if worst is not None and worst.get(key) is not None and worst.get(fkey):
            at = np.asarray([[math.log10(worst[fkey]), worst[key]]], np.float32)
            self._markers(self.worst, at, size=RING_PX, face_color=(1, 1, 1, 0), edge_color=_rgba(WORST),
                          edge_width=2.5)
        else:
            self.worst.visible = False
        b0, b1 = math.log10(band[0]), math.log10(band[1])
        self.band.center = ((b0 + b1) / 2.0, (y0 + y1) / 2.0)
        self.band.width = max(b1 - b0, 1e-6)
        self.band.height = (y1 - y0) * 4.0
        self.set_range(x=(x0, x1), y=(y0, y1))

    def _design_values(self, band: tuple[float, float]) -> np.ndarray:
        curve = self.design
        if curve is None:
            return np.zeros(0)
        inside = (curve.frequency_hz >= band[0]) & (curve.frequency_hz <= band[1])
        parts = [curve.value[inside]]
        if curve.low is not None and curve.high is not None:
            parts += [curve.low[inside], curve.high[inside]]
        return np.concatenate(parts)

    @staticmethod
    def _markers(visual: scene.Markers, data: np.ndarray, **style_kw) -> None:
        visual.visible = len(data) > 0
        if len(data):
            visual.set_data(np.ascontiguousarray(data), **style_kw)
