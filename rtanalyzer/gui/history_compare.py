"""The History window's Compare tab: before/after of two snapshots, or of two groups chosen by tag.

Both kinds are computed by :func:`rtanalyzer.store.compare`, as ``rtanalyzer history compare``
does: a group's figure is the mean of its members in dB with their standard deviation as the
spread, and a figure that is only a bound (under the noise) is shown as one ("≥", "≤"), its
change too. The spectra of A and B are overlaid (a group's as the dB mean of its members on a
common grid); when either side has several tones or points, their band curves are overlaid below.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
from PyQt6.QtCore import Qt
from PyQt6.QtGui import QColor
from PyQt6.QtWidgets import (
    QAbstractItemView,
    QCheckBox,
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from rtanalyzer.gui import style
from rtanalyzer.gui.history_plot import LinePlot
from rtanalyzer.store.comparison import AT_LEAST, AT_MOST, EXACT, change_text

#: The two sides of a comparison: A before (slate), B after (teal).
A_COLOUR = style.TRACE
B_COLOUR = style.WANTED
#: The columns of the figure table.
CHANGE_COLUMNS = ("figure", "better", "A", "B", "B − A", "verdict")

#: Band curves a snapshot can hold: measurement → (x key, y key, what the curve is: the x title's start).
BAND_CURVES = {
    "sideband": ("tone_hz", "sideband_suppression_db", "opposite-sideband suppression per tone"),
    "quadrature": ("frequency_hz", "predicted_suppression_db", "predicted suppression per point"),
}
NO_BAND_TEXT = "no band curve: single-tone snapshots"
TABLE_NOTE = ("better: which way the figure improves (suppression higher; IMD and noise floor lower, i.e. more "
              "negative). A group's figure is the mean of its members in dB ± their standard deviation. "
              "≥ / ≤: only a bound (a figure under the noise), and so is its change. Hover a cell for more.")
BOUND_NOTE = "hollow ○ with ≥: at least that much (the unwanted sideband was under the noise)"
#: How a bound reads in the table: the true value is at least / at most the one shown.
BOUND_MARK = {EXACT: "", AT_LEAST: "≥", AT_MOST: "≤"}


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


def group_band_curve(results: Sequence[dict]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The members' band curves as one: at each frequency the mean in dB of the members that have
    it, a bound where any of them is one (as the comparison averages a group's figures).

    Frequencies are matched as the comparison names them (``f"{hz:g}"``), so a point of the curve
    is exactly that tone's group figure in the table.
    """
    values: dict[str, list[tuple[float, bool]]] = {}
    where: dict[str, float] = {}
    for result in results:
        for x, y, bound in zip(*band_curve(result)):
            key = f"{x:g}"
            where.setdefault(key, float(x))
            values.setdefault(key, []).append((float(y), bool(bound)))
    keys = sorted(values, key=where.get)
    return (np.array([where[k] for k in keys], float),
            np.array([np.mean([y for y, _ in values[k]]) for k in keys], float),
            np.array([any(b for _, b in values[k]) for k in keys], bool))


def side_spectrum(snapshots) -> tuple[np.ndarray, np.ndarray, int, int] | None:
    """(frequencies, dB levels, spectra used, spectra stored) of one side, or None without spectra.

    One snapshot: its stored spectrum. A group: the mean in dB of the members' spectra that share
    the newest one's frequency grid (others, from another resolution or rate, are left out).
    """
    spectra = [s.spectrum for s in snapshots if s.spectrum is not None]
    if not spectra:
        return None
    grid = (spectra[-1].start_hz, spectra[-1].step_hz, spectra[-1].levels_db.size)
    same = [sp for sp in spectra if (sp.start_hz, sp.step_hz, sp.levels_db.size) == grid]
    levels = np.mean([sp.levels_db.astype(np.float64) for sp in same], axis=0)
    return same[-1].frequencies_hz, levels, len(same), len(spectra)


