"""The history in the window, on the simulated bench under a virtual screen (as test_gui_window.py).

Saving (S) stores the newest readout in the store named by RTANALYZER_STORE (a tmp file, see
conftest.py); the History window lists it, edits its note and tags, deletes after asking, and
compares two snapshots taken at different phase trims, or two groups chosen by tag. What the
window shows of a comparison is checked against ``rtanalyzer.store.comparison.compare`` (the
same figures as ``rtanalyzer history compare``) and one group mean against numpy by hand.
"""

from __future__ import annotations

import os

import pytest

from test_gui_window import TOLERANCE_DB, open_window, qapp, virtual_display, wait_for_figure  # noqa: F401

from rtanalyzer.generator.signals import Tone  # noqa: E402
from rtanalyzer.sources.bench_source import BenchSource  # noqa: E402


def _store():
    from rtanalyzer.store import SnapshotStore

    return SnapshotStore.open(os.environ["RTANALYZER_STORE"], create=False)


def _focus(qtbot, window):
    window.activateWindow()
    qtbot.waitUntil(window.isActiveWindow, timeout=3000)  # shortcuts act in the active window


def test_s_stores_the_readout_and_the_history_lists_it_with_an_editable_note(qtbot):
    from PyQt6.QtCore import Qt

    from rtanalyzer.gui.history_view import BEST_KEY
    from rtanalyzer.store.snapshot import key_figures

    window = open_window(qtbot)
    truth = window.runner.engine.source.truth()["worst_sideband_suppression_db"]
    wait_for_figure(qtbot, window, "sideband", truth, TOLERANCE_DB, 5000)
    _focus(qtbot, window)
    qtbot.keyClick(window, Qt.Key.Key_Space)  # pause: the readout shown stays the one saved
    qtbot.wait(300)
    readout = window.last_readout
    qtbot.keyClick(window, Qt.Key.Key_S)
    assert "saved snapshot #1" in window.statusBar().currentMessage()
    with _store() as store:
        saved = store.get(1)
    assert saved.rig == "default" and saved.measurement == "sideband" and saved.spectrum is not None
    assert saved.key_figures() == key_figures(readout.result)
    assert saved.result["worst_sideband_suppression_db"] == readout.result["worst_sideband_suppression_db"]
    assert saved.result["carrier_suppression_db"] == readout.result["carrier_suppression_db"]
    qtbot.keyClick(window, Qt.Key.Key_Space)

    qtbot.keyClick(window, Qt.Key.Key_H)
    view = window.history.view
    assert view is not None and view.isVisible()
    listing = view.snapshots
    assert listing.table.rowCount() == 1 and listing.table.item(0, 0).text() == "#1"
    assert listing.table.item(0, 4).text() == f"{readout.result['worst_sideband_suppression_db']:.1f} dB"
    listing.select([1])
    listing.note_edit.setText("after the new mixer")
    qtbot.mouseClick(listing.note_button, Qt.MouseButton.LeftButton)
    with _store() as store:
        assert store.get(1, with_spectrum=False).note == "after the new mixer"
    assert listing.table.item(0, 8).text() == "after the new mixer"
    listing.filter_edit.setText("no such rig")
    assert listing.table.rowCount() == 0
    listing.filter_edit.setText("def")
    assert listing.table.rowCount() == 1
    listing.filter_edit.setText("new mixer")  # the note's text
    assert listing.table.rowCount() == 1

    # Run ▸ Snapshot each new best: saved while trimming, persisted in the settings
    window.history.best_action.setChecked(True)
    assert window.settings.get(BEST_KEY) is True
    with _store() as store:
        qtbot.waitUntil(lambda: any(s.origin == "live-best" for s in store.summaries()), timeout=3000)


