"""The history in the window: save snapshots of the live readout, and browse, annotate, trend and compare them.

:class:`HistoryHooks` attaches to the main window: "Save snapshot" (S) stores the newest readout
in the history store (``$RTANALYZER_STORE`` or the user's data folder, as the CLI), the checkable
Run ▸ "Snapshot each new best" saves each new best figure at most once a second (the CLI's
:class:`~rtanalyzer.cli.history_options.LiveSaver` does both), and View ▸ History… (H) opens
:class:`HistoryWindow`.

The store is opened on the GUI thread only and kept open while the window lives.
"""

from __future__ import annotations

import math
from datetime import datetime
from types import SimpleNamespace
from typing import Callable, Sequence

import numpy as np
from PyQt6.QtCore import QPointF, QRectF, Qt
from PyQt6.QtGui import QAction, QColor, QFont, QKeySequence, QPainter, QPen, QPolygonF
from PyQt6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from rtanalyzer.gui import style

#: Settings keys (persisted with the window's other settings).
BEST_KEY = "history/snapshot_each_best"
RIG_KEY = "history/rig"

#: Figures the trend can follow: (store column, label, unit).
TREND_FIGURES = (
    ("worst_sideband_suppression_db", "Worst opposite-sideband suppression", "dB"),
    ("carrier_suppression_db", "Carrier suppression", "dBc"),
    ("worst_imd_db_pep", "Worst IMD", "dB PEP"),
)
#: The two sides of a comparison: A before (slate), B after (teal).
A_COLOUR = style.TRACE
B_COLOUR = style.WANTED
COLUMNS = ("id", "time", "rig", "measurement", "sideband supp.", "carrier supp.", "worst IMD", "tags", "note")


def figure_text(value: float | None, unit: str, bound: str = "") -> str:
    return "" if value is None else f"{bound}{value:.1f} {unit}"


#: Band curves a snapshot can hold: measurement → (x key, y key, what the curve is: the x title's start).
BAND_CURVES = {
    "sideband": ("tone_hz", "sideband_suppression_db", "opposite-sideband suppression per tone"),
    "quadrature": ("frequency_hz", "predicted_suppression_db", "predicted suppression per point"),
}
NO_BAND_TEXT = "no band curve: single-tone snapshots"
BOUND_NOTE = "hollow ○ with ≥: at least that much (the unwanted sideband was under the noise)"


