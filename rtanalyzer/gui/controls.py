"""The control panel: source and devices, bench knobs, generator, frequency plan, measurement.

The panel only edits; it emits ``changed(what)`` and the window decides whether a change can be
applied live (a knob, the carrier offset, a new tone) or needs the session rebuilt (source,
rate, I/Q, measurement, averaging).
"""

from __future__ import annotations

from PyQt6.QtCore import Qt, pyqtSignal
from PyQt6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QFileDialog,
    QFormLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSlider,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from rtanalyzer.gui import style
from rtanalyzer.gui.choices import KIND_NAMES, KINDS, GeneratorChoice
from rtanalyzer.sources.bench.knobs import BenchKnobs

SOURCE_NAMES = (("sim", "Simulated bench"), ("device", "Sound card"), ("file", "Recording (file)"))
STEREO_VIEW = "stereo"  # the Capture entry of a measurement that always reads left + j·right
STEREO_NAME = "stereo: left = I, right = Q"
RATES = (44100, 48000, 96000, 192000)

# knob -> (label, low, high, step, decimals, unit)
KNOB_ROWS = (
    ("phase_trim_deg", "Phase trim", -30.0, 30.0, 0.05, 2, "°"),
    ("amplitude_trim_db", "Amplitude trim", -6.0, 6.0, 0.01, 2, "dB"),
    ("lo_quadrature_error_deg", "LO quadrature error", -30.0, 30.0, 0.05, 2, "°"),
    ("carrier_leak_dbc", "Carrier leak", -120.0, 0.0, 0.5, 1, "dBc"),
    ("drive_db", "Drive re saturation", -60.0, 10.0, 0.5, 1, "dB"),
    ("tuning_error_hz", "Receiver mistuned", -200.0, 200.0, 0.1, 1, "Hz"),
)


def _spin(low: float, high: float, step: float, decimals: int, unit: str = "", name: str = "") -> QDoubleSpinBox:
    box = QDoubleSpinBox()
    box.setRange(low, high)
    box.setSingleStep(step)
    box.setDecimals(decimals)
    box.setKeyboardTracking(False)  # typed numbers apply on Enter, arrows and wheel at once
    box.setAccelerated(True)
    if unit:
        box.setSuffix(f" {unit}")
    if name:
        box.setObjectName(name)
    return box


def _note(text: str = "") -> QLabel:
    label = QLabel(text)
    label.setWordWrap(True)
    label.setStyleSheet(f"color: {style.INK_SOFT}; font-weight: 400;")
    return label


class KnobRow(QWidget):
    """A bench knob as a slider (coarse, like a trimmer) beside a spin box (exact)."""

    valueChanged = pyqtSignal(float)

    def __init__(self, name: str, low: float, high: float, step: float, decimals: int, unit: str) -> None:
        super().__init__()
        self.step = step
        self.spin = _spin(low, high, step, decimals, unit, f"knob_{name}")
        self.spin.setMinimumWidth(104)
        self.slider = QSlider(Qt.Orientation.Horizontal)
        self.slider.setObjectName(f"knob_slider_{name}")
        self.slider.setRange(round(low / step), round(high / step))
        layout = QHBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(self.slider, 1)
        layout.addWidget(self.spin)
        self.slider.valueChanged.connect(self._slid)
        self.spin.valueChanged.connect(self._typed)
        self._busy = False

    def _slid(self, position: int) -> None:
        if not self._busy:
            self.spin.setValue(position * self.step)

    def _typed(self, value: float) -> None:
        self._busy = True
        self.slider.setValue(round(value / self.step))
        self._busy = False
        self.valueChanged.emit(value)

    def value(self) -> float:
        return float(self.spin.value())

    def set_value(self, value: float) -> None:
        """Set without emitting (restoring, not turning)."""
        self.spin.blockSignals(True)
        self.spin.setValue(value)
        self.spin.blockSignals(False)
        self._busy = True
        self.slider.setValue(round(value / self.step))
        self._busy = False