def value_text(value, unit: str, members: int = 1) -> str:
    """A side's figure: "36.0 dB", "≥36.0 dB" for a bound, "34.1 ± 0.2 dB" for a group's mean ±
    the members' standard deviation, with "(n = 2)" when fewer than the side's ``members`` have it."""
    if value is None:
        return "—"
    out = f"{BOUND_MARK[value.kind]}{value.value:.1f}"
    if value.n > 1:
        out += f" ± {value.spread_db:.1f}"
    out += f" {unit}"
    if members > 1 and value.n != members:
        out += f" (n = {value.n})"
    return out


def delta_text(change) -> str:
    """B − A with its sign; a bound on the change marked "≥"/"≤"; "—" when nothing can be said."""
    if change.change_db is None or change.change_kind not in BOUND_MARK:
        return "—"
    mark = BOUND_MARK[change.change_kind]
    return f"{mark} {change_text(change.change_db)}" if mark else change_text(change.change_db)


def verdict_text(change) -> str:
    """The verdict, short: a bound's "(a bound: ...)" is left to the "≥"/"≤" of its change (the whole
    text is the cell's tooltip); other remarks, such as the groups' spread, stay."""
    if change.change_kind in (AT_LEAST, AT_MOST):
        return change.text.split(" (a bound")[0]
    return change.text


def side_text(side) -> str:
    """"#12", or "tag:before (3: #1, #2, #5)" for a group."""
    if not side.is_group:
        return side.selector
    return f"{side.selector} ({len(side.ids)}: {', '.join(f'#{i}' for i in side.ids)})"


