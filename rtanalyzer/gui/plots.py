"""The vispy plots: spectrum with markers, waveform and envelope, envelope versus drive, trend.

Each plot is a vispy ViewBox with a pan/zoom camera (drag to pan, wheel to zoom), our own
ticks and grid lines, and a title. The drawing code only moves data the analysis thread has
already prepared (:mod:`rtanalyzer.gui.frames`) into the visuals.
"""

from __future__ import annotations

import math
import time
from collections import deque

import numpy as np
from PyQt6.QtCore import QTimer
from vispy import scene
from vispy.color import Color
from vispy.visuals.text.text import FontManager, TextVisual

from rtanalyzer.gui import style
from rtanalyzer.gui.frames import DisplayFrame
from rtanalyzer.gui.ticks import FunctionTicker, TickFunction, frequency_ticks, value_ticks

LOG_MIN_HZ = 10.0  # left end of a log frequency axis
LABEL_PT = 10
AXIS_PT = 9


def _rgba(colour: str, alpha: float = 1.0) -> tuple[float, float, float, float]:
    c = Color(colour).rgba
    return (float(c[0]), float(c[1]), float(c[2]), alpha)


def dashed_hline(x0: float, x1: float, y: float, dash: float) -> np.ndarray:
    """Segment end points of a dashed horizontal line (for ``connect='segments'``)."""
    if not (dash > 0 and x1 > x0):
        return np.zeros((2, 2), np.float32)
    starts = np.arange(x0, x1, 2.0 * dash)[:2000]
    pts = np.empty((2 * len(starts), 2), np.float32)
    pts[0::2, 0] = starts
    pts[1::2, 0] = np.minimum(starts + dash, x1)
    pts[:, 1] = y
    return pts


def dashed_segment(p0, p1, pieces: int = 40) -> np.ndarray:
    t = np.linspace(0.0, 1.0, 2 * pieces)
    pts = np.outer(1 - t, p0) + np.outer(t, p1)
    return pts.astype(np.float32)


class Plot:
    """A titled plot cell: ViewBox, left and bottom axes, grid lines, all following the camera."""

    def __init__(self, grid, row: int, col: int, title: str, x_title: str, y_title: str,
                 x_ticks: TickFunction, y_ticks: TickFunction, y_axis_width: int = 58, col_span: int = 1,
                 stretch: float = 1.0, legend: bool = False) -> None:
        cell = grid.add_grid(row=row, col=col, col_span=col_span, spacing=0)
        cell.stretch = (1.0, stretch)
        self.cell = cell
        header = cell.add_grid(row=0, col=0, col_span=2, spacing=0)
        header.height_max = 26
        self.title = scene.Label(title, color=style.INK, font_size=11)
        header.add_widget(self.title, row=0, col=0)
        self.legend = scene.Label("", color=style.INK_SOFT, font_size=9) if legend else None
        if self.legend is not None:
            header.add_widget(self.legend, row=0, col=1)
        self.y_axis = scene.AxisWidget(
            orientation="left", axis_label=y_title, axis_font_size=AXIS_PT, tick_font_size=AXIS_PT,
            axis_label_margin=44, tick_label_margin=6, text_color=style.INK, axis_color=style.INK_SOFT,
            tick_color=style.INK_SOFT, axis_width=1, tick_width=1, major_tick_length=6, minor_tick_length=3,
        )
        self.y_axis.width_max = y_axis_width
        cell.add_widget(self.y_axis, row=1, col=0)
        self.view = cell.add_view(row=1, col=1, bgcolor=style.PLOT, border_color=style.RULE)
        self.x_axis = scene.AxisWidget(
            orientation="bottom", axis_label=x_title, axis_font_size=AXIS_PT, tick_font_size=AXIS_PT,
            axis_label_margin=30, tick_label_margin=14, text_color=style.INK, axis_color=style.INK_SOFT,
            tick_color=style.INK_SOFT, axis_width=1, tick_width=1, major_tick_length=6, minor_tick_length=3,
        )
        self.x_axis.height_max = 46
        cell.add_widget(self.x_axis, row=2, col=1)
        self.view.camera = scene.PanZoomCamera(aspect=None)
        self.x_ticks = x_ticks
        self.y_ticks = y_ticks
        self.x_axis.axis.ticker = FunctionTicker(self.x_axis.axis, lambda a, b: self.x_ticks(a, b))
        self.y_axis.axis.ticker = FunctionTicker(self.y_axis.axis, lambda a, b: self.y_ticks(a, b))
        self.grid_lines = scene.Line(np.zeros((2, 2), np.float32), color=style.GRID, width=1,
                                     connect="segments", method="gl", antialias=False, parent=self.view.scene)
        self.grid_lines.order = -10
        self.x_axis.link_view(self.view)
        self.y_axis.link_view(self.view)
        self.view.scene.transform.changed.connect(self._camera_moved)
        self.listeners: list = []

    # -- camera ---------------------------------------------------------------------------------

    @property
    def rect(self):
        return self.view.camera.rect

    def set_range(self, x=None, y=None) -> None:
        """Show exactly this range (vispy's set_range would add a margin of 0.1 units at margin=0)."""
        r = self.view.camera.rect
        x0, x1 = (float(x[0]), float(x[1])) if x is not None else (r.left, r.right)
        y0, y1 = (float(y[0]), float(y[1])) if y is not None else (r.bottom, r.top)
        if x1 > x0 and y1 > y0:
            self.view.camera.rect = (x0, y0, x1 - x0, y1 - y0)

    def pixel_size(self) -> tuple[float, float]:
        """Data units per pixel along x and y."""
        w, h = self.view.size
        r = self.rect
        return r.width / max(w, 1.0), r.height / max(h, 1.0)

    def _camera_moved(self, event=None) -> None:
        self.refresh_grid()
        for listener in self.listeners:
            listener()

    def refresh_axes(self) -> None:
        """Re-derive the axes' ranges (after a layout change vispy may not have)."""
        self.x_axis._view_changed()
        self.y_axis._view_changed()
        self.refresh_grid()

    def refresh_grid(self) -> None:
        r = self.rect
        xs, _, _ = self.x_ticks(r.left, r.right)
        ys, _, _ = self.y_ticks(r.bottom, r.top)
        segs = []
        for x in xs:
            segs += [(x, r.bottom), (x, r.top)]
        for y in ys:
            segs += [(r.left, y), (r.right, y)]
        if segs:
            self.grid_lines.set_data(np.asarray(segs, np.float32))


