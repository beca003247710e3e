"""The network band view on the simulated 90° network, on a virtual screen (Xvfb).

The points shown are checked against the network's computed phases (``dsp.allpass``) and the
bench's trimmers; the readouts' degrees and microseconds against each other (µs = φ/(360·f)·1e6).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from test_gui_window import open_window, qapp, virtual_display  # noqa: F401

from rtanalyzer.dsp.allpass import pair_difference_rad  # noqa: E402
from rtanalyzer.generator.signals import Multitone, Sweep  # noqa: E402
from rtanalyzer.live.session import SessionConfig  # noqa: E402
from rtanalyzer.sources.bench.knobs import BenchKnobs  # noqa: E402
from rtanalyzer.sources.bench.network import EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN  # noqa: E402

TONES = (400.0, 665.0, 1000.0, 1800.0, 2800.0)
PHASE_TOLERANCE_DEG = 0.05


def expected_error_deg(f: float, knobs: BenchKnobs) -> float:
    """The example pair's departure from 90°, less the phase trimmer (which turns the Q path)."""
    pair = float(np.degrees(pair_difference_rad(f, EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN)))
    return pair - knobs.phase_trim_deg - 90.0


def number(text: str) -> float:
    return float(text.replace("\u2212", "-"))


def choose_network(qtbot, window):
    combo = window.controls.measurement
    combo.setCurrentIndex(combo.findData("quadrature"))
    qtbot.waitUntil(lambda: window.runner.engine is not None
                    and window.runner.engine.measurement.name == "quadrature", timeout=10_000)
    return window.band_view


def test_choosing_the_network_shows_its_points_worst_in_band_and_degrees_with_microseconds(qtbot):
    window = open_window(qtbot, SessionConfig(source="sim", signal=Multitone(TONES, -6.0)))
    assert window.controls.measurement.itemText(window.controls.measurement.findData("quadrature")) \
        == "90° network (stereo)"
    view = choose_network(qtbot, window)
    engine = window.runner.engine
    assert engine.iq and engine.source.channels == 2  # left + j·right, from the simulated network
    qtbot.waitUntil(lambda: view.isVisible() and len(view.points) == len(TONES), timeout=10_000)
    knobs = window.config.knobs
    for p in view.sorted_points():
        f = p["frequency_hz"]
        assert p["phase_error_deg"] == pytest.approx(expected_error_deg(f, knobs), abs=PHASE_TOLERANCE_DEG)
        assert p["amplitude_ratio_db"] == pytest.approx(knobs.amplitude_trim_db, abs=0.01)
    # the worst in-band point, stated in words where it is
    worst = min(view.sorted_points(), key=lambda p: p["predicted_suppression_db"])
    text = view.worst_text.text()
    assert re.fullmatch(r"worst \d+\.\d dB at \d+ Hz", text)
    assert text == f"worst {worst['predicted_suppression_db']:.1f} dB at {worst['frequency_hz']:.0f} Hz"
    # degrees and µs side by side agree (the strongest tone, then a chosen one)
    chosen = view.sorted_points()[1]["frequency_hz"]
    for choice in (None, chosen):
        view.select_tone(choice)
        p = view.shown_point()
        deg, us = number(view.deg_value.text()), number(view.us_value.text())
        assert deg == pytest.approx(p["phase_difference_deg"], abs=0.005)
        assert us == pytest.approx(deg / (360.0 * p["frequency_hz"]) * 1e6, abs=0.05 + 0.005 / (360 * 400) * 1e6)
    assert f"at {chosen:.1f} Hz" in view.tone_detail.text()
    # the diagnosis speaks about both trimmers
    advice = view.advice_label.text()
    assert "amplitude:" in advice and "phase" in advice
    # a narrower band moves the worst point inside it
    view.band_low.setValue(1500.0)
    assert view.worst["frequency_hz"] >= 1500.0
    assert view.worst_text.text().endswith(f"at {view.worst['frequency_hz']:.0f} Hz")
    qtbot.wait(400)  # the plots redraw
    view.grab().save("/tmp/gui_band.png", "PNG")
    window.grab().save("/tmp/gui_band_window.png", "PNG")


def test_a_trim_turned_on_the_bench_moves_the_points(qtbot):
    window = open_window(qtbot, SessionConfig(source="sim", signal=Multitone(TONES, -6.0)))
    view = choose_network(qtbot, window)
    qtbot.waitUntil(lambda: len(view.points) == len(TONES), timeout=10_000)
    window.controls.knobs["phase_trim_deg"].spin.setValue(-0.5)
    knobs = window.config.knobs
    f = view.sorted_points()[2]["frequency_hz"]
    assert abs(view.point_near(f)["phase_error_deg"] - expected_error_deg(f, knobs)) > 1.0  # before: 1.2° trim
    qtbot.waitUntil(lambda: abs(view.point_near(f)["phase_error_deg"] - expected_error_deg(f, knobs))
                    <= PHASE_TOLERANCE_DEG, timeout=5000)
    assert len(view.points) == len(TONES)  # the same tones, measured again


def test_a_sweep_shows_the_progress_advancing(qtbot):
    sweep = Sweep.log_range(300.0, 3000.0, 6, -6.0, dwell_s=0.3, settle_s=0.05)
    window = open_window(qtbot, SessionConfig(source="sim", signal=sweep, measurement="quadrature"),
                         explicit=frozenset({"measurement"}))
    view = window.band_view
    qtbot.waitUntil(lambda: view.isVisible() and view.progress.isVisible(), timeout=10_000)
    assert view.progress.maximum() == 6
    seen = set()

    def advanced():
        seen.add(view.progress.value())
        return len(seen) >= 3

    qtbot.waitUntil(advanced, timeout=6000)
    assert seen <= set(range(1, 7))
    assert window.sweep_progress.isVisible() and window.sweep_progress.maximum() == 6
    assert "sweep step" in view.progress.format()
    # each step's point lands on the curve, within the phase tolerance
    qtbot.waitUntil(lambda: len(view.points) >= 3, timeout=6000)
    for p in view.sorted_points():
        assert p["phase_error_deg"] == pytest.approx(expected_error_deg(p["frequency_hz"], window.config.knobs),
                                                     abs=PHASE_TOLERANCE_DEG)