def test_two_snapshots_at_different_phase_trims_compare_with_overlay_and_better_direction(qtbot):
    from PyQt6.QtCore import Qt

    window = open_window(qtbot)
    engine = window.runner.engine
    rate = engine.source.rate_hz
    original = window.config.knobs.phase_trim_deg
    ids = []
    for trim in (original + 4.0, original):  # before: a trimmer turned the wrong way; after: back
        window.controls.knobs["phase_trim_deg"].spin.setValue(trim)
        expected = BenchSource(window.config.knobs, Tone(1000.0, -6.0), rate).truth()["worst_sideband_suppression_db"]
        wait_for_figure(qtbot, window, "sideband", expected, TOLERANCE_DB, 4000)
        qtbot.wait(1500)  # the averaged spectrum no longer holds blocks from before the trim
        ids.append(window.history.save_now())
    assert ids == [1, 2]

    view = window.history.show_history()
    table = view.snapshots.table
    assert [table.item(i, 0).text() for i in range(2)] == ["#2", "#1"]  # newest first
    assert len(view.trend_plot.series[0][2]) == 2
    view.snapshots.select(ids)
    panel = view.compare
    qtbot.mouseClick(panel.compare_button, Qt.MouseButton.LeftButton)
    labels = [s[0] for s in panel.overlay.series]
    assert labels == ["A #1", "B #2"]
    assert all(len(s[2]) > 100 and len(s[2]) == len(s[3]) for s in panel.overlay.series)
    assert panel.overlay.series[0][1] != panel.overlay.series[1][1]
    assert panel.change_text("worst_sideband_suppression_db").startswith("better by")
    assert panel.comparison.figure("worst_sideband_suppression_db").verdict == "better"
    assert not panel.band_plot.isVisible() and panel.band_note.text() == "no band curve: single-tone snapshots"
    shot = os.environ.get("RTANALYZER_HISTORY_SHOT")
    if shot:
        view.resize(1280, 860)
        qtbot.wait(200)
        view.grab().save(shot, "PNG")
        view.tabs.setCurrentIndex(0)
        qtbot.wait(100)
        view.grab().save(shot.replace(".png", "-trend.png"), "PNG")


def _three_tone_sideband(supp, detected, epoch):
    from rtanalyzer.store.snapshot import Snapshot, iso_utc

    points = [{"tone_hz": tone, "wanted_hz": 14_000_000.0 + tone, "wanted_dbfs": -6.0,
               "unwanted_hz": 14_000_000.0 - tone, "unwanted_dbfs": -6.0 - s,
               "unwanted_detected": d, "sideband_suppression_db": s}
              for tone, s, d in zip((400.0, 1000.0, 2500.0), supp, detected)]
    worst = min(supp)
    result = {"measurement": "sideband", "points": points, "worst_sideband_suppression_db": worst,
              "worst_is_lower_bound": not detected[supp.index(worst)],
              "carrier_suppression_db": 45.0, "carrier_detected": True}
    return Snapshot("sideband", result, iso_utc(epoch), epoch)


def test_comparing_two_three_tone_sideband_snapshots_overlays_their_band_curves(qtbot, qapp):
    from PyQt6.QtCore import Qt

    from rtanalyzer.gui.history_compare import A_COLOUR, B_COLOUR
    from rtanalyzer.gui.history_view import HistoryWindow
    from rtanalyzer.store import SnapshotStore

    before, after = (31.5, 38.2, 27.9), (36.0, 44.5, 40.1)
    store = SnapshotStore.open(os.environ["RTANALYZER_STORE"])
    ids = [store.add(_three_tone_sideband(before, (True, True, True), 1_700_000_000.0)),
           store.add(_three_tone_sideband(after, (True, False, True), 1_700_000_600.0))]
    view = HistoryWindow(store)
    qtbot.addWidget(view)
    view.show()
    view.refresh()
    panel = view.compare
    assert not panel.band_plot.isVisible()
    view.snapshots.select(ids)
    qtbot.mouseClick(panel.compare_button, Qt.MouseButton.LeftButton)
    assert panel.band_plot.isVisible() and "≥" in panel.band_note.text()  # B at 1000 Hz is a bound
    series = panel.band_plot.series
    assert [(s[0], s[1]) for s in series] == [("A #1", A_COLOUR), ("B #2", B_COLOUR)]
    with _store() as check:
        for s, snapshot_id in zip(series, ids):
            stored = check.get(snapshot_id, with_spectrum=False).result["points"]
            assert list(s[2]) == [p["tone_hz"] for p in stored]
            assert list(s[3]) == [p["sideband_suppression_db"] for p in stored]
            assert list(s[5]) == [not p["unwanted_detected"] for p in stored]  # bounds drawn hollow
    assert list(series[0][3]) == list(before) and list(series[1][3]) == list(after)
    assert panel.band_plot.log_x and panel.band_plot.x_title.startswith("opposite-sideband suppression per tone")
    view.resize(1280, 860)
    qtbot.wait(100)
    view.grab().save(os.environ.get("RTANALYZER_BAND_SHOT", "/tmp/gui_history_band.png"), "PNG")
    store.close()


# -- tags, delete and group compare, on a store filled here -------------------------------------------


