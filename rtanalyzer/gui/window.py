"""The main window: large figures across the top, the plots, the controls on the right.

The window holds the wanted :class:`~rtanalyzer.live.session.SessionConfig` and applies each
control change the cheapest way that is correct: bench knobs, a new test tone on the bench and
the carrier offset go to the running session; a change of source, rate, I/Q, measurement or
averaging rebuilds it (with a busy indication).
"""

from __future__ import annotations

import csv
import json
import math
from datetime import datetime
from pathlib import Path
from typing import Any

from PyQt6.QtCore import Qt, QTimer, pyqtSignal
from PyQt6.QtGui import QAction, QKeySequence
from PyQt6.QtWidgets import (
    QApplication,
    QCheckBox,
    QDockWidget,
    QFileDialog,
    QHBoxLayout,
    QLabel,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QVBoxLayout,
    QWidget,
)

from rtanalyzer.cli.cautions import config_dir
from rtanalyzer.errors import RtaError
from rtanalyzer.gui import style
from rtanalyzer.gui.band_view import attach as attach_band_view
from rtanalyzer.gui.calibration_menu import attach as attach_calibration_menu
from rtanalyzer.gui.choices import GeneratorChoice
from rtanalyzer.gui.controls import ControlsPanel
from rtanalyzer.gui.dialogs import cautions_dialog, shortcuts_dialog, truth_text, TextDialog
from rtanalyzer.gui.frames import DisplayFrame, noise_sigmas
from rtanalyzer.gui.history_view import HistoryHooks
from rtanalyzer.gui.plots import PatternPlot, PlotCanvas, SpectrumPlot, TrendPlot, WaveformPlot
from rtanalyzer.gui.runner import DISPLAY_RATES, SessionRunner
from rtanalyzer.gui.settings import WindowSettings
from rtanalyzer.gui.widgets import Banner, MetersTile, ReadoutTile, set_style, set_text, signed
from rtanalyzer.generator.signals import TwoTone
from rtanalyzer.live.session import SessionConfig, plan_settings, session_nfft

MUTED_CAPTURE_DBFS = -120.0  # a muted generator on the bench: the receiver hears only noise
STATUS_MS = 500

FIGURES = {
    "sideband": ("sideband suppression", "dB"),
    "twotone": ("worst IMD", "dB PEP"),
    "quadrature": ("suppression the network allows", "dB"),
}

#: The three large tiles: title, unit, which way is better, decimals, '+' on positive values.
TILES = {
    "sideband": ("Opposite-sideband suppression", "dB", "larger", 1, False),
    "carrier": ("Carrier suppression", "dBc", "larger", 1, False),
    "imd": ("Worst IMD (two-tone)", "dB PEP", "smaller", 1, False),
}
#: The same tiles for a 90° network measured alone (``quadrature``).
QUADRATURE_TILES = {
    "sideband": ("Predicted suppression", "dB", "larger", 1, False),
    "carrier": ("Phase error, strongest tone", "°", "nearer_zero", 2, True),
    "imd": ("Amplitude ratio Q/I", "dB", "nearer_zero", 2, True),
}
#: Tones within this of the strongest (mean of the two channels, dB) count as equally strong.
EQUAL_TONES_DB = 0.5
NBSP = "\u00a0"  # keeps a number on the line of its unit when a tile's detail wraps


def hz(f: float, fmt: str | None = None) -> str:
    """'646 Hz' that a wrapping line does not split; a sweep's 1392.48 Hz as 1392 Hz."""
    if fmt is None:
        fmt = ".0f" if abs(f) >= 100.0 else "g"
    return f"{f:{fmt}}{NBSP}Hz"


def menu_path(*names: str) -> str:
    """'Generator ▸ Two-tone' kept on one line of a wrapping tile (no break at the hyphen either)."""
    return f"{NBSP}▸{NBSP}".join(n.replace(" ", NBSP).replace("-", "\u2011") for n in names)


def band_text(lo: float, hi: float) -> str:
    return f"{lo:g}–{hi:g}{NBSP}Hz"


def shown_tone(points: list[dict]) -> dict | None:
    """The network point the phase and ratio tiles show: the strongest tone; of tones equally
    strong (a multitone), the one that allows the least suppression, so that the tiles do not hop
    between equal tones and speak of the tone the suppression tile names."""
    usable = equal_tones(points)
    if not usable:
        return None
    return min(usable, key=lambda p: (p.get("predicted_suppression_db") if p.get("predicted_suppression_db")
                                      is not None else math.inf, p["frequency_hz"]))


def equal_tones(points: list[dict]) -> list[dict]:
    """The network points as strong as the strongest (within EQUAL_TONES_DB)."""
    usable = [p for p in points if p.get("left_dbfs") is not None and p.get("right_dbfs") is not None]
    if not usable:
        return []

    def level(p):
        return 0.5 * (p["left_dbfs"] + p["right_dbfs"])

    top = max(level(p) for p in usable)
    return [p for p in usable if level(p) >= top - EQUAL_TONES_DB]


