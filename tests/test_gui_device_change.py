"""The window on a sound card (a fake PortAudio): the test signal changes without reopening the card.

A tone change is handed to the source's producer thread (the session, engine and streams stay);
only a change of output channel count (a quadrature pair needs two) reopens the card. Runs on
the virtual screen of ``test_gui_window`` and the fake streams of ``test_soundcard``.
"""

from __future__ import annotations

# Without Qt, importing the window's tests skips this module too (and fails under CI, as there).
from test_gui_window import open_window, qapp, virtual_display  # noqa: F401  (fixtures)
from test_soundcard import DEVICES, Factory, FakeSd, PumpedStream

from rtanalyzer.generator.signals import Quadrature, Tone
from rtanalyzer.live.session import SessionConfig
from rtanalyzer.sources import soundcard, soundcard_devices
from rtanalyzer.sources.soundcard import SoundCardSource


def _card_window(qtbot, monkeypatch):
    """The window on the fake sound card, playing a 1 kHz tone; (window, stream factory)."""
    sd = FakeSd(DEVICES, default=(2, 2))
    monkeypatch.setattr(soundcard_devices, "load_sounddevice", lambda: sd)
    factory = Factory(PumpedStream)
    monkeypatch.setattr(soundcard, "_default_factory", factory)
    config = SessionConfig(source="device", signal=Tone(1000.0, -6.0), input_device="pulse", output_device="pulse")
    return open_window(qtbot, config), factory


def test_a_tone_change_on_the_sound_card_is_live_and_a_quadrature_pair_reopens_it(qtbot, monkeypatch):
    window, factory = _card_window(qtbot, monkeypatch)
    engine = window.runner.engine
    source = engine.source
    assert isinstance(source, SoundCardSource) and source.renderer.signal == Tone(1000.0, -6.0)
    opened = len(factory.streams)

    window.controls.gen_fields["tone_hz"][0].setValue(1500.0)
    qtbot.waitUntil(lambda: source.renderer.signal == Tone(1500.0, -6.0), timeout=5000)
    assert window.runner.engine is engine and len(factory.streams) == opened  # nothing reopened
    qtbot.waitUntil(lambda: (source.drive_at(source.ring.written - 1) or None) is not None
                    and source.drive_at(source.ring.written - 1).tones_hz == (1500.0,), timeout=5000)

    window.set_muted(True)  # live too: the same source, silent from its next callback
    assert source.muted and window.runner.engine is engine
    qtbot.waitUntil(lambda: source.renderer.silent, timeout=5000)
    window.set_muted(False)
    qtbot.waitUntil(lambda: not source.renderer.silent, timeout=5000)
    assert window.runner.engine is engine and len(factory.streams) == opened

    kind = window.controls.kind
    kind.setCurrentIndex(kind.findData("quadrature"))  # two output channels: the card is reopened
    qtbot.waitUntil(lambda: window.runner.engine is not None and window.runner.engine is not engine,
                    timeout=10_000)
    fresh = window.runner.engine.source
    assert isinstance(fresh.renderer.signal, Quadrature) and fresh.output_channels == 2
    assert factory.latest("output").channels == 2


def test_a_card_reopened_while_muted_stays_silent(qtbot, monkeypatch):
    # Safety: reopening the card (a quadrature pair needs two output channels) while the window is
    # muted must not start the exciter's drive again.
    window, _ = _card_window(qtbot, monkeypatch)
    engine = window.runner.engine
    window.set_muted(True)
    kind = window.controls.kind
    kind.setCurrentIndex(kind.findData("quadrature"))
    qtbot.waitUntil(lambda: window.runner.engine is not None and window.runner.engine is not engine,
                    timeout=10_000)
    fresh = window.runner.engine.source
    assert fresh.muted
    qtbot.wait(300)  # output callbacks run
    assert fresh.renderer.silent