def _window(qtbot, store):
    from rtanalyzer.gui.history_view import HistoryWindow

    view = HistoryWindow(store)
    qtbot.addWidget(view)
    view.show()
    view.refresh()
    return view


def _filled_store(results):
    """A store at RTANALYZER_STORE holding one snapshot per result, a minute apart (ids 1, 2, ...)."""
    from test_store import snapshot

    from rtanalyzer.store import SnapshotStore

    store = SnapshotStore.open(os.environ["RTANALYZER_STORE"])
    for i, result in enumerate(results):
        store.add(snapshot(result, when=1_700_000_000.0 + 60 * i))
    return store


def _one_line(text):
    return text and "\n" not in text and "Traceback" not in text


def test_tags_added_and_removed_in_the_window_round_trip_through_the_store(qtbot, qapp):
    from PyQt6.QtCore import Qt
    from test_store import sideband_result

    store = _filled_store([sideband_result(w) for w in (30.0, 31.0, 32.0)])
    view = _window(qtbot, store)
    listing = view.snapshots
    assert not listing.add_tags_button.isEnabled()  # nothing selected yet
    listing.select([1, 2])
    assert listing.tags_label.text() == "Tags for 2 selected:"
    listing.tags_edit.setText(" before, C12 10 nF ,before, ")  # spaces, a repeat and a trailing comma
    qtbot.mouseClick(listing.add_tags_button, Qt.MouseButton.LeftButton)
    with _store() as check:
        assert [check.get(i, with_spectrum=False).tags for i in (1, 2, 3)] == [
            ("C12 10 nF", "before"), ("C12 10 nF", "before"), ()]
        assert check.tags() == {"C12 10 nF": 2, "before": 2}
    assert listing.message.text() == "tagged #2, #1 with 'before', 'C12 10 nF'"
    assert listing.tags_edit.text() == ""
    tags_column = [listing.table.item(r, 7).text() for r in range(3)]
    assert tags_column == ["", "C12 10 nF, before", "C12 10 nF, before"]  # #3, #2, #1
    assert listing.selected_ids() == [2, 1]  # the selection survives the refresh

    # the filter: by tag (the store's query), and by text in a tag
    tag_choices = [listing.tag_filter.itemData(i) for i in range(listing.tag_filter.count())]
    assert tag_choices == [None, "C12 10 nF", "before"]
    listing.filter_tag("before")
    assert [listing.table.item(r, 0).text() for r in range(listing.table.rowCount())] == ["#2", "#1"]
    assert listing.count_label.text() == "2 of 3 shown"
    listing.filter_tag(None)
    listing.filter_edit.setText("c12")
    assert listing.table.rowCount() == 2
    listing.filter_edit.clear()
    # the group choices of the Compare tab list the same tags
    assert [view.compare.group_a.itemData(i) for i in range(view.compare.group_a.count())] == ["C12 10 nF", "before"]

    # adding again changes nothing and says so
    listing.select([1])
    listing.tags_edit.setText("before")
    qtbot.keyClick(listing.tags_edit, Qt.Key.Key_Return)
    assert listing.message.text() == "nothing to add: #1 already had 'before'"

    # remove one tag from one snapshot
    listing.tags_edit.setText("C12 10 nF")
    qtbot.mouseClick(listing.remove_tags_button, Qt.MouseButton.LeftButton)
    with _store() as check:
        assert check.get(1, with_spectrum=False).tags == ("before",)
        assert check.get(2, with_spectrum=False).tags == ("C12 10 nF", "before")
    assert listing.message.text() == "removed 'C12 10 nF' from #1"
    assert listing.table.item(listing.row_of(1), 7).text() == "before"

    # a chosen filter tag that is no longer used falls back to any tag
    listing.filter_tag("C12 10 nF")
    listing.select([2])
    listing.tags_edit.setText("C12 10 nF")
    qtbot.mouseClick(listing.remove_tags_button, Qt.MouseButton.LeftButton)
    assert listing.tag_filter.currentData() is None and listing.table.rowCount() == 3
    store.close()