def band_curve(result) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(frequencies, dB values, is-only-a-bound) of a snapshot's per-tone points, by frequency.

    Sideband: opposite-sideband suppression per tone, a lower bound where the unwanted sideband
    was not detected. Quadrature: predicted suppression per point. Other measurements: empty.
    """
    keys = BAND_CURVES.get(result.get("measurement"))
    rows = []
    for pt in (result.get("points") or ()) if keys else ():
        x, y = pt.get(keys[0]), pt.get(keys[1])
        if x is not None and y is not None:
            rows.append((float(x), float(y), keys[0] == "tone_hz" and not pt.get("unwanted_detected", True)))
    rows.sort()
    return (np.array([r[0] for r in rows], float), np.array([r[1] for r in rows], float),
            np.array([r[2] for r in rows], bool))


# -- saving ---------------------------------------------------------------------------------------


class HistoryHooks:
    """The window's history actions; one per :class:`~rtanalyzer.gui.window.MainWindow`."""

    def __init__(self, window) -> None:
        self.window = window
        self.store = None
        self.saver = None  # a LiveSaver for the running engine
        self.view: HistoryWindow | None = None
        self.best_action = QAction("Snapshot each new best", window)
        self.best_action.setObjectName("act_snapshot_best")
        self.best_action.setCheckable(True)
        self.best_action.setChecked(bool(window.settings.get(BEST_KEY, False)))
        self.best_action.toggled.connect(self.set_each_best)
        self.history_action = QAction("History…", window)
        self.history_action.setObjectName("act_history")
        self.history_action.setShortcut(QKeySequence("H"))
        self.history_action.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        self.history_action.triggered.connect(lambda _=False: self.show_history())
        window.addAction(self.history_action)
        menus = {a.text().replace("&", ""): a.menu() for a in window.menuBar().actions() if a.menu() is not None}
        if "Run" in menus:
            menus["Run"].addSeparator()
            menus["Run"].addAction(self.best_action)
        if "View" in menus:
            menus["View"].addSeparator()
            menus["View"].addAction(self.history_action)
        window.runner.started.connect(self._started)
        window.runner.readout.connect(self._readout)
        window.closed.connect(self.close)

    @property
    def rig(self) -> str:
        return str(self.window.settings.get(RIG_KEY, "default") or "default")

    def open_store(self):
        """The history store (opened once); StoreError when it cannot be used."""
        if self.store is None:
            from rtanalyzer.store import SnapshotStore

            self.store = SnapshotStore.open()
        return self.store

    def _started(self, engine) -> None:
        from rtanalyzer.cli.history_options import LiveSaver

        args = SimpleNamespace(save=False, save_best=False, rig=self.rig, note=None, save_tags=None)
        saver = LiveSaver(args, engine, self.window.config)  # opens no store: both options off
        saver.args.save_best = self.best_action.isChecked()
        self.saver = saver

    def set_each_best(self, on: bool) -> None:
        self.window.settings.put(BEST_KEY, bool(on))
        if self.saver is not None:
            self.saver.args.save_best = bool(on)
            self.saver.best_value = None  # count bests from now on
            self.saver.saved_value = None
        self.window.statusBar().showMessage(
            "Saving a snapshot at each new best (at most one a second)." if on else "No longer saving each new best.", 4000)

    def _readout(self, readout) -> None:
        saver = self.saver
        if saver is None or not saver.args.save_best or readout.result is None:
            return
        from rtanalyzer.store import StoreError

        try:
            saver.store = self.open_store()
            before = len(saver.saved_best)
            saver.readout(readout)
        except StoreError as exc:
            self.best_action.setChecked(False)
            self.window.statusBar().showMessage(f"Snapshot not saved: {exc}", 8000)
            return
        if len(saver.saved_best) > before:
            self.window.statusBar().showMessage(f"saved snapshot #{saver.saved_best[-1]} (new best)", 4000)
            self._refresh_view()

    def save_now(self) -> int | None:
        """Store the newest readout as a snapshot; its id, or None (said in the status bar)."""
        from rtanalyzer.store import StoreError

        readout = self.window.last_readout
        if self.saver is None or readout is None or readout.result is None:
            self.window.statusBar().showMessage("No readout with figures to save yet.", 6000)
            return None
        try:
            snapshot_id = self.open_store().add(self.saver._snapshot(readout, "live-end"))
        except StoreError as exc:
            self.window.statusBar().showMessage(f"Snapshot not saved: {exc}", 8000)
            return None
        self._refresh_view()
        return snapshot_id

    def show_history(self) -> HistoryWindow | None:
        from rtanalyzer.store import StoreError

        try:
            store = self.open_store()
        except StoreError as exc:
            self.window.statusBar().showMessage(f"The history cannot be opened: {exc}", 8000)
            return None
        if self.view is None:
            self.view = HistoryWindow(store, self.window)  # a window of its own, owned by the main one
        self.view.refresh()
        self.view.show()
        self.view.raise_()
        return self.view

    def _refresh_view(self) -> None:
        if self.view is not None and self.view.isVisible():
            self.view.refresh()

    def close(self) -> None:
        if self.view is not None:
            self.view.close()
            self.view.deleteLater()
            self.view = None
        if self.store is not None:
            self.store.close()
            self.store = None


# -- a plain line plot ----------------------------------------------------------------------------