class SpectrumPlot(Plot):
    """The averaged spectrum in dBFS, peak hold, noise floor and labelled markers."""

    def __init__(self, grid, row: int, col: int, col_span: int = 1) -> None:
        self.log = False
        super().__init__(grid, row, col, "Spectrum of the captured audio", "frequency, Hz", "level, dBFS",
                         frequency_ticks(False), value_ticks(8), y_axis_width=64, col_span=col_span, stretch=1.5,
                         legend=True)
        scene_ = self.view.scene
        self.peak = scene.Line(np.zeros((2, 2), np.float32), color=style.PEAK, width=1, method="gl",
                               antialias=False, parent=scene_)
        self.trace = scene.Line(np.zeros((2, 2), np.float32), color=style.TRACE, width=1, method="gl",
                                antialias=False, parent=scene_)
        self.noise = scene.Line(np.zeros((2, 2), np.float32), color=style.NOISE, width=1.5, connect="segments",
                                method="gl", antialias=False, parent=scene_)
        self.dots = scene.Markers(parent=scene_)
        self.dots.set_data(np.zeros((1, 2), np.float32), size=0)
        # Under the pan/zoom camera vispy's y anchors are flipped: "top" stands text on its position.
        self.labels = scene.Text("", color=style.INK, font_size=LABEL_PT, anchor_x="center", anchor_y="top",
                                 parent=scene_)
        self.peak.order, self.trace.order, self.noise.order = 1, 2, 3
        self.dots.order, self.labels.order = 4, 5
        self._frame: DisplayFrame | None = None
        self._noise_level: float | None = None
        self.listeners.append(self._relayout)
        self.set_range(x=(0, 24000), y=(-140, 10))

    # -- frequency scale -------------------------------------------------------------------------

    def x_of(self, f) -> np.ndarray:
        f = np.asarray(f, dtype=np.float64)
        return np.log10(np.maximum(f, LOG_MIN_HZ)) if self.log else f

    def set_log(self, log: bool, nyquist_hz: float) -> None:
        if log == self.log:
            return
        r = self.rect
        lo, hi = (10.0 ** r.left, 10.0 ** r.right) if self.log else (r.left, r.right)
        self.log = log
        self.x_ticks = frequency_ticks(log)
        lo = max(lo, LOG_MIN_HZ * 2) if log else lo
        self.set_range(x=tuple(self.x_of([lo, min(hi, nyquist_hz)])), y=(r.bottom, r.top))
        if self._frame is not None:
            self.show_frame(self._frame)

    def fit(self, frame: DisplayFrame) -> None:
        """Frame the plan: from 0 Hz (or the lowest component) past the highest component."""
        nyq = frame.rate_hz / 2.0 if frame.rate_hz else 24000.0
        freqs = [m.frequency_hz for m in frame.markers]
        if frame.is_complex:
            reach = max([abs(f) for f in freqs] + [1000.0])
            x = (-min(nyq, reach * 1.4 + 500), min(nyq, reach * 1.4 + 500))
        elif freqs:
            hi = min(nyq, max(freqs) * 1.25 + 800.0)
            lo = 0.0 if not self.log else max(LOG_MIN_HZ * 2, min(f for f in freqs if f > 0) / 3.0)
            x = (lo, hi)
        else:
            x = (LOG_MIN_HZ * 2 if self.log else 0.0, nyq)
        floor = frame.noise_floor_dbfs
        bottom = math.floor(((floor if floor is not None else -130.0) - 15.0) / 10.0) * 10.0
        highest = max([m.level_dbfs for m in frame.markers] + [-20.0])
        top = max(10.0, math.ceil((highest + 22.0) / 10.0) * 10.0)
        self.set_range(x=tuple(self.x_of(x)), y=(bottom, top))

    # -- data ------------------------------------------------------------------------------------

    def show_frame(self, frame: DisplayFrame) -> None:
        self._frame = frame
        if frame.level_dbfs is not None:
            if self.log and frame.is_complex:
                pass  # a log axis has no negative frequencies: the view refuses it (see window)
            x = self.x_of(frame.frequencies_hz).astype(np.float32)
            self.trace.set_data(np.column_stack((x, frame.level_dbfs)))
            if frame.peak_dbfs is not None:
                self.peak.set_data(np.column_stack((x, frame.peak_dbfs)))
                self.peak.visible = True
            else:
                self.peak.visible = False
        self._noise_level = frame.noise_floor_dbfs
        if frame.noise_floor_dbfs is not None and frame.analysis_bandwidth_hz:
            self.legend.text = (f"- - -  noise floor {frame.noise_floor_dbfs:.1f} dBFS in "
                                f"{frame.analysis_bandwidth_hz:.1f} Hz (analysis bandwidth)"
                                ).replace("-", "\u2212").replace("\u2212 \u2212 \u2212", "- - -")
        else:
            self.legend.text = ""
        self._relayout()

    def _relayout(self) -> None:
        """Noise line across the view, markers and their labels placed clear of each other."""
        r = self.rect
        px, py = self.pixel_size()
        if self._noise_level is not None:
            self.noise.set_data(dashed_hline(r.left, r.right, self._noise_level, 6 * px))
            self.noise.visible = True
        else:
            self.noise.visible = False
        frame = self._frame
        markers = frame.markers if frame is not None else ()
        if not markers:
            self.dots.visible = False
            self.labels.visible = False
            return
        xs = self.x_of([m.frequency_hz for m in markers])
        ys = np.array([m.level_dbfs for m in markers], dtype=np.float64)
        face = np.array([_rgba(style.ROLE_COLOURS[m.role], 1.0 if m.detected else 0.0) for m in markers])
        edge = np.array([_rgba(style.ROLE_COLOURS[m.role]) for m in markers])
        self.dots.set_data(np.column_stack((xs, ys)).astype(np.float32), size=9, face_color=face,
                           edge_color=edge, edge_width=1.5, symbol="o")
        self.dots.visible = True
        trace_x = self.x_of(frame.frequencies_hz) if frame.frequencies_hz is not None else None
        texts, positions, colours = place_labels(markers, xs, ys, r, self.view.size, LABEL_PT, trace_x,
                                                 frame.level_dbfs)
        if texts:
            self.labels.text = texts
            self.labels.pos = positions
            self.labels.color = colours
            self.labels.visible = True
        else:
            self.labels.visible = False


