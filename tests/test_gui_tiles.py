"""The main window's three large tiles and the spectrum's markers, per measurement (Xvfb).

For a 90° network (``quadrature``) the tiles show the worst suppression the network allows in
the band, the phase error of the strongest tone (µs beside it) and the Q/I amplitude ratio; the
figures must be the readout's JSON figures, a figure under the noise a bound. The texts of the
tiles and meters must fit them at the window's first size (1600×1000).
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest

from test_gui_window import open_window, qapp, virtual_display  # noqa: F401

from rtanalyzer.generator.signals import Multitone, Tone  # noqa: E402
from rtanalyzer.live.engine import Readout  # noqa: E402
from rtanalyzer.live.session import SessionConfig  # noqa: E402

MINUS = "\u2212"
NETWORK_TONES = Multitone.spread(300.0, 3000.0, 16, -6.0)


def number(text: str) -> float:
    return float(text.replace(MINUS, "-").replace("≥", "").replace("≤", "").replace("°", "").strip())


def network_point(f: float, diff: float, ratio: float, supp: float, level: float = -30.0, bound: bool = False,
                  unc: float = 0.0003) -> dict:
    """A point as ``QuadratureResult.to_json`` writes it."""
    return {"frequency_hz": f, "phase_difference_deg": diff, "phase_error_deg": abs(diff) - 90.0,
            "amplitude_ratio_db": ratio, "time_offset_us": diff / (360.0 * f) * 1e6,
            "predicted_suppression_db": supp, "predicted_suppression_is_bound": bound,
            "left_dbfs": level, "right_dbfs": level + ratio, "phase_uncertainty_deg": unc,
            "amplitude_uncertainty_db": 4e-5, "span_s": 0.34, "status": "quadrature"}


def network_result(points: list[dict], band=(300.0, 3000.0), floor: float = -140.0) -> dict:
    inside = [p for p in points if band[0] <= p["frequency_hz"] <= band[1]]
    worst = min(points, key=lambda p: p["predicted_suppression_db"])
    in_band = min(inside, key=lambda p: p["predicted_suppression_db"]) if inside else None
    return {
        "measurement": "quadrature", "signal": "I/Q", "sample_rate_hz": 48000.0, "points": points,
        "worst_predicted_suppression_db": worst["predicted_suppression_db"],
        "worst_frequency_hz": worst["frequency_hz"],
        "worst_is_lower_bound": worst["predicted_suppression_is_bound"],
        "band": {"low_hz": band[0], "high_hz": band[1], "points": len(inside),
                 "worst_predicted_suppression_db": in_band["predicted_suppression_db"] if in_band else None,
                 "worst_frequency_hz": in_band["frequency_hz"] if in_band else None,
                 "worst_is_lower_bound": in_band["predicted_suppression_is_bound"] if in_band else None},
        "noise_floor_dbfs": floor, "analysis_bandwidth_hz": 5.9, "clipped": False, "calibration": [],
        "warnings": [],
    }


def fake_readout(measurement: str, result: dict | None, channels: int = 1, peak: float = -6.0,
                 rms: float = -18.0, clipped: int = 0) -> Readout:
    levels = {"peak_dbfs": [peak] * channels, "rms_dbfs": [rms] * channels, "clip": [bool(clipped)] * channels,
              "clipped_samples": [clipped] * channels}
    return Readout(measurement, time.monotonic(), 0, result, None, levels,
                   {"input_overflows": 12, "output_underflows": 3, "dropped_blocks": 1234}, "running")


def paused_window(qtbot, config: SessionConfig | None = None):
    """A window whose session is paused: the readouts the test hands it are the only ones."""
    window = open_window(qtbot, config)
    window.set_paused(True)
    qtbot.wait(300)  # a readout already on its way is drawn before the test's own
    return window


def fits(label) -> bool:
    """Is the label's whole text inside it (wrapped lines within its height, one line within its width)?"""
    from PyQt6.QtCore import QRect, Qt

    metrics = label.fontMetrics()
    room = label.contentsRect()
    if label.wordWrap():
        needed = metrics.boundingRect(QRect(0, 0, room.width(), 100_000), int(Qt.TextFlag.TextWordWrap), label.text())
        return needed.height() <= room.height() and needed.width() <= room.width()
    return metrics.horizontalAdvance(label.text()) <= room.width()


