"""The History window's list of snapshots: filter, note, tags and delete.

Newest first, with the key figures (bounds marked "≥"/"≤"), tags and note. The filter keeps
the snapshots carrying a tag (the store's own query) and those whose rig, tags or note contain
the text typed. Tags are added to or removed from every selected snapshot, several at once
separated by commas; deleting asks first, naming each snapshot. Errors (a tag name the store
refuses, a snapshot another program deleted meanwhile) are one line under the list.
"""

from __future__ import annotations

from datetime import datetime
from typing import Sequence

from PyQt6.QtCore import Qt, pyqtSignal
from PyQt6.QtGui import QKeySequence, QShortcut
from PyQt6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QMessageBox,
    QPushButton,
    QSizePolicy,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from rtanalyzer.gui import style

COLUMNS = ("id", "time", "rig", "measurement", "sideband supp.", "carrier supp.", "worst IMD", "tags", "note")
ANY_TAG = "any tag"
#: A delete confirmation names at most this many snapshots one per line; the rest by id.
CONFIRM_LINES = 20


def figure_text(value: float | None, unit: str, bound: str = "") -> str:
    return "" if value is None else f"{bound}{value:.1f} {unit}"


def time_text(epoch: float) -> str:
    """Local time of a snapshot, to the second."""
    return datetime.fromtimestamp(epoch).strftime("%Y-%m-%d %H:%M:%S")


def ids_text(ids: Sequence[int]) -> str:
    return ", ".join(f"#{i}" for i in ids)


def parse_tags(text: str) -> list[str]:
    """Tag names from comma-separated text, trimmed, each once, checked as the store checks them.

    Raises
    ------
    StoreError
        When no tag is given, or one is not a name the store accepts (one line saying which).
    """
    from rtanalyzer.store import StoreError
    from rtanalyzer.store.snapshot import check_name

    tags: list[str] = []
    for piece in text.split(","):
        tag = piece.strip()
        if tag and tag not in tags:
            tags.append(check_name("tag", tag))
    if not tags:
        raise StoreError("type one or more tags, separated by commas (e.g. before, C12 10 nF)")
    return tags


def describe(s) -> str:
    """One line naming a snapshot in a confirmation: id, time, rig, measurement, tags."""
    tags = f", tags {', '.join(s.tags)}" if s.tags else ""
    return f"#{s.id}  {time_text(s.created_epoch)}, rig {s.rig}, {s.measurement}{tags}"