@pytest.mark.parametrize("text,needle", [
    ("good, a\tb", "is not allowed"),  # a control character: the store's own check
    ("good, " + "x" * 81, "is not allowed"),  # longer than the store's 80 characters
    (" , ,", "type one or more tags"),
])
def test_a_tag_the_store_refuses_is_one_line_and_nothing_is_written(qtbot, qapp, text, needle):
    from PyQt6.QtCore import Qt
    from test_store import sideband_result

    store = _filled_store([sideband_result(30.0), sideband_result(31.0)])
    view = _window(qtbot, store)
    listing = view.snapshots
    listing.select([1, 2])
    listing.tags_edit.setText(text)
    qtbot.mouseClick(listing.add_tags_button, Qt.MouseButton.LeftButton)
    message = listing.message.text()
    assert _one_line(message) and message.startswith("Not tagged: ") and needle in message
    with _store() as check:
        assert check.tags() == {}  # "good" was not written either: all tags are checked first
    assert listing.tags_edit.text() == text  # kept, to correct
    store.close()


def test_a_snapshot_deleted_elsewhere_meanwhile_is_one_line(qtbot, qapp):
    from PyQt6.QtCore import Qt
    from test_store import sideband_result

    store = _filled_store([sideband_result(30.0), sideband_result(31.0)])
    view = _window(qtbot, store)
    listing = view.snapshots
    listing.select([2])
    with _store() as other:  # another rtanalyzer (e.g. `history delete`) deletes it
        other.delete(2)
    listing.tags_edit.setText("after")
    qtbot.mouseClick(listing.add_tags_button, Qt.MouseButton.LeftButton)
    message = listing.message.text()
    assert _one_line(message) and message == "Not tagged on #2: there is no snapshot #2"
    assert [listing.table.item(r, 0).text() for r in range(listing.table.rowCount())] == ["#1"]
    store.close()


def test_delete_asks_naming_them_and_removes_exactly_the_chosen(qtbot, qapp, monkeypatch):
    from PyQt6.QtCore import Qt
    from PyQt6.QtWidgets import QMessageBox
    from test_store import sideband_result

    from rtanalyzer.gui.history_list import time_text

    store = _filled_store([sideband_result(w) for w in (30.0, 31.0, 32.0, 33.0)])
    view = _window(qtbot, store)
    listing = view.snapshots
    asked = []
    answer = [QMessageBox.StandardButton.No]

    def question(parent, title, text, buttons, default):
        asked.append((title, text, default))
        return answer[0]

    monkeypatch.setattr(QMessageBox, "question", staticmethod(question))

    listing.select([1, 3])
    qtbot.mouseClick(listing.delete_button, Qt.MouseButton.LeftButton)
    title, text, default = asked[-1]
    assert title == "Delete 2 snapshots" and text.startswith("Delete 2 snapshots from the history?")
    for i, shown in ((1, True), (2, False), (3, True), (4, False)):
        line = f"#{i}  {time_text(1_700_000_000.0 + 60 * (i - 1))}, rig default, sideband"
        assert (line in text) == shown, (line, text)
    assert default == QMessageBox.StandardButton.No  # Enter keeps them
    with _store() as check:  # "No" keeps every one
        assert [s.id for s in check.summaries()] == [1, 2, 3, 4]
    assert listing.message.text() == "Nothing deleted: kept #3, #1."

    # the Delete key asks too; "Yes" deletes exactly the two chosen
    answer[0] = QMessageBox.StandardButton.Yes
    _focus(qtbot, view)
    listing.table.setFocus()
    qtbot.keyClick(listing.table, Qt.Key.Key_Delete)
    assert len(asked) == 2
    with _store() as check:
        assert [s.id for s in check.summaries()] == [2, 4]
    assert [listing.table.item(r, 0).text() for r in range(listing.table.rowCount())] == ["#4", "#2"]
    assert listing.message.text() == "deleted #3, #1"

    # nothing selected: nothing asked, nothing deleted
    listing.select([])
    listing.delete_selected()
    assert len(asked) == 2 and listing.message.text().startswith("Nothing deleted")
    store.close()


def _parse(cell):
    """(bound mark, number, spread, count or None) from a cell such as "≥36.0 ± 1.2 dB (n = 2)"."""
    import re

    m = re.match(r"^([≥≤]?) ?([+-]?\d+\.\d+)(?: ± (\d+\.\d))? [a-zA-Z ]+?(?: \(n = (\d+)\))?$", cell)
    assert m, cell
    return m.group(1), float(m.group(2)), float(m.group(3) or 0.0), None if m.group(4) is None else int(m.group(4))


