"""The band view: a live measurement against audio frequency, for trimming across the band.

It follows two measurements (:mod:`rtanalyzer.gui.band_modes` holds what each one shows):

- "90° network (stereo)" (``quadrature``): the network's I output on the left input, its Q output
  on the right. Against frequency: the phase error (degrees; the readout gives its time
  equivalent in µs as well), the amplitude ratio Q/I (dB) and the opposite-sideband suppression
  those two errors alone allow (dB). Above the plots, the phase difference of the selected (or
  strongest) tone in degrees and in µs side by side, large enough to read while turning a trimmer.
- "sideband and carrier" (``sideband``): the whole exciter through the receiver. Against the
  modulating tone's frequency: the measured opposite-sideband suppression (a point whose unwanted
  sideband is under the noise is a lower bound, "≥", drawn as a hollow triangle) and the wanted
  level (the flatness of exciter and receiver together). Above, the shown tone's suppression.

The view collects the points of every readout (a multitone gives them all at once, a stepped
sweep one step at a time), shades the user's band and rings its worst point, states it in words,
and shows the diagnosis library's advice for the points in the band. A stepped sweep shows its
progress (step i of N). A readout of the other measurement, or a new session, starts afresh.

:func:`attach` wires the view into the main window (View ▸ Across the band…, the sweep progress in
the status bar) without the window knowing about it.
"""

from __future__ import annotations

import os
from typing import Any

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

from rtanalyzer.gui import style
from rtanalyzer.gui.band_design import Design
from rtanalyzer.gui.band_modes import MODES, BandMode
from rtanalyzer.gui.band_plot import BandPlot
from rtanalyzer.gui.plots import PlotCanvas

DEFAULT_BAND_HZ = (300.0, 3000.0)
REDRAW_MS = 200  # the plots at most five times a second; the figures with every readout
PLOT_SLOTS = max(len(m.plots) for m in MODES.values())


def _font(points: float, bold: bool = False) -> QFont:
    font = QFont()
    font.setPointSizeF(points)
    font.setWeight(QFont.Weight.Bold if bold else QFont.Weight.Normal)
    return font