def not_fitting(window) -> list[str]:
    """The texts of the tiles and meters that do not fit (empty when all do)."""
    bad = []
    for tile in window.tiles.values():
        for label in (tile.title_label, tile.value_label, tile.unit_label, tile.change_label, tile.detail_label):
            if label.text() and not fits(label):
                bad.append(label.text())
    for _, numbers, _ in window.meters.rows:
        if not fits(numbers):
            bad.append(numbers.text())
    return bad


def assert_all_fit(qtbot, window) -> None:
    """Once the window has laid out the newest texts (a busy GUI thread may take a moment), they fit."""
    try:
        qtbot.waitUntil(lambda: not not_fitting(window), timeout=3000)
    except Exception:
        raise AssertionError(f"texts cut: {not_fitting(window)}") from None


# ---- the tile widget ------------------------------------------------------------------------------


def test_a_tile_turns_to_another_figure_and_judges_an_error_by_its_distance_from_zero(qapp):
    from rtanalyzer.gui.widgets import ReadoutTile, parse_readout

    tile = ReadoutTile("x", "Carrier suppression", "dBc", True)
    tile.configure("Phase error, strongest tone", "°", "nearer_zero", 2, True)
    assert tile.title_label.text() == "Phase error, strongest tone" and tile.unit_label.text() == ""
    tile.set_figure(0.0, -2.0, subject=1000.0)
    assert tile.value_label.text() == f"{MINUS}2.00°" and parse_readout(tile.value_label.text()) == -2.0
    tile.set_figure(1.0, -1.5, subject=1000.0)  # toward zero: better, though the value rose
    assert tile.change_label.text() == "▲ 0.50° better"
    tile.set_figure(2.0, -2.5, subject=1000.0)
    assert tile.change_label.text() == "▼ 1.00° worse"
    tile.set_figure(3.0, 1.0, subject=1392.0)  # another tone (a sweep's next step): no direction yet
    assert tile.change_label.text() == "" and tile.value_label.text() == "+1.00°"
    tile.set_figure(3.5, 0.3, "≤", subject=1392.0)  # a bound has no sign and no direction
    assert tile.value_label.text() == "≤ 0.30°" and tile.change_label.text() == ""
    tile.configure("Carrier suppression", "dBc", "larger", 1, False)  # and back
    assert tile.unit_label.text() == "dBc" and tile.value_label.text() == "—"
    tile.set_figure(4.0, 41.26)
    assert tile.value_label.text() == "41.3"
    with pytest.raises(ValueError):
        tile.configure("x", "dB", "sideways")


# ---- the network's markers --------------------------------------------------------------------------


def test_a_network_tone_is_marked_where_it_turns_with_its_error_and_its_image_below_by_the_suppression():
    from rtanalyzer.gui.frames import markers_of, pattern_tones, quadrature_components

    lags = network_point(1000.0, 88.0, 0.35, 31.0)  # Q lags I: I + jQ turns forward, at +1000 Hz
    leads = network_point(1500.0, -88.0, 0.35, 31.0)  # Q leads I: at -1500 Hz
    markers = markers_of(network_result([lags, leads]))
    wanted = [m for m in markers if m.role == "wanted"]
    images = [m for m in markers if m.role == "unwanted"]
    assert [m.frequency_hz for m in wanted] == [1000.0, -1500.0]
    assert [m.frequency_hz for m in images] == [-1000.0, 1500.0]
    assert wanted[0].label == f"1000 Hz · error {MINUS}2.00°"
    # the tone's level in I + jQ: (a + b)/2 for an exact quadrature, here a hair below
    a, b = 10 ** (-30.0 / 20), 10 ** (-29.65 / 20)
    assert wanted[0].level_dbfs == pytest.approx(20 * math.log10((a + b) / 2), abs=0.01)
    # the image sits the suppression below (the image-rejection relation the measurement uses)
    f, tone_db, image_db = quadrature_components(lags)
    assert images[0].level_dbfs == pytest.approx(tone_db - 31.0)
    g, eps = 10 ** (0.35 / 20), math.radians(2.0)
    relation = 10 * math.log10((1 + 2 * g * math.cos(eps) + g * g) / (1 - 2 * g * math.cos(eps) + g * g))
    assert tone_db - image_db == pytest.approx(relation, abs=0.01)
    assert images[0].detected and images[0].label == "image\n31.0 dB down"
    assert pattern_tones(network_result([lags, leads])) == (1000.0, -1500.0)


