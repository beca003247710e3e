"""The Capture choice follows a measurement that always reads the stereo pair (Xvfb, as test_gui_window.py).

The 90° network measurement (``quadrature``) reads left + j·right whatever the user chose
(its plugin's ``view`` is "stereo"; ``live/session.py::build_engine``). The panel shows that and
locks the list, keeps the user's own choice aside, and gives it back for another measurement;
the saved settings keep the user's choice, never the forced stereo pair.
"""

from __future__ import annotations

from test_gui_window import open_window, qapp, virtual_display  # noqa: F401

from rtanalyzer.generator.signals import Tone  # noqa: E402
from rtanalyzer.live.session import SessionConfig  # noqa: E402


def _choose(combo, data):
    combo.setCurrentIndex(combo.findData(data))


def test_the_network_measurement_shows_the_stereo_capture_and_gives_the_choice_back(qtbot):
    from rtanalyzer.gui.controls import STEREO_NAME, ControlsPanel
    from rtanalyzer.measurements.registry import get

    assert get("quadrature").view == "stereo"  # the plugin's own statement of what it reads
    panel = ControlsPanel()
    qtbot.addWidget(panel)
    said = []
    panel.changed.connect(said.append)
    capture = panel.input_view
    _choose(capture, "2")
    assert said == ["view"] and panel.input_choice() == (False, 2)
    _choose(panel.measurement, "quadrature")
    assert said == ["view", "measurement"]  # the forced stereo pair is not a new user choice
    assert capture.currentText() == STEREO_NAME and capture.currentData() == "stereo"
    assert not capture.isEnabled()
    assert panel.input_choice() == (False, 2)
    _choose(panel.measurement, "twotone")
    assert capture.isEnabled() and capture.currentData() == "2" and capture.findData("stereo") < 0
    assert said == ["view", "measurement", "measurement"]
    # a session shown by the window (set_state) that is the network: stereo, the user's I/Q kept aside
    panel.set_state(source="sim", rate=48000, file=None, loop=False, carrier_hz=None, carrier_default=4000.0,
                    wanted=None, iq=True, channel=None, tones=(), measurement="quadrature", averages=4,
                    muted=False)
    assert capture.currentData() == "stereo" and not capture.isEnabled()
    assert panel.input_choice() == (True, None)
    panel.set_state(source="sim", rate=48000, file=None, loop=False, carrier_hz=None, carrier_default=4000.0,
                    wanted=None, iq=False, channel=2, tones=(), measurement="sideband", averages=4, muted=False)
    assert capture.currentData() == "2" and capture.isEnabled()
    assert said == ["view", "measurement", "measurement"]  # set_state says nothing


def test_the_saved_capture_choice_is_the_users_not_the_forced_stereo_pair(qtbot):
    from rtanalyzer.gui.settings import WindowSettings

    window = open_window(qtbot, SessionConfig(source="sim", signal=Tone(1000.0, -6.0)))
    controls = window.controls
    assert controls.input_view.currentData() == "1" and not window.runner.engine.iq  # real, left channel
    _choose(controls.measurement, "quadrature")
    qtbot.waitUntil(lambda: window.runner.engine is not None
                    and window.runner.engine.measurement.name == "quadrature", timeout=10_000)
    assert controls.input_view.currentData() == "stereo" and not controls.input_view.isEnabled()
    assert window.runner.engine.iq  # what the measurement reads: left + j·right
    window.save_settings()
    saved = WindowSettings()
    assert saved.get("plan/iq") is False and saved.get("plan/channel") in (None, 1)  # not the stereo pair
    _choose(controls.measurement, "sideband")
    qtbot.waitUntil(lambda: window.runner.engine is not None
                    and window.runner.engine.measurement.name == "sideband", timeout=10_000)
    assert controls.input_view.currentData() == "1" and controls.input_view.isEnabled()
    assert not window.runner.engine.iq and not window.config.iq
