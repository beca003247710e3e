"""Qt widgets of the window: the large readouts, the level meters and the banner."""

from __future__ import annotations

import math
from collections import deque

from PyQt6.QtCore import QRectF, Qt
from PyQt6.QtGui import QColor, QFont, QPainter, QPen
from PyQt6.QtWidgets import QFrame, QHBoxLayout, QLabel, QSizePolicy, QVBoxLayout, QWidget

from rtanalyzer.gui import style

MINUS = "\u2212"


def signed(value: float, decimals: int = 1) -> str:
    """A number with a real minus sign."""
    return f"{value:.{decimals}f}".replace("-", MINUS)


def parse_readout(text: str) -> float | None:
    """The number in a readout's text ('≥ 32.9', '−41.0', '+1.25°'), for tests and exports."""
    cleaned = text.replace(MINUS, "-").replace("≥", "").replace("≤", "").replace("°", "").strip()
    try:
        return float(cleaned)
    except ValueError:
        return None


def set_text(label: QLabel, text: str) -> None:
    """Change a label only when its text changes (a change costs a relayout and a repaint)."""
    if label.text() != text:
        label.setText(text)


def set_style(widget: QWidget, sheet: str) -> None:
    """Change a style sheet only when it changes (each change re-polishes the widget)."""
    if widget.property("rta_sheet") != sheet:
        widget.setProperty("rta_sheet", sheet)
        widget.setStyleSheet(sheet)


def _font(points: float, weight: QFont.Weight = QFont.Weight.Normal) -> QFont:
    font = QFont()
    font.setPointSizeF(points)
    font.setWeight(weight)
    return font


class ChangeTracker:
    """Direction of a figure's change over about the last second (steady below a threshold)."""

    def __init__(self, seconds: float = 1.0, steady_db: float = 0.1) -> None:
        self.seconds = seconds
        self.steady_db = steady_db
        self._history: deque[tuple[float, float]] = deque()

    def reset(self) -> None:
        self._history.clear()

    def update(self, t: float, value: float | None) -> float | None:
        """Add a value; return its change over ``seconds`` (None until there is one)."""
        if value is None or not math.isfinite(value):
            return None
        self._history.append((t, value))
        while len(self._history) > 2 and t - self._history[1][0] >= self.seconds:
            self._history.popleft()
        then_t, then_v = self._history[0]
        if t - then_t < 0.5 * self.seconds:
            return None
        return value - then_v


