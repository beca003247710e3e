"""The window's Calibration menu, on the simulated bench under a virtual screen (Xvfb).

Oracle: the bench's exact truth of the exciter's own suppression (sources/bench/truth.py,
before the receiver), which a passband profile of the bench's receiver must bring the live
figure to; 0.3 dB is the live reading's tolerance (tests/test_gui_window.py).
"""

from __future__ import annotations

import pytest

from test_gui_window import open_window, qapp, shown, virtual_display  # noqa: F401

from rtanalyzer.generator.signals import Tone  # noqa: E402
from rtanalyzer.live.session import SessionConfig  # noqa: E402
from test_live_calibration import TILTED, _receiver_profile  # noqa: E402

TOLERANCE_DB = 0.3


@pytest.fixture(autouse=True)
def _profiles(tmp_path, monkeypatch):
    monkeypatch.setenv("RTANALYZER_CALIBRATION_DIR", str(tmp_path / "cal"))


def _menu_action(window, name):
    window.calibration_menu.aboutToShow.emit()  # the menu reads the folder afresh when it opens
    return next(a for a in window.calibration_menu.actions() if a.objectName() == name)


def _exciter_truth(window) -> float:
    return window.runner.engine.source.truth()["exciter"]["sideband_suppression_db"][0]


def test_choosing_a_passband_profile_corrects_the_live_figure_and_is_remembered(qtbot):
    _receiver_profile(TILTED)
    window = open_window(qtbot, SessionConfig(source="sim", signal=Tone(1000.0, -6.0), knobs=TILTED))
    exciter = _exciter_truth(window)
    qtbot.waitUntil(lambda: shown(window, "sideband") is not None, timeout=10_000)
    # Uncorrected, the receiver's slope shows: the figure is off by more than a dB.
    qtbot.waitUntil(lambda: abs(shown(window, "sideband") - exciter) > 1.0, timeout=5_000)
    act = _menu_action(window, "cal_passband_rx")
    assert act.isEnabled() and not act.isChecked()
    act.trigger()
    qtbot.waitUntil(lambda: window.runner.engine is not None and window.runner.engine.calibration.names == ["rx"],
                    timeout=10_000)
    qtbot.waitUntil(lambda: shown(window, "sideband") is not None
                    and abs(shown(window, "sideband") - exciter) <= TOLERANCE_DB, timeout=10_000)
    label = window.statusBar().findChild(type(window.rate_label), "calibration_status")
    assert label.text() == "calibration: rx"
    assert window.last_readout.result["calibration"] == ["rx"]
    # The markers stay on the drawn (uncorrected) trace; the labels carry the corrected figures.
    import numpy as np

    got = {}

    def corrected_frame() -> bool:
        frame = window.last_frame
        result = frame.readout.result if frame is not None else None
        if result and result.get("calibration") == ["rx"] and result.get("points") and frame.level_dbfs is not None:
            got["frame"], got["result"] = frame, result
            return True
        return False

    qtbot.waitUntil(corrected_frame, timeout=5_000)
    frame = got["frame"]
    point = got["result"]["points"][0]
    unwanted = next(m for m in frame.markers if m.role == "unwanted")
    near = np.abs(frame.frequencies_hz - unwanted.frequency_hz) < 30.0
    assert unwanted.level_dbfs == pytest.approx(float(frame.level_dbfs[near].max()), abs=0.01)
    assert f"{point['unwanted_dbfs']:.1f}".replace("-", "\u2212") in unwanted.label
    assert abs(unwanted.level_dbfs - point["unwanted_dbfs"]) > 0.5  # the correction is visible in the label
    window.close()
    from rtanalyzer.gui.settings import WindowSettings

    assert WindowSettings().get("calibration/profiles") == ["rx"]
    again = open_window(qtbot)
    assert again.config.calibration == ("rx",)
    assert _menu_action(again, "cal_passband_rx").isChecked()
    _menu_action(again, "cal_passband_none").trigger()
    qtbot.waitUntil(lambda: again.runner.engine is not None and again.runner.engine.calibration.names == [],
                    timeout=10_000)


def test_a_profile_at_another_rate_cannot_be_chosen(qtbot):
    _receiver_profile(TILTED)
    window = open_window(qtbot, SessionConfig(source="sim", signal=Tone(1000.0, -6.0), rate_hz=96_000))
    act = _menu_action(window, "cal_passband_rx")
    assert not act.isEnabled() and "made at 48000 Hz" in act.text()