def test_many_network_tones_name_only_the_worst_in_the_band_and_a_bound_is_said_as_one():
    from rtanalyzer.gui.frames import markers_of

    points = [network_point(f, 88.0, 0.3, 40.0 - i) for i, f in enumerate((100.0, 500.0, 1000.0, 2000.0))]
    points.append(network_point(4000.0, 80.0, 1.0, 20.0))  # worse, but outside the band
    markers = markers_of(network_result(points))
    named = [m for m in markers if m.label]
    assert [m.frequency_hz for m in named] == [2000.0, -2000.0]  # the band's worst, tone and image
    # errors within the noise: at most, never a number; the image a hollow bound
    hidden = network_point(1000.0, 90.0004, 0.0001, 71.33, bound=True, unc=0.01)
    tone, image = markers_of(network_result([hidden]))
    assert tone.label == "1000 Hz · error ≤ 0.04°"  # |0.0004| + 3 × 0.01, rounded up
    assert not image.detected and image.label == "image\n≥ 71.3 dB down"
    # measured errors whose image is under the spectrum's noise: the figure, said to be predicted
    quiet = network_point(1000.0, 90.05, 0.001, 61.2)
    _, image = markers_of(network_result([quiet], floor=-80.0))
    assert not image.detected and image.label == "image under the noise\npredicted 61.2 dB down"
    assert image.level_dbfs == -80.0  # drawn hollow on the noise, not lost below the plot


def test_the_two_tone_markers_are_what_its_json_gives():
    # The two-tone JSON names the tones and the IMD products; it carries no carrier and no
    # unwanted sidebands (TwoToneResult.to_json), so the spectrum cannot mark those.
    from rtanalyzer.gui.frames import markers_of

    result = {"measurement": "twotone", "tone_hz": [4707.3, 5907.3], "tone_dbfs": [-13.9, -13.9], "pep_dbfs": -7.9,
              "imd": [{"order": 3, "lower_hz": 3507.3, "lower_dbfs": -40.7, "lower_dbc": -26.7, "lower_db_pep": -32.8,
                       "lower_detected": True, "upper_hz": 7107.3, "upper_dbfs": None, "upper_dbc": -70.0,
                       "upper_db_pep": -76.0, "upper_detected": False}]}
    markers = markers_of(result)
    assert [(m.role, m.frequency_hz, m.detected) for m in markers] == [
        ("wanted", 4707.3, True), ("wanted", 5907.3, True), ("imd", 3507.3, True), ("imd", 7107.3, False)]
    assert markers[3].label == f"IMD3\n≤ {MINUS}70.0 dBc" and markers[3].level_dbfs == pytest.approx(-7.9 - 76.0)


def test_the_phase_tiles_show_the_strongest_tone_and_of_equally_strong_ones_the_worst():
    from rtanalyzer.gui.window import equal_tones, shown_tone

    strong = network_point(1000.0, 88.0, 0.3, 40.0, level=-20.0)
    weaker_and_worse = network_point(500.0, 80.0, 0.3, 20.0, level=-40.0)
    assert shown_tone([weaker_and_worse, strong]) is strong
    a, b = network_point(500.0, 88.5, 0.3, 35.0, level=-30.0), network_point(1000.0, 88.0, 0.3, 31.0, level=-30.2)
    assert shown_tone([a, b]) is b and len(equal_tones([a, b])) == 2  # a multitone: no hopping between equals
    assert shown_tone([]) is None


# ---- the window, a network measured live -----------------------------------------------------------------


