"""The vispy plots: spectrum with markers, waveform and envelope, envelope versus drive, trend.

Each plot is a vispy ViewBox with a pan/zoom camera (drag to pan, wheel to zoom). Under
software OpenGL every visual drawn costs time, so the axes are not vispy's axis widgets (four
visuals each): a :class:`PlotCanvas` draws the ticks, tick labels and titles of all its plots
with one line visual and three text visuals, laid out in canvas pixels. The drawing code only
moves data the analysis thread has already prepared (:mod:`rtanalyzer.gui.frames`).
"""

from __future__ import annotations

import math
from collections import deque

import numpy as np
from PyQt6.QtCore import QTimer
from vispy import scene
from vispy.color import Color
from vispy.visuals.text.text import FontManager, TextVisual

from rtanalyzer.gui import style
from rtanalyzer.gui.frames import DisplayFrame
from rtanalyzer.gui.ticks import TickFunction, frequency_ticks, value_ticks

LOG_MIN_HZ = 10.0  # left end of a log frequency axis
LABEL_PT = 10  # marker labels
AXIS_PT = 9  # tick labels
TITLE_PT = 10  # titles, axis titles, legends
PX_PER_PT = 96.0 / 72.0
MINUS = "\u2212"


def _rgba(colour: str, alpha: float = 1.0) -> tuple[float, float, float, float]:
    c = Color(colour).rgba
    return (float(c[0]), float(c[1]), float(c[2]), alpha)


def text_width(text: str, points: float) -> float:
    """Rough width in pixels of a line of text (the chrome is laid out without measuring)."""
    return len(text) * points * PX_PER_PT * 0.56


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


def _line(parent, colour: str, width: float = 1.0, connect: str = "strip") -> scene.Line:
    return scene.Line(np.zeros((2, 2), np.float32), color=colour, width=width, connect=connect, method="gl",
                      antialias=False, parent=parent)