def nice_ticks(lo: float, hi: float, count: int = 6) -> list[float]:
    """Round numbers covering [lo, hi], about ``count`` of them."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / max(count, 1)
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 2.5, 5, 10) if m * power >= raw)
    first = math.ceil(lo / step) * step
    return [first + i * step for i in range(int((hi - first) / step + 1e-9) + 1)]


def log_ticks(lo: float, hi: float) -> list[float]:
    """1-2-5 steps of each decade within [lo, hi] (positive); round linear ones when fewer than two fit."""
    if not (lo > 0 and hi > lo):
        return nice_ticks(lo, hi)
    out = [m * 10.0 ** k for k in range(math.floor(math.log10(lo)), math.ceil(math.log10(hi)) + 1) for m in (1, 2, 5)]
    out = [v for v in out if lo <= v <= hi]
    return out if len(out) >= 2 else nice_ticks(lo, hi, 4)


class LinePlot(QWidget):
    """Lines (and dots) on a light plot with round-number ticks and a legend, drawn with QPainter.

    ``series`` holds (label, colour, xs, ys, dots, bound) and is what tests read back; ``bound``
    marks the points that are only bounds (drawn hollow, with a "≥" note). ``log_x`` puts the x
    axis on a log scale (positive xs only).
    """

    def __init__(self, x_title: str = "", y_title: str = "", parent=None, log_x: bool = False) -> None:
        super().__init__(parent)
        self.x_title, self.y_title = x_title, y_title
        self.series: list[tuple[str, str, np.ndarray, np.ndarray, bool, np.ndarray]] = []
        self.log_x = log_x
        self.x_format: Callable[[float], str] = lambda v: f"{v:g}"
        self.x_ticks: Callable[[float, float], list[float]] = log_ticks if log_x else nice_ticks
        self.empty_text = "nothing to show"
        self.bound_text = "≥ at least (under the noise)"
        self.headroom = 0.08  # of the y span, above the data (more keeps the legend off it)
        self.x_span = (0.0, 1.0)
        self.setMinimumHeight(220)

    def set_series(self, series, x_title: str | None = None, y_title: str | None = None) -> None:
        """``series``: (label, colour, xs, ys, dots) or (label, colour, xs, ys, dots, bound)."""
        self.series = []
        for label, colour, xs, ys, dots, *bound in series:
            xs, ys = np.asarray(xs, float), np.asarray(ys, float)
            mask = np.asarray(bound[0], bool) if bound else np.zeros(ys.shape, bool)
            self.series.append((label, colour, xs, ys, dots, mask))
        if x_title is not None:
            self.x_title = x_title
        if y_title is not None:
            self.y_title = y_title
        self.update()

    def _tx(self, xs):
        """x in plot units: log10 of it on a log axis."""
        return np.log10(xs) if self.log_x else xs

    def _shown(self, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
        ok = np.isfinite(ys) & np.isfinite(xs)
        return ok & (xs > 0) if self.log_x else ok

    def _bounds(self) -> tuple[float, float, float, float] | None:
        """x0, x1 (plot units), y0, y1 of what is drawn."""
        oks = [self._shown(s[2], s[3]) for s in self.series]
        xs = [self._tx(s[2][ok]) for s, ok in zip(self.series, oks)]
        ys = [s[3][ok] for s, ok in zip(self.series, oks)]
        xs, ys = [x for x in xs if x.size], [y for y in ys if y.size]
        if not xs:
            return None
        x0, x1 = min(float(x.min()) for x in xs), max(float(x.max()) for x in xs)
        y0, y1 = min(float(y.min()) for y in ys), max(float(y.max()) for y in ys)
        if x1 <= x0:
            x0, x1 = x0 - 1.0, x1 + 1.0
        if any(s[4] for s in self.series):  # dots: keep the first and last off the frame
            margin = (x1 - x0) * 0.04
            x0, x1 = x0 - margin, x1 + margin
        pad = max((y1 - y0) * 0.08, 1.0)
        return x0, x1, y0 - pad, y1 + max((y1 - y0) * self.headroom, 1.0)

    def paintEvent(self, event) -> None:  # noqa: N802 - Qt
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.fillRect(self.rect(), QColor(style.PANEL))
        font = QFont(self.font())
        font.setPointSizeF(style.SMALL_PT)
        p.setFont(font)
        metrics = p.fontMetrics()
        left, top, right, bottom = 64, 14, 16, 44
        area = QRectF(left, top, max(self.width() - left - right, 10), max(self.height() - top - bottom, 10))
        p.fillRect(area, QColor(style.PLOT))
        bounds = self._bounds()
        if bounds is None:
            p.setPen(QColor(style.INK_SOFT))
            p.drawText(area, Qt.AlignmentFlag.AlignCenter, self.empty_text)
            p.end()
            return
        x0, x1, y0, y1 = bounds
        self.x_span = (10.0 ** x0, 10.0 ** x1) if self.log_x else (x0, x1)

        def px(x, y):
            x = self._tx(x)
            return (area.left() + (x - x0) / (x1 - x0) * area.width(),
                    area.bottom() - (y - y0) / (y1 - y0) * area.height())

        grid, ink, soft = QPen(QColor(style.GRID)), QPen(QColor(style.INK)), QColor(style.INK_SOFT)
        for v in nice_ticks(y0, y1):
            _, y = px(x0, v)
            p.setPen(grid)
            p.drawLine(QPointF(area.left(), y), QPointF(area.right(), y))
            p.setPen(ink)
            p.drawText(QRectF(0, y - 9, left - 6, 18), Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter, f"{v:g}")
        for v in self.x_ticks(*self.x_span):
            x, _ = px(v, y0)
            p.setPen(grid)
            p.drawLine(QPointF(x, area.top()), QPointF(x, area.bottom()))
            p.setPen(ink)
            p.drawText(QRectF(x - 60, area.bottom() + 3, 120, 16), Qt.AlignmentFlag.AlignHCenter, self.x_format(v))
        p.setPen(QPen(QColor(style.RULE)))
        p.drawRect(area)
        p.setPen(soft)
        p.drawText(QRectF(area.left(), area.bottom() + 20, area.width(), 18), Qt.AlignmentFlag.AlignHCenter, self.x_title)
        p.save()
        p.translate(12, area.center().y())
        p.rotate(-90)
        p.drawText(QRectF(-area.height() / 2, -8, area.height(), 18), Qt.AlignmentFlag.AlignHCenter, self.y_title)
        p.restore()
        p.setClipRect(area)
        any_bound = False
        for label, colour, xs, ys, dots, bound in self.series:
            pen = QPen(QColor(colour))
            pen.setWidthF(1.6)
            p.setPen(pen)
            ok = self._shown(xs, ys)
            points = [QPointF(*px(x, y)) for x, y in zip(xs[ok], ys[ok])]
            if len(points) > 1:
                p.drawPolyline(QPolygonF(points))
            for q, is_bound in zip(points, bound[ok]):
                if is_bound:  # only a bound: hollow, with "≥" above
                    any_bound = True
                    p.setBrush(QColor(style.PLOT))
                    p.drawEllipse(q, 4.5, 4.5)
                    p.drawText(QRectF(q.x() + 7, q.y() - metrics.height() - 2, 20, metrics.height()),
                               Qt.AlignmentFlag.AlignLeft, "≥")
                elif dots:
                    p.setBrush(QColor(colour))
                    p.drawEllipse(q, 3.5, 3.5)
                p.setBrush(Qt.BrushStyle.NoBrush)
        p.setClipping(False)
        # legend, top right
        y = area.top() + 6
        for label, colour, *_ in self.series:
            if not label:
                continue
            w = metrics.horizontalAdvance(label)
            x = area.right() - w - 34
            p.fillRect(QRectF(x - 6, y - 2, w + 36, metrics.height() + 4), QColor(style.PANEL))
            pen = QPen(QColor(colour))
            pen.setWidthF(3.0)
            p.setPen(pen)
            p.drawLine(QPointF(x, y + metrics.height() / 2), QPointF(x + 20, y + metrics.height() / 2))
            p.setPen(ink)
            p.drawText(QPointF(x + 26, y + metrics.ascent()), label)
            y += metrics.height() + 6
        if any_bound and self.bound_text:  # the hollow marker's meaning, as a last legend row
            w = metrics.horizontalAdvance(self.bound_text)
            x = area.right() - w - 34
            p.fillRect(QRectF(x - 6, y - 2, w + 36, metrics.height() + 4), QColor(style.PANEL))
            p.setPen(ink)
            p.drawEllipse(QPointF(x + 10, y + metrics.height() / 2), 4.5, 4.5)
            p.drawText(QPointF(x + 26, y + metrics.ascent()), self.bound_text)
        p.end()


def time_text(epoch: float) -> str:
    """Local time of a snapshot, to the second."""
    return datetime.fromtimestamp(epoch).strftime("%Y-%m-%d %H:%M:%S")


TIME_STEPS_S = (1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 10800, 21600, 43200,
                86400, 2 * 86400, 7 * 86400, 14 * 86400, 28 * 86400, 91 * 86400, 364 * 86400)


def time_axis(plot: LinePlot) -> None:
    """Make ``plot``'s x axis read local time, as finely as its span needs."""

    def fmt(v: float) -> str:
        x0, x1 = plot.x_span
        span = x1 - x0
        pattern = "%H:%M:%S" if span < 3600 else "%H:%M" if span < 86400 else "%d %b" if span < 30 * 86400 else "%Y-%m-%d"
        return datetime.fromtimestamp(v).strftime(pattern)

    def ticks(lo: float, hi: float) -> list[float]:
        # Steps a clock reads roundly, at multiples counted in local time.
        step = next((t for t in TIME_STEPS_S if t >= (hi - lo) / 6), TIME_STEPS_S[-1])
        offset = datetime.fromtimestamp(lo).astimezone().utcoffset().total_seconds()
        first = math.ceil((lo + offset) / step) * step - offset
        return [first + i * step for i in range(int((hi - first) / step) + 1)]

    plot.x_format = fmt
    plot.x_ticks = ticks


