"""The history in the window, on the simulated bench under a virtual screen (as test_gui_window.py).

Saving (S) stores the newest readout in the store named by RTANALYZER_STORE (a tmp file, see
conftest.py); the History window lists it, edits its note, and compares two snapshots taken at
different phase trims.
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
    assert view.table.rowCount() == 1 and view.table.item(0, 0).text() == "#1"
    assert view.table.item(0, 4).text() == f"{readout.result['worst_sideband_suppression_db']:.1f} dB"
    view.select([1])
    view.note_edit.setText("after the new mixer")
    qtbot.mouseClick(view.note_button, Qt.MouseButton.LeftButton)
    with _store() as store:
        assert store.get(1, with_spectrum=False).note == "after the new mixer"
    assert view.table.item(0, 8).text() == "after the new mixer"
    view.filter_edit.setText("no such rig")
    assert view.table.rowCount() == 0
    view.filter_edit.setText("def")
    assert view.table.rowCount() == 1

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
    assert [view.table.item(i, 0).text() for i in range(2)] == ["#2", "#1"]  # newest first
    assert len(view.trend_plot.series[0][2]) == 2
    view.select(ids)
    qtbot.mouseClick(view.compare_button, Qt.MouseButton.LeftButton)
    labels = [s[0] for s in view.overlay.series]
    assert labels == ["A #1", "B #2"]
    assert all(len(s[2]) > 100 and len(s[2]) == len(s[3]) for s in view.overlay.series)
    assert view.overlay.series[0][1] != view.overlay.series[1][1]
    assert view.change_text("worst_sideband_suppression_db").startswith("better by")
    assert view.comparison.figure("worst_sideband_suppression_db").verdict == "better"
    assert not view.band_plot.isVisible() and view.band_note.text() == "no band curve: single-tone snapshots"
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

    from rtanalyzer.gui.history_view import A_COLOUR, B_COLOUR, HistoryWindow
    from rtanalyzer.store import SnapshotStore

    before, after = (31.5, 38.2, 27.9), (36.0, 44.5, 40.1)
    store = SnapshotStore.open(os.environ["RTANALYZER_STORE"])
    ids = [store.add(_three_tone_sideband(before, (True, True, True), 1_700_000_000.0)),
           store.add(_three_tone_sideband(after, (True, False, True), 1_700_000_600.0))]
    view = HistoryWindow(store)
    qtbot.addWidget(view)
    view.show()
    view.refresh()
    assert not view.band_plot.isVisible()
    view.select(ids)
    qtbot.mouseClick(view.compare_button, Qt.MouseButton.LeftButton)
    assert view.band_plot.isVisible() and "≥" in view.band_note.text()  # B at 1000 Hz is a bound
    series = view.band_plot.series
    assert [(s[0], s[1]) for s in series] == [("A #1", A_COLOUR), ("B #2", B_COLOUR)]
    with _store() as check:
        for s, snapshot_id in zip(series, ids):
            stored = check.get(snapshot_id, with_spectrum=False).result["points"]
            assert list(s[2]) == [p["tone_hz"] for p in stored]
            assert list(s[3]) == [p["sideband_suppression_db"] for p in stored]
            assert list(s[5]) == [not p["unwanted_detected"] for p in stored]  # bounds drawn hollow
    assert list(series[0][3]) == list(before) and list(series[1][3]) == list(after)
    assert view.band_plot.log_x and view.band_plot.x_title.startswith("opposite-sideband suppression per tone")
    view.resize(1280, 860)
    qtbot.wait(100)
    view.grab().save(os.environ.get("RTANALYZER_BAND_SHOT", "/tmp/gui_history_band.png"), "PNG")
    store.close()