def place_labels(markers, xs, ys, rect, size_px, font_pt: float, trace_x=None, trace_y=None, reserved=()):
    """Put each marker's label above it, clear of the other labels and of the trace beneath.

    Works in pixels (top-left origin); returns the data positions of each label's bottom centre.
    """
    w_px, h_px = float(size_px[0]), float(size_px[1])
    if rect.width == 0 or rect.height == 0 or w_px < 10 or h_px < 10:
        return [], np.zeros((0, 2), np.float32), []

    def y_px(level: float) -> float:
        return (rect.top - level) / rect.height * h_px

    def trace_top(x0: float, x1: float) -> float:
        """Highest point of the trace between two pixel columns, as a pixel row."""
        if trace_x is None or trace_y is None or len(trace_x) == 0:
            return h_px
        d0 = rect.left + x0 / w_px * rect.width
        d1 = rect.left + x1 / w_px * rect.width
        i0, i1 = np.searchsorted(trace_x, [d0, d1])
        i0, i1 = max(0, i0 - 1), min(len(trace_y), i1 + 1)
        if i1 <= i0:
            return h_px
        return y_px(float(np.max(trace_y[i0:i1])))

    font_px = font_pt * 96.0 / 72.0
    line_px = font_px * 1.3
    peaks = [((x - rect.left) / rect.width * w_px, y_px(y)) for x, y in zip(xs, ys)]
    placed: list[tuple[float, float, float, float]] = list(reserved)
    order = sorted(range(len(markers)), key=lambda i: ys[i], reverse=True)  # tallest first
    out: dict[int, tuple[float, float]] = {}

    def clashes(box):
        return [b for b in placed if box[0] < b[2] and box[2] > b[0] and box[1] < b[3] and box[3] > b[1]]

    for i in order:
        text = markers[i].label
        if not text:
            continue
        lines = text.split("\n")
        width = max(len(s) for s in lines) * font_px * 0.6 + 8
        height = len(lines) * line_px + 4
        px, py = peaks[i]
        if px < 0 or px > w_px:
            continue  # off screen
        best = None
        for dx in (0.0, width / 2 + 6, -(width / 2 + 6)):
            cx = min(max(px + dx, width / 2 + 2), w_px - width / 2 - 2)
            bottom = min(py - 9, trace_top(cx - width / 2, cx + width / 2) - 4)
            box = (cx - width / 2, bottom - height, cx + width / 2, bottom)
            for _ in range(40):
                hits = clashes(box)
                if not hits:
                    break
                bottom = min(b[1] for b in hits) - 3
                box = (cx - width / 2, bottom - height, cx + width / 2, bottom)
            if box[1] < 2:
                continue
            if best is None or box[3] > best[3] + 0.5 * line_px:  # prefer centred unless much lower
                best = box
        if best is None:  # no room above: beside the peak, right or left, clear of the trace
            for side in (1, -1):
                x0 = px + 10 if side > 0 else px - 10 - width
                if x0 < 2 or x0 + width > w_px - 2:
                    continue
                top = max(2.0, py - height / 2)
                box = (x0, top, x0 + width, top + height)
                if box[3] <= trace_top(box[0], box[2]) - 2 and not clashes(box):
                    best = box
                    break
        if best is None:  # nowhere clear: as high as it goes
            cx = min(max(px, width / 2 + 2), w_px - width / 2 - 2)
            best = (cx - width / 2, 2, cx + width / 2, 2 + height)
        placed.append(best)
        out[i] = ((best[0] + best[2]) / 2, best[3] - 2)
    texts, positions, colours = [], [], []
    for i, (cx, bottom) in out.items():
        texts.append(markers[i].label)
        positions.append((rect.left + cx / w_px * rect.width, rect.top - bottom / h_px * rect.height))
        colours.append(_rgba(style.ROLE_COLOURS[markers[i].role]))
    return texts, np.asarray(positions, np.float32).reshape(-1, 2), colours