class BandView(QWidget):
    """The band window (a top-level window; :func:`attach` makes and shows it)."""

    def __init__(self, parent: QWidget | None = None, measurement: str = "quadrature") -> None:
        super().__init__(parent, Qt.WindowType.Window)
        self.setObjectName("band_view")
        self.setStyleSheet(style.STYLE_SHEET + f"QWidget#band_view {{ background: {style.PAPER}; }}")
        self.mode: BandMode = MODES[measurement]
        self.points: dict[float, dict[str, Any]] = {}  # by frequency (0.1 Hz), the newest reading
        self.latest: list[dict[str, Any]] = []  # the newest readout's points
        self.worst: dict[str, Any] | None = None
        self.advice: list[str] = []
        self.sweep_steps = 0
        self.design: Design | None = None
        self.on_design = None  # called with the design file's path (or None) when it changes
        self.on_band = None  # called with (low, high) Hz when the user changes the band
        self._dirty = False
        self._build()
        self.set_mode(measurement, force=True)
        self.timer = QTimer(self)
        self.timer.setInterval(REDRAW_MS)
        self.timer.timeout.connect(self._redraw)
        self.timer.start()

    # -- building -------------------------------------------------------------------------------------

    def _tile(self, title: str) -> tuple[QFrame, QVBoxLayout, QLabel]:
        tile = QFrame()
        tile.setObjectName("tile")
        box = QVBoxLayout(tile)
        box.setContentsMargins(12, 8, 12, 8)
        label = QLabel(title)
        label.setFont(_font(style.TITLE_PT, True))
        box.addWidget(label)
        return tile, box, label

    def _build(self) -> None:
        outer = QVBoxLayout(self)
        outer.setContentsMargins(10, 8, 10, 8)
        outer.setSpacing(6)
        tiles = QHBoxLayout()
        tiles.setSpacing(8)
        tile, box, self.tone_title = self._tile("")
        self.tone_title.setObjectName("tone_title")
        row = QHBoxLayout()
        self.deg_value = QLabel("—")  # the first large figure (degrees for the network)
        self.deg_value.setObjectName("deg_value")
        self.us_value = QLabel("—")  # the second (µs for the network)
        self.us_value.setObjectName("us_value")
        self.unit_labels: list[QLabel] = []
        for value in (self.deg_value, self.us_value):
            value.setFont(_font(style.VALUE_PT, True))
            row.addWidget(value)
            u = QLabel("")
            u.setFont(_font(style.UNIT_PT))
            u.setStyleSheet(f"color: {style.INK_SOFT};")
            row.addWidget(u)
            row.addSpacing(24)
            self.unit_labels.append(u)
        row.addStretch(1)
        box.addLayout(row)
        self.tone_detail = QLabel("")
        self.tone_detail.setObjectName("tone_detail")
        self.tone_detail.setFont(_font(style.SMALL_PT + 2))
        box.addWidget(self.tone_detail)
        tiles.addWidget(tile, 3)
        tile, box, _ = self._tile("Worst point in the band")
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
        bar.addSpacing(16)
        design = QPushButton("Design…")
        design.setObjectName("design_button")
        design.setToolTip("lay a network file (as for rtanalyzer network) over the points")
        design.clicked.connect(self._choose_design)
        bar.addWidget(design)
        self.design_label = QLabel("no design")
        self.design_label.setObjectName("design_label")
        self.design_label.setStyleSheet(f"color: {style.INK_SOFT};")
        bar.addWidget(self.design_label)
        self.design_clear = QPushButton("No design")
        self.design_clear.setObjectName("design_clear")
        self.design_clear.clicked.connect(lambda: self.set_design(None))
        self.design_clear.hide()
        bar.addWidget(self.design_clear)
        bar.addStretch(1)
        self.progress = QProgressBar()
        self.progress.setObjectName("sweep_progress")
        self.progress.setMinimumWidth(220)
        self.progress.setFormat("sweep step %v of %m")
        self.progress.hide()
        bar.addWidget(self.progress)
        outer.addLayout(bar)

        self.canvas = PlotCanvas()
        specs = MODES["quadrature"].plots
        self.plots = [self.canvas.add(BandPlot(self.canvas, specs[i % len(specs)])) for i in range(PLOT_SLOTS)]
        self.canvas.share_fonts()
        self.canvas.native.setMinimumHeight(280)
        outer.addWidget(self.canvas.native, 1)

        tile, box, self.advice_title = self._tile("")
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

    # -- the measurement followed ---------------------------------------------------------------------

    @property
    def measurement(self) -> str:
        return self.mode.measurement

    def set_mode(self, measurement: str, force: bool = False) -> None:
        """Follow ``measurement`` ("quadrature" or "sideband"): its plots and words, no points yet."""
        if measurement not in MODES or (measurement == self.mode.measurement and not force):
            return
        self.mode = mode = MODES[measurement]
        self.setWindowTitle(f"rtanalyzer — {mode.window_title}")
        self.tone_title.setText(mode.tone_title)
        self.advice_title.setText(mode.advice_title)
        for label, unit in zip(self.unit_labels, mode.units):
            label.setText(unit)
        for i, plot in enumerate(self.plots):
            shown = i < len(mode.plots)
            plot.configure(mode.plots[i] if shown else plot.spec, shown)
            self.canvas.weights[i] = 1.0 if shown else 0.0
        self.canvas.layout()
        self._show_design()
        self.clear()

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
        self.tone_detail.setText(self.mode.waiting)
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
        """Take a live readout (the band's measurements give points; others only a note)."""
        sweep = getattr(readout, "sweep", None)
        if sweep is not None and self.sweep_steps:
            self.progress.setValue(sweep["step"] % self.sweep_steps + 1)
            self.progress.show()
        elif sweep is None:
            self.progress.hide()
        if readout.measurement not in MODES:
            self.tone_detail.setText(f"the band view follows the 90° network or the sideband measurement, "
                                     f"not {readout.measurement}")
            return
        self.set_mode(readout.measurement)
        result = readout.result
        if not result:
            if readout.error and readout.error != "settling":
                self.tone_detail.setText(f"no figures: {readout.error}")
            return
        self.latest = self.mode.points_of(result)
        for p in self.latest:
            self.points[self._key(float(p[self.mode.fkey]))] = p
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

    def in_band(self) -> list[dict[str, Any]]:
        """The points inside the band, by frequency."""
        lo, hi = self.band
        return [p for p in self.sorted_points() if lo <= p[self.mode.fkey] <= hi]

    def _band_changed(self) -> None:
        self._evaluate()
        if self.on_band is not None:
            self.on_band(self.band)

    def set_band(self, low_hz: float, high_hz: float) -> None:
        """Show ``low_hz``–``high_hz`` as the band (without telling ``on_band``)."""
        for spin, value in ((self.band_low, low_hz), (self.band_high, high_hz)):
            spin.blockSignals(True)
            spin.setValue(value)
            spin.blockSignals(False)
        self._evaluate()

    def _evaluate(self) -> None:
        """Worst point in the band and the diagnosis of the band's points."""
        mode, band = self.mode, self.band
        inside = self.in_band()
        scored = [p for p in inside if mode.score(p) is not None]
        self.worst = min(scored, key=mode.score) if scored else None
        if self.worst is None:
            self.worst_text.setText("—")
            self.worst_detail.setText(f"no point with a figure inside {band[0]:g}–{band[1]:g} Hz yet"
                                      if self.points else "")
        else:
            self.worst_text.setText(mode.worst_text(self.worst))
            self.worst_detail.setText(mode.worst_detail(self.worst, inside, band))
        network = self.design.network if self.design is not None else None
        self.advice = mode.advice(inside, band, network) if scored else []
        if self.design is not None and mode.measurement == "quadrature":
            self.advice += self.design.against(inside)
        self.advice_label.setText("\n".join(self.advice) if self.advice else "needs points inside the band")
        self._dirty = True

    # -- a network design over the points -----------------------------------------------------------

    def set_design(self, path: str | None) -> bool:
        """Lay the network file ``path`` over the points (None: take it away); False with the
        reason shown when the file cannot be read."""
        from rtanalyzer.errors import RtaError

        if path is None:
            self.design = None
        else:
            try:
                self.design = Design.load(path)
            except RtaError as exc:
                self.design_label.setText(f"design not read: {exc}")
                self.design_label.setStyleSheet(f"color: {style.WORSE};")
                return False
        self._show_design()
        self._evaluate()
        if self.on_design is not None:
            self.on_design(path)
        return True

    def _choose_design(self) -> None:
        from PyQt6.QtWidgets import QFileDialog

        path, _ = QFileDialog.getOpenFileName(self, "Network design", "", "Network files (*.network);;All files (*)")
        if path:
            self.set_design(path)

    def _show_design(self) -> None:
        d = self.design
        self.design_label.setText(d.legend if d is not None else "no design")
        self.design_label.setStyleSheet(f"color: {style.INK_SOFT};")
        self.design_clear.setVisible(d is not None)
        for plot in self.plots:
            plot.set_design(d.curve(plot.spec.key) if d is not None else None)
        self._dirty = True

    def shown_point(self) -> dict[str, Any] | None:
        """The tone chosen, or the strongest of the newest readout."""
        key = self.tone_choice.currentData()
        if key is not None:
            return self.points.get(key)
        if not self.latest:
            return None
        return max(self.latest, key=self.mode.strength)

    def _show_tone(self) -> None:
        p = self.shown_point()
        if p is None:
            self.deg_value.setText("—")
            self.us_value.setText("—")
            return
        first, second, detail = self.mode.figures(p)
        self.deg_value.setText(first)
        self.us_value.setText(second)
        self.tone_detail.setText(detail)

    def _redraw(self) -> None:
        if not self._dirty or not self.isVisible():
            return
        self._dirty = False
        pts, band = self.sorted_points(), self.band
        for plot in self.plots[: len(self.mode.plots)]:
            plot.show_points(pts, self.mode.fkey, band, self.worst)
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