def flatten(value: Any, prefix: str = "") -> list[tuple[str, Any]]:
    """JSON-like nesting as (dotted key, value) rows, lists indexed: ``points[0].wanted_dbfs``."""
    rows: list[tuple[str, Any]] = []
    if isinstance(value, dict):
        for k, v in value.items():
            rows += flatten(v, f"{prefix}.{k}" if prefix else str(k))
    elif isinstance(value, (list, tuple)):
        if value and all(not isinstance(v, (dict, list, tuple)) for v in value):
            for i, v in enumerate(value):
                rows.append((f"{prefix}[{i}]", v))
        else:
            for i, v in enumerate(value):
                rows += flatten(v, f"{prefix}[{i}]")
    else:
        rows.append((prefix, value))
    return rows


def unit_of(key: str) -> str:
    leaf = key.split(".")[-1].split("[")[0]
    for suffix, unit in (("_db_pep", "dB PEP"), ("_dbfs", "dBFS"), ("_dbc", "dBc"), ("_db", "dB"),
                         ("_hz", "Hz"), ("_s", "s")):
        if leaf.endswith(suffix):
            return unit
    return ""


class MainWindow(QMainWindow):
    """The live window. ``closed`` is emitted once it has stopped its session."""

    closed = pyqtSignal()

    def __init__(self, config: SessionConfig, generator: GeneratorChoice, settings: WindowSettings,
                 banner: str | None = None) -> None:
        super().__init__()
        self.setWindowTitle("rtanalyzer — live")
        self.setStyleSheet(style.STYLE_SHEET)
        self.settings = settings
        self.config = config
        self.generator = generator
        self.muted = False
        self.last_readout = None
        self.last_frame: DisplayFrame | None = None
        self._fit_pending = True
        self._figure_key: str | None = None
        self._closing = False
        self._readout_count = 0
        self.runner = SessionRunner(self)
        self._build_ui()
        self._build_menus()
        self.history = HistoryHooks(self)  # Save snapshot to the store, each new best, View ▸ History…
        self.runner.readout.connect(self.show_readout)
        self.runner.frame.connect(self.show_frame)
        self.runner.busy.connect(self._busy)
        self.runner.started.connect(self._started)
        self.runner.failed.connect(self._failed)
        self.controls.changed.connect(self._control_changed)
        self.controls.refresh_devices_button.clicked.connect(self.refresh_devices)
        log, hold = settings.view()
        saved_rate = settings.get("view/redraws_per_s", self.runner.display_hz)
        self.set_display_rate(saved_rate if saved_rate in DISPLAY_RATES else self.runner.display_hz)
        self.log_box.setChecked(log)
        self.hold_box.setChecked(hold)
        self.runner.set_peak_hold(hold)
        self.refresh_devices()
        self._show_config()
        self.banner.say(banner)
        geometry, state = settings.window()
        if geometry is not None:
            self.restoreGeometry(geometry)
        else:
            screen = QApplication.primaryScreen()
            room = screen.availableGeometry() if screen is not None else None
            self.resize(min(1600, room.width()) if room else 1600, min(1000, room.height()) if room else 1000)
        if state is not None:
            self.restoreState(state)
        self.status_timer = QTimer(self)
        self.status_timer.setInterval(STATUS_MS)
        self.status_timer.timeout.connect(self._update_status)
        self.status_timer.start()
        self.cautions = None
        attach_band_view(self)  # View ▸ Across the band…, and the sweep progress
        attach_calibration_menu(self)  # Calibration ▸ profiles in force
        self.runner.start(self._effective(config))

    # -- building -------------------------------------------------------------------------------------

    def _build_ui(self) -> None:
        central = QWidget()
        outer = QVBoxLayout(central)
        outer.setContentsMargins(10, 8, 10, 4)
        outer.setSpacing(6)
        self.banner = Banner()
        outer.addWidget(self.banner)
        tiles = QHBoxLayout()
        tiles.setSpacing(8)
        self.tiles = {key: ReadoutTile(key, title, unit, better == "larger")
                      for key, (title, unit, better, _, _) in TILES.items()}
        for tile in self.tiles.values():
            tiles.addWidget(tile, 3)
        self.meters = MetersTile()
        tiles.addWidget(self.meters, 2)
        outer.addLayout(tiles)
        self.message = QLabel("")
        self.message.setObjectName("message")
        self.message.setWordWrap(True)
        self.message.setStyleSheet(f"color: {style.INK_SOFT};")
        outer.addWidget(self.message)
        bar = QHBoxLayout()
        self.log_box = QCheckBox("Log frequency  (L)")
        self.log_box.toggled.connect(self._log_toggled)
        self.hold_box = QCheckBox("Peak hold  (P)")
        self.hold_box.toggled.connect(self._hold_toggled)
        reset_hold = QPushButton("Clear peak hold")
        reset_hold.clicked.connect(self.runner.reset_peak)
        fit = QPushButton("Frame the plan  (F)")
        fit.clicked.connect(self.fit_spectrum)
        hint = QLabel("drag to pan · wheel to zoom")
        hint.setStyleSheet(f"color: {style.INK_SOFT};")
        for w in (self.log_box, self.hold_box, reset_hold, fit):
            bar.addWidget(w)
        bar.addStretch(1)
        bar.addWidget(hint)
        outer.addLayout(bar)
        # Two canvases: the spectrum, redrawn with every readout, and the three smaller plots,
        # redrawn at half that rate (under software OpenGL every canvas frame costs).
        self.plots = PlotCanvas()
        self.spectrum = self.plots.add(SpectrumPlot(self.plots))
        self.lower = PlotCanvas()
        self.waveform = self.lower.add(WaveformPlot(self.lower), 1.0)
        self.pattern = self.lower.add(PatternPlot(self.lower), 0.8)
        self.trend = self.lower.add(TrendPlot(self.lower), 1.0)
        for canvas, stretch, height in ((self.plots, 3, 300), (self.lower, 2, 220)):
            canvas.share_fonts()
            canvas.native.setMinimumHeight(height)
            outer.addWidget(canvas.native, stretch)
        self._frames_shown = 0
        self.setCentralWidget(central)

        self.controls = ControlsPanel()
        scroll = QScrollArea()
        scroll.setWidget(self.controls)
        scroll.setWidgetResizable(True)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.setMinimumWidth(340)
        self.dock = QDockWidget("Controls", self)
        self.dock.setObjectName("controls_dock")
        self.dock.setWidget(scroll)
        self.dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                              | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, self.dock)

        status = self.statusBar()
        self.source_label = QLabel("")
        self.rate_label = QLabel("")
        self.updates_label = QLabel("")
        self.updates_label.setObjectName("updates")
        self.xrun_status = QLabel("")
        self.paused_label = QLabel("")
        self.busy_bar = QProgressBar()
        self.busy_bar.setRange(0, 0)
        self.busy_bar.setMaximumWidth(140)
        self.busy_bar.setMaximumHeight(14)
        self.busy_bar.hide()
        for w in (self.busy_bar, self.paused_label, self.source_label, self.rate_label, self.updates_label,
                  self.xrun_status):
            status.addPermanentWidget(w)

    def _build_menus(self) -> None:
        menu = self.menuBar()

        def action(text: str, slot, shortcut: str | None = None, checkable: bool = False, name: str = "") -> QAction:
            act = QAction(text, self)
            if shortcut:
                act.setShortcut(QKeySequence(shortcut))
                act.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
            act.setCheckable(checkable)
            if checkable:
                act.toggled.connect(slot)
            else:
                act.triggered.connect(lambda _=False: slot())
            if name:
                act.setObjectName(name)
            self.addAction(act)
            return act

        file_menu = menu.addMenu("&File")
        file_menu.addAction(action("Save snapshot", self.snapshot, "S", name="act_snapshot"))
        file_menu.addSeparator()
        file_menu.addAction(action("Export window as PNG…", self._export_png_dialog, "Ctrl+E"))
        file_menu.addAction(action("Export figures as CSV…", lambda: self._export_dialog("csv")))
        file_menu.addAction(action("Export figures as JSON…", lambda: self._export_dialog("json")))
        file_menu.addSeparator()
        file_menu.addAction(action("Quit", self.close, "Ctrl+Q"))
        run_menu = menu.addMenu("&Run")
        self.pause_action = action("Pause readouts", self.set_paused, "Space", checkable=True, name="act_pause")
        run_menu.addAction(self.pause_action)
        run_menu.addAction(action("Best so far: start again", self.reset_best, "B", name="act_reset_best"))
        self.mute_action = action("Mute generator", self._mute_from_menu, "M", checkable=True, name="act_mute")
        run_menu.addAction(self.mute_action)
        view_menu = menu.addMenu("&View")
        view_menu.addAction(action("Frame the plan", self.fit_spectrum, "F"))
        view_menu.addAction(action("Log / linear frequency", lambda: self.log_box.toggle(), "L"))
        view_menu.addAction(action("Peak hold on / off", lambda: self.hold_box.toggle(), "P"))
        rates = view_menu.addMenu("Redraws per second")
        self.rate_actions = {}
        for hz in DISPLAY_RATES:
            act = QAction(f"{hz:g}", self)
            act.setCheckable(True)
            act.triggered.connect(lambda _=False, hz=hz: self.set_display_rate(hz))
            rates.addAction(act)
            self.rate_actions[hz] = act
        view_menu.addAction(self.dock.toggleViewAction())
        help_menu = menu.addMenu("&Help")
        help_menu.addAction(action("Safety cautions", self.show_cautions, "F1"))
        help_menu.addAction(action("Keyboard shortcuts", lambda: self._keep(shortcuts_dialog(self))))
        help_menu.addAction(action("Bench truth (simulated bench)", self.show_truth))

    def _keep(self, dialog) -> None:
        self._dialog = dialog
        dialog.show()

    # -- config -> panel ------------------------------------------------------------------------------

    def _show_config(self) -> None:
        c = self.config
        self.controls.set_state(
            source=c.source or "sim", rate=c.rate_hz, file=c.file, loop=c.loop, carrier_hz=c.carrier_hz,
            carrier_default=c.knobs.carrier_offset_hz if c.source == "sim" else None, wanted=c.wanted,
            iq=c.iq, channel=c.channel, tones=c.tones_hz, measurement=c.measurement, averages=c.averages,
            muted=self.muted)
        self.controls.set_knobs(c.knobs)
        self.controls.set_generator(self.generator)

    def _effective(self, config: SessionConfig) -> SessionConfig:
        """Keep ``config`` (with the generator's signal; none for a file) and return what to build:
        on the bench, the I/Q choice and the mute applied to its knobs."""
        signal = None
        if config.source != "file":
            try:
                signal = self.generator.signal()
            except Exception as exc:
                self._generator_problem(str(exc))
                signal = config.signal
        knobs = config.knobs.with_changes(iq=config.iq) if config.source == "sim" else config.knobs
        self.config = config.with_changes(signal=signal, knobs=knobs)
        built = self.config
        if built.source == "sim" and self.muted:
            built = built.with_changes(knobs=knobs.with_changes(capture_pep_dbfs=MUTED_CAPTURE_DBFS))
        elif built.source == "device":
            built = built.with_changes(muted=self.muted)  # a rebuilt card stays silent while muted
        return built

    def rebuild(self) -> None:
        """Stop the session and start one for the current config."""
        self._fit_pending = True
        self.trend.clear()
        for tile in self.tiles.values():
            tile.tracker.reset()
        self.runner.start(self._effective(self.config))

    # -- control changes ------------------------------------------------------------------------------

    def _control_changed(self, what: str) -> None:
        try:
            getattr(self, f"_changed_{what}")()
        except RtaError as exc:
            self.statusBar().showMessage(str(exc), 8000)

    def _changed_source(self) -> None:
        kind = self.controls.source.currentData()
        self.controls.show_source(kind)
        self.config = self.config.with_changes(source=kind)
        if kind == "file" and not self.config.file:
            self.banner.say("Choose a WAV or FLAC capture under Source ▸ File, and say which tones it holds "
                            "under Frequency plan ▸ Tones in it. Until then the previous source runs on.")
            return
        self.banner.say(None)
        if kind == "sim":
            self.controls.set_knobs(self.config.knobs)
        self.rebuild()

    def _changed_devices(self) -> None:
        c = self.controls
        self.config = self.config.with_changes(input_device=c.input_device.currentData(),
                                               output_device=c.output_device.currentData(),
                                               rate_hz=int(c.rate.currentData()))
        if self.config.source in ("device", "sim"):
            self.rebuild()

    def _changed_file(self) -> None:
        path = self.controls.file_path.text().strip() or None
        self.config = self.config.with_changes(file=path, loop=self.controls.loop.isChecked())
        if self.config.source == "file" and path:
            if not self.config.tones_hz and not self.config.signal:
                self.banner.say("Say which tones the recording holds under Frequency plan ▸ Tones in it.")
            else:
                self.banner.say(None)
            self.rebuild()

    def _changed_knobs(self) -> None:
        knobs = self.config.knobs.with_changes(**self.controls.knob_values())
        self.config = self.config.with_changes(knobs=knobs)
        self._apply_bench_knobs()

    def _apply_bench_knobs(self) -> None:
        engine = self.runner.engine
        if self.config.source != "sim" or engine is None or not hasattr(engine.source, "set_knobs"):
            return
        knobs = self.config.knobs.with_changes(iq=engine.source.knobs.iq)
        if self.muted:
            knobs = knobs.with_changes(capture_pep_dbfs=MUTED_CAPTURE_DBFS)
        engine.source.set_knobs(knobs)

    def _generator_problem(self, text: str | None) -> None:
        note = self.controls.generator_note
        if text:
            note.setText(text)
            note.setStyleSheet(f"color: {style.WORSE};")
        else:
            note.setText("")
            note.setStyleSheet(f"color: {style.INK_SOFT};")

    def _changed_generator(self) -> None:
        choice = self.controls.generator_choice(self.generator)
        try:
            signal = choice.signal()
            if self.config.source != "file":
                from rtanalyzer.generator.generator import Generator
                from rtanalyzer.generator.signals import Quadrature

                # checks Nyquist at this rate; a sound card plays a quadrature pair on two channels
                stereo = self.config.source == "device" and isinstance(signal, Quadrature)
                Generator(signal, self.config.rate_hz, channels=2 if stereo else 1)
        except Exception as exc:
            self._generator_problem(str(exc))
            return
        self._generator_problem(None)
        self.generator = choice
        before = self.config.measurement_name
        self.config = self.config.with_changes(signal=signal)
        engine = self.runner.engine
        if (self.config.measurement_name != before or engine is None or self.runner.rebuilding
                or engine.nfft != session_nfft(self.config, engine.source.rate_hz)):
            self.rebuild()  # a new figure, or tones that need another window length
        elif self.config.source == "sim" and hasattr(engine.source, "set_signal"):
            try:
                engine.source.set_signal(signal)
            except Exception as exc:
                self._generator_problem(str(exc))
                return
            self._fit_pending = True
            self.trend.clear()
        elif self.config.source == "device" and hasattr(engine.source, "set_signal"):
            try:
                engine.source.set_signal(signal)  # the producer fades over between two blocks
            except RtaError:
                self.rebuild()  # another output channel count (a quadrature pair): reopen the card
                return
            self._fit_pending = True
            self.trend.clear()
        elif self.config.source == "device":
            self.rebuild()

    def _changed_mute(self) -> None:
        self.set_muted(self.controls.mute.isChecked())

    def _changed_plan(self) -> None:
        carrier, wanted = self.controls.plan()
        self.config = self.config.with_changes(carrier_hz=carrier, wanted=None if wanted == "auto" else wanted)
        engine = self.runner.engine
        if engine is None:
            return
        settings = plan_settings(self.config, engine.measurement.name)
        engine.update_settings(carrier=settings["carrier"], wanted=settings["wanted"])
        self._fit_pending = True

    def _changed_view(self) -> None:
        iq, channel = self.controls.input_choice()
        self.config = self.config.with_changes(iq=iq, channel=channel)
        self.rebuild()

    def _changed_tones(self) -> None:
        self.config = self.config.with_changes(tones_hz=self.controls.tones())
        if self.config.source == "file":
            self.banner.say(None)
            self.rebuild()

    def _changed_measurement(self) -> None:
        self.config = self.config.with_changes(measurement=self.controls.measurement.currentData())
        self.rebuild()

    def _changed_averages(self) -> None:
        self.config = self.config.with_changes(averages=int(self.controls.averages.value()))
        self.rebuild()

    # -- actions --------------------------------------------------------------------------------------

    def set_paused(self, paused: bool) -> None:
        self.runner.set_paused(paused)
        if self.pause_action.isChecked() != paused:
            self.pause_action.setChecked(paused)
        self.paused_label.setText("PAUSED (Space runs)" if paused else "")
        self.paused_label.setStyleSheet(f"color: {style.WORSE}; font-weight: 700;" if paused else "")

    def reset_best(self) -> None:
        self.runner.reset_best()
        self.statusBar().showMessage("Best so far starts again from the present figure.", 3000)

    def _mute_from_menu(self, muted: bool) -> None:
        if self.controls.mute.isChecked() != muted:
            self.controls.mute.setChecked(muted)  # emits "mute"
        else:
            self.set_muted(muted)

    def set_muted(self, muted: bool) -> None:
        self.muted = muted
        if self.mute_action.isChecked() != muted:
            self.mute_action.blockSignals(True)
            self.mute_action.setChecked(muted)
            self.mute_action.blockSignals(False)
        if self.controls.mute.isChecked() != muted:
            self.controls._quiet = True
            self.controls.mute.setChecked(muted)
            self.controls._quiet = False
        engine = self.runner.engine
        if engine is not None:
            source = engine.source
            if self.config.source == "sim":
                self._apply_bench_knobs()
            elif hasattr(source, "mute"):
                (source.mute if muted else source.unmute)()
        self.statusBar().showMessage("Generator muted." if muted else "Generator playing.", 3000)

    def set_display_rate(self, hz: float) -> None:
        self.runner.display_hz = float(hz)
        for rate, act in self.rate_actions.items():
            act.setChecked(rate == hz)

    def fit_spectrum(self) -> None:
        if self.last_frame is not None:
            self.spectrum.fit(self.last_frame)
            self.plots.update()
        else:
            self._fit_pending = True

    def _log_toggled(self, on: bool) -> None:
        if on and self.config.iq:
            self.log_box.blockSignals(True)
            self.log_box.setChecked(False)
            self.log_box.blockSignals(False)
            self.statusBar().showMessage("An I/Q spectrum has negative frequencies: it stays linear.", 5000)
            return
        nyq = self.config.rate_hz / 2.0
        self.spectrum.set_log(on, nyq)
        if self.last_frame is not None:
            self.spectrum.fit(self.last_frame)
        self.plots.update()

    def _hold_toggled(self, on: bool) -> None:
        self.runner.set_peak_hold(on)

    def show_cautions(self, first_time: bool = False) -> None:
        if self.cautions is None:
            self.cautions = cautions_dialog(self, first_time)
        self.cautions.show()
        self.cautions.raise_()

    def show_truth(self) -> None:
        engine = self.runner.engine
        if engine is None or not hasattr(engine.source, "truth"):
            QMessageBox.information(self, "rtanalyzer", "The bench's truth exists only for the simulated bench.")
            return
        self._keep(TextDialog("rtanalyzer — bench truth", "What the simulated bench holds, exactly",
                              truth_text(engine.source.truth()), self))

    def refresh_devices(self) -> None:
        inputs, outputs, note = [("default input", None)], [("default output", None)], ""
        try:
            try:
                from rtanalyzer.sources.soundcard_devices import list_devices
            except ImportError:
                from rtanalyzer.sources.soundcard import list_devices
            devices = list_devices()
            inputs += [(f"{d['index']}: {d['name']}", d["index"]) for d in devices if d["max_input_channels"] > 0]
            outputs += [(f"{d['index']}: {d['name']}", d["index"]) for d in devices if d["max_output_channels"] > 0]
            if len(inputs) == 1:
                inputs, note = [], "No sound input device found."
        except Exception as exc:  # sounddevice or PortAudio missing, or no sound server
            inputs, outputs = [], []
            note = f"No sound devices: {exc}"
        self.controls.set_devices(inputs, outputs, note)

    # -- session events -------------------------------------------------------------------------------

    def _busy(self, busy: bool, what: str) -> None:
        self.busy_bar.setVisible(busy)
        if busy:
            self.statusBar().showMessage(f"Restarting the session: {self._describe()}…")
            if QApplication.overrideCursor() is None:
                QApplication.setOverrideCursor(Qt.CursorShape.BusyCursor)
        else:
            self.statusBar().clearMessage()
            while QApplication.overrideCursor() is not None:
                QApplication.restoreOverrideCursor()

    def _describe(self) -> str:
        names = {"sim": "simulated bench", "device": "sound card", "file": "recording"}
        return names.get(self.config.source or "", "source")

    def _started(self, engine) -> None:
        self.meters.set_channels(engine.source.channels, self._channel_names(engine))
        self._tiles_for(engine.measurement.name)
        self._set_trend_figure(engine.measurement.name)
        self._update_status()

    def _failed(self, text: str) -> None:
        if self.config.source != "sim":
            self.banner.say(f"The {self._describe()} could not start ({text}). Showing the simulated bench "
                            "instead; choose the source again once it is fixed.")
            self.config = self.config.with_changes(source="sim")
            self._show_config()
            self.rebuild()
        else:
            self.banner.say(f"The session could not start: {text}")

    def _channel_names(self, engine) -> list[str]:
        if engine.iq:
            return ["I", "Q"]
        return [f"in {i + 1}" for i in range(engine.source.channels)]

    def _set_trend_figure(self, measurement: str) -> None:
        if measurement == self._figure_key:
            return
        self._figure_key = measurement
        title, unit = FIGURES.get(measurement, ("figure", "dB"))
        self.trend.set_figure("Trend", f"{title}, {unit}")

    # -- readouts -------------------------------------------------------------------------------------

    def show_readout(self, readout) -> None:
        self.last_readout = readout
        self._readout_count += 1
        self.meters.show_levels(readout.levels, readout.xruns,
                                self._channel_names(self.runner.engine) if self.runner.engine else None)
        result = readout.result
        t = readout.t
        self._tiles_for(readout.measurement)
        if result is None:
            if readout.error not in ("settling",):
                for tile in self.tiles.values():
                    tile.set_unavailable(readout.error or "no figures")
            set_text(self.message, f"No figures: {readout.error}" if readout.error else "")
            set_style(self.message, f"color: {style.WORSE};")
            return
        measurement = readout.measurement
        if measurement == "sideband":
            self._sideband_tiles(t, result)
        elif measurement == "twotone":
            self._twotone_tiles(t, result)
        elif measurement == "quadrature":
            self._quadrature_tiles(t, result)
        notes = list(result.get("warnings") or [])
        if result.get("clipped"):
            notes.insert(0, "the input clipped: figures are not trustworthy")
        if readout.sweep is not None:
            notes.insert(0, f"sweep step {readout.sweep['step'] + 1} at {readout.sweep['frequency_hz']:g} Hz")
        set_text(self.message, " · ".join(notes))
        set_style(self.message, f"color: {style.WORSE if result.get('clipped') else style.INK_SOFT};")
        best = readout.best or {}
        self.trend.add(t, best.get("value"))

    def _tiles_for(self, measurement: str) -> None:
        """Title, unit and sense of the three tiles for ``measurement`` (a no-op when they have them)."""
        specs = QUADRATURE_TILES if measurement == "quadrature" else TILES
        for key, (title, unit, better, decimals, plus) in specs.items():
            self.tiles[key].configure(title, unit, better, decimals, plus)

    def _sideband_tiles(self, t: float, r: dict) -> None:
        points = r.get("points") or []
        worst, bound = r.get("worst_sideband_suppression_db"), r.get("worst_is_lower_bound")
        in_band, band = r.get("worst_in_band"), r.get("band_hz")
        where_worst = f"worst of {len(points)}"
        if len(points) > 1 and in_band and band:
            # Several tones: the trim is judged inside the band (as the trend and best-so-far are).
            worst, bound = in_band["sideband_suppression_db"], in_band["is_lower_bound"]
            where_worst = f"worst in {band_text(*band)}"
        detail = ""
        p = min((q for q in points if q.get("sideband_suppression_db") == worst), key=lambda q: q["tone_hz"],
                default=None)
        if p is not None:
            # Short enough for two lines of the tile: the wanted level is labelled on the spectrum.
            where = f"{where_worst} at {hz(p['tone_hz'])}" if len(points) > 1 else f"at {hz(p['tone_hz'])}"
            if p.get("unwanted_detected"):
                detail = f"{where} · unwanted {signed(p['unwanted_dbfs'])}{NBSP}dBFS"
            else:
                detail = f"{where} · unwanted under the noise"
        # one tone (a stepped sweep moves it): its own trend; several: the band's worst
        subject = points[0].get("tone_hz") if len(points) == 1 else tuple(band or ())
        self.tiles["sideband"].set_figure(t, worst, "≥" if bound else "", detail or "no wanted tone found",
                                          subject=subject)
        carrier = r.get("carrier_suppression_db")
        if r.get("carrier_detected"):
            detail = f"{signed(r['carrier_dbfs'])}{NBSP}dBFS at {hz(r['carrier_hz'], '.1f')}"
        else:
            detail = "under the noise" + (f" near {hz(r['carrier_hz'], '.0f')}" if r.get("carrier_hz") else "")
        self.tiles["carrier"].set_figure(t, carrier, "" if r.get("carrier_detected") else "≥", detail)
        if isinstance(self.config.signal, TwoTone):
            self.tiles["imd"].set_unavailable(f"choose it under {menu_path('Measurement', 'Figures')}")
        else:
            self.tiles["imd"].set_unavailable(f"a two-tone figure: {menu_path('Generator', 'Two-tone')}")

    def _twotone_tiles(self, t: float, r: dict) -> None:
        worst = r.get("worst_imd_db_pep")
        order = r.get("worst_imd_order")
        detail = ""
        for product in r.get("imd") or []:
            if product.get("order") == order:
                dbc = [product.get(f"{s}_dbc") for s in ("lower", "upper") if product.get(f"{s}_dbc") is not None]
                if dbc:
                    detail = f"IMD{order} · {signed(max(dbc))}{NBSP}dBc"
        if r.get("pep_dbfs") is not None:
            detail += f" · PEP {signed(r['pep_dbfs'])}{NBSP}dBFS"
        self.tiles["imd"].set_figure(t, worst, "≤" if r.get("worst_imd_is_bound") else "", detail.strip(" ·"))
        # With the carrier known, a two-tone also shows its carrier and unwanted sidebands.
        unwanted = [u for u in r.get("unwanted") or [] if u.get("sideband_suppression_db") is not None]
        if unwanted:
            u = min(unwanted, key=lambda q: q["sideband_suppression_db"])
            where = f"worse of the two, the {u['tone_hz']:g}{NBSP}Hz tone's"
            self.tiles["sideband"].set_figure(t, u["sideband_suppression_db"], "" if u["unwanted_detected"] else "≥",
                                              where)
        else:
            self.tiles["sideband"].set_unavailable(f"a one-tone figure: {menu_path('Generator', 'Tone')}")
        carrier = r.get("carrier_suppression_db")
        if carrier is not None:
            near = f"at {r['carrier_hz']:.0f}{NBSP}Hz" if r.get("carrier_detected") else "under the noise"
            self.tiles["carrier"].set_figure(t, carrier, "" if r.get("carrier_detected") else "≥", near)
        else:
            self.tiles["carrier"].set_unavailable(f"give the carrier: {menu_path('Frequency plan', 'Carrier at')}")

    def _quadrature_tiles(self, t: float, r: dict) -> None:
        """A 90° network alone: the worst suppression it allows in the band, and the phase error and
        amplitude ratio of the strongest tone."""
        points = [p for p in r.get("points") or [] if p.get("frequency_hz") is not None]
        band = r.get("band") or {}
        lo, hi = band.get("low_hz"), band.get("high_hz")
        worst, f = band.get("worst_predicted_suppression_db"), band.get("worst_frequency_hz")
        inside = band.get("points") or 0
        if worst is not None and f is not None:
            bound = band.get("worst_is_lower_bound")
            where = f"worst in {band_text(lo, hi)}, at {hz(f)}" if inside > 1 else f"at {hz(f)}"
        else:  # no tone inside the band: the worst of those measured, said so
            worst, f = r.get("worst_predicted_suppression_db"), r.get("worst_frequency_hz")
            bound = r.get("worst_is_lower_bound")
            where = (f"no tone in {band_text(lo, hi)}" if lo is not None and hi is not None else "no tone in the band")
            if f is not None:
                where += f"; worst at {hz(f)}"
        at_worst = next((p for p in points if f is not None and abs(p["frequency_hz"] - f) < 0.01), None)
        if bound is None and at_worst is not None:
            bound = at_worst.get("predicted_suppression_is_bound")
        if bound:
            where += " · errors under the noise"
        subject = points[0]["frequency_hz"] if len(points) == 1 else (lo, hi)  # a sweep step: its own trend
        self.tiles["sideband"].set_figure(t, worst, "≥" if bound else "", where if worst is not None else
                                          "no tone clearly above the noise on both channels", subject=subject)
        p = shown_tone(points)
        if p is None:
            for key in ("carrier", "imd"):
                self.tiles[key].set_unavailable("no tone clearly above the noise on both channels")
            return
        # several tones as strong (a multitone): the worst of them is shown, and the title says so
        self.tiles["carrier"].set_title("Phase error, worst tone" if len(equal_tones(points)) > 1
                                        else QUADRATURE_TILES["carrier"][0])
        f = p["frequency_hz"]
        err, ratio, diff = p.get("phase_error_deg"), p.get("amplitude_ratio_db"), p.get("phase_difference_deg")
        hidden = bool(p.get("predicted_suppression_is_bound"))
        k = noise_sigmas()
        if err is None:
            self.tiles["carrier"].set_unavailable(f"no phase at {hz(f)}")
        elif hidden:
            # Within the noise: the error is at most what the measurement allows, never a number.
            most = abs(err) + k * (p.get("phase_uncertainty_deg") or 0.0)  # the tile rounds a '≤' up
            self.tiles["carrier"].set_figure(
                t, most, "≤", f"at {hz(f)}: under the noise, at most "
                              f"{math.ceil(most / (360.0 * f) * 1e8 - 1e-6) / 100.0:.2f}{NBSP}µs",
                subject=f)
        else:
            us = err / (360.0 * f) * 1e6
            lead = "I leads Q" if (diff or 0.0) >= 0 else "Q leads I"
            detail = f"= {'+' if us > 0 else ''}{signed(us, 2)}{NBSP}µs at {hz(f)}"
            if diff is not None:
                detail += f" · {lead} by {abs(diff):.2f}°"
            self.tiles["carrier"].set_figure(t, err, "", detail, subject=f)
        if ratio is None:
            self.tiles["imd"].set_unavailable(f"no ratio at {hz(f)}")
        elif hidden:
            most = abs(ratio) + k * (p.get("amplitude_uncertainty_db") or 0.0)
            self.tiles["imd"].set_figure(t, most, "≤", f"at {hz(f)}: under the noise", subject=f)
        else:
            levels = ""
            if p.get("left_dbfs") is not None and p.get("right_dbfs") is not None:
                levels = f" · I {signed(p['left_dbfs'])}, Q {signed(p['right_dbfs'])}{NBSP}dBFS"
            self.tiles["imd"].set_figure(t, ratio, "", f"at {hz(f)}{levels}", subject=f)

    def show_frame(self, frame: DisplayFrame) -> None:
        self.last_frame = frame
        self.spectrum.show_frame(frame)
        if self._fit_pending and frame.markers:
            self._fit_pending = False
            self.spectrum.fit(frame)
        self.plots.update()
        self._frames_shown += 1
        if self._frames_shown % 2 == 0:  # the smaller plots at half the rate
            self.waveform.show_frame(frame)
            self.pattern.show_frame(frame)
            readout = self.last_readout
            if readout is not None:
                best = readout.best or {}
                self.trend.redraw(readout.t, best.get("best"), FIGURES.get(readout.measurement, ("", "dB"))[1])
            self.lower.update()

    def _update_status(self) -> None:
        engine = self.runner.engine
        if engine is None:
            return
        source = engine.source
        set_text(self.source_label, source.describe())
        set_text(self.rate_label, f"{source.rate_hz:g} Hz")
        set_text(self.updates_label, f"{self.runner.readouts_per_second():.1f} readouts/s")
        x = source.counters.as_dict()
        set_text(self.xrun_status, f"xruns: {x['input_overflows']} over · {x['output_underflows']} under · "
                                   f"{x['dropped_blocks']} dropped")
        prep = self.runner.prep
        if prep is not None and prep.last_error:
            self.statusBar().showMessage(f"The plots could not be drawn: {prep.last_error}", 2000)

    # -- exports --------------------------------------------------------------------------------------

    def figures(self) -> dict[str, Any]:
        """The newest readout's figures as JSON, with what was measured and how."""
        readout = self.last_readout
        out: dict[str, Any] = {"saved": datetime.now().isoformat(timespec="seconds")}
        if readout is not None:
            out.update(readout.as_json())
        engine = self.runner.engine
        if engine is not None:
            out["source"] = engine.source.describe()
            if self.config.source == "sim" and hasattr(engine.source, "knobs"):
                out["bench_knobs"] = engine.source.knobs.as_dict()
        return out

    def export_png(self, path: str | Path) -> Path:
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        if not self.grab().save(str(path), "PNG"):
            raise RtaError(f"could not write the picture {path}")
        return path

    def export_json(self, path: str | Path) -> Path:
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(self.figures(), indent=2, allow_nan=False, default=str) + "\n", encoding="utf-8")
        return path

    def export_csv(self, path: str | Path) -> Path:
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        with path.open("w", newline="", encoding="utf-8") as handle:
            writer = csv.writer(handle)
            writer.writerow(["quantity", "value", "unit"])
            for key, value in flatten(self.figures()):
                writer.writerow([key, "" if value is None else value, unit_of(key)])
        return path

    def snapshot(self) -> tuple[Path, Path]:
        """Store the newest readout in the history; keep a picture and the figures beside it as files."""
        snapshot_id = self.history.save_now()
        folder = config_dir() / "snapshots"
        stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
        base = folder / f"rtanalyzer-{stamp}"
        n = 1
        while base.with_suffix(".png").exists():
            n += 1
            base = folder / f"rtanalyzer-{stamp}-{n}"
        try:
            png = self.export_png(base.with_suffix(".png"))
            data = self.export_json(base.with_suffix(".json"))
        except (OSError, RtaError) as exc:
            self.statusBar().showMessage(f"Snapshot not saved: {exc}", 8000)
            raise
        saved = f"saved snapshot #{snapshot_id} · " if snapshot_id is not None else "not stored in the history · "
        self.statusBar().showMessage(f"{saved}picture {png} and {data.name}", 10000)
        return png, data

    def _export_png_dialog(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Export the window", "rtanalyzer.png", "PNG pictures (*.png)")
        if path:
            self.export_png(path)
            self.statusBar().showMessage(f"Saved {path}", 6000)

    def _export_dialog(self, kind: str) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Export the figures", f"rtanalyzer-figures.{kind}",
                                              f"{kind.upper()} files (*.{kind})")
        if path:
            (self.export_csv if kind == "csv" else self.export_json)(path)
            self.statusBar().showMessage(f"Saved {path}", 6000)

    # -- closing --------------------------------------------------------------------------------------

    def save_settings(self) -> None:
        s = self.settings
        s.save_session(self.config, self.generator)
        s.save_view(self.log_box.isChecked(), self.hold_box.isChecked())
        s.put("view/redraws_per_s", self.runner.display_hz)
        s.save_window(self.saveGeometry(), self.saveState())
        s.sync()

    def closeEvent(self, event) -> None:  # noqa: N802 - Qt
        if not self._closing:
            self._closing = True
            self.status_timer.stop()
            try:
                self.save_settings()
            finally:
                self.runner.stop()
                while QApplication.overrideCursor() is not None:
                    QApplication.restoreOverrideCursor()
                if self.cautions is not None:
                    self.cautions.close()
            self.closed.emit()
        super().closeEvent(event)