class WaveformPlot(Plot):
    """A few milliseconds of the captured audio and its envelope (|analytic signal|)."""

    def __init__(self, grid, row: int, col: int) -> None:
        super().__init__(grid, row, col, "Waveform and envelope", "time, ms", "amplitude, FS", value_ticks(5),
                         value_ticks(4), y_axis_width=62)
        s = self.view.scene
        self.waves = [scene.Line(np.zeros((2, 2), np.float32), color=c, width=1, method="gl", antialias=False,
                                 parent=s) for c in ("#8a9aa8", "#c2a86a")]
        self.env = scene.Line(np.zeros((2, 2), np.float32), color=style.INK, width=2, method="gl",
                              antialias=False, parent=s)
        self.neg_env = scene.Line(np.zeros((2, 2), np.float32), color=style.INK, width=1, method="gl",
                                  antialias=False, parent=s)
        self._scale = 1.0
        self._span = 4.0
        self.set_range(x=(0, 4), y=(-1, 1))

    def show_frame(self, frame: DisplayFrame) -> None:
        if frame.waveform is None or frame.envelope is None:
            return
        t_ms = frame.time_s * 1000.0
        for i, line in enumerate(self.waves):
            if i < frame.waveform.shape[1]:
                line.set_data(np.column_stack((t_ms, frame.waveform[:, i])))
                line.visible = True
            else:
                line.visible = False
        self.env.set_data(np.column_stack((t_ms, frame.envelope)))
        self.neg_env.set_data(np.column_stack((t_ms, -frame.envelope)))
        peak = float(np.max(frame.envelope)) if frame.envelope.size else 1.0
        span = float(t_ms[-1]) if t_ms.size else 4.0
        want = _nice_ceiling(max(peak, 1e-6) * 1.15)
        if abs(math.log(want / self._scale)) > math.log(1.4) or abs(span - self._span) > 0.05 * self._span:
            self._scale, self._span = want, span
            self.set_range(x=(0, span), y=(-want, want))