def opens_by_itself(measurement: str, signal) -> bool:
    """Does a session of ``measurement`` driven by ``signal`` open the band view? The network
    always; the exciter's suppression when the drive spans the band (a multitone or a sweep)."""
    from rtanalyzer.generator.signals import Multitone, Sweep

    if measurement == "quadrature":
        return True
    return measurement == "sideband" and isinstance(signal, (Multitone, Sweep))


def attach(window) -> BandView:
    """Give the main window a band view: View ▸ Across the band…, opened by itself when a session
    starts that has points across the band, and a sweep progress bar in the status bar."""
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

    act = QAction("Across the band…", window)
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
        name = engine.measurement.name
        if name in MODES and name != view.measurement:
            view.set_mode(name)  # clears
        else:
            view.clear()
        view.set_sweep(_sweep_steps(window))
        if opens_by_itself(name, window.config.signal):
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
        engine = window.runner.engine
        if engine is not None and r.measurement != engine.measurement.name:
            return  # the session before the newest one: its last readout may still be on its way
        if r.measurement in MODES or view.isVisible():
            view.show_readout(r)

    settings = getattr(window, "settings", None)
    if settings is not None:
        saved = settings.get("band/design")
        if isinstance(saved, str) and os.path.isfile(saved):
            view.set_design(saved)
        view.on_design = lambda path: settings.put("band/design", path)

    def band_changed(band: tuple[float, float]) -> None:
        # The session judges its figures (worst in band, trend, best so far) over the same band.
        window.config = window.config.with_changes(band_hz=band)
        engine = window.runner.engine
        if engine is not None and any(p.name == "band" for p in engine.measurement.parameters):
            engine.update_settings(band=list(band))
        if settings is not None:
            settings.put("band/range_hz", list(band))

    view.on_band = band_changed
    if window.config.band_hz is not None:
        view.set_band(*window.config.band_hz)

    window.runner.started.connect(started)
    window.runner.readout.connect(readout)
    window.destroyed.connect(lambda *_: view.close())
    return view
