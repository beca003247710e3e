"""The network band view: a live phase-network measurement against audio frequency, for trimming.

With the measurement "90° network (stereo)" the live session reads the network's I output on the
left input and its Q output on the right (``quadrature`` plugin). This window collects the
points of every readout (a multitone gives them all at once, a stepped sweep one step at a time)
and shows, against frequency on a log axis:

- the phase error (degrees; the readout gives its time equivalent in µs as well),
- the amplitude ratio Q/I (dB),
- the opposite-sideband suppression those two errors alone allow (dB),

with the user's band shaded and its worst point ringed and stated in words. Above the plots, the
phase difference of the selected (or strongest) tone in degrees and in µs side by side, large
enough to read while turning a trimmer; below them, the diagnosis library's advice for the points
in the band. A stepped sweep shows its progress (step i of N).

:func:`attach` wires the view into the main window (View ▸ Network band…, the sweep progress in
the status bar) without the window knowing about it.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from PyQt6.QtCore import Qt, QTimer
from PyQt6.QtGui import QAction, QFont, QKeySequence
from PyQt6.QtWidgets import (
    QComboBox,
    QDoubleSpinBox,
    QFrame,
    QHBoxLayout,
    QLabel,
    QProgressBar,
    QPushButton,
    QVBoxLayout,
    QWidget,
)
from vispy import scene

from rtanalyzer.gui import style
from rtanalyzer.gui.plots import MINUS, Plot, PlotCanvas, _line, _rgba
from rtanalyzer.gui.ticks import frequency_ticks

DEFAULT_BAND_HZ = (300.0, 3000.0)
X_RANGE_HZ = (100.0, 6000.0)  # the frequency axis, widened to take in every point
REDRAW_MS = 200  # the plots at most five times a second; the figures with every readout
BAND_FILL = "#e3efe9"  # a pale tint of the wanted teal: the band judged
POINT = style.TRACE
WORST = style.UNWANTED


def band_value_ticks(target: int = 5):
    """Linear ticks labelled with enough decimals for their step (a 0.25 step keeps two)."""
    from rtanalyzer.gui.ticks import linear_ticks

    def ticks(lo: float, hi: float):
        major, minor = linear_ticks(lo, hi, target)
        step = float(major[1] - major[0]) if len(major) > 1 else 1.0
        decimals = 0
        while decimals < 6 and abs(round(step, decimals) - step) > 1e-9 * max(step, 1e-12):
            decimals += 1
        labels = []
        for v in major:
            text = f"{v:.{decimals}f}"
            if float(text) == 0:
                text = text.lstrip("-")
            labels.append(text.replace("-", MINUS))
        return major, minor, labels

    return ticks


def us_of(phase_deg: float, frequency_hz: float) -> float:
    """A phase at ``frequency_hz`` as a time: φ/(360·f), in microseconds."""
    return phase_deg / (360.0 * frequency_hz) * 1e6


def _signed(value: float, decimals: int) -> str:
    return f"{value:+.{decimals}f}".replace("-", MINUS)


def _plain(value: float, decimals: int) -> str:
    return f"{value:.{decimals}f}".replace("-", MINUS)


def _font(points: float, bold: bool = False) -> QFont:
    font = QFont()
    font.setPointSizeF(points)
    font.setWeight(QFont.Weight.Bold if bold else QFont.Weight.Normal)
    return font


class BandPlot(Plot):
    """One quantity against log frequency: the band shaded, the points joined, the worst ringed."""

    def __init__(self, host: PlotCanvas, title: str, unit: str, key: str, pad: float) -> None:
        super().__init__(host, title, "audio frequency, Hz", unit, frequency_ticks(True), band_value_ticks(5))
        self.set_legend("ringed: worst in band", WORST)
        self.key = key
        self.pad = pad
        s = self.view.scene
        self.band = scene.Rectangle(center=(0.5, 0.5), width=1.0, height=1.0, color=BAND_FILL, parent=s)
        self.band.order = -5
        self.line = _line(s, POINT, 2.0)
        self.dots = scene.Markers(parent=s)
        self.worst = scene.Markers(parent=s)
        self.line.visible = self.dots.visible = self.worst.visible = False
        self.set_range(x=np.log10(X_RANGE_HZ), y=(-1.0, 1.0))

    def show_points(self, points: list[dict[str, Any]], band: tuple[float, float], worst: dict | None) -> None:
        xs_all = [math.log10(X_RANGE_HZ[0]), math.log10(X_RANGE_HZ[1])]
        pts = [(math.log10(p["frequency_hz"]), p[self.key]) for p in points if p.get(self.key) is not None]
        if pts:
            xs_all += [x for x, _ in pts]
        x0, x1 = min(xs_all) - 0.03, max(xs_all) + 0.03
        if pts:
            data = np.asarray(pts, np.float32)
            ys = data[:, 1]
            lo, hi = float(ys.min()), float(ys.max())
            span = max(hi - lo, self.pad)
            y0, y1 = lo - 0.2 * span, hi + 0.2 * span
            self.line.set_data(data)
            self.dots.set_data(data, size=7, face_color=_rgba(POINT), edge_width=0)
            self.line.visible = len(pts) > 1
            self.dots.visible = True
        else:
            y0, y1 = -self.pad, self.pad
            self.line.visible = self.dots.visible = False
        if worst is not None and worst.get(self.key) is not None:
            at = np.asarray([[math.log10(worst["frequency_hz"]), worst[self.key]]], np.float32)
            self.worst.set_data(at, size=15, face_color=(1, 1, 1, 0), edge_color=_rgba(WORST), edge_width=2.5)
            self.worst.visible = True
        else:
            self.worst.visible = False
        b0, b1 = math.log10(band[0]), math.log10(band[1])
        height = (y1 - y0) * 4.0
        self.band.center = ((b0 + b1) / 2.0, (y0 + y1) / 2.0)
        self.band.width = max(b1 - b0, 1e-6)
        self.band.height = height
        self.set_range(x=(x0, x1), y=(y0, y1))


class BandView(QWidget):
    """The network band window (a top-level window; :func:`attach` makes and shows it)."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent, Qt.WindowType.Window)
        self.setObjectName("band_view")
        self.setWindowTitle("rtanalyzer — 90° network band")
        self.setStyleSheet(style.STYLE_SHEET + f"QWidget#band_view {{ background: {style.PAPER}; }}")
        self.points: dict[float, dict[str, Any]] = {}  # by frequency (0.1 Hz), the newest reading
        self.latest: list[dict[str, Any]] = []  # the newest readout's points
        self.worst: dict[str, Any] | None = None
        self.advice: list[str] = []
        self.sweep_steps = 0
        self._dirty = False
        self._build()
        self.timer = QTimer(self)
        self.timer.setInterval(REDRAW_MS)
        self.timer.timeout.connect(self._redraw)
        self.timer.start()

    # -- building -------------------------------------------------------------------------------------

    def _tile(self, title: str) -> tuple[QFrame, QVBoxLayout]:
        tile = QFrame()
        tile.setObjectName("tile")
        box = QVBoxLayout(tile)
        box.setContentsMargins(12, 8, 12, 8)
        label = QLabel(title)
        label.setFont(_font(style.TITLE_PT, True))
        box.addWidget(label)
        return tile, box

    def _build(self) -> None:
        outer = QVBoxLayout(self)
        outer.setContentsMargins(10, 8, 10, 8)
        outer.setSpacing(6)
        tiles = QHBoxLayout()
        tiles.setSpacing(8)
        tile, box = self._tile("Phase difference I − Q")
        row = QHBoxLayout()
        self.deg_value = QLabel("—")
        self.deg_value.setObjectName("deg_value")
        self.us_value = QLabel("—")
        self.us_value.setObjectName("us_value")
        for value, unit in ((self.deg_value, "°"), (self.us_value, "µs")):
            value.setFont(_font(style.VALUE_PT, True))
            row.addWidget(value)
            u = QLabel(unit)
            u.setFont(_font(style.UNIT_PT))
            u.setStyleSheet(f"color: {style.INK_SOFT};")
            row.addWidget(u)
            row.addSpacing(24)
        row.addStretch(1)
        box.addLayout(row)
        self.tone_detail = QLabel("waiting for the network's outputs")
        self.tone_detail.setObjectName("tone_detail")
        self.tone_detail.setFont(_font(style.SMALL_PT + 2))
        box.addWidget(self.tone_detail)
        tiles.addWidget(tile, 3)
        tile, box = self._tile("Worst point in the band")
        self.worst_text = QLabel("—")
        self.worst_text.setObjectName("worst_text")
        self.worst_text.setFont(_font(style.UNIT_PT + 4, True))
        self.worst_text.setStyleSheet(f"color: {style.WORSE};")
        box.addWidget(self.worst_text)
        self.worst_detail = QLabel("")
        self.worst_detail.setObjectName("worst_detail")
        self.worst_detail.setFont(_font(style.SMALL_PT + 2))
        self.worst_detail.setWordWrap(True)
        box.addWidget(self.worst_detail)
        box.addStretch(1)
        tiles.addWidget(tile, 2)
        outer.addLayout(tiles)

        bar = QHBoxLayout()
        bar.addWidget(QLabel("Tone shown"))
        self.tone_choice = QComboBox()
        self.tone_choice.setObjectName("tone_choice")
        self.tone_choice.addItem("strongest", None)
        self.tone_choice.setMinimumWidth(120)
        self.tone_choice.currentIndexChanged.connect(lambda _: self._show_tone())
        bar.addWidget(self.tone_choice)
        bar.addSpacing(16)
        bar.addWidget(QLabel("Band"))
        self.band_low = QDoubleSpinBox()
        self.band_high = QDoubleSpinBox()
        for spin, value in ((self.band_low, DEFAULT_BAND_HZ[0]), (self.band_high, DEFAULT_BAND_HZ[1])):
            spin.setRange(10.0, 90_000.0)
            spin.setDecimals(0)
            spin.setSingleStep(50.0)
            spin.setSuffix(" Hz")
            spin.setKeyboardTracking(False)
            spin.setValue(value)
            spin.valueChanged.connect(lambda _: self._band_changed())
        self.band_low.setObjectName("band_low")
        self.band_high.setObjectName("band_high")
        bar.addWidget(self.band_low)
        bar.addWidget(QLabel("to"))
        bar.addWidget(self.band_high)
        clear = QPushButton("Clear points")
        clear.clicked.connect(self.clear)
        bar.addSpacing(16)
        bar.addWidget(clear)
        bar.addStretch(1)
        self.progress = QProgressBar()
        self.progress.setObjectName("sweep_progress")
        self.progress.setMinimumWidth(220)
        self.progress.setFormat("sweep step %v of %m")
        self.progress.hide()
        bar.addWidget(self.progress)
        outer.addLayout(bar)

        self.canvas = PlotCanvas()
        self.phase_plot = self.canvas.add(BandPlot(self.canvas, "Phase error", "degrees", "phase_error_deg", 0.5))
        self.ratio_plot = self.canvas.add(BandPlot(self.canvas, "Amplitude ratio Q/I", "dB", "amplitude_ratio_db", 0.2))
        self.supp_plot = self.canvas.add(BandPlot(self.canvas, "Predicted suppression", "dB",
                                                  "predicted_suppression_db", 5.0))
        self.canvas.share_fonts()
        self.canvas.native.setMinimumHeight(280)
        outer.addWidget(self.canvas.native, 1)

        tile, box = self._tile("Which way to turn (points in the band)")
        self.advice_label = QLabel("needs points inside the band")
        self.advice_label.setObjectName("advice")
        self.advice_label.setFont(_font(style.SMALL_PT + 2))
        self.advice_label.setWordWrap(True)
        self.advice_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.advice_label.setMinimumHeight(5 * self.advice_label.fontMetrics().lineSpacing())
        self.advice_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        box.addWidget(self.advice_label)
        outer.addWidget(tile)
        self.resize(1400, 820)

    # -- state ----------------------------------------------------------------------------------------

    @property
    def band(self) -> tuple[float, float]:
        lo, hi = self.band_low.value(), self.band_high.value()
        return (min(lo, hi), max(lo, hi))

    def clear(self) -> None:
        self.points.clear()
        self.latest = []
        self.worst = None
        self.tone_choice.blockSignals(True)
        while self.tone_choice.count() > 1:
            self.tone_choice.removeItem(1)
        self.tone_choice.blockSignals(False)
        self._evaluate()
        self._show_tone()

    def set_sweep(self, steps: int) -> None:
        """A stepped sweep of ``steps`` steps is playing (0: none)."""
        self.sweep_steps = steps
        if steps:
            self.progress.setRange(0, steps)
        else:
            self.progress.hide()

    def show_readout(self, readout) -> None:
        """Take a live readout (any measurement; only the phase-network figures are used)."""
        sweep = getattr(readout, "sweep", None)
        if sweep is not None and self.sweep_steps:
            self.progress.setValue(sweep["step"] % self.sweep_steps + 1)
            self.progress.show()
        elif sweep is None:
            self.progress.hide()
        result = readout.result
        if readout.measurement != "quadrature" or not result:
            if readout.error and readout.error != "settling":
                self.tone_detail.setText(f"no figures: {readout.error}")
            return
        self.latest = list(result.get("points") or [])
        for p in self.latest:
            self.points[self._key(float(p["frequency_hz"]))] = p
        self._update_choices()
        self._evaluate()
        self._show_tone()

    def _key(self, f: float) -> float:
        """The key of a point already held at (nearly) this frequency, else a new one: a tone's
        refined frequency wanders a little from readout to readout."""
        near = [k for k in self.points if abs(k - f) <= max(0.5, 1e-3 * f)]
        return min(near, key=lambda k: abs(k - f)) if near else round(f, 1)

    def point_near(self, f: float) -> dict[str, Any] | None:
        if not self.points:
            return None
        return self.points[min(self.points, key=lambda k: abs(k - f))]

    def sorted_points(self) -> list[dict[str, Any]]:
        return [self.points[k] for k in sorted(self.points)]

    def _update_choices(self) -> None:
        have = {self.tone_choice.itemData(i) for i in range(1, self.tone_choice.count())}
        for key in sorted(set(self.points) - have):
            index = 1
            while index < self.tone_choice.count() and self.tone_choice.itemData(index) < key:
                index += 1
            self.tone_choice.insertItem(index, f"{key:g} Hz", key)

    def select_tone(self, frequency_hz: float | None) -> None:
        """Show the point nearest ``frequency_hz`` in the big readouts (None: the strongest)."""
        index = 0
        if frequency_hz is not None and self.tone_choice.count() > 1:
            index = min(range(1, self.tone_choice.count()),
                        key=lambda i: abs(self.tone_choice.itemData(i) - frequency_hz))
        self.tone_choice.setCurrentIndex(index)

    def _band_changed(self) -> None:
        self._evaluate()

    def _evaluate(self) -> None:
        """Worst point in the band and the diagnosis of the band's points."""
        lo, hi = self.band
        inside = [p for p in self.sorted_points() if lo <= p["frequency_hz"] <= hi]
        self.worst = min(inside, key=lambda p: p["predicted_suppression_db"]) if inside else None
        if self.worst is None:
            self.worst_text.setText("—")
            self.worst_detail.setText(f"no point inside {lo:g}–{hi:g} Hz yet" if self.points else "")
        else:
            w = self.worst
            self.worst_text.setText(f"worst {w['predicted_suppression_db']:.1f} dB at {w['frequency_hz']:.0f} Hz")
            self.worst_detail.setText(
                f"{len(inside)} point{'s' if len(inside) != 1 else ''} in {lo:g}–{hi:g} Hz · there: phase error "
                f"{_signed(w['phase_error_deg'], 2)}° ({_signed(us_of(w['phase_error_deg'], w['frequency_hz']), 2)} µs), "
                f"ratio {_signed(w['amplitude_ratio_db'], 2)} dB")
        self.advice = self._diagnose(inside)
        self.advice_label.setText("\n".join(self.advice) if self.advice else "needs points inside the band")
        self._dirty = True

    def _diagnose(self, inside: list[dict[str, Any]]) -> list[str]:
        if not inside:
            return []
        from rtanalyzer.errors import RtaError
        from rtanalyzer.measurements.diagnosis import diagnose_quadrature

        try:
            d = diagnose_quadrature(inside, None, self.band)
        except (RtaError, ValueError, np.linalg.LinAlgError) as exc:
            return [f"no advice yet: {exc}"]
        lines = list(d.get("advice") or [])
        if d.get("limited_now_by"):
            lines.insert(0, f"limited now by {d['limited_now_by']}; after both trims the worst would be "
                            f"{d['after_trims_worst_predicted_suppression_db']:.1f} dB")
        return lines

    def shown_point(self) -> dict[str, Any] | None:
        """The tone chosen, or the strongest of the newest readout."""
        key = self.tone_choice.currentData()
        if key is not None:
            return self.points.get(key)
        if not self.latest:
            return None
        return max(self.latest, key=lambda p: p.get("left_dbfs", -999.0) + p.get("right_dbfs", -999.0))

    def _show_tone(self) -> None:
        p = self.shown_point()
        if p is None:
            self.deg_value.setText("—")
            self.us_value.setText("—")
            return
        f, deg = p["frequency_hz"], p["phase_difference_deg"]
        self.deg_value.setText(_plain(deg, 2))
        self.us_value.setText(_plain(us_of(deg, f), 1))
        err = p["phase_error_deg"]
        self.tone_detail.setText(
            f"at {f:.1f} Hz · error {_signed(err, 2)}° = {_signed(us_of(err, f), 2)} µs · ratio "
            f"{_signed(p['amplitude_ratio_db'], 2)} dB · suppression {p['predicted_suppression_db']:.1f} dB")

    def _redraw(self) -> None:
        if not self._dirty or not self.isVisible():
            return
        self._dirty = False
        pts, band = self.sorted_points(), self.band
        for plot in (self.phase_plot, self.ratio_plot, self.supp_plot):
            plot.show_points(pts, band, self.worst)
        self.canvas.update()

    def closeEvent(self, event) -> None:  # noqa: N802 - Qt
        self.timer.stop()
        super().closeEvent(event)

    def showEvent(self, event) -> None:  # noqa: N802 - Qt
        self.timer.start()
        self._dirty = True
        super().showEvent(event)