class PatternPlot(Plot):
    """Measured envelope against the envelope of the fitted tones alone: a line if linear."""

    def __init__(self, grid, row: int, col: int) -> None:
        super().__init__(grid, row, col, "Envelope vs drive (linearity)", "drive: envelope of the fitted tones, FS",
                         "measured envelope, FS", value_ticks(4), value_ticks(4), y_axis_width=52)
        s = self.view.scene
        self.ideal = scene.Line(np.zeros((2, 2), np.float32), color=style.NOISE, width=1, connect="segments",
                                method="gl", antialias=False, parent=s)
        self.points = scene.Markers(parent=s)
        self.points.set_data(np.zeros((1, 2), np.float32), size=0)
        self.note = scene.Text("", color=style.INK_SOFT, font_size=LABEL_PT, anchor_x="left", anchor_y="bottom",
                               parent=s)
        self._scale = 1.0
        self.set_range(x=(0, 1), y=(0, 1))

    def show_frame(self, frame: DisplayFrame) -> None:
        if frame.drive is None or frame.measured is None or frame.drive.size == 0:
            self.points.visible = False
            self.ideal.visible = False
            self.note.text = "needs the fitted tones of a readout"
            self.note.pos = (0.03 * self._scale, 0.95 * self._scale)
            return
        top = _nice_ceiling(max(float(frame.drive.max()), float(frame.measured.max()), 1e-6) * 1.1)
        if abs(math.log(top / self._scale)) > math.log(1.4):
            self._scale = top
            self.set_range(x=(0, top), y=(0, top))
        self.ideal.set_data(dashed_segment((0.0, 0.0), (self._scale, self._scale)))
        self.ideal.visible = True
        if len(frame.pattern_tones_hz) < 2:
            self.note.text = "one tone: a steady envelope (use Two-tone for linearity)"
            self.note.pos = (0.03 * self._scale, 0.97 * self._scale)
        colour = _rgba(style.IMD, 0.8)
        self.points.set_data(np.column_stack((frame.drive, frame.measured)), size=5, face_color=colour,
                             edge_width=0, symbol="disc")
        self.points.visible = True
        if len(frame.pattern_tones_hz) >= 2:
            self.note.text = "dashed: linear (measured = drive)"
            self.note.pos = (0.03 * self._scale, 0.97 * self._scale)