def test_the_network_fills_the_three_tiles_with_its_readouts_figures_and_frames_its_tones(qtbot):
    from rtanalyzer.gui.window import shown_tone

    window = open_window(qtbot, SessionConfig(source="sim", signal=NETWORK_TONES, measurement="quadrature"),
                         explicit=frozenset({"measurement"}))
    tiles = window.tiles
    qtbot.waitUntil(lambda: window.runner.engine.measurement.name == "quadrature" and tiles["imd"].value is not None
                    and window.last_frame is not None and len(window.last_frame.markers) > 0, timeout=15_000)
    assert tiles["sideband"].title_label.text() == "Predicted suppression"
    assert tiles["carrier"].title_label.text() == "Phase error, worst tone"  # of 16 equally strong tones
    assert tiles["imd"].title_label.text() == "Amplitude ratio Q/I" and tiles["imd"].unit_label.text() == "dB"
    window.set_paused(True)
    qtbot.wait(300)
    r = window.last_readout.result  # the readout the tiles show now
    band = r["band"]
    assert number(tiles["sideband"].value_label.text()) == pytest.approx(band["worst_predicted_suppression_db"],
                                                                          abs=0.051)
    assert f"at {band['worst_frequency_hz']:.0f}\u00a0Hz" in tiles["sideband"].detail_label.text()
    assert not tiles["sideband"].value_label.text().startswith("≥")  # the simulated network's errors are clear
    p = shown_tone(r["points"])
    assert p["frequency_hz"] == band["worst_frequency_hz"]  # equal tones: the one the suppression names
    assert number(tiles["carrier"].value_label.text()) == pytest.approx(p["phase_error_deg"], abs=0.0051)
    us = p["phase_error_deg"] / (360.0 * p["frequency_hz"]) * 1e6
    detail = tiles["carrier"].detail_label.text()
    assert number(detail.split("\u00a0µs")[0].lstrip("= +")) == pytest.approx(us, abs=0.0051)
    assert f"I leads Q by {abs(p['phase_difference_deg']):.2f}°" in detail
    assert number(tiles["imd"].value_label.text()) == pytest.approx(p["amplitude_ratio_db"], abs=0.0051)
    assert tiles["imd"].value_label.text().startswith("+")  # Q above I, said with its sign
    # the spectrum: every tone and its image, the worst named; framed to the tones (both sides of 0 Hz)
    frame = window.last_frame
    wanted = [m for m in frame.markers if m.role == "wanted"]
    assert len(wanted) == len(r["points"]) == 16
    named = [m for m in frame.markers if m.label]
    assert [m.role for m in named] == ["wanted", "unwanted"]
    assert named[0].label.startswith(f"{band['worst_frequency_hz']:.0f} Hz · error ")
    assert f"{band['worst_predicted_suppression_db']:.1f} dB down" in named[1].label
    for m in wanted:  # on the trace's peak
        near = np.abs(frame.frequencies_hz - m.frequency_hz) < 30.0
        assert m.level_dbfs == pytest.approx(float(frame.level_dbfs[near].max()), abs=0.01)
    window.fit_spectrum()
    x = window.spectrum.rect
    assert x.left < -3000.0 and 3000.0 < x.right < 6000.0
    assert_all_fit(qtbot, window)
    # the envelope-versus-drive pattern has the network's tones
    assert frame.drive is not None and frame.drive.size > 100
    # another measurement: the tiles are the exciter's again
    window.set_paused(False)
    combo = window.controls.measurement
    combo.setCurrentIndex(combo.findData("sideband"))
    qtbot.waitUntil(lambda: window.runner.engine is not None and window.runner.engine.measurement.name == "sideband"
                    and tiles["sideband"].value is not None, timeout=15_000)
    assert tiles["sideband"].title_label.text() == "Opposite-sideband suppression"
    assert tiles["carrier"].title_label.text() == "Carrier suppression" and tiles["carrier"].unit_label.text() == "dBc"
    assert tiles["imd"].unit_label.text() == "dB PEP"