class ControlsPanel(QWidget):
    """All the controls, grouped; ``changed`` says which group changed."""

    changed = pyqtSignal(str)  # "source", "devices", "file", "knobs", "generator", "mute", "plan",
    # "view" (real/I-Q and channel), "tones", "measurement", "averages"

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setMinimumWidth(320)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.setSpacing(8)
        layout.addWidget(self._source_group())
        layout.addWidget(self._bench_group())
        layout.addWidget(self._generator_group())
        layout.addWidget(self._plan_group())
        layout.addWidget(self._measurement_group())
        layout.addStretch(1)
        self._quiet = False
        self.show_source("sim")
        self.show_generator_kind("tone")

    # -- building ---------------------------------------------------------------------------------

    def _source_group(self) -> QGroupBox:
        box = QGroupBox("Source")
        form = QFormLayout(box)
        self.source = QComboBox()
        self.source.setObjectName("source")
        for key, name in SOURCE_NAMES:
            self.source.addItem(name, key)
        self.source.currentIndexChanged.connect(lambda _: self._emit("source"))
        form.addRow("Audio from", self.source)
        self.input_device = QComboBox()
        self.input_device.setObjectName("input_device")
        self.output_device = QComboBox()
        self.output_device.setObjectName("output_device")
        self.rate = QComboBox()
        self.rate.setObjectName("rate")
        for r in RATES:
            self.rate.addItem(f"{r} Hz", r)
        self.rate.setCurrentIndex(RATES.index(48000))
        self.refresh_devices_button = QPushButton("Look again for devices")
        self.device_note = _note()
        for combo in (self.input_device, self.output_device, self.rate):
            combo.currentIndexChanged.connect(lambda _: self._emit("devices"))
        self.device_rows = [("Input", self.input_device), ("Output", self.output_device)]
        form.addRow("Input", self.input_device)
        form.addRow("Output", self.output_device)
        form.addRow("Rate", self.rate)
        form.addRow(self.refresh_devices_button)
        form.addRow(self.device_note)
        self.file_path = QLineEdit()
        self.file_path.setObjectName("file_path")
        self.file_path.setPlaceholderText("WAV or FLAC capture")
        self.file_path.editingFinished.connect(lambda: self._emit("file"))
        choose = QPushButton("Choose…")
        choose.clicked.connect(self._choose_file)
        row = QHBoxLayout()
        row.addWidget(self.file_path, 1)
        row.addWidget(choose)
        self.file_row = QWidget()
        self.file_row.setLayout(row)
        row.setContentsMargins(0, 0, 0, 0)
        self.loop = QCheckBox("Play it over and over")
        self.loop.toggled.connect(lambda _: self._emit("file"))
        form.addRow("File", self.file_row)
        form.addRow(self.loop)
        self._source_form = form
        return box

    def _bench_group(self) -> QGroupBox:
        self.bench_box = QGroupBox("Bench knobs (simulated exciter)")
        form = QFormLayout(self.bench_box)
        self.knobs: dict[str, KnobRow] = {}
        for name, label, low, high, step, decimals, unit in KNOB_ROWS:
            row = KnobRow(name, low, high, step, decimals, unit)
            row.valueChanged.connect(lambda _v: self._emit("knobs"))
            form.addRow(label, row)
            self.knobs[name] = row
        self.reset_knobs_button = QPushButton("Back to the demo rig's setting")
        self.reset_knobs_button.clicked.connect(self._reset_knobs)
        form.addRow(self.reset_knobs_button)
        form.addRow(_note("Turn the trims toward the best suppression; the bench's truth is in "
                          "Help ▸ Bench truth."))
        return self.bench_box

    def _generator_group(self) -> QGroupBox:
        self.generator_box = QGroupBox("Generator (drives the exciter)")
        form = QFormLayout(self.generator_box)
        self.kind = QComboBox()
        self.kind.setObjectName("generator_kind")
        for key in KINDS:
            self.kind.addItem(KIND_NAMES[key], key)
        self.kind.currentIndexChanged.connect(self._kind_changed)
        form.addRow("Signal", self.kind)
        self.gen_fields: dict[str, tuple[QWidget, tuple[str, ...]]] = {}

        def field(name: str, label: str, widget: QWidget, kinds: tuple[str, ...]) -> None:
            widget.setObjectName(f"gen_{name}")
            form.addRow(label, widget)
            self.gen_fields[name] = (widget, kinds)
            signal = widget.valueChanged
            signal.connect(lambda _v: self._emit("generator"))

        field("tone_hz", "Frequency", _spin(10, 90000, 10, 1, "Hz"), ("tone", "quadrature"))
        field("low_hz", "Low tone", _spin(10, 90000, 10, 1, "Hz"), ("twotone",))
        field("high_hz", "High tone", _spin(10, 90000, 10, 1, "Hz"), ("twotone",))
        field("band_low_hz", "From", _spin(10, 90000, 10, 0, "Hz"), ("multitone",))
        field("band_high_hz", "To", _spin(10, 90000, 10, 0, "Hz"), ("multitone",))
        count = QSpinBox()
        count.setRange(2, 64)
        count.setKeyboardTracking(False)
        field("count", "Tones", count, ("multitone",))
        field("sweep_start_hz", "From", _spin(10, 90000, 10, 0, "Hz"), ("sweep",))
        field("sweep_stop_hz", "To", _spin(10, 90000, 10, 0, "Hz"), ("sweep",))
        steps = QSpinBox()
        steps.setRange(1, 200)
        steps.setKeyboardTracking(False)
        field("steps", "Steps", steps, ("sweep",))
        field("dwell_s", "Time per step", _spin(0.2, 60, 0.1, 1, "s"), ("sweep",))
        field("q_gain_db", "Q gain re I", _spin(-20, 20, 0.01, 2, "dB"), ("quadrature",))
        field("q_phase_deg", "Q phase offset", _spin(-180, 180, 0.05, 2, "°"), ("quadrature",))
        field("level_dbfs", "Level (two-tone: PEP)", _spin(-120, 0, 0.5, 1, "dBFS"), KINDS)
        self.mute = QCheckBox("Mute  (M)")
        self.mute.setObjectName("mute")
        self.mute.toggled.connect(lambda _: self._emit("mute"))
        form.addRow(self.mute)
        self.generator_note = _note()
        form.addRow(self.generator_note)
        self._gen_form = form
        return self.generator_box

    def _plan_group(self) -> QGroupBox:
        box = QGroupBox("Frequency plan")
        form = QFormLayout(box)
        self.carrier_auto = QCheckBox("auto")
        self.carrier_auto.setToolTip("On the bench: where its receiver puts the carrier. Otherwise the analysis "
                                     "takes the strongest tone as the wanted one and looks on both sides.")
        self.carrier_auto.setObjectName("plan_carrier_auto")
        self.carrier = _spin(-96000, 96000, 10, 1, "Hz", "plan_carrier")
        self.carrier.setValue(4000.0)
        self.carrier_auto.toggled.connect(lambda on: (self.carrier.setEnabled(not on), self._emit("plan")))
        self.carrier.valueChanged.connect(lambda _v: self._emit("plan"))
        row = QHBoxLayout()
        row.addWidget(self.carrier, 1)
        row.addWidget(self.carrier_auto)
        row.setContentsMargins(0, 0, 0, 0)
        holder = QWidget()
        holder.setLayout(row)
        form.addRow("Carrier at", holder)
        self.wanted = QComboBox()
        self.wanted.setObjectName("plan_wanted")
        for key, name in (("auto", "the stronger side (auto)"), ("above", "above the carrier"),
                          ("below", "below the carrier")):
            self.wanted.addItem(name, key)
        self.wanted.currentIndexChanged.connect(lambda _: self._emit("plan"))
        form.addRow("Wanted sideband", self.wanted)
        self.input_view = QComboBox()
        self.input_view.setObjectName("plan_input")
        for key, name in (("1", "real: channel 1 (left)"), ("2", "real: channel 2 (right)"),
                          ("iq", "I/Q: 1 = I, 2 = Q")):
            self.input_view.addItem(name, key)
        self.input_view.currentIndexChanged.connect(lambda _: self._emit("view"))
        self._user_view = self.input_view.currentData()  # the user's choice, kept while a measurement forces stereo
        form.addRow("Capture", self.input_view)
        self.plan_tones = QLineEdit()
        self.plan_tones.setObjectName("plan_tones")
        self.plan_tones.setPlaceholderText("e.g. 1000  or  700 1900")
        self.plan_tones.editingFinished.connect(lambda: self._emit("tones"))
        form.addRow("Tones in it", self.plan_tones)
        self._plan_form = form
        return box

    def _measurement_group(self) -> QGroupBox:
        box = QGroupBox("Measurement")
        form = QFormLayout(box)
        self.measurement = QComboBox()
        self.measurement.setObjectName("measurement")
        for key, name in ((None, "as the signal suggests"), ("sideband", "sideband and carrier"),
                          ("twotone", "two-tone IMD"), ("quadrature", "90° network (stereo)")):
            self.measurement.addItem(name, key)
        self.measurement.currentIndexChanged.connect(lambda _: (self._follow_measurement(), self._emit("measurement")))
        form.addRow("Figures", self.measurement)
        self.averages = QSpinBox()
        self.averages.setObjectName("averages")
        self.averages.setRange(1, 64)
        self.averages.setKeyboardTracking(False)
        self.averages.setSuffix(" spectrum")
        self.averages.setSpecialValueText("none (1 spectrum)")  # 1 is no averaging
        self.averages.valueChanged.connect(lambda v: self.averages.setSuffix(" spectrum" if v == 1 else " spectra"))
        self.averages.valueChanged.connect(lambda _: self._emit("averages"))
        form.addRow("Averaging", self.averages)
        form.addRow(_note("More averaging: steadier figures, slower response to a trim."))
        return box

    # -- behaviour --------------------------------------------------------------------------------

    def _emit(self, what: str) -> None:
        if not self._quiet:
            self.changed.emit(what)

    def _choose_file(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open a capture", "", "Sound files (*.wav *.flac);;All files (*)")
        if path:
            self.file_path.setText(path)
            self._emit("file")

    def _reset_knobs(self) -> None:
        demo = BenchKnobs()
        self.set_knobs(demo)
        self._emit("knobs")

    def _kind_changed(self, _index: int) -> None:
        self.show_generator_kind(self.kind.currentData())
        self._emit("generator")

    def _follow_measurement(self) -> None:
        """Show the capture the measurement reads: one that always reads the stereo pair (the 90°
        network: left = I, right = Q) shows that entry and locks the list; another measurement
        brings back the user's own choice. Nothing is emitted: the user's choice is unchanged."""
        combo = self.input_view
        forced = _reads_stereo(self.measurement.currentData())
        at = combo.findData(STEREO_VIEW)
        if forced != (at >= 0):
            combo.blockSignals(True)
            if forced:
                self._user_view = combo.currentData()
                combo.addItem(STEREO_NAME, STEREO_VIEW)
                combo.setCurrentIndex(combo.count() - 1)
            else:
                combo.removeItem(at)
                combo.setCurrentIndex(max(0, combo.findData(self._user_view)))
            combo.blockSignals(False)
        combo.setEnabled(not forced)
        combo.setToolTip(f"{self.measurement.currentText()} always reads both inputs: left = I, right = Q"
                         if forced else "")

    def _set_input_view(self, key: str) -> None:
        """Show the user's capture choice ``key`` (kept aside while the measurement forces stereo)."""
        self._user_view = key
        if self.input_view.findData(STEREO_VIEW) < 0:
            self.input_view.setCurrentIndex(max(0, self.input_view.findData(key)))

    def show_generator_kind(self, kind: str) -> None:
        for name, (widget, kinds) in self.gen_fields.items():
            visible = kind in kinds
            widget.setVisible(visible)
            label = self._gen_form.labelForField(widget)
            if label is not None:
                label.setVisible(visible)

    def show_source(self, kind: str) -> None:
        device = kind == "device"
        for widget in (self.input_device, self.output_device, self.rate, self.refresh_devices_button, self.device_note):
            widget.setVisible(device)
            label = self._source_form.labelForField(widget)
            if label is not None:
                label.setVisible(device)
        for widget in (self.file_row, self.loop):
            widget.setVisible(kind == "file")
            label = self._source_form.labelForField(widget)
            if label is not None:
                label.setVisible(kind == "file")
        self.bench_box.setVisible(kind == "sim")
        self.generator_box.setVisible(kind != "file")  # a recording plays no test signal
        self.plan_tones.setVisible(kind == "file")
        label = self._plan_form.labelForField(self.plan_tones)
        if label is not None:
            label.setVisible(kind == "file")

    def set_devices(self, inputs: list[tuple[str, object]], outputs: list[tuple[str, object]], note: str) -> None:
        """Fill the device lists ((name, spec) pairs; spec None = the default device)."""
        self._quiet = True
        for combo, items in ((self.input_device, inputs), (self.output_device, outputs)):
            current = combo.currentData()
            combo.clear()
            for name, spec in items:
                combo.addItem(name, spec)
            index = combo.findData(current)
            combo.setCurrentIndex(max(index, 0))
        available = bool(inputs)
        for widget in (self.input_device, self.output_device, self.rate):
            widget.setEnabled(available)
        self.device_note.setText(note)
        index = self.source.findData("device")
        item = self.source.model().item(index)
        if item is not None:
            item.setEnabled(available)
            item.setToolTip("" if available else note)
        self._quiet = False

    # -- reading and writing the state ------------------------------------------------------------

    def knob_values(self) -> dict[str, float]:
        return {name: row.value() for name, row in self.knobs.items()}

    def set_knobs(self, knobs: BenchKnobs) -> None:
        for name, row in self.knobs.items():
            row.set_value(float(getattr(knobs, name)))

    def generator_choice(self, base: GeneratorChoice) -> GeneratorChoice:
        values = {"kind": self.kind.currentData()}
        for name, (widget, _) in self.gen_fields.items():
            values[name] = widget.value()
        values["count"] = int(values["count"])
        values["steps"] = int(values["steps"])
        return base.with_changes(**values)

    def set_generator(self, choice: GeneratorChoice) -> None:
        self._quiet = True
        self.kind.setCurrentIndex(max(0, self.kind.findData(choice.kind)))
        for name, (widget, _) in self.gen_fields.items():
            widget.setValue(getattr(choice, name))
        self.show_generator_kind(choice.kind)
        self._quiet = False

    def set_state(self, *, source: str, rate: int, file: str | None, loop: bool, carrier_hz: float | None,
                  carrier_default: float | None, wanted: str | None, iq: bool, channel: int | None,
                  tones: tuple[float, ...], measurement: str | None, averages: int, muted: bool) -> None:
        """Show a session's settings without emitting anything."""
        self._quiet = True
        self.source.setCurrentIndex(max(0, self.source.findData(source)))
        self.show_source(source)
        if rate in RATES:
            self.rate.setCurrentIndex(RATES.index(rate))
        self.file_path.setText(file or "")
        self.loop.setChecked(loop)
        self.carrier_auto.setChecked(carrier_hz is None)
        self.carrier.setEnabled(carrier_hz is not None)
        if carrier_hz is not None:
            self.carrier.setValue(carrier_hz)
        elif carrier_default is not None:
            self.carrier.setValue(carrier_default)
        self.wanted.setCurrentIndex(max(0, self.wanted.findData(wanted or "auto")))
        self._set_input_view("iq" if iq else str(channel or 1))
        self.plan_tones.setText(" ".join(f"{t:g}" for t in tones))
        self.measurement.setCurrentIndex(max(0, self.measurement.findData(measurement)))
        self._follow_measurement()
        self.averages.setValue(averages)
        self.mute.setChecked(muted)
        self._quiet = False

    def plan(self) -> tuple[float | None, str]:
        carrier = None if self.carrier_auto.isChecked() else float(self.carrier.value())
        return carrier, self.wanted.currentData()

    def input_choice(self) -> tuple[bool, int | None]:
        """The user's capture choice (I/Q, channel): not the stereo pair a measurement forces."""
        key = self.input_view.currentData()
        if key == STEREO_VIEW:
            key = self._user_view
        return (True, None) if key == "iq" else (False, int(key))

    def tones(self) -> tuple[float, ...]:
        values = []
        for part in self.plan_tones.text().replace(",", " ").split():
            try:
                values.append(float(part))
            except ValueError:
                continue
        return tuple(values)


def _reads_stereo(measurement: str | None) -> bool:
    """Does the measurement plugin always read the stereo pair (its ``view`` is "stereo")?"""
    if not measurement:
        return False
    from rtanalyzer.errors import RtaError
    from rtanalyzer.measurements.registry import get

    try:
        return getattr(get(measurement), "view", None) == "stereo"
    except RtaError:  # not installed: the window reports that when it builds the session
        return False