def _check_against_the_store(panel, oracle):
    """Every row of the window's table says what ``compare`` computed, to the 0.05 dB of display rounding."""
    from rtanalyzer.gui.history_compare import CHANGE_COLUMNS

    mark = {"exact": "", "at least": "≥", "at most": "≤"}
    labels = [panel.changes.item(r, 0).text() for r in range(panel.changes.rowCount())]
    assert labels == [f.label for f in oracle.figures]
    assert panel.changes.horizontalHeaderItem(4).text() == CHANGE_COLUMNS[4] == "B − A"
    members = {"A": len(oracle.a.ids), "B": len(oracle.b.ids)}
    for j, side in ((2, "A"), (3, "B")):
        header = panel.changes.horizontalHeaderItem(j).text()
        assert header == (f"{side} · mean of {members[side]}" if members[side] > 1 else side)
    for i, f in enumerate(oracle.figures):
        row = panel.row(f.key)
        assert row["better"] == ("higher" if f.larger_is_better else "lower")
        # the verdict is the store's, cut short after a bound's "≥"/"≤" number; whole in the tooltip
        assert f.text.startswith(row["verdict"]) and panel.changes.item(i, 5).toolTip() == f.text
        if f.change_kind not in ("at least", "at most"):
            assert row["verdict"] == f.text
        for side, value in (("A", f.a), ("B", f.b)):
            bound, number, spread, n = _parse(row[side])
            assert bound == mark[value.kind] and (members[side] if n is None else n) == value.n
            assert number == pytest.approx(value.value, abs=0.05)
            assert spread == pytest.approx(value.spread_db, abs=0.05)
        if f.change_kind == "unknown":
            assert row["B − A"] == "—"
        else:
            bound, number, _, n = _parse(row["B − A"])
            assert n is None
            assert bound == mark[f.change_kind]
            assert number == pytest.approx(f.change_db, abs=0.05 if abs(f.change_db) >= 0.095 else 0.005)


@pytest.fixture
def bench_groups(tmp_path, cautions_already_shown):
    """Six 1 s captures of the simulated bench with three tones, analysed and saved by the CLI:
    tagged "before" at phase trims 1.5°, 1.6° and 1.4°, "after" at 0.2°, 0.3° and 0.25°."""
    from rtanalyzer.cli.main import main

    tones = ["400", "1000", "2500"]
    for i, (tag, trim) in enumerate((("before", 1.5), ("before", 1.6), ("before", 1.4),
                                     ("after", 0.2), ("after", 0.3), ("after", 0.25))):
        wav = tmp_path / f"take{i}.wav"
        assert main(["simulate", "--seconds", "1", "--tone", *tones, "--phase-trim-deg", str(trim),
                     "--seed", str(i), "--out", str(wav)]) == 0
        assert main(["analyze", "sideband", str(wav), "--tone", *tones, "--carrier", "4000", "--save",
                     "--tag", tag, "--note", f"phase trim {trim}°"]) == 0


def test_group_compare_in_the_window_shows_what_the_store_computes(qtbot, qapp, bench_groups):
    import numpy as np
    from PyQt6.QtCore import Qt

    from rtanalyzer.gui.history_compare import A_COLOUR, B_COLOUR
    from rtanalyzer.store import SnapshotStore, compare

    store = SnapshotStore.open(os.environ["RTANALYZER_STORE"])
    view = _window(qtbot, store)
    panel = view.compare
    assert (panel.group_a.currentData(), panel.group_b.currentData()) == ("before", "after")  # preset
    assert [panel.group_a.itemText(i) for i in range(2)] == ["after  (3)", "before  (3)"]
    qtbot.mouseClick(panel.group_button, Qt.MouseButton.LeftButton)
    assert view.tabs.currentWidget() is panel

    with _store() as check:
        before, after = check.select("tag:before"), check.select("tag:after")
    oracle = compare(before, after, "tag:before", "tag:after")  # as `history compare tag:before tag:after`
    _check_against_the_store(panel, oracle)
    assert panel.comparison.to_json() == oracle.to_json()
    worst = panel.row("worst_sideband_suppression_db")
    assert worst["verdict"].startswith("better by")
    assert panel.status.text() == "sideband · A = tag:before (3: #1, #2, #3) → B = tag:after (3: #4, #5, #6)"

    # one mean and spread by hand, with numpy, from the snapshots' own figures
    values = [s.result["worst_sideband_suppression_db"] for s in before]
    _, mean, spread, _ = _parse(worst["A"])
    assert mean == pytest.approx(np.mean(values), abs=0.05)
    assert spread == pytest.approx(np.std(values, ddof=1), abs=0.05)

    # the spectra: each group's dB mean of its members' spectra, in A's and B's colours
    spectra = panel.overlay.series
    assert [(s[0], s[1]) for s in spectra] == [("A mean of 3 spectra", A_COLOUR), ("B mean of 3 spectra", B_COLOUR)]
    for s, group in zip(spectra, (before, after)):
        np.testing.assert_allclose(s[3], np.mean([m.spectrum.levels_db.astype(float) for m in group], axis=0))
    # shown around what was measured: the carrier (near 4000 Hz) with the tones' sidebands at
    # ±400..2500 Hz, not the whole 24 kHz; "whole spectrum" shows it all
    lo, hi = panel.overlay.x_limits
    assert lo <= 4000 - 2500 and hi >= 4000 + 2500 and hi - lo < 8000
    panel.whole.setChecked(True)
    assert panel.overlay.x_limits is None
    panel.whole.setChecked(False)
    assert panel.overlay.x_limits == (lo, hi)
    # the band curves: each tone's group mean, the very numbers of the table
    curves = panel.band_plot.series
    assert panel.band_plot.isVisible() and [c[0] for c in curves] == ["A mean of 3", "B mean of 3"]
    for curve, side in zip(curves, ("a", "b")):
        assert list(curve[2]) == [400.0, 1000.0, 2500.0]
        expected = [getattr(oracle.figure(f"sideband_suppression_db@{t:g}"), side).value for t in curve[2]]
        np.testing.assert_allclose(curve[3], expected)

    view.resize(1280, 860)
    qtbot.wait(100)
    view.grab().save(os.environ.get("RTANALYZER_GROUP_SHOT", "/tmp/gui_history_groups.png"), "PNG")
    store.close()