class ComparePanel(QWidget):
    """The Compare tab: two selected snapshots, or groups A and B by tag, and what changed.

    ``selected_ids`` gives the snapshots selected in the list. ``comparison`` is the
    :class:`~rtanalyzer.store.Comparison` shown (None before the first).
    """

    def __init__(self, store, selected_ids: Callable[[], list[int]], parent=None) -> None:
        super().__init__(parent)
        self.store = store
        self.selected_ids = selected_ids
        self.comparison = None
        self.shown_ids: set[int] = set()
        layout = QVBoxLayout(self)

        row = QHBoxLayout()
        self.compare_button = QPushButton("Compare the two selected (A = older, B = newer)")
        self.compare_button.clicked.connect(self.compare_selected)
        row.addWidget(self.compare_button)
        row.addSpacing(18)
        row.addWidget(QLabel("or groups by tag:  A"))
        self.group_a = QComboBox()
        self.group_a.setObjectName("group_a")
        row.addWidget(self.group_a)
        row.addWidget(QLabel("B"))
        self.group_b = QComboBox()
        self.group_b.setObjectName("group_b")
        row.addWidget(self.group_b)
        for combo in (self.group_a, self.group_b):
            combo.setMinimumContentsLength(12)
            combo.setPlaceholderText("no tags yet")
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            combo.currentIndexChanged.connect(lambda _: self._enable())
        self.group_button = QPushButton("Compare groups")
        self.group_button.clicked.connect(self.compare_groups)
        row.addWidget(self.group_button)
        row.addStretch(1)
        layout.addLayout(row)
        self.status = QLabel("Select two snapshots of the same measurement (Ctrl+click), or choose two tags.")
        self.status.setWordWrap(True)
        self.status.setStyleSheet(f"color: {style.INK_SOFT};")
        layout.addWidget(self.status)
        self.cautions = QLabel()
        self.cautions.setWordWrap(True)
        self.cautions.setStyleSheet(f"color: {style.WORSE};")
        self.cautions.hide()
        layout.addWidget(self.cautions)

        split = QSplitter(Qt.Orientation.Horizontal)
        plots = QWidget()
        plots_layout = QVBoxLayout(plots)
        plots_layout.setContentsMargins(0, 0, 0, 0)
        self.zoom = None  # the frequencies worth showing of the spectra compared
        self.whole = QCheckBox("whole spectrum (else around the tones, carrier and products)")
        self.whole.toggled.connect(self._zoom)
        plots_layout.addWidget(self.whole)
        self.overlay = LinePlot("frequency, Hz", "level, dBFS")
        self.overlay.empty_text = "select two snapshots and compare"
        self.overlay.line_widths = (3.0, 1.2)  # A wide under B thin: where B is lower, A shows above it
        self.overlay.headroom = 0.3  # the legend above the strongest lines
        plots_layout.addWidget(self.overlay, 3)
        # the per-tone band curves, when a side has several points (same painting as above)
        self.band_plot = LinePlot("frequency, Hz (log)", "suppression, dB", log_x=True)
        self.band_plot.setMinimumHeight(210)
        self.band_plot.headroom = 0.8  # the legend above the curves
        self.band_plot.bound_text = ""  # said by band_note, under the plot
        self.band_plot.hide()
        plots_layout.addWidget(self.band_plot, 2)
        self.band_note = QLabel(NO_BAND_TEXT)
        self.band_note.setWordWrap(True)
        self.band_note.setStyleSheet(f"color: {style.INK_SOFT};")
        self.band_note.hide()
        plots_layout.addWidget(self.band_note)
        split.addWidget(plots)
        self.changes = QTableWidget(0, len(CHANGE_COLUMNS))
        self.changes.setHorizontalHeaderLabels(list(CHANGE_COLUMNS))
        self.changes.verticalHeader().hide()
        # rows as high as their text: a long verdict wraps in the last column, whatever its width
        self.changes.verticalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.changes.verticalHeader().setMinimumSectionSize(26)
        self.changes.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        ch = self.changes.horizontalHeader()
        ch.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        ch.setStretchLastSection(True)
        self.changes.setWordWrap(True)  # the verdict, in the last column, wraps; the others fit their text
        table = QWidget()
        table_layout = QVBoxLayout(table)
        table_layout.setContentsMargins(0, 0, 0, 0)
        table_layout.addWidget(self.changes, 1)
        note = QLabel(TABLE_NOTE)
        note.setWordWrap(True)
        note.setStyleSheet(f"color: {style.INK_SOFT};")
        table_layout.addWidget(note)
        split.addWidget(table)
        split.setSizes([440, 800])
        layout.addWidget(split, 1)
        self._enable()

    # -- choices ----------------------------------------------------------------------------------

    def set_selection_count(self, n: int) -> None:
        self.compare_button.setEnabled(n == 2)

    def set_tags(self, tags: dict[str, int]) -> None:
        """Fill the group choices with the tags in use (keeping the current ones when still there).

        At first, A is "before" and B "after" when those tags exist, else the first tags in order.
        """
        first = self.group_a.count() == 0
        chosen = (self.group_a.currentData(), self.group_b.currentData())
        lower = {t.lower(): t for t in tags}
        default_a = lower.get("before", next(iter(tags), None))
        default_b = lower.get("after", next((t for t in tags if t != default_a), None))
        defaults = (default_a, default_b)
        for combo, old, default in zip((self.group_a, self.group_b), chosen, defaults):
            combo.blockSignals(True)
            combo.clear()
            for tag, n in tags.items():
                combo.addItem(f"{tag}  ({n})", tag)
                combo.setItemData(combo.count() - 1, f"tag {tag!r}: {n} snapshot{'s' if n != 1 else ''}",
                                  Qt.ItemDataRole.ToolTipRole)
            want = default if first or old not in tags else old
            combo.setCurrentIndex(max(combo.findData(want), 0) if want is not None else -1)
            combo.blockSignals(False)
        self._enable()

    def _enable(self) -> None:
        a, b = self.group_a.currentData(), self.group_b.currentData()
        self.group_button.setEnabled(a is not None and b is not None and a != b)
        self.group_button.setToolTip("" if self.group_button.isEnabled() else
                                     "tag some snapshots (e.g. before and after) and choose two different tags")

    def choose_groups(self, a: str, b: str) -> None:
        """Choose the tags of groups A and B (as a user picks them in the two lists)."""
        for combo, tag in ((self.group_a, a), (self.group_b, b)):
            index = combo.findData(tag)
            if index < 0:
                raise KeyError(tag)
            combo.setCurrentIndex(index)

    # -- comparing --------------------------------------------------------------------------------

    def compare_selected(self) -> None:
        """Compare the two selected snapshots: the older is A, the newer B."""
        from rtanalyzer.store import StoreError

        ids = self.selected_ids()
        if len(ids) != 2:
            self._say("Select exactly two snapshots to compare.")
            return
        try:
            a, b = sorted((self.store.get(i) for i in ids), key=lambda s: (s.created_epoch, s.id))
        except StoreError as exc:
            self._say(str(exc))
            return
        self._compare([a], [b], a.label, b.label)

    def compare_groups(self) -> None:
        """Compare every snapshot tagged A with every one tagged B (each side averaged in dB)."""
        from rtanalyzer.store import StoreError

        tag_a, tag_b = self.group_a.currentData(), self.group_b.currentData()
        if tag_a is None or tag_b is None or tag_a == tag_b:
            self._say("Choose two different tags for groups A and B.")
            return
        try:
            a = self.store.select(f"tag:{tag_a}")
            b = self.store.select(f"tag:{tag_b}")
        except StoreError as exc:
            self._say(str(exc))
            return
        self._compare(a, b, f"tag:{tag_a}", f"tag:{tag_b}")

    def _compare(self, a, b, a_selector: str, b_selector: str) -> None:
        from rtanalyzer.store import StoreError, compare

        try:
            result = compare(a, b, a_selector, b_selector)
        except StoreError as exc:
            self._say(str(exc))
            return
        self.comparison = result
        self.shown_ids = {s.id for s in (*a, *b)}
        self.draw_spectra(a, b)
        self.draw_band(a, b)
        self.fill_table(result)
        both = sorted({s.id for s in a} & {s.id for s in b})
        self.status.setText(f"{result.measurement} · A = {side_text(result.a)} → B = {side_text(result.b)}")
        self.status.setStyleSheet(f"color: {style.INK};")
        cautions = list(result.flags)
        if both:
            cautions.insert(0, f"{', '.join(f'#{i}' for i in both)} in both groups, so the change is understated")
        self.cautions.setText("Read with care: " + "; ".join(cautions) if cautions else "")
        self.cautions.setVisible(bool(cautions))

    def _say(self, text: str) -> None:
        """One line above the figures, saying why nothing new is shown."""
        self.status.setText(text + (" (below: the comparison shown before)" if self.comparison is not None else ""))
        self.status.setStyleSheet(f"color: {style.WORSE};")

    def forget(self, deleted: Sequence[int]) -> None:
        """Say when snapshots of the comparison shown have since been deleted."""
        gone = sorted(self.shown_ids & set(deleted))
        if gone and self.comparison is not None:
            self.status.setText(self.status.text().split(" · shown as computed")[0]
                                + f" · shown as computed before {', '.join(f'#{i}' for i in gone)} was deleted")

    def draw_spectra(self, a, b) -> None:
        series, left_out = [], []
        for side, snaps, colour in (("A", a, A_COLOUR), ("B", b, B_COLOUR)):
            found = side_spectrum(snaps)
            if found is None:
                continue
            freqs, levels, used, stored = found
            label = f"{side} {snaps[0].label}" if len(snaps) == 1 else f"{side} mean of {used} spectra"
            if used < stored:
                left_out.append(f"{side}: {stored - used} on another frequency grid left out")
            series.append((label, colour, freqs, levels, False))
        from rtanalyzer.store.report import plot_range

        self.overlay.empty_text = "no spectrum stored with these snapshots"
        self.zoom = plot_range([*a, *b])
        self.overlay.x_limits = None if self.whole.isChecked() else self.zoom
        self.overlay.set_series(series)
        self.overlay.setToolTip("; ".join(left_out))

    def _zoom(self, whole: bool) -> None:
        self.overlay.x_limits = None if whole else self.zoom
        self.overlay.update()

    def draw_band(self, a, b) -> None:
        """Overlay the two sides' band curves, shown when either has two points or more."""
        curves = []
        for side, snaps, colour in (("A", a, A_COLOUR), ("B", b, B_COLOUR)):
            curve = band_curve(snaps[0].result) if len(snaps) == 1 else group_band_curve([s.result for s in snaps])
            label = f"{side} {snaps[0].label}" if len(snaps) == 1 else f"{side} mean of {len(snaps)}"
            curves.append((label, colour, curve))
        shown = any(len(curve[0]) >= 2 for *_, curve in curves)
        x_title = BAND_CURVES.get(a[0].measurement, (None, None, "band curve"))[2] + " · Hz (log)"
        self.band_plot.set_series(
            [(label, colour, xs, ys, True, bound) for label, colour, (xs, ys, bound) in curves if len(xs)]
            if shown else [], x_title, "suppression, dB")
        self.band_plot.setVisible(shown)
        bounds = shown and any(s[5].any() for s in self.band_plot.series)
        self.band_note.setText(BOUND_NOTE if bounds else "" if shown else NO_BAND_TEXT)
        self.band_note.setVisible(bounds or not shown)

    def fill_table(self, result) -> None:
        sizes = (len(result.a.ids), len(result.b.ids))
        for j, (name, n) in enumerate(zip("AB", sizes), start=2):
            header = self.changes.horizontalHeaderItem(j)
            header.setText(f"{name} · mean of {n}" if n > 1 else name)
            header.setToolTip(f"{name} = {side_text(getattr(result, name.lower()))}"
                              + (": the mean of its members in dB ± their standard deviation" if n > 1 else ""))
        self.changes.setRowCount(len(result.figures))
        for i, fc in enumerate(result.figures):
            better = "higher" if fc.larger_is_better else "lower"
            cells = (fc.label, better, value_text(fc.a, fc.unit, sizes[0]), value_text(fc.b, fc.unit, sizes[1]),
                     delta_text(fc), verdict_text(fc))
            tips = (fc.label, f"{'larger' if fc.larger_is_better else 'more negative'} is better",
                    *(self._range_tip(v, fc.unit) for v in (fc.a, fc.b)), fc.text, fc.text)
            for j, (cell, tip) in enumerate(zip(cells, tips)):
                item = QTableWidgetItem(cell)
                item.setToolTip(tip)
                if 2 <= j <= 4:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                if j >= 4 and fc.verdict in ("better", "worse"):
                    item.setForeground(QColor(style.BETTER if fc.verdict == "better" else style.WORSE))
                self.changes.setItem(i, j, item)

    @staticmethod
    def _range_tip(value, unit: str) -> str:
        if value is None:
            return "not in this side"
        bound = {AT_LEAST: "; at least: a member's figure was under the noise",
                 AT_MOST: "; at most: a member's figure was under the noise"}.get(value.kind, "")
        if value.n == 1:
            return f"{value.value:.2f} {unit}{bound}"
        return (f"mean of {value.n}: {value.value:.2f} {unit}, standard deviation {value.spread_db:.2f} dB, "
                f"from {value.low:.1f} to {value.high:.1f} {unit}{bound}")

    # -- reading back -----------------------------------------------------------------------------

    def row(self, key: str) -> dict[str, str]:
        """The table's cells of a figure of the comparison shown, by column name (tests, tooltips)."""
        for i, fc in enumerate(self.comparison.figures if self.comparison else ()):
            if fc.key == key:
                return {name: self.changes.item(i, j).text() for j, name in enumerate(CHANGE_COLUMNS)}
        raise KeyError(key)

    def change_text(self, key: str) -> str:
        """The verdict column's text for a figure of the shown comparison."""
        return self.row(key)["verdict"]

