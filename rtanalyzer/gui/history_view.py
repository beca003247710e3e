"""The history in the window: save snapshots of the live readout, and browse, tag, trend and compare them.

:class:`HistoryHooks` attaches to the main window: "Save snapshot" (S) stores the newest readout
in the history store (``$RTANALYZER_STORE`` or the user's data folder, as the CLI), the checkable
Run ▸ "Snapshot each new best" saves each new best figure at most once a second (the CLI's
:class:`~rtanalyzer.cli.history_options.LiveSaver` does both), and View ▸ History… (H) opens
:class:`HistoryWindow`: the list (``history_list.py``: filter, note, tags, delete) above, and
below it the Trend tab and the Compare tab (``history_compare.py``: two snapshots or two tag
groups, as ``rtanalyzer history compare``).

The store is opened on the GUI thread only and kept open while the window lives.
"""

from __future__ import annotations

from types import SimpleNamespace

from PyQt6.QtCore import Qt
from PyQt6.QtGui import QAction, QKeySequence
from PyQt6.QtWidgets import QComboBox, QHBoxLayout, QLabel, QSplitter, QTabWidget, QVBoxLayout, QWidget

from rtanalyzer.gui import style
from rtanalyzer.gui.history_compare import ComparePanel
from rtanalyzer.gui.history_list import SnapshotList
from rtanalyzer.gui.history_plot import LinePlot, time_axis

#: Settings keys (persisted with the window's other settings).
BEST_KEY = "history/snapshot_each_best"
RIG_KEY = "history/rig"

#: Figures the trend can follow: (store column, label, unit).
TREND_FIGURES = (
    ("worst_sideband_suppression_db", "Worst opposite-sideband suppression", "dB"),
    ("carrier_suppression_db", "Carrier suppression", "dBc"),
    ("worst_imd_db_pep", "Worst IMD", "dB PEP"),
)


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


# -- the History window ---------------------------------------------------------------------------


class HistoryWindow(QWidget):
    """Snapshots newest first (filter, note, tags, delete) above a trend and a before/after comparison."""

    def __init__(self, store, parent=None) -> None:
        super().__init__(parent, Qt.WindowType.Window)
        self.store = store
        self.setWindowTitle("rtanalyzer — history")
        # (the shared sheet inks every text alike: here a button that cannot act is seen greyed)
        self.setStyleSheet(style.STYLE_SHEET + f"QWidget#history {{ background: {style.PAPER}; }}"
                           f"QPushButton:disabled, QLineEdit:disabled, QComboBox:disabled {{ color: {style.NOISE}; }}")
        self.setObjectName("history")
        self.resize(1280, 860)
        outer = QVBoxLayout(self)

        self.snapshots = SnapshotList(store)
        self.compare = ComparePanel(store, self.snapshots.selected_ids)
        self.snapshots.refreshed.connect(self._listed)
        self.snapshots.selection_changed.connect(
            lambda: self.compare.set_selection_count(len(self.snapshots.selected_ids())))
        self.snapshots.deleted.connect(self.compare.forget)

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
        row.addWidget(QLabel("of the snapshots listed (the filter applies)"))
        row.addStretch(1)
        trend_layout.addLayout(row)
        self.trend_plot = LinePlot("time", "dB")
        time_axis(self.trend_plot)
        self.trend_plot.empty_text = "no snapshot gives this figure"
        trend_layout.addWidget(self.trend_plot, 1)
        self.tabs.addTab(trend_tab, "Trend")
        self.tabs.addTab(self.compare, "Compare")
        self.compare.compare_button.clicked.connect(lambda: self.tabs.setCurrentWidget(self.compare))
        self.compare.group_button.clicked.connect(lambda: self.tabs.setCurrentWidget(self.compare))

        body = QSplitter(Qt.Orientation.Vertical)
        body.addWidget(self.snapshots)
        body.addWidget(self.tabs)
        body.setSizes([380, 460])
        outer.addWidget(body, 1)

    def refresh(self) -> None:
        """Read the store again: the list, the trend and the tags the groups can be chosen from."""
        self.snapshots.refresh()

    def _listed(self) -> None:
        from rtanalyzer.store import StoreError

        self.draw_trend()
        try:
            self.compare.set_tags(self.store.tags())
        except StoreError as exc:
            self.snapshots.say(f"The history cannot be read: {exc}", error=True)

    def draw_trend(self) -> None:
        key = self.trend_choice.currentData()
        label, unit = next((lb, u) for k, lb, u in TREND_FIGURES if k == key)
        rows = self.snapshots.summaries
        points = sorted((s.created_epoch, s.figures.get(key)) for s in rows if s.figures.get(key) is not None)
        xs = [t for t, _ in points]
        ys = [v for _, v in points]
        self.trend_plot.set_series([(label, style.BEST, xs, ys, True)] if points else [], "time", f"{label}, {unit}")