class Plot:
    """A ViewBox and what its axes say; the hosting canvas draws the axes."""

    MARGIN_TOP = 26
    MARGIN_RIGHT = 12
    MARGIN_BOTTOM = 46

    def __init__(self, host: PlotCanvas, title: str, x_title: str, y_title: str, x_ticks: TickFunction,
                 y_ticks: TickFunction, y_axis_width: int = 60) -> None:
        self.host = host
        self.title = title
        self.x_title = x_title
        self.y_title = y_title
        self.legend = ""
        self.legend_colour = style.INK_SOFT
        self.x_ticks = x_ticks
        self.y_ticks = y_ticks
        self.margin_left = y_axis_width
        self.view = scene.widgets.ViewBox(parent=host.canvas.scene, bgcolor=style.PLOT, border_color=style.RULE)
        self.view.camera = scene.PanZoomCamera(aspect=None)
        self.grid_lines = _line(self.view.scene, style.GRID, connect="segments")
        self.grid_lines.order = -10
        self.view.scene.transform.changed.connect(self._camera_moved)
        self.listeners: list = []
        self.box = (0.0, 0.0, 10.0, 10.0)  # the view's rectangle in canvas pixels

    # -- placing and the camera -----------------------------------------------------------------------

    def place(self, x: float, y: float, w: float, h: float) -> None:
        left, top = x + self.margin_left, y + self.MARGIN_TOP
        width = max(w - self.margin_left - self.MARGIN_RIGHT, 10.0)
        height = max(h - self.MARGIN_TOP - self.MARGIN_BOTTOM, 10.0)
        self.box = (left, top, width, height)
        self.view.pos = (left, top)
        self.view.size = (width, height)

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

    def set_legend(self, text: str, colour: str | None = None) -> None:
        colour = colour or self.legend_colour
        if text != self.legend or colour != self.legend_colour:
            self.legend, self.legend_colour = text, colour
            self.host.chrome_changed()

    def _camera_moved(self, event=None) -> None:
        self.refresh_grid()
        for listener in self.listeners:
            listener()
        self.host.chrome_changed()

    def refresh_grid(self) -> None:
        r = self.rect
        xs, _, _ = self.x_ticks(r.left, r.right)
        ys, _, _ = self.y_ticks(r.bottom, r.top)
        segs = [p for x in xs for p in ((x, r.bottom), (x, r.top))] + [p for y in ys for p in ((r.left, y), (r.right, y))]
        if segs:
            self.grid_lines.set_data(np.asarray(segs, np.float32))

    # -- the axes, in canvas pixels ------------------------------------------------------------------

    def chrome(self):
        """(tick segments, x tick labels, y tick labels, titles) for the canvas to draw."""
        x0, y0, w, h = self.box
        r = self.rect
        segs: list[tuple[float, float]] = []
        x_labels: list[tuple[str, tuple[float, float]]] = []
        y_labels: list[tuple[str, tuple[float, float]]] = []
        titles: list[tuple[str, tuple[float, float], float, str]] = []
        if r.width > 0 and r.height > 0:
            major, minor, labels = self.x_ticks(r.left, r.right)
            for v, text in zip(major, labels):
                px = x0 + (v - r.left) / r.width * w
                segs += [(px, y0 + h), (px, y0 + h + 5)]
                x_labels.append((text, (px, y0 + h + 7)))
            for v in minor:
                px = x0 + (v - r.left) / r.width * w
                segs += [(px, y0 + h), (px, y0 + h + 3)]
            major, minor, labels = self.y_ticks(r.bottom, r.top)
            for v, text in zip(major, labels):
                py = y0 + (r.top - v) / r.height * h
                segs += [(x0, py), (x0 - 5, py)]
                y_labels.append((text, (x0 - 7, py)))
            for v in minor:
                py = y0 + (r.top - v) / r.height * h
                segs += [(x0, py), (x0 - 3, py)]
        titles.append((self.title, (x0 + text_width(self.title, TITLE_PT) / 2, y0 - 13), 0.0, style.INK))
        if self.legend:
            titles.append((self.legend, (x0 + w - text_width(self.legend, TITLE_PT) / 2, y0 - 13), 0.0,
                           self.legend_colour))
        titles.append((self.x_title, (x0 + w / 2, y0 + h + 33), 0.0, style.INK))
        titles.append((self.y_title, (x0 - self.margin_left + 11, y0 + h / 2), -90.0, style.INK))
        return segs, x_labels, y_labels, titles