def _sweep_steps(window) -> int:
    from rtanalyzer.generator.signals import Sweep

    signal = window.config.signal
    return len(signal.frequencies_hz) if isinstance(signal, Sweep) else 0


def attach(window) -> BandView:
    """Give the main window a network band view: View ▸ Network band…, opened by itself when the
    session's measurement is the 90° network, and a sweep progress bar in the status bar."""
    view = BandView(window)
    window.band_view = view
    status_progress = QProgressBar()
    status_progress.setObjectName("status_sweep_progress")
    status_progress.setFormat("sweep %v/%m")
    status_progress.setMaximumWidth(160)
    status_progress.setMaximumHeight(16)
    status_progress.hide()
    window.statusBar().addPermanentWidget(status_progress)
    window.sweep_progress = status_progress

    def open_view() -> None:
        view.set_sweep(_sweep_steps(window))
        view.show()
        view.raise_()

    act = QAction("Network band…", window)
    act.setObjectName("act_band_view")
    act.setShortcut(QKeySequence("N"))
    act.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
    act.triggered.connect(lambda _=False: open_view())
    window.addAction(act)
    for menu_action in window.menuBar().actions():
        if menu_action.menu() is not None and menu_action.text().replace("&", "") == "View":
            menu_action.menu().addAction(act)
            break

    def started(engine) -> None:
        view.clear()
        view.set_sweep(_sweep_steps(window))
        if engine.measurement.name == "quadrature":
            open_view()

    def readout(r) -> None:
        steps = _sweep_steps(window)
        if steps != view.sweep_steps:
            view.set_sweep(steps)
        if r.sweep is not None and steps:
            status_progress.setRange(0, steps)
            status_progress.setValue(r.sweep["step"] % steps + 1)
            status_progress.show()
        else:
            status_progress.hide()
        if r.measurement == "quadrature":
            for tile in window.tiles.values():
                tile.set_unavailable("90° network: View ▸ Network band (N)")
        if r.measurement == "quadrature" or view.isVisible():
            view.show_readout(r)

    window.runner.started.connect(started)
    window.runner.readout.connect(readout)
    window.destroyed.connect(lambda *_: view.close())
    return view