def test_network_figures_under_the_noise_are_bounds_and_no_tone_in_the_band_is_said(qtbot):
    window = paused_window(qtbot)
    tiles = window.tiles
    hidden = network_point(1000.0, 90.0004, 0.0001, 71.339, bound=True, unc=0.01)
    window.runner.readout.emit(fake_readout("quadrature", network_result([hidden]), channels=2))
    assert tiles["sideband"].value_label.text() == "≥ 71.3"  # rounded down: still a lower bound
    assert "errors under the noise" in tiles["sideband"].detail_label.text()
    assert tiles["carrier"].value_label.text() == "≤ 0.04°"  # |0.0004| + 3 × 0.01, rounded up
    assert "under the noise" in tiles["carrier"].detail_label.text()
    assert tiles["imd"].value_label.text().startswith("≤ ")
    outside = network_point(5000.0, 88.0, 0.2, 33.0)
    window.runner.readout.emit(fake_readout("quadrature", network_result([outside]), channels=2))
    assert number(tiles["sideband"].value_label.text()) == 33.0
    assert tiles["sideband"].detail_label.text().startswith("no tone in 300–3000")
    assert_all_fit(qtbot, window)


# ---- texts that fit ---------------------------------------------------------------------------------------


def test_the_longest_texts_of_the_tiles_and_meters_fit_at_the_first_size(qtbot):
    window = paused_window(qtbot, SessionConfig(source="sim", signal=Tone(1000.0, -6.0)))
    assert window.width() <= 1600 and window.height() <= 1000
    points = [{"tone_hz": f, "wanted_hz": 4000.0 + f, "unwanted_hz": 4000.0 - f, "wanted_dbfs": -30.8,
               "unwanted_dbfs": -30.8 - s, "unwanted_detected": True, "sideband_suppression_db": s}
              for f, s in ((300.0, 140.0), (1392.48, 131.2), (3000.0, 140.0))]
    sideband = {"measurement": "sideband", "points": points, "worst_sideband_suppression_db": 131.2,
                "worst_is_lower_bound": False, "band_hz": [300.0, 3000.0],
                "worst_in_band": {"sideband_suppression_db": 131.2, "is_lower_bound": False},
                "carrier_hz": 4007.3, "carrier_detected": True, "carrier_dbfs": -112.5,
                "carrier_suppression_db": 81.7, "noise_floor_dbfs": -140.0, "warnings": []}
    window.runner.readout.emit(fake_readout("sideband", sideband, channels=2, peak=-100.5, rms=-118.0, clipped=1234))
    qtbot.wait(200)
    assert "at 1392\u00a0Hz · unwanted" in window.tiles["sideband"].detail_label.text()
    assert window.meters.rows[0][2].toolTip() == "1234 clipped samples (held)"
    assert_all_fit(qtbot, window)
    undetected = dict(sideband, carrier_detected=False, carrier_dbfs=None)
    window.runner.readout.emit(fake_readout("sideband", undetected, channels=2))
    qtbot.wait(200)
    assert window.tiles["carrier"].detail_label.text() == "under the noise near 4007\u00a0Hz"
    assert_all_fit(qtbot, window)
    twotone = {"measurement": "twotone", "tone_hz": [4707.3, 5907.3], "tone_dbfs": [-13.9, -13.9], "pep_dbfs": -107.9,
               "imd": [{"order": 13, "lower_hz": 1.0, "lower_dbfs": -140.0, "lower_dbc": -126.7, "lower_db_pep": -132.8,
                        "lower_detected": True}],
               "worst_imd_order": 13, "worst_imd_db_pep": -132.8, "worst_imd_is_bound": False, "warnings": []}
    window.runner.readout.emit(fake_readout("twotone", twotone, channels=2))
    qtbot.wait(200)
    assert window.tiles["imd"].detail_label.text().startswith("IMD13")
    assert_all_fit(qtbot, window)
    sweep_step = network_result([network_point(1392.48, -91.8765, -0.3512, 31.72, level=-106.0)])
    window.runner.readout.emit(fake_readout("quadrature", sweep_step, channels=2))
    qtbot.wait(200)
    assert "Q leads I" in window.tiles["carrier"].detail_label.text()
    assert window.tiles["carrier"].title_label.text() == "Phase error, strongest tone"  # the one tone
    assert_all_fit(qtbot, window)