class PlotCanvas:
    """One vispy canvas (one GL context) with plots side by side and one layer for their axes."""

    def __init__(self) -> None:
        self.canvas = scene.SceneCanvas(keys=None, bgcolor=style.PAPER, show=False)
        root = self.canvas.scene
        self.ticks = _line(root, style.INK_SOFT, connect="segments")
        self.x_labels = scene.Text("", color=style.INK, font_size=AXIS_PT, anchor_x="center", anchor_y="bottom",
                                   parent=root)  # vispy's y anchors are flipped in pixel space: hangs below
        self.y_labels = scene.Text("", color=style.INK, font_size=AXIS_PT, anchor_x="right", anchor_y="center",
                                   parent=root)
        self.titles = scene.Text("", color=style.INK, font_size=TITLE_PT, anchor_x="center", anchor_y="center",
                                 parent=root)
        self.plots: list[Plot] = []
        self.weights: list[float] = []
        self._chrome_due = False
        self._last_chrome = None
        self.canvas.events.resize.connect(lambda event: self.layout())

    @property
    def native(self):
        return self.canvas.native

    def add(self, plot: Plot, weight: float = 1.0) -> Plot:
        self.plots.append(plot)
        self.weights.append(weight)
        self.layout()
        return plot

    def layout(self) -> None:
        w, h = self.canvas.size
        total = sum(self.weights) or 1.0
        x = 0.0
        for plot, weight in zip(self.plots, self.weights):
            width = w * weight / total
            plot.place(x, 0.0, width, h)
            x += width
        self.chrome_changed()

    def chrome_changed(self) -> None:
        """Redraw the axes soon (once, however many cameras moved)."""
        if not self._chrome_due:
            self._chrome_due = True
            QTimer.singleShot(0, self.refresh_chrome)

    def refresh_chrome(self) -> None:
        self._chrome_due = False
        segs, xl, yl, titles = [], [], [], []
        for plot in self.plots:
            s, x, y, t = plot.chrome()
            segs += s
            xl += x
            yl += y
            titles += [item for item in t if item[0]]
        key = (tuple(segs), tuple(xl), tuple(yl), tuple(titles))
        if key == self._last_chrome:
            return
        self._last_chrome = key
        if segs:
            self.ticks.set_data(np.asarray(segs, np.float32))
        for visual, items in ((self.x_labels, xl), (self.y_labels, yl)):
            visual.text = [text for text, _ in items] or ""
            if items:
                visual.pos = np.asarray([pos for _, pos in items], np.float32)
        self.titles.text = [t for t, _, _, _ in titles] or ""
        if titles:
            self.titles.pos = np.asarray([p for _, p, _, _ in titles], np.float32)
            self.titles.rotation = np.asarray([rot for _, _, rot, _ in titles], np.float32)
            self.titles.color = [_rgba(c) for _, _, _, c in titles]
        self.canvas.update()

    def update(self) -> None:
        self.canvas.update()

    def share_fonts(self) -> int:
        """Give every text in the canvas one font manager, so each glyph is rendered once.

        vispy gives each text visual its own and renders each glyph's distance field on the
        CPU for each of them: seconds at start-up under software OpenGL.
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


class SpectrumPlot(Plot):
    """The averaged spectrum in dBFS, peak hold, noise floor and labelled markers."""

    def __init__(self, host: PlotCanvas) -> None:
        self.log = False
        super().__init__(host, "Spectrum of the captured audio", "frequency, Hz", "level, dBFS",
                         frequency_ticks(False), value_ticks(8), y_axis_width=62)
        s = self.view.scene
        self.peak = _line(s, style.PEAK)
        self.trace = _line(s, style.TRACE)
        self.noise = _line(s, style.NOISE, 1.5, connect="segments")
        self.dots = scene.Markers(parent=s)
        self.dots.set_data(np.zeros((1, 2), np.float32), size=0)
        # Under the pan/zoom camera vispy's y anchors are flipped: "top" stands text on its position.
        self.labels = scene.Text("", color=style.INK, font_size=LABEL_PT, anchor_x="center", anchor_y="top",
                                 parent=s)
        self.peak.order, self.trace.order, self.noise.order, self.dots.order, self.labels.order = 1, 2, 3, 4, 5
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
        """Frame the plan: from 0 Hz (or below the lowest component) past the highest component."""
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
            x = self.x_of(frame.frequencies_hz).astype(np.float32)
            self.trace.set_data(np.column_stack((x, frame.level_dbfs)))
            if frame.peak_dbfs is not None:
                self.peak.set_data(np.column_stack((x, frame.peak_dbfs)))
                self.peak.visible = True
            else:
                self.peak.visible = False
        self._noise_level = frame.noise_floor_dbfs
        if frame.noise_floor_dbfs is not None and frame.analysis_bandwidth_hz:
            self.set_legend(f"- - -  noise floor {frame.noise_floor_dbfs:.1f} dBFS in "
                            f"{frame.analysis_bandwidth_hz:.1f} Hz (analysis bandwidth)".replace("-", MINUS)
                            .replace(f"{MINUS} {MINUS} {MINUS}", "- - -"))
        else:
            self.set_legend("")
        self._relayout()

    def _relayout(self) -> None:
        """Noise line across the view, markers and their labels placed clear of each other."""
        r = self.rect
        px, _ = self.pixel_size()
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

    font_px = font_pt * PX_PER_PT
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
    """A few milliseconds of the captured audio and its envelope (|analytic signal|), ±."""

    def __init__(self, host: PlotCanvas) -> None:
        super().__init__(host, "Waveform and envelope", "time, ms", "amplitude, FS", value_ticks(5),
                         value_ticks(4), y_axis_width=60)
        s = self.view.scene
        self.waves = [_line(s, c) for c in ("#8a9aa8", "#9cc0b4")]  # channel 1 (or I), Q
        self.env = _line(s, style.INK, 2.0, connect="segments")
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
        upper = np.column_stack((t_ms, frame.envelope))
        pairs = np.stack((upper[:-1], upper[1:]), axis=1).reshape(-1, 2)
        lower = pairs * np.array([1.0, -1.0], np.float32)
        self.env.set_data(np.concatenate((pairs, lower)).astype(np.float32))
        peak = float(np.max(frame.envelope)) if frame.envelope.size else 1.0
        span = float(t_ms[-1]) if t_ms.size else 4.0
        want = _nice_ceiling(max(peak, 1e-6) * 1.15)
        if abs(math.log(want / self._scale)) > math.log(1.4) or abs(span - self._span) > 0.05 * self._span:
            self._scale, self._span = want, span
            self.set_range(x=(0, span), y=(-want, want))


class PatternPlot(Plot):
    """Measured envelope against the envelope of the fitted tones alone: a line if linear."""

    def __init__(self, host: PlotCanvas) -> None:
        super().__init__(host, "Envelope vs drive", "drive: envelope of the fitted tones, FS",
                         "measured envelope, FS", value_ticks(4), value_ticks(4), y_axis_width=60)
        s = self.view.scene
        self.ideal = _line(s, style.NOISE, connect="segments")
        self.points = scene.Markers(parent=s)
        self.points.set_data(np.zeros((1, 2), np.float32), size=0)
        self._scale = 1.0
        self.set_range(x=(0, 1), y=(0, 1))

    def show_frame(self, frame: DisplayFrame) -> None:
        if frame.drive is None or frame.measured is None or frame.drive.size == 0:
            self.points.visible = False
            self.ideal.visible = False
            self.set_legend("needs fitted tones")
            return
        top = _nice_ceiling(max(float(frame.drive.max()), float(frame.measured.max()), 1e-6) * 1.1)
        if abs(math.log(top / self._scale)) > math.log(1.4):
            self._scale = top
            self.set_range(x=(0, top), y=(0, top))
            self.ideal.set_data(dashed_segment((0.0, 0.0), (top, top)))
        self.ideal.visible = True
        colour = _rgba(style.IMD, 0.8)
        self.points.set_data(np.column_stack((frame.drive, frame.measured)), size=5, face_color=colour,
                             edge_width=0, symbol="disc")
        self.points.visible = True
        self.set_legend("- - - linear" if len(frame.pattern_tones_hz) >= 2 else "one tone: use two")


class TrendPlot(Plot):
    """The chosen figure over the last minutes, with the best so far."""

    def __init__(self, host: PlotCanvas, minutes: float = 5.0) -> None:
        super().__init__(host, "Trend", "seconds ago", "dB", value_ticks(5), value_ticks(5), y_axis_width=60)
        s = self.view.scene
        self.seconds = minutes * 60.0
        self.history: deque[tuple[float, float]] = deque()
        self.line = _line(s, style.TRACE, 2.0)
        self.best_line = _line(s, style.BEST, 1.5, connect="segments")
        self._y = (0.0, 1.0)
        self.set_range(x=(-self.seconds, 0), y=self._y)

    def set_figure(self, title: str, unit: str) -> None:
        self.title = title
        self.y_title = unit
        self.host.chrome_changed()
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
            self.set_legend("")
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
            self.set_legend(f"- - -  best {best:.1f} {unit}".replace("-", MINUS)
                            .replace(f"{MINUS} {MINUS} {MINUS}", "- - -"), style.BEST)
        else:
            self.best_line.visible = False
            self.set_legend("")


def _nice_ceiling(v: float) -> float:
    """1, 2 or 5 times a power of ten, at or above v."""
    power = 10.0 ** math.floor(math.log10(v))
    for m in (1.0, 2.0, 5.0, 10.0):
        if v <= m * power + 1e-12:
            return m * power
    return 10.0 * power