class ReadoutTile(QFrame):
    """One large figure with its title, unit, a 'which way it went' mark and a detail line.

    ``better`` says which way a change is for the better: "larger", "smaller" or "nearer_zero"
    (an error: a change toward 0 is better whichever its sign). :meth:`configure` turns the tile
    to another figure (the window shows other figures for another measurement).
    """

    #: Lines the detail keeps room for (the tiles keep one height whatever they show).
    DETAIL_LINES = 2

    def __init__(self, key: str, title: str, unit: str, larger_is_better: bool, parent=None) -> None:
        super().__init__(parent)
        self.key = key
        self.unit = unit
        self.better = "larger" if larger_is_better else "smaller"
        self.decimals = 1
        self.signed = False
        self.tracker = ChangeTracker()
        self.setObjectName("tile")
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(14, 8, 14, 8)
        layout.setSpacing(0)
        self.title_label = QLabel(title)
        self.title_label.setFont(_font(style.TITLE_PT, QFont.Weight.DemiBold))
        self.title_label.setStyleSheet(f"color: {style.INK_SOFT};")
        self.value_label = QLabel("—")
        self.value_label.setObjectName(f"value_{key}")
        self.value_label.setFont(_font(style.VALUE_PT, QFont.Weight.Bold))
        self.value_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
        self.unit_label = QLabel(unit)
        self.unit_label.setFont(_font(style.UNIT_PT))
        self.unit_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignBottom)
        self.change_label = QLabel("")
        self.change_label.setFont(_font(style.SMALL_PT + 1, QFont.Weight.Bold))
        self.change_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        self.detail_label = QLabel("")
        self.detail_label.setWordWrap(True)
        self.detail_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        self.detail_label.setFont(_font(style.SMALL_PT + 1))
        self.detail_label.setStyleSheet(f"color: {style.INK_SOFT};")
        line = self.detail_label.fontMetrics().lineSpacing()
        self.detail_label.setFixedHeight(self.DETAIL_LINES * line + 2)
        layout.addWidget(self.title_label)
        # The figure, and beside it the direction it went (above) and its unit (below, on the
        # figure's baseline): the detail under them then has the tile's whole width.
        value_row = QHBoxLayout()
        value_row.setSpacing(8)
        value_row.addWidget(self.value_label, 0)
        beside = QVBoxLayout()
        beside.setSpacing(0)
        beside.setContentsMargins(0, 6, 0, 6)
        beside.addWidget(self.change_label, 0, Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        beside.addStretch(1)
        beside.addWidget(self.unit_label, 0, Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignBottom)
        value_row.addLayout(beside)
        value_row.addStretch(1)
        layout.addLayout(value_row)
        layout.addWidget(self.detail_label)
        self.value: float | None = None
        self._subject: object = None
        self._spec = (title, unit, self.better, self.decimals, self.signed)
        self.set_unavailable("waiting for the first readout")

    @property
    def larger_is_better(self) -> bool:
        return self.better == "larger"

    def configure(self, title: str, unit: str, better: str = "larger", decimals: int = 1,
                  signed_value: bool = False) -> None:
        """Show another figure: its title, unit, which way is better, its decimals and whether
        a positive value carries its '+' (an error or a ratio)."""
        if better not in ("larger", "smaller", "nearer_zero"):
            raise ValueError(f"better = {better!r}: larger, smaller or nearer_zero")
        spec = (title, unit, better, decimals, signed_value)
        if spec == self._spec:
            return
        self._spec = spec
        set_text(self.title_label, title)
        self.unit = unit
        set_text(self.unit_label, "" if unit == "°" else unit)
        self.better, self.decimals, self.signed = better, decimals, signed_value
        self.set_unavailable("waiting for the first readout")

    def set_title(self, title: str) -> None:
        """Say more precisely what the figure is of (the figure, its unit and its trend stay)."""
        set_text(self.title_label, title)

    def format_value(self, value: float, bound: str = "") -> str:
        """The figure as shown: '≥ 31.0', '−2.26', '+0.35' (a bound on a size carries no '+').

        A bound stays one when rounded: '≥' rounds down, '≤' up.
        """
        step = 10.0 ** self.decimals
        if bound == "≥":
            value = math.floor(value * step + 1e-6) / step
        elif bound == "≤":
            value = math.ceil(value * step - 1e-6) / step
        text = signed(value, self.decimals)
        if self.signed and value > 0 and not bound:
            text = f"+{text}"
        if self.unit == "°":  # a degree sign stands against its number, not beside it as a unit
            text += "°"
        return f"{bound} {text}" if bound else text

    def set_figure(self, t: float, value: float | None, bound: str = "", detail: str = "", unit: str | None = None,
                   subject: object = None) -> None:
        """Show ``value`` (None: no figure); ``bound`` is '≥' or '≤' when the component is under the noise.

        ``subject`` names what the figure is of (a tone's frequency, a band): when it changes, as
        a stepped sweep moves on, the figure's direction starts afresh (another tone's figure is
        no trend).
        """
        if subject != self._subject:
            self._subject = subject
            self.tracker.reset()
        if unit is not None and unit != self.unit:
            self.unit = unit
            self.unit_label.setText("" if unit == "°" else unit)
        if value is None:
            self.set_unavailable(detail or "no figure")
            return
        self.value = value
        set_text(self.value_label, self.format_value(value, bound))
        set_style(self.value_label, f"color: {style.INK};")
        set_style(self.unit_label, f"color: {style.INK};")
        set_text(self.detail_label, detail)
        if bound:  # a bound moves with the noise, not with a trim: no direction to show
            self.tracker.reset()
            set_text(self.change_label, "")
            return
        change = self.tracker.update(t, value)
        steady = self.tracker.steady_db * 10.0 ** (1 - self.decimals)  # 0.1 dB; 0.01 at two decimals
        if change is None or abs(change) < steady:
            set_text(self.change_label, "● steady" if change is not None else "")
            set_style(self.change_label, f"color: {style.INK_SOFT};")
            return
        if self.better == "nearer_zero":
            better = abs(value) < abs(value - change)
        else:
            better = (change > 0) == (self.better == "larger")
        arrow = "▲" if change > 0 else "▼"
        colour = style.BETTER if better else style.WORSE
        amount = f"{abs(change):.{self.decimals}f}"
        unit = "°" if self.unit == "°" else " dB"  # a change of a level in dBc or dB PEP is in dB
        set_text(self.change_label, f"{arrow} {amount}{unit} {'better' if better else 'worse'}")
        set_style(self.change_label, f"color: {colour};")

    def set_unavailable(self, why: str) -> None:
        self.value = None
        set_text(self.value_label, "—")
        set_style(self.value_label, f"color: {style.RULE};")
        set_style(self.unit_label, f"color: {style.RULE};")
        set_text(self.change_label, "")
        set_text(self.detail_label, why)
        self.tracker.reset()


class MeterBar(QWidget):
    """A horizontal level bar for one channel: RMS filled, peak as a tick, dBFS scale."""

    LOW_DBFS = -90.0

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.peak: float | None = None
        self.rms: float | None = None
        self.setMinimumHeight(18)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)

    def set_levels(self, peak: float | None, rms: float | None) -> None:
        if (peak, rms) != (self.peak, self.rms):
            self.peak, self.rms = peak, rms
            self.update()

    def _x(self, db: float, width: float) -> float:
        return max(0.0, min(1.0, (db - self.LOW_DBFS) / -self.LOW_DBFS)) * width

    def paintEvent(self, event) -> None:  # noqa: N802 - Qt
        p = QPainter(self)
        w, h = self.width(), self.height()
        p.fillRect(0, 0, w, h, QColor(style.PLOT))
        p.setPen(QPen(QColor(style.GRID), 1))
        for db in range(-80, 0, 10):  # a tick every 10 dB
            x = self._x(db, w)
            p.drawLine(int(x), 0, int(x), h)
        if self.rms is not None:
            p.fillRect(QRectF(0, 3, self._x(self.rms, w), h - 6), QColor(style.TRACE))
        if self.peak is not None:
            x = self._x(self.peak, w)
            p.fillRect(QRectF(x - 1.5, 0, 3, h), QColor(style.ALARM if self.peak > -1.0 else style.INK))
        p.setPen(QPen(QColor(style.RULE), 1))
        p.drawRect(0, 0, w - 1, h - 1)
        p.end()