class TrendPlot(Plot):
    """The chosen figure over the last minutes, with the best so far."""

    def __init__(self, grid, row: int, col: int, minutes: float = 5.0) -> None:
        super().__init__(grid, row, col, "Trend", "seconds ago", "dB", value_ticks(5), value_ticks(5),
                         y_axis_width=52)
        s = self.view.scene
        self.seconds = minutes * 60.0
        self.history: deque[tuple[float, float]] = deque()
        self.line = scene.Line(np.zeros((2, 2), np.float32), color=style.TRACE, width=2, method="gl",
                               antialias=False, parent=s)
        self.best_line = scene.Line(np.zeros((2, 2), np.float32), color=style.BEST, width=1.5,
                                    connect="segments", method="gl", antialias=False, parent=s)
        self.best_label = scene.Text("", color=style.BEST, font_size=LABEL_PT, anchor_x="left",
                                     anchor_y="top", parent=s)
        self._y = (0.0, 1.0)
        self.set_range(x=(-self.seconds, 0), y=self._y)

    def set_figure(self, title: str, unit: str) -> None:
        self.title.text = title
        self.y_axis.axis.axis_label = unit
        self.clear()

    def clear(self) -> None:
        self.history.clear()

    def add(self, t: float, value: float | None) -> None:
        if value is None or not math.isfinite(value):
            return
        self.history.append((t, float(value)))
        while self.history and t - self.history[0][0] > self.seconds:
            self.history.popleft()

    def redraw(self, now: float, best: float | None, unit: str) -> None:
        if not self.history:
            self.line.visible = self.best_line.visible = False
            self.best_label.text = ""
            return
        data = np.array(self.history, dtype=np.float64)
        data[:, 0] -= now
        self.line.set_data(data.astype(np.float32))
        self.line.visible = True
        values = data[:, 1]
        lo, hi = float(values.min()), float(values.max())
        if best is not None:
            lo, hi = min(lo, best), max(hi, best)
        pad = max(1.0, 0.15 * (hi - lo))
        want = (lo - pad, hi + pad)
        y0, y1 = self._y
        if lo < y0 or hi > y1 or (y1 - y0) > 3.0 * (want[1] - want[0]):
            self._y = (math.floor(want[0]), math.ceil(want[1]))
            self.set_range(x=(-self.seconds, 0), y=self._y)
        if best is not None:
            px, _ = self.pixel_size()
            self.best_line.set_data(dashed_hline(-self.seconds, 0.0, best, 5 * px))
            self.best_line.visible = True
            _, py = self.pixel_size()
            self.best_label.text = f"best {best:.1f} {unit}".replace("-", "\u2212")
            self.best_label.pos = (-self.seconds + 6 * px, best + 3 * py)
        else:
            self.best_line.visible = False
            self.best_label.text = ""


def _nice_ceiling(v: float) -> float:
    """1, 2 or 5 times a power of ten, at or above v."""
    power = 10.0 ** math.floor(math.log10(v))
    for m in (1.0, 2.0, 5.0, 10.0):
        if v <= m * power + 1e-12:
            return m * power
    return 10.0 * power


class PlotCanvas:
    """One vispy canvas (one GL context) holding any number of plots in a grid."""

    def __init__(self, parent=None) -> None:
        self.canvas = scene.SceneCanvas(keys=None, bgcolor=style.PAPER, parent=parent, show=False)
        self.grid = self.canvas.central_widget.add_grid(spacing=14, margin=6)
        self.plots: list[Plot] = []
        self.canvas.events.resize.connect(self._resized)
        self.last_draw = time.perf_counter()

    @property
    def native(self):
        return self.canvas.native

    def add(self, plot: Plot) -> Plot:
        self.plots.append(plot)
        return plot

    def _resized(self, event=None) -> None:
        # The grid lays its cells out after this event: refresh the axes once it has.
        QTimer.singleShot(0, self.refresh_axes)

    def refresh_axes(self) -> None:
        for plot in self.plots:
            plot.refresh_axes()

    def update(self) -> None:
        self.canvas.update()

    def share_fonts(self) -> int:
        """Give every text in the canvas one font manager, so each glyph is rendered once.

        vispy gives each text visual (every axis has two) its own, and renders each glyph's
        distance field on the CPU for each of them: seconds at start-up under software OpenGL.
        """
        fonts = FontManager(method="cpu")
        count = 0
        for visual in _text_visuals(self.canvas.scene, set()):
            visual._font_manager = fonts
            visual._update_font()
            count += 1
        return count


def _text_visuals(node, seen: set):
    if id(node) in seen:
        return
    seen.add(id(node))
    if isinstance(node, TextVisual):
        yield node
    for sub in getattr(node, "_subvisuals", ()):
        yield from _text_visuals(sub, seen)
    for child in getattr(node, "children", ()):
        yield from _text_visuals(child, seen)