class SnapshotList(QWidget):
    """The list with its filter and editors; ``summaries`` are the rows shown, in order."""

    refreshed = pyqtSignal()  # the rows were read again (the store may have changed)
    selection_changed = pyqtSignal()
    deleted = pyqtSignal(list)  # ids deleted from the store

    def __init__(self, store, parent=None) -> None:
        super().__init__(parent)
        self.store = store
        self.summaries = []
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)

        top = QHBoxLayout()
        top.addWidget(QLabel("Filter:"))
        self.filter_edit = QLineEdit()
        self.filter_edit.setPlaceholderText("rig, tag or note text")
        self.filter_edit.setClearButtonEnabled(True)
        self.filter_edit.textChanged.connect(lambda _: self.refresh())
        top.addWidget(self.filter_edit, 1)
        top.addWidget(QLabel("Tag:"))
        self.tag_filter = QComboBox()
        self.tag_filter.setObjectName("tag_filter")
        self.tag_filter.setMinimumContentsLength(14)
        self.tag_filter.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.tag_filter.addItem(ANY_TAG, None)
        self.tag_filter.currentIndexChanged.connect(lambda _: self.refresh())
        top.addWidget(self.tag_filter)
        self.count_label = QLabel()
        self.count_label.setStyleSheet(f"color: {style.INK_SOFT};")
        top.addWidget(self.count_label)
        refresh = QPushButton("Refresh")
        refresh.clicked.connect(self.refresh)
        top.addWidget(refresh)
        layout.addLayout(top)

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
        delete_key = QShortcut(QKeySequence(QKeySequence.StandardKey.Delete), self.table)
        delete_key.setContext(Qt.ShortcutContext.WidgetShortcut)
        delete_key.activated.connect(self.delete_selected)
        layout.addWidget(self.table, 1)

        note_row = QHBoxLayout()
        self.note_label = QLabel("Note for —:")
        self.note_label.setMinimumWidth(120)
        note_row.addWidget(self.note_label)
        self.note_edit = QLineEdit()
        self.note_edit.setPlaceholderText("select a snapshot to write its note")
        self.note_edit.returnPressed.connect(self.save_note)
        note_row.addWidget(self.note_edit, 1)
        self.note_button = QPushButton("Save note")
        self.note_button.clicked.connect(self.save_note)
        note_row.addWidget(self.note_button)
        layout.addLayout(note_row)

        tag_row = QHBoxLayout()
        self.tags_label = QLabel("Tags for —:")
        self.tags_label.setMinimumWidth(120)
        tag_row.addWidget(self.tags_label)
        self.tags_edit = QLineEdit()
        self.tags_edit.setPlaceholderText("tags, separated by commas: before, C12 10 nF")
        self.tags_edit.returnPressed.connect(self.add_tags)
        tag_row.addWidget(self.tags_edit, 1)
        self.add_tags_button = QPushButton("Add to selected")
        self.add_tags_button.clicked.connect(self.add_tags)
        tag_row.addWidget(self.add_tags_button)
        self.remove_tags_button = QPushButton("Remove from selected")
        self.remove_tags_button.clicked.connect(self.remove_tags)
        tag_row.addWidget(self.remove_tags_button)
        tag_row.addSpacing(18)
        self.delete_button = QPushButton("Delete selected…")
        self.delete_button.setToolTip("Delete the selected snapshots from the history (asks first; Del)")
        self.delete_button.clicked.connect(self.delete_selected)
        tag_row.addWidget(self.delete_button)
        layout.addLayout(tag_row)

        self.message = QLabel()
        # one line: a long message is cut at the window's edge (whole in its tooltip), never widens it
        self.message.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        layout.addWidget(self.message)

    # -- the rows ---------------------------------------------------------------------------------

    def refresh(self) -> None:
        """Read the rows again (filter applied), keeping the selection where it still exists."""
        from rtanalyzer.store import StoreError

        text = self.filter_edit.text().strip().lower()
        chosen = set(self.selected_ids())
        try:
            self._fill_tag_filter(self.store.tags())
            tag = self.tag_filter.currentData()
            rows = self.store.summaries(tags=[tag] if tag else None, newest_first=True)
            total = self.store.count()
        except StoreError as exc:
            self.say(f"The history cannot be read: {exc}", error=True)
            return
        if text:
            rows = [s for s in rows if text in s.rig.lower() or text in s.note.lower()
                    or any(text in t.lower() for t in s.tags)]
        self.summaries = rows
        self.count_label.setText(f"{len(rows)} of {total} shown" if len(rows) != total else
                                 f"{total} snapshot{'s' if total != 1 else ''}")
        self.table.blockSignals(True)
        self.table.clearSelection()
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
                if j == 8 and cell:
                    item.setToolTip(cell)
                self.table.setItem(i, j, item)
        self.table.blockSignals(False)
        self.select([s.id for s in rows if s.id in chosen])
        self.refreshed.emit()

    def _fill_tag_filter(self, tags: dict[str, int]) -> None:
        """The tag choices: the tags in use; a chosen tag no longer in use falls back to any tag."""
        chosen = self.tag_filter.currentData()
        self.tag_filter.blockSignals(True)
        self.tag_filter.clear()
        self.tag_filter.addItem(ANY_TAG, None)
        for tag, n in tags.items():
            self.tag_filter.addItem(f"{tag}  ({n})", tag)
        self.tag_filter.setCurrentIndex(max(self.tag_filter.findData(chosen), 0) if chosen else 0)
        self.tag_filter.blockSignals(False)

    def filter_tag(self, tag: str | None) -> None:
        """Show only the snapshots with ``tag`` (None: any), as choosing it in the Tag list does."""
        index = 0 if tag is None else self.tag_filter.findData(tag)
        if index < 0:
            raise KeyError(tag)
        self.tag_filter.setCurrentIndex(index)

    def row_of(self, snapshot_id: int) -> int:
        return next(i for i, s in enumerate(self.summaries) if s.id == snapshot_id)

    def selected_ids(self) -> list[int]:
        rows = sorted({i.row() for i in self.table.selectedIndexes()})
        return [self.summaries[r].id for r in rows if r < len(self.summaries)]

    def select(self, ids: Sequence[int]) -> None:
        self.table.blockSignals(True)
        self.table.clearSelection()
        mode = self.table.selectionMode()
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.MultiSelection)
        for snapshot_id in ids:
            self.table.selectRow(self.row_of(snapshot_id))
        self.table.setSelectionMode(mode)
        self.table.blockSignals(False)
        self._selection_changed()

    def _selection_changed(self) -> None:
        ids = self.selected_ids()
        one = self.summaries[self.row_of(ids[0])] if len(ids) == 1 else None
        self.note_label.setText(f"Note for #{one.id}:" if one else "Note for —:")
        if one is not None:
            self.note_edit.setText(one.note)
        else:
            self.note_edit.clear()
        self.note_edit.setEnabled(one is not None)
        self.note_button.setEnabled(one is not None)
        self.tags_label.setText(f"Tags for #{ids[0]}:" if one else f"Tags for {len(ids)} selected:" if ids
                                else "Tags for —:")
        for widget in (self.tags_edit, self.add_tags_button, self.remove_tags_button, self.delete_button):
            widget.setEnabled(bool(ids))
        self.delete_button.setText(f"Delete {len(ids)} selected…" if len(ids) > 1 else "Delete selected…")
        self.selection_changed.emit()

    def say(self, text: str, error: bool = False) -> None:
        """One line under the list (red for what failed); the whole text also in its tooltip."""
        self.message.setText(text)
        self.message.setToolTip(text)
        self.message.setStyleSheet(f"color: {style.WORSE if error else style.INK_SOFT};")

    # -- editing ----------------------------------------------------------------------------------

    def save_note(self) -> None:
        from rtanalyzer.store import StoreError

        ids = self.selected_ids()
        if len(ids) != 1:
            return
        try:
            self.store.set_note(ids[0], self.note_edit.text())
        except StoreError as exc:
            self.say(f"Note not saved: {exc}", error=True)
            return
        self.refresh()
        self.say(f"note of #{ids[0]} {'saved' if self.note_edit.text() else 'cleared'}")

    def add_tags(self) -> None:
        """Add the tags typed to every selected snapshot."""
        self._change_tags(add=True)

    def remove_tags(self) -> None:
        """Remove the tags typed from every selected snapshot."""
        self._change_tags(add=False)

    def _change_tags(self, add: bool) -> None:
        from rtanalyzer.store import StoreError

        ids = self.selected_ids()
        failed = "Not tagged" if add else "No tag removed"
        if not ids:
            self.say(f"{failed}: select the snapshots first.", error=True)
            return
        try:
            tags = parse_tags(self.tags_edit.text())
        except StoreError as exc:
            self.say(f"{failed}: {exc}", error=True)
            return
        changed, unchanged = [], []
        try:
            for snapshot_id in ids:
                for tag in tags:
                    done = self.store.add_tag(snapshot_id, tag) if add else self.store.remove_tag(snapshot_id, tag)
                    (changed if done else unchanged).append((snapshot_id, tag))
        except StoreError as exc:
            self.refresh()  # what was done before the error is stored: show it
            self.say(f"{failed} on #{snapshot_id}: {exc}" + (f" ({len(changed)} done before)" if changed else ""),
                     error=True)
            return
        self.tags_edit.clear()
        self.refresh()
        names = ", ".join(repr(t) for t in tags)
        text = (f"tagged {ids_text(ids)} with {names}" if add else f"removed {names} from {ids_text(ids)}")
        if unchanged:
            pairs = ", ".join(f"#{i} {t!r}" for i, t in unchanged)
            text += f" (already there: {pairs})" if add else f" (not there: {pairs})"
        if not changed:
            text = (f"nothing to add: {ids_text(ids)} already had {names}" if add
                    else f"nothing removed: {ids_text(ids)} had no tag {names}")
        self.say(text)

    def delete_selected(self) -> None:
        """Delete the selected snapshots after a confirmation naming each of them."""
        from rtanalyzer.store import StoreError

        ids = self.selected_ids()
        if not ids:
            self.say("Nothing deleted: select the snapshots to delete first.", error=True)
            return
        rows = [self.summaries[self.row_of(i)] for i in ids]
        n = len(rows)
        what = f"{n} snapshot{'s' if n != 1 else ''}"
        lines = [describe(s) for s in rows[:CONFIRM_LINES]]
        if n > CONFIRM_LINES:
            lines.append(f"and {n - CONFIRM_LINES} more: {ids_text([s.id for s in rows[CONFIRM_LINES:]])}")
        text = (f"Delete {what} from the history?\n\n" + "\n".join(lines) + "\n\nTheir figures, spectra, notes "
                f"and tags are removed from {self.store.path}. This cannot be undone.")
        if not self.confirm(f"Delete {what}", text):
            self.say(f"Nothing deleted: kept {ids_text(ids)}.")
            return
        deleted, error = [], None
        try:
            for s in rows:
                self.store.delete(s.id)
                deleted.append(s.id)
        except StoreError as exc:
            error = f"Deleted {ids_text(deleted) or 'none'}; then: {exc}"
        self.refresh()
        self.say(error or f"deleted {ids_text(deleted)}", error=error is not None)
        self.deleted.emit(deleted)

    def confirm(self, title: str, text: str) -> bool:
        """Ask a yes/no question; No is the default (Enter or Escape keeps everything)."""
        answer = QMessageBox.question(self, title, text,
                                      QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No,
                                      QMessageBox.StandardButton.No)
        return answer == QMessageBox.StandardButton.Yes