class ClipLight(QLabel):
    """'CLIP' lit while the engine holds a clip on that channel."""

    def __init__(self, parent=None) -> None:
        super().__init__("CLIP", parent)
        self.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.setFixedWidth(46)
        self.setFont(_font(9, QFont.Weight.Bold))
        self.lit = None
        self.set_lit(False)

    def set_lit(self, lit: bool) -> None:
        if lit == self.lit:
            return
        self.lit = lit
        if lit:
            self.setStyleSheet(f"background: {style.ALARM}; color: white; border-radius: 3px; padding: 1px;")
        else:
            self.setStyleSheet(f"background: transparent; color: {style.RULE}; border: 1px solid {style.RULE};"
                               "border-radius: 3px; padding: 1px;")


class MetersTile(QFrame):
    """Input level per channel (peak and RMS, dBFS), held clip lights and the dropout counters."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setObjectName("tile")
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Fixed)
        self.setMinimumWidth(250)
        self._layout = QVBoxLayout(self)
        self._layout.setContentsMargins(12, 8, 12, 8)
        self._layout.setSpacing(3)
        title = QLabel("Input levels")
        title.setFont(_font(style.TITLE_PT, QFont.Weight.DemiBold))
        title.setStyleSheet(f"color: {style.INK_SOFT};")
        self._layout.addWidget(title)
        self._rows_box = QVBoxLayout()
        self._rows_box.setSpacing(2)
        self._layout.addLayout(self._rows_box)
        self.xrun_label = QLabel("")
        self.xrun_label.setObjectName("xruns")
        self.xrun_label.setFont(_font(style.SMALL_PT))
        self.xrun_label.setWordWrap(True)
        self._layout.addWidget(self.xrun_label)
        self.rows: list[tuple[MeterBar, QLabel, ClipLight]] = []
        self._row_widgets: list[QWidget] = []
        self._names: list[str] = []
        self.set_channels(1)

    def set_channels(self, count: int, names: list[str] | None = None) -> None:
        names = [names[ch] if names and ch < len(names) else f"in {ch + 1}" for ch in range(count)]
        if names == self._names:
            return
        for row in self._row_widgets:
            self._rows_box.removeWidget(row)
            row.deleteLater()
        self._row_widgets, self.rows, self._names = [], [], names
        for name in names:
            row_widget = QWidget()
            row = QVBoxLayout(row_widget)
            row.setContentsMargins(0, 0, 0, 0)
            row.setSpacing(0)
            head = QHBoxLayout()
            label = QLabel(name)
            label.setFont(_font(style.SMALL_PT, QFont.Weight.DemiBold))
            label.setFixedWidth(40)
            bar = MeterBar()
            clip = ClipLight()
            head.addWidget(label)
            head.addWidget(bar, 1)
            head.addWidget(clip)
            numbers = QLabel("")
            numbers.setFont(_font(style.SMALL_PT))
            row.addLayout(head)
            row.addWidget(numbers)
            self._rows_box.addWidget(row_widget)
            self._row_widgets.append(row_widget)
            self.rows.append((bar, numbers, clip))

    def show_levels(self, levels: dict, xruns: dict, names: list[str] | None = None) -> None:
        peaks = levels.get("peak_dbfs") or []
        rms = levels.get("rms_dbfs") or []
        clips = levels.get("clip") or []
        counts = levels.get("clipped_samples") or []
        self.set_channels(max(1, len(peaks)), names)
        for ch, (bar, numbers, clip) in enumerate(self.rows):
            pk = peaks[ch] if ch < len(peaks) else None
            rm = rms[ch] if ch < len(rms) else None
            bar.set_levels(pk, rm)
            clip.set_lit(bool(clips[ch]) if ch < len(clips) else False)
            pk_text = "—" if pk is None else signed(pk)
            rm_text = "—" if rm is None else signed(rm)
            clipped = counts[ch] if ch < len(counts) else 0
            # One short line that fits the tile with two channels; the count of clipped samples
            # is on the clip light (lit, and its tip says how many).
            set_text(numbers, f"peak {pk_text} · RMS {rm_text} dBFS")
            tip = f"{clipped} clipped sample{'' if clipped == 1 else 's'} (held)" if clipped else "no clipped samples"
            if clip.toolTip() != tip:
                clip.setToolTip(tip)
        over = xruns.get("input_overflows", 0)
        under = xruns.get("output_underflows", 0)
        dropped = xruns.get("dropped_blocks", 0)
        colour = style.WORSE if (over or under or dropped) else style.INK_SOFT
        set_style(self.xrun_label, f"color: {colour};")
        set_text(self.xrun_label, f"overflows {over} · underflows {under} · dropped {dropped}")


class Banner(QLabel):
    """A calm notice across the top of the window (which source, and why)."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setObjectName("banner")
        self.setWordWrap(True)
        self.setFont(_font(11))
        self.hide()

    def say(self, text: str | None) -> None:
        if text:
            self.setText(text)
            self.show()
        else:
            self.clear()
            self.hide()