def test_group_compare_says_bounds_as_bounds_and_refuses_unlike_groups_in_one_line(qtbot, qapp):
    from PyQt6.QtCore import Qt
    from test_store import sideband_result, twotone_result

    from rtanalyzer.store import compare

    # before: 30 and 33 dB measured; after: 41 dB measured, and one whose unwanted sideband was
    # under the noise (at least 47 dB): B's mean is a lower bound, so is the change
    results = [sideband_result(30.0), sideband_result(33.0), sideband_result(41.0),
               sideband_result(47.0, unwanted_detected=False), twotone_result(-32.0)]
    store = _filled_store(results)
    for i, tag in ((1, "before"), (2, "before"), (3, "after"), (4, "after"), (1, "mixed"), (5, "mixed")):
        store.add_tag(i, tag)
    view = _window(qtbot, store)
    panel = view.compare
    panel.choose_groups("before", "after")
    qtbot.mouseClick(panel.group_button, Qt.MouseButton.LeftButton)
    oracle = compare(store.select("tag:before"), store.select("tag:after"), "tag:before", "tag:after")
    _check_against_the_store(panel, oracle)
    worst = panel.row("worst_sideband_suppression_db")
    # (30 + 33) / 2 = 31.5; (41 + 47) / 2 = 44.0, at least; change at least +12.5 (arithmetic)
    assert worst["A"] == "31.5 ± 2.1 dB"
    assert worst["B"] == "≥44.0 ± 4.2 dB"
    assert worst["B − A"] == "≥ +12.5 dB"
    assert worst["verdict"] == "better by at least 12.5 dB"
    assert panel.band_plot.isHidden() and panel.band_note.text() == "no band curve: single-tone snapshots"

    # the same tag on both sides cannot be compared: the button is off, and a direct call says why
    panel.choose_groups("after", "after")
    assert not panel.group_button.isEnabled()
    panel.compare_groups()
    assert panel.status.text() == "Choose two different tags for groups A and B. (below: the comparison shown before)"
    # a group mixing measurements: one line from the store, the last comparison stays shown
    panel.choose_groups("mixed", "after")
    qtbot.mouseClick(panel.group_button, Qt.MouseButton.LeftButton)
    assert _one_line(panel.status.text()) and "mixes measurements (sideband, twotone)" in panel.status.text()
    assert panel.row("worst_sideband_suppression_db") == worst

    # deleting a member of the comparison shown says so above it
    panel.choose_groups("before", "after")
    qtbot.mouseClick(panel.group_button, Qt.MouseButton.LeftButton)
    view.snapshots.confirm = lambda title, text: True
    view.snapshots.select([4])
    view.snapshots.delete_selected()
    assert panel.status.text().endswith("shown as computed before #4 was deleted")
    store.close()