# -- the History window ---------------------------------------------------------------------------


class HistoryWindow(QWidget):
    """Snapshots newest first, with a filter, a note editor, a trend and a before/after comparison."""

    def __init__(self, store, parent=None) -> None:
        super().__init__(parent, Qt.WindowType.Window)
        self.store = store
        self.setWindowTitle("rtanalyzer — history")
        self.setStyleSheet(style.STYLE_SHEET + f"QWidget#history {{ background: {style.PAPER}; }}")
        self.setObjectName("history")
        self.summaries = []
        self.comparison = None
        self.resize(1280, 860)
        outer = QVBoxLayout(self)
        top = QHBoxLayout()
        top.addWidget(QLabel("Filter:"))
        self.filter_edit = QLineEdit()
        self.filter_edit.setPlaceholderText("rig or tag text")
        self.filter_edit.textChanged.connect(lambda _: self.refresh())
        top.addWidget(self.filter_edit, 1)
        refresh = QPushButton("Refresh")
        refresh.clicked.connect(self.refresh)
        top.addWidget(refresh)
        outer.addLayout(top)

        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setHorizontalHeaderLabels(list(COLUMNS))
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().hide()
        self.table.setAlternatingRowColors(True)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        header.setStretchLastSection(True)
        self.table.itemSelectionChanged.connect(self._selection_changed)

        note_row = QHBoxLayout()
        self.note_label = QLabel("Note for —:")
        note_row.addWidget(self.note_label)
        self.note_edit = QLineEdit()
        self.note_edit.setPlaceholderText("select a snapshot to write its note")
        self.note_edit.returnPressed.connect(self.save_note)
        note_row.addWidget(self.note_edit, 1)
        self.note_button = QPushButton("Save note")
        self.note_button.clicked.connect(self.save_note)
        note_row.addWidget(self.note_button)

        upper = QWidget()
        upper_layout = QVBoxLayout(upper)
        upper_layout.setContentsMargins(0, 0, 0, 0)
        upper_layout.addWidget(self.table, 1)
        upper_layout.addLayout(note_row)

        self.tabs = QTabWidget()
        trend_tab = QWidget()
        trend_layout = QVBoxLayout(trend_tab)
        row = QHBoxLayout()
        row.addWidget(QLabel("Figure:"))
        self.trend_choice = QComboBox()
        for key, label, unit in TREND_FIGURES:
            self.trend_choice.addItem(f"{label} ({unit})", key)
        self.trend_choice.currentIndexChanged.connect(lambda _: self.draw_trend())
        row.addWidget(self.trend_choice)
        row.addStretch(1)
        trend_layout.addLayout(row)
        self.trend_plot = LinePlot("time", "dB")
        time_axis(self.trend_plot)
        self.trend_plot.empty_text = "no snapshot gives this figure"
        trend_layout.addWidget(self.trend_plot, 1)
        self.tabs.addTab(trend_tab, "Trend")

        compare_tab = QWidget()
        compare_layout = QVBoxLayout(compare_tab)
        row = QHBoxLayout()
        self.compare_button = QPushButton("Compare the two selected (A = older, B = newer)")
        self.compare_button.clicked.connect(self.compare_selected)
        row.addWidget(self.compare_button)
        self.compare_status = QLabel("Select two snapshots of the same measurement (Ctrl+click).")
        self.compare_status.setWordWrap(True)
        self.compare_status.setStyleSheet(f"color: {style.INK_SOFT};")
        row.addWidget(self.compare_status, 1)
        compare_layout.addLayout(row)
        split = QSplitter(Qt.Orientation.Horizontal)
        plots = QWidget()
        plots_layout = QVBoxLayout(plots)
        plots_layout.setContentsMargins(0, 0, 0, 0)
        self.overlay = LinePlot("frequency, Hz", "level, dBFS")
        self.overlay.empty_text = "select two snapshots and compare"
        plots_layout.addWidget(self.overlay, 3)
        # the per-tone band curves, when a snapshot has several points (same painting as above)
        self.band_plot = LinePlot("frequency, Hz (log)", "suppression, dB", log_x=True)
        self.band_plot.setMinimumHeight(210)
        self.band_plot.headroom = 0.8  # the legend above the curves
        self.band_plot.bound_text = ""  # said by band_note, under the plot
        self.band_plot.hide()
        plots_layout.addWidget(self.band_plot, 2)
        self.band_note = QLabel(NO_BAND_TEXT)
        self.band_note.setStyleSheet(f"color: {style.INK_SOFT};")
        self.band_note.hide()
        plots_layout.addWidget(self.band_note)
        split.addWidget(plots)
        self.changes = QTableWidget(0, 4)
        self.changes.setHorizontalHeaderLabels(["figure", "A", "B", "change"])
        self.changes.verticalHeader().hide()
        self.changes.setWordWrap(False)
        self.changes.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        ch = self.changes.horizontalHeader()
        ch.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        split.addWidget(self.changes)
        split.setSizes([540, 700])
        compare_layout.addWidget(split, 1)
        self.tabs.addTab(compare_tab, "Compare")

        body = QSplitter(Qt.Orientation.Vertical)
        body.addWidget(upper)
        body.addWidget(self.tabs)
        body.setSizes([380, 460])
        outer.addWidget(body, 1)

    # -- the list ---------------------------------------------------------------------------------

    def refresh(self) -> None:
        text = self.filter_edit.text().strip().lower()
        chosen = set(self.selected_ids())
        rows = self.store.summaries(newest_first=True)
        if text:
            rows = [s for s in rows if text in s.rig.lower() or any(text in t.lower() for t in s.tags)]
        self.summaries = rows
        self.table.blockSignals(True)
        self.table.setRowCount(len(rows))
        for i, s in enumerate(rows):
            f, b = s.figures, s.bounds
            cells = (
                f"#{s.id}", time_text(s.created_epoch), s.rig, s.measurement,
                figure_text(f.get("worst_sideband_suppression_db"), "dB",
                            "≥" if "worst_sideband_suppression_db" in b else ""),
                figure_text(f.get("carrier_suppression_db"), "dBc", "≥" if "carrier_suppression_db" in b else ""),
                figure_text(f.get("worst_imd_db_pep"), "dB PEP", "≤" if "worst_imd_db_pep" in b else ""),
                ", ".join(s.tags), s.note,
            )
            for j, cell in enumerate(cells):
                item = QTableWidgetItem(cell)
                item.setData(Qt.ItemDataRole.UserRole, s.id)
                self.table.setItem(i, j, item)
            if s.id in chosen:
                self.table.selectRow(i)  # keeps the others (extended selection)
        self.table.blockSignals(False)
        self._selection_changed()
        self.draw_trend()

    def row_of(self, snapshot_id: int) -> int:
        return next(i for i, s in enumerate(self.summaries) if s.id == snapshot_id)

    def selected_ids(self) -> list[int]:
        rows = sorted({i.row() for i in self.table.selectedIndexes()})
        return [self.summaries[r].id for r in rows if r < len(self.summaries)]

    def select(self, ids: Sequence[int]) -> None:
        self.table.clearSelection()
        mode = self.table.selectionMode()
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.MultiSelection)
        for snapshot_id in ids:
            self.table.selectRow(self.row_of(snapshot_id))
        self.table.setSelectionMode(mode)

    def _selection_changed(self) -> None:
        ids = self.selected_ids()
        if len(ids) == 1:
            s = self.summaries[self.row_of(ids[0])]
            self.note_label.setText(f"Note for #{s.id}:")
            self.note_edit.setText(s.note)
            self.note_edit.setEnabled(True)
            self.note_button.setEnabled(True)
        else:
            self.note_label.setText("Note for —:")
            self.note_edit.clear()
            self.note_edit.setEnabled(False)
            self.note_button.setEnabled(False)
        self.compare_button.setEnabled(len(ids) == 2)

    def save_note(self) -> None:
        from rtanalyzer.store import StoreError

        ids = self.selected_ids()
        if len(ids) != 1:
            return
        try:
            self.store.set_note(ids[0], self.note_edit.text())
        except StoreError as exc:
            self.note_label.setText(f"Not saved: {exc}")
            return
        self.refresh()

    # -- trend ------------------------------------------------------------------------------------

    def draw_trend(self) -> None:
        key = self.trend_choice.currentData()
        label, unit = next((lb, u) for k, lb, u in TREND_FIGURES if k == key)
        points = sorted((s.created_epoch, s.figures.get(key)) for s in self.summaries if s.figures.get(key) is not None)
        xs = [t for t, _ in points]
        ys = [v for _, v in points]
        self.trend_plot.set_series([(label, style.BEST, xs, ys, True)] if points else [], "time", f"{label}, {unit}")

    # -- comparison -------------------------------------------------------------------------------

    def compare_selected(self) -> None:
        from rtanalyzer.store import StoreError, compare, spectrum_arrays

        ids = self.selected_ids()
        if len(ids) != 2:
            self.compare_status.setText("Select exactly two snapshots to compare.")
            return
        try:
            a, b = sorted((self.store.get(i) for i in ids), key=lambda s: (s.created_epoch, s.id))
            result = compare([a], [b], a.label, b.label)
        except StoreError as exc:
            self.compare_status.setText(str(exc))
            return
        self.comparison = result
        series = []
        for side, snap, colour in (("A", a, A_COLOUR), ("B", b, B_COLOUR)):
            try:
                f, levels = spectrum_arrays(snap)
            except StoreError:
                continue
            series.append((f"{side} {snap.label}", colour, f, levels, False))
        self.overlay.empty_text = "no spectrum stored with these snapshots"
        self.overlay.set_series(series)
        self.draw_band(a, b)
        self.changes.setRowCount(len(result.figures))
        for i, fc in enumerate(result.figures):
            cells = (fc.label, fc.a.text(fc.unit) if fc.a else "—", fc.b.text(fc.unit) if fc.b else "—", fc.text)
            for j, cell in enumerate(cells):
                item = QTableWidgetItem(cell)
                item.setToolTip(cell)
                if j == 3 and fc.verdict in ("better", "worse"):
                    item.setForeground(QColor(style.BETTER if fc.verdict == "better" else style.WORSE))
                self.changes.setItem(i, j, item)
        flags = "; ".join(result.flags)
        self.compare_status.setText(f"A {a.label} → B {b.label}" + (f" · doubtful: {flags}" if flags else ""))
        self.tabs.setCurrentIndex(1)

    def draw_band(self, a, b) -> None:
        """Overlay the two snapshots' band curves, shown when either has two points or more."""
        curves = [(side, snap, colour, band_curve(snap.result))
                  for side, snap, colour in (("A", a, A_COLOUR), ("B", b, B_COLOUR))]
        shown = any(len(curve[0]) >= 2 for *_, curve in curves)
        x_title = BAND_CURVES.get(a.measurement, (None, None, "band curve"))[2] + " · frequency, Hz (log)"
        y_title = "suppression, dB"
        self.band_plot.set_series(
            [(f"{side} {snap.label}", colour, xs, ys, True, bound)
             for side, snap, colour, (xs, ys, bound) in curves if len(xs)] if shown else [], x_title, y_title)
        self.band_plot.setVisible(shown)
        bounds = shown and any(s[5].any() for s in self.band_plot.series)
        self.band_note.setText(BOUND_NOTE if bounds else "" if shown else NO_BAND_TEXT)
        self.band_note.setVisible(bounds or not shown)

    def change_text(self, key: str) -> str:
        """The change column's text for a figure of the shown comparison (tests and tooltips)."""
        for i, fc in enumerate(self.comparison.figures if self.comparison else ()):
            if fc.key == key:
                return self.changes.item(i, 3).text()
        raise KeyError(key)
